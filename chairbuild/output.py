"""Exporters and the terminal table. They only read the :class:`~chairbuild.result.Ensemble`.

The format follows the path: ``.sdf`` (multi-conformer, every per-conformer property as a
data field), ``.xyz`` (multi-frame), ``.csv``, ``.json``; a directory (an existing one, a
path ending in ``/``, or a path without suffix) gets one XYZ file per conformer named by
energy rank (``rank_001.xyz`` is the lowest) with energy and population on the comment
line. Files are written to a temporary name first and moved into place, so a failure
never leaves a half-written file behind.
"""

from __future__ import annotations

import csv
import io
import os
import tempfile
from pathlib import Path
from typing import Callable, Sequence

from chairbuild.errors import OptionError, OutputError
from chairbuild.result import THERMO_ENERGY_KEYS, AdditiveStatus, EnergyUnit, Ensemble

__all__ = ["write", "format_table", "sdf_text", "xyz_text", "csv_text", "SUPPORTED_SUFFIXES"]


def _format(key: str, value) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if key == "population":
            return f"{value:.6f}"
        if key.endswith("_deg") or key == "temperature_K":
            return f"{value:.2f}"
        if key.startswith("rms_gradient"):
            return f"{value:.4g}"
        return f"{value:.4f}"
    return str(value)


def record_fields(ens: Ensemble, unit: EnergyUnit, rec) -> dict[str, str]:
    """The SD-file tags and CSV columns of one conformer: the ensemble's values, then the
    conformer's (:func:`chairbuild.frames.conformer_properties`), formatted as text."""
    from chairbuild.frames import conformer_properties, molecule_properties

    mol_props = molecule_properties(ens)
    fields = {k: _format(k, v) for k, v in mol_props.items() if k not in ("chairbuild_name", "smiles")}
    fields.update({k: _format(k, v) for k, v in conformer_properties(ens, rec, unit).items()})
    return fields


def sdf_text(ens: Ensemble, unit: EnergyUnit = EnergyUnit.KJ, include_rejected: bool = False) -> str:
    """Multi-conformer SD file text: one record per conformer, tags of :func:`record_fields`.

    The molecule block carries the formal charges and radical centres, and the tags
    ``total_charge`` and ``multiplicity`` state them for a quantum-chemistry input.
    """
    from rdkit import Chem

    mol = ens.to_rdkit(include_rejected=include_rejected)
    records = ens.conformers + (ens.rejected if include_rejected else ())
    buf = io.StringIO()
    writer = Chem.SDWriter(buf)
    for rec, conf in zip(records, mol.GetConformers()):
        m = Chem.Mol(mol)
        for key in list(m.GetPropNames()):
            m.ClearProp(key)
        m.RemoveAllConformers()
        m.AddConformer(Chem.Conformer(conf), assignId=True)
        m.SetProp("_Name", f"{ens.name} conformer {rec.id}")
        for key, value in record_fields(ens, unit, rec).items():
            m.SetProp(key, value)
        writer.write(m)
    writer.close()
    return buf.getvalue()


def _xyz_block(ens: Ensemble, rec, comment: str) -> str:
    lines = [str(len(ens.symbols)), comment]
    for sym, (x, y, z) in zip(ens.symbols, rec.coords):
        lines.append(f"{sym:<2s} {x:14.8f} {y:14.8f} {z:14.8f}")
    return "\n".join(lines) + "\n"


def _xyz_comment(ens: Ensemble, unit: EnergyUnit, rec) -> str:
    shapes = ",".join(r.shape.value for r in rec.rings)
    rel = "G_rel" if ens.ranking == "free_energy" else "E_rel"
    return (
        f"{ens.name} | conformer {rec.id} | charge={ens.charge} multiplicity={ens.multiplicity} "
        f"| {rel}={unit.from_kj(rec.relative_energy):.4f} {unit.value} "
        f"| population={rec.population:.6f} | method={ens.method} | T={ens.temperature:.2f} K | rings={shapes}"
    )


