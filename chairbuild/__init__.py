"""chairbuild: explicit chair and twist-boat conformer ensembles of six-membered rings.

The public entry points are imported lazily so that ``import chairbuild`` does no work
and pulls in no heavy library:

* :func:`chairbuild.analyze` runs the whole pipeline and returns an
  :class:`chairbuild.result.Ensemble`;
* :func:`chairbuild.view` shows an ensemble in a notebook.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["analyze", "view", "__version__"]


def __getattr__(name: str):
    if name == "analyze":
        from chairbuild.pipeline import analyze

        return analyze
    if name == "view":
        from chairbuild.viewer import view

        return view
    raise AttributeError(f"module 'chairbuild' has no attribute {name!r}")
