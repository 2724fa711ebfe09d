"""Input records of a batch: readers for SMILES files, CSV/TSV tables and multi-record SDF.

Every record of the input becomes exactly one :class:`InputRecord`, numbered from 0 in
input order, even when it cannot be parsed: such a record is carried to the store with
its parse error (status ``bad-input``), so no row is lost. Blank lines and lines
starting with ``#`` in a SMILES file are not records.

The *content key* of a record (:func:`content_key`) is the SHA-256 of its canonical
form (RDKit's isomeric SMILES written in the record's own atom order, since atom indices
in the results follow that order; the raw text when it does not parse), its name, every
option that changes results and the chairbuild version. ``--resume`` skips a row
whose stored key equals the new one.
"""

from __future__ import annotations

import base64
import csv
import enum
import hashlib
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Sequence

from chairbuild.choices import Choice
from chairbuild.errors import ChairbuildError, ConvergenceError, ForceFieldError, InputError, OptionError

__all__ = [
    "RowStatus",
    "InputRecord",
    "read_records",
    "records_from_molecules",
    "content_key",
    "result_options",
    "status_of_exception",
    "SMILES_SUFFIXES",
    "TABLE_SUFFIXES",
    "SDF_SUFFIXES",
]

SMILES_SUFFIXES = (".smi", ".smiles", ".txt")
TABLE_SUFFIXES = (".csv", ".tsv", ".tab")
SDF_SUFFIXES = (".sdf", ".sd")


class RowStatus(Choice):
    """Outcome of one input record (one row of the store and of the exported tables)."""

    OK = "ok"
    BAD_INPUT = "bad-input"  # unparsable, no ring to analyse, undefined stereo, refused (radical at MMFF94, size cap)
    UNTYPABLE = "untypable"  # the energy model cannot type the molecule
    NOT_CONVERGED = "not-converged"  # an SCF or other iterative step did not converge
    FAILED = "failed"  # any other error inside the analysis
    TIMEOUT = "timeout"  # no result within --timeout seconds
    CRASHED = "crashed"  # the process computing it died (segfault, out-of-memory kill)
    PENDING = "pending"  # not computed yet (a run was interrupted)

    @classmethod
    def describe(cls) -> str:
        return "row status"


#: Statuses worth another try with ``--retry-failed`` (the cause may be the machine, not the molecule).
TRANSIENT = (RowStatus.TIMEOUT, RowStatus.CRASHED)


def status_of_exception(exc: BaseException) -> RowStatus:
    """The row status for an exception raised while analysing one molecule."""
    if isinstance(exc, (InputError, OptionError)):
        return RowStatus.BAD_INPUT
    if isinstance(exc, ForceFieldError):
        return RowStatus.UNTYPABLE
    if isinstance(exc, ConvergenceError):
        return RowStatus.NOT_CONVERGED
    return RowStatus.FAILED


def one_line(text: str, limit: int = 500) -> str:
    """Collapse a message to one line of at most ``limit`` characters."""
    line = " ".join(str(text).split())
    return line if len(line) <= limit else line[: limit - 3] + "..."


@dataclass(frozen=True)
class InputRecord:
    """One input record.

    Attributes
    ----------
    index : int
        0-based position in the input (the row number of every table).
    name : str
        The record's name (name column, SMILES-file name field, SDF title) or the SMILES.
    kind : str
        ``"smiles"``, ``"molblock"`` or ``"rdkit"`` (base64 of an RDKit binary molecule).
    payload : str
        What the worker analyses, in the form given by ``kind``.
    input_smiles : str
        The SMILES as given, or the canonical SMILES of an SDF/RDKit record ("" when it does not parse).
    canonical : str
        Isomeric SMILES in the record's atom order, or the raw text when it does not parse
        (part of the content key).
    location : str
        Where the record is in the input (``"line 12"``, ``"record 3"``, ``"item 0"``).
    error : str
        Parse error found while reading ("" when the record parsed).
    """

    index: int
    name: str
    kind: str
    payload: str
    input_smiles: str
    canonical: str
    location: str
    error: str = ""


def _quiet_rdkit():
    from rdkit import RDLogger

    class _Quiet:
        def __enter__(self):
            RDLogger.DisableLog("rdApp.*")

        def __exit__(self, *exc):
            RDLogger.EnableLog("rdApp.*")

    return _Quiet()


def _canonical(mol) -> str:
    from rdkit import Chem

    return Chem.MolToSmiles(mol, isomericSmiles=True)


