"""chairbuild: explicit chair and twist-boat conformer ensembles of six-membered rings.

The public entry points are imported lazily so that ``import chairbuild`` does no work
and pulls in no heavy library:

* :func:`chairbuild.analyze` runs the whole pipeline and returns an
  :class:`chairbuild.result.Ensemble` (:func:`chairbuild.analyze_all`: one per
  diastereomer when ``enumerate_stereo=True``);
* :func:`chairbuild.view` shows an ensemble in a notebook;
* :func:`chairbuild.load` reads a saved JSON result back into an ``Ensemble``
  (:func:`chairbuild.load_all` for a file with several, one per diastereomer);
* :func:`chairbuild.reweight` re-ranks a saved result with energies computed elsewhere
  (a CSV file or a folder of quantum-chemistry output files read with cclib);
* :func:`chairbuild.analyze_many` analyses a list or file of molecules through a batch
  store, and :func:`chairbuild.open_store` reads such a store back.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["analyze", "analyze_all", "view", "load", "load_all", "reweight", "analyze_many", "open_store", "__version__"]


def __getattr__(name: str):
    if name == "analyze":
        from chairbuild.pipeline import analyze

        return analyze
    if name == "analyze_all":
        from chairbuild.pipeline import analyze_all

        return analyze_all
    if name == "load":
        from chairbuild.result import load_json

        return load_json
    if name == "load_all":
        from chairbuild.result import load_json_all

        return load_json_all
    if name == "reweight":
        from chairbuild.levels.external import reweight

        return reweight
    if name == "view":
        from chairbuild.viewer import view

        return view
    if name in ("analyze_many", "open_store"):
        from chairbuild import batch

        return getattr(batch, name)
    raise AttributeError(f"module 'chairbuild' has no attribute {name!r}")
