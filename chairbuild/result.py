"""The one result object of chairbuild, and its one serializer.

An analysis produces a frozen :class:`Ensemble`: the molecule, one
:class:`ConformerRecord` per distinct conformer (coordinates, energies per level,
convergence, population, ring and substituent descriptors), one :class:`FamilyRecord`
per ring state family (the "chair with X axial" bookkeeping a chemist does by hand) and
the provenance of the run. The CLI, the exporters and the viewer only read it.

Units inside the result: Å for coordinates, kJ/mol for energies, K for temperature.
Conversion to kcal/mol happens only in :meth:`Ensemble.to_dict` (``unit="kcal/mol"``)
and in the text output.
"""

from __future__ import annotations

import enum
import json
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from chairbuild.choices import Choice
from chairbuild.constants import KJ_TO_KCAL
from chairbuild.errors import InputError

if TYPE_CHECKING:
    from chairbuild.couplings.records import CouplingTable

__all__ = [
    "Status",
    "RingShape",
    "Position",
    "EnergyUnit",
    "RingDescriptor",
    "SubstituentDescriptor",
    "ConformerRecord",
    "FamilyRecord",
    "AdditiveTerm",
    "AdditiveStatus",
    "Ensemble",
    "SCHEMA_VERSION",
    "load_json",
    "load_json_all",
]

#: Keys of ``ConformerRecord.thermo`` that are absolute energies (kJ/mol in the record).
THERMO_ENERGY_KEYS = ("energy", "enthalpy", "free_energy", "zpe", "rrho_correction")

#: Keys of ``ConformerRecord.thermo`` that are not energies (written as they are).
_THERMO_PLAIN_KEYS = ("symmetry_number", "imaginary_modes", "entropy_J_per_molK")

#: Version of the JSON layout written by :meth:`Ensemble.to_dict` (1.1 added
#: ``mol_block`` and ``symbols``, which :meth:`Ensemble.from_dict` needs to rebuild the molecule).
SCHEMA_VERSION = "1.1"


class Status(str, enum.Enum):
    """Outcome of one conformer's processing."""

    OK = "ok"
    NOT_CONVERGED = "not-converged"
    STEREO_CHANGED = "stereo-changed"
    FAILED = "failed"


class RingShape(str, enum.Enum):
    """Shape of a six-membered ring, classified from its Cremer–Pople coordinates."""

    CHAIR = "chair"
    TWIST_BOAT = "twist-boat"
    BOAT = "boat"
    HALF_CHAIR = "half-chair"
    ENVELOPE = "envelope"
    SCREW_BOAT = "screw-boat"
    PLANAR = "planar"


class Position(str, enum.Enum):
    """Orientation of a ring substituent (see :mod:`chairbuild.describe` for the thresholds)."""

    AXIAL = "axial"
    EQUATORIAL = "equatorial"
    PSEUDO_AXIAL = "pseudo-axial"
    PSEUDO_EQUATORIAL = "pseudo-equatorial"
    ISOCLINAL = "isoclinal"
    IN_PLANE = "in-plane"


class EnergyUnit(Choice):
    """Energy unit of reported values."""

    KJ = "kJ/mol"
    KCAL = "kcal/mol"

    @classmethod
    def describe(cls) -> str:
        return "energy unit"

    @classmethod
    def aliases(cls) -> dict[str, "EnergyUnit"]:
        return {"kj": cls.KJ, "kcal": cls.KCAL}

    def from_kj(self, value: float) -> float:
        """Convert ``value`` in kJ/mol to this unit."""
        return value if self is EnergyUnit.KJ else value * KJ_TO_KCAL

    def to_kj(self, value: float) -> float:
        """Convert ``value`` in this unit to kJ/mol."""
        return value if self is EnergyUnit.KJ else value / KJ_TO_KCAL


def _frozen_array(values: Any) -> np.ndarray:
    arr = np.array(values, dtype=float)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True)
