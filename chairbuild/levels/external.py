"""Bring your own energies: re-rank a saved ensemble with energies computed elsewhere.

Many users run their own quantum-chemistry program on the exported conformers
(``chairbuild analyze ... -o result.json -o confs/`` writes the result and one XYZ file per
conformer, ``rank_001.xyz`` the lowest). :func:`reweight` is the stage that takes the saved
result (an :class:`~chairbuild.result.Ensemble`, or the JSON file :func:`chairbuild.load`
reads) and their energies, and returns a **new** ensemble ranked at their level: energies,
relative energies, Boltzmann populations, families, couplings and the ranking formula are
recomputed; geometries, ring and substituent descriptors stay those of the saved result. The
saved file is not changed, and every record of the new ensemble keeps the energies of every
level it had, so both rankings stay at hand (``chairbuild.load("result.json")`` is the
original, the new ensemble's ``energies`` hold both levels).

Sources of energies
-------------------
* **A CSV file** with the header ``conformer,energy,unit`` (``#`` lines are skipped):
  ``conformer`` is the conformer's ``id`` in the saved result (0-based, as in the JSON) or
  the name of its exported file (``rank_001.xyz``, or any name starting ``rank_001``: rank 1
  is id 0); ``unit`` is ``hartree``, ``eV``, ``kJ/mol`` or ``kcal/mol`` (per row). CSV
  energies carry no geometry: they are taken to be single points at the exported geometries.
* **A folder of output files** that cclib (a general-purpose parser of quantum-chemistry
  output, https://cclib.github.io) reads: the output of any program cclib parses, or cclib's
  own CJSON (``.cjson``). A file belongs to the conformer whose exported file name begins its
  name (``rank_003.out``, ``rank_003.cjson``, ``rank_003_opt.log`` → id 2); ``.xyz`` files
  (the exported geometries themselves) and files cclib does not recognise (inputs, scripts)
  are passed over and listed in the provenance. Two files with energies for one conformer
  are refused.
* **A mapping** ``{id: energy in kJ/mol}`` (Python only), taken like a CSV.

Geometry check (folders)
------------------------
Each file's final geometry must have the saved result's elements in the same order, and it
is superposed (Kabsch, all atoms) on every conformer of the saved result: the root-mean-square
deviation to its own conformer must be at most ``max_rmsd`` (default
:data:`DEFAULT_MAX_RMSD_A`, 0.5 Å: room for a re-optimisation at another level, far below the
difference between two chairs; common practice, no source) and no other conformer may be
closer. Otherwise the file is refused with a message naming it, its RMSD and the conformer it
resembles. Files whose geometries all lie within :data:`SAME_GEOMETRY_RMSD_A` of the exported
ones are single points (the level is recorded as ``LEVEL//GEOMETRY LEVEL``); otherwise the
energies belong to the user's own minima (recorded as ``LEVEL``, with a note), and the
descriptors remain those of the exported geometries.

Energy term (:class:`EnergyTerm`)
---------------------------------
Which number of a file is read, with cclib's attribute: ``electronic`` (``scfenergies``, the
last SCF energy: Hartree–Fock or Kohn–Sham, as the program reports it — whether that includes
a dispersion correction depends on the program; files that report one separately are counted
in a note), ``electronic+dispersion`` (``scfenergies`` + ``dispersionenergies``, for programs
that report the dispersion correction apart from the SCF energy), ``mp`` (``mpenergies``, the
highest Møller–Plesset order), ``cc`` (``ccenergies``), ``free-energy`` (``freeenergy``, the
program's electronic plus thermal free energy), or ``auto`` (the first of free-energy, cc, mp,
electronic that every file has). For a CSV the term says what its numbers are (``auto``:
electronic). cclib stores SCF, MP and CC energies in eV: they are converted back to hartree
with cclib's own factor (undoing its conversion exactly) and then to kJ/mol with
:data:`chairbuild.constants.HARTREE_TO_KJ`; free energies are in hartree already.

Ranking formula
---------------
``E = E[LEVEL//GEOMETRY]`` for an energy term; ``G = G[LEVEL//GEOMETRY]`` for the free-energy
term (the value is in each record's ``thermo["free_energy"]``); with
``add_thermal_correction`` an energy term gets the saved result's thermal correction,
``G = E[LEVEL//GEOMETRY] + G_RRHO[FREQUENCY LEVEL]`` (the saved result must have been ranked
with frequencies). The formula and its terms are stored on the result
(``Ensemble.ranking_formula``, ``ranking_terms``), and what was read in its provenance
(``provenance["external_energies"]``).
"""

