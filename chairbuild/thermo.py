"""Boltzmann populations, equilibrium constants and quasi-RRHO free energies.

Energies are kJ/mol, entropies kJ mol^-1 K^-1, temperatures K, frequencies cm^-1,
masses atomic mass units (unified, u) and coordinates Å. Every physical constant comes
from :mod:`chairbuild.constants` (CODATA 2018).

Sign conventions
----------------
``delta_g`` is G(products) - G(reactants) of the reaction whose equilibrium constant
is ``K = [products] / [reactants]``, so ``delta_g = -RT ln K``. For a ring flip
axial -> equatorial with the A-value ``A = G(axial) - G(equatorial)``, ``K = exp(A/RT)``.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from chairbuild.constants import (
    AMU_KG,
    ANGSTROM_TO_METRE,
    C_LIGHT,
    H_PLANCK,
    K_B,
    KJ_TO_J,
    N_A,
    P_STANDARD,
    QRRHO_B_AV,
    R_KJ,
    T_DEFAULT,
    WAVENUMBER_CM_TO_M,
)
from chairbuild.errors import InputError, OptionError

__all__ = [
    "ThermoResult",
    "atomic_masses",
    "boltzmann_populations",
    "delta_g_from_k",
    "equilibrium_constant",
    "free_rotor_entropy",
    "harmonic_frequencies",
    "harmonic_vibrational_entropy",
    "is_linear",
    "principal_moments",
    "qrrho_thermo",
    "qrrho_vibrational_entropy",
    "qrrho_weights",
    "rotational_symmetry_number",
]

#: Default tolerance (Å) under which a molecule counts as linear: the mass-weighted
#: root-mean-square distance of the atoms from the principal axis of smallest moment.
LINEAR_TOLERANCE = 0.01


# --------------------------------------------------------------------------- checks
def _check_temperature(temperature: float) -> float:
    t = float(temperature)
    if not math.isfinite(t) or t <= 0.0:
        raise OptionError(f"temperature must be a finite number > 0 K, got {temperature!r}")
    return t


def _as_vector(values: Any, what: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise InputError(f"{what} must be a 1-D sequence, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{what} contain NaN or infinity")
    return arr


def _masses_and_coords(masses_amu: Any, coords_a: Any) -> tuple[np.ndarray, np.ndarray]:
    m = _as_vector(masses_amu, "masses")
    x = np.asarray(coords_a, dtype=float)
    if x.shape != (m.size, 3):
        raise InputError(f"coordinates of shape {x.shape} given for {m.size} masses")
    if not np.all(np.isfinite(x)):
        raise InputError("coordinates contain NaN or infinity")
    if m.size == 0 or np.any(m <= 0.0):
        raise InputError("masses must be positive and at least one atom is needed")
    return m, x


# --------------------------------------------------------------------------- populations
def boltzmann_populations(
    energies_kj: Any,
    temperature: float = T_DEFAULT,
    degeneracies: Any = None,
) -> np.ndarray:
    """Return Boltzmann populations ``p_i = g_i exp(-E_i/RT) / sum_j g_j exp(-E_j/RT)``.

    Computed in log space (shifted by the largest log-weight), so the result does not
    change when every energy is shifted by the same constant and does not overflow.

    Parameters
    ----------
    energies_kj : array_like
        Energies (or free energies), kJ/mol, shape ``(n,)``.
    temperature : float
        Temperature, K (default 298.15).
    degeneracies : array_like, optional
        Degeneracies ``g_i > 0`` (e.g. the number of symmetry-equivalent copies of a
        conformer); default all 1.

    Returns
    -------
    numpy.ndarray
        Populations, shape ``(n,)``, summing to 1.

    Raises
    ------
    InputError
        Empty or non-finite energies, or degeneracies of the wrong shape or not > 0.
    OptionError
        Temperature not > 0.
    """
    t = _check_temperature(temperature)
    e = _as_vector(energies_kj, "energies")
    if e.size == 0:
        raise InputError("no energies given")
    log_w = -e / (R_KJ * t)
    if degeneracies is not None:
        g = _as_vector(degeneracies, "degeneracies")
        if g.shape != e.shape:
            raise InputError(f"{g.size} degeneracies given for {e.size} energies")
        if np.any(g <= 0.0):
            raise InputError("degeneracies must be > 0")
        log_w = log_w + np.log(g)
    w = np.exp(log_w - log_w.max())
    return w / w.sum()


def equilibrium_constant(delta_g_kj: Any, temperature: float = T_DEFAULT) -> Any:
    """Return ``K = exp(-delta_g / RT)``.

    Parameters
    ----------
    delta_g_kj : float or array_like
        G(products) - G(reactants), kJ/mol.
    temperature : float
        Temperature, K.

    Returns
    -------
    float or numpy.ndarray
        Equilibrium constant(s); a float for a scalar input.

    Raises
    ------
    OptionError
        Temperature not > 0.
    """
    t = _check_temperature(temperature)
    k = np.exp(-np.asarray(delta_g_kj, dtype=float) / (R_KJ * t))
    return float(k) if k.ndim == 0 else k


def delta_g_from_k(k: Any, temperature: float = T_DEFAULT) -> Any:
    """Return ``delta_g = -RT ln K`` in kJ/mol.

    Parameters
    ----------
    k : float or array_like
        Equilibrium constant(s), > 0.
    temperature : float
        Temperature, K.

    Returns
    -------
    float or numpy.ndarray
        G(products) - G(reactants), kJ/mol; a float for a scalar input.

    Raises
    ------
    InputError
        ``k`` not > 0.
    OptionError
        Temperature not > 0.
    """
    t = _check_temperature(temperature)
    arr = np.asarray(k, dtype=float)
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0.0):
        raise InputError("equilibrium constants must be finite and > 0")
    dg = -R_KJ * t * np.log(arr)
    return float(dg) if dg.ndim == 0 else dg


# --------------------------------------------------------------------------- inertia
def atomic_masses(mol: Any) -> np.ndarray:
    """Return the atomic masses (u) of an RDKit molecule.

    Uses ``Atom.GetMass()``: RDKit's standard atomic weight, or the isotope mass where
    an isotope is set.

    Parameters
    ----------
    mol : rdkit.Chem.Mol

    Returns
    -------
    numpy.ndarray
        Masses, shape ``(n_atoms,)``.
    """
    return np.array([a.GetMass() for a in mol.GetAtoms()], dtype=float)


def principal_moments(masses_amu: Any, coords_a: Any) -> tuple[np.ndarray, np.ndarray]:
    """Return the principal moments of inertia (u Å^2) and axes about the centre of mass.

    Parameters
    ----------
    masses_amu : array_like
        Masses, u, shape ``(n,)``.
    coords_a : array_like
        Coordinates, Å, shape ``(n, 3)``.

    Returns
    -------
    moments : numpy.ndarray
        Ascending moments, shape ``(3,)``.
    axes : numpy.ndarray
        Columns are the corresponding unit axes, shape ``(3, 3)``.
    """
    m, x = _masses_and_coords(masses_amu, coords_a)
    r = x - m @ x / m.sum()
    inertia = np.eye(3) * np.sum(m * np.sum(r * r, axis=1)) - (r * m[:, None]).T @ r
    moments, axes = np.linalg.eigh(inertia)
    return np.clip(moments, 0.0, None), axes


def is_linear(
    masses_amu: Any, coords_a: Any, tolerance: float = LINEAR_TOLERANCE
) -> bool:
    """Return True when the atoms lie on a line (one atom counts as not linear).

    The criterion is ``I_min <= M tolerance^2``: the mass-weighted RMS distance of the
    atoms from the principal axis of the smallest moment is at most ``tolerance`` (Å).

    Parameters
    ----------
    masses_amu : array_like
        Masses, u, shape ``(n,)``.
    coords_a : array_like
        Coordinates, Å, shape ``(n, 3)``.
    tolerance : float
        Å (default 0.01).

    Returns
    -------
    bool
    """
    m, x = _masses_and_coords(masses_amu, coords_a)
    if m.size < 2:
        return False
    moments, _ = principal_moments(m, x)
    return bool(moments[0] <= m.sum() * tolerance**2)


# --------------------------------------------------------------------------- frequencies
def _rigid_body_vectors(m: np.ndarray, x: np.ndarray, linear_tolerance: float) -> np.ndarray:
    """Orthonormal mass-weighted translation and rotation vectors, shape (3n, k)."""
    r = x - m @ x / m.sum()
    sqrt_m = np.sqrt(m)
    vectors = []
    for axis in np.eye(3):
        vectors.append((sqrt_m[:, None] * axis[None, :]).ravel())
    moments, axes = principal_moments(m, x)
    for moment, axis in zip(moments, axes.T):
        if moment <= m.sum() * linear_tolerance**2:
            continue  # no rotation about the molecular axis (linear) or at all (atom)
        vectors.append((sqrt_m[:, None] * np.cross(axis[None, :], r)).ravel())
    d = np.array(vectors).T
    q, _ = np.linalg.qr(d)
    return q


def harmonic_frequencies(
    hessian_kj_per_a2: Any,
    masses_amu: Any,
    coords_a: Any,
    project: bool = True,
    linear_tolerance: float = LINEAR_TOLERANCE,
) -> np.ndarray:
    """Return harmonic vibrational wavenumbers (cm^-1) from a Cartesian Hessian.

    The Hessian is mass-weighted, ``H_ij / sqrt(m_i m_j)``. With ``project`` the
    infinitesimal translations and rotations about the centre of mass (the Eckart
    conditions; the rotation about the axis of a linear molecule is omitted) are
    removed exactly: the mass-weighted Hessian is expressed in an orthonormal basis
    of their orthogonal complement and diagonalised there, giving ``3n - 6``
    (``3n - 5`` linear) values. The wavenumber of an eigenvalue ``lambda`` is
    ``sqrt(lambda) / (2 pi c)``; negative eigenvalues (imaginary modes) are returned as
    ``-sqrt(|lambda|) / (2 pi c)``.

    Parameters
    ----------
    hessian_kj_per_a2 : array_like
        Cartesian Hessian, kJ mol^-1 Å^-2, shape ``(3n, 3n)``; symmetrised here.
    masses_amu : array_like
        Masses, u, shape ``(n,)``.
    coords_a : array_like
        Coordinates, Å, shape ``(n, 3)`` (needed for the rotations).
    project : bool
        Remove translations and rotations (default). False returns all ``3n`` values.
    linear_tolerance : float
        See :func:`is_linear`.

    Returns
    -------
    numpy.ndarray
        Wavenumbers in ascending order, cm^-1.

    Raises
    ------
    InputError
        Shapes do not match, or non-finite values.
    """
    m, x = _masses_and_coords(masses_amu, coords_a)
    n3 = 3 * m.size
    h = np.asarray(hessian_kj_per_a2, dtype=float)
    if h.shape != (n3, n3):
        raise InputError(f"Hessian of shape {h.shape} given for {m.size} atoms")
    if not np.all(np.isfinite(h)):
        raise InputError("Hessian contains NaN or infinity")
    inv_sqrt_m = np.repeat(1.0 / np.sqrt(m), 3)
    hmw = 0.5 * (h + h.T) * inv_sqrt_m[:, None] * inv_sqrt_m[None, :]
    if project:
        d = _rigid_body_vectors(m, x, linear_tolerance)
        # QR of [d, I]: the first k columns of Q span the rigid-body vectors d, the
        # other 3n - k columns an orthonormal basis of their orthogonal complement.
        full, _ = np.linalg.qr(np.hstack([d, np.eye(n3)]))
        complement = full[:, d.shape[1] :]
        hmw = complement.T @ hmw @ complement
    eigenvalues = np.linalg.eigvalsh(0.5 * (hmw + hmw.T))
    # kJ mol^-1 Å^-2 u^-1 -> s^-2
    to_si = KJ_TO_J / N_A / (ANGSTROM_TO_METRE**2 * AMU_KG)
    omega = np.sqrt(np.abs(eigenvalues) * to_si)
    wavenumbers = omega / (2.0 * math.pi * C_LIGHT) / WAVENUMBER_CM_TO_M
    return np.sort(np.where(eigenvalues < 0.0, -wavenumbers, wavenumbers))


# --------------------------------------------------------------------------- per-mode terms
def _reduced_frequencies(frequencies_cm: Any, temperature: float) -> np.ndarray:
    nu = _as_vector(np.atleast_1d(frequencies_cm), "frequencies")
    if np.any(nu <= 0.0):
        raise InputError("per-mode terms need real frequencies > 0 cm^-1")
    return H_PLANCK * C_LIGHT * nu * WAVENUMBER_CM_TO_M / (K_B * temperature)


def harmonic_vibrational_entropy(frequencies_cm: Any, temperature: float) -> np.ndarray:
    """Return the harmonic-oscillator entropy of each mode, kJ mol^-1 K^-1.

    ``S = R [x / (e^x - 1) - ln(1 - e^-x)]`` with ``x = h c nu / (k T)``.

    Parameters
    ----------
    frequencies_cm : array_like
        Real wavenumbers > 0, cm^-1.
    temperature : float
        K.

    Returns
    -------
    numpy.ndarray
        One entropy per mode.
    """
    t = _check_temperature(temperature)
    x = _reduced_frequencies(frequencies_cm, t)
    return R_KJ * (x / np.expm1(x) - np.log(-np.expm1(-x)))


def free_rotor_entropy(
    frequencies_cm: Any, temperature: float, b_av: float = QRRHO_B_AV
) -> np.ndarray:
    """Return the free-rotor entropy that replaces a low mode in the quasi-RRHO model.

    Grimme, Chem. Eur. J. 2012, 18, 9955: a mode of frequency ``nu`` (s^-1) is
    treated as a rotor of moment ``mu = h / (8 pi^2 nu)``, limited by an average
    molecular moment ``B_av`` as ``mu' = mu B_av / (mu + B_av)``, with entropy
    ``S_R = R [1/2 + ln(sqrt(8 pi^3 mu' k T / h^2))]``.

    Parameters
    ----------
    frequencies_cm : array_like
        Real wavenumbers > 0, cm^-1.
    temperature : float
        K.
    b_av : float
        ``B_av``, kg m^2 (default 1e-44).

    Returns
    -------
    numpy.ndarray
        One entropy per mode, kJ mol^-1 K^-1.
    """
    t = _check_temperature(temperature)
    _reduced_frequencies(frequencies_cm, t)  # validates
    nu_hz = np.atleast_1d(np.asarray(frequencies_cm, dtype=float)) * WAVENUMBER_CM_TO_M * C_LIGHT
    mu = H_PLANCK / (8.0 * math.pi**2 * nu_hz)
    mu_eff = mu * b_av / (mu + b_av)
    return R_KJ * (0.5 + np.log(np.sqrt(8.0 * math.pi**3 * mu_eff * K_B * t / H_PLANCK**2)))


def qrrho_weights(
    frequencies_cm: Any, cutoff_cm: float = 100.0, alpha: float = 4
) -> np.ndarray:
    """Return the quasi-RRHO damping ``w = 1 / (1 + (nu0 / nu)^alpha)`` of each mode.

    Parameters
    ----------
    frequencies_cm : array_like
        Real wavenumbers > 0, cm^-1.
    cutoff_cm : float
        ``nu0``, cm^-1 (default 100; Grimme, Chem. Eur. J. 2012, 18, 9955).
    alpha : float
        Exponent (default 4).

    Returns
    -------
    numpy.ndarray
        Weights in (0, 1): 1 means harmonic oscillator, 0 free rotor.

    Raises
    ------
    InputError
        A frequency not > 0.
    OptionError
        ``cutoff_cm`` or ``alpha`` not > 0.
    """
    nu = _as_vector(np.atleast_1d(frequencies_cm), "frequencies")
    if np.any(nu <= 0.0):
        raise InputError("per-mode terms need real frequencies > 0 cm^-1")
    if not cutoff_cm > 0 or not alpha > 0:
        raise OptionError("cutoff_cm and alpha must be > 0")
    return 1.0 / (1.0 + (cutoff_cm / nu) ** alpha)


def qrrho_vibrational_entropy(
    frequencies_cm: Any,
    temperature: float,
    cutoff_cm: float = 100.0,
    alpha: float = 4,
    b_av: float = QRRHO_B_AV,
) -> np.ndarray:
    """Return Grimme's quasi-RRHO entropy of each mode, kJ mol^-1 K^-1.

    ``S = w S_HO + (1 - w) S_R`` with ``w = 1 / (1 + (nu0/nu)^alpha)`` (Grimme,
    Chem. Eur. J. 2012, 18, 9955; ``nu0`` = 100 cm^-1, ``alpha`` = 4 there).

    Parameters
    ----------
    frequencies_cm : array_like
        Real wavenumbers > 0, cm^-1.
    temperature : float
        K.
    cutoff_cm : float
        ``nu0``, cm^-1.
    alpha : float
        Exponent of the damping function.
    b_av : float
        ``B_av`` of :func:`free_rotor_entropy`, kg m^2.

    Returns
    -------
    numpy.ndarray
        One entropy per mode.
    """
    w = qrrho_weights(frequencies_cm, cutoff_cm, alpha)
    s_ho = harmonic_vibrational_entropy(frequencies_cm, temperature)
    s_r = free_rotor_entropy(frequencies_cm, temperature, b_av)
    return w * s_ho + (1.0 - w) * s_r


# --------------------------------------------------------------------------- thermochemistry
@dataclasses.dataclass(frozen=True)
class ThermoResult:
    """Ideal-gas thermal corrections of one structure (all per mole).

    Attributes
    ----------
    temperature : float
        K.
    pressure : float
        Standard pressure of the translational entropy, Pa.
    zpe : float
        Harmonic zero-point energy, kJ/mol.
    enthalpy_correction : float
        H - E_el = ZPE + thermal vibrational + translational (5/2 RT, includes pV) +
        rotational energy, kJ/mol.
    entropy : float
        Total entropy S, kJ mol^-1 K^-1.
    gibbs_correction : float
        G - E_el = ``enthalpy_correction - temperature * entropy``, kJ/mol.
    h_translational, h_rotational, h_vibrational : float
        Enthalpy parts, kJ/mol (``h_vibrational`` is thermal only, without the ZPE).
    s_translational, s_rotational, s_vibrational, s_electronic : float
        Entropy parts, kJ mol^-1 K^-1.
    symmetry_number : int
        Rotational symmetry number used.
    linear : bool
        Whether the structure was treated as linear.
    n_imaginary : int
        Number of imaginary (negative) frequencies that were skipped.
    """

    temperature: float
    pressure: float
    zpe: float
    enthalpy_correction: float
    entropy: float
    gibbs_correction: float
    h_translational: float
    h_rotational: float
    h_vibrational: float
    s_translational: float
    s_rotational: float
    s_vibrational: float
    s_electronic: float
    symmetry_number: int
    linear: bool
    n_imaginary: int


def qrrho_thermo(
    frequencies_cm: Any,
    masses_amu: Any,
    coords_a: Any,
    temperature: float = T_DEFAULT,
    symmetry_number: int = 1,
    cutoff_cm: float = 100.0,
    alpha: float = 4,
    *,
    spin_multiplicity: int = 1,
    pressure: float = P_STANDARD,
    b_av: float = QRRHO_B_AV,
    linear_tolerance: float = LINEAR_TOLERANCE,
) -> ThermoResult:
    """Return ideal-gas ZPE, H - E, S and G - E with Grimme's quasi-RRHO entropy.

    * Vibrations: entropy by :func:`qrrho_vibrational_entropy` (Grimme, Chem. Eur. J.
      2012, 18, 9955), which interpolates between the harmonic-oscillator and the
      free-rotor entropy. That paper applies the interpolation to the entropy only;
      here the ZPE and the thermal vibrational enthalpy stay harmonic. (An analogous
      interpolation of the enthalpy was proposed later by Head-Gordon and co-workers,
      J. Phys. Chem. C 2015, 119, 1840, cited from memory; it is not applied.)
      Imaginary modes (negative values) are skipped and counted in ``n_imaginary``.
    * Translation: ideal gas, ``H = 5/2 RT`` and the Sackur-Tetrode entropy at
      ``pressure`` (default 1 bar = 1e5 Pa, the IUPAC standard pressure; a 1 mol/L
      standard state would add ``RT ln(24.79)`` ~ 7.96 kJ/mol at 298.15 K to G).
    * Rotation: classical rigid rotor, ``H = 3/2 RT`` (``RT`` linear, 0 for an atom),
      ``S = R [ln q_rot + 3/2]`` with ``q_rot = sqrt(pi I_A I_B I_C) / sigma
      (8 pi^2 k T / h^2)^(3/2)`` (linear: ``S = R [ln(8 pi^2 I k T / (sigma h^2)) + 1]``).
    * Electronic: ``S = R ln(spin_multiplicity)``, no excited states.

    Parameters
    ----------
    frequencies_cm : array_like
        The ``3n - 6`` (``3n - 5``) vibrational wavenumbers, cm^-1, e.g. from
        :func:`harmonic_frequencies`; empty for an atom.
    masses_amu : array_like
        Masses, u, shape ``(n,)``.
    coords_a : array_like
        Coordinates, Å, shape ``(n, 3)`` (for the moments of inertia).
    temperature : float
        K (default 298.15).
    symmetry_number : int
        Rotational symmetry number (see :func:`rotational_symmetry_number`).
    cutoff_cm : float
        ``nu0`` of the damping function, cm^-1 (default 100).
    alpha : float
        Exponent of the damping function (default 4).
    spin_multiplicity : int
        ``2S + 1`` of the electronic ground state (default 1).
    pressure : float
        Pa (default 1e5).
    b_av : float
        ``B_av``, kg m^2 (default 1e-44).
    linear_tolerance : float
        See :func:`is_linear`.

    Returns
    -------
    ThermoResult

    Raises
    ------
    InputError
        Bad shapes, non-finite values or a frequency of exactly zero.
    OptionError
        Temperature, pressure, symmetry number or spin multiplicity out of range.
    """
    t = _check_temperature(temperature)
    m, x = _masses_and_coords(masses_amu, coords_a)
    nu = _as_vector(np.atleast_1d(np.asarray(frequencies_cm, dtype=float)), "frequencies")
    if np.any(nu == 0.0):
        raise InputError("a frequency of exactly 0 cm^-1: pass only the vibrational modes")
    if int(symmetry_number) != symmetry_number or symmetry_number < 1:
        raise OptionError(f"symmetry_number must be an integer >= 1, got {symmetry_number!r}")
    if int(spin_multiplicity) != spin_multiplicity or spin_multiplicity < 1:
        raise OptionError(f"spin_multiplicity must be an integer >= 1, got {spin_multiplicity!r}")
    if not pressure > 0:
        raise OptionError(f"pressure must be > 0 Pa, got {pressure!r}")
    rt = R_KJ * t
    kt = K_B * t

    real = nu[nu > 0.0]
    n_imaginary = int(np.sum(nu < 0.0))
    if real.size:
        x_red = _reduced_frequencies(real, t)
        zpe = float(np.sum(0.5 * H_PLANCK * C_LIGHT * real * WAVENUMBER_CM_TO_M) * N_A / KJ_TO_J)
        h_vib = float(rt * np.sum(x_red / np.expm1(x_red)))
        s_vib = float(np.sum(qrrho_vibrational_entropy(real, t, cutoff_cm, alpha, b_av)))
    else:
        zpe = h_vib = s_vib = 0.0

    mass_kg = float(m.sum()) * AMU_KG
    lam3 = (2.0 * math.pi * mass_kg * kt / H_PLANCK**2) ** 1.5
    s_trans = R_KJ * (math.log(lam3 * kt / float(pressure)) + 2.5)
    h_trans = 2.5 * rt

    moments, _ = principal_moments(m, x)
    moments_si = moments * AMU_KG * ANGSTROM_TO_METRE**2
    linear = m.size > 1 and is_linear(m, x, linear_tolerance)
    if m.size == 1:
        s_rot = h_rot = 0.0
    elif linear:
        q_rot = 8.0 * math.pi**2 * moments_si[2] * kt / (symmetry_number * H_PLANCK**2)
        s_rot = R_KJ * (math.log(q_rot) + 1.0)
        h_rot = rt
    else:
        q_rot = (
            math.sqrt(math.pi * float(np.prod(moments_si)))
            / symmetry_number
            * (8.0 * math.pi**2 * kt / H_PLANCK**2) ** 1.5
        )
        s_rot = R_KJ * (math.log(q_rot) + 1.5)
        h_rot = 1.5 * rt
    s_el = R_KJ * math.log(int(spin_multiplicity))

    enthalpy = zpe + h_vib + h_trans + h_rot
    entropy = s_trans + s_rot + s_vib + s_el
    return ThermoResult(
        temperature=t,
        pressure=float(pressure),
        zpe=zpe,
        enthalpy_correction=enthalpy,
        entropy=entropy,
        gibbs_correction=enthalpy - t * entropy,
        h_translational=h_trans,
        h_rotational=h_rot,
        h_vibrational=h_vib,
        s_translational=s_trans,
        s_rotational=s_rot,
        s_vibrational=s_vib,
        s_electronic=s_el,
        symmetry_number=int(symmetry_number),
        linear=bool(linear),
        n_imaginary=n_imaginary,
    )


# --------------------------------------------------------------------------- symmetry
def rotational_symmetry_number(
    mol: Any, conf_id: int = -1, tolerance: float = 0.1
) -> int:
    """Return the rotational symmetry number of one 3D conformer.

    The symmetry number is the number of proper rotations (including the identity)
    that map the rigid conformer onto itself. They are found directly:

    1. Atoms are grouped into classes of graph-equivalent atoms by RDKit's
       ``CanonicalRankAtoms(breakTies=False)``; a symmetry operation can only map an
       atom onto one of its own class.
    2. With the centre of mass at the origin, two reference atoms ``a`` and ``b`` that
       are not collinear with it define an orthonormal frame. For every candidate image
       ``(a', b')`` from the same classes with matching distances, the proper
       rotation taking the frame of ``(a, b)`` onto that of ``(a', b')`` is built.
    3. The rotated conformer is matched atom by atom onto the original within each
       class (optimal assignment); the rotation counts when, after a final proper
       Kabsch fit with that atom mapping, the RMSD is at most ``tolerance`` (Å).

    Linear molecules give 2 when the rotation by pi about an axis perpendicular to the
    molecular axis maps them onto themselves, else 1; a single atom gives 1. Only the
    external symmetry of the rigid conformer is counted (no internal rotors).

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogen atoms and a 3D conformer.
    conf_id : int
        Conformer id (default: the default conformer).
    tolerance : float
        RMSD threshold, Å (default 0.1).

    Returns
    -------
    int
        The rotational symmetry number, >= 1.

    Raises
    ------
    InputError
        No conformer, or hydrogens that are not explicit atoms.
    OptionError
        ``tolerance`` not > 0.
    """
    from rdkit import Chem

    if not tolerance > 0:
        raise OptionError(f"tolerance must be > 0 Å, got {tolerance!r}")
    if mol.GetNumConformers() == 0:
        raise InputError("the molecule has no conformer")
    if any(a.GetTotalNumHs(includeNeighbors=False) > 0 for a in mol.GetAtoms()):
        raise InputError("hydrogens must be explicit atoms (rdkit.Chem.AddHs)")
    x = np.array(mol.GetConformer(conf_id).GetPositions(), dtype=float)
    m = atomic_masses(mol)
    classes = np.array(
        list(Chem.CanonicalRankAtoms(mol, breakTies=False, includeChirality=False))
    )
    return _count_proper_rotations(x, m, classes, float(tolerance))


def _count_proper_rotations(
    x: np.ndarray, m: np.ndarray, classes: np.ndarray, tol: float
) -> int:
    from scipy.optimize import linear_sum_assignment

    n = m.size
    if n == 1:
        return 1
    r = x - m @ x / m.sum()
    groups = [np.flatnonzero(classes == c) for c in np.unique(classes)]

    def match(y: np.ndarray) -> np.ndarray | None:
        """Atom mapping perm with y[i] ~ r[perm[i]], or None if it is not within tol."""
        perm = np.empty(n, dtype=int)
        for idx in groups:
            cost = np.linalg.norm(y[idx][:, None, :] - r[idx][None, :, :], axis=2)
            rows, cols = linear_sum_assignment(cost)
            perm[idx[rows]] = idx[cols]
        dev = np.sum((y - r[perm]) ** 2, axis=1)
        if math.sqrt(dev.mean()) > 3.0 * tol:
            return None
        return perm

    def kabsch_rmsd(perm: np.ndarray) -> float:
        # Best proper rotation taking r onto r[perm] (both centred at the origin).
        u, _, vt = np.linalg.svd(r.T @ r[perm])
        sign = np.sign(np.linalg.det(u @ vt)) or 1.0
        rot = u @ np.diag([1.0, 1.0, sign]) @ vt
        return math.sqrt(np.mean(np.sum((r @ rot - r[perm]) ** 2, axis=1)))

    if is_linear(m, x, tolerance=tol):
        perm = match(-r)
        return 2 if perm is not None and kabsch_rmsd(perm) <= tol else 1

    dist = np.linalg.norm(r, axis=1)
    size = {int(c): int(np.sum(classes == c)) for c in np.unique(classes)}
    far = dist > max(tol, 0.1 * dist.max())
    cand_a = np.flatnonzero(far)
    a = min(cand_a, key=lambda i: (size[int(classes[i])], -dist[i]))
    e1 = r[a] / dist[a]
    perp = np.linalg.norm(r - np.outer(r @ e1, e1), axis=1)
    cand_b = np.flatnonzero(perp >= 0.5 * perp.max())
    b = min(cand_b, key=lambda i: (size[int(classes[i])], -perp[i]))

    def frame(p: np.ndarray, q: np.ndarray) -> np.ndarray:
        f1 = p / np.linalg.norm(p)
        f2 = q - (q @ f1) * f1
        f2 /= np.linalg.norm(f2)
        return np.column_stack([f1, f2, np.cross(f1, f2)])

    f_ref = frame(r[a], r[b])
    d_ab = np.linalg.norm(r[a] - r[b])
    window = 3.0 * tol
    found: set[tuple[int, ...]] = set()
    for a2 in np.flatnonzero(classes == classes[a]):
        if abs(dist[a2] - dist[a]) > window:
            continue
        for b2 in np.flatnonzero(classes == classes[b]):
            if b2 == a2 or abs(dist[b2] - dist[b]) > window:
                continue
            if abs(np.linalg.norm(r[a2] - r[b2]) - d_ab) > window:
                continue
            if np.linalg.norm(np.cross(r[a2], r[b2])) < 1e-8:
                continue
            rot = frame(r[a2], r[b2]) @ f_ref.T  # proper: maps frame(a, b) onto frame(a2, b2)
            perm = match(r @ rot.T)
            if perm is None or len(set(perm.tolist())) != n:
                continue
            if kabsch_rmsd(perm) <= tol:
                found.add(tuple(perm.tolist()))
    return max(1, len(found))
