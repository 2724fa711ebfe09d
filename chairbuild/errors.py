"""Typed exceptions of chairbuild.

Every exception that chairbuild or its energy models raise on misuse derives from
:class:`ChairbuildError`, so a caller can catch one class. Failures inside a batch
(one conformer that does not converge, one stereoisomer that cannot be typed) are
*not* raised: they are recorded as a status and a message on the conformer record.
"""

from __future__ import annotations

__all__ = [
    "ChairbuildError",
    "InputError",
    "StereoError",
    "ForceFieldError",
    "ConvergenceError",
    "OptionError",
    "OutputError",
]


class ChairbuildError(Exception):
    """Base class of every exception raised by chairbuild and its energy models."""


class InputError(ChairbuildError):
    """The molecule given could not be read or is not something chairbuild analyses."""


class StereoError(InputError):
    """Stereochemistry is undefined where it decides between diastereomers."""


class ForceFieldError(ChairbuildError):
    """An energy model cannot describe the molecule (untypable atom, missing parameter)."""


class ConvergenceError(ChairbuildError):
    """An iterative calculation (SCF, minimisation) did not converge."""


class OptionError(ChairbuildError):
    """An option has an unknown name or a value outside its allowed range."""


class OutputError(ChairbuildError):
    """A result file cannot be written where it was asked for."""
