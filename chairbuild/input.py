"""Read the molecule: SMILES or SDF/MOL file, hydrogens, and stereochemistry decisions.

Atom order of everything downstream: the input's heavy atoms in input order, then the
hydrogens (RDKit's ``AddHs`` appends them), whatever the input's own hydrogen order.

Stereochemistry rules:

* fully specified input is analysed as given;
* undefined stereo that only decides between mirror images (all possible assignments
  fall into one enantiomer pair) is analysed as one enantiomer, with a note, since
  mirror images have the same conformer energies;
* undefined stereo that decides between diastereomers raises :class:`StereoError`
  naming the atoms, unless ``enumerate_stereo`` asks for every diastereomer (one
  enantiomer of each).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from rdkit import Chem, rdBase
from rdkit.Chem.EnumerateStereoisomers import EnumerateStereoisomers, StereoEnumerationOptions

from chairbuild.errors import InputError, StereoError
from chairbuild.optnames import spell

__all__ = ["PreparedMolecule", "read_molecules", "mirror_smiles", "canonical_smiles", "charge_and_multiplicity"]

_FILE_SUFFIXES = {".sdf", ".sd", ".mol", ".mdl"}
#: Text files of SMILES, one molecule per line (``SMILES [name]``; ``#`` starts a comment line).
_SMILES_SUFFIXES = {".smi", ".smiles", ".txt"}
#: At most this many diastereomers are enumerated with ``enumerate_stereo``.
MAX_STEREOISOMERS = 32


@dataclass(frozen=True)
class PreparedMolecule:
    """One molecule ready for the pipeline.

    Attributes
    ----------
    mol : rdkit.Chem.Mol
        With explicit hydrogens (heavy atoms first, in input order) and stereo assigned.
    name : str
    smiles : str
        Canonical isomeric SMILES (no explicit hydrogens).
    notes : tuple of str
    achiral : bool
        True when the molecule is superposable on its mirror image.
    """

    mol: Chem.Mol
    name: str
    smiles: str
    notes: tuple[str, ...]
    achiral: bool


def charge_and_multiplicity(mol: Chem.Mol) -> tuple[int, int]:
    """Total charge (sum of formal charges) and spin multiplicity 2S + 1 of ``mol``.

    The number of unpaired electrons is RDKit's count of radical electrons (a SMILES
    atom in brackets with fewer hydrogens than its valence, e.g. ``[CH2]``); every
    unpaired electron is taken as high spin, so a monoradical is a doublet and a
    diradical a triplet.
    """
    charge = sum(a.GetFormalCharge() for a in mol.GetAtoms())
    unpaired = sum(a.GetNumRadicalElectrons() for a in mol.GetAtoms())
    return int(charge), int(unpaired) + 1


def canonical_smiles(mol: Chem.Mol) -> str:
    """Canonical isomeric SMILES without explicit hydrogens."""
    return Chem.MolToSmiles(Chem.RemoveHs(mol), isomericSmiles=True)


def _mirror(mol: Chem.Mol) -> Chem.Mol:
    mirrored = Chem.Mol(mol)
    for atom in mirrored.GetAtoms():
        tag = atom.GetChiralTag()
        if tag == Chem.ChiralType.CHI_TETRAHEDRAL_CW:
            atom.SetChiralTag(Chem.ChiralType.CHI_TETRAHEDRAL_CCW)
        elif tag == Chem.ChiralType.CHI_TETRAHEDRAL_CCW:
            atom.SetChiralTag(Chem.ChiralType.CHI_TETRAHEDRAL_CW)
    Chem.AssignStereochemistry(mirrored, cleanIt=True, force=True)
    return mirrored


def mirror_smiles(mol: Chem.Mol) -> str:
    """Canonical SMILES of the mirror image of ``mol``."""
    return canonical_smiles(_mirror(mol))


def _count_sdf_records(path: Path) -> int:
    """Number of ``$$$$``-terminated records (a last record without the terminator counts too)."""
    count, pending = 0, False
    with path.open("r", encoding="utf-8", errors="replace") as fh:
        for line in fh:
            if line.startswith("$$$$"):
                count, pending = count + 1, False
            elif line.strip():
                pending = True
    return count + int(pending)


def _several_records_note(path: Path, count: int, what: str) -> str:
    return (
        f"{str(path)!r} holds {count} {what}s; analysed {what} 1 only. Choose another with "
        f"{spell('record')} N, or analyse all of them with the 'chairbuild batch' command"
    )


def _read_file(path: Path, record: int | None) -> tuple[Chem.Mol, str, list[str]]:
    if not path.is_file():
        raise InputError(f"cannot read {str(path)!r}: no such file")
    index = 1 if record is None else record
    if index < 1:
        raise InputError(f"{spell('record')} counts from 1, got {index}")
    try:
        supplier = Chem.SDMolSupplier(str(path), removeHs=False, sanitize=True)
    except OSError as exc:
        raise InputError(f"cannot read {str(path)!r}: {exc}") from None
    count = 0
    for count, mol in enumerate(supplier, start=1):
        if count == index:
            if mol is None:
                raise InputError(f"record {index} of {str(path)!r} is not a valid molecule")
            name = mol.GetProp("_Name") if mol.HasProp("_Name") and mol.GetProp("_Name").strip() else f"{path.stem}#{index}"
            if mol.GetNumConformers() and mol.GetConformer().Is3D():
                Chem.AssignStereochemistryFrom3D(mol)
            notes = []
            if record is None:
                total = _count_sdf_records(path)
                if total > 1:
                    notes.append(_several_records_note(path, total, "record"))
            return mol, name, notes
    if count == 0:
        raise InputError(f"{str(path)!r} holds no molecule record")
    raise InputError(f"{str(path)!r} has {count} record(s); record {index} does not exist")


def _smiles_lines(path: Path) -> list[tuple[str, str]]:
    """``(smiles, name)`` of each molecule line of a SMILES file (blank and ``#`` lines skipped)."""
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {str(path)!r}: {getattr(exc, 'strerror', None) or exc}") from None
    entries = []
    for line in text.splitlines():
        fields = line.split(None, 1)
        if not fields or fields[0].startswith("#"):
            continue
        if not entries and fields[0].lower() == "smiles":  # a header line
            continue
        entries.append((fields[0], fields[1].strip() if len(fields) > 1 else ""))
    return entries


def _read_smiles_file(path: Path, record: int | None) -> tuple[Chem.Mol, str, list[str]]:
    if not path.is_file():
        raise InputError(f"cannot read {str(path)!r}: no such file")
    index = 1 if record is None else record
    if index < 1:
        raise InputError(f"{spell('record')} counts from 1, got {index}")
    entries = _smiles_lines(path)
    if not entries:
        raise InputError(f"{str(path)!r} holds no SMILES line")
    if index > len(entries):
        raise InputError(f"{str(path)!r} has {len(entries)} SMILES line(s); line {index} does not exist")
    smiles, name = entries[index - 1]
    mol = _mol_from_smiles(smiles, where=f" (molecule {index} of {str(path)!r})")
    notes = [_several_records_note(path, len(entries), "molecule")] if record is None and len(entries) > 1 else []
    return mol, name or smiles, notes


def _mol_from_smiles(text: str, where: str = "") -> Chem.Mol:
    with rdBase.BlockLogs():  # RDKit's own parse messages; the caller's log settings are left as they are
        mol = Chem.MolFromSmiles(text)
    if mol is None:
        raise InputError(f"invalid SMILES {text!r}{where}")
    return mol


def _from_rdkit(source: Chem.Mol) -> tuple[Chem.Mol, str]:
    """A copy of a caller's RDKit molecule (stereo from 3D coordinates when it has them)."""
    mol = Chem.Mol(source)
    if mol.GetNumAtoms() == 0:
        raise InputError("the RDKit molecule has no atoms")
    try:
        Chem.SanitizeMol(mol)
    except Chem.rdchem.MolSanitizeException as exc:
        raise InputError(f"the RDKit molecule does not sanitize: {exc}") from None
    if mol.GetNumConformers() and mol.GetConformer().Is3D():
        Chem.AssignStereochemistryFrom3D(mol)
    name = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else ""
    return mol, name or canonical_smiles(mol)


def _parse(source: "str | Chem.Mol", record: int | None) -> tuple[Chem.Mol, str, list[str]]:
    if isinstance(source, Chem.Mol):
        if record is not None:
            raise InputError(f"{spell('record')} applies to SDF/MOL and SMILES files only, not to an RDKit molecule")
        mol, name = _from_rdkit(source)
        return mol, name, []
    if not isinstance(source, (str, Path)):
        raise InputError(f"expected a SMILES string, a file path or an RDKit Mol, got {type(source).__name__}")
    text = str(source).strip()
    if not text:
        raise InputError("empty input: give a SMILES string or an SDF/MOL file")
    path = Path(text)
    if path.is_dir():
        raise InputError(f"{text!r} is a directory; give a SMILES string or an SDF/MOL file")
    if path.suffix.lower() in _SMILES_SUFFIXES:
        return _read_smiles_file(path, record)
    if path.suffix.lower() in _FILE_SUFFIXES or path.is_file():
        return _read_file(path, record)
    if record is not None:
        raise InputError(f"{spell('record')} applies to SDF/MOL and SMILES files only")
    return _mol_from_smiles(text), text, []


def _unassigned_stereo_atoms(mol: Chem.Mol) -> list[str]:
    labels = []
    for info in Chem.FindPotentialStereo(mol):
        if info.specified == Chem.StereoSpecified.Unspecified:
            if info.type == Chem.StereoType.Atom_Tetrahedral:
                a = mol.GetAtomWithIdx(info.centeredOn)
                labels.append(f"atom {info.centeredOn} ({a.GetSymbol()})")
            elif info.type == Chem.StereoType.Bond_Double:
                b = mol.GetBondWithIdx(info.centeredOn)
                labels.append(f"double bond {b.GetBeginAtomIdx()}={b.GetEndAtomIdx()}")
    return labels


def _largest_fragment(mol: Chem.Mol) -> tuple[Chem.Mol, list[str]]:
    """The fragment with the most heavy atoms, and the SMILES of the fragments dropped."""
    frags = Chem.GetMolFrags(mol, asMols=True, sanitizeFrags=True)
    if len(frags) <= 1:
        return mol, []
    order = sorted(range(len(frags)), key=lambda k: -frags[k].GetNumHeavyAtoms())
    keep = frags[order[0]]
    dropped = [Chem.MolToSmiles(frags[k]) for k in order[1:]]
    return keep, dropped


def _with_hydrogens(mol: Chem.Mol) -> Chem.Mol:
    heavy = Chem.RemoveHs(mol, sanitize=True)
    if heavy.GetNumAtoms() == 0:
        raise InputError("the molecule has no heavy atoms")
    Chem.AssignStereochemistry(heavy, cleanIt=True, force=True)
    return Chem.AddHs(heavy)


def read_molecules(
    source: "str | Path | Chem.Mol",
    record: int | None = None,
    enumerate_stereo: bool = False,
    name: str | None = None,
) -> list[PreparedMolecule]:
    """Read a SMILES string or a file and apply the stereochemistry rules.

    Parameters
    ----------
    source : str, pathlib.Path or rdkit.Chem.Mol
        SMILES, the path of an SDF/MOL file, of a ``.smi``/``.smiles``/``.txt`` file of
        SMILES lines (``SMILES [name]``), or an RDKit molecule (with or without hydrogens
        and 3D coordinates; stereo is taken from 3D coordinates when present).
    record : int, optional
        1-based record number in a multi-record SDF, or molecule line of a SMILES file
        (default: the first, with a note when there are more).
    enumerate_stereo : bool
        Analyse every diastereomer when stereo is undefined.
    name : str, optional
        Name for the result (default: the SDF title or the SMILES).

    Returns
    -------
    list of PreparedMolecule
        One entry, or one per diastereomer with ``enumerate_stereo``.

    Raises
    ------
    InputError, StereoError
    """
    mol, default_name, notes = _parse(source, record)
    name = name or default_name
    mol, dropped = _largest_fragment(mol)
    if dropped:
        notes.append(
            f"kept the largest fragment and removed {', '.join(dropped)} (salts and solvents are not analysed); "
            "atom indices refer to the kept fragment"
        )
    heavy = Chem.RemoveHs(mol)
    Chem.AssignStereochemistry(heavy, cleanIt=True, force=True)
    unassigned = _unassigned_stereo_atoms(heavy)
    if not unassigned:
        candidates = [heavy]
    else:
        opts = StereoEnumerationOptions(onlyUnassigned=True, unique=True, maxIsomers=4 * MAX_STEREOISOMERS)
        isomers = [Chem.Mol(m) for m in EnumerateStereoisomers(heavy, options=opts)]
        classes: dict[str, Chem.Mol] = {}
        for iso in isomers:
            smi = canonical_smiles(iso)
            mirror = mirror_smiles(iso)
            if smi in classes or mirror in classes:
                continue
            classes[smi] = iso
        only = next(iter(classes))
        if len(classes) == 1 and not any(mark in only for mark in ("@", "/", "\\")):
            candidates = list(classes.values())  # the flagged centres are not stereogenic after all
        elif len(classes) == 1:
            candidates = list(classes.values())
            notes.append(
                f"stereochemistry undefined at {', '.join(unassigned)} only decides between mirror images; "
                f"analysed as {next(iter(classes))} (mirror images have the same conformer energies)"
            )
        elif not enumerate_stereo:
            raise StereoError(
                f"undefined stereochemistry at {', '.join(unassigned)} decides between "
                f"{len(classes)} diastereomers; specify it or use {spell('enumerate_stereo', True)}"
            )
        else:
            if len(classes) > MAX_STEREOISOMERS:
                raise StereoError(f"{len(classes)} diastereomers exceed the limit of {MAX_STEREOISOMERS}")
            candidates = list(classes.values())
            notes.append(f"stereochemistry undefined at {', '.join(unassigned)}: {len(classes)} diastereomers analysed separately")
    out = []
    for k, cand in enumerate(candidates):
        with_h = _with_hydrogens(cand)
        smi = canonical_smiles(with_h)
        label = name if len(candidates) == 1 or not enumerate_stereo else f"{name} [{smi}]"
        out.append(
            PreparedMolecule(
                mol=with_h,
                name=label,
                smiles=smi,
                notes=tuple(notes),
                achiral=(smi == mirror_smiles(with_h)),
            )
        )
    return out
