"""Vicinal 3J(H,H) from a torsion: the Haasnoot–de Leeuw–Altona (HLA) equation and Garbisch's allylic form.

HLA generalised Karplus equation (Haasnoot, de Leeuw & Altona, Tetrahedron 1980, 36, 2783),
for a fragment H–C–C–H with torsion φ = τ(H, C, C', H'):

    3J = P1 cos²φ + P2 cos φ + P3 + Σ_i Δχ_i [P4 + P5 cos²(ξ_i φ + P6 |Δχ_i|)]

* i runs over the non-hydrogen substituents of the two fragment carbons (not the coupled
  protons, not the other fragment carbon);
* Δχ_i = (χ_α − χ_H) − P7 Σ_β (χ_β − χ_H): χ on the Huggins scale, α the substituent atom,
  β the atoms bonded to α other than the fragment carbon (the "β-effect" correction);
* ξ_i = ±1, the orientation of substituent i. Looking along the fragment bond from the
  substituent's carbon C_i to the other carbon C_j, the three substituents of C_i sit 120°
  apart; with τ(X) = τ(X, C_i, C_j, H_j), a substituent one third of a turn *ahead* of
  the coupled proton H_i, τ(S) − τ(H_i) ≈ +120°, has ξ = −1, one a third of a turn behind
  (≈ −120°) has ξ = +1. With this rule a substituent antiperiplanar to the other coupled
  proton gets cos²(|φ| − P6|Δχ|) in a gauche fragment, the larger cos², and so lowers the
  gauche coupling, as the HLA paper describes; a trans fragment is not affected by the
  sign. The rule depends only on the arrangement around C_i, not on the sign of φ, so a
  conformer and its mirror image get the same couplings.

Parameter set by the number n of non-hydrogen substituents on the fragment (0–4),
following the HLA paper, which fitted one set per substitution class as well as general
sets over all its data: n = 2 → set C, n = 3 → set D, n = 4 → set E (each fitted to its own
class and closer to it than the general sets); n = 0 or 1 → the general set B (with the β
correction), since the paper fits no dedicated set for the lightly substituted classes.
Set A (general, no β term) is kept in the data file for comparison only.

Garbisch (J. Am. Chem. Soc. 1964, 86, 5561) for H–C(sp2)–C(sp3)–H (allylic, e.g. in a
cyclohexene): 3J = 6.6 cos²φ + 2.6 sin²φ for |φ| ≤ 90°, 11.6 cos²φ + 2.6 sin²φ for |φ| > 90°.

Every number comes from ``chairbuild/data/karplus_parameters.csv`` (source and flag per
value). Electronegativities exist there for H, C, N, O, F, Cl, Br and I only (the Huggins
values of S, Si and P are not settled); a fragment that needs any other element gets no
coupling, and the caller reports it.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from typing import Mapping, Sequence

import numpy as np

from chairbuild.errors import InputError

__all__ = [
    "HLAParameters",
    "hla_parameters",
    "electronegativities",
    "garbisch_coefficients",
    "parameter_set_for",
    "delta_chi",
    "xi_sign",
    "hla_coupling",
    "garbisch_coupling",
    "parameter_table",
]

_DATA = "karplus_parameters.csv"


@dataclass(frozen=True)
class HLAParameters:
    """One HLA parameter set (P1–P5 in Hz, P6 in degrees, P7 dimensionless).

    Attributes
    ----------
    name : str
        Set name as in the data file (``"A"`` … ``"E"``).
    use : str
        What the set was fitted to.
    p : tuple of float
        (P1, P2, P3, P4, P5, P6, P7); P7 is 0 for a set without the β term.
    source : str
        Citation with its flag.
    """

    name: str
    use: str
    p: tuple[float, float, float, float, float, float, float]
    source: str


@lru_cache(maxsize=1)
def parameter_table() -> tuple[dict[str, str], ...]:
    """Every row of the data file, as dictionaries (read once)."""
    text = resources.files("chairbuild").joinpath("data", _DATA).read_text(encoding="utf-8")
    return tuple(dict(row) for row in csv.DictReader(text.splitlines()))


@lru_cache(maxsize=1)
def hla_parameters() -> Mapping[str, HLAParameters]:
    """The HLA parameter sets by name."""
    values: dict[str, dict[str, float]] = {}
    meta: dict[str, tuple[str, str]] = {}
    for row in parameter_table():
        if row["table"] != "hla":
            continue
        values.setdefault(row["key"], {})[row["parameter"]] = float(row["value"])
        meta[row["key"]] = (row["use"], f"{row['source']} [{row['flag']}]")
    out = {}
    for name, v in values.items():
        p = tuple(v.get(f"P{k}", 0.0) for k in range(1, 8))
        out[name] = HLAParameters(name=name, use=meta[name][0], p=p, source=meta[name][1])  # type: ignore[arg-type]
    return out


@lru_cache(maxsize=1)
def electronegativities() -> Mapping[str, float]:
    """Huggins electronegativity by element symbol."""
    return {r["key"]: float(r["value"]) for r in parameter_table() if r["table"] == "electronegativity"}


@lru_cache(maxsize=1)
def garbisch_coefficients() -> tuple[float, float, float]:
    """(cos² coefficient for |φ| ≤ 90°, cos² coefficient for |φ| > 90°, sin² coefficient), Hz."""
    v = {r["parameter"]: float(r["value"]) for r in parameter_table() if r["table"] == "garbisch"}
    return v["cos2_low"], v["cos2_high"], v["sin2"]


def parameter_set_for(n_substituents: int) -> HLAParameters:
    """The HLA set used for a fragment with ``n_substituents`` non-H substituents (module doc)."""
    if not 0 <= n_substituents <= 4:
        raise InputError(f"an H–C–C–H fragment has 0 to 4 non-hydrogen substituents, got {n_substituents}")
    name = {2: "C", 3: "D", 4: "E"}.get(n_substituents, "B")
    return hla_parameters()[name]


def delta_chi(alpha: str, betas: Sequence[str], params: HLAParameters) -> float:
    """Δχ of one substituent: (χ_α − χ_H) − P7 Σ_β (χ_β − χ_H).

    Parameters
    ----------
    alpha : str
        Element of the substituent atom.
    betas : sequence of str
        Elements of the atoms bonded to it, the fragment carbon excluded.
    params : HLAParameters

    Raises
    ------
    KeyError
        An element without a Huggins electronegativity in the data file.
    """
    chi = electronegativities()
    h = chi["H"]
    return (chi[alpha] - h) - params.p[6] * sum(chi[b] - h for b in betas)


def xi_sign(h_i: np.ndarray, c_i: np.ndarray, c_j: np.ndarray, h_j: np.ndarray, s: np.ndarray) -> int:
    """Orientation ξ (±1) of substituent ``s`` on carbon ``c_i`` (module doc)."""
    from chairbuild.describe import dihedral

    delta = (dihedral(s, c_i, c_j, h_j) - dihedral(h_i, c_i, c_j, h_j) + 180.0) % 360.0 - 180.0
    return -1 if delta > 0.0 else 1


def hla_coupling(phi_deg: float, substituents: Sequence[tuple[float, int]], params: HLAParameters) -> float:
    """HLA 3J (Hz) for torsion ``phi_deg`` and substituents given as (Δχ, ξ) pairs."""
    p1, p2, p3, p4, p5, p6, _ = params.p
    phi = np.radians(phi_deg)
    c = np.cos(phi)
    j = p1 * c * c + p2 * c + p3
    for dchi, xi in substituents:
        j += dchi * (p4 + p5 * np.cos(xi * phi + np.radians(p6 * abs(dchi))) ** 2)
    return float(j)


def garbisch_coupling(phi_deg: float) -> float:
    """Garbisch's allylic 3J (Hz) for an H–C(sp2)–C(sp3)–H torsion ``phi_deg``."""
    low, high, s2 = garbisch_coefficients()
    phi = np.radians(phi_deg)
    c2 = np.cos(phi) ** 2
    a = low if abs((phi_deg + 180.0) % 360.0 - 180.0) <= 90.0 else high
    return float(a * c2 + s2 * (1.0 - c2))
