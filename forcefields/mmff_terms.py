"""MMFF94/MMFF94s parameters from RDKit, one OpenMM force per MMFF term, and the
model Hessian that preconditions the minimiser.

* :func:`extract_parameters` reads every term's parameters for one molecule from RDKit's
  MMFF implementation (``rdForceFieldHelpers.MMFFGetMoleculeProperties``) and selects
  the terms exactly as RDKit's MMFF builder does;
* one builder per term (:func:`_bond_force`, :func:`_angle_force`, ...) turns them into
  an OpenMM ``Custom*Force`` with per-term parameters in OpenMM's units (nm, rad,
  kJ/mol), for ``n_copies`` non-interacting copies of the molecule (copy ``c`` owns
  particles ``c*n_atoms ... (c+1)*n_atoms-1``);
* :class:`Preconditioner` inverts the Gauss-Newton Hessian of the valence terms.

The functional forms are those of Halgren, J. Comput. Chem. 1996, 17, 490 (MMFF94) and
17, 616 (MMFF94s): 143.9325 (md Å^-1 -> kcal mol^-1 Å^-2), 2.51210 (= 143.9325 pi/180),
0.043844 (= 143.9325 (pi/180)^2) and 332.0716 (kcal Å mol^-1 e^-2) are MMFF parameters,
not unit conversions of this project; every other factor comes from
:mod:`chairbuild.constants`.
"""

from __future__ import annotations

import math
import os
import sys
import tempfile
from dataclasses import dataclass
from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np
import openmm

from chairbuild.constants import ANGSTROM_TO_NM, KCAL_TO_KJ, NM_TO_ANGSTROM
from chairbuild.errors import ForceFieldError, OptionError

if TYPE_CHECKING:
    from rdkit import Chem

__all__ = [
    "MMFFParameters",
    "TERM_GROUPS",
    "RESTRAINT_GROUP",
    "VARIANTS",
    "extract_parameters",
    "build_forces",
    "restraint_force",
    "Preconditioner",
]

#: MMFF force-field constant: md Å^-1 -> kcal mol^-1 Å^-2 (Halgren 1996, eq. 2).
MDYNE_A_TO_KCAL_MOL = 143.9325
#: MMFF cubic bond-stretch constant cs, Å^-1 (Halgren 1996, eq. 2).
BOND_CS = -2.0
#: MMFF cubic angle-bend constant cb, deg^-1 (Halgren 1996, eq. 3).
ANGLE_CB = -0.006981317
#: MMFF electrostatic conversion factor, kcal Å mol^-1 e^-2 (Halgren 1996, eq. 9).
ELECTROSTATIC_FACTOR = 332.0716
#: MMFF electrostatic buffering distance delta, Å (Halgren 1996, eq. 9).
ELECTROSTATIC_BUFFER = 0.05
#: MMFF scaling of 1-4 electrostatic interactions (Halgren 1996, eq. 9).
ONE_FOUR_ELECTROSTATIC_SCALE = 0.75
#: MMFF buffered 14-7 constants delta and gamma (Halgren 1996, eq. 8).
VDW_DELTA = 0.07
VDW_GAMMA = 0.12
#: MMFF atom types whose ``lin`` flag is set in MMFFPROP.PAR (linear centre: CSP
#: triple-bonded / allenic carbon, =N= and isonitrile N). RDKit evaluates angles at
#: such a centre with the linear form and adds no stretch-bend term there.
LINEAR_ATOM_TYPES = frozenset({4, 53, 61})
#: Elements (atomic numbers) MMFF94 has atom types for (MMFFPROP.PAR, column aspec).
MMFF_ELEMENTS = frozenset({1, 3, 6, 7, 8, 9, 11, 12, 14, 15, 16, 17, 19, 20, 26, 29, 30, 35, 53})
#: Torsions are taken about bonds matching this SMARTS with both ends sp2 or sp3,
#: as RDKit's MMFF builder does (its ``DefaultTorsionBondSmarts``).
TORSION_BOND_SMARTS = "[!$(*#*)&!D1]~[!$(*#*)&!D1]"
#: Partial charges below this magnitude count as zero (RDKit's ``isDoubleZero``).
ZERO_CHARGE = 1.0e-10

#: Factor keeping the arguments of acos/asin written on coordinates inside [-1, 1]
#: despite rounding (RDKit clips them); it moves an angle by ~1e-15 rad. Cheaper for
#: OpenMM to compile than an explicit clip.
_SHRINK = 1.0 - 1.0e-14

#: Preconditioner: diagonal shift (kJ mol^-1 Å^-2), floor of torsion constants (kJ mol^-1 rad^-2).
_PRECOND_SHIFT = 1.0 * KCAL_TO_KJ
_PRECOND_TORSION_FLOOR = 2.0 * KCAL_TO_KJ

#: Force group of each MMFF term in every System built here.
TERM_GROUPS: dict[str, int] = {
    "bond": 0,
    "angle": 1,
    "stretch_bend": 2,
    "oop": 3,
    "torsion": 4,
    "vdw": 5,
    "electrostatic": 6,
}
#: Force group of the optional dihedral restraints (never part of the MMFF energy).
RESTRAINT_GROUP = 7
#: Recognised spellings of the two variants -> RDKit's name.
VARIANTS: dict[str, str] = {"MMFF94": "MMFF94", "MMFF94S": "MMFF94s"}


