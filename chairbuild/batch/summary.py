"""Summary figures of one ensemble, as stored per row and exported in the batch tables.

They only read the :class:`~chairbuild.result.Ensemble`. Energies are kJ/mol here;
the exporters convert them to the unit asked for.

Per ring k the summary keeps: the population of all chair families together and of
everything else (twist-boats and other shapes); the most populated chair family (label,
population) and the second one (label, population, its ΔG relative to the first, the
additive estimate of the same difference); and whether any family of the ring is
flagged as disagreeing with the additive estimate, or has a partial one.
"""

from __future__ import annotations

from typing import Any

__all__ = ["summarise", "family_rows", "SUMMARY_VERSION"]

#: Layout version of the stored summary (bump when its keys change).
SUMMARY_VERSION = 1


def _finite(value):
    import math

    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _ring_summary(ens, ring: int) -> dict[str, Any]:
    fams = [f for f in ens.families if f.ring_index == ring]
    chairs = sorted((f for f in fams if f.key.split(":", 1)[1].startswith("chair")), key=lambda f: (-f.population, f.key))
    chair_pop = sum(f.population for f in chairs)
    out: dict[str, Any] = {
        "atoms": "-".join(str(a) for a in ens.ring_atoms[ring]),
        "chair_population": chair_pop,
        "other_population": sum(f.population for f in fams) - chair_pop,
        "major_family": chairs[0].label if chairs else None,
        "major_population": chairs[0].population if chairs else None,
        "second_family": None,
        "second_population": None,
        "second_delta_g": None,
        "second_additive": None,
        "additive_flag": any(f.disagreement for f in fams),
        "additive_partial": any(bool(f.additive_notes) for f in fams),
    }
    if len(chairs) > 1:
        first, second = chairs[0], chairs[1]
        out["second_family"] = second.label
        out["second_population"] = second.population
        out["second_delta_g"] = _finite(second.delta_g - first.delta_g)
        if first.additive_energy is not None and second.additive_energy is not None:
            out["second_additive"] = _finite(second.additive_energy - first.additive_energy)
    return out


def summarise(ens) -> dict[str, Any]:
    """The summary figures of one ensemble (JSON-ready; energies in kJ/mol)."""
    best = ens.conformers[0] if ens.conformers else None
    return {
        "version": SUMMARY_VERSION,
        "smiles": ens.smiles,
        "charge": ens.charge,
        "multiplicity": ens.multiplicity,
        "method": ens.method,
        "n_rings": len(ens.ring_atoms),
        "n_conformers": len(ens.conformers),
        "n_rejected": len(ens.rejected),
        "global_min_shape": "/".join(r.shape.value for r in best.rings) if best else None,
        "global_min_families": " ".join(best.families) if best else None,
        "global_min_population": best.population if best else None,
        "rings": [_ring_summary(ens, k) for k in range(len(ens.ring_atoms))],
        "families": family_rows(ens),
        "notes": len(ens.notes),
    }


def family_rows(ens) -> list[dict[str, Any]]:
    """One dict per ring-state family (the long table), energies in kJ/mol."""
    rows = []
    for f in ens.families:
        rows.append(
            {
                "ring": f.ring_index,
                "family": f.key,
                "label": f.label,
                "shape": "chair" if f.key.split(":", 1)[1].startswith("chair") else f.key.split(":", 1)[1],
                "n_members": len(f.members),
                "population": f.population,
                "delta_g": _finite(f.delta_g),
                "equilibrium_constant": _finite(f.equilibrium_constant),
                "additive_energy": _finite(f.additive_energy),
                "model_energy": _finite(f.model_energy),
                "disagreement": bool(f.disagreement),
                "additive_partial": bool(f.additive_notes),
            }
        )
    return rows
