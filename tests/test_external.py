"""Bring your own energies (chairbuild.levels.external): a CSV, a folder of files cclib reads, the geometry check,
the composed ranking.

Every energy here is made by the test itself: numbers of our own in the CSV and the mapping, and
RHF/STO-3G single points run in PySCF whose results are put into cclib's own data object
(``cclib.parser.data.ccData``) and written by cclib as its CJSON (``cclib.io.ccwrite``); no file
imitates another program's output. Check values: hartree = 2625.4996394799 kJ/mol and
eV = 96.485332123 kJ/mol (CODATA 2018, from memory), kcal = 4.184 kJ (thermochemical calorie,
by definition), R = 8.314462618 J mol⁻¹ K⁻¹ (exact since 2019, from memory); the D3(BJ)
correction of Hartree–Fock from the ``dftd3`` package's own PySCF wrapper.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from chairbuild.errors import InputError, OptionError
from chairbuild.levels.external import EnergyTerm, reweight
from chairbuild.result import Ensemble
from tests.helpers import assert_close

MOL = "CC1CCCCC1"
HARTREE_KJ = 2625.4996394799  # CODATA 2018, from memory
EV_KJ = 96.485332123  # CODATA 2018 (exact since 2019), from memory
KCAL_KJ = 4.184  # thermochemical calorie, by definition
R_J = 8.314462618  # J/(mol K), exact since 2019, from memory


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """A saved result with MMFF94 frequencies (its formula has a thermal correction), and its JSON file."""
    from chairbuild.pipeline import analyze

    ens = analyze(MOL, free_energy=True, threads=1)
    path = tmp_path_factory.mktemp("saved") / "result.json"
    path.write_text(ens.to_json())
    return Ensemble.from_json(path.read_text()), path


def _pyscf_cjson(path: Path, ens: Ensemble, coords: np.ndarray) -> tuple[float, float]:
    """RHF/STO-3G single point at ``coords`` in PySCF, written by cclib as CJSON; returns (E, D3(BJ) of HF), hartree."""
    import cclib
    import dftd3.pyscf
    from cclib.parser.data import ccData
    from cclib.parser.utils import convertor
    from pyscf import gto, scf

    mol = gto.M(atom=[(s, tuple(map(float, x))) for s, x in zip(ens.symbols, coords)], basis="sto-3g", unit="Angstrom", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-10
    energy = float(mf.kernel())
    d3 = float(dftd3.pyscf.DFTD3Dispersion(mol, xc="hf", version="d3bj").kernel()[0])
    data = ccData()
    data.natom = mol.natm
    data.atomnos = np.array(mol.atom_charges())
    data.atomcoords = np.array([mol.atom_coords(unit="Angstrom")])
    data.charge, data.mult = 0, 1
    data.scfenergies = np.array([convertor(energy, "hartree", "eV")])
    data.dispersionenergies = np.array([convertor(d3, "hartree", "eV")])
    cclib.io.ccwrite(data, outputtype="cjson", outputdest=str(path))
    return energy, d3


@pytest.fixture(scope="module")
def outputs(saved, tmp_path_factory):
    """A folder with CJSON files of conformers 0 and 1, the exported XYZ files and a note of our own."""
    from chairbuild.output import write_many
    from chairbuild.result import EnergyUnit

    ens, _ = saved
    folder = tmp_path_factory.mktemp("qc")
    write_many([ens], str(folder) + "/", EnergyUnit.KJ)  # rank_001.xyz ... rank_005.xyz
    energies = {k: _pyscf_cjson(folder / f"rank_{k + 1:03d}.cjson", ens, ens[k].coords) for k in (0, 1)}
    (folder / "rank_001.notes.txt").write_text("computed on the exported geometry\n")
    return folder, energies


def test_csv_energies_in_mixed_units_rank_the_conformers(saved, tmp_path):
    ens, path = saved
    wanted = {0: 0.0, 1: 1.5, 2: 4.0}  # kJ/mol above conformer 0 (numbers of our own)
    base = -HARTREE_KJ  # conformer 0 at -1 hartree
    csv = tmp_path / "energies.csv"
    csv.write_text(
        "# energies of our own\n"
        "conformer,energy,unit\n"
        "0,-1.0,hartree\n"
        f"rank_002.xyz,{(base + wanted[1]) / EV_KJ:.12f},eV\n"
        f"2,{(base + wanted[2]) / KCAL_KJ:.12f},kcal/mol\n"
    )
    new = reweight(path, csv, level_name="my level")
    key = "my level//MMFF94"
    assert new.method == key and new.ranking == "energy" and new.ranking_formula == f"E = E[{key}]"
    assert new.ranking_terms == (("energies", key),)
    assert_close([c.relative_energy for c in new], [0.0, 1.5, 4.0], 1e-5, "relative energies from hartree, eV, kcal/mol rows")
    old = [ens[k] for k in (0, 1, 2)]
    g = np.array([c.degeneracy for c in old], dtype=float)
    w = g * np.exp(-np.array([0.0, 1.5, 4.0]) * 1000.0 / (R_J * ens.temperature))
    assert_close([c.population for c in new], w / w.sum(), 1e-6, "Boltzmann populations with degeneracies")
    for k, c in enumerate(new):
        assert np.array_equal(c.coords, old[k].coords) and c.energies["MMFF94"] == old[k].energies["MMFF94"]
        assert f"conformer {k} of the saved result" in c.message
    assert any("2 conformer(s)" in n and "left out (ids 3, 4)" in n for n in new.notes)
    assert new.provenance["external_energies"]["left_out"] == [3, 4]
    # the family table follows the new populations; the JSON round-trips like any result
    assert_close(sum(f.population for f in new.families if f.ring_index == 0), 1.0, 1e-9, "family populations sum to 1")
    assert Ensemble.from_json(new.to_json()).to_json() == new.to_json()
    assert Ensemble.from_json(path.read_text()).to_json() == ens.to_json(), "the saved result is unchanged"


def test_composed_free_energy_equals_its_parts(saved):
    ens, _ = saved
    mine = {0: -500.0, 1: -502.0, 2: -499.0, 3: -480.0}  # kJ/mol, numbers of our own
    new = reweight(ens, mine, add_thermal_correction=True)
    key = "user level//MMFF94"
    assert new.ranking == "free_energy"
    assert new.ranking_formula == f"G = E[{key}] + G_RRHO[MMFF94]"
    old_by_coords = {ens[k].coords.tobytes(): ens[k] for k in mine}
    g = []
    for rec in new:
        old = old_by_coords[rec.coords.tobytes()]
        parts = sum(getattr(rec, mapping)[name] for mapping, name in new.ranking_terms)
        assert_close(rec.energies[key], mine[old.id], 1e-12, "the user's energy on the record")
        assert_close(rec.thermo["rrho_correction"], old.thermo["rrho_correction"], 1e-12, "G_RRHO kept from the saved result")
        assert_close(rec.thermo["free_energy"], parts, 1e-9, "G on the record vs E(user) + G_RRHO(MMFF94)")
        g.append(parts)
    g = np.array(g)
    assert_close([r.relative_energy for r in new], g - g.min(), 1e-9, "relative energies are the composed G")


@pytest.mark.parametrize(
    "rows, message",
    [
        ("conformer,energy,unit\n99,-1.0,hartree\n", "no conformer 99"),
        ("conformer,energy,unit\n0,-1.0,hartree\nrank_001.xyz,-1.1,hartree\n", "already given in row 1"),
        ("conformer,energy,unit\n0,-1.0,furlong\n", "unknown energy unit 'furlong'"),
        ("conformer,energy\n0,-1.0\n", "expected the columns conformer,energy,unit"),
        ("conformer,energy,unit\nfirst,-1.0,hartree\n", "neither an id"),
    ],
)
def test_bad_csv_is_refused_with_a_message_naming_it(saved, tmp_path, rows, message):
    csv = tmp_path / "bad.csv"
    csv.write_text(rows)
    with pytest.raises(InputError, match=message):
        reweight(saved[0], csv)


def test_thermal_correction_needs_frequencies_and_an_energy(saved):
    ens, _ = saved
    plain = reweight(ens, {0: -1.0, 1: -2.0})
    with pytest.raises(OptionError, match="needs a saved result ranked with frequencies"):
        reweight(plain, {0: -1.0, 1: -2.0}, add_thermal_correction=True)
    with pytest.raises(OptionError, match="already hold one"):
        reweight(ens, {0: -1.0, 1: -2.0}, energy_term="free-energy", add_thermal_correction=True)


def test_cclib_folder_ranks_with_the_energies_pyscf_computed(saved, outputs):
    from chairbuild.constants import HARTREE_TO_KJ

    ens, path = saved
    folder, energies = outputs
    new = reweight(path, folder, level_name="RHF/STO-3G")
    key = "RHF/STO-3G//MMFF94"
    assert new.ranking_formula == f"E = E[{key}]" and len(new) == 2
    info = new.provenance["external_energies"]
    assert info["source"] == "cclib" and info["term"] == "electronic" and "scfenergies" in info["reads"]
    assert sorted(info["passed_over"]) == ["rank_001.notes.txt"] + [f"rank_{k:03d}.xyz" for k in range(1, 6)]
    assert all(r < 1e-6 for r in info["rmsd_A"].values())
    assert any("report a dispersion correction apart" in n for n in new.notes)
    by_coords = {ens[k].coords.tobytes(): k for k in (0, 1)}
    for rec in new:
        k = by_coords[rec.coords.tobytes()]
        assert_close(rec.energies[key], energies[k][0] * HARTREE_KJ, 1e-6, f"E(RHF/STO-3G) of conformer {k} vs PySCF (kJ/mol)")
    e = {by_coords[r.coords.tobytes()]: r.energies[key] for r in new}
    assert_close(new[1].relative_energy, abs(e[0] - e[1]), 1e-9, "relative energy from the two files")
    # the dispersion term, reported apart in these files, is added on request
    both = reweight(path, folder, energy_term="electronic+dispersion", level_name="RHF-D3(BJ)/STO-3G")
    for rec in both:
        k = by_coords[rec.coords.tobytes()]
        ref = (energies[k][0] + energies[k][1]) * HARTREE_TO_KJ
        assert_close(rec.energies["RHF-D3(BJ)/STO-3G//MMFF94"], ref, 1e-6, f"E + D3(BJ) of conformer {k} vs PySCF + dftd3")
    with pytest.raises(InputError, match="no mp energy"):
        reweight(path, folder, energy_term=EnergyTerm.MP)


def test_a_file_with_another_conformers_geometry_is_refused(saved, outputs, tmp_path):
    ens, path = saved
    folder, _ = outputs
    wrong = tmp_path / "wrong"
    wrong.mkdir()
    shutil.copy(folder / "rank_002.cjson", wrong / "rank_001.cjson")  # conformer 1's geometry named as conformer 0
    with pytest.raises(InputError, match=r"rank_001\.cjson: its geometry is conformer 1 .*not conformer 0"):
        reweight(path, wrong)


def test_a_moved_geometry_is_refused_over_the_limit_and_kept_as_the_users_minimum_below(saved, tmp_path):
    ens, path = saved
    rng = np.random.default_rng(7)
    step = rng.normal(size=ens[0].coords.shape)
    moved = ens[0].coords + 0.05 * step / np.sqrt(np.mean(np.sum(step**2, axis=1)))  # RMS displacement 0.05 Å
    folder = tmp_path / "moved"
    folder.mkdir()
    _pyscf_cjson(folder / "rank_001.cjson", ens, moved)
    with pytest.raises(InputError, match=r"rank_001\.cjson: its geometry lies 0\.0[45]\d Å .* over the limit of 0\.02 Å"):
        reweight(path, folder, max_rmsd=0.02)
    new = reweight(path, folder, level_name="RHF/STO-3G")
    assert new.method == "RHF/STO-3G", "energies at the user's own geometries carry no //geometry level"
    assert any("re-optimised at the user's level" in n for n in new.notes)