@dataclass(frozen=True)
class MMFFParameters:
    """Every MMFF term of one molecule, in RDKit's own units (Å, degrees, kcal/mol).

    Attributes
    ----------
    n_atoms : int
        Number of atoms (hydrogens included).
    variant : str
        ``"MMFF94"`` or ``"MMFF94s"``.
    dielectric : float
        Dielectric constant D.
    distance_dependent : bool
        True for the distance-dependent dielectric D*(R+0.05).
    atom_types : numpy.ndarray
        MMFF symbolic atom type of every atom, shape ``(n_atoms,)``.
    charges : numpy.ndarray
        MMFF partial charges, e.
    bonds, bond_kb, bond_r0
        Atom pairs ``(n, 2)``, force constants (md/Å), rest lengths (Å).
    angles, angle_ka, angle_theta0, angle_linear
        Triples ``(n, 3)`` (centre in the middle), md Å/rad^2, degrees, linear flag.
    stbn, stbn_kijk, stbn_kkji, stbn_r0ij, stbn_r0kj, stbn_theta0
        Stretch-bend triples, the two force constants (md/rad), rest lengths and angle.
    oops, oop_koop
        Quadruples ``(i, centre, k, l)`` (bond centre-l leaves plane i-centre-k), md Å/rad^2.
    torsions, torsion_v
        Quadruples ``(n, 4)`` and V1, V2, V3 ``(n, 3)`` (kcal/mol).
    vdw_pairs, vdw_rstar, vdw_eps
        Pairs 1-4 or further apart, R*_ij (Å), epsilon_ij (kcal/mol).
    ele_pairs, ele_qq, ele_one_four
        Such pairs with both charges non-zero, ``q_i q_j / D`` (e^2), 1-4 flag.
    dihedrals : numpy.ndarray
        Every bonded quadruple i-j-k-l ``(n, 4)``: the slots of the restraint force.
    """

    n_atoms: int
    variant: str
    dielectric: float
    distance_dependent: bool
    atom_types: np.ndarray
    charges: np.ndarray
    bonds: np.ndarray
    bond_kb: np.ndarray
    bond_r0: np.ndarray
    angles: np.ndarray
    angle_ka: np.ndarray
    angle_theta0: np.ndarray
    angle_linear: np.ndarray
    stbn: np.ndarray
    stbn_kijk: np.ndarray
    stbn_kkji: np.ndarray
    stbn_r0ij: np.ndarray
    stbn_r0kj: np.ndarray
    stbn_theta0: np.ndarray
    oops: np.ndarray
    oop_koop: np.ndarray
    torsions: np.ndarray
    torsion_v: np.ndarray
    vdw_pairs: np.ndarray
    vdw_rstar: np.ndarray
    vdw_eps: np.ndarray
    ele_pairs: np.ndarray
    ele_qq: np.ndarray
    ele_one_four: np.ndarray
    dihedrals: np.ndarray


# --------------------------------------------------------------------------------------
# Validation and parameter extraction
# --------------------------------------------------------------------------------------


def _normalise_variant(variant: str) -> str:
    key = str(variant).upper()
    if key not in VARIANTS:
        raise OptionError(f"unknown MMFF variant {variant!r}; use 'MMFF94' or 'MMFF94s'")
    return VARIANTS[key]


def _check_molecule(mol: Chem.Mol) -> None:
    """Raise ForceFieldError for an empty molecule or one with implicit hydrogens."""
    if mol is None or mol.GetNumAtoms() == 0:
        raise ForceFieldError("MMFF: the molecule has no atoms")
    implied = [
        f"atom {a.GetIdx()} ({a.GetSymbol()}) carries {a.GetTotalNumHs()} implicit H"
        for a in mol.GetAtoms()
        if a.GetTotalNumHs(includeNeighbors=False) > 0
    ]
    if implied:
        raise ForceFieldError(
            "MMFF needs every hydrogen as an atom; add explicit hydrogens "
            "(rdkit.Chem.AddHs) first: " + "; ".join(implied[:10])
        )


def _untyped_atoms(mol: Chem.Mol, variant: str) -> list[str]:
    """Return one description per atom RDKit could not give an MMFF type."""
    from rdkit.Chem import rdForceFieldHelpers

    bad = [
        f"atom {a.GetIdx()} ({a.GetSymbol()}): MMFF has no atom type for element {a.GetSymbol()}"
        for a in mol.GetAtoms()
        if a.GetAtomicNum() not in MMFF_ELEMENTS
    ]
    if bad:
        return bad
    # Every element is covered, so the typing rules failed on some atom. RDKit only
    # reports which one in its verbose table (written by C++ to file descriptor 1).
    stdout_fd = 1
    sys.stdout.flush()
    saved = os.dup(stdout_fd)
    with tempfile.TemporaryFile() as sink:
        os.dup2(sink.fileno(), stdout_fd)
        try:
            rdForceFieldHelpers.MMFFGetMoleculeProperties(mol, mmffVariant=variant, mmffVerbosity=2)
        finally:
            os.dup2(saved, stdout_fd)
            os.close(saved)
        sink.seek(0)
        table = sink.read().decode(errors="replace")
    for line in table.splitlines():
        fields = line.split()
        if len(fields) >= 3 and fields[1].startswith("#") and fields[2] == "0":
            idx = int(fields[1][1:]) - 1
            sym = mol.GetAtomWithIdx(idx).GetSymbol()
            bad.append(f"atom {idx} ({sym}): no MMFF atom type matches its bonding")
    return bad or ["RDKit assigned no MMFF atom type to some atom (not identified)"]


