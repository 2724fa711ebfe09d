"""Ring perception: six-membered rings, ring systems, substituents, rotatable bonds.

A *ring* here is a non-aromatic six-membered ring of the smallest set of smallest rings
whose atoms are C, N, O, S or Si. Rings that share at least one atom form a *ring
system* (fused, spiro or bridged); their states are enumerated together.
"""

from __future__ import annotations

from dataclasses import dataclass

from rdkit import Chem

from chairbuild.errors import InputError

__all__ = [
    "Ring",
    "RingSystem",
    "Substituent",
    "Rotor",
    "RingAnalysis",
    "analyse_rings",
    "RING_ELEMENTS",
]

#: Elements allowed in an analysed ring.
RING_ELEMENTS = frozenset({"C", "N", "O", "S", "Si"})


@dataclass(frozen=True)
class Ring:
    """A six-membered ring in ring order, starting at its lowest atom index.

    Attributes
    ----------
    index : int
    atoms : tuple of int
    sp2 : tuple of bool
        Whether each ring atom is sp2 (carbonyl carbon, alkene carbon, ...).
    system : int
        Index of the ring system it belongs to.
    """

    index: int
    atoms: tuple[int, ...]
    sp2: tuple[bool, ...]
    system: int


@dataclass(frozen=True)
class RingSystem:
    """Rings that share atoms; their conformations are enumerated jointly."""

    index: int
    rings: tuple[int, ...]
    atoms: tuple[int, ...]


@dataclass(frozen=True)
class Substituent:
    """A non-ring neighbour of a ring atom (or an H on a ring heteroatom).

    Attributes
    ----------
    atom, ring_atom, ring_index :
        Indices (0-based); ``ring_index`` refers to :attr:`RingAnalysis.rings`.
    group : str
        Rooted SMILES of the group (hydrogens implicit), e.g. ``"C"``, ``"O"``, ``"C#N"``.
    in_ring_system : bool
        True when the atom belongs to another ring of the same ring system (ring fusion).
    """

    atom: int
    ring_atom: int
    ring_index: int
    group: str
    in_ring_system: bool


@dataclass(frozen=True)
class Rotor:
    """A rotatable bond whose staggered positions are enumerated.

    The torsion is ``atoms`` = (i, j, k, l) with j on the side of the ring core; the
    part beyond k moves. ``angles`` are the target values of torsion i-j-k-l (degrees).
    """

    atoms: tuple[int, int, int, int]
    angles: tuple[float, ...]
    depth: int


@dataclass(frozen=True)
class RingAnalysis:
    """Everything the builder needs to know about the rings of one molecule."""

    rings: tuple[Ring, ...]
    systems: tuple[RingSystem, ...]
    substituents: tuple[Substituent, ...]
    invertible_nitrogens: tuple[int, ...]
    rotors: tuple[Rotor, ...]


def _is_sp2(atom: Chem.Atom) -> bool:
    return atom.GetHybridization() in (
        Chem.HybridizationType.SP2,
        Chem.HybridizationType.SP,
    ) or atom.GetIsAromatic()


def _ordered_ring(mol: Chem.Mol, atoms: tuple[int, ...]) -> tuple[int, ...]:
    """Rotate/reverse a ring so it starts at its lowest index and runs to the lower neighbour."""
    ring = list(atoms)
    start = ring.index(min(ring))
    ring = ring[start:] + ring[:start]
    if ring[-1] < ring[1]:
        ring = [ring[0]] + ring[1:][::-1]
    return tuple(ring)


def _find_rings(mol: Chem.Mol) -> list[tuple[int, ...]]:
    found = []
    skipped_aromatic = False
    for atoms in Chem.GetSymmSSSR(mol):
        atoms = tuple(atoms)
        if len(atoms) != 6:
            continue
        if all(mol.GetAtomWithIdx(a).GetIsAromatic() for a in atoms):
            skipped_aromatic = True
            continue
        bad = [a for a in atoms if mol.GetAtomWithIdx(a).GetSymbol() not in RING_ELEMENTS]
        if bad:
            a = bad[0]
            raise InputError(
                f"six-membered ring contains atom {a} ({mol.GetAtomWithIdx(a).GetSymbol()}); "
                f"chairbuild analyses rings of {', '.join(sorted(RING_ELEMENTS))} only"
            )
        found.append(_ordered_ring(mol, atoms))
    if not found:
        detail = " (only aromatic six-membered rings, which are planar)" if skipped_aromatic else ""
        raise InputError(f"no non-aromatic six-membered ring to analyse{detail}")
    return sorted(found)


def _ring_systems(rings: list[tuple[int, ...]]) -> list[list[int]]:
    groups: list[set[int]] = []
    members: list[list[int]] = []
    for i, ring in enumerate(rings):
        hits = [g for g, atoms in enumerate(groups) if atoms & set(ring)]
        new_atoms = set(ring)
        new_members = [i]
        for g in sorted(hits, reverse=True):
            new_atoms |= groups.pop(g)
            new_members = members.pop(g) + new_members
        groups.append(new_atoms)
        members.append(sorted(new_members))
    return sorted(members)


