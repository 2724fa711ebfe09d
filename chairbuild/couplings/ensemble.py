"""The coupling stage: 3J(H,H) of every conformer, ensemble averages, family limits, sensitivities.

For each vicinal pair of proton groups (:mod:`chairbuild.couplings.protons`) and each
conformer record i, J_i is computed on the record's final geometry (a methyl group: the
mean over its three protons). Then, with the record populations p_i (Boltzmann weights at
the ranking level and temperature of the analysis, degeneracy included):

* ⟨J⟩ = Σ_i p_i J_i;
* the limiting coupling of family f (per ring, :mod:`chairbuild.families`):
  J_f = Σ_{i∈f} p_i J_i / Σ_{i∈f} p_i, so that ⟨J⟩ = Σ_f P_f J_f exactly;
* the sensitivity d⟨J⟩/dG_f = −(P_f / RT)(J_f − ⟨J⟩), Hz per kJ/mol, when the free
  energy of every member of f rises by the same amount (exact derivative of the
  Boltzmann average). A coupling with a large |d⟨J⟩/dG| for the family in question is
  the one that decides between the chairs.

A degenerate record (a chiral conformer of an achiral molecule counts twice) has
couplings equal to its mirror image's, so p_i J_i is exact for it. Conformers that the
de-duplication merged because a permutation of symmetry-equivalent atoms maps one onto the
other (the two chairs of cyclohexane itself) are stored once, in one atom labelling; the
atom-specific ⟨J⟩ then refers to that labelling, and the couplings of symmetry-equivalent
pairs should be averaged by the reader.

Cost: a few NumPy operations per pair and conformer (about 1 ms for a glucoside's
ensemble), so the stage runs in every analysis.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from chairbuild.constants import rt_kj
from chairbuild.couplings.records import CouplingRecord, CouplingTable

__all__ = ["compute_couplings", "conformer_couplings", "couplings_vs_temperature", "dominant_chairs", "geometry_couplings"]


def _dihedrals(p0: np.ndarray, p1: np.ndarray, p2: np.ndarray, p3: np.ndarray) -> np.ndarray:
    """Dihedral angles (degrees) of stacked points, shape (n, 3) each."""
    b0 = p0 - p1
    b1 = p2 - p1
    b2 = p3 - p2
    b1n = b1 / np.linalg.norm(b1, axis=-1, keepdims=True)
    v = b0 - np.sum(b0 * b1n, axis=-1, keepdims=True) * b1n
    w = b2 - np.sum(b2 * b1n, axis=-1, keepdims=True) * b1n
    x = np.sum(v * w, axis=-1)
    y = np.sum(np.cross(b1n, v) * w, axis=-1)
    return np.degrees(np.arctan2(y, x))


def conformer_couplings(fragment, coords: np.ndarray) -> np.ndarray:
    """3J (Hz) of one fragment in each of a stack of conformers, shape (n_conf,).

    Parameters
    ----------
    fragment : chairbuild.couplings.protons.Fragment
    coords : numpy.ndarray
        (n_conf, n_atoms, 3), Å.
    """
    from chairbuild.couplings.karplus import garbisch_coefficients, hla_parameters

    xyz = np.asarray(coords, dtype=float)
    ga, gb = fragment.group_a, fragment.group_b
    ca, cb = ga.carbon, gb.carbon
    total = np.zeros(len(xyz))
    n = 0
    for ha in ga.atoms:
        for hb in gb.atoms:
            phi = _dihedrals(xyz[:, ha], xyz[:, ca], xyz[:, cb], xyz[:, hb])
            rad = np.radians(phi)
            c2 = np.cos(rad) ** 2
            if fragment.equation == "Garbisch":
                low, high, s2 = garbisch_coefficients()
                j = np.where(np.abs(phi) <= 90.0, low, high) * c2 + s2 * (1.0 - c2)
            else:
                p1, p2, p3, p4, p5, p6, _ = hla_parameters()[fragment.equation.split("-", 1)[1]].p
                j = p1 * c2 + p2 * np.cos(rad) + p3
                for s in fragment.substituents:
                    h_i, c_i, c_j, h_j = (ha, ca, cb, hb) if s.carrier == ca else (hb, cb, ca, ha)
                    delta = _dihedrals(xyz[:, s.atom], xyz[:, c_i], xyz[:, c_j], xyz[:, h_j]) - _dihedrals(
                        xyz[:, h_i], xyz[:, c_i], xyz[:, c_j], xyz[:, h_j]
                    )
                    delta = (delta + 180.0) % 360.0 - 180.0
                    xi = np.where(delta > 0.0, -1.0, 1.0)
                    j = j + s.delta_chi * (p4 + p5 * np.cos(xi * rad + np.radians(p6 * abs(s.delta_chi))) ** 2)
            total += j
            n += 1
    return total / n


def dominant_chairs(records: Sequence, families: Sequence, n_rings: int) -> dict[int, np.ndarray]:
    """Ring index → coordinates of the lowest member of the ring's most populated chair family."""
    by_id = {r.id: r for r in records}
    out: dict[int, np.ndarray] = {}
    for r in range(n_rings):
        chairs = [f for f in families if f.ring_index == r and ":chair[" in f.key and f.members]
        if not chairs:
            continue
        best = max(chairs, key=lambda f: f.population)
        lowest = min((by_id[m] for m in best.members if m in by_id), key=lambda c: c.relative_energy)
        out[r] = np.asarray(lowest.coords, dtype=float)
    return out