def extract_parameters(
    mol: Chem.Mol,
    variant: str = "MMFF94",
    dielectric: float = 1.0,
    distance_dependent: bool = False,
) -> MMFFParameters:
    """Read all MMFF terms of ``mol`` from RDKit, selected exactly as RDKit does.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogens (not modified: a copy is typed).
    variant : str
        ``"MMFF94"`` or ``"MMFF94s"``.
    dielectric : float
        Dielectric constant D (> 0).
    distance_dependent : bool
        Use the distance-dependent dielectric D*(R+0.05).

    Returns
    -------
    MMFFParameters

    Raises
    ------
    ForceFieldError
        Empty molecule, implicit hydrogens, an atom MMFF cannot type (named by
        index and element) or missing parameters.
    OptionError
        Unknown variant or non-positive dielectric.

    Notes
    -----
    Term selection follows RDKit's MMFF builder: angles at every atom of degree > 1;
    the linear form at centres whose type has MMFF's ``lin`` flag (and no
    stretch-bend there); three Wilson out-of-plane terms per tricoordinate centre;
    torsions about bonds matching :data:`TORSION_BOND_SMARTS` whose two atoms are sp2
    or sp3, skipping three-membered rings; van der Waals and electrostatics for pairs
    at least three bonds apart by shortest path (1-4 electrostatics scaled by 0.75,
    electrostatics skipped where a charge is zero), none between disconnected fragments
    (RDKit's default ``ignoreInterfragInteractions``). RDKit also drops non-bonded pairs
    farther apart than 100 Å in the starting geometry; this System keeps every pair,
    which is identical for any molecule smaller than 100 Å.
    """
    from rdkit import Chem
    from rdkit.Chem import rdForceFieldHelpers

    rd_variant = _normalise_variant(variant)
    dielectric = float(dielectric)
    if not math.isfinite(dielectric) or dielectric <= 0.0:
        raise OptionError(f"dielectric must be a positive number, got {dielectric!r}")
    _check_molecule(mol)
    mol = Chem.Mol(mol)
    n_atoms = mol.GetNumAtoms()

    props = rdForceFieldHelpers.MMFFGetMoleculeProperties(mol, mmffVariant=rd_variant)
    if props is None:
        raise ForceFieldError(
            f"{rd_variant} cannot type the molecule: " + "; ".join(_untyped_atoms(mol, rd_variant))
        )
    types = np.array([props.GetMMFFAtomType(i) for i in range(n_atoms)], dtype=int)
    charges = np.array([props.GetMMFFPartialCharge(i) for i in range(n_atoms)], dtype=float)
    missing: list[str] = []

    def label(*idx: int) -> str:
        return "-".join(f"{i}({mol.GetAtomWithIdx(i).GetSymbol()})" for i in idx)

    # Bond stretching.
    bonds, bond_kb, bond_r0 = [], [], []
    for bond in mol.GetBonds():
        i, j = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        p = props.GetMMFFBondStretchParams(mol, i, j)
        if p is None:
            missing.append(f"bond {label(i, j)}")
            continue
        bonds.append((i, j))
        bond_kb.append(p[1])
        bond_r0.append(p[2])
    bond_r0_of = {frozenset(b): r0 for b, r0 in zip(bonds, bond_r0)}

    # Angle bending and stretch-bend, centre j, neighbour pairs in RDKit's order.
    angles, angle_ka, angle_theta0, angle_linear = [], [], [], []
    stbn, stbn_kijk, stbn_kkji, stbn_r0ij, stbn_r0kj, stbn_theta0 = [], [], [], [], [], []
    for atom in mol.GetAtoms():
        if atom.GetDegree() < 2:
            continue
        j = atom.GetIdx()
        linear = int(types[j]) in LINEAR_ATOM_TYPES
        nbrs = [n.GetIdx() for n in atom.GetNeighbors()]
        for a in range(len(nbrs)):
            for b in range(a + 1, len(nbrs)):
                i, k = nbrs[a], nbrs[b]
                p = props.GetMMFFAngleBendParams(mol, i, j, k)
                if p is None:
                    missing.append(f"angle {label(i, j, k)}")
                    continue
                angles.append((i, j, k))
                angle_ka.append(p[1])
                angle_theta0.append(p[2])
                angle_linear.append(linear)
                if linear:
                    continue
                s = props.GetMMFFStretchBendParams(mol, i, j, k)
                if s is None:
                    missing.append(f"stretch-bend {label(i, j, k)}")
                    continue
                stbn.append((i, j, k))
                stbn_kijk.append(s[1])
                stbn_kkji.append(s[2])
                stbn_r0ij.append(bond_r0_of[frozenset((i, j))])
                stbn_r0kj.append(bond_r0_of[frozenset((k, j))])
                stbn_theta0.append(p[2])

    # Wilson out-of-plane bending: three permutations per tricoordinate centre.
    oops, oop_koop = [], []
    for atom in mol.GetAtoms():
        if atom.GetDegree() != 3:
            continue
        j = atom.GetIdx()
        n0, n1, n2 = (n.GetIdx() for n in atom.GetNeighbors())
        koop = props.GetMMFFOopBendParams(mol, n0, j, n1, n2)
        if koop is None:  # MMFF's rule (SURDOX02): no parameter, no term
            continue
        for quad in ((n0, j, n1, n2), (n0, j, n2, n1), (n1, j, n2, n0)):
            oops.append(quad)
            oop_koop.append(koop)

    # Torsions about the bonds RDKit's builder selects.
    torsions, torsion_v = [], []
    sp2_sp3 = (Chem.HybridizationType.SP2, Chem.HybridizationType.SP3)
    query = Chem.MolFromSmarts(TORSION_BOND_SMARTS)
    for j, k in mol.GetSubstructMatches(query, uniquify=True, maxMatches=1000):
        atom_j, atom_k = mol.GetAtomWithIdx(j), mol.GetAtomWithIdx(k)
        if atom_j.GetHybridization() not in sp2_sp3 or atom_k.GetHybridization() not in sp2_sp3:
            continue
        central = mol.GetBondBetweenAtoms(j, k)
        for bond1 in atom_j.GetBonds():
            if bond1.GetIdx() == central.GetIdx():
                continue
            i = bond1.GetOtherAtomIdx(j)
            for bond2 in atom_k.GetBonds():
                if bond2.GetIdx() in (central.GetIdx(), bond1.GetIdx()):
                    continue
                l_idx = bond2.GetOtherAtomIdx(k)
                if l_idx == i:  # three-membered ring
                    continue
                p = props.GetMMFFTorsionParams(mol, i, j, k, l_idx)
                if p is None:
                    missing.append(f"torsion {label(i, j, k, l_idx)}")
                    continue
                torsions.append((i, j, k, l_idx))
                torsion_v.append(p[1:4])

    # RDKit leaves out a term it finds no parameters for; that is only an error (and
    # is reported as one) where RDKit itself says parameters are missing.
    if missing and not rdForceFieldHelpers.MMFFHasAllMoleculeParams(mol):
        raise ForceFieldError(f"{rd_variant} has no parameters for: " + "; ".join(missing[:20]))

    # Non-bonded pairs: 1-4 and beyond by shortest path.
    topo = np.asarray(Chem.GetDistanceMatrix(mol), dtype=float)  # bonds on the shortest path
    fragment = np.zeros(n_atoms, dtype=int)
    for number, atoms in enumerate(Chem.GetMolFrags(mol)):
        fragment[list(atoms)] = number
    iu, ju = np.triu_indices(n_atoms, k=1)
    far = (topo[iu, ju] >= 3) & (fragment[iu] == fragment[ju])
    iu, ju = iu[far], ju[far]
    vdw_cache: dict[tuple[int, int], tuple[float, float]] = {}
    vdw_rstar = np.empty(len(iu))
    vdw_eps = np.empty(len(iu))
    for n, (i, j) in enumerate(zip(iu.tolist(), ju.tolist())):
        key = (int(types[i]), int(types[j]))
        if key not in vdw_cache:
            p = props.GetMMFFVdWParams(i, j)
            if p is None:
                raise ForceFieldError(f"{rd_variant} has no van der Waals parameters: {label(i, j)}")
            vdw_cache[key] = (p[2], p[3])
        vdw_rstar[n], vdw_eps[n] = vdw_cache[key]
    charged = (np.abs(charges[iu]) >= ZERO_CHARGE) & (np.abs(charges[ju]) >= ZERO_CHARGE)
    ei, ej = iu[charged], ju[charged]

    dihedrals = _bonded_dihedrals(mol)

    def arr(x: list, width: int, dtype: type = float) -> np.ndarray:
        out = np.asarray(x, dtype=dtype)
        return out.reshape(-1, width) if width else out

    return MMFFParameters(
        n_atoms=n_atoms,
        variant=rd_variant,
        dielectric=dielectric,
        distance_dependent=bool(distance_dependent),
        atom_types=types,
        charges=charges,
        bonds=arr(bonds, 2, int),
        bond_kb=arr(bond_kb, 0),
        bond_r0=arr(bond_r0, 0),
        angles=arr(angles, 3, int),
        angle_ka=arr(angle_ka, 0),
        angle_theta0=arr(angle_theta0, 0),
        angle_linear=arr(angle_linear, 0, bool),
        stbn=arr(stbn, 3, int),
        stbn_kijk=arr(stbn_kijk, 0),
        stbn_kkji=arr(stbn_kkji, 0),
        stbn_r0ij=arr(stbn_r0ij, 0),
        stbn_r0kj=arr(stbn_r0kj, 0),
        stbn_theta0=arr(stbn_theta0, 0),
        oops=arr(oops, 4, int),
        oop_koop=arr(oop_koop, 0),
        torsions=arr(torsions, 4, int),
        torsion_v=arr(torsion_v, 3),
        vdw_pairs=np.stack([iu, ju], axis=1).astype(int),
        vdw_rstar=vdw_rstar,
        vdw_eps=vdw_eps,
        ele_pairs=np.stack([ei, ej], axis=1).astype(int),
        ele_qq=charges[ei] * charges[ej] / dielectric,
        ele_one_four=topo[ei, ej] == 3,
        dihedrals=dihedrals,
    )


