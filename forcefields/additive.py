"""The chemist's additive estimate: A-values plus gauche-butane and syn-1,3-diaxial increments.

:class:`AdditiveModel` scores one conformer by adding tabulated increments for the
substituents of every six-membered ring that is a chair in the given coordinates. It is
the quick estimate a chemist makes by hand; chairbuild compares it with the force-field
result and flags crowded rings where additivity fails.

The increments, each with its source and a flag (P = primary paper seen, S = seen only in
a secondary compilation, M = from memory, not verified), are in
``forcefields/data/increments.csv``; the table is read at first use and cached
(:func:`load_increments`). Values are stored in kcal/mol and converted with
:data:`chairbuild.constants.KCAL_TO_KJ`; every energy this module returns is in kJ/mol.

Scheme and bookkeeping
----------------------
For each ring whose Cremer–Pople shape (:func:`chairbuild.describe.describe_ring`) is a
chair, with substituents labelled axial/equatorial by
:func:`chairbuild.describe.substituent_position`:

1. **A-value.** Each axial substituent on an sp3 ring carbon costs the A-value of its
   group, A = ΔG°(axial − equatorial) of the monosubstituted cyclohexane. An equatorial
   substituent costs nothing. Geminal substituents are scored position by position (the
   axial one pays its A-value); their mutual gauche relation is the same in both chairs
   and is not counted.
2. **Gauche-butane.** Each pair of substituents on adjacent ring carbons that is gauche
   (equatorial/equatorial and axial/equatorial; the trans-diaxial pair is anti and costs
   nothing) adds one gauche-butane increment when both groups are of the table's
   ``alkyl`` class (CH3, C2H5, CH(CH3)2, C(CH3)3). This is the usual cyclohexane
   bookkeeping (Eliel, Wilen & Mander, *Stereochemistry of Organic Compounds*, 1994): an
   axial methyl has two gauche-butane interactions with the ring bonds C2–C3 and C6–C5,
   and these are what its A-value measures (the table's A(CH3) = 1.74 kcal/mol is
   exactly twice its gauche-butane 0.87). The substituent/substituent gauche interaction
   of a vicinal pair is absent from the monosubstituted rings the A-values come from, so
   adding it counts nothing twice. An equatorial group is anti to both ring bonds and has
   no ring gauche interaction.
3. **Syn-1,3-diaxial.** Two non-hydrogen substituents axial on the same face at ring
   positions 1 and 3 interact directly. Following the bookkeeping of Allinger & Miller
   (J. Am. Chem. Soc. 1961, 83, 2145; flagged M), the CH3/CH3 syn-axial interaction
   (3.7 kcal/mol) *replaces* one CH3/H syn-axial interaction of each methyl, each of
   which is half that methyl's A-value. The pair therefore adds the 3.7 kcal/mol term
   plus one term of −A/2 for each of the two groups (kind ``"syn-axial X/H
   replaced"``), on top of the two A-values: the diaxial conformer of
   cis-1,3-dimethylcyclohexane is estimated at 1.74/2 + 1.74/2 + 3.7 = 5.44 kcal/mol
   above the diequatorial one.

Worked examples with the table's values (kcal/mol; × 4.184 for kJ/mol): axial
methylcyclohexane 1.74; trans-1,2-dimethyl diequatorial 0.87 (one gauche), diaxial
3.48 (two A-values, the methyls anti); cis-1,2-dimethyl 1.74 + 0.87 = 2.61;
cis-1,4-dimethyl 1.74, trans-1,4-dimethyl diequatorial 0.

What is not scored
------------------
The estimate is only as complete as the table; everything that gets no increment is
reported by :meth:`AdditiveModel.unscored` (and :attr:`AdditiveEstimate.unscored`), so
that the result can mark the estimate as partial:

* a ring that is not a chair (twist-boat, boat, half-chair, ...): no terms for that
  ring, and the note names the ring index and its shape. A non-chair ring's energy is
  therefore *not* estimated: :meth:`AdditiveModel.energy` of such a conformer only sums
  the other rings and must not be compared with a chair's;
* substituents on ring heteroatoms (N-methyl, N–H) and on sp2 ring atoms;
* groups absent from the table (propyl, tolyl, ...);
* ring-fusion and spiro bonds (a substituent bonded through a ring bond). A fused ring
  (decalin) is left unscored: counting the other ring's bonds as alkyl substituents
  scores a shared gauche interaction in both rings, and the cis/trans-decalin difference
  that would check a corrected count is not in this project's source material;
* pairs of scored groups with no pair increment in the table (e.g. a gauche Cl/CH3 pair
  or a syn-diaxial OH/CH3 pair). A pair in which one group is itself unscored is covered
  by that group's own note and not reported again.

Scored but approximate terms are listed in :attr:`AdditiveEstimate.caveats`: A-values
that are lower bounds (C(CH3)3), and cyclohexane A-values transferred to a ring that
contains a heteroatom or an sp2 atom.
"""

