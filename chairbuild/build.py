"""Build starting conformers on purpose: every ring state, every substituent placement, every rotamer.

How a starting structure is made
--------------------------------
1. **Ring states.** Each six-membered ring takes one of eight states: the two chairs
   (endocyclic torsions ±55° alternating) and the six twist-boats (torsions
   (a, −b, a, a, −b, a) with a = 31°, b = 65°, in its three rotations and two signs).
   In a molecule of several rings, all chair combinations are built, plus each
   combination in which exactly one ring is a twist-boat and the others are chairs
   (within a ring system and across separate ring systems alike: each twist-boat costs
   about 20–25 kJ/mol in a cyclohexane-like ring, so states with two lie beyond the
   default energy window).
2. **Ideal ring-system core.** For each combination the ring-system atoms are placed by a
   small least-squares fit to ideal geometry only (bond lengths from covalent radii,
   angles 111° at sp3 and 120° at sp2 atoms, the target torsions; a double bond in a
   ring gets a 0° torsion target). A combination the fusion cannot reach (the fit keeps
   a torsion more than 40° from its target sign pattern, e.g. a flipped trans-decalin
   ring) is dropped with a note.
3. **Substituent placement.** Each ring atom's exocyclic bonds point along the two
   tetrahedral directions (up and down) or, at an sp2 atom or a fusion atom, along the
   one free direction. Every distinct assignment of the exocyclic neighbours to those
   directions is built (heavy substituent up or down; on an invertible ring nitrogen
   the substituent or hydrogen both ways). Assignments whose 3D stereochemistry
   differs from the input's are discarded before any minimisation, and so are
   assignments whose assembled structure is equivalent by symmetry (or, for an achiral
   molecule, by reflection) to one already kept, before their rotamers are built.
4. **The rest of the molecule** is copied rigidly, branch by branch, from one ETKDG
   template embedding (fixed seed), keeping the template's torsion about each
   attachment bond; separate ring systems are attached as their own ideal cores.
5. **Rotamers.** Every rotatable bond (:mod:`chairbuild.rings`) is set to each of its
   starting values (sp3–sp3 staggered 60°, 180°, 300°; see
   :func:`chairbuild.rings._staggered_angles` for bonds with sp2 ends). All-chair
   states get the full product over bonds; states with a twist-boat get the first value
   of each rotor only (they lie 20 kJ/mol or more above the chairs in most rings, and
   their rotamers cost many minimisations for little population). The cap on the
   product per all-chair combination is automatic (:func:`rotamer_cap`): 729 (3^6) for
   a single ring's two chairs, less for ring systems with many ring-state and
   N-inversion combinations (a budget of about 1458 all-chair starts, but never below
   81), or ``max_rotamers`` when given. Above the cap, the rotors nearest the rings are
   enumerated fully and the farther ones start at their template value; a note says so,
   and after the first minimisation every rotor (and every pair on consecutive bonds) is
   varied around the lowest minima overall and the lowest members of every ring's
   conformer families (:func:`chairbuild.rotamers.rotamer_variations`, up to three rounds
   in :mod:`chairbuild.pipeline`) to recover cooperative arrangements such as the
   hydrogen-bond chains of polyols. Below the cap, each chair family's lowest member is
   among the starts by construction; above it the refinement is a search, not a
   guarantee. Molecules beyond the size cap of :mod:`chairbuild.limits` are refused
   unless the reduced search is asked for.
6. **Duplicates** among the starting structures (the same structure reached by two
   routes, or its mirror image for an achiral molecule) are removed with a
   symmetry-aware RMSD below 0.05 Å over the heavy atoms and every hydrogen on N, O
   and S (so that rotamers of NH2 and OH groups stay distinct), so each is minimised once.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from rdkit import Chem
from rdkit.Chem import AllChem

from chairbuild.errors import InputError
from chairbuild.limits import count_rotamers, format_count
from chairbuild.rings import RingAnalysis
from chairbuild.ringcore import (
    RING_STATES,
    CoreProblem,
    RingState,
    bond_length,
    core_guesses,
    dihedral_rad,
    n_twist_boats,
    ring_combinations,
)
from chairbuild.rotamers import set_rotamer

__all__ = [
    "RingState",
    "RING_STATES",
    "StartingStructure",
    "BuildReport",
    "build_starting_structures",
    "stereo_signature",
]

_HALF_TETRAHEDRAL = np.radians(54.75)
#: Budget of all-chair starting structures from which the automatic rotamer cap is derived.
ROTAMER_BUDGET = 1458
#: Bounds of the automatic rotamer cap per all-chair core (3^4 and 3^6 combinations).
MIN_ROTAMER_CAP, MAX_ROTAMER_CAP = 81, 729
_TEMPLATE_SEED = 20261202


@dataclass(frozen=True)
class StartingStructure:
    """One starting geometry (Å) and how it was made."""

    coords: np.ndarray
    origin: str


@dataclass(frozen=True)
class BuildReport:
    """Starting structures plus the counts and notes of the build."""

    starts: tuple[StartingStructure, ...]
    notes: tuple[str, ...]
    n_ring_combinations: int
    n_infeasible: int
    n_stereo_rejected: int
    n_duplicates: int
    capped: bool = False
    #: Ring-state and placement cores skipped before their rotamers were built (equivalent by symmetry to an earlier one).
    n_duplicate_cores: int = 0
    #: Rotamer combinations allowed per all-chair core in this build (see :func:`rotamer_cap`).
    rotamer_cap: int = 0



# ---------------------------------------------------------------- stereo check
def stereo_signature(mol: Chem.Mol, coords: np.ndarray) -> str:
    """Canonical isomeric SMILES with stereochemistry perceived from ``coords``."""
    probe = Chem.Mol(mol)
    probe.RemoveAllConformers()
    conf = Chem.Conformer(probe.GetNumAtoms())
    for i, xyz in enumerate(np.asarray(coords, dtype=float)):
        conf.SetAtomPosition(i, xyz.tolist())
    conf.Set3D(True)
    probe.AddConformer(conf, assignId=True)
    for atom in probe.GetAtoms():
        atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
    for bond in probe.GetBonds():
        if bond.GetBondType() == Chem.BondType.DOUBLE:
            bond.SetStereo(Chem.BondStereo.STEREONONE)
    Chem.AssignStereochemistryFrom3D(probe, replaceExistingTags=True)
    return Chem.MolToSmiles(Chem.RemoveHs(probe), isomericSmiles=True)


def _exo_directions(core_xyz: dict[int, np.ndarray], atom: int, ring_nbs: list[int], sp2: bool) -> list[np.ndarray]:
    """Free exocyclic bond directions at a ring-system atom (unit vectors)."""
    units = [core_xyz[n] - core_xyz[atom] for n in ring_nbs]
    units = [u / np.linalg.norm(u) for u in units]
    if len(units) >= 3 or sp2:
        d = -np.sum(units, axis=0)
        norm = np.linalg.norm(d)
        return [d / norm] if norm > 1e-6 and len(units) < 4 else []
    bis = -(units[0] + units[1])
    bis /= np.linalg.norm(bis)
    normal = np.cross(units[0], units[1])
    normal /= np.linalg.norm(normal)
    return [
        bis * np.cos(_HALF_TETRAHEDRAL) + normal * np.sin(_HALF_TETRAHEDRAL),
        bis * np.cos(_HALF_TETRAHEDRAL) - normal * np.sin(_HALF_TETRAHEDRAL),
    ]


def _placements(
    mol: Chem.Mol,
    core_xyz: dict[int, np.ndarray],
    system_atoms: set[int],
    ranks: list[int],
    equatorial_only: dict[int, np.ndarray] | None = None,
):
    """Per ring-system atom, the list of distinct {exo atom: position} assignments.

    ``equatorial_only`` maps atoms (invertible nitrogens) to the normal of their ring's mean
    plane: such an atom gets only the assignment whose exocyclic bond lies closest to that
    plane (equatorial in a chair).
    """
    equatorial_only = equatorial_only or {}
    options = []
    for atom in sorted(system_atoms):
        a = mol.GetAtomWithIdx(atom)
        ring_nbs = [n.GetIdx() for n in a.GetNeighbors() if n.GetIdx() in system_atoms]
        exo = [n.GetIdx() for n in a.GetNeighbors() if n.GetIdx() not in system_atoms]
        if not exo:
            continue
        sp2 = a.GetHybridization() in (Chem.HybridizationType.SP2, Chem.HybridizationType.SP)
        dirs = _exo_directions(core_xyz, atom, ring_nbs, sp2)
        if len(dirs) < len(exo):
            raise InputError(f"atom {atom} ({a.GetSymbol()}) has more neighbours than a ring atom can place")
        choices = []
        seen = set()
        for perm in itertools.permutations(range(len(dirs)), len(exo)):
            key = tuple(sorted((ranks[e], p) for e, p in zip(exo, perm)))
            if key in seen:
                continue
            seen.add(key)
            choices.append(
                {e: core_xyz[atom] + dirs[p] * bond_length(mol, atom, e) for e, p in zip(exo, perm)}
            )
        if atom in equatorial_only and len(choices) > 1:
            normal = equatorial_only[atom]

            def tilt(choice: dict[int, np.ndarray]) -> float:
                return max(abs(float(np.dot(pos - core_xyz[atom], normal))) for pos in choice.values())

            choices = [min(choices, key=tilt)]
        options.append(choices)
    return options


# ----------------------------------------------------------------- assembly
def _rotation_aligning(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Rotation matrix taking direction u onto direction v."""
    u = u / np.linalg.norm(u)
    v = v / np.linalg.norm(v)
    c = float(np.dot(u, v))
    axis = np.cross(u, v)
    s = np.linalg.norm(axis)
    if s < 1e-9:
        if c > 0:
            return np.eye(3)
        perp = np.cross(u, [1.0, 0.0, 0.0])
        if np.linalg.norm(perp) < 1e-6:
            perp = np.cross(u, [0.0, 1.0, 0.0])
        return _axis_rotation(perp / np.linalg.norm(perp), np.pi)
    return _axis_rotation(axis / s, np.arctan2(s, c))


