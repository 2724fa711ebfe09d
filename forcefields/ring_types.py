"""Ring types and ring positions for the additive estimate (tetrahydropyran C2, piperidine N1, ...).

:func:`classify_ring` names a six-membered ring by the sequence of its atoms and numbers
its positions the way a chemist does, from the heteroatom (or the carbonyl carbon) with the
lowest locants: in a tetrahydropyran the two carbons next to the oxygen are both ``C2``, in
a 1,3-dioxane C4 and C6 are both ``C4``. The increments table (``forcefields/data/
increments.csv``) keys its ring- and position-specific rows by these names.

Each ring atom becomes one token: ``C`` an sp3 carbon, ``K`` a carbon with an exocyclic
C=O, ``O``/``S`` a divalent sp3 oxygen/sulfur, ``N`` a neutral sp3 nitrogen (an amine, not
an amide or an aniline, whose nitrogen RDKit marks sp2), ``X`` anything else. A ring whose
tokens match none of :data:`RING_TEMPLATES` is ``"other ring"`` and its positions are named
by atom index.

:attr:`RingType.cyclohexane_like` says, per position, whether the environment of a
substituent there is that of cyclohexane: the ring atom and its neighbours one and two
bonds away along the ring are all sp3 carbons, so the substituent has the same gauche
ring bonds and the same syn-axial hydrogens as in cyclohexane. Only there may a
cyclohexane A-value stand in for a missing ring-specific one; next to a heteroatom or an
sp2 atom, and 1,3 to one, the cyclohexane value is known not to transfer (bond lengths and
syn-axial partners differ; common practice, no source), and the increment is reported as
unknown instead.
"""

from __future__ import annotations

from dataclasses import dataclass

from rdkit import Chem

__all__ = ["RING_TEMPLATES", "CYCLOHEXANE", "OTHER_RING", "RingType", "classify_ring", "ring_tokens"]

#: Ring name -> tokens from locant 1 onwards.
RING_TEMPLATES: dict[str, str] = {
    "cyclohexane": "CCCCCC",
    "tetrahydropyran": "OCCCCC",
    "thiane": "SCCCCC",
    "piperidine": "NCCCCC",
    "cyclohexanone": "KCCCCC",
    "1,3-dioxane": "OCOCCC",
    "1,4-dioxane": "OCCOCC",
    "morpholine": "OCCNCC",
    "piperazine": "NCCNCC",
}

CYCLOHEXANE = "cyclohexane"
OTHER_RING = "other ring"


@dataclass(frozen=True)
class RingType:
    """Name and position labels of one ring (in the ring's atom order).

    Attributes
    ----------
    name : str
        A key of :data:`RING_TEMPLATES` or :data:`OTHER_RING`.
    atoms : tuple of int
    positions : tuple of str
        Position label of each ring atom (``"C2"``, ``"N1"``); ``"C1"`` for every atom of
        cyclohexane; ``"atom 7"`` in an other ring.
    cyclohexane_like : tuple of bool
        Whether a cyclohexane A-value may stand in at each position (see the module text).
    numberings : tuple of tuple of str
        Every numbering of the ring that fits its template, as labels per ring atom; a pair
        of atoms is named in the numbering that gives it the lowest locants
        (:meth:`pair_positions`).
    """

    name: str
    atoms: tuple[int, ...]
    positions: tuple[str, ...]
    cyclohexane_like: tuple[bool, ...]
    numberings: tuple[tuple[str, ...], ...] = ()

    def pair_positions(self, atom_a: int, atom_b: int) -> str:
        """``"C4/C6"``: the two atoms' positions in the numbering with the lowest locants."""
        ia, ib = self.atoms.index(atom_a), self.atoms.index(atom_b)
        if not self.numberings:
            return f"{self.positions[ia]}/{self.positions[ib]}"

        def locants(labels: tuple[str, ...]) -> tuple[int, int]:
            a, b = (int("".join(ch for ch in labels[i] if ch.isdigit())) for i in (ia, ib))
            return (min(a, b), max(a, b))

        best = min(self.numberings, key=locants)
        pair = sorted((best[ia], best[ib]), key=lambda p: int("".join(ch for ch in p if ch.isdigit())))
        return "/".join(pair)

    def position_of(self, ring_atom: int) -> str:
        """Position label of ``ring_atom``."""
        return self.positions[self.atoms.index(ring_atom)]

    def where(self, ring_atom: int) -> str:
        """``"position C2 of tetrahydropyran (atom 5)"``; ``"atom 3 of cyclohexane"``."""
        if self.name == CYCLOHEXANE:
            return f"atom {ring_atom} of cyclohexane"
        if self.name == OTHER_RING:
            return f"atom {ring_atom} of an other ring"
        return f"position {self.position_of(ring_atom)} of {self.name} (atom {ring_atom})"


def _token(mol: Chem.Mol, idx: int, ring: tuple[int, ...]) -> str:
    atom = mol.GetAtomWithIdx(idx)
    z = atom.GetAtomicNum()
    hyb = atom.GetHybridization()
    sp3 = hyb == Chem.HybridizationType.SP3
    if atom.GetIsAromatic() or atom.GetFormalCharge() != 0:
        return "X"
    if z == 6:
        if sp3:
            return "C"
        for bond in atom.GetBonds():
            other = bond.GetOtherAtom(atom)
            if (
                bond.GetBondType() == Chem.BondType.DOUBLE
                and other.GetAtomicNum() == 8
                and other.GetIdx() not in ring
            ):
                return "K"
        return "X"
    if z in (8, 16) and sp3 and atom.GetDegree() == 2:
        return "O" if z == 8 else "S"
    if z == 7 and sp3:
        return "N"
    return "X"


def ring_tokens(mol: Chem.Mol, ring: tuple[int, ...]) -> str:
    """Token string of ``ring`` in its atom order (see the module text)."""
    return "".join(_token(mol, a, ring) for a in ring)


def classify_ring(mol: Chem.Mol, ring: tuple[int, ...]) -> RingType:
    """Ring type and position labels of a six-membered ring given in ring order."""
    ring = tuple(int(a) for a in ring)
    tokens = ring_tokens(mol, ring)
    n = len(ring)
    like = tuple(
        tokens[i] == "C" and all(tokens[(i + d) % n] == "C" for d in (-2, -1, 1, 2)) for i in range(n)
    )
    for name, template in RING_TEMPLATES.items():
        locants: list[int | None] = [None] * n
        numberings: list[tuple[str, ...]] = []
        for start in range(n):
            for step in (1, -1):
                order = [(start + step * k) % n for k in range(n)]
                if "".join(tokens[i] for i in order) != template:
                    continue
                labels = [""] * n
                for k, i in enumerate(order):
                    labels[i] = ("C" if tokens[i] in "CK" else tokens[i]) + str(k + 1)
                numberings.append(tuple(labels))
                for k, i in enumerate(order):
                    loc = locants[i]
                    locants[i] = k + 1 if loc is None else min(loc, k + 1)
        if locants[0] is None:
            continue
        if name == CYCLOHEXANE:
            positions = tuple("C1" for _ in ring)
        else:
            positions = tuple(
                ("C" if tokens[i] in "CK" else tokens[i]) + str(locants[i]) for i in range(n)
            )
        return RingType(name, ring, positions, like, tuple(numberings))
    return RingType(OTHER_RING, ring, tuple(f"atom {a}" for a in ring), like)