from __future__ import annotations

import csv
import enum
import functools
import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from rdkit import Chem

from chairbuild.constants import KCAL_TO_KJ
from chairbuild.describe import describe_ring, mean_plane_normal, substituent_position
from chairbuild.errors import ForceFieldError, InputError
from chairbuild.result import AdditiveTerm, Position, RingShape
from chairbuild.rings import RingAnalysis
from chairbuild.forcefields.base import EnergyModel

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
]

#: The increments table shipped with the package.
INCREMENTS_PATH = Path(__file__).parent / "data" / "increments.csv"

_COLUMNS = (
    "key",
    "kind",
    "class",
    "group_smarts_or_name",
    "value_kcal",
    "bound",
    "conditions",
    "source",
    "flag",
    "note",
)


class IncrementKind(str, enum.Enum):
    """Kind of a table row."""

    A_VALUE = "A-value"
    GAUCHE = "gauche-butane"
    SYN_DIAXIAL = "syn-1,3-diaxial"
    #: Published value kept for comparison; not used in the estimate.
    REFERENCE = "reference"


class Flag(str, enum.Enum):
    """How a value was verified."""

    PRIMARY = "P"
    SECONDARY = "S"
    MEMORY = "M"


class Bound(str, enum.Enum):
    """Whether a value is a measurement or a lower bound."""

    EXACT = "="
    LOWER = ">"


class _Reason(str, enum.Enum):
    """Why a substituent gets no increment."""

    HETEROATOM = "on a ring heteroatom"
    SP2 = "on an sp2 ring atom"
    RING_BOND = "ring-fusion or spiro bond"
    NOT_IN_TABLE = "group not in the increments table"


@dataclass(frozen=True)
class Increment:
    """One row of the increments table.

    Attributes
    ----------
    key : str
        Unique row key; for A-values the group name used in messages (``"CH3"``).
    kind : IncrementKind
    group_class : str
        Class of an A-value group (``"alkyl"`` or empty), used by pair rows.
    pattern : str
        A-value rows: SMARTS of the group rooted at its attachment atom. Pair rows:
        ``"X/Y"`` with X, Y a key or a class. Reference rows: a description.
    value_kcal : float
        kcal/mol.
    bound : Bound
    conditions, source, note : str
    flag : Flag
    """

    key: str
    kind: IncrementKind
    group_class: str
    pattern: str
    value_kcal: float
    bound: Bound
    conditions: str
    source: str
    flag: Flag
    note: str

    @property
    def value_kj(self) -> float:
        """The value in kJ/mol."""
        return self.value_kcal * KCAL_TO_KJ

    @property
    def citation(self) -> str:
        """Source with its flag, as written into :class:`AdditiveTerm`."""
        text = f"{self.source} [{self.flag.value}]"
        return text + "; lower bound" if self.bound is Bound.LOWER else text

    def covers_pair(self, key_a: str, class_a: str, key_b: str, class_b: str) -> bool:
        """Whether this pair row applies to groups (key_a, class_a) and (key_b, class_b)."""
        left, _, right = self.pattern.partition("/")
        ok_a = {key_a, class_a} - {""}
        ok_b = {key_b, class_b} - {""}
        return (left in ok_a and right in ok_b) or (left in ok_b and right in ok_a)