def _bonded_dihedrals(mol: Chem.Mol) -> np.ndarray:
    """Every quadruple i-j-k-l connected by three bonds, each listed once."""
    quads = []
    for bond in mol.GetBonds():
        j, k = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        for a in mol.GetAtomWithIdx(j).GetNeighbors():
            i = a.GetIdx()
            if i == k:
                continue
            for b in mol.GetAtomWithIdx(k).GetNeighbors():
                l_idx = b.GetIdx()
                if l_idx in (j, i):
                    continue
                quads.append((i, j, k, l_idx))
    return np.asarray(quads, dtype=int).reshape(-1, 4)


# --------------------------------------------------------------------------------------
# One OpenMM force per term
# --------------------------------------------------------------------------------------


def _replicate(index: np.ndarray, n_atoms: int, n_copies: int) -> np.ndarray:
    """Atom indices of every copy, shape ``(n_copies * n_terms, width)``."""
    offsets = (np.arange(n_copies) * n_atoms)[:, None, None]
    return (index[None, :, :] + offsets).reshape(-1, index.shape[1])


def _fill(
    force: openmm.Force,
    adder: Callable[..., int],
    index: np.ndarray,
    values: np.ndarray,
    n_atoms: int,
    n_copies: int,
) -> openmm.Force:
    """Add every term of every copy; ``values`` has one row of parameters per term."""
    idx = _replicate(index, n_atoms, n_copies).tolist()
    vals = np.tile(values, (n_copies, 1)).tolist()
    for atoms, par in zip(idx, vals):
        adder(*atoms, par)
    return force