from __future__ import annotations

import csv
import json
import re
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from chairbuild.choices import Choice
from chairbuild.constants import EV_TO_KJ, HARTREE_TO_KJ, KCAL_TO_KJ
from chairbuild.errors import InputError, OptionError
from chairbuild.optnames import spell

__all__ = [
    "EnergyTerm",
    "EnergyInputUnit",
    "ExternalEnergy",
    "reweight",
    "read_energy_csv",
    "read_output_folder",
    "DEFAULT_MAX_RMSD_A",
    "SAME_GEOMETRY_RMSD_A",
    "DEFAULT_LEVEL_NAME",
]

#: Largest RMSD (Å, after superposition) between a file's geometry and its conformer.
DEFAULT_MAX_RMSD_A = 0.5
#: Below this RMSD (Å) every file counts as a single point at the exported geometry.
SAME_GEOMETRY_RMSD_A = 0.01
#: Level name used when neither the caller nor the files name one.
DEFAULT_LEVEL_NAME = "user level"
#: Exported conformer files: ``rank_NNN`` (1-based rank) at the start of a file name.
_RANK_NAME = re.compile(r"^rank_(\d+)(?!\d)")
#: Largest temperature difference (K) between a file's free energy and the ensemble, without a note.
_TEMPERATURE_TOLERANCE_K = 0.5


class EnergyTerm(Choice):
    """Which energy of the user's files ranks the conformers (see the module text)."""

    AUTO = "auto"
    ELECTRONIC = "electronic"
    ELECTRONIC_DISPERSION = "electronic+dispersion"
    MP = "mp"
    CC = "cc"
    FREE_ENERGY = "free-energy"

    @classmethod
    def describe(cls) -> str:
        return "energy term"

    @classmethod
    def aliases(cls):
        return {"scf": cls.ELECTRONIC, "g": cls.FREE_ENERGY, "free_energy": cls.FREE_ENERGY, "gibbs": cls.FREE_ENERGY}


#: What each term reads, in words (the note on the result).
_TERM_TEXT = {
    EnergyTerm.ELECTRONIC: "the last SCF energy (cclib attribute scfenergies; Hartree-Fock or Kohn-Sham as the program reports it)",
    EnergyTerm.ELECTRONIC_DISPERSION: "the last SCF energy plus the dispersion correction reported apart from it "
    "(cclib attributes scfenergies + dispersionenergies)",
    EnergyTerm.MP: "the highest-order Moller-Plesset energy (cclib attribute mpenergies)",
    EnergyTerm.CC: "the coupled-cluster energy (cclib attribute ccenergies)",
    EnergyTerm.FREE_ENERGY: "the program's free energy, electronic plus thermal (cclib attribute freeenergy)",
}


class EnergyInputUnit(Choice):
    """Unit of an energy in a CSV file."""

    HARTREE = "hartree"
    EV = "eV"
    KJ = "kJ/mol"
    KCAL = "kcal/mol"

    @classmethod
    def describe(cls) -> str:
        return "energy unit"

    @classmethod
    def aliases(cls):
        return {"eh": cls.HARTREE, "au": cls.HARTREE, "a.u.": cls.HARTREE, "kj": cls.KJ, "kcal": cls.KCAL}

    def to_kj(self, value: float) -> float:
        """``value`` in this unit, in kJ/mol."""
        factor = {
            EnergyInputUnit.HARTREE: HARTREE_TO_KJ,
            EnergyInputUnit.EV: EV_TO_KJ,
            EnergyInputUnit.KJ: 1.0,
            EnergyInputUnit.KCAL: KCAL_TO_KJ,
        }[self]
        return value * factor


