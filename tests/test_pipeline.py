"""The main job end to end: build, minimise (MMFF94 in OpenMM), describe, weight."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from rdkit import Chem

from chairbuild.build import stereo_signature
from chairbuild.constants import rt_kj
from chairbuild.errors import OptionError
from chairbuild.pipeline import analyze, analyze_all
from chairbuild.result import Position, RingShape


@pytest.fixture(scope="module")
def methylcyclohexane():
    return analyze("CC1CCCCC1")


@pytest.fixture(scope="module")
def cyclohexane():
    return analyze("C1CCCCC1")


def _chairs(ens):
    return [c for c in ens.conformers if c.rings[0].shape is RingShape.CHAIR]


def test_chair_geometry_matches_electron_diffraction(cyclohexane):
    # Gas electron diffraction: ∠CCC 111.4°, ring torsion 54.9° (Bastiansen et al., J. Mol. Struct. 1973,
    # 18, 163; flag M, from memory). The MMFF94 chair must be within 1.5° of each.
    chair = _chairs(cyclohexane)[0]
    torsions = np.abs(chair.rings[0].torsions)
    assert torsions.mean() == pytest.approx(54.9, abs=1.5)
    xyz = chair.coords
    ring = chair.rings[0].atoms
    angles = []
    for k in range(6):
        a, b, c = xyz[ring[k - 1]], xyz[ring[k]], xyz[ring[(k + 1) % 6]]
        u, v = a - b, c - b
        angles.append(np.degrees(np.arccos(u @ v / np.linalg.norm(u) / np.linalg.norm(v))))
    assert np.mean(angles) == pytest.approx(111.4, abs=1.5)
    # Cremer–Pople chair: θ near 0° or 180° (Cremer & Pople, J. Am. Chem. Soc. 1975, 97, 1354)
    theta = chair.rings[0].theta
    assert min(theta, 180 - theta) < 5.0


def test_cyclohexane_has_one_chair_and_the_twist_boat(cyclohexane):
    shapes = [c.rings[0].shape for c in cyclohexane.conformers]
    assert shapes.count(RingShape.CHAIR) == 1
    assert RingShape.TWIST_BOAT in shapes
    tb = next(c for c in cyclohexane.conformers if c.rings[0].shape is RingShape.TWIST_BOAT)
    assert tb.degeneracy == 2  # the D2 twist-boat is chiral: its mirror image is the other half


def test_monosubstituted_ring_has_both_chairs(methylcyclohexane):
    chairs = _chairs(methylcyclohexane)
    positions = {c.substituents[0].position for c in chairs}
    assert positions == {Position.AXIAL, Position.EQUATORIAL}
    keys = {f.key for f in methylcyclohexane.families}
    assert "ring0:chair[all-eq]" in keys and "ring0:chair[ax:0]" in keys


def test_populations_and_families_follow_boltzmann(methylcyclohexane):
    ens = methylcyclohexane
    pops = np.array([c.population for c in ens.conformers])
    assert pops.sum() == pytest.approx(1.0, abs=1e-9)
    # hand calculation: p_i = g_i exp(-E_i/RT) / sum_j g_j exp(-E_j/RT), R from CODATA 2018
    rt = rt_kj(298.15)
    w = np.array([c.degeneracy * np.exp(-c.relative_energy / rt) for c in ens.conformers])
    assert np.allclose(pops, w / w.sum(), atol=1e-9)
    eq, ax = ens.family("ring0:chair[all-eq]"), ens.family("ring0:chair[ax:0]")
    assert ax.equilibrium_constant == pytest.approx(eq.population / ax.population)
    assert ax.delta_g == pytest.approx(rt * np.log(ax.equilibrium_constant))
    assert eq.delta_g == 0.0


@pytest.mark.parametrize(
    "smiles",
    [
        "C[C@H]1CC[C@@H](C)CC1",  # cis-1,4
        "C[C@H]1CC[C@H](C)CC1",  # trans-1,4
        "C[C@@H]1CCCC[C@H]1O",  # two CIP centres
        "CC(C)[C@@H]1CC[C@@H](C)C[C@H]1O",  # menthol
        "C[C@@H]1CCCCO1",  # enantiomer of 2-methyltetrahydropyran
    ],
)
def test_stereochemistry_survives_every_step(smiles):
    ens = analyze(smiles)
    reference = Chem.MolToSmiles(Chem.MolFromSmiles(smiles))
    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    assert ens.smiles == reference
    for conf in ens.conformers:
        assert stereo_signature(mol, conf.coords) == reference


def test_trans_decalin_cannot_flip_and_cis_decalin_can():
    trans = analyze("C1CC[C@@H]2CCCC[C@H]2C1")
    cis = analyze("C1CC[C@H]2CCCC[C@H]2C1")
    trans_cc = [c for c in trans.conformers if all(r.shape is RingShape.CHAIR for r in c.rings)]
    cis_cc = [c for c in cis.conformers if all(r.shape is RingShape.CHAIR for r in c.rings)]
    assert len(trans_cc) == 1 and trans_cc[0].degeneracy == 1
    # cis-decalin's two chair-chair forms are mirror images: one record standing for both
    assert len(cis_cc) == 1 and cis_cc[0].degeneracy == 2
    # MMFF puts cis-decalin above trans-decalin; the two are isomers, so compare the ring-fusion
    # bonds instead: in trans both fusion bonds are equatorial to the other ring
    fusion = [s.position for s in trans_cc[0].substituents if s.atom in trans.ring_atoms[0] + trans.ring_atoms[1]]
    assert set(fusion) == {Position.EQUATORIAL}


def test_invertible_nitrogen_takes_both_positions():
    ens = analyze("CN1CCCCC1")
    chairs = _chairs(ens)
    assert {c.substituents[0].position for c in chairs} == {Position.AXIAL, Position.EQUATORIAL}


def test_json_contract(methylcyclohexane):
    data = json.loads(methylcyclohexane.to_json())
    for key in ("method", "temperature_K", "energy_unit", "conformers"):
        assert key in data
    conf = data["conformers"][0]
    for key in ("id", "relative_energy", "population", "rings", "substituents", "energy", "enthalpy", "free_energy"):
        assert key in conf
    for key in ("atoms", "shape", "Q", "theta", "phi", "torsions"):
        assert key in conf["rings"][0]
    for key in ("atom", "ring_atom", "position"):
        assert key in conf["substituents"][0]
    # 0-based input order: the methyl carbon of CC1CCCCC1 is atom 0, bonded to ring atom 1
    assert conf["substituents"][0]["atom"] == 0 and conf["substituents"][0]["ring_atom"] == 1
    symbols = [row[0] for row in conf["coordinates"]]
    assert symbols[:7] == ["C"] * 7 and set(symbols[7:]) == {"H"}
    kcal = json.loads(methylcyclohexane.to_json("kcal"))
    assert kcal["energy_unit"] == "kcal/mol"
    assert kcal["conformers"][1]["relative_energy"] == pytest.approx(
        data["conformers"][1]["relative_energy"] / 4.184, abs=1e-3
    )


def test_window_and_unknown_options():
    narrow = analyze("CC1CCCCC1", window=10.0)
    assert all(c.relative_energy <= 10.0 for c in narrow.conformers)
    assert narrow.outside_window > 0 and any("10 kJ/mol window" in n for n in narrow.notes_in("kJ/mol"))
    with pytest.raises(OptionError, match="unknown option"):
        analyze("CC1CCCCC1", colour="red")
    with pytest.raises(OptionError, match="temperature"):
        analyze("CC1CCCCC1", temperature=-5)


def test_enumerate_stereo_returns_each_diastereomer():
    ensembles = analyze_all("CC1CCC(C)CC1", enumerate_stereo=True)
    assert len(ensembles) == 2
    assert len({e.smiles for e in ensembles}) == 2


def test_levels_and_free_energies_reach_the_json():
    ens = analyze("CC1CCCCC1", rerank="gfn2", solvent="chloroform", free_energy=True)
    assert ens.method == "GFN2-xTB/ALPB(chloroform)//MMFF94"
    data = json.loads(ens.to_json())
    assert data["ranking"] == "free_energy"
    for conf in data["conformers"]:
        assert conf["enthalpy"] is not None and conf["free_energy"] is not None
        assert set(conf["energies"]) == {"MMFF94", "GFN2-xTB/ALPB(chloroform)//MMFF94"}
    # the ranking quantity is G: relative energies are free-energy differences
    g = np.array([c["free_energy"] for c in data["conformers"]])
    assert np.allclose([c["relative_energy"] for c in data["conformers"]], g - g.min(), atol=1e-3)
    # C1 symmetric chair conformers of methylcyclohexane: rotational symmetry number 1 (common practice, no source)
    assert data["conformers"][0]["symmetry_number"] == 1


def test_demo_runs_and_writes_its_files(capsys):
    from chairbuild.demo import run_demo

    assert run_demo("demo-output") == 0
    out = capsys.readouterr().out
    assert "model estimates" in out and "re-ranked with GFN2-xTB/ALPB(water)//MMFF94" in out
    for name in ("isomer_1.sdf", "isomer_2.json", "report.html", "isomer_1_xyz/rank_001.xyz"):
        assert (Path("demo-output") / name).exists(), name


def test_json_is_strict_even_with_extreme_windows_and_rejected_records():
    from dataclasses import replace

    from chairbuild.result import Status

    ens = analyze("CC1CCCCC1", window=5000.0, temperature=50.0)
    bad = replace(ens.conformers[-1], id=-1, relative_energy=float("nan"), status=Status.NOT_CONVERGED, message="test")
    data = json.loads(replace(ens, rejected=(bad,)).to_json())
    assert data["rejected"][0]["relative_energy"] is None
    assert data["rejected"][0]["status"] == "not-converged"
    assert all(f["delta_g"] is None or f["delta_g"] >= 0 for f in data["families"])
