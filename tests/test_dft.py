"""The DFT energy model (PySCF) against direct PySCF calculations and finite differences.

Reference values come from PySCF itself, called here directly through its own documented
API (``gto.M`` in Å, ``dft.RKS``/``UKS``, ``density_fit``, ``PCM``) and from the
``dftd3`` package's own PySCF wrapper (``dftd3.pyscf.energy``), a code path independent
of the model's unit handling, D3 bookkeeping and retry ladder.
"""

from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from chairbuild.constants import HARTREE_TO_KJ
from chairbuild.errors import ConvergenceError, ForceFieldError, InputError, OptionError
from chairbuild.forcefields.dft import DFTModel, DFTSettings
from tests.helpers import assert_close

WATER = np.array([[0.0, 0.0, 0.1173], [0.0, 0.7572, -0.4692], [0.0, -0.7572, -0.4692]])
SMALL = DFTSettings(functional="b3lyp", basis="sto-3g", dispersion="d3bj")


def _direct_pyscf(coords, basis, solvent_eps=None, spin=0, symbols=("O", "H", "H"), xc="b3lyp"):
    import dftd3.pyscf as disp
    from pyscf import dft, gto

    atom = "; ".join(f"{s} {x:.10f} {y:.10f} {z:.10f}" for s, (x, y, z) in zip(symbols, coords))
    mol = gto.M(atom=atom, basis=basis, unit="Angstrom", spin=spin, verbose=0)
    mf = (dft.RKS(mol) if spin == 0 else dft.UKS(mol)).density_fit()
    mf.xc = xc
    mf.conv_tol = 1e-10
    if solvent_eps is not None:
        mf = mf.PCM()
        mf.with_solvent.method = "C-PCM"
        mf.with_solvent.eps = solvent_eps
    mf = disp.energy(mf)
    return mf.kernel()


def test_energy_matches_direct_pyscf_water():
    model = DFTModel(["O", "H", "H"], DFTSettings(basis="def2-svp"))
    e = model.energy(WATER)
    ref = _direct_pyscf(WATER, "def2-svp") * HARTREE_TO_KJ
    assert_close(e, ref, 1e-4, "B3LYP-D3(BJ)/def2-SVP water vs direct PySCF + dftd3 wrapper (kJ/mol)")
    assert model.name == "B3LYP-D3(BJ)/def2-SVP"
    assert not model.last_scf.warm_start


def test_solvent_energy_matches_direct_pyscf_and_lowers_water():
    model = DFTModel(["O", "H", "H"], DFTSettings(basis="sto-3g", solvent="water"))
    e = model.energy(WATER)
    # epsilon 78.355: water in the Minnesota Solvent Descriptor Database as shipped in PySCF
    ref = _direct_pyscf(WATER, "sto-3g", solvent_eps=78.355) * HARTREE_TO_KJ
    assert_close(e, ref, 1e-4, "C-PCM(water) water vs direct PySCF (kJ/mol)")
    gas = DFTModel(["O", "H", "H"], DFTSettings(basis="sto-3g")).energy(WATER)
    assert e < gas - 5.0, "a polar solute is stabilised by a polar continuum (common practice, no source)"


def test_gradient_matches_finite_differences_in_solvent():
    model = DFTModel(["O", "H", "H"], DFTSettings(basis="sto-3g", solvent="chloroform"), reuse_density=False)
    x = WATER + np.array([[0.0, 0.02, 0.0], [0.01, 0.0, 0.03], [0.0, -0.02, 0.0]])
    _, grad = model.energy_and_gradient(x)
    h = 1e-3
    for atom, axis in ((0, 2), (1, 1)):
        plus, minus = x.copy(), x.copy()
        plus[atom, axis] += h
        minus[atom, axis] -= h
        fd = (model.energy(plus) - model.energy(minus)) / (2 * h)
        # PCM's switching of surface points makes the energy slightly rough: 0.02 % of the value
        assert_close(grad[atom, axis], fd, max(0.05, 2e-4 * abs(fd)), f"dE/dx atom {atom} axis {axis} vs central differences (kJ/mol/Å)")