def xyz_text(ens: Ensemble, unit: EnergyUnit = EnergyUnit.KJ) -> str:
    """Multi-frame XYZ text, lowest energy first; total charge and multiplicity on each comment line."""
    return "".join(_xyz_block(ens, rec, _xyz_comment(ens, unit, rec)) for rec in ens.conformers)


def csv_text(ens: Ensemble, unit: EnergyUnit = EnergyUnit.KJ) -> str:
    """One row per conformer, the columns of :func:`record_fields` (the SD-file tags)."""
    buf = io.StringIO()
    rows = [record_fields(ens, unit, rec) for rec in ens.conformers]
    header: list[str] = []
    for row in rows:
        header += [k for k in row if k not in header]
    writer = csv.DictWriter(buf, fieldnames=header, lineterminator="\n", restval="")
    writer.writeheader()
    writer.writerows(rows)
    return buf.getvalue()


def _atomic_write(path: Path, text: str) -> None:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=str(path.parent))
    except OSError as exc:
        raise OutputError(f"cannot write {str(path)!r}: {exc.strerror or exc}") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


#: Files of an earlier run that a directory target would mix with the new ones.
_CONFORMER_FILE_PATTERNS = ("rank_*.xyz", "isomer_*/rank_*.xyz")


def _old_conformer_files(folder: Path) -> list[Path]:
    if not folder.is_dir():
        return []
    return sorted(p for pattern in _CONFORMER_FILE_PATTERNS for p in folder.glob(pattern))


def _write_directory(ens: Ensemble, path: Path, unit: EnergyUnit, overwrite: bool = False) -> list[Path]:
    if path.exists() and not path.is_dir():
        raise OptionError(f"{str(path)!r} exists and is not a directory")
    old = _old_conformer_files(path)
    if old and not overwrite:
        raise OutputError(_old_files_message(path, old))
    for stale in old:
        if stale.parent == path:
            stale.unlink()
    written = []
    for rank, rec in enumerate(ens.conformers, start=1):
        target = path / f"rank_{rank:03d}.xyz"
        _atomic_write(target, _xyz_block(ens, rec, _xyz_comment(ens, unit, rec)))
        written.append(target)
    return written


def _old_files_message(path: Path, old: list[Path]) -> str:
    from chairbuild.optnames import spell

    shown = ", ".join(str(p.relative_to(path)) for p in old[:3]) + (", ..." if len(old) > 3 else "")
    return (
        f"{str(path)!r} already holds {len(old)} conformer file(s) of an earlier run ({shown}); "
        f"use {spell('overwrite', True)} to replace them, or another directory"
    )


_TEXT_WRITERS: dict[str, Callable[[Ensemble, EnergyUnit], str]] = {
    ".sdf": sdf_text,
    ".sd": sdf_text,
    ".xyz": xyz_text,
    ".csv": csv_text,
    ".json": lambda ens, unit: ens.to_json(unit) + "\n",
}

#: Suffixes understood by :func:`write` (plus directories).
SUPPORTED_SUFFIXES = tuple(_TEXT_WRITERS)


def _is_directory_target(path_text: str) -> bool:
    path = Path(path_text)
    return path_text.endswith(("/", os.sep)) or path.is_dir() or path.suffix == ""


def check_target(path_text: str, overwrite: bool = False) -> None:
    """Raise before any work if ``path_text`` cannot be written.

    OptionError for an unknown extension; OutputError when the nearest existing folder
    on the path is not a writable directory, or when a directory target already holds
    conformer files of an earlier run (``rank_*.xyz``) and ``overwrite`` is not set.
    """
    if not _is_directory_target(path_text):
        suffix = Path(path_text).suffix.lower()
        if suffix not in _TEXT_WRITERS:
            raise OptionError(
                f"cannot write {path_text!r}: unknown extension {suffix!r}; use one of "
                f"{', '.join(SUPPORTED_SUFFIXES)} or a directory"
            )
    folder = Path(path_text) if _is_directory_target(path_text) else Path(path_text).parent
    probe = folder.absolute()
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    if not probe.is_dir() or not os.access(probe, os.W_OK | os.X_OK):
        raise OutputError(f"cannot write {path_text!r}: {str(probe)!r} is not a writable directory")
    if _is_directory_target(path_text) and not overwrite:
        old = _old_conformer_files(Path(path_text))
        if old:
            raise OutputError(_old_files_message(Path(path_text), old))


