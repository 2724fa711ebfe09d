"""Batch analysis of many molecules: ``chairbuild batch`` and :func:`analyze_many`.

Modules, in the order a record travels:

* :mod:`~chairbuild.batch.records` reads SMILES files, CSV/TSV tables and multi-record SDF
  into one record per input entry, and computes each record's content key;
* :mod:`~chairbuild.batch.runner` (the driver) submits one Dask task per record, to a local
  cluster or an existing one, and writes every finished molecule to the store;
* :mod:`~chairbuild.batch.sandbox` runs each molecule in a child process of its worker, so
  a crash or a timeout costs that molecule only;
* :mod:`~chairbuild.batch.summary` reduces an ensemble to the figures of the tables;
* :mod:`~chairbuild.batch.store` is the SQLite store and its reader (:func:`open_store`);
* :mod:`~chairbuild.batch.export` writes the CSV/Parquet tables and per-molecule files.

Nothing heavy is imported here.
"""

from __future__ import annotations

__all__ = ["analyze_many", "open_store", "BatchRun", "BatchResult", "RowStatus"]


def __getattr__(name: str):
    if name in ("analyze_many", "BatchRun", "BatchResult"):
        from chairbuild.batch import runner

        return getattr(runner, name)
    if name == "open_store":
        from chairbuild.batch.store import open_store

        return open_store
    if name == "RowStatus":
        from chairbuild.batch.records import RowStatus

        return RowStatus
    raise AttributeError(f"module 'chairbuild.batch' has no attribute {name!r}")