def _bond_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomBondForce:
    """MMFF cubic-quartic bond stretching.

    ``E = 143.9325/2 * kb * dr^2 * (1 + cs*dr + 7/12*cs^2*dr^2)``, ``dr = r - r0`` (Å),
    ``cs = -2 Å^-1`` (kcal/mol). Written here in nm with per-bond ``k`` (kJ mol^-1 nm^-2)
    and ``r0`` (nm).
    """
    cs = BOND_CS * NM_TO_ANGSTROM  # nm^-1
    force = openmm.CustomBondForce(
        f"k*dr^2*(1 + ({cs!r})*dr + ({7.0 / 12.0 * cs * cs!r})*dr^2); dr = r - r0"
    )
    force.addPerBondParameter("k")
    force.addPerBondParameter("r0")
    k = KCAL_TO_KJ * 0.5 * MDYNE_A_TO_KCAL_MOL * p.bond_kb / ANGSTROM_TO_NM**2
    vals = np.column_stack([k, p.bond_r0 * ANGSTROM_TO_NM])
    force.setForceGroup(TERM_GROUPS["bond"])
    return _fill(force, force.addBond, p.bonds, vals, p.n_atoms, n_copies)


def _angle_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomAngleForce:
    """MMFF cubic angle bending, with the linear form at linear centres.

    ``E = 0.043844/2 * ka * dtheta^2 * (1 + cb*dtheta)`` with ``dtheta = theta - theta0``
    in degrees and ``cb = -0.006981317 deg^-1``; at a centre whose MMFF type is linear
    ``E = 143.9325 * ka * (1 + cos(theta))`` (kcal/mol). Written in radians with per-angle
    ``k`` (kJ mol^-1 rad^-2, zero for linear angles), ``klin`` (kJ/mol, zero otherwise)
    and ``theta0`` (rad).
    """
    cb = ANGLE_CB * math.degrees(1.0)  # rad^-1
    force = openmm.CustomAngleForce(
        f"k*dt^2*(1 + ({cb!r})*dt) + klin*(1 + cos(theta)); dt = theta - theta0"
    )
    for name in ("k", "klin", "theta0"):
        force.addPerAngleParameter(name)
    ka = KCAL_TO_KJ * MDYNE_A_TO_KCAL_MOL * p.angle_ka
    lin = p.angle_linear
    vals = np.column_stack(
        [np.where(lin, 0.0, 0.5 * ka), np.where(lin, ka, 0.0), np.radians(p.angle_theta0)]
    )
    force.setForceGroup(TERM_GROUPS["angle"])
    return _fill(force, force.addAngle, p.angles, vals, p.n_atoms, n_copies)


