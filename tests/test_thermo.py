"""Tests of chairbuild.thermo: populations, equilibrium constants, harmonic frequencies,
quasi-RRHO thermochemistry and rotational symmetry numbers.

Check values and their sources are named beside each check. "Common practice, no
source" marks textbook formulas and internal-consistency checks.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem
from rdkit.Geometry import Point3D

from chairbuild.constants import (
    AMU_KG,
    ANGSTROM_TO_METRE,
    C_LIGHT,
    KCAL_TO_KJ,
    KJ_TO_J,
    N_A,
    R_GAS,
    R_KJ,
    WAVENUMBER_CM_TO_M,
)
from chairbuild.errors import InputError, OptionError
from chairbuild.thermo import (
    ThermoResult,
    atomic_masses,
    boltzmann_populations,
    delta_g_from_k,
    equilibrium_constant,
    free_rotor_entropy,
    harmonic_frequencies,
    harmonic_vibrational_entropy,
    is_linear,
    qrrho_thermo,
    qrrho_vibrational_entropy,
    qrrho_weights,
    rotational_symmetry_number,
)

T = 298.15


# --------------------------------------------------------------------------- populations
def test_populations_sum_to_one_and_are_shift_invariant():
    energies = np.array([0.0, 1.3, 4.2, 7.0, 25.0])
    p = boltzmann_populations(energies, T)
    assert p.sum() == pytest.approx(1.0, abs=1e-14)
    assert np.all(np.diff(p) < 0)
    for shift in (-1.0e5, 3.7, 1.0e6):
        np.testing.assert_allclose(boltzmann_populations(energies + shift, T), p, rtol=1e-9)


def test_degeneracy_doubles_weight():
    p = boltzmann_populations([0.0, 0.0], T, degeneracies=[2, 1])
    np.testing.assert_allclose(p, [2.0 / 3.0, 1.0 / 3.0], rtol=1e-14)
    e = [0.0, 2.5]
    plain = boltzmann_populations(e, T)
    doubled = boltzmann_populations(e, T, degeneracies=[1, 2])
    assert doubled[1] / doubled[0] == pytest.approx(2.0 * plain[1] / plain[0], rel=1e-12)


def test_methyl_a_value_by_hand():
    # A(CH3) = 1.74 kcal/mol at 298.15 K gives K = 18.86 and 5.04 % axial: computed by
    # hand from CODATA 2018 (R = 8.314462618 J mol^-1 K^-1) and 1 cal = 4.184 J.
    assert R_GAS == pytest.approx(8.314462618, rel=1e-9)
    a_value = 1.74 * KCAL_TO_KJ
    k = equilibrium_constant(-a_value, T)  # axial -> equatorial
    assert k == pytest.approx(18.86, abs=0.005)
    p_axial, p_equatorial = boltzmann_populations([a_value, 0.0], T)
    assert 100.0 * p_axial == pytest.approx(5.04, abs=0.005)
    assert p_equatorial / p_axial == pytest.approx(k, rel=1e-12)
    assert delta_g_from_k(k, T) == pytest.approx(-a_value, rel=1e-12)


def test_equilibrium_constant_round_trip_and_arrays():
    dg = np.array([-10.0, 0.0, 5.0])
    k = equilibrium_constant(dg, 310.0)
    assert isinstance(k, np.ndarray) and k[1] == 1.0
    np.testing.assert_allclose(delta_g_from_k(k, 310.0), dg, atol=1e-12)
    assert isinstance(equilibrium_constant(1.0), float)


def test_population_and_constant_errors():
    with pytest.raises(OptionError):
        boltzmann_populations([0.0, 1.0], 0.0)
    with pytest.raises(InputError):
        boltzmann_populations([], T)
    with pytest.raises(InputError):
        boltzmann_populations([0.0, np.nan], T)
    with pytest.raises(InputError):
        boltzmann_populations([0.0, 1.0], T, degeneracies=[1, 0])
    with pytest.raises(InputError):
        boltzmann_populations([0.0, 1.0], T, degeneracies=[1])
    with pytest.raises(InputError):
        delta_g_from_k(0.0, T)
    with pytest.raises(OptionError):
        equilibrium_constant(1.0, -5.0)


# --------------------------------------------------------------------------- frequencies
def _spring_hessian(coords: np.ndarray, springs: dict[tuple[int, int], float]) -> np.ndarray:
    """Hessian (kJ mol^-1 Å^-2) of harmonic springs k/2 (r - r0)^2 at r = r0."""
    n = coords.shape[0]
    hess = np.zeros((3 * n, 3 * n))
    for (i, j), k in springs.items():
        u = coords[j] - coords[i]
        u /= np.linalg.norm(u)
        block = k * np.outer(u, u)
        for a, b, sign in ((i, i, 1), (j, j, 1), (i, j, -1), (j, i, -1)):
            hess[3 * a : 3 * a + 3, 3 * b : 3 * b + 3] += sign * block
    return hess


def _wavenumber(k_kj_per_a2: float, mu_amu: float) -> float:
    """nu = sqrt(k / mu) / (2 pi c), in cm^-1 (common practice, no source)."""
    k_si = k_kj_per_a2 * KJ_TO_J / N_A / ANGSTROM_TO_METRE**2
    return math.sqrt(k_si / (mu_amu * AMU_KG)) / (2.0 * math.pi * C_LIGHT) / WAVENUMBER_CM_TO_M


def test_diatomic_frequency_matches_analytic_formula():
    # HCl-like diatomic with an arbitrary force constant of 3000 kJ mol^-1 Å^-2; the
    # exact harmonic wavenumber is sqrt(k/mu)/(2 pi c) (common practice, no source).
    masses = np.array([1.008, 35.45])
    coords = np.array([[0.1, -0.2, 0.3], [0.1 + 0.73, -0.2 + 0.73, 0.3 + 0.73]])
    k = 3000.0
    hess = _spring_hessian(coords, {(0, 1): k})
    mu = masses[0] * masses[1] / masses.sum()
    freqs = harmonic_frequencies(hess, masses, coords)
    assert freqs.shape == (1,)  # 3n - 5 for a linear molecule
    assert freqs[0] == pytest.approx(_wavenumber(k, mu), rel=1e-10)
    all_freqs = harmonic_frequencies(hess, masses, coords, project=False)
    assert np.all(np.abs(all_freqs[:5]) < 1e-3)
    assert all_freqs[5] == pytest.approx(freqs[0], rel=1e-10)
    # Negative curvature gives a negative (imaginary) wavenumber.
    imag = harmonic_frequencies(-hess, masses, coords)
    assert imag[0] == pytest.approx(-freqs[0], rel=1e-10)


def test_projection_removes_exactly_six_zero_modes():
    # A triangle of springs has a Hessian invariant to translations and rotations; the
    # unprojected spectrum has six zeros and the projected one keeps the other three
    # (common practice, no source). Rotating and moving the molecule changes nothing.
    masses = np.array([15.999, 1.008, 1.008])
    coords = np.array([[0.0, 0.0, 0.1173], [0.0, 0.7572, -0.4692], [0.0, -0.7572, -0.4692]])
    springs = {(0, 1): 4500.0, (0, 2): 4500.0, (1, 2): 300.0}
    hess = _spring_hessian(coords, springs)
    freqs = harmonic_frequencies(hess, masses, coords)
    all_freqs = harmonic_frequencies(hess, masses, coords, project=False)
    assert freqs.size == 3
    assert np.all(np.abs(all_freqs[:6]) < 1e-3)
    np.testing.assert_allclose(all_freqs[6:], freqs, rtol=1e-9)

    rng = np.random.default_rng(5)
    q, _ = np.linalg.qr(rng.normal(size=(3, 3)))
    rot = q * np.sign(np.linalg.det(q))
    moved = coords @ rot.T + np.array([3.0, -1.0, 2.0])
    big_rot = np.kron(np.eye(3), rot)
    np.testing.assert_allclose(
        harmonic_frequencies(big_rot @ hess @ big_rot.T, masses, moved), freqs, rtol=1e-9
    )


def test_frequency_input_errors():
    with pytest.raises(InputError):
        harmonic_frequencies(np.zeros((6, 6)), [1.0, 1.0, 1.0], np.zeros((3, 3)))
    with pytest.raises(InputError):
        harmonic_frequencies(np.zeros((6, 6)), [1.0, -1.0], np.zeros((2, 3)))


# --------------------------------------------------------------------------- qRRHO
def test_argon_translational_entropy_against_codata_key_value():
    # S°(Ar, g, 298.15 K, 1 bar) = 154.846 J mol^-1 K^-1: CODATA Key Values for
    # Thermodynamics (Cox, Wagman & Medvedev, 1989). Argon has only translation.
    argon = Chem.MolFromSmiles("[Ar]")
    res = qrrho_thermo([], atomic_masses(argon), [[0.0, 0.0, 0.0]], T)
    assert res.s_rotational == 0.0 and res.s_vibrational == 0.0 and res.zpe == 0.0
    assert 1000.0 * res.entropy == pytest.approx(154.846, abs=0.01)
    assert res.h_translational == pytest.approx(2.5 * R_KJ * T, rel=1e-12)


def test_water_entropy_against_codata_key_value():
    # S°(H2O, g, 298.15 K, 1 bar) = 188.835 J mol^-1 K^-1: CODATA Key Values for
    # Thermodynamics (Cox, Wagman & Medvedev, 1989; from memory). Rigid rotor and
    # harmonic oscillator with the experimental r(OH) = 0.9572 Å, angle 104.52° and
    # fundamentals 1595, 3657, 3756 cm^-1 (from memory) fall short by about
    # 0.2 J mol^-1 K^-1 (anharmonicity, centrifugal distortion).
    r, angle = 0.9572, math.radians(104.52)
    coords = np.array(
        [
            [0.0, 0.0, 0.0],
            [r * math.sin(angle / 2), 0.0, r * math.cos(angle / 2)],
            [-r * math.sin(angle / 2), 0.0, r * math.cos(angle / 2)],
        ]
    )
    masses = atomic_masses(Chem.AddHs(Chem.MolFromSmiles("O")))
    res = qrrho_thermo([1595.0, 3657.0, 3756.0], masses, coords, T, symmetry_number=2)
    assert not res.linear
    assert 1000.0 * res.entropy == pytest.approx(188.835, abs=0.3)


def test_nitrogen_entropy_against_codata_key_value():
    # S°(N2, g, 298.15 K, 1 bar) = 191.609 J mol^-1 K^-1: CODATA Key Values for
    # Thermodynamics (Cox, Wagman & Medvedev, 1989; from memory); r_e = 1.0977 Å and
    # omega_e = 2358.6 cm^-1 (Huber & Herzberg 1979; from memory). Linear, sigma = 2.
    masses = atomic_masses(Chem.MolFromSmiles("N#N"))
    res = qrrho_thermo([2358.6], masses, [[0.0, 0.0, 0.0], [0.0, 0.0, 1.0977]], T, 2)
    assert res.linear
    assert res.h_rotational == pytest.approx(R_KJ * T, rel=1e-12)
    assert 1000.0 * res.entropy == pytest.approx(191.609, abs=0.1)


def test_translational_entropy_pressure_dependence():
    # dS = -R ln(p2/p1) for an ideal gas (common practice, no source).
    masses = [39.948]
    s1 = qrrho_thermo([], masses, [[0.0, 0.0, 0.0]], T, pressure=1.0e5).entropy
    s2 = qrrho_thermo([], masses, [[0.0, 0.0, 0.0]], T, pressure=101325.0).entropy
    assert s2 - s1 == pytest.approx(-R_KJ * math.log(1.01325), rel=1e-10)


def test_damping_switches_between_harmonic_and_free_rotor():
    # Grimme, Chem. Eur. J. 2012, 18, 9955: w = 1/(1 + (nu0/nu)^4), nu0 = 100 cm^-1.
    assert qrrho_weights([100.0])[0] == pytest.approx(0.5, abs=1e-15)
    s_qrrho = qrrho_vibrational_entropy([1000.0, 10.0], T)
    s_ho = harmonic_vibrational_entropy([1000.0, 10.0], T)
    s_fr = free_rotor_entropy([1000.0, 10.0], T)
    assert s_qrrho[0] == pytest.approx(s_ho[0], rel=1e-3)
    assert s_qrrho[1] == pytest.approx(s_fr[1], rel=1e-3)
    assert abs(s_qrrho[1] - s_ho[1]) > 0.1 * s_ho[1]  # the damping matters at 10 cm^-1


def test_harmonic_entropy_matches_partition_function_formula():
    # S = R [x/(e^x - 1) - ln(1 - e^-x)], x = h c nu / kT (common practice, no source),
    # with x = c2 nu / T and the second radiation constant c2 = h c / k =
    # 1.438776877e-2 m K (CODATA 2018): x = 4.825681 at 1000 cm^-1 and 298.15 K.
    s = harmonic_vibrational_entropy([1000.0], T)[0]
    x = 1.438776877e-2 * 1000.0 * WAVENUMBER_CM_TO_M / T
    assert x == pytest.approx(4.825681, abs=1e-6)
    assert s == pytest.approx(R_KJ * (x / math.expm1(x) - math.log(-math.expm1(-x))), rel=1e-12)


def test_thermo_result_is_consistent_and_skips_imaginary_modes():
    masses = atomic_masses(Chem.AddHs(Chem.MolFromSmiles("O")))
    coords = np.array([[0.0, 0.0, 0.1173], [0.0, 0.7572, -0.4692], [0.0, -0.7572, -0.4692]])
    res = qrrho_thermo([50.0, 1600.0, 3700.0], masses, coords, T, symmetry_number=2)
    with_imag = qrrho_thermo([-200.0, 50.0, 1600.0, 3700.0], masses, coords, T, 2)
    assert isinstance(res, ThermoResult)
    assert res.n_imaginary == 0 and with_imag.n_imaginary == 1
    assert with_imag.gibbs_correction == res.gibbs_correction
    assert res.gibbs_correction == pytest.approx(res.enthalpy_correction - T * res.entropy)
    assert res.enthalpy_correction == pytest.approx(
        res.zpe + res.h_vibrational + res.h_translational + res.h_rotational
    )
    assert res.entropy == pytest.approx(
        res.s_translational + res.s_rotational + res.s_vibrational + res.s_electronic
    )
    # ZPE = (1/2) h c sum(nu) N_A (common practice, no source).
    assert res.zpe == pytest.approx(0.5 * 5350.0 * 100 * C_LIGHT * 6.62607015e-34 * N_A / 1e3)
    # sigma enters as -R ln(sigma); a doublet adds R ln 2.
    res1 = qrrho_thermo([50.0, 1600.0, 3700.0], masses, coords, T, symmetry_number=1)
    assert res1.entropy - res.entropy == pytest.approx(R_KJ * math.log(2.0), rel=1e-10)
    doublet = qrrho_thermo([50.0, 1600.0, 3700.0], masses, coords, T, 2, spin_multiplicity=2)
    assert doublet.s_electronic == pytest.approx(R_KJ * math.log(2.0))
    with pytest.raises(dataclasses.FrozenInstanceError):
        res.entropy = 0.0  # type: ignore[misc]
    with pytest.raises(InputError):
        qrrho_thermo([0.0, 1600.0, 3700.0], masses, coords, T)
    with pytest.raises(OptionError):
        qrrho_thermo([1600.0], masses, coords, T, symmetry_number=0)


# --------------------------------------------------------------------------- symmetry
def _mmff(mol: Chem.Mol) -> Chem.Mol:
    props = AllChem.MMFFGetMoleculeProperties(mol)
    ff = AllChem.MMFFGetMoleculeForceField(mol, props)
    ff.Minimize(maxIts=20000, forceTol=1e-8, energyTol=1e-12)
    return mol


def _embedded(smiles: str, seed: int = 1) -> Chem.Mol:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    assert AllChem.EmbedMolecule(mol, randomSeed=seed) == 0
    return _mmff(mol)


def _cyclohexane(theta_deg: float, phi_deg: float) -> Chem.Mol:
    """Cyclohexane from Cremer-Pople coordinates (J. Am. Chem. Soc. 1975, 97, 1354),
    hydrogens added and minimised with MMFF94: theta 0 is the chair, theta 90 with
    phi 30 the twist-boat."""
    mol = Chem.MolFromSmiles("C1CCCCC1")
    conf = Chem.Conformer(6)
    q, radius = 0.63, 1.45
    q2, q3 = q * math.sin(math.radians(theta_deg)), q * math.cos(math.radians(theta_deg))
    for j in range(6):
        z = math.sqrt(1 / 3) * q2 * math.cos(math.radians(phi_deg) + 4 * math.pi * j / 6)
        z += math.sqrt(1 / 6) * q3 * (-1) ** j
        angle = 2 * math.pi * j / 6
        conf.SetAtomPosition(j, Point3D(radius * math.cos(angle), radius * math.sin(angle), z))
    mol.AddConformer(conf)
    return _mmff(Chem.AddHs(mol, addCoords=True))


# Rotational symmetry numbers of point groups (common practice, no source):
# D3d 6, D2 4, D6h 12, C2v 2, Td 12, C3v 3, Cs 1, D_inf_h 2, C_inf_v 1.
@pytest.mark.parametrize(
    ("smiles", "sigma"),
    [
        ("c1ccccc1", 12),
        ("O", 2),
        ("C", 12),
        ("N", 3),
        ("CC1CCCCC1", 1),
        ("O=C=O", 2),
        ("C#N", 1),
        ("CC", 6),
    ],
)
def test_rotational_symmetry_numbers(smiles, sigma):
    assert rotational_symmetry_number(_embedded(smiles)) == sigma


def test_cyclohexane_chair_and_twist_boat():
    chair = _cyclohexane(0.0, 0.0)
    twist_boat = _cyclohexane(90.0, 30.0)
    assert rotational_symmetry_number(chair) == 6
    assert rotational_symmetry_number(twist_boat) == 4
    # The twist-boat lies above the chair in MMFF94 (about 6 kcal/mol; common practice).
    energies = []
    for mol in (chair, twist_boat):
        props = AllChem.MMFFGetMoleculeProperties(mol)
        energies.append(AllChem.MMFFGetMoleculeForceField(mol, props).CalcEnergy())
    assert energies[1] - energies[0] > 3.0


def test_distorted_structure_loses_symmetry():
    water = _embedded("O")
    conf = water.GetConformer()
    o, h = conf.GetAtomPosition(0), conf.GetAtomPosition(1)
    conf.SetAtomPosition(1, o + (h - o) * 1.3)
    assert rotational_symmetry_number(water) == 1
    assert rotational_symmetry_number(water, tolerance=1.0) == 2


def test_symmetry_number_input_errors():
    with pytest.raises(InputError, match="conformer"):
        rotational_symmetry_number(Chem.AddHs(Chem.MolFromSmiles("C")))
    heavy = Chem.RemoveHs(_embedded("CC"))
    with pytest.raises(InputError, match="explicit"):
        rotational_symmetry_number(heavy)
    with pytest.raises(OptionError):
        rotational_symmetry_number(_embedded("C"), tolerance=0.0)


def test_is_linear():
    assert is_linear([12.0, 16.0, 16.0], [[0, 0, 0], [0, 0, 1.16], [0, 0, -1.16]])
    assert not is_linear([16.0, 1.0, 1.0], [[0, 0, 0], [0.76, 0, 0.59], [-0.76, 0, 0.59]])
    assert not is_linear([40.0], [[0, 0, 0]])