class RingDescriptor:
    """One six-membered ring in one conformer.

    Attributes
    ----------
    atoms : tuple of int
        Ring atoms in ring order (0-based input indices).
    shape : RingShape
        Shape label from the Cremer–Pople coordinates.
    q_total : float
        Cremer–Pople total puckering amplitude Q (Å).
    theta : float
        Cremer–Pople θ (degrees, 0–180).
    phi : float
        Cremer–Pople φ (degrees, 0–360).
    torsions : tuple of float
        The six endocyclic torsions (degrees); torsion k is atoms k, k+1, k+2, k+3.
    """

    atoms: tuple[int, ...]
    shape: RingShape
    q_total: float
    theta: float
    phi: float
    torsions: tuple[float, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "atoms": list(self.atoms),
            "shape": self.shape.value,
            "Q": round(self.q_total, 4),
            "theta": round(self.theta, 2),
            "phi": round(self.phi, 2),
            "torsions": [round(t, 2) for t in self.torsions],
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "RingDescriptor":
        """Inverse of :meth:`to_dict`."""
        return cls(
            atoms=tuple(int(a) for a in d["atoms"]),
            shape=RingShape(d["shape"]),
            q_total=float(d["Q"]),
            theta=float(d["theta"]),
            phi=float(d["phi"]),
            torsions=tuple(float(t) for t in d["torsions"]),
        )


@dataclass(frozen=True)
class SubstituentDescriptor:
    """A ring substituent (first atom outside the ring) in one conformer.

    Attributes
    ----------
    atom : int
        Index of the substituent's first atom.
    ring_atom : int
        Index of the ring atom it is bonded to.
    ring_index : int
        Index of the ring (into :attr:`Ensemble.ring_atoms`).
    group : str
        The group as a rooted SMILES fragment (``"C"`` for methyl, ``"O"`` for hydroxy).
    position : Position
        Axial, equatorial or, in non-chair rings, the pseudo labels.
    cos_normal : float
        |cos| of the angle between the ring–substituent bond and the ring's mean-plane normal.
    torsions : Mapping[str, float]
        Key torsions of the substituent (degrees), keyed by the four atom indices.
    """

    atom: int
    ring_atom: int
    ring_index: int
    group: str
    position: Position
    cos_normal: float
    torsions: Mapping[str, float] = field(default_factory=dict)

    def label(self, symbols: tuple[str, ...] | list[str]) -> str:
        """How every output spells this substituent: element, 0-based atom number, group (``C0(C)``)."""
        return f"{symbols[self.atom]}{self.atom}({self.group})"

    def to_dict(self) -> dict[str, Any]:
        return {
            "atom": self.atom,
            "ring_atom": self.ring_atom,
            "ring_index": self.ring_index,
            "group": self.group,
            "position": self.position.value,
            "cos_normal": round(self.cos_normal, 3),
            "torsions": {k: round(v, 1) for k, v in self.torsions.items()},
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "SubstituentDescriptor":
        """Inverse of :meth:`to_dict`."""
        return cls(
            atom=int(d["atom"]),
            ring_atom=int(d["ring_atom"]),
            ring_index=int(d["ring_index"]),
            group=str(d["group"]),
            position=Position(d["position"]),
            cos_normal=float(d["cos_normal"]),
            torsions={str(k): float(v) for k, v in d["torsions"].items()},
        )


@dataclass(frozen=True)
class ConformerRecord:
    """One conformer: geometry, energies per level, descriptors, population.

    Attributes
    ----------
    id : int
        Rank by the ranking energy (0 = lowest) among the conformers with status OK.
    coords : numpy.ndarray
        Coordinates (Å), shape (n_atoms, 3), read-only.
    energies : Mapping[str, float]
        Absolute energy per level (kJ/mol), e.g. ``{"MMFF94": ..., "GFN2-xTB": ...}``.
    relative_energy : float
        Ranking energy minus the lowest ranking energy (kJ/mol).
    population : float
        Boltzmann population (0–1) at the ensemble's temperature, degeneracy included.
    degeneracy : int
        Number of symmetry-equivalent copies this record stands for.
    rings, substituents :
        Descriptors computed on the final geometry.
    families : tuple of str
        Family key of each ring (see :class:`FamilyRecord`).
    converged : bool
        Whether the last minimisation met its gradient criterion.
    rms_gradient : float
        RMS gradient at the final geometry (kJ mol^-1 Å^-1).
    status : Status
    message : str
        Why a record is not OK; notes otherwise.
    start_state : str
        The starting structure it was minimised from: ring states, substituent placement
        and rotamer (``chair0|placement0|rot(...)``), or the refinement seed that led to it.
    thermo : Mapping[str, float]
        ``energy`` (absolute, ranking level, kJ/mol) always; ``enthalpy``, ``free_energy``
        and ``zpe`` (kJ/mol), ``entropy_J_per_molK``, ``symmetry_number`` and
        ``imaginary_modes`` when free energies were computed.
    """

    id: int
    coords: np.ndarray
    energies: Mapping[str, float]
    relative_energy: float
    population: float
    degeneracy: int
    rings: tuple[RingDescriptor, ...]
    substituents: tuple[SubstituentDescriptor, ...]
    families: tuple[str, ...]
    converged: bool
    rms_gradient: float
    status: Status = Status.OK
    message: str = ""
    start_state: str = ""
    thermo: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "coords", _frozen_array(self.coords))
        object.__setattr__(self, "energies", MappingProxyType(dict(self.energies)))
        object.__setattr__(self, "thermo", MappingProxyType(dict(self.thermo)))

    def to_dict(self, unit: EnergyUnit, symbols: tuple[str, ...]) -> dict[str, Any]:
        out: dict[str, Any] = {
            "id": self.id,
            "status": self.status.value,
            "relative_energy": round(unit.from_kj(float(self.relative_energy)), 4) if np.isfinite(self.relative_energy) else None,
            "population": round(float(self.population), 6),
            "degeneracy": self.degeneracy,
            "energies": {k: round(unit.from_kj(float(v)), 4) for k, v in self.energies.items()},
            "rings": [r.to_dict() for r in self.rings],
            "substituents": [s.to_dict() for s in self.substituents],
            "families": list(self.families),
            "converged": self.converged,
            "rms_gradient": round(self.rms_gradient, 5),
            "start_state": self.start_state,
            "message": self.message,
            "coordinates": [[sym, *[round(float(c), 5) for c in xyz]] for sym, xyz in zip(symbols, self.coords)],
        }
        for key in THERMO_ENERGY_KEYS:
            out[key] = round(unit.from_kj(float(self.thermo[key])), 4) if key in self.thermo else None
        for key in _THERMO_PLAIN_KEYS:
            if key in self.thermo:
                out[key] = round(float(self.thermo[key]), 4)
        return out

    @classmethod
    def from_dict(cls, d: Mapping[str, Any], unit: EnergyUnit) -> "ConformerRecord":
        """Inverse of :meth:`to_dict`: energies in ``unit`` are converted back to kJ/mol."""
        thermo: dict[str, float] = {}
        for key in THERMO_ENERGY_KEYS:
            if d.get(key) is not None:
                thermo[key] = unit.to_kj(float(d[key]))
        for key in _THERMO_PLAIN_KEYS:
            if key in d:
                thermo[key] = float(d[key])
        rel = d["relative_energy"]
        return cls(
            id=int(d["id"]),
            coords=np.array([row[1:] for row in d["coordinates"]], dtype=float).reshape(-1, 3),
            energies={str(k): unit.to_kj(float(v)) for k, v in d["energies"].items()},
            relative_energy=float("nan") if rel is None else unit.to_kj(float(rel)),
            population=float(d["population"]),
            degeneracy=int(d["degeneracy"]),
            rings=tuple(RingDescriptor.from_dict(r) for r in d["rings"]),
            substituents=tuple(SubstituentDescriptor.from_dict(x) for x in d["substituents"]),
            families=tuple(str(f) for f in d["families"]),
            converged=bool(d["converged"]),
            rms_gradient=float(d["rms_gradient"]),
            status=Status(d["status"]),
            message=str(d["message"]),
            start_state=str(d["start_state"]),
            thermo=thermo,
        )


@dataclass(frozen=True)
class AdditiveTerm:
    """One increment of the additive estimate (an A-value, an anomeric, gauche, geminal or syn-diaxial term).

    Attributes
    ----------
    kind : str
        Increment kind as in the data table (``"A-value"``, ``"anomeric"``, ``"gauche"``, ...).
    atoms : tuple of int
        Atoms involved.
    value : float
        Contribution (kJ/mol).
    source : str
        Citation of the value, with its flag (P/S/M).
    increment : str
        Key of the table row used (``"THP-C3-CH3"``, ``"CH3"``).
    applies_to : str
        What the term scores, with the ring type and position
        (``"CH3 axial at position C3 of tetrahydropyran"``).
    conditions : str
        Temperature, solvent or phase of the published value ('' where the source gives none).
    fallback : str
        '' when the row is specific to this ring and position; otherwise why a generic
        (cyclohexane) row stands in for it.
    uncertainty : float
        Half-width of the range quoted for the value (kJ/mol); 0 where one number is quoted.
    """

    kind: str
    atoms: tuple[int, ...]
    value: float
    source: str
    increment: str = ""
    applies_to: str = ""
    conditions: str = ""
    fallback: str = ""
    uncertainty: float = 0.0

    def to_dict(self, unit: EnergyUnit) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "atoms": list(self.atoms),
            "value": round(unit.from_kj(self.value), 3),
            "source": self.source,
            "increment": self.increment,
            "applies_to": self.applies_to,
            "conditions": self.conditions,
            "fallback": self.fallback,
            "uncertainty": round(unit.from_kj(self.uncertainty), 3),
        }


    @classmethod
    def from_dict(cls, d: Mapping[str, Any], unit: EnergyUnit) -> "AdditiveTerm":
        """Inverse of :meth:`to_dict`."""
        return cls(
            kind=str(d["kind"]),
            atoms=tuple(int(a) for a in d["atoms"]),
            value=unit.to_kj(float(d["value"])),
            source=str(d["source"]),
            increment=str(d.get("increment", "")),
            applies_to=str(d.get("applies_to", "")),
            conditions=str(d.get("conditions", "")),
            fallback=str(d.get("fallback", "")),
            uncertainty=unit.to_kj(float(d.get("uncertainty", 0.0))),
        )

