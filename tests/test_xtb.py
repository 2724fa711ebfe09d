"""Tests of the GFN2-xTB energy model (chairbuild.forcefields.xtb) through tblite.

Check values and their sources are named beside each check. "Common practice, no
source" marks checks of internal consistency (finite differences, symmetry).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

pytest.importorskip("tblite")

from rdkit import Chem  # noqa: E402
from rdkit.Chem import AllChem  # noqa: E402

from chairbuild.constants import BOHR_TO_ANGSTROM, HARTREE_TO_KJ  # noqa: E402
from chairbuild.errors import (  # noqa: E402
    ConvergenceError,
    ForceFieldError,
    InputError,
    OptionError,
)
from chairbuild.thermo import atomic_masses, harmonic_frequencies  # noqa: E402
from chairbuild.forcefields.base import EnergyModel  # noqa: E402
from chairbuild.forcefields.xtb import (  # noqa: E402
    SolvationModel,
    XTBModel,
    XTBOptimizationResult,
    _openmp_runtimes,
    _solvent_table,
    available_solvents,
)


def _xtb(*args, **kwargs) -> XTBModel:
    """An XTBModel on one OpenMP thread: for molecules this small more threads do not
    help, and on a busy machine idle OpenMP threads spinning make tblite much slower."""
    kwargs.setdefault("threads", 1)
    return XTBModel(*args, **kwargs)


def _embedded(smiles: str, seed: int = 7) -> Chem.Mol:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    assert AllChem.EmbedMolecule(mol, randomSeed=seed) == 0
    AllChem.MMFFOptimizeMolecule(mol, maxIters=2000)
    return mol


def _coords(mol: Chem.Mol) -> np.ndarray:
    return np.array(mol.GetConformer().GetPositions())


@pytest.fixture(scope="module")
def water() -> Chem.Mol:
    return _embedded("O")


@pytest.fixture(scope="module")
def methanol() -> Chem.Mol:
    return _embedded("CO")


def _fd_gradient(model: XTBModel, x: np.ndarray, h: float = 1e-3) -> np.ndarray:
    grad = np.zeros_like(x)
    for i in range(x.shape[0]):
        for k in range(3):
            xp = x.copy()
            xp[i, k] += h
            xm = x.copy()
            xm[i, k] -= h
            grad[i, k] = (model.energy(xp) - model.energy(xm)) / (2.0 * h)
    return grad


# --------------------------------------------------------------------------- units
def test_energy_matches_tblite_documentation_example():
    # SiH4 in bohr and its GFN2-xTB energy -3.763233750684 hartree: the example in the
    # docstring of tblite.interface.Result (tblite 0.8.0). Converting the bohr
    # coordinates to Å (CODATA 2018 bohr radius) and back must reproduce it; the
    # energy comes back in kJ/mol (CODATA 2018 hartree).
    bohr = np.array(
        [
            [0.000000000000, 0.000000000000, 0.000000000000],
            [1.617683897558, 1.617683897558, -1.617683897558],
            [-1.617683897558, -1.617683897558, -1.617683897558],
            [1.617683897558, -1.617683897558, 1.617683897558],
            [-1.617683897558, 1.617683897558, 1.617683897558],
        ]
    )
    model = _xtb([14, 1, 1, 1, 1])
    energy = model.energy(bohr * BOHR_TO_ANGSTROM)
    assert energy / HARTREE_TO_KJ == pytest.approx(-3.763233750684, abs=1e-7)
    # CODATA 2018: E_h = 2625.49964 kJ/mol.
    assert HARTREE_TO_KJ == pytest.approx(2625.49964, abs=1e-5)


def test_is_an_energy_model(water):
    model = _xtb(water)
    assert isinstance(model, EnergyModel)
    assert model.name == "GFN2-xTB (gas)"
    assert model.energy_unit == "kJ/mol" and model.length_unit == "angstrom"
    assert _xtb(water, solvent="chloroform").name == "GFN2-xTB/ALPB(chloroform)"
    assert _xtb(water, solvent="Water", solvation_model="gbsa").name == (
        "GFN2-xTB/GBSA(water)"
    )


# --------------------------------------------------------------------------- gradients
@pytest.mark.parametrize("solvent", [None, "water"])
def test_gradient_matches_finite_differences(methanol, solvent):
    # Central differences of the energy (common practice, no source). A distorted
    # geometry gives a gradient far from zero; a tight SCF (accuracy 0.01) keeps the
    # energy noise below the finite-difference error.
    rng = np.random.default_rng(11)
    x = _coords(methanol) + rng.normal(scale=0.05, size=(methanol.GetNumAtoms(), 3))
    model = _xtb(methanol, solvent=solvent, accuracy=0.01)
    energy, grad = model.energy_and_gradient(x)
    assert energy == pytest.approx(model.energy(x), abs=1e-6)
    assert grad.shape == x.shape
    assert np.abs(grad).max() > 10.0
    np.testing.assert_allclose(_fd_gradient(model, x), grad, atol=0.02, rtol=1e-3)


def test_solvent_lowers_energy_of_polar_molecule(water):
    # Solvation free energy of water in water is negative (common practice, no source).
    x = _coords(water)
    gas = _xtb(water).energy(x)
    for model in SolvationModel:
        assert _xtb(water, solvent="water", solvation_model=model).energy(x) < gas - 10.0


def test_calculator_is_built_once_and_reused(water):
    model = _xtb(water)
    x = _coords(water)
    e1 = model.energy(x)
    calc = model._calc
    model.energy(x + 0.01)
    assert model._calc is calc
    assert model.n_geometries == 2
    assert model.energy(x) == pytest.approx(e1, abs=1e-4)
    fresh = _xtb(water, reuse_wavefunction=False)
    assert fresh.energy(x) == pytest.approx(e1, abs=1e-4)


# --------------------------------------------------------------------------- charge, spin
def test_cation_charge_from_formal_charges():
    ion = _embedded("[NH4+]")
    model = _xtb(ion)
    assert model.charge == 1 and model.unpaired_electrons == 0
    x = _coords(ion)
    charges = model.atomic_charges(x)
    assert charges.sum() == pytest.approx(1.0, abs=1e-6)
    neutral = _xtb([a.GetAtomicNum() for a in ion.GetAtoms()], charge=0, unpaired_electrons=1)
    assert neutral.atomic_charges(x).sum() == pytest.approx(0.0, abs=1e-6)
    assert abs(model.energy(x) - neutral.energy(x)) > 100.0


def test_anion_charge_from_formal_charges():
    ion = _embedded("CC(=O)[O-]")
    model = _xtb(ion, solvent="water")
    assert model.charge == -1
    assert model.atomic_charges(_coords(ion)).sum() == pytest.approx(-1.0, abs=1e-6)


def test_explicit_charge_overrides_and_parity_is_checked():
    ion = _embedded("[NH4+]")
    with pytest.raises(InputError, match="unpaired"):
        _xtb(ion, charge=0)
    with pytest.raises(InputError, match="electrons"):
        _xtb([8, 1], charge=0)
    assert _xtb([8, 1], charge=-1).charge == -1


def test_radical_gives_unpaired_electron():
    methyl = Chem.AddHs(Chem.MolFromSmiles("[CH3]"))
    assert _xtb(methyl).unpaired_electrons == 1


def test_bad_inputs():
    with pytest.raises(InputError, match="implicit hydrogens"):
        _xtb(Chem.MolFromSmiles("CO"))
    with pytest.raises(ForceFieldError, match="92"):
        _xtb([92, 9, 9, 9, 9, 9, 9])
    with pytest.raises(InputError):
        _xtb("CO")
    model = _xtb([1, 1])
    with pytest.raises(InputError, match="shape"):
        model.energy(np.zeros((3, 3)))
    with pytest.raises(InputError, match="NaN"):
        model.energy(np.array([[0.0, 0.0, 0.0], [0.0, 0.0, np.nan]]))
    with pytest.raises(OptionError):
        _xtb([1, 1], threads=0)
    with pytest.raises(OptionError):
        model.hessian(np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 0.74]]), step=0.0)


# --------------------------------------------------------------------------- solvents
def test_unknown_solvent_lists_valid_names(water):
    with pytest.raises(OptionError) as info:
        _xtb(water, solvent="unobtainium")
    message = str(info.value)
    for name in ("water", "chcl3", "toluene", "thf"):
        assert name in message
    with pytest.raises(OptionError, match="alpb, gbsa"):
        _xtb(water, solvent="water", solvation_model="pcm")


def test_solvent_aliases_select_the_same_parameters(water):
    x = _coords(water)
    e_alias = _xtb(water, solvent="chloroform").energy(x)
    e_canon = _xtb(water, solvent="CHCl3").energy(x)
    assert e_alias == pytest.approx(e_canon, abs=1e-9)
    assert set(available_solvents("gbsa")) <= set(available_solvents("alpb"))
    assert len(available_solvents("alpb")) == 25
    assert len(available_solvents("gbsa")) == 14


def test_solvent_table_agrees_with_tblite(water):
    # Every row of forcefields/data/xtb_solvents.txt must be accepted by the installed
    # tblite and give the energy of its parameter set (the file's own claim).
    x = _coords(water)
    for model, rows in _solvent_table().items():
        reference = {}
        for name, parameter_set in sorted(rows.items(), key=lambda kv: kv[0] != kv[1]):
            energy = _xtb(water, solvent=name, solvation_model=model).energy(x)
            if name == parameter_set:
                reference[name] = energy
            else:
                assert energy == pytest.approx(reference[parameter_set], abs=1e-8), name


# --------------------------------------------------------------------------- SCF failure
def test_scf_failure_raises_convergence_error_naming_label(water):
    model = _xtb(water, label="water-test", max_scf_iterations=1)
    x = _coords(water)
    with pytest.raises(ConvergenceError, match="SCF did not converge for water-test at geometry 1"):
        model.energy(x)
    with pytest.raises(ConvergenceError, match="at geometry 2"):
        model.energy_and_gradient(x)


# --------------------------------------------------------------------------- Hessian
def test_hessian_of_water_gives_three_modes(water):
    model = _xtb(water)
    opt = model.optimize(_coords(water), gtol=0.01)
    assert opt.converged
    hess = model.hessian(opt.coords)
    assert hess.shape == (9, 9)
    np.testing.assert_allclose(hess, hess.T, atol=1e-12)
    masses = atomic_masses(water)
    freqs = harmonic_frequencies(hess, masses, opt.coords)
    all_freqs = harmonic_frequencies(hess, masses, opt.coords, project=False)
    assert freqs.size == 3
    # Translations and rotations of an unprojected Hessian at a minimum are near zero
    # and the other three are the projected ones (common practice, no source).
    assert np.all(np.abs(all_freqs[:6]) < 50.0)
    np.testing.assert_allclose(all_freqs[6:], freqs, atol=1.0)
    # Experimental fundamentals of H2O: 1595, 3657, 3756 cm^-1 (Shimanouchi, Tables of
    # Molecular Vibrational Frequencies, NSRDS-NBS 39, 1972; from memory). A harmonic
    # GFN2-xTB Hessian is only expected within a few per cent.
    np.testing.assert_allclose(freqs, [1595.0, 3657.0, 3756.0], rtol=0.05)


# --------------------------------------------------------------------------- optimiser
def test_optimize_lowers_energy_and_meets_gtol(methanol):
    rng = np.random.default_rng(3)
    x0 = _coords(methanol) + rng.normal(scale=0.05, size=(methanol.GetNumAtoms(), 3))
    model = _xtb(methanol, solvent="methanol")
    e0 = model.energy(x0)
    res = model.optimize(x0, gtol=0.05)
    assert isinstance(res, XTBOptimizationResult)
    assert res.converged and res.max_gradient <= 0.05
    assert res.rms_gradient <= res.max_gradient
    assert res.energy < e0
    assert res.n_steps >= 1 and res.n_evaluations > res.n_steps
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.energy = 0.0  # type: ignore[misc]
    short = _xtb(methanol).optimize(x0, max_steps=1, gtol=1e-6)
    assert not short.converged


# --------------------------------------------------------------------------- threads, output
def test_threads_give_same_energy_and_are_restored(water):
    x = _coords(water)
    runtimes = _openmp_runtimes()
    before = [lib.omp_get_max_threads() for lib in runtimes]
    e1 = XTBModel(water, threads=1).energy(x)
    e2 = XTBModel(water, threads=2).energy(x)
    assert e1 == pytest.approx(e2, abs=1e-6)
    assert [lib.omp_get_max_threads() for lib in _openmp_runtimes()][: len(before)] == before
    assert _openmp_runtimes(), "tblite's OpenMP runtime should be visible after a call"


def test_console_stays_silent(water, capfd):
    model = _xtb(water, solvent="water")
    model.energy_and_gradient(_coords(water))
    out, err = capfd.readouterr()
    assert out == "" and err == ""


@pytest.mark.slow
def test_methylcyclohexane_minimum_has_no_imaginary_mode():
    mol = _embedded("CC1CCCCC1")
    model = _xtb(mol, solvent="chloroform")
    opt = model.optimize(_coords(mol), gtol=0.02)
    assert opt.converged
    freqs = harmonic_frequencies(model.hessian(opt.coords), atomic_masses(mol), opt.coords)
    assert freqs.size == 3 * 21 - 6
    assert freqs.min() > 0.0