def _stretch_bend_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomCompoundBondForce:
    """MMFF stretch-bend coupling.

    ``E = 2.51210 * (kba_ijk*dr_ij + kba_kji*dr_kj) * dtheta_ijk`` with bond deviations in
    Å and ``dtheta`` in degrees (kcal/mol); ``2.51210 = 143.9325 * pi/180``. Written with
    per-term ``kij``, ``kkj`` (kJ mol^-1 nm^-1 rad^-1), rest lengths (nm) and ``theta0`` (rad).
    """
    # Written on the particles' coordinates: OpenMM evaluates such expressions much
    # faster than its distance()/angle() functions inside a CustomCompoundBondForce.
    force = openmm.CustomCompoundBondForce(
        3,
        f"(kij*(rij_ - rij) + kkj*(rkj_ - rkj))*(acos({_SHRINK!r}*dot/(rij_*rkj_)) - theta0); "
        "dot = ax*bx + ay*by + az*bz; "
        "rij_ = sqrt(ax*ax + ay*ay + az*az); rkj_ = sqrt(bx*bx + by*by + bz*bz); "
        "ax = x1 - x2; ay = y1 - y2; az = z1 - z2; bx = x3 - x2; by = y3 - y2; bz = z3 - z2",
    )
    for name in ("kij", "kkj", "rij", "rkj", "theta0"):
        force.addPerBondParameter(name)
    scale = KCAL_TO_KJ * MDYNE_A_TO_KCAL_MOL / ANGSTROM_TO_NM
    vals = np.column_stack(
        [
            scale * p.stbn_kijk,
            scale * p.stbn_kkji,
            p.stbn_r0ij * ANGSTROM_TO_NM,
            p.stbn_r0kj * ANGSTROM_TO_NM,
            np.radians(p.stbn_theta0),
        ]
    )
    force.setForceGroup(TERM_GROUPS["stretch_bend"])
    return _fill(force, lambda *a: force.addBond(a[:-1], a[-1]), p.stbn, vals, p.n_atoms, n_copies)


def _oop_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomCompoundBondForce:
    """MMFF Wilson out-of-plane bending.

    ``E = 0.043844/2 * koop * chi^2`` (kcal/mol, chi in degrees), chi the angle between
    bond j-l and the plane i-j-k (j the centre):
    ``sin(chi) = n . r_jl / |r_jl|`` with ``n`` the unit normal ``r_ji x r_jk / |r_ji x r_jk|``.
    Particles (i, j, k, l) = (p1..p4); per-term ``k`` in kJ mol^-1 rad^-2.
    """
    force = openmm.CustomCompoundBondForce(
        4,
        f"k*asin({_SHRINK!r}*(nx*lx + ny*ly + nz*lz)/sqrt(nn*(lx*lx + ly*ly + lz*lz)))^2; "
        "nn = nx*nx + ny*ny + nz*nz; "
        "nx = ay*bz - az*by; ny = az*bx - ax*bz; nz = ax*by - ay*bx; "
        "ax = x1 - x2; ay = y1 - y2; az = z1 - z2; bx = x3 - x2; by = y3 - y2; bz = z3 - z2; "
        "lx = x4 - x2; ly = y4 - y2; lz = z4 - z2",
    )
    force.addPerBondParameter("k")
    vals = (KCAL_TO_KJ * 0.5 * MDYNE_A_TO_KCAL_MOL * p.oop_koop)[:, None]
    force.setForceGroup(TERM_GROUPS["oop"])
    return _fill(force, lambda *a: force.addBond(a[:-1], a[-1]), p.oops, vals, p.n_atoms, n_copies)


def _torsion_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomTorsionForce:
    """MMFF three-term torsion.

    ``E = 0.5*(V1*(1 + cos(phi)) + V2*(1 - cos(2 phi)) + V3*(1 + cos(3 phi)))``
    (V in kcal/mol; here per-term V1..V3 in kJ/mol).
    """
    # Same function written in c = cos(theta): 1 - cos(2t) = 2(1 - c^2) and
    # 1 + cos(3t) = 1 + c(4c^2 - 3); one cosine per torsion is cheaper to evaluate.
    force = openmm.CustomTorsionForce(
        "0.5*(v1*(1 + c) + 2*v2*(1 - c*c) + v3*(1 + c*(4*c*c - 3))); c = cos(theta)"
    )
    for name in ("v1", "v2", "v3"):
        force.addPerTorsionParameter(name)
    force.setForceGroup(TERM_GROUPS["torsion"])
    return _fill(force, force.addTorsion, p.torsions, KCAL_TO_KJ * p.torsion_v, p.n_atoms, n_copies)


def _vdw_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomBondForce:
    """MMFF buffered 14-7 van der Waals, one term per pair.

    ``E = eps * (1.07 R*/(R + 0.07 R*))^7 * (1.12 R*^7/(R^7 + 0.12 R*^7) - 2)`` with the
    pair's R*_ij and epsilon_ij from RDKit (combination and donor-acceptor rules already
    applied). Per-pair ``rs`` (nm) and ``eps`` (kJ/mol).
    """
    d, g = VDW_DELTA, VDW_GAMMA
    force = openmm.CustomBondForce(
        f"eps*({1 + d!r}*rs/(r + {d!r}*rs))^7*({1 + g!r}*rs7/(r^7 + {g!r}*rs7) - 2); rs7 = rs^7"
    )
    force.addPerBondParameter("rs")
    force.addPerBondParameter("eps")
    vals = np.column_stack([p.vdw_rstar * ANGSTROM_TO_NM, KCAL_TO_KJ * p.vdw_eps])
    force.setForceGroup(TERM_GROUPS["vdw"])
    return _fill(force, force.addBond, p.vdw_pairs, vals, p.n_atoms, n_copies)


