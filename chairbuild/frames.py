"""The result in the ecosystem's terms: RDKit molecules, pandas DataFrames, notebook HTML.

One table of per-conformer properties, :func:`conformer_properties`, names every value
the same way wherever it goes: RDKit conformer properties (:func:`ensemble_to_rdkit`),
SD file tags (:mod:`chairbuild.output`), DataFrame columns (:func:`conformers_frame`).
Names carry their unit (``relative_energy_kJ_mol``, ``ring0_Q_A``) and contain no spaces
or parentheses. Atom numbers are 0-based, as in RDKit and the JSON.

pandas is imported inside the functions that need it.
"""

from __future__ import annotations

import html
import re
from typing import Any

from chairbuild.result import THERMO_ENERGY_KEYS, ConformerRecord, EnergyUnit, Ensemble

__all__ = [
    "unit_tag",
    "level_tag",
    "conformer_properties",
    "molecule_properties",
    "ensemble_to_rdkit",
    "conformers_frame",
    "families_frame",
    "ensemble_html",
]


def _unit(unit: EnergyUnit | str) -> EnergyUnit:
    return unit if isinstance(unit, EnergyUnit) else EnergyUnit.parse(unit)


def unit_tag(unit: EnergyUnit) -> str:
    """``kJ_mol`` or ``kcal_mol``: the unit as it ends a property name."""
    return unit.value.replace("/", "_")


def level_tag(level: str) -> str:
    """A level name as part of a property name: ``GFN2-xTB/ALPB(water)//MMFF94`` → ``GFN2-xTB_ALPB_water_MMFF94``."""
    return re.sub(r"_+", "_", re.sub(r"[^A-Za-z0-9+-]", "_", level)).strip("_")


def charge_text(charge: int) -> str:
    """A total charge as people write it: ``0``, ``+1``, ``-2``."""
    return f"{charge:+d}" if charge else "0"


def substituents_text(ens: Ensemble, rec: ConformerRecord) -> str:
    """``C0(C) on C1: equatorial; ...`` (0-based atom numbers)."""
    return "; ".join(
        f"{s.label(ens.symbols)} on {ens.symbols[s.ring_atom]}{s.ring_atom}: {s.position.value}" for s in rec.substituents
    )


def conformer_properties(ens: Ensemble, rec: ConformerRecord, unit: EnergyUnit | str = EnergyUnit.KJ) -> dict[str, Any]:
    """Every per-conformer value under its property name (floats, ints, bools and strings).

    Energies are in ``unit`` (the name says which); Q in Å, angles in degrees, the RMS
    gradient in kJ mol⁻¹ Å⁻¹ whatever ``unit``.
    """
    unit = _unit(unit)
    u = unit_tag(unit)
    props: dict[str, Any] = {
        "conformer_id": rec.id,
        "status": rec.status.value,
        f"relative_energy_{u}": unit.from_kj(rec.relative_energy),
        "population": rec.population,
        "degeneracy": rec.degeneracy,
    }
    for level, value in rec.energies.items():
        props[f"energy_{level_tag(level)}_{u}"] = unit.from_kj(value)
    for key, value in rec.thermo.items():
        if key in THERMO_ENERGY_KEYS:
            # the absolute energy of the ranking level is "energy" in the JSON
            props[f"{'ranking_energy' if key == 'energy' else key}_{u}"] = unit.from_kj(value)
        elif key in ("symmetry_number", "imaginary_modes"):
            props[key] = int(round(value))
        else:
            props[key] = float(value)
    for k, ring in enumerate(rec.rings):
        props[f"ring{k}_shape"] = ring.shape.value
        props[f"ring{k}_Q_A"] = ring.q_total
        props[f"ring{k}_theta_deg"] = ring.theta
        props[f"ring{k}_phi_deg"] = ring.phi
        props[f"ring{k}_torsions_deg"] = " ".join(f"{t:.1f}" for t in ring.torsions)
    for s in rec.substituents:
        props[f"position_{ens.symbols[s.atom]}{s.atom}"] = s.position.value
    props["substituents"] = substituents_text(ens, rec)
    props["families"] = " ".join(rec.families)
    props["converged"] = bool(rec.converged)
    props["rms_gradient_kJ_mol_A"] = rec.rms_gradient
    props["start_state"] = rec.start_state
    if rec.message:
        props["message"] = rec.message
    return props


def molecule_properties(ens: Ensemble) -> dict[str, Any]:
    """Values that hold for the whole ensemble (name, level, charge, multiplicity, ...)."""
    return {
        "chairbuild_name": ens.name,
        "smiles": ens.smiles,
        "ranking_method": ens.method,
        "ranking": ens.ranking,
        "temperature_K": float(ens.temperature),
        "total_charge": int(ens.charge),
        "multiplicity": int(ens.multiplicity),
    }


def _set_prop(obj, key: str, value: Any) -> None:
    if isinstance(value, bool):
        obj.SetBoolProp(key, value)
    elif isinstance(value, int):
        obj.SetIntProp(key, value)
    elif isinstance(value, float):
        obj.SetDoubleProp(key, value)
    else:
        obj.SetProp(key, str(value))