class AdditiveStatus(str, enum.Enum):
    """What the additive column of a family holds."""

    #: A number comparable with the force field.
    ESTIMATED = "estimated"
    #: The ring's chair family with the lowest complete estimate (0 by definition).
    REFERENCE = "reference"
    #: The estimate lacks a term: "increment unknown for X at position Y", no number.
    UNKNOWN = "increment unknown"
    #: Neither this family nor the reference has a single term: nothing to compare.
    NO_INCREMENTS = "no increments known"
    #: Not a chair family (or no additive scorer): no estimate.
    NONE = "none"


@dataclass(frozen=True)
class FamilyRecord:
    """A family of conformers sharing one ring's state (e.g. the chair with C1-methyl axial).

    Attributes
    ----------
    key : str
        Unique key, e.g. ``"ring0:chair[ax:7]"``.
    ring_index : int
    label : str
        Human-readable label, e.g. ``"chair, C7 (C) axial"``.
    members : tuple of int
        Conformer ids in this family.
    population : float
        Summed population.
    delta_g : float
        −RT ln(population / population of the ring's most populated family) (kJ/mol).
    equilibrium_constant : float
        population of the most populated family / population of this one (≥ 1).
    additive_energy : float or None
        Additive increment estimate relative to the ring's reference family (kJ/mol); None
        unless ``additive_status`` is ESTIMATED or REFERENCE.
    additive_terms : tuple of AdditiveTerm
    model_energy : float or None
        Lowest relative energy of the members at the ranking level (kJ/mol), relative to
        the ring's reference family.
    disagreement : bool
        True when additive and model energies differ by more than the threshold plus
        ``additive_uncertainty``.
    additive_notes : tuple of str
        Increments the estimate lacks ("increment unknown for X at position Y"), one each;
        empty when the estimate is complete.
    additive_status : AdditiveStatus
    additive_uncertainty : float or None
        Sum of the quoted ranges of this family's terms and the reference family's (kJ/mol).
    additive_caveats : tuple of str
        Scored but approximate terms: generic fallbacks, lower bounds.
    """

    key: str
    ring_index: int
    label: str
    members: tuple[int, ...]
    population: float
    delta_g: float
    equilibrium_constant: float
    additive_energy: float | None = None
    additive_terms: tuple[AdditiveTerm, ...] = ()
    model_energy: float | None = None
    disagreement: bool = False
    additive_notes: tuple[str, ...] = ()
    additive_status: AdditiveStatus = AdditiveStatus.NONE
    additive_uncertainty: float | None = None
    additive_caveats: tuple[str, ...] = ()

    def to_dict(self, unit: EnergyUnit) -> dict[str, Any]:
        def conv(v: float | None) -> float | None:
            return None if v is None or not np.isfinite(v) else round(unit.from_kj(float(v)), 4)

        return {
            "key": self.key,
            "ring_index": self.ring_index,
            "label": self.label,
            "members": list(self.members),
            "population": round(float(self.population), 6),
            "delta_g": conv(self.delta_g),
            "equilibrium_constant": None if not np.isfinite(self.equilibrium_constant) else round(float(self.equilibrium_constant), 4),
            "additive_energy": conv(self.additive_energy),
            "additive_terms": [t.to_dict(unit) for t in self.additive_terms],
            "model_energy": conv(self.model_energy),
            "disagreement": self.disagreement,
            "additive_partial": bool(self.additive_notes),
            "additive_notes": list(self.additive_notes),
            "additive_status": self.additive_status.value,
            "additive_uncertainty": conv(self.additive_uncertainty),
            "additive_caveats": list(self.additive_caveats),
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any], unit: EnergyUnit) -> "FamilyRecord":
        """Inverse of :meth:`to_dict` (a null ΔG or K, written for an empty family, reads as infinity)."""

        def energy(v: float | None, missing: float | None) -> float | None:
            return missing if v is None else unit.to_kj(float(v))

        k_eq = d["equilibrium_constant"]
        return cls(
            key=str(d["key"]),
            ring_index=int(d["ring_index"]),
            label=str(d["label"]),
            members=tuple(int(m) for m in d["members"]),
            population=float(d["population"]),
            delta_g=energy(d["delta_g"], float("inf")),
            equilibrium_constant=float("inf") if k_eq is None else float(k_eq),
            additive_energy=energy(d["additive_energy"], None),
            additive_terms=tuple(AdditiveTerm.from_dict(t, unit) for t in d["additive_terms"]),
            model_energy=energy(d["model_energy"], None),
            disagreement=bool(d["disagreement"]),
            additive_notes=tuple(str(n) for n in d["additive_notes"]),
            additive_status=AdditiveStatus(d.get("additive_status", AdditiveStatus.NONE.value)),
            additive_uncertainty=energy(d.get("additive_uncertainty"), None),
            additive_caveats=tuple(str(n) for n in d.get("additive_caveats", ())),
        )


