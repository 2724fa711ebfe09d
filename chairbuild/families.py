"""Ring-state families: the bookkeeping a chemist does by hand, made exact.

For each ring, every conformer belongs to one *family*: for a chair, the set of ring
substituents that are axial (``ring0:chair[ax:7]``, ``ring0:chair[all-eq]``); for any
other shape, the shape (``ring0:twist-boat``). Rotamers of the same chair fall into the
same family, so a family's population is the sum of its members' Boltzmann populations.

Per ring, with P_f the population of family f and P_ref that of the most populated:

* ΔG_f = −RT ln(P_f / P_ref) (≥ 0) and K_f = P_ref / P_f;
* the additive estimate E_add(f) (A-values, gauche and syn-diaxial increments, from
  :mod:`chairbuild.forcefields.additive`) is evaluated on the lowest member's geometry; both the
  additive and the model value are reported relative to the chair family with the
  lowest additive estimate, and a family is flagged when they differ by more than
  :data:`DISAGREEMENT_KJ` (2.0 kJ/mol, about 0.5 kcal/mol, the spread between A-value
  compilations for one group; common practice, no source).
"""

from __future__ import annotations

from collections import defaultdict
from typing import Callable, Sequence

import numpy as np

from chairbuild.constants import rt_kj
from chairbuild.result import AdditiveTerm, FamilyRecord, Position, RingDescriptor, RingShape, SubstituentDescriptor

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
    additive: Callable[[int, np.ndarray], tuple[list[AdditiveTerm], list[str]]] | None = None,
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
        ``additive(ring_index, coords) -> (terms, unscored_reasons)``.
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
        add_terms: dict[str, tuple[list[AdditiveTerm], list[str]]] = {}
        if additive is not None:
            for key, confs in members.items():
                if ":chair[" in key:
                    lowest = min(confs, key=lambda c: c.relative_energy)
                    add_terms[key] = additive(r, lowest.coords)
        add_totals = {k: sum(t.value for t in v[0]) for k, v in add_terms.items()}
        ref_key = min(add_totals, key=add_totals.get) if add_totals else None
        for key in sorted(members, key=lambda k: -pops[k]):
            p = pops[key]
            delta_g = -rt * np.log(p / p_ref) + 0.0 if p > 0 else np.inf
            k_eq = p_ref / p if p > 0 else np.inf
            additive_energy = model_energy = None
            terms: tuple[AdditiveTerm, ...] = ()
            flag = False
            notes: tuple[str, ...] = ()
            label = _label(key, symbols, groups)
            if key in add_totals and ref_key is not None:
                terms = tuple(add_terms[key][0])
                additive_energy = add_totals[key] - add_totals[ref_key]
                p_add_ref = pops[ref_key]
                model_energy = -rt * np.log(p / p_add_ref) + 0.0 if p > 0 else np.inf
                flag = bool(abs(model_energy - additive_energy) > DISAGREEMENT_KJ)
                notes = tuple(add_terms[key][1])
            out.append(
                FamilyRecord(
                    key=key,
                    ring_index=r,
                    label=label,
                    members=tuple(c.id for c in members[key]),
                    population=float(p),
                    delta_g=float(delta_g),
                    equilibrium_constant=float(k_eq),
                    additive_energy=additive_energy,
                    additive_terms=terms,
                    model_energy=None if model_energy is None else float(model_energy),
                    disagreement=flag,
                    additive_notes=notes,
                )
            )
    return tuple(out)