def write(ens: Ensemble, path_text: str, unit: EnergyUnit = EnergyUnit.KJ, overwrite: bool = False) -> list[Path]:
    """Write ``ens`` to ``path_text``; the format follows the extension. Returns the files written.

    A directory target that holds conformer files of an earlier run is refused unless
    ``overwrite`` (then those ``rank_*.xyz`` files are replaced).
    """
    check_target(path_text, overwrite)
    if _is_directory_target(path_text):
        return _write_directory(ens, Path(path_text), unit, overwrite)
    path = Path(path_text)
    _atomic_write(path, _TEXT_WRITERS[path.suffix.lower()](ens, unit))
    return [path]


#: The sign convention of the family columns, stated under every family table.
FAMILY_CONVENTION = (
    "dG = G(family) - G(most populated family of the ring), >= 0; "
    "K = P(most populated)/P(family) = exp(dG/RT), >= 1"
)


def format_table(ens: Ensemble, unit: EnergyUnit = EnergyUnit.KJ, max_rows: int = 25) -> str:
    """Human-readable summary: conformers, ring families, notes.

    Atom numbers are 0-based (the JSON's and RDKit's indices), which the table says.
    """
    from chairbuild.frames import charge_text

    u = unit.value
    delta = "dG" if ens.ranking == "free_energy" else "dE"
    lines = [
        f"{ens.name}   {ens.smiles}",
        f"charge {charge_text(ens.charge)}, multiplicity {ens.multiplicity}; method {ens.method}, "
        f"ranked by {ens.ranking.replace('_', ' ')}, T = {ens.temperature:.2f} K, "
        f"energies in {u}, window {unit.from_kj(ens.window):.1f} {u}; atom numbers 0-based",
        "",
    ]
    ring_cols = [f"ring{k}" for k in range(len(ens.ring_atoms))]
    head = f"{'id':>3} {delta:>8} {'pop %':>7} {'g':>2}  " + " ".join(f"{c:<11}" for c in ring_cols) + "  substituents"
    lines.append(head)
    lines.append("-" * len(head))
    for rec in ens.conformers[:max_rows]:
        subs = ", ".join(
            f"{s.label(ens.symbols)} {_short(s.position.value)}" for s in rec.substituents if not _is_ring_bond(ens, s)
        )
        shapes = " ".join(f"{r.shape.value:<11}" for r in rec.rings)
        lines.append(
            f"{rec.id:>3} {unit.from_kj(rec.relative_energy):8.2f} {100 * rec.population:7.2f} {rec.degeneracy:>2}  {shapes}  {subs}"
        )
    if len(ens.conformers) > max_rows:
        lines.append(f"... {len(ens.conformers) - max_rows} more conformer(s) in the file outputs")
    any_family = False
    for r in range(len(ens.ring_atoms)):
        fams = [f for f in ens.families if f.ring_index == r]
        if not fams:
            continue
        any_family = True
        lines += ["", f"ring {r} (atoms {'-'.join(map(str, ens.ring_atoms[r]))}): families"]
        lines.append(f"  {'pop %':>7} {'dG':>7} {'K':>9} {'additive':>9} {'model':>7}  family")
        for f in fams:
            model = "" if f.model_energy is None else f"{unit.from_kj(f.model_energy):7.2f}"
            kval = f"{f.equilibrium_constant:9.2f}" if f.equilibrium_constant < 1e6 else f"{'>1e6':>9}"
            lines.append(
                f"  {100 * f.population:7.2f} {unit.from_kj(f.delta_g):7.2f} {kval} {_additive_cell(f, unit):>9} {model:>7}"
                f"  {f.label}{_flag_text(f, unit)}"
            )
        lines += _additive_breakdown(fams, unit)
    if any_family:
        lines.append(f"  ({FAMILY_CONVENTION})")
    notes = ens.notes_in(unit)
    if notes:
        lines += ["", "notes:"] + [f"  - {n}" for n in notes]
    if ens.rejected:
        lines.append(f"  - {len(ens.rejected)} structure(s) rejected (see JSON 'rejected' for status and reason)")
    return "\n".join(lines)