@dataclass(frozen=True)
class Ensemble:
    """The frozen result of one analysis.

    Attributes
    ----------
    name : str
        Name given by the user, or the input SMILES.
    smiles : str
        Canonical isomeric SMILES of the molecule analysed (the one enantiomer, when a
        mirror-image choice was made).
    mol_block : str
        MDL molfile of the molecule with explicit hydrogens, in the atom order the indices
        refer to (input heavy-atom order, hydrogens after the heavy atoms).
    symbols : tuple of str
        Element symbol of each atom.
    ring_atoms : tuple of tuple of int
        The six-membered rings, each in ring order.
    method : str
        Level used for ranking, e.g. ``"MMFF94"`` or ``"GFN2-xTB/ALPB(water)//MMFF94"``.
    ranking : str
        ``"energy"`` or ``"free_energy"``.
    temperature : float
        K.
    window : float
        Energy window used (kJ/mol).
    conformers : tuple of ConformerRecord
        Kept conformers (status OK), sorted by relative energy.
    rejected : tuple of ConformerRecord
        Records that failed or were rejected (status not OK), kept as data.
    families : tuple of FamilyRecord
    notes : tuple of str
        Warnings and notes for the user (cap reached, enantiomer choice, ...).
    provenance : Mapping[str, Any]
        Versions, options, counts and timings.
    charge : int
        Total charge (sum of formal charges) of the molecule.
    multiplicity : int
        Spin multiplicity 2S + 1 (1 closed shell, 2 a radical).
    outside_window : int
        Number of distinct conformers left out because they lie above the window (their
        note is written by :meth:`notes_in`, in the unit of the output).

    ranking_formula : str
        The formula of the ranking quantity, e.g.
        ``"G = E[B3LYP-D3(BJ)/def2-SVP//GFN2-xTB] + G_RRHO[GFN2-xTB]"`` (see
        :mod:`chairbuild.levels.chain`).
    ranking_terms : tuple of (str, str)
        The formula's terms as (mapping, key) of each record, e.g.
        ``(("energies", "B3LYP-D3(BJ)/def2-SVP//GFN2-xTB"), ("thermo", "rrho_correction"))``:
        a record's ranking quantity is the sum of ``getattr(record, mapping)[key]``.
    couplings : CouplingTable or None
        Vicinal 3J(H,H) per conformer, ⟨J⟩, family limits and sensitivities
        (:mod:`chairbuild.couplings`); None when not computed.
    """

    name: str
    smiles: str
    mol_block: str
    symbols: tuple[str, ...]
    ring_atoms: tuple[tuple[int, ...], ...]
    method: str
    ranking: str
    temperature: float
    window: float
    conformers: tuple[ConformerRecord, ...]
    rejected: tuple[ConformerRecord, ...] = ()
    families: tuple[FamilyRecord, ...] = ()
    notes: tuple[str, ...] = ()
    provenance: Mapping[str, Any] = field(default_factory=dict)
    charge: int = 0
    multiplicity: int = 1
    outside_window: int = 0

    ranking_formula: str = ""
    ranking_terms: tuple[tuple[str, str], ...] = ()
    couplings: "CouplingTable | None" = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "provenance", MappingProxyType(dict(self.provenance)))
        object.__setattr__(self, "ranking_terms", tuple(tuple(t) for t in self.ranking_terms))

    # ------------------------------------------------------------------ access
    def __len__(self) -> int:
        return len(self.conformers)

    def __iter__(self):
        return iter(self.conformers)

    def __getitem__(self, index: int) -> ConformerRecord:
        """``ens[k]``: the kept conformer of rank ``k`` (0 = lowest; negative counts from the end)."""
        return self.conformers[index]

    def __repr__(self) -> str:
        best = self.conformers[0].rings if self.conformers else ()
        shapes = "+".join(r.shape.value for r in best) or "no ring"
        charge = f"{self.charge:+d}" if self.charge else "0"
        return (
            f"<Ensemble {self.name!r}: {len(self.conformers)} conformer(s), {self.method}, "
            f"T={self.temperature:g} K, charge {charge}, multiplicity {self.multiplicity}; lowest {shapes}>"
        )

    def _repr_html_(self) -> str:
        """Summary table for notebooks (see :func:`chairbuild.frames.ensemble_html`)."""
        from chairbuild.frames import ensemble_html

        return ensemble_html(self)

    def window_note(self, unit: EnergyUnit | str = EnergyUnit.KJ) -> str | None:
        """The note on conformers left out above the window, in ``unit`` (None when none was)."""
        if not self.outside_window:
            return None
        unit = unit if isinstance(unit, EnergyUnit) else EnergyUnit.parse(unit)
        return f"{self.outside_window} conformer(s) above the {unit.from_kj(self.window):.4g} {unit.value} window were left out"

    def notes_in(self, unit: EnergyUnit | str = EnergyUnit.KJ) -> tuple[str, ...]:
        """:attr:`notes` plus the notes whose numbers are formatted in ``unit`` (the window)."""
        extra = self.window_note(unit)
        return self.notes + ((extra,) if extra else ())

    def to_dataframe(self, unit: EnergyUnit | str = EnergyUnit.KJ, include_rejected: bool = False):
        """One row per conformer as a pandas DataFrame (see :func:`chairbuild.frames.conformers_frame`)."""
        from chairbuild.frames import conformers_frame

        return conformers_frame(self, unit, include_rejected)

    def families_dataframe(self, unit: EnergyUnit | str = EnergyUnit.KJ):
        """One row per ring-state family as a pandas DataFrame (see :func:`chairbuild.frames.families_frame`)."""
        from chairbuild.frames import families_frame

        return families_frame(self, unit)

    def family(self, key: str) -> FamilyRecord:
        """Return the family with ``key``; raise KeyError if absent."""
        for fam in self.families:
            if fam.key == key:
                return fam
        raise KeyError(key)

    def to_rdkit(self, include_rejected: bool = False, unit: EnergyUnit | str = EnergyUnit.KJ):
        """One RDKit molecule holding every conformer (rank order) with its properties.

        See :func:`chairbuild.frames.ensemble_to_rdkit`: conformer ``k`` has id ``k`` and
        carries energies per level, population, ring shapes and substituent positions as
        conformer properties; the molecule carries name, method, charge and multiplicity.
        """
        from chairbuild.frames import ensemble_to_rdkit

        return ensemble_to_rdkit(self, include_rejected, unit)

    # -------------------------------------------------------------- serialize
    def to_dict(self, unit: EnergyUnit | str = EnergyUnit.KJ) -> dict[str, Any]:
        """The JSON contract (see README, "JSON output")."""
        unit = unit if isinstance(unit, EnergyUnit) else EnergyUnit.parse(unit)
        return {
            "schema": SCHEMA_VERSION,
            "name": self.name,
            "smiles": self.smiles,
            "charge": self.charge,
            "multiplicity": self.multiplicity,
            "symbols": list(self.symbols),
            "mol_block": self.mol_block,
            "method": self.method,
            "ranking": self.ranking,
            "ranking_formula": self.ranking_formula,
            "ranking_terms": [list(t) for t in self.ranking_terms],
            "temperature_K": self.temperature,
            "energy_unit": unit.value,
            "window": round(unit.from_kj(float(self.window)), 4),
            "ring_atoms": [list(r) for r in self.ring_atoms],
            "conformers": [c.to_dict(unit, self.symbols) for c in self.conformers],
            "families": [f.to_dict(unit) for f in self.families],
            "rejected": [c.to_dict(unit, self.symbols) for c in self.rejected],
            "notes": list(self.notes_in(unit)),
            "outside_window": self.outside_window,
            "provenance": _jsonable(dict(self.provenance)),
            "couplings": None if self.couplings is None else self.couplings.to_dict(),
        }

    def to_json(self, unit: EnergyUnit | str = EnergyUnit.KJ, indent: int | None = 2) -> str:
        """Serialize :meth:`to_dict` as a JSON string."""
        return json.dumps(self.to_dict(unit), indent=indent, allow_nan=False)

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> "Ensemble":
        """Rebuild an ensemble from :meth:`to_dict`'s output (the exact inverse).

        Energies are converted back to kJ/mol from the file's ``energy_unit``. Values keep
        the precision the file was written with (energies to 1e-4, coordinates to 1e-5 Å),
        so ``Ensemble.from_dict(e.to_dict(u)).to_dict(u) == e.to_dict(u)``.

        Raises
        ------
        InputError
            When ``d`` is not a chairbuild result of a layout this version reads.
        """
        if not isinstance(d, Mapping) or "schema" not in d:
            raise InputError("not a chairbuild result: no 'schema' key")
        schema = str(d["schema"])
        if schema.split(".")[0] != SCHEMA_VERSION.split(".")[0] or "mol_block" not in d:
            raise InputError(
                f"chairbuild result of schema {schema} cannot be read back (schema {SCHEMA_VERSION} "
                "and later minor versions carry the molecule block needed); re-run the analysis"
            )
        try:
            unit = EnergyUnit.parse(d["energy_unit"])
            ens = cls(
                name=str(d["name"]),
                smiles=str(d["smiles"]),
                mol_block=str(d["mol_block"]),
                symbols=tuple(str(x) for x in d["symbols"]),
                ring_atoms=tuple(tuple(int(a) for a in r) for r in d["ring_atoms"]),
                method=str(d["method"]),
                ranking=str(d["ranking"]),
                temperature=float(d["temperature_K"]),
                window=unit.to_kj(float(d["window"])),
                conformers=tuple(ConformerRecord.from_dict(c, unit) for c in d["conformers"]),
                rejected=tuple(ConformerRecord.from_dict(c, unit) for c in d["rejected"]),
                families=tuple(FamilyRecord.from_dict(f, unit) for f in d["families"]),
                notes=tuple(str(n) for n in d["notes"]),
                provenance=dict(d["provenance"]),
                charge=int(d["charge"]),
                multiplicity=int(d["multiplicity"]),
                outside_window=int(d.get("outside_window", 0)),
                ranking_formula=str(d.get("ranking_formula", "")),
                ranking_terms=tuple(tuple(t) for t in d.get("ranking_terms", ())),
                couplings=_couplings_from_dict(d.get("couplings")),
            )
            # the notes written from numbers at output time are not stored as text
            generated = ens.window_note(unit)
            return replace(ens, notes=tuple(n for n in ens.notes if n != generated))
        except (KeyError, TypeError, ValueError, IndexError) as exc:
            raise InputError(f"malformed chairbuild result: {type(exc).__name__}: {exc}") from None

    @classmethod
    def from_json(cls, text: str) -> "Ensemble":
        """Inverse of :meth:`to_json` for one ensemble (see :func:`load_json_all` for a list)."""
        return cls.from_dict(_parse_json(text, "the JSON text"))