@dataclass(frozen=True)
class ExternalEnergy:
    """One conformer's energy brought by the user.

    Attributes
    ----------
    conformer_id : int
        ``id`` of the conformer in the saved result.
    value : float
        kJ/mol, the quantity of :attr:`term`.
    term : EnergyTerm
    source : str
        File name (and CSV row) it came from.
    electronic : float or None
        kJ/mol: the electronic energy of the same file when the term is the free energy.
    rmsd : float or None
        Å, after superposition on the conformer (files with a geometry only).
    temperature : float or None
        K, of a file's free energy when the file says.
    """

    conformer_id: int
    value: float
    term: EnergyTerm
    source: str
    electronic: float | None = None
    rmsd: float | None = None
    temperature: float | None = None


# ------------------------------------------------------------------ reading
def _conformer_id(text: str, where: str) -> int:
    """A conformer id from ``12`` or from an exported file name ``rank_013.xyz`` (rank 13 = id 12)."""
    text = text.strip()
    if re.fullmatch(r"\d+", text):
        return int(text)
    match = _RANK_NAME.match(Path(text).name)
    if match is None or int(match.group(1)) < 1:
        raise InputError(f"{where}: conformer {text!r} is neither an id (0, 1, ...) nor an exported file name (rank_001.xyz, ...)")
    return int(match.group(1)) - 1


def read_energy_csv(path: str | Path, term: EnergyTerm | str = EnergyTerm.AUTO) -> list[ExternalEnergy]:
    """Energies of a CSV file ``conformer,energy,unit`` (see the module text).

    Raises
    ------
    InputError
        Unreadable file, missing column, bad number or unit, a conformer given twice.
    """
    term = EnergyTerm.parse(term)
    term = EnergyTerm.ELECTRONIC if term is EnergyTerm.AUTO else term
    p = Path(path)
    try:
        lines = [line for line in p.read_text(encoding="utf-8").splitlines() if line.strip() and not line.lstrip().startswith("#")]
    except OSError as exc:
        raise InputError(f"cannot read {str(p)!r}: {exc.strerror or exc}") from None
    reader = csv.DictReader(lines)
    columns = [c.strip().lower() for c in (reader.fieldnames or [])]
    if not {"conformer", "energy", "unit"} <= set(columns):
        raise InputError(f"{p.name}: expected the columns conformer,energy,unit in its first line, got {','.join(columns) or 'nothing'}")
    out: list[ExternalEnergy] = []
    seen: dict[int, int] = {}
    for line_no, row in enumerate(reader, start=2):
        row = {str(k).strip().lower(): (v or "").strip() for k, v in row.items() if k is not None}
        where = f"{p.name} row {line_no - 1}"
        cid = _conformer_id(row["conformer"], where)
        try:
            value = float(row["energy"])
        except ValueError:
            raise InputError(f"{where}: energy {row['energy']!r} is not a number") from None
        if not np.isfinite(value):
            raise InputError(f"{where}: energy {row['energy']!r} is not finite")
        try:
            unit = EnergyInputUnit.parse(row["unit"])
        except OptionError as exc:
            raise InputError(f"{where}: {exc}") from None
        if cid in seen:
            raise InputError(f"{where}: conformer {cid} was already given in row {seen[cid]}")
        seen[cid] = line_no - 1
        out.append(ExternalEnergy(cid, unit.to_kj(value), term, where))
    if not out:
        raise InputError(f"{p.name}: no energies")
    return out


#: cclib attributes read from a file.
_CCLIB_ATTRIBUTES = (
    "atomnos", "atomcoords", "charge", "mult", "scfenergies", "dispersionenergies", "mpenergies",
    "ccenergies", "freeenergy", "temperature", "metadata",
)