def ensemble_to_rdkit(ens: Ensemble, include_rejected: bool = False, unit: EnergyUnit | str = EnergyUnit.KJ):
    """One RDKit molecule with every conformer, its properties, and the ensemble's.

    Conformer ``k`` has id ``rec.id`` (the rank; rejected records have negative ids) and
    the properties of :func:`conformer_properties` (``conf.GetDoubleProp("population")``);
    the molecule has ``_Name`` and :func:`molecule_properties`.
    """
    from rdkit import Chem
    from rdkit.Geometry import Point3D

    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    mol.RemoveAllConformers()
    mol.SetProp("_Name", ens.name)
    for key, value in molecule_properties(ens).items():
        _set_prop(mol, key, value)
    records = ens.conformers + (ens.rejected if include_rejected else ())
    for rec in records:
        conf = Chem.Conformer(mol.GetNumAtoms())
        for i, (x, y, z) in enumerate(rec.coords):
            conf.SetAtomPosition(i, Point3D(float(x), float(y), float(z)))
        conf.SetId(rec.id)
        conf.Set3D(True)
        for key, value in conformer_properties(ens, rec, unit).items():
            _set_prop(conf, key, value)
        mol.AddConformer(conf, assignId=False)
    return mol


def conformers_frame(ens: Ensemble, unit: EnergyUnit | str = EnergyUnit.KJ, include_rejected: bool = False):
    """One row per conformer, columns named as in :func:`conformer_properties`.

    Index ``conformer_id``; numbers as float64/int64, flags as bool, labels (status,
    shapes, positions) as pandas categoricals; ``name``, ``total_charge`` and
    ``multiplicity`` repeat the ensemble's values so that frames of several molecules
    concatenate.
    """
    import pandas as pd

    records = ens.conformers + (ens.rejected if include_rejected else ())
    rows = [conformer_properties(ens, rec, unit) for rec in records]
    frame = pd.DataFrame.from_records(rows)
    if frame.empty:
        frame = pd.DataFrame(columns=["conformer_id"])
    frame.insert(1, "name", ens.name)
    frame.insert(2, "total_charge", int(ens.charge))
    frame.insert(3, "multiplicity", int(ens.multiplicity))
    for col in frame.columns:
        if col == "status" or col.endswith("_shape") or col.startswith("position_"):
            frame[col] = frame[col].astype("category")
        elif frame[col].dtype == object:
            frame[col] = frame[col].astype("string")
    return frame.set_index("conformer_id")


def families_frame(ens: Ensemble, unit: EnergyUnit | str = EnergyUnit.KJ):
    """One row per ring-state family (the family table of the terminal output), index ``key``.

    Energies in ``unit``: ``delta_g`` (G of the family minus G of the ring's most
    populated family, ≥ 0), ``additive_energy`` and ``model_energy`` (relative to the
    ring's reference family, the chair family with the lowest complete additive estimate;
    NaN where there is none), ``additive_uncertainty`` (sum of the quoted ranges of the
    terms), ``K`` = P(most populated)/P(family) = exp(ΔG/RT) ≥ 1. ``additive_status``
    says what the additive column holds (:class:`~chairbuild.result.AdditiveStatus`:
    ``estimated``, ``reference``, ``increment unknown``, ``no increments known``, ``none``).
    """
    import numpy as np
    import pandas as pd

    unit = _unit(unit)
    u = unit_tag(unit)

    def energy(v: float | None) -> float:
        return np.nan if v is None else unit.from_kj(v)

    rows = [
        {
            "key": f.key,
            "ring_index": f.ring_index,
            "label": f.label,
            "population": f.population,
            f"delta_g_{u}": energy(f.delta_g),
            "K": f.equilibrium_constant,
            f"additive_energy_{u}": energy(f.additive_energy),
            f"model_energy_{u}": energy(f.model_energy),
            f"additive_uncertainty_{u}": energy(f.additive_uncertainty),
            "additive_status": f.additive_status.value,
            "disagreement": bool(f.disagreement),
            "additive_partial": bool(f.additive_notes),
            "n_members": len(f.members),
            "members": " ".join(map(str, f.members)),
        }
        for f in ens.families
    ]
    frame = pd.DataFrame.from_records(rows, columns=None if rows else ["key"])
    for col in ("label", "members", "additive_status"):
        if col in frame.columns:
            frame[col] = frame[col].astype("string")
    return frame.set_index("key")


def ensemble_html(ens: Ensemble, max_rows: int = 10) -> str:
    """A short HTML summary (header line and the lowest conformers) for notebooks."""
    e = html.escape
    delta = "ΔG" if ens.ranking == "free_energy" else "ΔE"
    head = (
        f"<p><b>{e(ens.name)}</b> <code>{e(ens.smiles)}</code><br>"
        f"{len(ens.conformers)} conformer(s), {e(ens.method)}, T = {ens.temperature:.2f} K, "
        f"charge {charge_text(ens.charge)}, multiplicity {ens.multiplicity}</p>"
    )
    ring_heads = "".join(f"<th>ring {k}</th>" for k in range(len(ens.ring_atoms)))
    rows = []
    for rec in ens.conformers[:max_rows]:
        shapes = "".join(f"<td>{e(r.shape.value)}</td>" for r in rec.rings)
        subs = ", ".join(f"{s.label(ens.symbols)} {s.position.value}" for s in rec.substituents)
        rows.append(
            f"<tr><td>{rec.id}</td><td>{rec.relative_energy:.2f}</td><td>{100 * rec.population:.1f}</td>"
            f"{shapes}<td>{e(subs)}</td></tr>"
        )
    more = f"<p>… {len(ens.conformers) - max_rows} more</p>" if len(ens.conformers) > max_rows else ""
    return (
        head
        + f"<table><tr><th>id</th><th>{delta} (kJ/mol)</th><th>pop. %</th>{ring_heads}"
        + "<th>substituents (0-based atoms)</th></tr>"
        + "".join(rows)
        + "</table>"
        + more
    )