def test_warm_start_from_a_rotated_copy_saves_cycles_and_changes_no_result():
    model = DFTModel(["O", "H", "H"], SMALL)
    e1, g1 = model.energy_and_gradient(WATER)
    cold_cycles = model.last_scf.cycles
    theta = 0.7
    rot = np.array([[np.cos(theta), -np.sin(theta), 0.0], [np.sin(theta), np.cos(theta), 0.0], [0.0, 0.0, 1.0]])
    moved = WATER @ rot.T + np.array([1.0, -2.0, 0.5])
    e2, g2 = model.energy_and_gradient(moved)
    # the kept density, turned into the new orientation, is a better start than the atomic guess
    assert model.last_scf.warm_start
    assert model.last_scf.cycles < cold_cycles
    # ... and the result is the one a cold start gives at the same coordinates: no dependence on history
    e_cold, g_cold = DFTModel(["O", "H", "H"], SMALL, reuse_density=False).energy_and_gradient(moved)
    assert_close(e2, e_cold, 1e-5, "warm-started vs cold energy at the same coordinates (kJ/mol)")
    assert_close(g2, g_cold, 1e-3, "warm-started vs cold gradient at the same coordinates (kJ/mol/Å)")
    # rotation invariance holds up to the integration grid's orientation (common practice, no source)
    assert_close(e2, e1, 0.05, "energy after rotation and translation (kJ/mol)")
    assert_close(g2, g1 @ rot.T, 0.05, "gradient rotates with the molecule (kJ/mol/Å)")


def test_the_kept_density_is_turned_into_the_new_orientation():
    from pyscf import gto, scf

    theta = 1.1
    rot = np.array([[1.0, 0.0, 0.0], [0.0, np.cos(theta), -np.sin(theta)], [0.0, np.sin(theta), np.cos(theta)]])
    moved = WATER @ rot.T + np.array([0.3, 0.2, -1.0])

    def density(coords):
        mol = gto.M(atom=[(s, tuple(x)) for s, x in zip("OHH", coords)], basis="def2-svp", unit="Angstrom", verbose=0)
        mf = scf.RHF(mol)
        mf.conv_tol = 1e-11
        mf.kernel()
        return mol, mf.make_rdm1()

    model = DFTModel(["O", "H", "H"], SMALL)
    _, dm = density(WATER)
    model._history = [(WATER, dm)]
    mol, ref = density(moved)
    # reference: PySCF's own converged density at the moved geometry
    assert_close(model._guess(moved, mol), ref, 1e-6, "kept density turned into the new orientation vs converged one")


def test_a_distant_geometry_starts_from_the_atomic_guess():
    model = DFTModel(["O", "H", "H"], SMALL)
    model.energy(WATER)
    stretched = WATER * np.array([1.0, 1.3, 1.3])  # O-H bonds about 0.3 Å longer: beyond the warm-start threshold
    model.energy(stretched)
    assert not model.last_scf.warm_start
    near = WATER + np.array([[0.0, 0.0, 0.002], [0.0, 0.003, 0.0], [0.0, 0.0, -0.002]])
    model.energy(near)
    assert model.last_scf.warm_start


def test_radical_runs_unrestricted_and_matches_direct_uks():
    mol = Chem.AddHs(Chem.MolFromSmiles("[CH3]"))
    AllChem.EmbedMolecule(mol, randomSeed=7)
    coords = mol.GetConformer().GetPositions()
    model = DFTModel(mol, SMALL)
    assert model.multiplicity == 2
    e = model.energy(coords)
    ref = _direct_pyscf(coords, "sto-3g", spin=1, symbols=("C", "H", "H", "H")) * HARTREE_TO_KJ
    assert_close(e, ref, 1e-4, "UKS methyl radical vs direct PySCF UKS (kJ/mol)")


def test_unknown_solvent_lists_valid_names():
    with pytest.raises(OptionError, match="valid names: .*chloroform.*water"):
        DFTModel(["O", "H", "H"], DFTSettings(solvent="unobtainium"))


def test_unknown_functional_and_model_are_refused():
    with pytest.raises(OptionError, match="functional"):
        DFTModel(["O", "H", "H"], DFTSettings(functional="not-a-functional"))
    with pytest.raises(OptionError, match="solvation model"):
        DFTModel(["O", "H", "H"], DFTSettings(solvation_model="cosmic"))


def test_too_many_basis_functions_refused_before_work():
    with pytest.raises(ForceFieldError, match=r"basis functions at def2-svp, over the limit of 20"):
        DFTModel(["O", "H", "H"], DFTSettings(basis="def2-svp"), max_basis_functions=20)


def test_odd_electrons_in_a_singlet_refused():
    with pytest.raises(InputError):
        DFTModel(["C", "H", "H", "H"], SMALL, multiplicity=1)


def test_scf_failure_walks_the_ladder_then_raises():
    model = DFTModel(["O", "H", "H"], SMALL, max_scf_cycles=1)
    with pytest.raises(ConvergenceError, match="level shift.*damping.*Newton"):
        model.energy(WATER)