def _cclib_read(path: Path) -> dict[str, Any] | None:
    """cclib's attributes of one file, or None when cclib does not recognise it.

    cclib 1.8's CJSON reader does not return the coordinates that its CJSON writer stores
    (``atoms.coords.3d``, the Chemical JSON key); for a CJSON file without ``atomcoords`` they
    are read from that key.
    """
    import logging

    import cclib

    log = logging.getLogger("cclib")
    was_disabled = log.disabled
    log.disabled = True  # cclib logs "unable to determine the type" for every file it does not know
    is_cjson = path.suffix.lower() in (".cjson", ".json")
    try:
        data = cclib.io.ccread(str(path), cjson=True) if is_cjson else cclib.io.ccread(str(path))
    except Exception as exc:  # noqa: BLE001 - cclib's parsers raise many kinds; the file is named either way
        raise InputError(f"cclib could not read {path.name}: {type(exc).__name__}: {exc}") from None
    finally:
        log.disabled = was_disabled
    if data is None:
        return None
    if isinstance(data, Mapping):
        attrs = {k: data[k] for k in _CCLIB_ATTRIBUTES if k in data}
    else:
        attrs = {k: getattr(data, k) for k in _CCLIB_ATTRIBUTES if hasattr(data, k)}
    if is_cjson and "atomcoords" not in attrs:
        try:
            flat = json.loads(path.read_text(encoding="utf-8"))["atoms"]["coords"]["3d"]
            attrs["atomcoords"] = [np.asarray(flat, dtype=float).reshape(-1, 3)]
        except (KeyError, TypeError, ValueError, json.JSONDecodeError):
            pass
    return attrs


def _ev_to_kj(value: float) -> float:
    from cclib.parser.utils import convertor

    return float(convertor(float(value), "eV", "hartree")) * HARTREE_TO_KJ


def _term_value(attrs: Mapping[str, Any], term: EnergyTerm) -> float | None:
    """The term's value (kJ/mol) in one file's attributes, or None when the file lacks it."""
    def last(key):
        values = attrs.get(key)
        if values is None or len(np.atleast_1d(values)) == 0:
            return None
        return np.atleast_1d(values)[-1]

    if term is EnergyTerm.ELECTRONIC:
        e = last("scfenergies")
        return None if e is None else _ev_to_kj(e)
    if term is EnergyTerm.ELECTRONIC_DISPERSION:
        e, d = last("scfenergies"), last("dispersionenergies")
        return None if e is None or d is None else _ev_to_kj(e) + _ev_to_kj(d)
    if term is EnergyTerm.MP:
        e = last("mpenergies")
        return None if e is None else _ev_to_kj(np.atleast_1d(e)[-1])
    if term is EnergyTerm.CC:
        e = last("ccenergies")
        return None if e is None else _ev_to_kj(e)
    if term is EnergyTerm.FREE_ENERGY:
        g = attrs.get("freeenergy")
        return None if g is None else float(g) * HARTREE_TO_KJ
    raise ValueError(term)


@dataclass(frozen=True)
class _OutputFile:
    path: Path
    conformer_id: int
    attrs: dict


def read_output_folder(folder: str | Path) -> tuple[list[_OutputFile], list[str]]:
    """The files of ``folder`` that cclib reads and that carry an energy, by conformer; and the names passed over.

    Raises
    ------
    InputError
        Not a folder, a file cclib fails on, two files with energies for one conformer, or no file at all.
    """
    root = Path(folder)
    if not root.is_dir():
        raise InputError(f"{str(root)!r} is not a folder")
    found: dict[int, _OutputFile] = {}
    passed: list[str] = []
    for path in sorted(p for p in root.iterdir() if p.is_file()):
        match = _RANK_NAME.match(path.name)
        if match is None or path.suffix.lower() == ".xyz" or int(match.group(1)) < 1:
            passed.append(path.name)
            continue
        attrs = _cclib_read(path)
        has_energy = attrs is not None and any(attrs.get(k) is not None for k in ("scfenergies", "freeenergy", "mpenergies", "ccenergies"))
        if not has_energy:
            passed.append(path.name)
            continue
        cid = int(match.group(1)) - 1
        if cid in found:
            raise InputError(
                f"two output files with energies for conformer {cid} (rank_{cid + 1:03d}): {found[cid].path.name} and {path.name}; "
                "keep one in the folder"
            )
        found[cid] = _OutputFile(path, cid, attrs)
    if not found:
        shown = ", ".join(passed[:5]) + (", ..." if len(passed) > 5 else "")
        raise InputError(
            f"no output file with an energy that cclib reads in {str(root)!r} (names must start rank_NNN like the exported "
            f"conformers; passed over: {shown or 'nothing'})"
        )
    return [found[k] for k in sorted(found)], passed