def _group_smiles(mol: Chem.Mol, ring_atom: int, atom: int) -> str:
    """Rooted SMILES of the branch that starts at ``atom`` and does not go back to ``ring_atom``."""
    if mol.GetAtomWithIdx(atom).GetAtomicNum() == 1:
        return "H"
    seen = {ring_atom, atom}
    stack = [atom]
    while stack:
        cur = stack.pop()
        for nb in mol.GetAtomWithIdx(cur).GetNeighbors():
            idx = nb.GetIdx()
            if idx not in seen and nb.GetAtomicNum() > 1:
                seen.add(idx)
                stack.append(idx)
    seen.discard(ring_atom)
    if ring_atom in _reachable_without(mol, atom, ring_atom):
        # the branch closes back on the ring (fused or bridged): name the first atom only
        return mol.GetAtomWithIdx(atom).GetSymbol()
    return Chem.MolFragmentToSmiles(mol, atomsToUse=sorted(seen), rootedAtAtom=atom, canonical=True)


def _reachable_without(mol: Chem.Mol, start: int, blocked: int) -> set[int]:
    """Atoms reachable from ``start`` without passing the bond start–blocked."""
    seen = {start}
    stack = [start]
    while stack:
        cur = stack.pop()
        for nb in mol.GetAtomWithIdx(cur).GetNeighbors():
            idx = nb.GetIdx()
            if cur == start and idx == blocked:
                continue
            if idx not in seen:
                seen.add(idx)
                stack.append(idx)
    return seen


def _is_invertible_nitrogen(mol: Chem.Mol, idx: int) -> bool:
    atom = mol.GetAtomWithIdx(idx)
    if atom.GetSymbol() != "N" or atom.GetFormalCharge() != 0 or atom.GetIsAromatic():
        return False
    if atom.GetDegree() != 3 or any(b.GetBondType() != Chem.BondType.SINGLE for b in atom.GetBonds()):
        return False
    # amide-like nitrogens (next to C=O, C=S, S(=O)2, aryl) are planar: no axial/equatorial pair
    for nb in atom.GetNeighbors():
        if nb.GetIsAromatic():
            return False
        for bond in nb.GetBonds():
            if bond.GetBondType() == Chem.BondType.DOUBLE and bond.GetOtherAtom(nb).GetSymbol() in ("O", "S", "N"):
                return False
    return True


def _substituents(mol: Chem.Mol, rings: list[tuple[int, ...]], systems: list[list[int]], invertible: set[int]) -> list[Substituent]:
    out = []
    system_atoms = [set().union(*(rings[r] for r in sys_rings)) for sys_rings in systems]
    for ring_index, ring in enumerate(rings):
        sys_atoms = next(s for s in system_atoms if set(ring) <= s)
        for ring_atom in ring:
            atom = mol.GetAtomWithIdx(ring_atom)
            for nb in atom.GetNeighbors():
                idx = nb.GetIdx()
                if idx in ring:
                    continue
                if nb.GetAtomicNum() == 1 and not (atom.GetSymbol() != "C" and ring_atom in invertible):
                    continue
                out.append(
                    Substituent(
                        atom=idx,
                        ring_atom=ring_atom,
                        ring_index=ring_index,
                        group=_group_smiles(mol, ring_atom, idx),
                        in_ring_system=idx in sys_atoms,
                    )
                )
    return out


def _is_symmetric_top(mol: Chem.Mol, k: int, j: int, ranks: list[int]) -> bool:
    """True when k carries three equivalent neighbours besides j (CH3, CF3, C(CH3)3, NH3+)."""
    others = [nb.GetIdx() for nb in mol.GetAtomWithIdx(k).GetNeighbors() if nb.GetIdx() != j]
    if len(others) != 3:  # NH2, NMe2: the lone pair makes the three positions distinct
        return False
    return len({ranks[o] for o in others}) == 1


def _rotors(mol: Chem.Mol, core: set[int]) -> list[Rotor]:
    """Rotatable bonds outside the analysed rings, oriented away from the ring core."""
    ranks = list(Chem.CanonicalRankAtoms(mol, breakTies=False))
    ring_info = mol.GetRingInfo()
    # distance (in bonds) from the core, to orient each bond and to rank rotors for pruning
    dist = {a: 0 for a in core}
    frontier = list(core)
    while frontier:
        nxt = []
        for a in frontier:
            for nb in mol.GetAtomWithIdx(a).GetNeighbors():
                if nb.GetIdx() not in dist:
                    dist[nb.GetIdx()] = dist[a] + 1
                    nxt.append(nb.GetIdx())
        frontier = nxt
    out = []
    for bond in mol.GetBonds():
        if bond.GetBondType() != Chem.BondType.SINGLE or ring_info.NumBondRings(bond.GetIdx()):
            continue
        j, k = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        if dist.get(j, 0) > dist.get(k, 0):
            j, k = k, j
        aj, ak = mol.GetAtomWithIdx(j), mol.GetAtomWithIdx(k)
        if aj.GetDegree() < 2 or ak.GetDegree() < 2:
            continue
        if _is_symmetric_top(mol, k, j, ranks):
            continue
        if aj.GetHybridization() == Chem.HybridizationType.SP or ak.GetHybridization() == Chem.HybridizationType.SP:
            continue
        if _is_amide_bond(mol, j, k):
            continue
        i = _reference_neighbour(mol, j, k, core)
        l = _reference_neighbour(mol, k, j, core)
        angles = _staggered_angles(mol, j, k, ranks)
        out.append(Rotor(atoms=(i, j, k, l), angles=angles, depth=dist.get(j, 0)))
    return sorted(out, key=lambda r: (r.depth, r.atoms))


