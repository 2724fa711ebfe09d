"""Physical constants (CODATA 2018) and unit conversions used throughout chairbuild.

Values follow the 2018 CODATA recommended values (Tiesinga et al., Rev. Mod. Phys.
2021, 93, 025010); those defined exactly by the 2019 SI are exact here. This is the
only place in the project where a physical constant or conversion factor is written.
"""

from __future__ import annotations

#: Boltzmann constant, J K^-1 (exact).
K_B = 1.380649e-23
#: Avogadro constant, mol^-1 (exact).
N_A = 6.02214076e23
#: Planck constant, J s (exact).
H_PLANCK = 6.62607015e-34
#: Speed of light in vacuum, m s^-1 (exact).
C_LIGHT = 299792458.0
#: Molar gas constant, J mol^-1 K^-1 (exact: K_B * N_A).
R_GAS = K_B * N_A
#: Molar gas constant, kJ mol^-1 K^-1.
R_KJ = R_GAS / 1000.0
#: Thermochemical calorie, J (exact by definition).
CAL = 4.184
#: kJ/mol per kcal/mol.
KCAL_TO_KJ = CAL
#: kcal/mol per kJ/mol.
KJ_TO_KCAL = 1.0 / CAL
#: Hartree energy, J.
HARTREE_J = 4.3597447222071e-18
#: Hartree energy in kJ/mol.
HARTREE_TO_KJ = HARTREE_J * N_A / 1000.0
#: Electronvolt, J (exact: the elementary charge times 1 V).
ELECTRON_VOLT_J = 1.602176634e-19
#: Electronvolt in kJ/mol.
EV_TO_KJ = ELECTRON_VOLT_J * N_A / 1000.0
#: Bohr radius, Å.
BOHR_TO_ANGSTROM = 0.529177210903
#: Å per bohr inverse.
ANGSTROM_TO_BOHR = 1.0 / BOHR_TO_ANGSTROM
#: nm per Å.
ANGSTROM_TO_NM = 0.1
#: Å per nm.
NM_TO_ANGSTROM = 10.0
#: Atomic mass constant, kg.
AMU_KG = 1.66053906660e-27
#: Standard pressure, Pa (1 bar).
P_STANDARD = 1.0e5
#: Default temperature, K.
T_DEFAULT = 298.15

#: Metres per Å (exact).
ANGSTROM_TO_METRE = 1.0e-10
#: J per kJ (exact).
KJ_TO_J = 1000.0
#: Wavenumber conversion: m^-1 per cm^-1 (exact).
WAVENUMBER_CM_TO_M = 100.0
#: Average molecular moment of inertia B_av of the quasi-RRHO free-rotor entropy, kg m^2
#: (method parameter, Grimme, Chem. Eur. J. 2012, 18, 9955).
QRRHO_B_AV = 1.0e-44


def rt_kj(temperature: float) -> float:
    """Return RT in kJ/mol at ``temperature`` (K)."""
    return R_KJ * temperature
