"""Symmetry-aware comparison of conformers.

Two structures are the same conformer when, for some permutation of the molecule onto
itself (graph automorphisms of the heavy atoms, hydrogens on O, N and S that are their
atom's only hydrogen following their parent), the best-fit RMSD of the compared atoms
is below a threshold. For an achiral molecule the mirror image of a structure is the
same energy level, so reflections are allowed too, and a conformer that is not
superposable on its own mirror image stands for two (degeneracy 2).

A cheap invariant, the sorted list of interatomic distances (unchanged by permutation,
rotation and reflection), screens candidates before any alignment, with two bounds that
an RMSD below the threshold implies (largest single difference and Euclidean norm).
"""

from __future__ import annotations

import numpy as np
from rdkit import Chem

__all__ = ["StructureDeduplicator", "best_rmsd"]

_MAX_AUTOMORPHISMS = 2000


def _kabsch_rmsd(a: np.ndarray, b: np.ndarray, allow_reflection: bool) -> float:
    """Best-fit RMSD of point sets a and b (same order)."""
    a0 = a - a.mean(axis=0)
    b0 = b - b.mean(axis=0)
    h = a0.T @ b0
    u, s, vt = np.linalg.svd(h)
    if not allow_reflection and np.linalg.det(u @ vt) < 0:
        s = s.copy()
        s[-1] = -s[-1]
    msd = (np.sum(a0 * a0) + np.sum(b0 * b0) - 2.0 * np.sum(s)) / len(a)
    return float(np.sqrt(max(msd, 0.0)))


def best_rmsd(a: np.ndarray, b: np.ndarray, permutations: np.ndarray, allow_reflection: bool) -> float:
    """Minimum over ``permutations`` (rows index into b) of the best-fit RMSD of a and b[perm]."""
    best = np.inf
    for perm in permutations:
        r = _kabsch_rmsd(a, b[perm], allow_reflection)
        if r < best:
            best = r
            if best < 1e-3:
                break
    return best


def _n_hydrogens(atom: Chem.Atom) -> int:
    return sum(1 for n in atom.GetNeighbors() if n.GetAtomicNum() == 1) + atom.GetNumImplicitHs()


def _selected_atoms(mol: Chem.Mol, atoms: list[int] | None, all_polar_hydrogens: bool = False) -> list[int]:
    if atoms is not None:
        return [int(a) for a in atoms]
    out = []
    for a in mol.GetAtoms():
        if a.GetAtomicNum() > 1:
            out.append(a.GetIdx())
        else:
            parent = a.GetNeighbors()[0] if a.GetDegree() else None
            if parent is not None and parent.GetAtomicNum() in (7, 8, 16):
                if all_polar_hydrogens or _n_hydrogens(parent) == 1:
                    out.append(a.GetIdx())
    return out


def _automorphisms(mol: Chem.Mol, selected: list[int]) -> np.ndarray:
    """Permutations of ``selected`` (as positions into it) induced by graph automorphisms."""
    heavy = [a.GetIdx() for a in mol.GetAtoms() if a.GetAtomicNum() > 1]
    heavy_mol = Chem.RemoveHs(mol, sanitize=False)
    matches = heavy_mol.GetSubstructMatches(heavy_mol, uniquify=False, useChirality=False, maxMatches=_MAX_AUTOMORPHISMS)
    if not matches:
        matches = (tuple(range(heavy_mol.GetNumAtoms())),)
    pos = {a: k for k, a in enumerate(selected)}
    # compared hydrogens by parent, in index order: the k-th hydrogen of a parent maps onto the
    # k-th hydrogen of the parent's image (an NH2 pair is not swapped; structures that differ only
    # by that swap count as different, which costs a minimisation but never loses one)
    polar_hydrogens: dict[int, list[int]] = {}
    for a in selected:
        atom = mol.GetAtomWithIdx(a)
        if atom.GetAtomicNum() == 1:
            polar_hydrogens.setdefault(atom.GetNeighbors()[0].GetIdx(), []).append(a)
    perms = []
    for match in matches:
        # heavy atom heavy[i] maps onto heavy[match[i]]
        image = {heavy[i]: heavy[m] for i, m in enumerate(match)}
        perm = []
        ok = True
        for a in selected:
            if a in image:
                perm.append(pos[image[a]])
            else:
                parent = mol.GetAtomWithIdx(a).GetNeighbors()[0].GetIdx()
                own, theirs = polar_hydrogens[parent], polar_hydrogens.get(image[parent], [])
                if len(theirs) != len(own):
                    ok = False
                    break
                perm.append(pos[theirs[own.index(a)]])
        if ok:
            perms.append(perm)
    unique = np.unique(np.array(perms, dtype=int), axis=0)
    return unique