def _additive_cell(f, unit: EnergyUnit) -> str:
    """The additive column: a number, 'unknown' (a term is missing) or 'none' (no increments known)."""
    if f.additive_energy is not None:
        return f"{unit.from_kj(f.additive_energy):8.2f}"
    return {AdditiveStatus.UNKNOWN: "unknown", AdditiveStatus.NO_INCREMENTS: "none"}.get(f.additive_status, "")


def _flag_text(f, unit: EnergyUnit) -> str:
    if not f.disagreement:
        return ""
    from chairbuild.families import DISAGREEMENT_KJ

    u = unit.value
    return (
        f"  << additive estimate disagrees (beyond {unit.from_kj(DISAGREEMENT_KJ):.1f} + "
        f"{unit.from_kj(f.additive_uncertainty or 0.0):.1f} {u})"
    )


def _additive_breakdown(fams, unit: EnergyUnit) -> list[str]:
    """Per-family increments with numbered sources and conditions; unknown increments."""
    lines: list[str] = []
    sources: dict[str, int] = {}
    cite: list[str] = []
    for f in fams:
        if f.additive_status is AdditiveStatus.NONE or not (f.additive_terms or f.additive_notes):
            continue
        if not lines:
            lines.append(f"  additive breakdown ({unit.value}; [n] = source below):")
        status = f"  ({f.additive_status.value})" if f.additive_status in (AdditiveStatus.UNKNOWN, AdditiveStatus.NO_INCREMENTS) else ""
        lines.append(f"    {f.label}{status}")
        for t in f.additive_terms:
            ref = f"{t.increment}: {t.source}" + (f"; {t.conditions}" if t.conditions else "")
            if ref not in sources:
                sources[ref] = len(sources) + 1
                cite.append(f"    [{sources[ref]}] {ref}")
            back = f"  fallback: {t.fallback}" if t.fallback else ""
            lines.append(f"      {unit.from_kj(t.value):+7.2f}  {t.kind}: {t.applies_to or t.kind} [{sources[ref]}]{back}")
        for n in f.additive_notes:
            lines.append(f"      {n.split(': ', 1)[-1]}")
    if cite:
        lines += ["  sources:"] + cite
    return lines


def _short(position: str) -> str:
    return {"axial": "ax", "equatorial": "eq"}.get(position, position)


def _is_ring_bond(ens: Ensemble, sub) -> bool:
    return any(sub.atom in ring for ring in ens.ring_atoms)


def write_many(ensembles: Sequence[Ensemble], path_text: str, unit: EnergyUnit, overwrite: bool = False) -> list[Path]:
    """Write several ensembles (one per diastereomer) to ``path_text``, numbering them when more than one."""
    if len(ensembles) == 1:
        return write(ensembles[0], path_text, unit, overwrite)
    written = []
    for k, ens in enumerate(ensembles, start=1):
        if _is_directory_target(path_text):
            target = str(Path(path_text) / f"isomer_{k}") + "/"
        else:
            p = Path(path_text)
            target = str(p.with_name(f"{p.stem}_isomer{k}{p.suffix}"))
        written += write(ens, target, unit, overwrite)
    return written