def _axis_rotation(axis: np.ndarray, angle: float) -> np.ndarray:
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + np.sin(angle) * k + (1 - np.cos(angle)) * (k @ k)


def _dihedral(p0, p1, p2, p3) -> float:
    return float(dihedral_rad(np.array([[p0, p1, p2, p3]]))[0])


class _Assembler:
    """Assemble a full structure from ideal ring-system cores and rigid template branches.

    The first ring system's core (its atoms and their direct neighbours) is placed as
    built. Every bond from a placed atom x to a placed atom y whose other neighbours are
    not yet placed starts a branch: the template coordinates of everything beyond y are
    moved rigidly onto the bond x→y, keeping the template torsion about it. A branch
    stops at the first atom of another ring system, whose own ideal core is then moved
    onto the bond that reaches it in the same way.
    """

    def __init__(self, mol: Chem.Mol, system_atoms: dict[int, list[int]], template: np.ndarray):
        self.mol = mol
        self.template = template
        self.n = mol.GetNumAtoms()
        self.system_of = {a: s for s, atoms in system_atoms.items() for a in atoms}
        self.neighbours = [[n.GetIdx() for n in mol.GetAtomWithIdx(i).GetNeighbors()] for i in range(self.n)]
        self.heavy_first = [
            sorted(nbs, key=lambda n: (-mol.GetAtomWithIdx(n).GetAtomicNum(), n)) for nbs in self.neighbours
        ]

    def _align(self, xyz, placed, frag: dict[int, np.ndarray], x: int, y: int, overwrite: bool) -> list[int]:
        """Move ``frag`` (containing x and y) rigidly onto the placed bond x→y; return atoms written."""
        src_vec = frag[y] - frag[x]
        rot = _rotation_aligning(src_vec, xyz[y] - xyz[x])
        moved = {a: (p - frag[y]) @ rot.T + xyz[y] for a, p in frag.items()}
        r_x = next((n for n in self.heavy_first[x] if n != y and placed[n]), None)
        r_y = next((n for n in self.heavy_first[y] if n != x and n in moved), None)
        if r_x is not None and r_y is not None:
            t = self.template
            want = _dihedral(t[r_x], t[x], t[y], t[r_y])
            have = _dihedral(xyz[r_x], xyz[x], xyz[y], moved[r_y])
            axis = xyz[y] - xyz[x]
            spin = _axis_rotation(axis / np.linalg.norm(axis), want - have)
            moved = {a: (p - xyz[y]) @ spin.T + xyz[y] for a, p in moved.items()}
        written = []
        for a, p in moved.items():
            if a in (x, y):
                continue
            if overwrite or not placed[a]:
                xyz[a] = p
                placed[a] = True
                written.append(a)
        return written

    def _branch(self, start: int, parent: int, placed) -> tuple[dict[int, np.ndarray], list[int]]:
        """Template coordinates beyond parent→start; stops at (and reports) other ring-system atoms."""
        frag = {parent: self.template[parent], start: self.template[start]}
        boundary = []
        stack = [start]
        while stack:
            cur = stack.pop()
            for n in self.neighbours[cur]:
                if n in frag or placed[n]:
                    continue
                frag[n] = self.template[n]
                if n in self.system_of:
                    boundary.append(n)
                else:
                    stack.append(n)
        return frag, boundary

    def _attachments(self, atoms, placed) -> list[tuple[int, int]]:
        out = []
        for y in atoms:
            for x in self.neighbours[y]:
                if placed[x] and placed[y] and any(not placed[n] for n in self.neighbours[y]):
                    out.append((x, y))
                    break
        return out

    def assemble(self, cores: dict[int, dict[int, np.ndarray]]) -> np.ndarray:
        """``cores`` maps ring-system index -> {atom: ideal position} (system atoms and their neighbours)."""
        xyz = np.zeros((self.n, 3))
        placed = np.zeros(self.n, dtype=bool)
        first = min(cores)
        for a, p in cores[first].items():
            xyz[a] = p
            placed[a] = True
        done = {first}
        queue = self._attachments(list(cores[first]), placed)
        while queue:
            x, y = queue.pop(0)
            sys_y = self.system_of.get(y)
            if sys_y is not None and sys_y not in done:
                written = self._align(xyz, placed, cores[sys_y], x, y, overwrite=True)
                done.add(sys_y)
                queue.extend(self._attachments(written + [y], placed))
                continue
            frag, boundary = self._branch(y, x, placed)
            written = self._align(xyz, placed, frag, x, y, overwrite=False)
            for d in boundary:
                sys_d = self.system_of[d]
                if sys_d in done:
                    continue
                c = next(n for n in self.neighbours[d] if n in frag and n != d and placed[n] and n not in self.system_of)
                core = dict(cores[sys_d])
                written += self._align(xyz, placed, core, c, d, overwrite=True)
                done.add(sys_d)
            queue.extend(self._attachments(written, placed))
        if not placed.all():
            missing = np.flatnonzero(~placed).tolist()
            raise InputError(f"could not place atoms {missing[:10]} while building")
        return xyz