def _atomic_numbers(symbols) -> list[int]:
    from rdkit import Chem

    table = Chem.GetPeriodicTable()
    return [table.GetAtomicNumber(s) for s in symbols]


def _check_geometry(f: _OutputFile, ensemble, max_rmsd: float) -> float:
    """RMSD (Å) of the file's final geometry to its conformer; InputError when it does not belong there."""
    from chairbuild.forcefields.dft import _superpose

    by_id = {c.id: c for c in ensemble.conformers}
    name = f.path.name
    numbers = [int(z) for z in np.atleast_1d(f.attrs.get("atomnos", []))]
    if numbers != _atomic_numbers(ensemble.symbols):
        raise InputError(
            f"{name}: its atoms ({len(numbers)}) are not those of the saved result ({len(ensemble.symbols)}, "
            f"{''.join(ensemble.symbols[:12])}...) in the same order; was it computed on this molecule's exported file?"
        )
    coords = f.attrs.get("atomcoords")
    if coords is None or len(coords) == 0:
        raise InputError(f"{name}: cclib found no geometry in it, so it cannot be checked against conformer {f.conformer_id}")
    x = np.asarray(coords[-1], dtype=float).reshape(-1, 3)
    rmsd = {cid: _superpose(x, np.asarray(rec.coords))[2] for cid, rec in by_id.items()}
    own = rmsd[f.conformer_id]
    nearest = min(rmsd, key=rmsd.get)
    if nearest != f.conformer_id and rmsd[nearest] < own:
        raise InputError(
            f"{name}: its geometry is conformer {nearest} (rank_{nearest + 1:03d}, RMSD {rmsd[nearest]:.3f} Å), not conformer "
            f"{f.conformer_id} (RMSD {own:.3f} Å) that its name says; refused"
        )
    if own > max_rmsd:
        raise InputError(
            f"{name}: its geometry lies {own:.3f} Å (RMSD after superposition) from conformer {f.conformer_id}, over the "
            f"limit of {max_rmsd:g} Å ({spell('max_rmsd')}); refused"
        )
    return float(own)


def _resolve_term(files: list[_OutputFile], term: EnergyTerm) -> EnergyTerm:
    if term is not EnergyTerm.AUTO:
        return term
    for candidate in (EnergyTerm.FREE_ENERGY, EnergyTerm.CC, EnergyTerm.MP, EnergyTerm.ELECTRONIC):
        if all(_term_value(f.attrs, candidate) is not None for f in files):
            return candidate
    lacking = next(f.path.name for f in files if _term_value(f.attrs, EnergyTerm.ELECTRONIC) is None)
    raise InputError(f"{lacking}: cclib found no SCF energy in it; the files have no energy in common")


def _folder_energies(folder, ensemble, term: EnergyTerm, max_rmsd: float):
    files, passed = read_output_folder(folder)
    term = _resolve_term(files, term)
    known = {c.id for c in ensemble.conformers}
    out = []
    for f in files:
        if f.conformer_id not in known:
            raise InputError(f"{f.path.name}: the saved result has no conformer {f.conformer_id} (its ids are 0-{max(known)})")
        charge, mult = f.attrs.get("charge"), f.attrs.get("mult")
        if (charge is not None and int(charge) != ensemble.charge) or (mult is not None and int(mult) != ensemble.multiplicity):
            raise InputError(
                f"{f.path.name}: charge {charge} and multiplicity {mult}, the saved result has charge {ensemble.charge} "
                f"and multiplicity {ensemble.multiplicity}"
            )
        rmsd = _check_geometry(f, ensemble, max_rmsd)
        value = _term_value(f.attrs, term)
        if value is None:
            raise InputError(f"{f.path.name}: cclib found no {term.value} energy in it ({_TERM_TEXT[term]})")
        electronic = _term_value(f.attrs, EnergyTerm.ELECTRONIC) if term is EnergyTerm.FREE_ENERGY else None
        temp = f.attrs.get("temperature")
        out.append(
            ExternalEnergy(f.conformer_id, value, term, f.path.name, electronic, rmsd, None if temp is None else float(temp))
        )
    return out, files, passed