@dataclass(frozen=True)
class IncrementTable:
    """The increments table: rows plus compiled group patterns."""

    rows: tuple[Increment, ...]
    patterns: tuple[tuple[Increment, Chem.Mol], ...]

    def __getitem__(self, key: str) -> Increment:
        for row in self.rows:
            if row.key == key:
                return row
        raise KeyError(key)

    def a_value(self, key: str) -> Increment:
        """The A-value row of group ``key``."""
        row = self[key]
        if row.kind is not IncrementKind.A_VALUE:
            raise KeyError(f"{key!r} is not an A-value row")
        return row

    def pair(self, kind: IncrementKind, key_a: str, key_b: str) -> Increment | None:
        """The pair increment of ``kind`` for groups ``key_a`` and ``key_b``, or None."""
        class_a = self.a_value(key_a).group_class
        class_b = self.a_value(key_b).group_class
        for row in self.rows:
            if row.kind is kind and row.covers_pair(key_a, class_a, key_b, class_b):
                return row
        return None


def read_increments(path: str | Path) -> IncrementTable:
    """Read and validate an increments table (CSV with the columns of the shipped file).

    Raises
    ------
    ForceFieldError
        On a missing column, a duplicate key, an unknown kind, flag or bound, a value
        that is not a number, an empty source or an invalid SMARTS.
    """
    path = Path(path)
    try:
        with path.open(newline="", encoding="utf-8") as handle:
            reader = csv.DictReader(handle)
            missing = [c for c in _COLUMNS if c not in (reader.fieldnames or ())]
            if missing:
                raise ForceFieldError(f"{path.name}: missing columns {', '.join(missing)}")
            raw = list(reader)
    except OSError as exc:
        raise ForceFieldError(f"cannot read increments table {path}: {exc}") from exc
    rows: list[Increment] = []
    patterns: list[tuple[Increment, Chem.Mol]] = []
    seen: set[str] = set()
    for line, rec in enumerate(raw, start=2):
        where = f"{path.name} line {line}"
        if None in rec or any(rec[c] is None for c in _COLUMNS):
            raise ForceFieldError(f"{where}: wrong number of fields")
        key = rec["key"].strip()
        if not key or key in seen:
            raise ForceFieldError(f"{where}: empty or duplicate key {key!r}")
        seen.add(key)
        try:
            kind = IncrementKind(rec["kind"].strip())
            flag = Flag(rec["flag"].strip())
            bound = Bound(rec["bound"].strip())
            value = float(rec["value_kcal"])
        except ValueError as exc:
            raise ForceFieldError(f"{where}: {exc}") from exc
        if not np.isfinite(value):
            raise ForceFieldError(f"{where}: value {value} is not finite")
        if not rec["source"].strip():
            raise ForceFieldError(f"{where}: no source for {key!r}")
        row = Increment(
            key=key,
            kind=kind,
            group_class=rec["class"].strip(),
            pattern=rec["group_smarts_or_name"].strip(),
            value_kcal=value,
            bound=bound,
            conditions=rec["conditions"].strip(),
            source=rec["source"].strip(),
            flag=flag,
            note=rec["note"].strip(),
        )
        if kind is IncrementKind.A_VALUE:
            query = Chem.MolFromSmarts("[#0]-" + row.pattern)
            if query is None:
                raise ForceFieldError(f"{where}: invalid SMARTS {row.pattern!r}")
            patterns.append((row, query))
        elif kind in (IncrementKind.GAUCHE, IncrementKind.SYN_DIAXIAL) and row.pattern.count("/") != 1:
            raise ForceFieldError(f"{where}: pair row needs 'X/Y', got {row.pattern!r}")
        rows.append(row)
    return IncrementTable(rows=tuple(rows), patterns=tuple(patterns))


@functools.lru_cache(maxsize=1)
def load_increments() -> IncrementTable:
    """The shipped increments table, read at first call and cached."""
    return read_increments(INCREMENTS_PATH)


