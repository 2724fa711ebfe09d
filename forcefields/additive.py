"""The chemist's additive estimate: ring- and position-specific A-values plus pair increments.

:class:`AdditiveModel` scores one conformer by adding tabulated increments for the
substituents of every six-membered ring that is a chair in the given coordinates. It is
the quick estimate a chemist makes by hand; chairbuild compares it with the force-field
result and flags rings where additivity fails.

The increments, each with its source and a flag (P = primary paper seen, S = seen only in
a secondary compilation, M = from memory, not verified), its conditions (temperature,
solvent, phase) and the range quoted for it, are in ``forcefields/data/increments.csv``;
the table is read at first use and cached (:func:`load_increments`). Values are stored in
the unit they were published in (kcal/mol or kJ/mol, column ``unit``) and converted with
:data:`chairbuild.constants.KCAL_TO_KJ`; every energy this module returns is in kJ/mol.

Which increment is used
-----------------------
Each ring is typed and numbered by :func:`chairbuild.forcefields.ring_types.classify_ring`
(tetrahydropyran, 1,3-dioxane, piperidine, morpholine, thiane, cyclohexanone, ...; positions
C2, C3, N1, ... from the heteroatom). For an axial substituent X at position P of ring type R
the lookup takes, in this order:

1. the A-value row for X at P of R (``THP-C3-CH3``: 3-methyltetrahydropyran);
2. an anomeric row for X at P of R (``ANO-THP-C2-Cl``): it is published as the extra axial
   preference relative to cyclohexane, so the term is added beside the cyclohexane A-value
   of X, which is then the base the anomeric value is measured against, not a fallback;
3. the cyclohexane A-value of X: in cyclohexane itself, or as a *named fallback* where the
   substituent's environment is that of cyclohexane (sp3 carbons one and two bonds away
   along the ring; :attr:`~chairbuild.forcefields.ring_types.RingType.cyclohexane_like`);
   the term's ``fallback`` field says so;
4. otherwise nothing: the estimate lacks a term and says "increment unknown for X at
   position P of R".

An equatorial substituent costs nothing (A-values are axial-minus-equatorial), so an
unknown increment matters only for an axial substituent or a pair.

Pair terms, on chairs:

* **Gauche.** Each pair of substituents on adjacent ring atoms that is gauche
  (equatorial/equatorial and axial/equatorial; the trans-diaxial pair is anti) adds the
  table's gauche increment for the two groups: ``gauche-butane`` for two groups of the
  ``alkyl`` class (CH3, C2H5, CH(CH3)2, C(CH3)3; Eliel, Wilen & Mander 1994: an axial methyl
  has two gauche-butane interactions with the ring, which is what its A-value measures, so
  the table's A(CH3) = 1.74 kcal/mol is twice its gauche-butane 0.87), ``gauche-F/F`` for two
  fluorines (derived from trans-1,2-difluorocyclohexane in the vapour). A substituent/
  substituent gauche interaction is absent from the monosubstituted rings the A-values come
  from, so adding it counts nothing twice. A gauche pair without a row is a missing term.
* **Syn-1,3-diaxial.** Two non-hydrogen substituents axial on the same face at ring positions
  1 and 3 interact directly. Following the bookkeeping of Allinger & Miller (J. Am. Chem.
  Soc. 1961, 83, 2145; flagged M), the R/R' interaction *replaces* one R/H syn-axial
  interaction of each group, each half that group's A-value: the pair adds the R/R' term plus
  one term of −A/2 for each group (kind ``"syn-axial X/H replaced"``), on top of the two
  A-values. The most specific row applies: the 1,3-dioxane C4/C6 and C2/C4 Me/Me values
  (Pihlaja et al. 2020), else the cyclohexane CH3/CH3 value where both positions are
  cyclohexane-like; a syn pair without a row is a missing term. cis-1,3-Dimethylcyclohexane
  diaxial: 1.74/2 + 1.74/2 + 3.7 = 5.44 kcal/mol above diequatorial (Allinger & Miller give
  ΔH ≈ 5.5).
* **Geminal.** Two groups on one ring carbon are scored position by position (the axial one
  pays its A-value); their mutual gauche relation is the same in both chairs. Where the
  table has a geminal correction for the axial/equatorial pair (``gem-C6H5/CH3``, from
  1-methyl-1-phenylcyclohexane), it is added to the chair with the first group axial.
  A geminal pair without a row needs none, so it is not a missing term.

Worked examples with the table's values (kcal/mol; × 4.184 for kJ/mol): axial
methylcyclohexane 1.74; trans-1,2-dimethyl diequatorial 0.87 (one gauche), diaxial 3.48
(two A-values, the methyls anti); cis-1,2-dimethyl 1.74 + 0.87 = 2.61; cis-1,4-dimethyl
1.74; axial 3-methyltetrahydropyran 1.43; axial 2-chlorotetrahydropyran
0.53 − 2.12 = −1.59 (axial preferred).

Uncertainty and what is not scored
----------------------------------
Every term carries the half-width of the range quoted for its value
(:attr:`AdditiveTerm.uncertainty`; 0 where the sources give one number); the family
comparison adds them up and widens the disagreement threshold by that much.

:attr:`AdditiveEstimate.unscored` lists the terms the estimate lacks, one message each:
rings that are not chairs (twist-boat, boat, ...; a non-chair ring's energy is not
estimated, so :meth:`AdditiveModel.energy` of such a conformer only sums the other rings),
axial substituents with no increment at their position (groups absent from the table,
substituents on ring heteroatoms other than the tabulated N–H, ring-fusion and spiro
bonds), and gauche or syn-diaxial pairs without an increment. Substituents of sp2 ring atoms
(the C=O of a cyclohexanone, an amide nitrogen's acyl group) have no axial or equatorial
position and are not scored. :attr:`AdditiveEstimate.caveats` lists scored but approximate
terms: generic fallbacks and lower bounds (C(CH3)3).
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from rdkit import Chem

from chairbuild.describe import describe_ring, mean_plane_normal, substituent_position
from chairbuild.errors import InputError
from chairbuild.result import AdditiveTerm, Position, RingShape
from chairbuild.rings import RingAnalysis
from chairbuild.forcefields.base import EnergyModel
from chairbuild.forcefields.increments import (
    HYDROGEN,
    INCREMENTS_PATH,
    Bound,
    Flag,
    Increment,
    IncrementKind,
    IncrementTable,
    _Reason,
    load_increments,
    match_group,
    read_increments,
)
from chairbuild.forcefields.ring_types import CYCLOHEXANE, RingType, classify_ring

__all__ = [
    "IncrementKind",
    "Flag",
    "Bound",
    "Increment",
    "IncrementTable",
    "AdditiveEstimate",
    "AdditiveModel",
    "load_increments",
    "read_increments",
    "match_group",
    "INCREMENTS_PATH",
    "HYDROGEN",
]


@dataclass(frozen=True)
class AdditiveEstimate:
    """The additive estimate of one conformer.

    Attributes
    ----------
    energy : float
        Sum of the terms (kJ/mol). Rings that are not chairs contribute nothing.
    terms : tuple of AdditiveTerm
    unscored : tuple of str
        The terms the estimate lacks, one message each ("increment unknown for X at
        position Y", non-chair rings).
    caveats : tuple of str
        Terms that are scored but approximate (generic fallbacks, lower bounds).
    """

    energy: float
    terms: tuple[AdditiveTerm, ...]
    unscored: tuple[str, ...]
    caveats: tuple[str, ...]

    @property
    def partial(self) -> bool:
        """True when the estimate lacks a term."""
        return bool(self.unscored)

    @property
    def uncertainty(self) -> float:
        """Sum of the quoted ranges of the terms (kJ/mol)."""
        return float(sum(abs(t.uncertainty) for t in self.terms))


@dataclass(frozen=True)
class _Site:
    """A ring substituent and what the table says about it (geometry independent)."""

    ring_index: int
    ring_pos: int
    ring_atom: int
    atom: int
    label: str
    key: str | None
    reason: _Reason | None
    on_sp2: bool

    def describe(self) -> str:
        if self.reason is _Reason.RING_BOND:
            return f"the ring bond to atom {self.atom}"
        if self.key is not None:
            return f"{self.key} (atom {self.atom})"
        return f"{self.label} (atom {self.atom})"


@dataclass(frozen=True)
class _Placed:
    site: _Site
    position: Position
    side: float
    #: Rows of the site's A-value terms when axial (empty: unknown or equatorial).
    a_rows: tuple[Increment, ...] = ()


class AdditiveModel(EnergyModel):
    """Additive increment estimate (ring- and position-specific A-values, pair terms) of one molecule.

    See the module docstring for the lookup, the bookkeeping and what is left unscored.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        The molecule, in the atom order of the coordinates (explicit hydrogens).
    rings : RingAnalysis or sequence of tuple of int
        The six-membered rings, each in ring order. With a :class:`RingAnalysis` its
        rings and substituents are used; with plain tuples the substituents are every
        heavy neighbour outside the ring plus the H atoms on sp3 ring nitrogens.
    table : IncrementTable, optional
        Default: the shipped table (:func:`load_increments`).

    Raises
    ------
    InputError
        When a ring is not six bonded atoms of ``mol`` in ring order, or a substituent
        of the :class:`RingAnalysis` is not bonded to its ring atom in ``mol``.
    """

    name = "additive increments"
    has_gradient = False

    def __init__(
        self,
        mol: Chem.Mol,
        rings: RingAnalysis | Sequence[Sequence[int]],
        table: IncrementTable | None = None,
    ) -> None:
        self._mol = mol
        self._n_atoms = mol.GetNumAtoms()
        self._table = table or load_increments()
        if isinstance(rings, RingAnalysis):
            ring_list = [tuple(int(a) for a in r.atoms) for r in rings.rings]
        else:
            ring_list = [tuple(int(a) for a in r) for r in rings]
        for index, ring in enumerate(ring_list):
            self._check_ring(index, ring)
        if isinstance(rings, RingAnalysis):
            pairs = [(s.ring_index, s.ring_atom, s.atom) for s in rings.substituents]
            for r, ring_atom, atom in pairs:
                if (
                    not 0 <= r < len(ring_list)
                    or ring_atom not in ring_list[r]
                    or self._mol.GetBondBetweenAtoms(ring_atom, atom) is None
                ):
                    raise InputError(f"substituent atom {atom} is not bonded to ring atom {ring_atom} of ring {r}")
            subs = [(r, ring_atom, atom, self._label(ring_atom, atom)) for r, ring_atom, atom in pairs]
        else:
            subs = self._find_substituents(ring_list)
        self._rings: tuple[tuple[int, ...], ...] = tuple(ring_list)
        self._types: tuple[RingType, ...] = tuple(classify_ring(mol, ring) for ring in ring_list)
        self._sites: tuple[tuple[_Site, ...], ...] = tuple(
            tuple(self._site(r, ring_atom, atom, label) for (r, ring_atom, atom, label) in subs if r == index)
            for index in range(len(ring_list))
        )

    @property
    def ring_types(self) -> tuple[RingType, ...]:
        """Type and position labels of each scored ring."""
        return self._types

    # ------------------------------------------------------------------ set-up
    @property
    def rings(self) -> tuple[tuple[int, ...], ...]:
        """The scored rings, in ring order."""
        return self._rings

    def _check_ring(self, index: int, ring: tuple[int, ...]) -> None:
        if len(ring) != 6 or len(set(ring)) != 6:
            raise InputError(f"ring {index} must have six distinct atoms, got {ring}")
        if any(a < 0 or a >= self._n_atoms for a in ring):
            raise InputError(f"ring {index} has an atom index outside 0..{self._n_atoms - 1}: {ring}")
        for k in range(6):
            if self._mol.GetBondBetweenAtoms(ring[k], ring[(k + 1) % 6]) is None:
                raise InputError(f"ring {index} is not in ring order: atoms {ring[k]} and {ring[(k + 1) % 6]} are not bonded")

    def _find_substituents(self, rings: list[tuple[int, ...]]) -> list[tuple[int, int, int, str]]:
        out = []
        for index, ring in enumerate(rings):
            for ring_atom in ring:
                atom = self._mol.GetAtomWithIdx(ring_atom)
                for nb in atom.GetNeighbors():
                    idx = nb.GetIdx()
                    if idx in ring:
                        continue
                    if nb.GetAtomicNum() == 1 and not (
                        atom.GetSymbol() == "N" and atom.GetHybridization() == Chem.HybridizationType.SP3
                    ):
                        continue
                    out.append((index, ring_atom, idx, self._label(ring_atom, idx)))
        return out

    def _label(self, ring_atom: int, atom: int) -> str:
        """Rooted SMILES of the branch at ``atom`` (element symbol for ring bonds)."""
        first = self._mol.GetAtomWithIdx(atom)
        if first.GetAtomicNum() == 1:
            return "H"
        bond = self._mol.GetBondBetweenAtoms(ring_atom, atom)
        if bond.IsInRing():
            return first.GetSymbol()
        prefix = {Chem.BondType.DOUBLE: "=", Chem.BondType.TRIPLE: "#"}.get(bond.GetBondType(), "")
        seen = {atom}
        stack = [atom]
        while stack:
            cur = stack.pop()
            for nb in self._mol.GetAtomWithIdx(cur).GetNeighbors():
                idx = nb.GetIdx()
                if idx != ring_atom and idx not in seen and nb.GetAtomicNum() > 1:
                    seen.add(idx)
                    stack.append(idx)
        return prefix + Chem.MolFragmentToSmiles(self._mol, atomsToUse=sorted(seen), rootedAtAtom=atom)

    def _site(self, ring_index: int, ring_atom: int, atom: int, label: str) -> _Site:
        pos = self._rings[ring_index].index(ring_atom)
        host = self._mol.GetAtomWithIdx(ring_atom)
        bond = self._mol.GetBondBetweenAtoms(ring_atom, atom)
        on_sp2 = host.GetHybridization() != Chem.HybridizationType.SP3
        key: str | None = None
        reason: _Reason | None = None
        if bond is not None and bond.IsInRing():
            reason = _Reason.RING_BOND
        elif self._mol.GetAtomWithIdx(atom).GetAtomicNum() == 1:
            key = HYDROGEN
        else:
            key = match_group(self._mol, ring_atom, atom, self._table)
            reason = None if key is not None else _Reason.NOT_IN_TABLE
        return _Site(ring_index, pos, ring_atom, atom, label, key, reason, on_sp2)

    # -------------------------------------------------------------- evaluation
    def _check_coords(self, coords: np.ndarray) -> np.ndarray:
        xyz = np.asarray(coords, dtype=float)
        if xyz.shape != (self._n_atoms, 3):
            raise InputError(f"coordinates must have shape ({self._n_atoms}, 3), got {xyz.shape}")
        if not np.all(np.isfinite(xyz)):
            raise InputError("coordinates contain NaN or infinity")
        return xyz

    def evaluate(self, coords: np.ndarray) -> AdditiveEstimate:
        """Terms, total, missing terms and caveats of the estimate at ``coords`` (Å).

        Raises
        ------
        InputError
            When ``coords`` does not have shape (n_atoms, 3) or is not finite.
        """
        xyz = self._check_coords(coords)
        terms: list[AdditiveTerm] = []
        unscored: list[str] = []
        caveats: list[str] = []
        for index, ring in enumerate(self._rings):
            shape = describe_ring(xyz, ring).shape
            if shape is not RingShape.CHAIR:
                unscored.append(f"ring {index}: {shape.value}, not a chair; only chairs are scored")
                continue
            rtype = self._types[index]
            normal = mean_plane_normal(xyz[list(ring)])
            placed: list[_Placed] = []
            for site in self._sites[index]:
                if site.on_sp2:
                    continue  # no axial or equatorial position (a C=O of the ring, an amide's acyl group)
                position, _ = substituent_position(xyz, ring, site.ring_atom, site.atom, RingShape.CHAIR)
                side = float(np.dot(xyz[site.atom] - xyz[site.ring_atom], normal))
                rows: tuple[Increment, ...] = ()
                if position is Position.AXIAL:
                    rows = self._a_terms(index, rtype, site, terms, unscored, caveats)
                placed.append(_Placed(site, position, side, rows))
            self._pairs(index, rtype, placed, terms, unscored, caveats)
        energy = float(sum(t.value for t in terms))
        return AdditiveEstimate(energy, tuple(terms), tuple(unscored), tuple(caveats))

    def _a_terms(
        self, index: int, rtype: RingType, site: _Site, terms: list[AdditiveTerm], unscored: list[str],
        caveats: list[str],
    ) -> tuple[Increment, ...]:
        """A-value (and anomeric) terms of an axial site; the rows used, () when unknown."""
        where = rtype.where(site.ring_atom)
        atoms = (site.ring_atom, site.atom)
        if site.key is None:
            reason = site.reason.value if site.reason else ""
            unscored.append(f"ring {index}: increment unknown for {site.describe()} at {where} ({reason})")
            return ()
        pos = rtype.position_of(site.ring_atom)
        applies = f"{site.key} axial at {where}"
        specific = self._table.specific(IncrementKind.A_VALUE, site.key, rtype.name, pos)
        if specific is not None:
            terms.append(_term(specific, atoms, applies))
            self._bound_caveat(index, site, specific, caveats)
            return (specific,)
        if site.key == HYDROGEN:
            unscored.append(f"ring {index}: increment unknown for H (atom {site.atom}) at {where}")
            return ()
        generic = self._table.a_value(site.key)
        anomeric = self._table.specific(IncrementKind.ANOMERIC, site.key, rtype.name, pos)
        if anomeric is not None:
            terms.append(_term(generic, atoms, applies + " (cyclohexane base of the anomeric value)"))
            terms.append(_term(anomeric, atoms, f"anomeric preference of axial {site.key} at {where}"))
            self._bound_caveat(index, site, generic, caveats)
            return (generic, anomeric)
        if rtype.name == CYCLOHEXANE:
            terms.append(_term(generic, atoms, applies))
            self._bound_caveat(index, site, generic, caveats)
            return (generic,)
        if rtype.cyclohexane_like[site.ring_pos]:
            why = f"no {rtype.name} {pos} value for {site.key}; cyclohexane A-value used (cyclohexane-like position)"
            terms.append(_term(generic, atoms, applies, fallback=why))
            caveats.append(f"ring {index}: {why}, atom {site.ring_atom}")
            self._bound_caveat(index, site, generic, caveats)
            return (generic,)
        unscored.append(
            f"ring {index}: increment unknown for {site.key} (atom {site.atom}) at {where} "
            "(no value for this position; the cyclohexane value does not transfer next to a heteroatom or sp2 atom)"
        )
        return ()

    @staticmethod
    def _bound_caveat(index: int, site: _Site, row: Increment, caveats: list[str]) -> None:
        if row.bound is Bound.LOWER:
            caveats.append(f"ring {index}: A-value of {site.key} at atom {site.ring_atom} is a lower bound")

    def _pairs(
        self, index: int, rtype: RingType, placed: list[_Placed], terms: list[AdditiveTerm], unscored: list[str],
        caveats: list[str],
    ) -> None:
        """Gauche, geminal and syn-1,3-diaxial pair terms of one chair ring."""
        for a, b in itertools.combinations(placed, 2):
            if HYDROGEN in (a.site.key, b.site.key):
                continue  # an N-H is part of its own A-value; no pair rows for H
            gap = abs(a.site.ring_pos - b.site.ring_pos)
            gap = min(gap, 6 - gap)
            both_axial = a.position is Position.AXIAL and b.position is Position.AXIAL
            atoms = (a.site.atom, a.site.ring_atom, b.site.ring_atom, b.site.atom)
            known = a.site.key is not None and b.site.key is not None
            names = f"{a.site.describe()}/{b.site.describe()}"
            pair_at = rtype.pair_positions(a.site.ring_atom, b.site.ring_atom)
            if gap == 0:
                if known and a.position is not b.position:
                    ax, eq = (a, b) if a.position is Position.AXIAL else (b, a)
                    row = self._table.pair(IncrementKind.GEMINAL, ax.site.key, eq.site.key, ordered=True)
                    if row is not None and (rtype.name == CYCLOHEXANE or rtype.cyclohexane_like[a.site.ring_pos]):
                        terms.append(_term(row, atoms, f"geminal {ax.site.key} axial/{eq.site.key} equatorial at {rtype.where(a.site.ring_atom)}"))
            elif gap == 1 and not both_axial:
                row = self._table.pair(IncrementKind.GAUCHE, a.site.key, b.site.key) if known else None
                if row is None:
                    unscored.append(f"ring {index}: increment unknown for the gauche pair {names} at positions {pair_at} of {rtype.name}")
                    continue
                fallback = "" if rtype.name == CYCLOHEXANE else f"cyclohexane gauche value used in {rtype.name}"
                if fallback:
                    caveats.append(f"ring {index}: {fallback} ({a.site.key}/{b.site.key} at atoms {a.site.ring_atom}, {b.site.ring_atom})")
                terms.append(_term(row, atoms, f"gauche {a.site.key}/{b.site.key} at positions {pair_at} of {rtype.name}", fallback))
            elif gap == 2 and both_axial and a.side * b.side > 0:
                self._syn_pair(index, rtype, a, b, atoms, terms, unscored, caveats)

    def _syn_pair(
        self, index: int, rtype: RingType, a: _Placed, b: _Placed, atoms: tuple[int, ...], terms: list[AdditiveTerm],
        unscored: list[str], caveats: list[str],
    ) -> None:
        positions = rtype.pair_positions(a.site.ring_atom, b.site.ring_atom)
        names = f"{a.site.describe()}/{b.site.describe()}"
        where = f"positions {positions} of {rtype.name}"
        row = None
        if a.site.key is not None and b.site.key is not None:
            row = self._table.pair(IncrementKind.SYN_DIAXIAL, a.site.key, b.site.key, rtype.name, positions)
        generic_ok = rtype.name == CYCLOHEXANE or (
            rtype.cyclohexane_like[a.site.ring_pos] and rtype.cyclohexane_like[b.site.ring_pos]
        )
        if row is None or (row.generic and not generic_ok):
            unscored.append(f"ring {index}: increment unknown for the syn-1,3-diaxial pair {names} at {where}")
            return
        fallback = "" if not row.generic or rtype.name == CYCLOHEXANE else f"cyclohexane syn-diaxial value used in {rtype.name}"
        if fallback:
            caveats.append(f"ring {index}: {fallback} ({a.site.key}/{b.site.key})")
        terms.append(_term(row, atoms, f"syn-diaxial {a.site.key}/{b.site.key} at {where}", fallback))
        for p in (a, b):
            if not p.a_rows:
                continue
            base = p.a_rows[0]
            terms.append(
                AdditiveTerm(
                    f"syn-axial {p.site.key}/H replaced",
                    (p.site.ring_atom, p.site.atom),
                    -0.5 * base.value_kj,
                    f"half of A({p.site.key}), {base.citation}; bookkeeping of {row.citation}",
                    increment=base.key,
                    applies_to=f"one {p.site.key}/H syn-axial interaction at {rtype.where(p.site.ring_atom)}, replaced by the pair",
                    conditions=base.conditions,
                    fallback="",
                    uncertainty=0.5 * base.range_kj,
                )
            )

    def terms(self, coords: np.ndarray) -> list[AdditiveTerm]:
        """The increments at ``coords`` (Å); values in kJ/mol, sources with their flags."""
        return list(self.evaluate(coords).terms)

    def unscored(self, coords: np.ndarray) -> list[str]:
        """The terms the estimate lacks at ``coords``: non-chair rings and unknown increments."""
        return list(self.evaluate(coords).unscored)

    def energy(self, coords: np.ndarray) -> float:
        """Sum of :meth:`terms` (kJ/mol). Non-chair rings contribute nothing (see :meth:`unscored`)."""
        return self.evaluate(coords).energy


def _term(row: Increment, atoms: tuple[int, ...], applies_to: str, fallback: str = "") -> AdditiveTerm:
    """The :class:`AdditiveTerm` of one table row."""
    return AdditiveTerm(
        row.kind.value,
        atoms,
        row.value_kj,
        row.citation,
        increment=row.key,
        applies_to=applies_to,
        conditions=row.conditions,
        fallback=fallback,
        uncertainty=row.range_kj,
    )