def _staggered_angles(mol: Chem.Mol, j: int, k: int, ranks: list[int]) -> tuple[float, ...]:
    """Starting values of torsion i-j-k-l for one rotor.

    * sp3–sp3: 60°, 180°, 300° (staggered);
    * sp2–sp2 (conjugated: esters, acids, aryl ketones, enol ethers): 0°, 180° (planar);
    * sp3–sp2: every 60° (the sp2 plane eclipsing or bisecting each bond of the sp3 end;
      three starts at 0°, 120°, 240° missed a minimum of cyclohexanecarboxylic acid), or
      0°, 60°, 120° when the sp2 end is two-fold symmetric (phenyl, nitro, carboxylate).
    """
    sp2_j, sp2_k = _is_sp2(mol.GetAtomWithIdx(j)), _is_sp2(mol.GetAtomWithIdx(k))
    if sp2_j and sp2_k:
        return (0.0, 180.0)
    if sp2_j or sp2_k:
        if _twofold_end(mol, k, j, ranks) or _twofold_end(mol, j, k, ranks):
            return (0.0, 60.0, 120.0)
        return (0.0, 60.0, 120.0, 180.0, 240.0, 300.0)
    return (60.0, 180.0, 300.0)


def _twofold_end(mol: Chem.Mol, k: int, j: int, ranks: list[int]) -> bool:
    """An sp2 end whose two other neighbours are equivalent (phenyl, NO2, CO2-): 2-fold rotor."""
    atom = mol.GetAtomWithIdx(k)
    if not _is_sp2(atom):
        return False
    others = [nb.GetIdx() for nb in atom.GetNeighbors() if nb.GetIdx() != j]
    return len(others) == 2 and ranks[others[0]] == ranks[others[1]]


def _is_amide_bond(mol: Chem.Mol, j: int, k: int) -> bool:
    for a, b in ((j, k), (k, j)):
        atom_a, atom_b = mol.GetAtomWithIdx(a), mol.GetAtomWithIdx(b)
        if atom_a.GetSymbol() == "C" and atom_b.GetSymbol() == "N":
            for bond in atom_a.GetBonds():
                if bond.GetBondType() == Chem.BondType.DOUBLE and bond.GetOtherAtom(atom_a).GetSymbol() in ("O", "S"):
                    return True
    return False


def _reference_neighbour(mol: Chem.Mol, center: int, other: int, core: set[int]) -> int:
    """Neighbour of ``center`` (not ``other``) that defines the torsion: ring atom, then heaviest, then lowest index."""
    cands = [nb for nb in mol.GetAtomWithIdx(center).GetNeighbors() if nb.GetIdx() != other]
    cands.sort(key=lambda nb: (nb.GetIdx() not in core, -nb.GetAtomicNum(), nb.GetIdx()))
    return cands[0].GetIdx()


def analyse_rings(mol: Chem.Mol) -> RingAnalysis:
    """Perceive rings, ring systems, substituents, invertible nitrogens and rotors.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogens.

    Raises
    ------
    InputError
        When the molecule has no non-aromatic six-membered ring, or one with an element
        other than C, N, O, S, Si.
    """
    ring_list = _find_rings(mol)
    system_list = _ring_systems(ring_list)
    system_of = {}
    for s, members in enumerate(system_list):
        for r in members:
            system_of[r] = s
    rings = tuple(
        Ring(
            index=i,
            atoms=ring,
            sp2=tuple(_is_sp2(mol.GetAtomWithIdx(a)) for a in ring),
            system=system_of[i],
        )
        for i, ring in enumerate(ring_list)
    )
    systems = tuple(
        RingSystem(
            index=s,
            rings=tuple(members),
            atoms=tuple(sorted(set().union(*(ring_list[r] for r in members)))),
        )
        for s, members in enumerate(system_list)
    )
    ring_atoms = set().union(*(set(r) for r in ring_list))
    invertible = {a for a in ring_atoms if _is_invertible_nitrogen(mol, a)}
    subs = _substituents(mol, ring_list, system_list, invertible)
    return RingAnalysis(
        rings=rings,
        systems=systems,
        substituents=tuple(subs),
        invertible_nitrogens=tuple(sorted(invertible)),
        rotors=tuple(_rotors(mol, ring_atoms)),
    )
