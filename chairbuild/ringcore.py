"""Ideal ring-system cores: the eight states of a six-membered ring and the least-squares fit that builds them.

A ring-state combination (one :class:`RingState` per ring of a ring system) is turned into
coordinates of the system's atoms by :class:`CoreProblem`: a small least-squares fit to
ideal bond lengths (covalent radii), bond angles (111° at sp3, 120° at sp2 atoms) and the
target endocyclic torsions of each ring's state. The fit starts from a few guesses
(:func:`core_guesses`); a combination that no guess brings within 40° of its torsion
pattern is unreachable (a flipped trans-decalin ring, say). Used by
:mod:`chairbuild.build`.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Sequence

import numpy as np
from rdkit import Chem
from scipy.optimize import least_squares

from chairbuild.rings import RingAnalysis

__all__ = [
    "RingState",
    "RING_STATES",
    "CoreProblem",
    "bond_length",
    "core_guesses",
    "dihedral_rad",
    "extended_system_atoms",
    "n_twist_boats",
    "ring_combinations",
]

_CHAIR_TORSION = 55.0
_TB_A = 31.0
_TB_B = 65.0
_INFEASIBLE_DEG = 40.0
#: Starting guesses tried per ring-state combination before it is declared unreachable.
_MAX_GUESSES = 4


@dataclass(frozen=True)
class RingState:
    """Target state of one ring: ``kind`` is 'chair' or 'twist-boat'; ``variant`` numbers the forms."""

    kind: str
    variant: int

    @property
    def label(self) -> str:
        return f"{self.kind}-{self.variant}"

    def torsions(self) -> np.ndarray:
        """Ideal endocyclic torsions (degrees), torsion k over ring atoms k..k+3."""
        k = np.arange(6)
        if self.kind == "chair":
            sign = 1.0 if self.variant == 0 else -1.0
            return sign * _CHAIR_TORSION * (-1.0) ** k
        shift, sign = divmod(self.variant, 2)
        pattern = np.array([_TB_A, -_TB_B, _TB_A, _TB_A, -_TB_B, _TB_A])
        return (1.0 if sign == 0 else -1.0) * np.roll(pattern, shift)


#: The eight states of a six-membered ring.
RING_STATES: tuple[RingState, ...] = tuple(
    [RingState("chair", 0), RingState("chair", 1)] + [RingState("twist-boat", v) for v in range(6)]
)


# ----------------------------------------------------------- ideal geometry
def bond_length(mol: Chem.Mol, i: int, j: int) -> float:
    table = Chem.GetPeriodicTable()
    a, b = mol.GetAtomWithIdx(i), mol.GetAtomWithIdx(j)
    length = table.GetRcovalent(a.GetAtomicNum()) + table.GetRcovalent(b.GetAtomicNum())
    bond = mol.GetBondBetweenAtoms(i, j)
    if bond is not None and bond.GetBondType() == Chem.BondType.DOUBLE:
        length -= 0.2
    elif bond is not None and bond.GetBondType() == Chem.BondType.AROMATIC:
        length -= 0.1
    elif bond is not None and bond.GetBondType() == Chem.BondType.TRIPLE:
        length -= 0.34
    if a.GetAtomicNum() == 1 or b.GetAtomicNum() == 1:
        length = max(length - 0.05, 0.95)
    return length


def _ideal_angle(atom: Chem.Atom) -> float:
    if atom.GetHybridization() in (Chem.HybridizationType.SP2,) or atom.GetIsAromatic():
        return np.radians(120.0)
    if atom.GetSymbol() == "S":
        return np.radians(99.0)
    return np.radians(111.0)


def dihedral_rad(p: np.ndarray) -> np.ndarray:
    """Vectorised dihedral of quadruples p with shape (n, 4, 3)."""
    b0 = p[:, 0] - p[:, 1]
    b1 = p[:, 2] - p[:, 1]
    b2 = p[:, 3] - p[:, 2]
    b1n = b1 / np.linalg.norm(b1, axis=1)[:, None]
    v = b0 - np.sum(b0 * b1n, axis=1)[:, None] * b1n
    w = b2 - np.sum(b2 * b1n, axis=1)[:, None] * b1n
    x = np.sum(v * w, axis=1)
    y = np.sum(np.cross(b1n, v) * w, axis=1)
    return np.arctan2(y, x)


def _wrap(angle: np.ndarray) -> np.ndarray:
    return (angle + np.pi) % (2.0 * np.pi) - np.pi


def extended_system_atoms(mol: Chem.Mol, analysis: RingAnalysis, system_index: int) -> tuple[list[int], list[tuple[int, ...]]]:
    """Atoms of a ring system plus every other ring fused or spiro-joined to it.

    Returns the atoms and the extra rings (five-membered, aromatic, ...), which are placed
    with the core but get no torsion targets, except 0° for aromatic rings.
    """
    atoms = set(analysis.systems[system_index].atoms)
    own = {analysis.rings[r].atoms for r in analysis.systems[system_index].rings}
    extra: list[tuple[int, ...]] = []
    changed = True
    all_rings = [tuple(r) for r in Chem.GetSymmSSSR(mol)]
    while changed:
        changed = False
        for ring in all_rings:
            if ring in extra or any(set(ring) == set(o) for o in own):
                continue
            if atoms & set(ring):
                extra.append(ring)
                atoms |= set(ring)
                changed = True
    return sorted(atoms), extra


class CoreProblem:
    """Least-squares fit of a ring system's atoms to ideal bonds, angles and target torsions."""

    def __init__(self, mol: Chem.Mol, analysis: RingAnalysis, system_index: int):
        system = analysis.systems[system_index]
        self.atoms, extra = extended_system_atoms(mol, analysis, system_index)
        self.local = {a: i for i, a in enumerate(self.atoms)}
        self.rings = [analysis.rings[r] for r in system.rings]
        self.only_six = not extra
        atom_set = set(self.atoms)
        bonds, lengths = [], []
        for b in mol.GetBonds():
            i, j = b.GetBeginAtomIdx(), b.GetEndAtomIdx()
            if i in atom_set and j in atom_set:
                bonds.append((self.local[i], self.local[j]))
                lengths.append(bond_length(mol, i, j))
        self.bonds = np.array(bonds, dtype=int)
        self.lengths = np.array(lengths)
        angles, values = [], []
        for a in self.atoms:
            nbs = [n.GetIdx() for n in mol.GetAtomWithIdx(a).GetNeighbors() if n.GetIdx() in atom_set]
            for x, y in itertools.combinations(nbs, 2):
                angles.append((self.local[x], self.local[a], self.local[y]))
                values.append(_ideal_angle(mol.GetAtomWithIdx(a)))
        self.angles = np.array(angles, dtype=int)
        self.angle_values = np.array(values)
        quads, fixed_zero = [], []
        for ring in self.rings:
            for k in range(6):
                quad = [self.local[ring.atoms[(k + m) % 6]] for m in range(4)]
                quads.append(quad)
                bond = mol.GetBondBetweenAtoms(ring.atoms[(k + 1) % 6], ring.atoms[(k + 2) % 6])
                fixed_zero.append(bond.GetBondType() in (Chem.BondType.DOUBLE, Chem.BondType.AROMATIC))
        self.n_targeted = len(quads)
        for ring in extra:
            if all(mol.GetAtomWithIdx(a).GetIsAromatic() for a in ring):
                size = len(ring)
                for k in range(size):
                    quads.append([self.local[ring[(k + m) % size]] for m in range(4)])
                    fixed_zero.append(True)
        self.quads = np.array(quads, dtype=int)
        self.fixed_zero = np.array(fixed_zero, dtype=bool)

    def residuals(self, x: np.ndarray, targets: np.ndarray) -> np.ndarray:
        p = x.reshape(-1, 3)
        d = np.linalg.norm(p[self.bonds[:, 0]] - p[self.bonds[:, 1]], axis=1)
        r_bond = (d - self.lengths) / 0.01
        u = p[self.angles[:, 0]] - p[self.angles[:, 1]]
        v = p[self.angles[:, 2]] - p[self.angles[:, 1]]
        cosang = np.sum(u * v, axis=1) / (np.linalg.norm(u, axis=1) * np.linalg.norm(v, axis=1))
        ang = np.arccos(np.clip(cosang, -1.0, 1.0))
        r_angle = (ang - self.angle_values) / np.radians(2.0)
        tors = dihedral_rad(p[self.quads])
        weights = np.where(self.fixed_zero, 1.0 / np.radians(2.0), 1.0 / np.radians(10.0))
        r_tors = _wrap(tors - targets) * weights
        return np.concatenate([r_bond, r_angle, r_tors])

    def torsion_targets(self, states: Sequence[RingState]) -> np.ndarray:
        values = np.concatenate([s.torsions() for s in states] + [np.zeros(len(self.quads) - self.n_targeted)])
        return np.radians(np.where(self.fixed_zero, 0.0, values))

    def jacobian(self, x: np.ndarray, targets: np.ndarray) -> np.ndarray:
        """Analytic Jacobian of :meth:`residuals` (torsion derivatives after Blondel & Karplus,
        J. Comput. Chem. 1996, 17, 1132)."""
        p = x.reshape(-1, 3)
        n_b, n_a, n_t = len(self.bonds), len(self.angles), len(self.quads)
        jac = np.zeros((n_b + n_a + n_t, p.size))
        # bonds
        d = p[self.bonds[:, 0]] - p[self.bonds[:, 1]]
        r = np.linalg.norm(d, axis=1)
        g = d / r[:, None] / 0.01
        rows = np.arange(n_b)
        for col in range(3):
            jac[rows, 3 * self.bonds[:, 0] + col] += g[:, col]
            jac[rows, 3 * self.bonds[:, 1] + col] -= g[:, col]
        # angles
        a, b, c = self.angles[:, 0], self.angles[:, 1], self.angles[:, 2]
        u, v = p[a] - p[b], p[c] - p[b]
        lu, lv = np.linalg.norm(u, axis=1), np.linalg.norm(v, axis=1)
        cosang = np.clip(np.sum(u * v, axis=1) / (lu * lv), -1.0, 1.0)
        sinang = np.sqrt(np.maximum(1.0 - cosang**2, 1e-12))
        scale = 1.0 / np.radians(2.0)
        da = -(v / (lu * lv)[:, None] - cosang[:, None] * u / (lu**2)[:, None]) / sinang[:, None] * scale
        dc = -(u / (lu * lv)[:, None] - cosang[:, None] * v / (lv**2)[:, None]) / sinang[:, None] * scale
        rows = n_b + np.arange(n_a)
        for col in range(3):
            jac[rows, 3 * a + col] += da[:, col]
            jac[rows, 3 * c + col] += dc[:, col]
            jac[rows, 3 * b + col] -= da[:, col] + dc[:, col]
        # torsions
        q = self.quads
        f = p[q[:, 0]] - p[q[:, 1]]
        gg = p[q[:, 1]] - p[q[:, 2]]
        h = p[q[:, 3]] - p[q[:, 2]]
        aa = np.cross(f, gg)
        bb = np.cross(h, gg)
        a2 = np.sum(aa * aa, axis=1)
        b2 = np.sum(bb * bb, axis=1)
        lg = np.linalg.norm(gg, axis=1)
        fg = np.sum(f * gg, axis=1)
        hg = np.sum(h * gg, axis=1)
        d0 = -(lg / a2)[:, None] * aa
        d3 = (lg / b2)[:, None] * bb
        d1 = -d0 + (fg / (a2 * lg))[:, None] * aa - (hg / (b2 * lg))[:, None] * bb
        d2 = -d3 - (fg / (a2 * lg))[:, None] * aa + (hg / (b2 * lg))[:, None] * bb
        weights = np.where(self.fixed_zero, 1.0 / np.radians(2.0), 1.0 / np.radians(10.0))
        rows = n_b + n_a + np.arange(n_t)
        for k, dk in enumerate((d0, d1, d2, d3)):
            for col in range(3):
                np.add.at(jac, (rows, 3 * q[:, k] + col), dk[:, col] * weights)
        return jac

    def solve(self, states: Sequence[RingState], guesses: Sequence[np.ndarray]) -> np.ndarray | None:
        """Ideal coordinates of the system's atoms for ``states``, or None if unreachable."""
        targets = self.torsion_targets(states)
        best, best_dev = None, np.inf
        for guess in guesses[:_MAX_GUESSES]:
            # "trf", not "lm": SciPy 1.17's MINPACK ("lm") gave a different fit from the same input on the
            # first call in a process than on later calls, so built structures depended on what ran before
            fit = least_squares(
                self.residuals,
                guess.ravel(),
                jac=self.jacobian,
                args=(targets,),
                method="trf",
                x_scale=1.0,
                xtol=1e-4,
                ftol=1e-4,
                max_nfev=200,
            )
            p = fit.x.reshape(-1, 3)
            tors = dihedral_rad(p[self.quads])
            dev = np.degrees(np.abs(_wrap(tors - targets)))[~self.fixed_zero]
            worst = float(dev.max()) if dev.size else 0.0
            if worst < best_dev:
                best, best_dev = p, worst
            if worst < 15.0:
                break
        if best is None or best_dev > _INFEASIBLE_DEG:
            return None
        return best


