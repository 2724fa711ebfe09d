"""Tables and files written from the batch store (never from worker results directly).

* ``summary.csv`` / ``summary.parquet``: one row per input record, in input order (see
  :func:`summary_frame` for the columns);
* ``families.csv`` / ``families.parquet``: one row per ring-state family of every analysed
  record (:func:`families_frame`);
* on request, one file per analysed molecule in ``molecules/``: ``NNNNN.json`` (the
  :meth:`~chairbuild.result.Ensemble.to_json` contract) or ``NNNNN.sdf`` (every conformer),
  named by the 0-based input index.

Every file is written to a temporary name and moved into place.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path
from typing import Sequence

from chairbuild.errors import OptionError, OutputError
from chairbuild.result import EnergyUnit

__all__ = [
    "summary_frame",
    "families_frame",
    "write_tables",
    "write_molecule_files",
    "TABLE_FORMATS",
    "MOLECULE_FORMATS",
    "TIMING_COLUMNS",
]

TABLE_FORMATS = ("csv", "parquet")
MOLECULE_FORMATS = ("json", "sdf")

#: Columns that depend on the machine and the moment, not on the molecule (left out when
#: comparing two runs, never left out of the table).
TIMING_COLUMNS = ("wall_s", "cpu_s", "peak_rss_mb", "worker", "finished_at")

_RING_FIELDS = (
    ("atoms", "atoms", None),
    ("chair_population", "chair_population", None),
    ("other_population", "other_population", None),
    ("major_family", "major_family", None),
    ("major_population", "major_population", None),
    ("second_family", "second_family", None),
    ("second_population", "second_population", None),
    ("second_delta_g", "second_dG", "energy"),
    ("second_additive", "second_additive", "energy"),
    ("additive_flag", "additive_flag", "bool"),
    ("additive_partial", "additive_partial", "bool"),
)


def _unit(unit) -> EnergyUnit:
    return unit if isinstance(unit, EnergyUnit) else EnergyUnit.parse(unit)


def _conv(unit: EnergyUnit, value):
    return None if value is None else unit.from_kj(float(value))


def summary_frame(reader, unit="kJ/mol"):
    """The summary table of a store, one row per input record in input order.

    Columns: ``index``, ``name``, ``input_smiles``, ``location``, ``status``, ``error``,
    ``smiles`` (canonical, as analysed), ``charge``, ``multiplicity``, ``method``,
    ``n_rings``, ``n_conformers``, ``n_rejected``, ``global_min_shape`` (ring shapes of the
    lowest conformer, ``/``-separated), ``global_min_families``, ``global_min_population``;
    per ring k: ``ring{k}_atoms``, ``ring{k}_chair_population``, ``ring{k}_other_population``
    (twist-boats and other shapes), ``ring{k}_major_family`` and ``_population`` (the most
    populated chair family), ``ring{k}_second_family``, ``_population``, ``_dG_<unit>`` (its
    ΔG above the major one) and ``_additive_<unit>`` (the additive estimate of the same
    difference), ``ring{k}_additive_flag`` (some family of the ring disagrees with the
    additive estimate), ``ring{k}_additive_partial``; then :data:`TIMING_COLUMNS` and
    ``content_key``.
    """
    import pandas as pd

    unit = _unit(unit)
    suffix = unit.name.lower()
    rows = list(reader.rows())
    summaries = [json.loads(r["summary"]) if r["summary"] else None for r in rows]
    n_rings = max((s["n_rings"] for s in summaries if s), default=0)
    records = []
    for row, s in zip(rows, summaries):
        out = {
            "index": row["idx"],
            "name": row["name"],
            "input_smiles": row["input_smiles"],
            "location": row["location"],
            "status": row["status"],
            "error": row["error"],
        }
        for key in ("smiles", "charge", "multiplicity", "method", "n_rings", "n_conformers", "n_rejected",
                    "global_min_shape", "global_min_families", "global_min_population"):
            out[key] = None if s is None else s[key]
        for k in range(n_rings):
            ring = s["rings"][k] if s is not None and k < len(s["rings"]) else None
            for src, name, kind in _RING_FIELDS:
                col = f"ring{k}_{name}" + (f"_{suffix}" if kind == "energy" else "")
                value = None if ring is None else ring[src]
                out[col] = _conv(unit, value) if kind == "energy" else value
        for key in TIMING_COLUMNS:
            out[key] = row[key]
        out["content_key"] = row["content_key"]
        records.append(out)
    df = pd.DataFrame.from_records(records, columns=list(records[0]) if records else None)
    ints = ["index", "charge", "multiplicity", "n_rings", "n_conformers", "n_rejected"]
    bools = [c for c in df.columns if c.endswith(("_additive_flag", "_additive_partial"))]
    floats = [c for c in df.columns if c.endswith(("_population", f"_{suffix}")) or c in ("wall_s", "cpu_s", "peak_rss_mb")]
    strings = [c for c in df.columns if c not in ints + bools + floats]
    return df.astype({**{c: "Int64" for c in ints}, **{c: "boolean" for c in bools},
                      **{c: "float64" for c in floats}, **{c: "string" for c in strings}})


def families_frame(reader, unit="kJ/mol"):
    """One row per ring-state family of every analysed record, in input order.

    Columns: ``index``, ``name``, ``ring``, ``family`` (key), ``label``, ``shape``,
    ``n_members``, ``population``, ``delta_g_<unit>``, ``equilibrium_constant``,
    ``additive_energy_<unit>``, ``model_energy_<unit>``, ``disagreement``, ``additive_partial``.
    """
    import pandas as pd

    unit = _unit(unit)
    suffix = unit.name.lower()
    records = []
    for row in reader.rows():
        if not row["summary"]:
            continue
        for fam in json.loads(row["summary"])["families"]:
            records.append(
                {
                    "index": row["idx"],
                    "name": row["name"],
                    "ring": fam["ring"],
                    "family": fam["family"],
                    "label": fam["label"],
                    "shape": fam["shape"],
                    "n_members": fam["n_members"],
                    "population": fam["population"],
                    f"delta_g_{suffix}": _conv(unit, fam["delta_g"]),
                    "equilibrium_constant": fam["equilibrium_constant"],
                    f"additive_energy_{suffix}": _conv(unit, fam["additive_energy"]),
                    f"model_energy_{suffix}": _conv(unit, fam["model_energy"]),
                    "disagreement": fam["disagreement"],
                    "additive_partial": fam["additive_partial"],
                }
            )
    columns = ["index", "name", "ring", "family", "label", "shape", "n_members", "population", f"delta_g_{suffix}",
               "equilibrium_constant", f"additive_energy_{suffix}", f"model_energy_{suffix}", "disagreement", "additive_partial"]
    df = pd.DataFrame.from_records(records, columns=columns)
    return df.astype({"index": "Int64", "ring": "Int64", "n_members": "Int64", "population": "float64",
                      f"delta_g_{suffix}": "float64", "equilibrium_constant": "float64",
                      f"additive_energy_{suffix}": "float64", f"model_energy_{suffix}": "float64",
                      "disagreement": "boolean", "additive_partial": "boolean",
                      "name": "string", "family": "string", "label": "string", "shape": "string"})


def _atomic(path: Path, write) -> Path:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=str(path.parent))
        os.close(fd)
    except OSError as exc:
        raise OutputError(f"cannot write {str(path)!r}: {exc.strerror or exc}") from None
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def parse_formats(text: "str | Sequence[str]", allowed: Sequence[str], what: str) -> tuple[str, ...]:
    """Split ``"csv,parquet"`` (or a sequence) into validated format names."""
    items = text.split(",") if isinstance(text, str) else list(text)
    out = []
    for item in items:
        key = item.strip().lower()
        if not key or key == "none":
            continue
        if key not in allowed:
            raise OptionError(f"unknown {what} format {item!r}; choose from: {', '.join(allowed)} (comma-separated) or none")
        if key not in out:
            out.append(key)
    return tuple(out)


def write_tables(reader, folder: "str | Path", formats: Sequence[str] = TABLE_FORMATS, unit="kJ/mol") -> list[Path]:
    """Write ``summary.*`` and ``families.*`` in each format; return the paths written."""
    folder = Path(folder)
    written = []
    tables = {"summary": summary_frame(reader, unit), "families": families_frame(reader, unit)}
    for stem, df in tables.items():
        for fmt in formats:
            path = folder / f"{stem}.{fmt}"
            if fmt == "csv":
                written.append(_atomic(path, lambda tmp, df=df: df.to_csv(tmp, index=False)))
            elif fmt == "parquet":
                written.append(_atomic(path, lambda tmp, df=df: df.to_parquet(tmp, index=False, engine="pyarrow")))
            else:
                raise OptionError(f"unknown table format {fmt!r}; choose from: {', '.join(TABLE_FORMATS)}")
    return written


def write_molecule_files(reader, folder: "str | Path", formats: Sequence[str], unit="kJ/mol") -> list[Path]:
    """Write ``molecules/NNNNN.<fmt>`` for every analysed record; return the paths written."""
    from chairbuild.output import sdf_text

    unit = _unit(unit)
    target = Path(folder) / "molecules"
    written = []
    for idx, ens in reader.ensembles():
        for fmt in formats:
            path = target / f"{idx:05d}.{fmt}"
            if fmt == "json":
                text = ens.to_json(unit) + "\n"
            elif fmt == "sdf":
                text = sdf_text(ens, unit)
            else:
                raise OptionError(f"unknown per-molecule format {fmt!r}; choose from: {', '.join(MOLECULE_FORMATS)}")

            def write(tmp, text=text):
                with open(tmp, "w", encoding="utf-8") as fh:
                    fh.write(text)

            written.append(_atomic(path, write))
    return written