# ------------------------------------------------------------------ builder
def _template(mol: Chem.Mol) -> np.ndarray:
    params = AllChem.ETKDGv3()
    params.randomSeed = _TEMPLATE_SEED
    cid = AllChem.EmbedMolecule(mol, params)
    if cid < 0:
        params.useRandomCoords = True
        cid = AllChem.EmbedMolecule(mol, params)
    if cid < 0:
        raise InputError("RDKit could not embed a 3D template of the molecule")
    xyz = mol.GetConformer(cid).GetPositions()
    mol.RemoveAllConformers()
    return xyz


def rotamer_cap(n_chair_cores: int) -> int:
    """Automatic rotamer cap per all-chair core: ``ROTAMER_BUDGET / n_chair_cores`` within [81, 729].

    A single ring with its two chairs gets 729 (3^6) combinations per chair, the full product
    of six sp3 rotors; a ring system with many ring-state and N-inversion combinations gets
    fewer per combination, down to 81, so that the number of starts stays near the budget.
    """
    return int(min(MAX_ROTAMER_CAP, max(MIN_ROTAMER_CAP, ROTAMER_BUDGET // max(n_chair_cores, 1))))


def _with_rotamers(conf_mol: Chem.Mol, xyz: np.ndarray, rotors, values) -> np.ndarray:
    """Coordinates ``xyz`` with each rotor's torsion set to its value (on ``conf_mol``'s one conformer)."""
    c = conf_mol.GetConformer()
    for i, p in enumerate(xyz):
        c.SetAtomPosition(i, p.tolist())
    for rotor, value in zip(rotors, values):
        set_rotamer(c, rotor.atoms, value)
    return c.GetPositions()


def _ring_normal(xyz: np.ndarray) -> np.ndarray:
    """Unit normal of the mean plane of a ring's atoms."""
    centred = xyz - xyz.mean(axis=0)
    return np.linalg.svd(centred)[2][-1]


def _core_options(
    mol, core_xyz: dict[int, np.ndarray], atoms: list[int], ranks, equatorial_only: dict[int, np.ndarray] | None = None
) -> list[dict[int, np.ndarray]]:
    """Every distinct core (system atoms plus exocyclic neighbours) for one ring-system geometry."""
    options = _placements(mol, core_xyz, set(atoms), ranks, equatorial_only)
    cores = []
    for choice in itertools.product(*options):
        full = dict(core_xyz)
        for part in choice:
            full.update(part)
        cores.append(full)
    return cores


def _system_states(mol, problem: "CoreProblem", combos, template, ranks, invertible=(), progress: bool = False):
    """Feasible (states, cores, restricted cores) of one ring system, and the number of infeasible combinations.

    ``cores`` holds every placement; ``restricted cores`` those with each invertible
    nitrogen (in ``invertible``) of a chair ring equatorial only: they stand in for this
    system in combinations where some ring of the molecule is a twist-boat, since a
    twist-boat family is one family whatever the nitrogens of the chairs do. In a state
    with a twist-boat, the nitrogens of the twist-boat ring keep both placements and those
    of its chair rings are equatorial only.

    When no combination of chair and twist-boat states fits (a bridged system such as
    bicyclo[2.2.2]octane, whose rings are boats), the system is built once from the
    template embedding instead, labelled ``embedded``.
    """
    from tqdm import tqdm

    inv = set(invertible) & set(problem.atoms)
    feasible = []
    for states in tqdm(combos, desc="ring states", unit="state", disable=not progress or len(combos) < 10, leave=False):
        coords = problem.solve(states, core_guesses(problem, states, template))
        if coords is None:
            continue
        core_xyz = {a: coords[problem.local[a]] for a in problem.atoms}
        equatorial = {}
        for ring, state in zip(problem.rings, states):
            if state.kind == "chair":
                normal = _ring_normal(np.array([core_xyz[a] for a in ring.atoms]))
                equatorial.update({a: normal for a in ring.atoms if a in inv})
        restricted = _core_options(mol, core_xyz, problem.atoms, ranks, equatorial) if equatorial else None
        if n_twist_boats(states):
            feasible.append((states, restricted or _core_options(mol, core_xyz, problem.atoms, ranks), None))
            continue
        cores = _core_options(mol, core_xyz, problem.atoms, ranks)
        feasible.append((states, cores, restricted or cores))
    n_infeasible = len(combos) - len(feasible)
    if not feasible:
        core_xyz = {a: template[a] - template[problem.atoms].mean(axis=0) for a in problem.atoms}
        cores = _core_options(mol, core_xyz, problem.atoms, ranks)
        feasible.append((None, cores, cores))
    return feasible, n_infeasible


def build_starting_structures(
    mol: Chem.Mol,
    analysis: RingAnalysis,
    reference_signature: str,
    achiral: bool,
    max_rotamers: int | None = None,
    include_twist_boats: bool = True,
    progress: bool = False,
) -> BuildReport:
    """Enumerate and build every starting structure of ``mol``.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        With explicit hydrogens and stereochemistry.
    analysis : RingAnalysis
    reference_signature : str
        Canonical isomeric SMILES the built structures must reproduce.
    achiral : bool
        Whether mirror-image structures count as duplicates.
    max_rotamers : int or None
        Cap on rotamer combinations per all-chair ring-state and placement combination;
        None (default) chooses it from the number of those combinations (:func:`rotamer_cap`).
    include_twist_boats : bool
        Build twist-boat states too (default True).
    progress : bool
        Progress bar over ring-state combinations (large ring systems).

    Returns
    -------
    BuildReport
    """
    from chairbuild.dedupe import StructureDeduplicator

    work = Chem.Mol(mol)
    template = _template(work)
    ranks = list(Chem.CanonicalRankAtoms(mol, breakTies=False))
    problems = {s.index: CoreProblem(mol, analysis, s.index) for s in analysis.systems}
    combos_per_system = {}
    for s in analysis.systems:
        combos = ring_combinations(len(s.rings))
        if not include_twist_boats:
            combos = [c for c in combos if all(st.kind == "chair" for st in c)]
        combos_per_system[s.index] = combos
    notes: list[str] = []
    assembler = _Assembler(mol, {k: p.atoms for k, p in problems.items()}, template)
    dedupe = StructureDeduplicator(mol, None, achiral=achiral, rmsd_threshold=0.05, all_polar_hydrogens=True)
    starts: list[StartingStructure] = []
    n_infeasible = n_stereo = n_dup = n_dup_cores = 0
    infeasible_labels = []
    system_ids = [s.index for s in analysis.systems]
    conf_mol = Chem.Mol(mol)
    conf_mol.RemoveAllConformers()
    conf = Chem.Conformer(mol.GetNumAtoms())
    conf_mol.AddConformer(conf, assignId=True)
    per_system = {}
    for s in system_ids:
        per_system[s], n_bad = _system_states(
            mol, problems[s], combos_per_system[s], template, ranks, analysis.invertible_nitrogens, progress
        )
        n_infeasible += n_bad
        if per_system[s][0][0] is None:
            notes.append(
                f"ring system {s} (rings {', '.join(map(str, analysis.systems[s].rings))}) fits no chair/twist-boat "
                "combination (bridged); it was built from its embedded geometry only"
            )
        elif n_bad:
            infeasible_labels.append(n_bad)
    core_dedupe = StructureDeduplicator(mol, None, achiral=achiral, rmsd_threshold=0.05, all_polar_hydrogens=True)
    n_combos = 0
    cores: list[tuple[np.ndarray, str, bool]] = []  # (coordinates, label, all rings chairs)
    for combo in itertools.product(*(per_system[s] for s in system_ids)):
        n_boats = sum(n_twist_boats(states) for states, _, _ in combo)
        if n_boats > 1:
            continue  # at most one twist-boat ring in the whole molecule (see the module notes)
        n_combos += 1
        parts = []
        for s, (states, _, _) in zip(system_ids, combo):
            if states is None:
                parts.append(f"system{s}=embedded")
            else:
                parts += [f"ring{analysis.systems[s].rings[k]}={st.label}" for k, st in enumerate(states)]
        label = ";".join(parts)
        all_chairs = n_boats == 0
        # with a twist-boat somewhere, the other systems' invertible nitrogens stay equatorial (see _system_states)
        system_cores = [cores if all_chairs or restricted is None else restricted for _, cores, restricted in combo]
        for choice_idx, core_choice in enumerate(itertools.product(*system_cores)):
            xyz = assembler.assemble(dict(zip(system_ids, core_choice)))
            if stereo_signature(mol, xyz) != reference_signature:
                n_stereo += 1
                continue
            # a core equivalent by symmetry to one already kept would only repeat its rotamers; compared with
            # every rotor at its first value, since two cores can differ only in what the rotors then move
            canonical = _with_rotamers(conf_mol, xyz, analysis.rotors, [r.angles[0] for r in analysis.rotors])
            if core_dedupe.is_duplicate(canonical):
                n_dup_cores += 1
                continue
            core_dedupe.add(canonical)
            cores.append((xyz, f"{label}|placement{choice_idx}", all_chairs))
    n_chair_cores = sum(1 for _, _, all_chairs in cores if all_chairs)
    cap = rotamer_cap(n_chair_cores) if max_rotamers is None else int(max_rotamers)
    rotors = list(analysis.rotors)
    n_combos_rot = count_rotamers(rotors)
    if n_combos_rot > cap:
        kept, total = [], 1
        for r in rotors:
            if total * len(r.angles) <= cap:
                kept.append(r)
                total *= len(r.angles)
        notes.append(
            f"rotamer cap reached: {format_count(n_combos_rot)} combinations of {len(rotors)} rotatable bonds exceed "
            f"the cap of {cap} per ring state ({n_chair_cores} all-chair ring-state and placement combinations); the "
            f"{len(rotors) - len(kept)} rotor(s) farthest from the rings start at their template torsion"
        )
        rotors = kept
    # at most `cap` combinations after the cap above: this list is bounded
    rotamer_sets = list(itertools.product(*(r.angles for r in rotors))) if rotors else [()]
    # states with a twist-boat: each rotor at its first value only (see the module notes)
    boat_sets = [tuple(r.angles[0] for r in rotors)]
    for xyz, label, all_chairs in cores:
        sets = rotamer_sets if all_chairs else boat_sets
        for k, rot_values in enumerate(sets):
            final = _with_rotamers(conf_mol, xyz, rotors, rot_values)
            if dedupe.is_duplicate(final):
                if k == 0:
                    # the core is equivalent to one expanded before, its rotor references turned by a
                    # multiple of the rotamer step: its rotamers repeat that core's rotamers
                    n_dup_cores += 1
                    n_dup += len(sets)
                    break
                n_dup += 1
                continue
            rot_label = ",".join(f"{v:.0f}" for v in rot_values)
            dedupe.add(final)
            starts.append(StartingStructure(coords=final, origin=label + (f"|rot({rot_label})" if rot_values else "")))
    if infeasible_labels:
        notes.append(
            f"{sum(infeasible_labels)} ring-state combination(s) cannot be built (the ring fusion, a bridge or an "
            "endocyclic double bond forbids them) and were dropped"
        )
    return BuildReport(
        starts=tuple(starts),
        notes=tuple(notes),
        n_ring_combinations=n_combos,
        n_infeasible=n_infeasible,
        n_stereo_rejected=n_stereo,
        n_duplicates=n_dup,
        capped=n_combos_rot > cap,
        n_duplicate_cores=n_dup_cores,
        rotamer_cap=cap,
    )