def _electrostatic_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomBondForce:
    """MMFF buffered electrostatics, one term per pair.

    ``E = 332.0716 * q_i q_j / (D * (R + 0.05))`` (constant dielectric) or
    ``/(D * (R + 0.05)^2)`` (distance-dependent), R in Å, times 0.75 for 1-4 pairs.
    Per-pair ``qq`` in kJ mol^-1 nm (or nm^2) with the buffer in nm.
    """
    buffer_nm = ELECTROSTATIC_BUFFER * ANGSTROM_TO_NM
    power = 2 if p.distance_dependent else 1
    force = openmm.CustomBondForce(f"qq/(r + {buffer_nm!r})^{power}")
    force.addPerBondParameter("qq")
    scale = np.where(p.ele_one_four, ONE_FOUR_ELECTROSTATIC_SCALE, 1.0)
    qq = KCAL_TO_KJ * ELECTROSTATIC_FACTOR * p.ele_qq * scale * ANGSTROM_TO_NM**power
    force.setForceGroup(TERM_GROUPS["electrostatic"])
    return _fill(force, force.addBond, p.ele_pairs, qq[:, None], p.n_atoms, n_copies)


def restraint_force(p: MMFFParameters, n_copies: int = 1) -> openmm.CustomTorsionForce:
    """Flat-bottomed harmonic dihedral restraints on every bonded dihedral, all off.

    ``E = k_restraint * on * max(0, |d| - w_restraint)^2`` with ``d`` the deviation of
    the dihedral from ``theta0`` wrapped into [-pi, pi) (rad). ``k_restraint``
    (kJ mol^-1 rad^-2) and ``w_restraint`` (rad) are global parameters; ``on`` (0 or 1)
    and ``theta0`` are per-slot and are set by :class:`chairbuild.forcefields.mmff.MMFFModel`
    without rebuilding the Context. The slots follow :attr:`MMFFParameters.dihedrals`,
    copy after copy.
    """
    force = openmm.CustomTorsionForce(
        "k_restraint*on*max(0, abs(d) - w_restraint)^2; "
        "d = dt - 2*pi*floor((dt + pi)/(2*pi)); dt = theta - theta0; "
        f"pi = {math.pi!r}"
    )
    force.addGlobalParameter("k_restraint", 0.0)
    force.addGlobalParameter("w_restraint", 0.0)
    force.addPerTorsionParameter("on")
    force.addPerTorsionParameter("theta0")
    vals = np.zeros((len(p.dihedrals), 2))
    force.setForceGroup(RESTRAINT_GROUP)
    return _fill(force, force.addTorsion, p.dihedrals, vals, p.n_atoms, n_copies)


#: Builder of each MMFF term, in force-group order.
TERM_BUILDERS = {
    "bond": _bond_force,
    "angle": _angle_force,
    "stretch_bend": _stretch_bend_force,
    "oop": _oop_force,
    "torsion": _torsion_force,
    "vdw": _vdw_force,
    "electrostatic": _electrostatic_force,
}


def build_forces(p: MMFFParameters, n_copies: int = 1) -> list[openmm.Force]:
    """Return the MMFF forces (each in its own group) for ``n_copies`` copies.

    A term with no instance in the molecule (no tricoordinate centre, no charged pair)
    gets no force: its group then simply contributes zero, and the Context is spared
    compiling an expression it never evaluates.
    """
    terms = (p.bonds, p.angles, p.stbn, p.oops, p.torsions, p.vdw_pairs, p.ele_pairs)
    return [build(p, n_copies) for build, idx in zip(TERM_BUILDERS.values(), terms) if len(idx)]


# --------------------------------------------------------------------------------------
# Preconditioner of the minimiser: Gauss-Newton Hessian of the valence terms
# --------------------------------------------------------------------------------------


def _bond_rows(x: np.ndarray, idx: np.ndarray) -> np.ndarray:
    d = x[:, idx[:, 0]] - x[:, idx[:, 1]]
    u = d / np.linalg.norm(d, axis=-1, keepdims=True)
    return np.stack([u, -u], axis=2)


def _angle_rows(x: np.ndarray, idx: np.ndarray) -> np.ndarray:
    u1 = x[:, idx[:, 0]] - x[:, idx[:, 1]]
    u2 = x[:, idx[:, 2]] - x[:, idx[:, 1]]
    r1 = np.linalg.norm(u1, axis=-1, keepdims=True)
    r2 = np.linalg.norm(u2, axis=-1, keepdims=True)
    e1, e2 = u1 / r1, u2 / r2
    c = np.clip(np.sum(e1 * e2, axis=-1, keepdims=True), -0.999, 0.999)
    s = np.sqrt(1.0 - c * c)
    g1 = (c * e1 - e2) / (r1 * s)
    g3 = (c * e2 - e1) / (r2 * s)
    return np.stack([g1, -g1 - g3, g3], axis=2)