def _single_ring_guess(state: RingState) -> np.ndarray:
    """Ideal ring from the inverse Cremer–Pople construction (Q = 0.6 Å)."""
    j = np.arange(6)
    radius = 1.45
    if state.kind == "chair":
        z = (0.25 if state.variant == 0 else -0.25) * (-1.0) ** j
    else:
        shift, sign = divmod(state.variant, 2)
        phi = np.radians(30.0 + 60.0 * shift)
        z = (1.0 if sign == 0 else -1.0) * np.sqrt(1.0 / 3.0) * 0.6 * np.cos(phi + 4.0 * np.pi * j / 6.0)
    ang = 2.0 * np.pi * j / 6.0
    return np.stack([radius * np.cos(ang), radius * np.sin(ang), z], axis=1)


# ------------------------------------------------------------ exocyclic placement
def n_twist_boats(states: Sequence[RingState] | None) -> int:
    return 0 if states is None else sum(st.kind != "chair" for st in states)


def ring_combinations(n_rings: int) -> list[tuple[RingState, ...]]:
    chairs = RING_STATES[:2]
    boats = RING_STATES[2:]
    combos = list(itertools.product(chairs, repeat=n_rings))
    if n_rings == 1:
        return combos + [(b,) for b in boats]
    for pos in range(n_rings):
        for base in itertools.product(chairs, repeat=n_rings - 1):
            for b in boats:
                combos.append(tuple(base[:pos]) + (b,) + tuple(base[pos:]))
    return combos