def _level_from_metadata(files: list[_OutputFile]) -> str | None:
    """``METHOD/BASIS (PROGRAM)`` when every file's cclib metadata names the same; None otherwise."""
    names = set()
    for f in files:
        meta = f.attrs.get("metadata") or {}
        method = meta.get("functional") or (meta.get("methods") or [None])[-1]
        basis, package = meta.get("basis_set"), meta.get("package")
        if not (method and basis):
            return None
        names.add(f"{method}/{basis}" + (f" ({package})" if package else ""))
    return names.pop() if len(names) == 1 else None


# ------------------------------------------------------------------ the stage
def _load(result):
    from chairbuild.result import Ensemble, load_json

    if isinstance(result, Ensemble):
        return result
    if isinstance(result, (str, Path)):
        return load_json(result)
    raise OptionError(f"expected an Ensemble or the path of a saved JSON result, got {type(result).__name__}")


def _geometry_level(method: str) -> str:
    """The level of a saved result's geometries: what follows the last ``//``, else the method."""
    return method.rsplit("//", 1)[-1]


def _thermal_level(ensemble) -> str:
    from chairbuild.levels.chain import RRHO_KEY

    has = ("thermo", RRHO_KEY) in ensemble.ranking_terms and all(RRHO_KEY in c.thermo for c in ensemble.conformers)
    if not has:
        raise OptionError(
            f"{spell('add_thermal_correction')} needs a saved result ranked with frequencies (its formula is "
            f"{ensemble.ranking_formula or ensemble.method!r}); analyse with a frequency stage, e.g. 'gfn2:optimise+frequencies'"
        )
    match = re.search(r"G_RRHO\[(.+)\]$", ensemble.ranking_formula)
    return match.group(1) if match else _geometry_level(ensemble.method)


def reweight(
    result,
    energies,
    *,
    energy_term: EnergyTerm | str = EnergyTerm.AUTO,
    level_name: str | None = None,
    max_rmsd: float = DEFAULT_MAX_RMSD_A,
    add_thermal_correction: bool = False,
    window: float | None = None,
):
    """Re-rank a saved ensemble with energies computed elsewhere (see the module text).

    Parameters
    ----------
    result : Ensemble, str or pathlib.Path
        The saved result, or the path of its JSON export (one result).
    energies : str, pathlib.Path or Mapping[int, float]
        A CSV file, a folder of output files cclib reads, or ``{conformer id: kJ/mol}``.
    energy_term : EnergyTerm or str
        Which energy of the files ranks (default ``auto``); for a CSV or mapping, what its
        numbers are.
    level_name : str, optional
        Name of the user's level in the result (default: from the files' cclib metadata when
        they agree, else ``"user level"``).
    max_rmsd : float
        Å: largest RMSD between a file's geometry and its conformer (default 0.5).
    add_thermal_correction : bool
        Add the saved result's thermal correction G_RRHO to an energy term.
    window : float, optional
        kJ/mol: keep conformers within this of the lowest (default: the saved result's window).

    Returns
    -------
    chairbuild.result.Ensemble
        A new ensemble ranked at the user's level; conformers without a user energy are left
        out with a note.

    Raises
    ------
    InputError
        Unreadable or mismatched energies (the message names the file or row).
    OptionError
        A bad option value or combination.
    """
    from chairbuild.levels.chain import RRHO_KEY

    ens = _load(result)
    term = EnergyTerm.parse(energy_term)
    if not (np.isfinite(max_rmsd) and max_rmsd > 0):
        raise OptionError(f"{spell('max_rmsd')} must be a positive number of Å, got {max_rmsd!r}")
    window = ens.window if window is None else float(window)
    if not (np.isfinite(window) and window > 0):
        raise OptionError(f"{spell('window')} must be a positive energy, got {window!r}")
    files: list[_OutputFile] = []
    passed: list[str] = []
    if isinstance(energies, Mapping):
        source = "mapping"
        t = EnergyTerm.ELECTRONIC if term is EnergyTerm.AUTO else term
        items = [ExternalEnergy(int(k), float(v), t, f"conformer {k}") for k, v in energies.items()]
        bad = [i.source for i in items if not np.isfinite(i.value)]
        if bad or not items:
            raise InputError(f"energies must be finite numbers (kJ/mol) for at least one conformer; not finite: {', '.join(bad)}")
    elif Path(energies).is_dir():
        source = "cclib"
        items, files, passed = _folder_energies(energies, ens, term, max_rmsd)
    elif Path(energies).suffix.lower() == ".csv":
        source = "csv"
        items = read_energy_csv(energies, term)
    else:
        raise InputError(f"{str(energies)!r} is neither a folder of output files nor a .csv file of energies")
    term = items[0].term
    if add_thermal_correction and term is EnergyTerm.FREE_ENERGY:
        raise OptionError(
            f"{spell('add_thermal_correction')} adds a thermal correction to an energy; the free energies read already hold one"
        )
    known = {c.id: c for c in ens.conformers}
    for item in items:
        if item.conformer_id not in known:
            raise InputError(f"{item.source}: the saved result has no conformer {item.conformer_id} (its ids are 0-{max(known)})")
    rrho_level = _thermal_level(ens) if add_thermal_correction else None
    level = level_name or _level_from_metadata(files) or DEFAULT_LEVEL_NAME
    if not str(level).strip():
        raise OptionError(f"{spell('level_name')} must not be empty")
    rmsds = [i.rmsd for i in items if i.rmsd is not None]
    single_points = not rmsds or max(rmsds) <= SAME_GEOMETRY_RMSD_A
    key = f"{level}//{_geometry_level(ens.method)}" if single_points else str(level)
    return _assemble(ens, items, key, term, rrho_level, window, source, files, passed, single_points, RRHO_KEY)