def match_group(mol: Chem.Mol, ring_atom: int, atom: int, table: IncrementTable | None = None) -> str | None:
    """Table key of the group bonded to ``ring_atom`` through ``atom``, or None.

    The branch that starts at ``atom`` (everything reachable without going back through
    ``ring_atom``) is cut out with a dummy atom in place of the ring atom and matched
    against each A-value row's SMARTS. A row matches only if its pattern covers *every*
    heavy atom of the branch, so methyl, ethyl and isopropyl, or hydroxy, methoxy and
    acetoxy, are told apart; hydrogens are checked through the SMARTS H counts.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        The molecule (explicit hydrogens or not).
    ring_atom, atom : int
        The ring atom and the group's first atom; they must be bonded.
    table : IncrementTable, optional
        Default: :func:`load_increments`.

    Returns
    -------
    str or None
        None for a hydrogen, a bond that is in a ring (fusion, spiro) and a group that no
        row describes.

    Raises
    ------
    InputError
        When the two atoms are not bonded.
    ForceFieldError
        When two table rows match the same group (an ambiguous table).
    """
    table = table or load_increments()
    bond = mol.GetBondBetweenAtoms(int(ring_atom), int(atom))
    if bond is None:
        raise InputError(f"atoms {ring_atom} and {atom} are not bonded")
    if bond.IsInRing() or mol.GetAtomWithIdx(int(atom)).GetAtomicNum() == 1:
        return None
    cut = Chem.FragmentOnBonds(mol, [bond.GetIdx()], addDummies=True)
    mapping: list[tuple[int, ...]] = []
    try:
        frags = Chem.GetMolFrags(cut, asMols=True, fragsMolAtomMapping=mapping)
    except Exception:  # noqa: BLE001 - RDKit raises several types on sanitisation
        return None
    for frag, atoms in zip(frags, mapping):
        if int(atom) in atoms:
            local = atoms.index(int(atom))
            break
    else:  # pragma: no cover - the atom is always in one fragment
        return None
    heavy = sum(1 for a in frag.GetAtoms() if a.GetAtomicNum() > 1)
    found = []
    for row, query in table.patterns:
        if query.GetNumAtoms() - 1 != heavy:
            continue
        if any(match[1] == local for match in frag.GetSubstructMatches(query, uniquify=False)):
            found.append(row.key)
    if len(found) > 1:
        raise ForceFieldError(f"increments table is ambiguous: group at atom {atom} matches {', '.join(found)}")
    return found[0] if found else None


@dataclass(frozen=True)
class AdditiveEstimate:
    """The additive estimate of one conformer.

    Attributes
    ----------
    energy : float
        Sum of the terms (kJ/mol). Rings that are not chairs contribute nothing.
    terms : tuple of AdditiveTerm
    unscored : tuple of str
        What got no increment (non-chair rings, heteroatom substituents, groups or pairs
        absent from the table, ring-fusion bonds).
    caveats : tuple of str
        Terms that are scored but approximate (lower bounds, transferred A-values).
    """

    energy: float
    terms: tuple[AdditiveTerm, ...]
    unscored: tuple[str, ...]
    caveats: tuple[str, ...]

    @property
    def partial(self) -> bool:
        """True when something was left unscored."""
        return bool(self.unscored)


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

    def describe(self) -> str:
        if self.reason is _Reason.RING_BOND:
            return f"the ring bond to atom {self.atom}"
        return f"{self.label} (atom {self.atom})"


@dataclass(frozen=True)
class _Placed:
    site: _Site
    position: Position
    side: float


