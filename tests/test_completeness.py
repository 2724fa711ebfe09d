"""Completeness against RDKit's ETKDG + MMFF (a general-purpose reference library).

For each molecule, 500 ETKDG embeddings (fixed seed) are minimised with RDKit's own MMFF94;
every distinct minimum within 12 kJ/mol of the lowest must also be in chairbuild's ensemble
(same structure by RDKit's symmetry-aware RMSD < 0.3 Å, same relative energy within 0.5 kJ/mol).
"""

from __future__ import annotations

import pytest

from chairbuild.input import read_molecules
from chairbuild.pipeline import analyze

from etkdg_reference import COMPLETENESS_SET, etkdg_reference, missing_minima


@pytest.mark.parametrize("name, smiles", COMPLETENESS_SET, ids=[n for n, _ in COMPLETENESS_SET])
def test_every_etkdg_minimum_within_12_kj_is_found(name, smiles):
    prepared = read_molecules(smiles)[0]
    ensemble = analyze(smiles, threads=1)
    reference = etkdg_reference(prepared.mol, n=500, seed=42, window_kj=12.0, achiral=prepared.achiral)
    missing = missing_minima(ensemble, reference, prepared.achiral)
    if name == "cis-4-(2-hydroxyethoxy)-N-methylcyclohexanemethanamine":
        # its rotor refinement turns different seeds into the same start; each is minimised once
        # (104 repeats skipped when measured, none before the refinement screened its starts)
        assert ensemble.provenance["counts"]["duplicate_refinement_starts"] > 0
    assert not missing, (
        f"{name}: {len(missing)} of {len(reference.minima)} ETKDG minima missing, at "
        + ", ".join(f"{m.energy_kj - reference.minima[0].energy_kj:.2f} kJ/mol" for m in missing)
    )
