"""Frozen records of the coupling stage, stored on :attr:`chairbuild.result.Ensemble.couplings`.

Proton labels (this project's scheme; atom numbers are the 0-based indices of the
Ensemble, i.e. the input heavy-atom order with the hydrogens after the heavy atoms):

* ``H<c>`` — the one proton of a CH carbon ``c``, or the three protons of a methyl group
  on ``c`` (a methyl group rotates fast, so its three couplings are averaged);
* ``H<c>ax`` / ``H<c>eq`` — the two protons of a ring CH2, axial or equatorial in the
  *dominant chair* of that ring (the lowest member of its most populated chair family);
  in other conformers the same atoms may swap positions (a ring flip), and the coupling
  follows the atoms, not the positions;
* ``H<c>R`` / ``H<c>S`` — pro-R / pro-S protons of any CH2 whose carbon becomes a
  stereocentre when one of them is replaced by deuterium (CIP); the primary label of an
  exocyclic CH2 (e.g. the CH2OH of a pyranoside), an alias of a ring CH2;
* ``H<c>a`` / ``H<c>b`` — the two protons of a CH2 that is neither (lower atom index first).

Every proton can also be named by its own atom index, and a proton group by its
carbon's index when that carbon carries only one group (CH or CH3).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

from chairbuild.errors import InputError

__all__ = ["ProtonGroup", "CouplingRecord", "CouplingTable"]


@dataclass(frozen=True)
class ProtonGroup:
    """Protons that count as one NMR site: one H, or a fast-rotating methyl group.

    Attributes
    ----------
    label : str
        Primary label (module doc).
    atoms : tuple of int
        Hydrogen atom indices (three for a methyl group).
    carbon : int
        Carbon that carries them.
    kind : str
        ``"CH"``, ``"CH2"`` (one of two diastereotopic protons) or ``"CH3"``.
    aliases : tuple of str
        Other accepted labels (pro-R/pro-S of a ring CH2).
    """

    label: str
    atoms: tuple[int, ...]
    carbon: int
    kind: str
    aliases: tuple[str, ...] = ()

    def names(self) -> tuple[str, ...]:
        """Every label this group answers to (lower case)."""
        return tuple(n.lower() for n in (self.label, *self.aliases))

    def to_dict(self) -> dict[str, Any]:
        return {"label": self.label, "atoms": list(self.atoms), "carbon": self.carbon, "kind": self.kind, "aliases": list(self.aliases)}

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "ProtonGroup":
        return cls(d["label"], tuple(d["atoms"]), int(d["carbon"]), d["kind"], tuple(d.get("aliases", ())))


@dataclass(frozen=True)
class CouplingRecord:
    """One vicinal coupling 3J between two proton groups, per conformer and averaged.

    Attributes
    ----------
    protons : tuple of str
        The two group labels.
    hydrogens : tuple of tuple of int
        Hydrogen atoms of each group.
    carbons : tuple of int
        The two fragment carbons.
    equation : str
        ``"HLA-B"`` … ``"HLA-E"`` (HLA equation with that parameter set) or ``"Garbisch"``.
    ring_index : int or None
        Ring whose families give the limiting couplings (a ring that contains one of the
        carbons; ring 0 for a fragment on no ring), None for a molecule without rings.
    values : tuple of float
        3J (Hz) in each conformer, in the order of ``Ensemble.conformers``.
    average : float
        Population-weighted ⟨J⟩ = Σ p_i J_i (Hz); p_i includes the degeneracy.
    family_limits : Mapping[str, float]
        Family key → limiting coupling of that family (Hz): the population-weighted mean
        over its members (the lowest member when the family's population is zero).
    sensitivity : Mapping[str, float]
        Family key → d⟨J⟩/dG_f (Hz per kJ/mol) when the free energy of every member of
        family f rises by the same amount: −(p_f / RT)(J_f − ⟨J⟩).
    """

    protons: tuple[str, str]
    hydrogens: tuple[tuple[int, ...], tuple[int, ...]]
    carbons: tuple[int, int]
    equation: str
    ring_index: int | None
    values: tuple[float, ...]
    average: float
    family_limits: Mapping[str, float] = field(default_factory=dict)
    sensitivity: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "family_limits", MappingProxyType(dict(self.family_limits)))
        object.__setattr__(self, "sensitivity", MappingProxyType(dict(self.sensitivity)))

    @property
    def name(self) -> str:
        """``"H2–H11"``: the two labels."""
        return f"{self.protons[0]}–{self.protons[1]}"

    def to_dict(self) -> dict[str, Any]:
        return {
            "protons": list(self.protons),
            "hydrogens": [list(h) for h in self.hydrogens],
            "carbons": list(self.carbons),
            "equation": self.equation,
            "ring_index": self.ring_index,
            "average_Hz": round(self.average, 3),
            "per_conformer_Hz": [round(v, 3) for v in self.values],
            "family_limits_Hz": {k: round(v, 3) for k, v in self.family_limits.items()},
            "sensitivity_Hz_per_kJ": {k: round(v, 4) for k, v in self.sensitivity.items()},
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "CouplingRecord":
        return cls(
            protons=tuple(d["protons"]),  # type: ignore[arg-type]
            hydrogens=tuple(tuple(h) for h in d["hydrogens"]),  # type: ignore[arg-type]
            carbons=tuple(d["carbons"]),  # type: ignore[arg-type]
            equation=d["equation"],
            ring_index=d["ring_index"],
            values=tuple(float(v) for v in d["per_conformer_Hz"]),
            average=float(d["average_Hz"]),
            family_limits=dict(d["family_limits_Hz"]),
            sensitivity=dict(d["sensitivity_Hz_per_kJ"]),
        )


@dataclass(frozen=True)
class CouplingTable:
    """Every vicinal 3J(H,H) of an ensemble (see :mod:`chairbuild.couplings`).

    Attributes
    ----------
    protons : tuple of ProtonGroup
    pairs : tuple of CouplingRecord
    notes : tuple of str
        Fragments left out and why (no parameter for an element, sp2–sp2, ...).
    """

    protons: tuple[ProtonGroup, ...] = ()
    pairs: tuple[CouplingRecord, ...] = ()
    notes: tuple[str, ...] = ()

    def __len__(self) -> int:
        return len(self.pairs)

    def __iter__(self):
        return iter(self.pairs)

    def group(self, token: str | int) -> ProtonGroup:
        """The proton group named by ``token`` (a label, an alias, or an atom index).

        Raises
        ------
        InputError
            No group answers to ``token``, or an atom index is ambiguous.
        """
        text = str(token).strip()
        if text.lstrip("-").isdigit():
            idx = int(text)
            for g in self.protons:
                if idx in g.atoms:
                    return g
            on_carbon = [g for g in self.protons if g.carbon == idx]
            if len(on_carbon) == 1:
                return on_carbon[0]
            if on_carbon:
                raise InputError(
                    f"atom {idx} carries diastereotopic protons; name one of them: "
                    + ", ".join(g.label for g in on_carbon)
                )
            raise InputError(f"atom {idx} is not a proton of any vicinal coupling (nor a carbon carrying one)")
        key = text.lower()
        for g in self.protons:
            if key in g.names():
                return g
        raise InputError(f"no proton is labelled {text!r}; labels: {', '.join(g.label for g in self.protons)}")

    def find(self, a: str | int, b: str | int) -> CouplingRecord:
        """The coupling between the groups named ``a`` and ``b`` (either order).

        Raises
        ------
        InputError
            A name matches no proton, or the two protons have no vicinal coupling.
        """
        ga, gb = self.group(a), self.group(b)
        for rec in self.pairs:
            if set(rec.protons) == {ga.label, gb.label}:
                return rec
        raise InputError(f"{a}–{b} ({ga.label}–{gb.label}) is not a vicinal H–C–C–H coupling of this molecule")

    def to_dict(self) -> dict[str, Any]:
        return {
            "protons": [g.to_dict() for g in self.protons],
            "pairs": [p.to_dict() for p in self.pairs],
            "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "CouplingTable":
        return cls(
            protons=tuple(ProtonGroup.from_dict(g) for g in d.get("protons", ())),
            pairs=tuple(CouplingRecord.from_dict(p) for p in d.get("pairs", ())),
            notes=tuple(d.get("notes", ())),
        )