class StructureDeduplicator:
    """Keep a list of distinct structures; say whether a new one duplicates a kept one.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogens (hydrogens after heavy atoms).
    atoms : list of int, optional
        Atoms compared (default: heavy atoms and lone polar hydrogens).
    all_polar_hydrogens : bool
        With the default atoms, compare every hydrogen on N, O and S, not only a lone one
        (used for starting structures, where an NH2 turned by a rotor is a different start).
    achiral : bool
        Allow reflections (the molecule is superposable on its mirror image).
    rmsd_threshold : float
        Å.
    energy_tolerance : float, optional
        kJ/mol; when given, structures are duplicates only if their energies also agree.
    """

    def __init__(
        self,
        mol: Chem.Mol,
        atoms: list[int] | None = None,
        achiral: bool = False,
        rmsd_threshold: float = 0.25,
        energy_tolerance: float | None = None,
        all_polar_hydrogens: bool = False,
    ):
        self.atoms = np.array(_selected_atoms(mol, atoms, all_polar_hydrogens), dtype=int)
        self.perms = _automorphisms(mol, [int(a) for a in self.atoms])
        self.achiral = achiral
        self.threshold = rmsd_threshold
        self.energy_tolerance = energy_tolerance
        self._coords: list[np.ndarray] = []
        self._energies: list[float] = []
        iu = np.triu_indices(len(self.atoms), k=1)
        self._iu = iu
        # spectra of the kept structures, rows [0, count) of a buffer grown by doubling
        self._spectra = np.empty((16, len(iu[0])))
        self._count = 0

    def _spectrum(self, xyz: np.ndarray) -> np.ndarray:
        d = np.linalg.norm(xyz[:, None, :] - xyz[None, :, :], axis=-1)
        return np.sort(d[self._iu])

    def match(self, coords: np.ndarray, energy: float | None = None) -> int | None:
        """Index of the kept structure that ``coords`` duplicates, or None."""
        xyz = np.asarray(coords, dtype=float)[self.atoms]
        if not self._coords:
            return None
        spec = self._spectrum(xyz)
        # A permutation, rotation or reflection cannot change the sorted spectrum. With atom
        # displacements δ_i after the best fit (Σ δ_i² = n r²), a distance changes by at most
        # |δ_i| + |δ_j|, so the matched distances differ by at most 2 r sqrt(n) each and by at most
        # sqrt(2 n (n - 1)) r in the Euclidean norm over all pairs; sorting both lists can only
        # shorten that norm (rearrangement inequality). Both bounds screen before any alignment.
        n = len(self.atoms)
        bound_max = 2.0 * self.threshold * np.sqrt(n) + 1e-6
        bound_l2 = self.threshold * np.sqrt(2.0 * n * (n - 1)) + 1e-6
        diff = np.abs(self._spectra[: self._count] - spec)
        candidates = np.flatnonzero((diff.max(axis=1) <= bound_max) & (np.sqrt((diff**2).sum(axis=1)) <= bound_l2))
        for k in candidates:
            if self.energy_tolerance is not None and energy is not None:
                if abs(self._energies[k] - energy) > self.energy_tolerance:
                    continue
            if best_rmsd(self._coords[k], xyz, self.perms, self.achiral) < self.threshold:
                return int(k)
        return None

    def is_duplicate(self, coords: np.ndarray, energy: float | None = None) -> bool:
        """True when ``coords`` duplicates a kept structure."""
        return self.match(coords, energy) is not None

    def add(self, coords: np.ndarray, energy: float | None = None) -> int:
        """Keep ``coords``; return its index."""
        xyz = np.asarray(coords, dtype=float)[self.atoms]
        self._coords.append(xyz)
        if self._count == len(self._spectra):
            self._spectra = np.concatenate([self._spectra, np.empty_like(self._spectra)])
        self._spectra[self._count] = self._spectrum(xyz)
        self._count += 1
        self._energies.append(float(energy) if energy is not None else float("nan"))
        return len(self._coords) - 1

    def is_chiral_conformer(self, coords: np.ndarray) -> bool:
        """True when the structure is not superposable on its own mirror image."""
        xyz = np.asarray(coords, dtype=float)[self.atoms]
        mirrored = xyz * np.array([-1.0, 1.0, 1.0])
        return best_rmsd(xyz, mirrored, self.perms, allow_reflection=False) >= self.threshold
