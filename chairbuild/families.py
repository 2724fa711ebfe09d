"""Ring-state families: the bookkeeping a chemist does by hand, made exact.

For each ring, every conformer belongs to one *family*: for a chair, the set of ring
substituents that are axial (``ring0:chair[ax:7]``, ``ring0:chair[all-eq]``); for any
other shape, the shape (``ring0:twist-boat``). Rotamers of the same chair fall into the
same family, so a family's population is the sum of its members' Boltzmann populations.

Per ring, with P_f the population of family f and P_ref that of the most populated:

* ΔG_f = −RT ln(P_f / P_ref) (≥ 0) and K_f = P_ref / P_f;
* the additive estimate E_add(f) (ring- and position-specific A-values, anomeric, gauche,
  geminal and syn-diaxial increments, from :mod:`chairbuild.forcefields.additive`) is
  evaluated on the lowest member's geometry. Both the additive and the model value are
  reported relative to the ring's *reference family*: the chair family with the lowest
  complete estimate (one that lacks no term).
* A family whose estimate lacks a term gets no number: its status is "increment unknown"
  and its notes say "increment unknown for X at position Y". Where neither the family nor
  the reference has a single term the status is "no increments known": 0 against 0 is no
  comparison.
* A family is flagged when the two values differ by more than :data:`DISAGREEMENT_KJ`
  (2.0 kJ/mol, about 0.5 kcal/mol, the spread between A-value compilations for one group;
  common practice, no source) plus the estimate's own uncertainty, the sum of the quoted
  ranges of the terms of the family and of the reference.
"""

from __future__ import annotations

from collections import defaultdict
from typing import Callable, Sequence

import numpy as np

from chairbuild.constants import rt_kj
from chairbuild.result import AdditiveStatus, AdditiveTerm, FamilyRecord, Position, RingDescriptor, RingShape, SubstituentDescriptor

__all__ = ["family_keys", "build_families", "DISAGREEMENT_KJ"]

#: Additive-versus-model difference (kJ/mol) above which a family is flagged.
DISAGREEMENT_KJ = 2.0


def family_keys(
    n_rings: int, rings: Sequence[RingDescriptor], substituents: Sequence[SubstituentDescriptor]
) -> tuple[str, ...]:
    """Family key of each ring for one conformer."""
    keys = []
    for r in range(n_rings):
        shape = rings[r].shape
        if shape is RingShape.CHAIR:
            axial = sorted(s.atom for s in substituents if s.ring_index == r and s.position is Position.AXIAL)
            keys.append(f"ring{r}:chair[" + ("ax:" + ",".join(map(str, axial)) if axial else "all-eq") + "]")
        else:
            keys.append(f"ring{r}:{shape.value}")
    return tuple(keys)


def _label(key: str, symbols: Sequence[str], groups: dict[int, str]) -> str:
    body = key.split(":", 1)[1]
    if not body.startswith("chair["):
        return body
    inner = body[len("chair[") : -1]
    if inner == "all-eq":
        return "chair, no axial substituent"
    atoms = [int(a) for a in inner[3:].split(",")]
    named = ", ".join(f"{symbols[a]}{a}({groups.get(a, symbols[a])})" for a in atoms)  # SubstituentDescriptor.label
    return f"chair, axial: {named}"


def build_families(
    conformers: Sequence,
    n_rings: int,
    symbols: Sequence[str],
    temperature: float,
    additive: Callable[[int, np.ndarray], tuple[list[AdditiveTerm], list[str], list[str]]] | None = None,
) -> tuple[FamilyRecord, ...]:
    """Families of every ring from conformer records (with populations already set).

    Parameters
    ----------
    conformers : sequence of ConformerRecord
    n_rings : int
    symbols : sequence of str
    temperature : float
        K.
    additive : callable, optional
        ``additive(ring_index, coords) -> (terms, missing, caveats)``: the increments, the
        messages of the terms the estimate lacks, and the caveats of approximate terms.
    """
    rt = rt_kj(temperature)
    out: list[FamilyRecord] = []
    for r in range(n_rings):
        members: dict[str, list] = defaultdict(list)
        groups: dict[int, str] = {}
        for conf in conformers:
            members[conf.families[r]].append(conf)
            for s in conf.substituents:
                groups[s.atom] = s.group
        pops = {k: sum(c.population for c in v) for k, v in members.items()}
        p_ref = max(pops.values()) if pops else 0.0
        scored: dict[str, tuple[list[AdditiveTerm], list[str], list[str]]] = {}
        if additive is not None:
            for key, confs in members.items():
                if ":chair[" in key:
                    lowest = min(confs, key=lambda c: c.relative_energy)
                    scored[key] = additive(r, lowest.coords)
        totals = {k: float(sum(t.value for t in v[0])) for k, v in scored.items()}
        spread = {k: float(sum(abs(t.uncertainty) for t in v[0])) for k, v in scored.items()}
        complete = [k for k, v in scored.items() if not v[1]]
        ref_key = min(complete, key=lambda k: (totals[k], k)) if complete else None
        for key in sorted(members, key=lambda k: -pops[k]):
            p = pops[key]
            delta_g = -rt * np.log(p / p_ref) + 0.0 if p > 0 else np.inf
            k_eq = p_ref / p if p > 0 else np.inf
            fields = _additive_fields(key, p, pops, scored, totals, spread, ref_key, rt)
            out.append(
                FamilyRecord(
                    key=key,
                    ring_index=r,
                    label=_label(key, symbols, groups),
                    members=tuple(c.id for c in members[key]),
                    population=float(p),
                    delta_g=float(delta_g),
                    equilibrium_constant=float(k_eq),
                    **fields,
                )
            )
    return tuple(out)


def _additive_fields(key, p, pops, scored, totals, spread, ref_key, rt) -> dict:
    """The additive fields of one family's record (see the module text)."""
    if key not in scored:
        return {}
    terms, missing, caveats = scored[key]
    fields: dict = {
        "additive_terms": tuple(terms),
        "additive_notes": tuple(missing),
        "additive_caveats": tuple(caveats),
    }
    if ref_key is not None:
        fields["model_energy"] = float(-rt * np.log(p / pops[ref_key]) + 0.0 if p > 0 else np.inf)
    no_terms = not terms and (ref_key is None or not scored[ref_key][0])
    if key != ref_key and no_terms:
        fields["additive_status"] = AdditiveStatus.NO_INCREMENTS
    elif missing or ref_key is None:
        fields["additive_status"] = AdditiveStatus.UNKNOWN
    elif key == ref_key:
        fields.update(additive_status=AdditiveStatus.REFERENCE, additive_energy=0.0, additive_uncertainty=0.0)
    else:
        additive_energy = totals[key] - totals[ref_key]
        uncertainty = spread[key] + spread[ref_key]
        fields.update(
            additive_status=AdditiveStatus.ESTIMATED,
            additive_energy=additive_energy,
            additive_uncertainty=uncertainty,
            disagreement=bool(abs(fields["model_energy"] - additive_energy) > DISAGREEMENT_KJ + uncertainty),
        )
    return fields