def _in_order(mol) -> str:
    """Isomeric SMILES that keeps the molecule's atom order (what the result's indices follow)."""
    from rdkit import Chem

    return Chem.MolToSmiles(mol, isomericSmiles=True, canonical=False)


def _smiles_record(index: int, smiles: str, name: str | None, location: str) -> InputRecord:
    from rdkit import Chem

    text = smiles.strip()
    with _quiet_rdkit():
        mol = Chem.MolFromSmiles(text) if text else None
    if mol is None:
        error = "empty SMILES" if not text else f"invalid SMILES {text!r}"
        return InputRecord(index, name or text, "smiles", text, text, text, location, error)
    return InputRecord(index, name or text, "smiles", text, text, _in_order(mol), location)


def _read_smiles_file(path: Path) -> list[InputRecord]:
    records = []
    with path.open(encoding="utf-8", errors="replace") as fh:
        for line_no, line in enumerate(fh, start=1):
            stripped = line.strip()
            if not stripped or stripped.startswith("#"):
                continue
            parts = stripped.split(None, 1)
            name = parts[1].strip() if len(parts) > 1 else None
            records.append(_smiles_record(len(records), parts[0], name, f"line {line_no}"))
    return records


def _pick_column(header: Sequence[str], wanted: str | None, candidates: Sequence[str], what: str, path: Path) -> int | None:
    lowered = [h.strip().lower() for h in header]
    if wanted is not None:
        if wanted in header:
            return header.index(wanted)
        if wanted.strip().lower() in lowered:
            return lowered.index(wanted.strip().lower())
        raise InputError(f"{str(path)!r} has no column {wanted!r}; columns: {', '.join(header)}")
    for cand in candidates:
        if cand in lowered:
            return lowered.index(cand)
    if what == "SMILES":
        raise InputError(
            f"{str(path)!r}: no SMILES column found among {', '.join(header)}; name it with --smiles-column"
        )
    return None


def _read_table(path: Path, smiles_column: str | None, name_column: str | None) -> list[InputRecord]:
    delimiter = "\t" if path.suffix.lower() in (".tsv", ".tab") else ","
    with path.open(encoding="utf-8-sig", errors="replace", newline="") as fh:
        reader = csv.reader(fh, delimiter=delimiter)
        header = next(reader, None)
        if not header:
            raise InputError(f"{str(path)!r} is empty: a header row with a SMILES column is expected")
        s_col = _pick_column(header, smiles_column, ("smiles", "smi", "canonical_smiles"), "SMILES", path)
        n_col = _pick_column(header, name_column, ("name", "id", "title", "compound"), "name", path)
        records = []
        for line_no, row in enumerate(reader, start=2):
            if not any(cell.strip() for cell in row):
                continue
            smiles = row[s_col] if s_col < len(row) else ""
            name = row[n_col].strip() if n_col is not None and n_col < len(row) and row[n_col].strip() else None
            records.append(_smiles_record(len(records), smiles, name, f"line {line_no}"))
    return records


def _sdf_blocks(path: Path) -> Iterable[str]:
    block: list[str] = []
    with path.open(encoding="utf-8", errors="replace") as fh:
        for line in fh:
            if line.rstrip("\r\n") == "$$$$":
                yield "".join(block)
                block = []
            else:
                block.append(line)
    if any(line.strip() for line in block):
        yield "".join(block)


def _read_sdf(path: Path) -> list[InputRecord]:
    from rdkit import Chem

    records = []
    for k, block in enumerate(_sdf_blocks(path), start=1):
        title = block.split("\n", 1)[0].strip()
        name = title or f"{path.stem}#{k}"
        with _quiet_rdkit():
            mol = Chem.MolFromMolBlock(block, removeHs=False, sanitize=True)
        if mol is None:
            records.append(
                InputRecord(len(records), name, "molblock", block, "", block.strip(), f"record {k}",
                            f"record {k} of {str(path)!r} is not a valid molecule")
            )
            continue
        if mol.GetNumConformers() and mol.GetConformer().Is3D():
            Chem.AssignStereochemistryFrom3D(mol)
        smiles = _canonical(Chem.RemoveHs(mol))
        records.append(InputRecord(len(records), name, "molblock", block, smiles, _in_order(mol), f"record {k}"))
    return records


