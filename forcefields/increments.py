"""The increments table of the additive estimate: rows, validation, group matching.

``forcefields/data/increments.csv`` holds one row per increment: its kind (A-value,
anomeric, gauche, geminal, syn-1,3-diaxial, or a reference value kept for comparison), the
group (a SMARTS for the generic cyclohexane A-values, a group key for the ring- and
position-specific rows), the ring type and position it was measured at, the value in the
unit it was published in, the half-width of its quoted range, a bound, the conditions
(temperature, solvent, phase), the source and the P/S/M flag. :func:`read_increments`
validates every row; :func:`load_increments` reads the shipped table once;
:func:`match_group` names the group of a ring substituent. The estimate itself is
:mod:`chairbuild.forcefields.additive`.
"""

from __future__ import annotations

import csv
import enum
import functools
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from rdkit import Chem

from chairbuild.constants import KCAL_TO_KJ
from chairbuild.errors import ForceFieldError, InputError
from chairbuild.forcefields.ring_types import CYCLOHEXANE, RING_TEMPLATES

__all__ = [
    "IncrementKind",
    "Flag",
    "Bound",
    "Increment",
    "IncrementTable",
    "load_increments",
    "read_increments",
    "match_group",
    "INCREMENTS_PATH",
    "HYDROGEN",
]

#: The increments table shipped with the package.
INCREMENTS_PATH = Path(__file__).parent / "data" / "increments.csv"

_COLUMNS = (
    "key",
    "kind",
    "class",
    "group_smarts_or_name",
    "ring",
    "position",
    "value",
    "unit",
    "range",
    "bound",
    "conditions",
    "source",
    "flag",
    "note",
)

#: Group name of a hydrogen on a ring nitrogen (the piperidine N-H rows).
HYDROGEN = "H"


class IncrementKind(str, enum.Enum):
    """Kind of a table row."""

    A_VALUE = "A-value"
    ANOMERIC = "anomeric"
    GAUCHE = "gauche"
    GEMINAL = "geminal"
    SYN_DIAXIAL = "syn-1,3-diaxial"
    #: Published value kept for comparison; not used in the estimate.
    REFERENCE = "reference"


_PAIR_KINDS = (IncrementKind.GAUCHE, IncrementKind.GEMINAL, IncrementKind.SYN_DIAXIAL)


class Flag(str, enum.Enum):
    """How a value was verified."""

    PRIMARY = "P"
    SECONDARY = "S"
    MEMORY = "M"


class Bound(str, enum.Enum):
    """Whether a value is a measurement or a lower bound."""

    EXACT = "="
    LOWER = ">"


class _Unit(str, enum.Enum):
    KCAL = "kcal/mol"
    KJ = "kJ/mol"


class _Reason(str, enum.Enum):
    """Why a substituent has no group key."""

    RING_BOND = "ring-fusion or spiro bond"
    NOT_IN_TABLE = "group not in the increments table"


@dataclass(frozen=True)
class Increment:
    """One row of the increments table.

    Attributes
    ----------
    key : str
        Unique row key; for generic A-values the group name used in messages (``"CH3"``).
    kind : IncrementKind
    group_class : str
        Class of a generic A-value group (``"alkyl"`` or empty), used by pair rows.
    pattern : str
        Generic A-value rows (ring ``cyclohexane``, no position): SMARTS of the group rooted
        at its attachment atom. Specific A-value and anomeric rows: the group's key (or
        ``"H"``). Pair rows: ``"X/Y"`` with X, Y a key or a class. Reference rows: a
        description.
    ring : str
        Ring type the value was measured in (``"cyclohexane"``, ``"tetrahydropyran"``, ...);
        empty for reference rows.
    position : str
        Ring position (``"C3"``, ``"N1"``; pair rows ``"C4/C6"``); empty for generic rows.
    value : float
        In ``unit``.
    unit : str
        ``"kcal/mol"`` or ``"kJ/mol"``, as published.
    range : float
        Half-width of the quoted range, in ``unit``; 0 where one number is quoted.
    bound : Bound
    conditions, source, note : str
    flag : Flag
    """

    key: str
    kind: IncrementKind
    group_class: str
    pattern: str
    ring: str
    position: str
    value: float
    unit: str
    range: float
    bound: Bound
    conditions: str
    source: str
    flag: Flag
    note: str

    @property
    def value_kj(self) -> float:
        """The value in kJ/mol."""
        return self.value * KCAL_TO_KJ if self.unit == _Unit.KCAL.value else self.value

    @property
    def value_kcal(self) -> float:
        """The value in kcal/mol."""
        return self.value if self.unit == _Unit.KCAL.value else self.value / KCAL_TO_KJ

    @property
    def range_kj(self) -> float:
        """The half-width of the quoted range in kJ/mol."""
        return self.range * KCAL_TO_KJ if self.unit == _Unit.KCAL.value else self.range

    @property
    def generic(self) -> bool:
        """True for a cyclohexane row that applies at any position."""
        return self.ring == CYCLOHEXANE and not self.position

    @property
    def citation(self) -> str:
        """Source with its flag, as written into :class:`AdditiveTerm`."""
        text = f"{self.source} [{self.flag.value}]"
        return text + "; lower bound" if self.bound is Bound.LOWER else text

    def covers_pair(self, key_a: str, class_a: str, key_b: str, class_b: str, ordered: bool = False) -> bool:
        """Whether this pair row applies to groups (key_a, class_a) and (key_b, class_b).

        With ``ordered`` the row's first group must be group a (geminal rows: a is axial).
        """
        left, _, right = self.pattern.partition("/")
        ok_a = {key_a, class_a} - {""}
        ok_b = {key_b, class_b} - {""}
        if ordered:
            return left in ok_a and right in ok_b
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
        """The generic (cyclohexane) A-value row of group ``key``."""
        row = self[key]
        if row.kind is not IncrementKind.A_VALUE or not row.generic:
            raise KeyError(f"{key!r} is not a generic A-value row")
        return row

    def group_class(self, key: str) -> str:
        """Class of group ``key`` ('' for H and classless groups)."""
        return "" if key == HYDROGEN else self.a_value(key).group_class

    def specific(self, kind: IncrementKind, key: str, ring: str, position: str) -> Increment | None:
        """The row of ``kind`` for group ``key`` at ``position`` of ``ring``, or None."""
        for row in self.rows:
            if row.kind is kind and not row.generic and row.ring == ring and row.position == position and row.pattern == key:
                return row
        return None

    def pair(
        self, kind: IncrementKind, key_a: str, key_b: str, ring: str = CYCLOHEXANE, positions: str = "",
        ordered: bool = False,
    ) -> Increment | None:
        """The pair increment of ``kind`` for groups ``key_a`` and ``key_b``, or None.

        A row for ``ring`` at ``positions`` (``"C4/C6"``) is preferred; otherwise a generic
        row (ring cyclohexane, no position) is returned. Whether a generic row may stand in
        is the caller's decision (:attr:`Increment.generic`).
        """
        class_a, class_b = self.group_class(key_a), self.group_class(key_b)
        fitting = [r for r in self.rows if r.kind is kind and r.covers_pair(key_a, class_a, key_b, class_b, ordered)]
        for row in fitting:
            if not row.generic and row.ring == ring and row.position == positions:
                return row
        for row in fitting:
            if row.generic:
                return row
        return None