def _assemble(ens, items, key, term, rrho_level, window, source, files, passed, single_points, rrho_key):
    """The new ensemble: records, populations, families, couplings, formula, notes and provenance."""
    from rdkit import Chem

    from chairbuild.couplings.ensemble import compute_couplings
    from chairbuild.families import build_families
    from chairbuild.result import Ensemble
    from chairbuild.thermo import boltzmann_populations

    by_id = {c.id: c for c in ens.conformers}
    free = term is EnergyTerm.FREE_ENERGY
    ranked = []
    for item in items:
        rec = by_id[item.conformer_id]
        energies = dict(rec.energies)
        if free:
            if item.electronic is not None:
                energies[key] = item.electronic
            thermo = {"free_energy": item.value}
            if item.electronic is not None:
                thermo["energy"] = item.electronic
            value = item.value
        else:
            energies[key] = item.value
            thermo = {"energy": item.value}
            value = item.value
            if rrho_level is not None:
                old = dict(rec.thermo)
                rrho = old[rrho_key]
                thermo.update({k: v for k, v in old.items() if k not in ("energy", "enthalpy", "free_energy")})
                if "enthalpy" in old and "energy" in old:
                    thermo["enthalpy"] = item.value + old["enthalpy"] - old["energy"]
                thermo["free_energy"] = item.value + rrho
                value = item.value + rrho
        ranked.append((value, item, rec, energies, thermo))
    ranked.sort(key=lambda r: r[0])
    low = ranked[0][0]
    kept = [r for r in ranked if r[0] - low <= window]
    pops = boltzmann_populations(np.array([r[0] for r in kept]), ens.temperature, np.array([r[2].degeneracy for r in kept]))
    records = []
    for rank, ((value, item, rec, energies, thermo), p) in enumerate(zip(kept, pops)):
        where = f"energy from {item.source} (conformer {rec.id} of the saved result"
        where += f", RMSD {item.rmsd:.3f} Å)" if item.rmsd is not None else ")"
        records.append(
            replace(rec, id=rank, energies=energies, relative_energy=value - low, population=float(p), thermo=thermo, message=where)
        )
    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    families = build_families(records, len(ens.ring_atoms), ens.symbols, ens.temperature, _additive_scorer(mol, ens.ring_atoms))
    couplings = compute_couplings(mol, records, families, ens.ring_atoms, ens.temperature)
    if free:
        formula, terms = f"G = G[{key}]", (("thermo", "free_energy"),)
    elif rrho_level is not None:
        formula, terms = f"G = E[{key}] + G_RRHO[{rrho_level}]", (("energies", key), ("thermo", rrho_key))
    else:
        formula, terms = f"E = E[{key}]", (("energies", key),)
    notes = list(ens.notes) + _notes(ens, items, key, term, source, files, single_points)
    reached = {i.conformer_id for i in items}
    provenance = dict(ens.provenance)
    provenance["external_energies"] = {
        "source": source,
        "term": term.value,
        "reads": _TERM_TEXT[term] if source == "cclib" else f"{term.value} energies as given",
        "level": key,
        "saved_method": ens.method,
        "saved_formula": ens.ranking_formula,
        "files": {str(i.conformer_id): i.source for i in items},
        "rmsd_A": {str(i.conformer_id): None if i.rmsd is None else round(i.rmsd, 4) for i in items},
        "passed_over": list(passed),
        "left_out": sorted(c.id for c in ens.conformers if c.id not in reached),
        "cclib": _cclib_version() if source == "cclib" else None,
    }
    return Ensemble(
        name=ens.name,
        smiles=ens.smiles,
        mol_block=ens.mol_block,
        symbols=ens.symbols,
        ring_atoms=ens.ring_atoms,
        method=key,
        ranking="free_energy" if (free or rrho_level is not None) else "energy",
        temperature=ens.temperature,
        window=window,
        conformers=tuple(records),
        rejected=ens.rejected,
        families=families,
        notes=tuple(notes),
        provenance=provenance,
        charge=ens.charge,
        multiplicity=ens.multiplicity,
        outside_window=len(ranked) - len(kept),
        ranking_formula=formula,
        ranking_terms=terms,
        couplings=couplings,
    )


