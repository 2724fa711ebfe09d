"""How a message names an option: in Python terms for Python, in command-line terms for the CLI.

A message that tells the user what to change names the option through :func:`spell`,
never as literal text. From Python (the default) ``spell("enumerate_stereo", True)`` is
``enumerate_stereo=True``; while the ``chairbuild`` command runs (it enters
:func:`command_line`) the same call gives ``--enumerate-stereo``. The table
:data:`CLI_FLAGS` maps each option of :func:`chairbuild.analyze` to its flag.
"""

from __future__ import annotations

import contextlib
import contextvars
from typing import Any, Iterator

__all__ = ["CLI_FLAGS", "spell", "command_line", "speaking_cli"]

#: Option of :func:`chairbuild.analyze` → command-line flag. ``twist_boats`` is the one
#: inverted flag (``--no-twist-boats`` for ``twist_boats=False``).
CLI_FLAGS: dict[str, str] = {
    "record": "--record",
    "name": "--name",
    "enumerate_stereo": "--enumerate-stereo",
    "temperature": "--temperature",
    "window": "--window",
    "forcefield": "--forcefield",
    "method": "--method",
    "rerank": "--rerank",
    "solvent": "--solvent",
    "solvation_model": "--solvation",
    "free_energy": "--free-energy",
    "max_rotamers": "--max-rotamers",
    "reduced_search": "--reduced-search",
    "twist_boats": "--no-twist-boats",
    "threads": "--threads",
    "progress": "--quiet",
    "overwrite": "--overwrite",
    "stages": "--stage",
    "functional": "--functional",
    "basis": "--basis",
    "dispersion": "--dispersion",
    "dft_solvation_model": "--dft-solvation",
    "cache": "--cache",
    "energy_term": "--energy-term",
    "level_name": "--level-name",
    "max_rmsd": "--max-rmsd",
    "add_thermal_correction": "--add-thermal-correction",
}

#: Boolean options whose flag means the opposite value (``--no-twist-boats``: twist_boats=False).
_INVERTED = {"twist_boats", "progress"}

_CLI: contextvars.ContextVar[bool] = contextvars.ContextVar("chairbuild_cli", default=False)

_MISSING = object()


def speaking_cli() -> bool:
    """True while the ``chairbuild`` command runs."""
    return _CLI.get()


@contextlib.contextmanager
def command_line() -> Iterator[None]:
    """Messages raised inside this block name options as command-line flags."""
    token = _CLI.set(True)
    try:
        yield
    finally:
        _CLI.reset(token)


def spell(name: str, value: Any = _MISSING) -> str:
    """The option ``name`` (with ``value`` when given) as the current interface writes it.

    Examples
    --------
    >>> spell("enumerate_stereo", True)
    'enumerate_stereo=True'
    >>> with command_line():
    ...     spell("enumerate_stereo", True), spell("method", "gfn2"), spell("record")
    ('--enumerate-stereo', '--method gfn2', '--record')
    """
    if not _CLI.get() or name not in CLI_FLAGS:
        return name if value is _MISSING else f"{name}={value!r}"
    flag = CLI_FLAGS[name]
    if value is _MISSING:
        return flag
    if isinstance(value, bool):
        return flag if value != (name in _INVERTED) else f"no {flag}"
    return f"{flag} {value}"