def _kabsch(src: np.ndarray, dst: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rotation R and centroids so that (src - cs) @ R.T + cd best fits dst (proper rotation)."""
    cs, cd = src.mean(axis=0), dst.mean(axis=0)
    h = (src - cs).T @ (dst - cd)
    u, _, vt = np.linalg.svd(h)
    d = np.sign(np.linalg.det(vt.T @ u.T))
    rot = vt.T @ np.diag([1.0, 1.0, d]) @ u.T
    return rot, cs, cd


def core_guesses(problem: CoreProblem, states: Sequence[RingState], template: np.ndarray) -> list[np.ndarray]:
    """Starting guesses: each ring in turn at its ideal shape with the rest from the template."""
    base = template[problem.atoms] - template[problem.atoms].mean(axis=0)
    guesses = []
    for ring, state in zip(problem.rings, states):
        idx = [problem.local[a] for a in ring.atoms]
        ideal = _single_ring_guess(state)
        rot, cs, cd = _kabsch(base[idx], ideal)
        g = (base - cs) @ rot.T + cd
        g[idx] = ideal
        guesses.append(g)
    guesses.append(base)
    rng = np.random.default_rng(7)
    for _ in range(3):
        guesses.append(guesses[0] + rng.normal(scale=0.3, size=base.shape))
    return guesses