def _limits(values: np.ndarray, pops: np.ndarray, rel: np.ndarray, index_of: dict[int, int], fams: Sequence, rt: float, average: float):
    limits: dict[str, float] = {}
    sens: dict[str, float] = {}
    for f in fams:
        idx = [index_of[m] for m in f.members if m in index_of]
        if not idx:
            continue
        w = pops[idx]
        if w.sum() > 0.0:
            jf = float(np.dot(w, values[idx]) / w.sum())
        else:
            jf = float(values[idx][int(np.argmin(rel[idx]))])
        limits[f.key] = jf
        sens[f.key] = float(-(w.sum() / rt) * (jf - average))
    return limits, sens


def compute_couplings(mol, records: Sequence, families: Sequence, ring_atoms: Sequence[Sequence[int]], temperature: float) -> CouplingTable:
    """The coupling stage of :func:`chairbuild.pipeline.analyze` (module doc).

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        With explicit hydrogens, in the atom order of the records.
    records : sequence of ConformerRecord
        The kept conformers, populations set.
    families : sequence of FamilyRecord
    ring_atoms : sequence of sequence of int
    temperature : float
        K (the analysis temperature; used for the sensitivities).

    Returns
    -------
    CouplingTable
    """
    from chairbuild.couplings.protons import fragments, proton_groups

    if not records:
        return CouplingTable(notes=("no conformer, no coupling",))
    coords = np.array([r.coords for r in records], dtype=float)
    chairs = dominant_chairs(records, families, len(ring_atoms))
    groups = proton_groups(mol, coords[0], ring_atoms, chairs)
    frags, notes = fragments(mol, groups, ring_atoms)
    used = {g.label for f in frags for g in (f.group_a, f.group_b)}
    pops = np.array([r.population for r in records], dtype=float)
    rel = np.array([r.relative_energy for r in records], dtype=float)
    index_of = {r.id: k for k, r in enumerate(records)}
    rt = rt_kj(temperature)
    pairs = []
    for frag in frags:
        values = conformer_couplings(frag, coords)
        average = float(np.dot(pops, values) / pops.sum())
        fams = [f for f in families if f.ring_index == frag.ring_index] if frag.ring_index is not None else []
        limits, sens = _limits(values, pops, rel, index_of, fams, rt, average)
        pairs.append(
            CouplingRecord(
                protons=(frag.group_a.label, frag.group_b.label),
                hydrogens=(frag.group_a.atoms, frag.group_b.atoms),
                carbons=(frag.group_a.carbon, frag.group_b.carbon),
                equation=frag.equation,
                ring_index=frag.ring_index,
                values=tuple(float(v) for v in values),
                average=average,
                family_limits=limits,
                sensitivity=sens,
            )
        )
    return CouplingTable(protons=tuple(g for g in groups if g.label in used), pairs=tuple(pairs), notes=tuple(notes))


def geometry_couplings(mol, coords: np.ndarray, ring_atoms: Sequence[Sequence[int]] = ()) -> dict[tuple[str, str], float]:
    """3J (Hz) of every vicinal pair in one geometry, keyed by the two proton labels.

    A ring of ``ring_atoms`` that is a chair in ``coords`` labels its CH2 protons ax/eq.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        With explicit hydrogens.
    coords : numpy.ndarray
        (n_atoms, 3), Å.
    ring_atoms : sequence of sequence of int
    """
    from chairbuild.couplings.protons import fragments, proton_groups
    from chairbuild.describe import describe_ring
    from chairbuild.result import RingShape

    xyz = np.asarray(coords, dtype=float)
    chairs = {r: xyz for r, atoms in enumerate(ring_atoms) if describe_ring(xyz, atoms).shape is RingShape.CHAIR}
    groups = proton_groups(mol, xyz, ring_atoms, chairs)
    frags, _ = fragments(mol, groups, ring_atoms)
    return {(f.group_a.label, f.group_b.label): float(conformer_couplings(f, xyz[None])[0]) for f in frags}


def couplings_vs_temperature(result, temperatures: Sequence[float] | np.ndarray) -> dict[str, np.ndarray]:
    """⟨J⟩ of every pair at each temperature, re-weighting the fixed energies of ``result``.

    As :func:`chairbuild.plots.family_populations_vs_temperature`: only the Boltzmann
    factor changes with T; geometries, energies and entropy terms stay those of the analysis.

    Returns
    -------
    dict
        Pair name (``"H2–H11"``) → ⟨J⟩ (Hz), one per temperature.
    """
    from chairbuild.errors import InputError, OptionError
    from chairbuild.thermo import boltzmann_populations

    table = getattr(result, "couplings", None)
    if table is None or not table.pairs:
        raise InputError(f"{result.name!r} has no couplings")
    temps = np.asarray(temperatures, dtype=float).ravel()
    if temps.size == 0 or not np.all(np.isfinite(temps)) or np.any(temps <= 0):
        raise OptionError("temperatures must be positive numbers of kelvin")
    energies = np.array([rec.relative_energy for rec in result.conformers])
    degeneracies = np.array([rec.degeneracy for rec in result.conformers], dtype=float)
    pops = np.array([boltzmann_populations(energies, t, degeneracies) for t in temps])
    return {p.name: pops @ np.asarray(p.values) for p in table.pairs}