def _torsion_rows(x: np.ndarray, idx: np.ndarray) -> np.ndarray:
    b1 = x[:, idx[:, 1]] - x[:, idx[:, 0]]
    b2 = x[:, idx[:, 2]] - x[:, idx[:, 1]]
    b3 = x[:, idx[:, 3]] - x[:, idx[:, 2]]
    n1, n2 = np.cross(b1, b2), np.cross(b2, b3)
    len2 = np.linalg.norm(b2, axis=-1, keepdims=True)
    ga = -len2 * n1 / (np.sum(n1 * n1, axis=-1, keepdims=True) + 1e-12)
    gd = len2 * n2 / (np.sum(n2 * n2, axis=-1, keepdims=True) + 1e-12)
    f1 = np.sum(b1 * b2, axis=-1, keepdims=True) / len2**2
    f3 = np.sum(b3 * b2, axis=-1, keepdims=True) / len2**2
    return np.stack([ga, -ga + f1 * ga - f3 * gd, -gd - f1 * ga + f3 * gd, gd], axis=2)


class Preconditioner:
    """Inverse of the model Hessian ``P = sum_t k_t b_t b_t^T + shift * I`` at given geometries.

    ``b_t`` is the Cartesian gradient of bond length, angle or dihedral ``t`` (Wilson
    B-matrix row) and ``k_t`` its MMFF force constant (a torsion gets half the sum of its
    |V| plus a floor), so ``P`` is the Gauss-Newton Hessian of the MMFF valence terms in
    kJ mol^-1 Å^-2: the preconditioner of the minimiser in :mod:`chairbuild.forcefields.mmff`.
    Dense matrices: meant for molecules of up to a few hundred atoms.
    """

    def __init__(self, params: MMFFParameters) -> None:
        self.n3 = 3 * params.n_atoms
        ka = KCAL_TO_KJ * MDYNE_A_TO_KCAL_MOL
        kt = KCAL_TO_KJ * 0.5 * np.abs(params.torsion_v).sum(axis=1) + _PRECOND_TORSION_FLOOR
        self._base = [
            (_bond_rows, params.bonds, ka * params.bond_kb),
            (_angle_rows, params.angles, ka * params.angle_ka),
            (_torsion_rows, params.torsions, kt),
        ]
        self.set_restraints(None, 0.0)

    def set_restraints(self, quads: np.ndarray | None, k: float) -> None:
        """Add ``2 k b b^T`` for each restrained dihedral (None: no restraints)."""
        import scipy.sparse

        terms = [t for t in self._base if len(t[1])]
        if quads is not None and len(quads):
            terms.append((_torsion_rows, np.asarray(quads), np.full(len(quads), 2.0 * k)))
        self.terms = terms
        n3, comp = self.n3, np.arange(3)
        flat = []
        for _, idx, _ in terms:
            row = 3 * idx[:, :, None, None, None] + comp[None, None, None, :, None]
            col = 3 * idx[:, None, :, None, None] + comp[None, None, None, None, :]
            flat.append((row * n3 + col).reshape(-1))
        index = np.concatenate(flat) if flat else np.zeros(0, dtype=int)
        # Sparse scatter matrix: Hessian entries (flat) = scatter @ block values.
        self._scatter = scipy.sparse.csr_matrix(
            (np.ones(len(index)), (index, np.arange(len(index)))), shape=(n3 * n3, len(index))
        )

    def inverses(self, x: np.ndarray) -> np.ndarray:
        """Return ``P^-1`` at each geometry ``x`` (shape ``(k, n_atoms, 3)``, Å)."""
        from scipy.linalg import lapack

        k, n3 = x.shape[0], self.n3
        values = []
        for rows_of, idx, kt in self.terms:
            rows = rows_of(x, idx)  # (k, T, w, 3)
            block = kt[None, :, None, None, None, None] * (
                rows[:, :, :, None, :, None] * rows[:, :, None, :, None, :]
            )
            values.append(block.reshape(k, -1))
        if values:
            hess = np.asarray((self._scatter @ np.concatenate(values, axis=1).T).T)
            hess = hess.reshape(k, n3, n3)
        else:  # a single atom or an ion: no valence term
            hess = np.zeros((k, n3, n3))
        hess[:, np.arange(n3), np.arange(n3)] += _PRECOND_SHIFT
        out = np.empty_like(hess)
        failed = []
        for s in range(k):
            # P is symmetric: hess[s].T is P in LAPACK's Fortran order without a copy.
            chol, info = lapack.dpotrf(hess[s].T, lower=1, clean=0)
            inv, info2 = lapack.dpotri(chol, lower=1, overwrite_c=1) if info == 0 else (chol, 1)
            out[s] = inv.T  # upper triangle of out[s] holds P^-1
            if info2 != 0:  # cannot happen for an SPD matrix; fall back to the diagonal
                failed.append(s)
        out = np.triu(out) + np.swapaxes(np.triu(out, 1), 1, 2)
        for s in failed:
            out[s] = np.diag(1.0 / np.abs(np.diag(hess[s])))
        return out