def read_records(path: "str | Path", smiles_column: str | None = None, name_column: str | None = None) -> list[InputRecord]:
    """Read every record of a batch input file.

    Parameters
    ----------
    path : str or pathlib.Path
        ``.smi``/``.smiles``/``.txt`` (SMILES, optional name after whitespace), ``.csv``/``.tsv``
        (a header row; SMILES and name columns), or ``.sdf``/``.sd`` (multi-record).
    smiles_column, name_column : str, optional
        Column headers of a CSV/TSV (default: a column called smiles/smi, and name/id/title).

    Returns
    -------
    list of InputRecord

    Raises
    ------
    InputError
        Missing or empty file, unknown suffix, missing column.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError(f"{str(path)!r} is a directory; give a SMILES, CSV/TSV or SDF file")
    if not path.is_file():
        raise InputError(f"cannot read {str(path)!r}: no such file")
    suffix = path.suffix.lower()
    if (smiles_column or name_column) and suffix not in TABLE_SUFFIXES:
        raise InputError("--smiles-column and --name-column apply to CSV/TSV input only")
    if suffix in SDF_SUFFIXES:
        records = _read_sdf(path)
    elif suffix in TABLE_SUFFIXES:
        records = _read_table(path, smiles_column, name_column)
    elif suffix in SMILES_SUFFIXES:
        records = _read_smiles_file(path)
    else:
        raise InputError(
            f"cannot tell the format of {str(path)!r} from its suffix {suffix!r}; use one of "
            + ", ".join(SMILES_SUFFIXES + TABLE_SUFFIXES + SDF_SUFFIXES)
        )
    if not records:
        raise InputError(f"{str(path)!r} holds no molecule record")
    return records


def records_from_molecules(molecules: Iterable[Any], names: Sequence[str] | None = None) -> list[InputRecord]:
    """Records from a sequence of SMILES strings and/or RDKit molecules (Python API)."""
    from rdkit import Chem

    items = list(molecules)
    if names is not None and len(names) != len(items):
        raise InputError(f"{len(names)} names given for {len(items)} molecules")
    records = []
    for k, item in enumerate(items):
        name = None if names is None else str(names[k])
        if isinstance(item, Chem.Mol):
            mol = Chem.Mol(item)
            if mol.GetNumConformers() and mol.GetConformer().Is3D():
                Chem.AssignStereochemistryFrom3D(mol)
            if name is None and mol.HasProp("_Name") and mol.GetProp("_Name").strip():
                name = mol.GetProp("_Name").strip()
            try:
                smiles = _canonical(Chem.RemoveHs(mol))
            except Exception as exc:  # RDKit raises its own types for a broken molecule
                records.append(InputRecord(k, name or f"item {k}", "rdkit", "", "", "", f"item {k}", one_line(f"invalid molecule: {exc}")))
                continue
            payload = base64.b64encode(mol.ToBinary(Chem.PropertyPickleOptions.AllProps)).decode("ascii")
            records.append(InputRecord(k, name or smiles, "rdkit", payload, smiles, _in_order(mol), f"item {k}"))
        elif isinstance(item, str):
            records.append(_smiles_record(k, item, name, f"item {k}"))
        else:
            raise InputError(f"item {k}: expected a SMILES string or an RDKit Mol, got {type(item).__name__}")
    if not records:
        raise InputError("no molecules given")
    return records


def result_options(opts) -> dict[str, Any]:
    """The options of an :class:`~chairbuild.pipeline.AnalysisOptions` that change results (JSON-ready)."""
    out = {}
    for name in sorted(opts.__dataclass_fields__):
        if name in ("threads", "progress", "extra", "chain", "cache"):  # chain is derived from the others
            continue
        value = getattr(opts, name)
        out[name] = value.value if isinstance(value, enum.Enum) else value
    if opts.extra:
        out["extra"] = {str(k): opts.extra[k] for k in sorted(opts.extra)}
    return out


def content_key(record: InputRecord, options: dict[str, Any], version: str) -> str:
    """SHA-256 over the canonical record, its name, the result-changing options and the version."""
    blob = json.dumps(
        {"record": record.canonical, "name": record.name, "options": options, "chairbuild": version},
        sort_keys=True,
        default=str,
    )
    return hashlib.sha256(blob.encode("utf-8")).hexdigest()


def describe_failure(exc: BaseException) -> str:
    """One-line message for an exception (class name added for errors that are not chairbuild's)."""
    if isinstance(exc, ChairbuildError):
        return one_line(str(exc))
    return one_line(f"{type(exc).__name__}: {exc}")