def _notes(ens, items, key, term, source, files, single_points) -> list[str]:
    reached = {i.conformer_id for i in items}
    missing = sorted(c.id for c in ens.conformers if c.id not in reached)
    what = _TERM_TEXT[term] if source == "cclib" else f"{term.value} energies as given"
    saved = ens.ranking_formula or ens.method
    notes = [f"ranked at {key} with energies brought by the user ({source}: {what}), in place of the saved ranking {saved}"]
    if source == "cclib" and term in (EnergyTerm.ELECTRONIC, EnergyTerm.MP, EnergyTerm.CC):
        separate = sum(1 for f in files if f.attrs.get("dispersionenergies") is not None)
        if separate:
            notes.append(
                f"{separate} file(s) also report a dispersion correction apart from the SCF energy; it was not added "
                f"(whether the SCF energy includes it depends on the program; {spell('energy_term', 'electronic+dispersion')} adds it)"
            )
    if missing:
        shown = ", ".join(map(str, missing[:10])) + (", ..." if len(missing) > 10 else "")
        notes.append(f"{len(missing)} conformer(s) of the saved result have no energy at {key} and were left out (ids {shown})")
    if not single_points:
        worst = max(i.rmsd for i in items if i.rmsd is not None)
        notes.append(
            f"the files hold geometries re-optimised at the user's level (RMSD up to {worst:.3f} Å from the exported ones); "
            "shapes and positions are those of the exported geometries"
        )
    temps = {round(i.temperature, 2) for i in items if i.temperature is not None}
    if term is EnergyTerm.FREE_ENERGY and any(abs(t - ens.temperature) > _TEMPERATURE_TOLERANCE_K for t in temps):
        notes.append(
            f"the files' free energies are for {', '.join(f'{t:g} K' for t in sorted(temps))}, the populations for "
            f"{ens.temperature:g} K"
        )
    return notes


def _additive_scorer(mol, ring_atoms):
    from chairbuild.forcefields.additive import AdditiveModel

    models = {k: AdditiveModel(mol, [list(atoms)]) for k, atoms in enumerate(ring_atoms)}

    def score(ring_index: int, coords: np.ndarray):
        est = models[ring_index].evaluate(coords)
        return list(est.terms), list(est.unscored), list(est.caveats)

    return score


def _cclib_version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("cclib")
    except PackageNotFoundError:
        return "unknown"