class AdditiveModel(EnergyModel):
    """Additive increment estimate (A-values, gauche-butane, syn-1,3-diaxial) of one molecule.

    See the module docstring for the scheme, the bookkeeping and what is left unscored.

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
        self._sites: tuple[tuple[_Site, ...], ...] = tuple(
            tuple(self._site(r, ring_atom, atom, label) for (r, ring_atom, atom, label) in subs if r == index)
            for index in range(len(ring_list))
        )

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
        key = None
        if host.GetAtomicNum() != 6:
            reason: _Reason | None = _Reason.HETEROATOM
        elif host.GetHybridization() != Chem.HybridizationType.SP3:
            reason = _Reason.SP2
        elif bond is not None and bond.IsInRing():
            reason = _Reason.RING_BOND
        else:
            key = match_group(self._mol, ring_atom, atom, self._table)
            reason = None if key is not None else _Reason.NOT_IN_TABLE
        return _Site(ring_index, pos, ring_atom, atom, label, key, reason)

    # -------------------------------------------------------------- evaluation
    def _check_coords(self, coords: np.ndarray) -> np.ndarray:
        xyz = np.asarray(coords, dtype=float)
        if xyz.shape != (self._n_atoms, 3):
            raise InputError(f"coordinates must have shape ({self._n_atoms}, 3), got {xyz.shape}")
        if not np.all(np.isfinite(xyz)):
            raise InputError("coordinates contain NaN or infinity")
        return xyz

    def evaluate(self, coords: np.ndarray) -> AdditiveEstimate:
        """Terms, total, unscored parts and caveats of the estimate at ``coords`` (Å).

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
            normal = mean_plane_normal(xyz[list(ring)])
            placed: list[_Placed] = []
            for site in self._sites[index]:
                if site.key is None:
                    reason = site.reason.value if site.reason else ""
                    unscored.append(f"ring {index}: no increment for {site.describe()} at atom {site.ring_atom} ({reason})")
                    continue
                position, _ = substituent_position(xyz, ring, site.ring_atom, site.atom, RingShape.CHAIR)
                side = float(np.dot(xyz[site.atom] - xyz[site.ring_atom], normal))
                placed.append(_Placed(site, position, side))
                if position is Position.AXIAL:
                    row = self._table.a_value(site.key)
                    terms.append(AdditiveTerm(row.kind.value, (site.ring_atom, site.atom), row.value_kj, row.citation))
                    if row.bound is Bound.LOWER:
                        caveats.append(f"ring {index}: A-value of {site.key} at atom {site.ring_atom} is a lower bound")
            self._pairs(index, placed, terms, unscored)
            if placed and self._transferred(ring):
                caveats.append(
                    f"ring {index}: cyclohexane A-values transferred to a ring with a heteroatom or sp2 atom"
                )
        energy = float(sum(t.value for t in terms))
        return AdditiveEstimate(energy, tuple(terms), tuple(unscored), tuple(caveats))

    def _transferred(self, ring: tuple[int, ...]) -> bool:
        return any(
            self._mol.GetAtomWithIdx(a).GetAtomicNum() != 6
            or self._mol.GetAtomWithIdx(a).GetHybridization() != Chem.HybridizationType.SP3
            for a in ring
        )

    def _pairs(self, index: int, placed: list[_Placed], terms: list[AdditiveTerm], unscored: list[str]) -> None:
        """Gauche and syn-1,3-diaxial pair terms of one chair ring."""
        for a, b in itertools.combinations(placed, 2):
            gap = abs(a.site.ring_pos - b.site.ring_pos)
            gap = min(gap, 6 - gap)
            both_axial = a.position is Position.AXIAL and b.position is Position.AXIAL
            atoms = (a.site.atom, a.site.ring_atom, b.site.ring_atom, b.site.atom)
            pair_name = f"{a.site.key}/{b.site.key} at atoms {a.site.ring_atom}, {b.site.ring_atom}"
            if gap == 1 and not both_axial:
                row = self._table.pair(IncrementKind.GAUCHE, a.site.key, b.site.key)
                if row is None:
                    unscored.append(f"ring {index}: no gauche increment for {pair_name}")
                else:
                    terms.append(AdditiveTerm(row.kind.value, atoms, row.value_kj, row.citation))
            elif gap == 2 and both_axial and a.side * b.side > 0:
                row = self._table.pair(IncrementKind.SYN_DIAXIAL, a.site.key, b.site.key)
                if row is None:
                    unscored.append(f"ring {index}: no syn-1,3-diaxial increment for {pair_name}")
                    continue
                terms.append(AdditiveTerm(row.kind.value, atoms, row.value_kj, row.citation))
                for p in (a, b):
                    a_row = self._table.a_value(p.site.key)
                    terms.append(
                        AdditiveTerm(
                            f"syn-axial {p.site.key}/H replaced",
                            (p.site.ring_atom, p.site.atom),
                            -0.5 * a_row.value_kj,
                            f"half of A({p.site.key}), {a_row.citation}; bookkeeping of {row.citation}",
                        )
                    )

    def terms(self, coords: np.ndarray) -> list[AdditiveTerm]:
        """The increments at ``coords`` (Å); values in kJ/mol, sources with their flags."""
        return list(self.evaluate(coords).terms)

    def unscored(self, coords: np.ndarray) -> list[str]:
        """What gets no increment at ``coords``: non-chair rings (index and shape) and the rest."""
        return list(self.evaluate(coords).unscored)

    def energy(self, coords: np.ndarray) -> float:
        """Sum of :meth:`terms` (kJ/mol). Non-chair rings contribute nothing (see :meth:`unscored`)."""
        return self.evaluate(coords).energy