def _parse_json(text: str, where: str) -> Any:
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{where} is not valid JSON: {exc}") from None


def _read_json_file(path: Any) -> Any:
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read {str(p)!r}: {exc.strerror or exc}") from None
    return _parse_json(text, repr(str(p)))


def load_json_all(path: Any) -> list[Ensemble]:
    """Read a saved chairbuild JSON file (one result, or a list of them) as a list of ensembles.

    Raises
    ------
    InputError
        Unreadable file, invalid JSON, or not a chairbuild result.
    """
    data = _read_json_file(path)
    items = data if isinstance(data, list) else [data]
    return [Ensemble.from_dict(item) for item in items]


def load_json(path: Any) -> Ensemble:
    """Read a saved chairbuild JSON file holding one result (``chairbuild.load``).

    Raises
    ------
    InputError
        Unreadable file, invalid JSON, not a chairbuild result, or a file with several
        results (read those with :func:`load_json_all`, ``chairbuild.load_all``).
    """
    data = _read_json_file(path)
    if isinstance(data, list):
        if len(data) != 1:
            raise InputError(
                f"{str(path)!r} holds {len(data)} results (one per diastereomer); read them with chairbuild.load_all"
            )
        data = data[0]
    return Ensemble.from_dict(data)



def _couplings_from_dict(d: Mapping[str, Any] | None):
    if d is None:
        return None
    from chairbuild.couplings.records import CouplingTable

    return CouplingTable.from_dict(d)


def _jsonable(value: Any) -> Any:
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, enum.Enum):
        return value.value
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    return value