def _number(text: str, where: str, what: str, default: float | None = None) -> float:
    text = text.strip()
    if not text and default is not None:
        return default
    try:
        value = float(text)
    except ValueError as exc:
        raise ForceFieldError(f"{where}: {what} {text!r} is not a number") from exc
    if not np.isfinite(value):
        raise ForceFieldError(f"{where}: {what} {value} is not finite")
    return value


def read_increments(path: str | Path) -> IncrementTable:
    """Read and validate an increments table (CSV with the columns of the shipped file).

    Raises
    ------
    ForceFieldError
        On a missing column, a duplicate key, an unknown kind, flag, bound, unit or ring
        type, a value or range that is not a number, an empty source or flag, an invalid
        SMARTS, or a specific row whose group has no generic A-value row.
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
    where_of: dict[str, str] = {}
    for line, rec in enumerate(raw, start=2):
        where = f"{path.name} line {line}"
        if None in rec or any(rec[c] is None for c in _COLUMNS):
            raise ForceFieldError(f"{where}: wrong number of fields")
        key = rec["key"].strip()
        if not key or key in seen:
            raise ForceFieldError(f"{where}: empty or duplicate key {key!r}")
        seen.add(key)
        where_of[key] = where
        try:
            kind = IncrementKind(rec["kind"].strip())
            flag = Flag(rec["flag"].strip())
            bound = Bound(rec["bound"].strip())
            unit = _Unit(rec["unit"].strip())
        except ValueError as exc:
            raise ForceFieldError(f"{where}: {exc}") from exc
        value = _number(rec["value"], where, "value")
        spread = _number(rec["range"], where, "range", default=0.0)
        if spread < 0:
            raise ForceFieldError(f"{where}: range {spread} is negative")
        if not rec["source"].strip():
            raise ForceFieldError(f"{where}: no source for {key!r}")
        ring = rec["ring"].strip()
        if kind is not IncrementKind.REFERENCE and ring not in RING_TEMPLATES:
            raise ForceFieldError(f"{where}: unknown ring type {ring!r} (known: {', '.join(RING_TEMPLATES)})")
        row = Increment(
            key=key,
            kind=kind,
            group_class=rec["class"].strip(),
            pattern=rec["group_smarts_or_name"].strip(),
            ring=ring,
            position=rec["position"].strip(),
            value=value,
            unit=unit.value,
            range=spread,
            bound=bound,
            conditions=rec["conditions"].strip(),
            source=rec["source"].strip(),
            flag=flag,
            note=rec["note"].strip(),
        )
        if kind is IncrementKind.A_VALUE and row.generic:
            query = Chem.MolFromSmarts("[#0]-" + row.pattern)
            if query is None:
                raise ForceFieldError(f"{where}: invalid SMARTS {row.pattern!r}")
            patterns.append((row, query))
        elif kind in (IncrementKind.A_VALUE, IncrementKind.ANOMERIC) and not row.position:
            raise ForceFieldError(f"{where}: a {kind.value} row for {ring} needs a position")
        elif kind in _PAIR_KINDS and row.pattern.count("/") != 1:
            raise ForceFieldError(f"{where}: pair row needs 'X/Y', got {row.pattern!r}")
        rows.append(row)
    groups = {r.key for r, _ in patterns} | {HYDROGEN}
    for row in rows:
        if row.kind in (IncrementKind.A_VALUE, IncrementKind.ANOMERIC) and not row.generic and row.pattern not in groups:
            raise ForceFieldError(f"{where_of[row.key]}: group {row.pattern!r} of {row.key!r} has no generic A-value row")
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
