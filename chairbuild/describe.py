"""Describe a conformer: ring puckering, ring shape, endocyclic torsions, substituent positions.

Everything here is computed from the final (minimised) coordinates, never copied from
the starting geometry.

Cremer–Pople puckering (Cremer & Pople, J. Am. Chem. Soc. 1975, 97, 1354) for a
six-membered ring with atoms j = 0..5 at positions r_j:

* centre the ring, build R' = Σ r_j sin(2πj/6) and R'' = Σ r_j cos(2πj/6); the mean
  plane's normal is n = R' × R'' / |R' × R''|; z_j = r_j · n;
* q2 cos φ = √(2/6) Σ z_j cos(4πj/6), q2 sin φ = −√(2/6) Σ z_j sin(4πj/6),
  q3 = √(1/6) Σ (−1)^j z_j;
* Q = √(q2² + q3²), θ = atan2(q2, q3) in 0–180°, φ in 0–360°.

Shape labels (this project's thresholds, on θ' = min(θ, 180° − θ) and on φ folded to the
nearest multiple of 60°; δφ = distance of φ from the nearest multiple of 60°, 0–30°):

=================  =======================================================
planar             Q < 0.10 Å
chair              θ' < 25°
envelope           25° ≤ θ' < 62° and δφ < 15°
half-chair         25° ≤ θ' < 62° and δφ ≥ 15°
screw-boat         62° ≤ θ' < 78°
boat               θ' ≥ 78° and δφ < 10°
twist-boat         θ' ≥ 78° and δφ ≥ 10°
=================  =======================================================

(ideal envelope θ = 54.7°, half-chair 50.8°, screw-boat 67.5°; boats φ = 0°, 60°, …;
twist-boats φ = 30°, 90°, …; Cremer & Pople 1975 and Boeyens, J. Cryst. Mol. Struct.
1978, 8, 317.)

Substituent position: c = |cos| of the angle between the ring–substituent bond and the
ring's mean-plane normal. In a chair an axial bond is nearly parallel to the normal
(ideal c ≈ 1.0) and an equatorial bond lies near the plane (ideal c ≈ 0.33); the
chair threshold is c ≥ 0.66 → axial, else equatorial. In any other shape the labels are
pseudo-axial (c ≥ 0.80), pseudo-equatorial (c < 0.50) and isoclinal (in between); an
sp2 ring atom's exocyclic bond that lies in the ring's local plane (c < 0.25 on an sp2
atom) is "in-plane".
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from chairbuild.result import Position, RingDescriptor, RingShape

__all__ = [
    "cremer_pople",
    "ring_shape",
    "ring_torsions",
    "dihedral",
    "describe_ring",
    "substituent_position",
    "mean_plane_normal",
]

_PLANAR_Q = 0.10
_CHAIR_THETA = 25.0
_HALF_THETA = 62.0
_SCREW_THETA = 78.0
_ENVELOPE_DPHI = 15.0
_BOAT_DPHI = 10.0
_AXIAL_COS = 0.66
_PSEUDO_AXIAL_COS = 0.80
_PSEUDO_EQ_COS = 0.50
_IN_PLANE_COS = 0.25


def dihedral(p0: np.ndarray, p1: np.ndarray, p2: np.ndarray, p3: np.ndarray) -> float:
    """Return the dihedral angle p0-p1-p2-p3 in degrees (−180, 180]."""
    b0 = p0 - p1
    b1 = p2 - p1
    b2 = p3 - p2
    b1n = b1 / np.linalg.norm(b1)
    v = b0 - np.dot(b0, b1n) * b1n
    w = b2 - np.dot(b2, b1n) * b1n
    x = np.dot(v, w)
    y = np.dot(np.cross(b1n, v), w)
    return float(np.degrees(np.arctan2(y, x)))


def mean_plane_normal(ring_xyz: np.ndarray) -> np.ndarray:
    """Unit normal of the Cremer–Pople mean plane of a ring (positions in ring order)."""
    xyz = np.asarray(ring_xyz, dtype=float)
    n = len(xyz)
    centred = xyz - xyz.mean(axis=0)
    angles = 2.0 * np.pi * np.arange(n) / n
    r1 = (centred * np.sin(angles)[:, None]).sum(axis=0)
    r2 = (centred * np.cos(angles)[:, None]).sum(axis=0)
    normal = np.cross(r1, r2)
    return normal / np.linalg.norm(normal)


def cremer_pople(ring_xyz: np.ndarray) -> tuple[float, float, float]:
    """Cremer–Pople puckering of a six-membered ring.

    Parameters
    ----------
    ring_xyz : numpy.ndarray
        Shape (6, 3), positions in ring order (Å).

    Returns
    -------
    tuple of float
        (Q in Å, θ in degrees 0–180, φ in degrees 0–360).
    """
    xyz = np.asarray(ring_xyz, dtype=float)
    if xyz.shape != (6, 3):
        from chairbuild.errors import InputError

        raise InputError(f"Cremer–Pople parameters need 6 ring positions, got shape {xyz.shape}")
    centred = xyz - xyz.mean(axis=0)
    z = centred @ mean_plane_normal(xyz)
    j = np.arange(6)
    q2c = np.sqrt(2.0 / 6.0) * np.sum(z * np.cos(4.0 * np.pi * j / 6.0))
    q2s = -np.sqrt(2.0 / 6.0) * np.sum(z * np.sin(4.0 * np.pi * j / 6.0))
    q3 = np.sqrt(1.0 / 6.0) * np.sum(z * (-1.0) ** j)
    q2 = float(np.hypot(q2c, q2s))
    q_total = float(np.hypot(q2, q3))
    theta = float(np.degrees(np.arctan2(q2, q3)))
    phi = float(np.degrees(np.arctan2(q2s, q2c))) % 360.0
    return q_total, theta, phi


def ring_shape(q_total: float, theta: float, phi: float) -> RingShape:
    """Classify a six-membered ring from its Cremer–Pople coordinates (thresholds in module doc)."""
    if q_total < _PLANAR_Q:
        return RingShape.PLANAR
    theta_p = min(theta, 180.0 - theta)
    dphi = abs(((phi + 30.0) % 60.0) - 30.0)  # 0 at multiples of 60°, 30 at odd multiples of 30°
    if theta_p < _CHAIR_THETA:
        return RingShape.CHAIR
    if theta_p < _HALF_THETA:
        return RingShape.ENVELOPE if dphi < _ENVELOPE_DPHI else RingShape.HALF_CHAIR
    if theta_p < _SCREW_THETA:
        return RingShape.SCREW_BOAT
    return RingShape.BOAT if dphi < _BOAT_DPHI else RingShape.TWIST_BOAT


def ring_torsions(coords: np.ndarray, ring: Sequence[int]) -> tuple[float, ...]:
    """The six endocyclic torsions (degrees); torsion k is ring[k], ring[k+1], ring[k+2], ring[k+3]."""
    n = len(ring)
    return tuple(
        dihedral(*(coords[ring[(k + m) % n]] for m in range(4))) for k in range(n)
    )


def describe_ring(coords: np.ndarray, ring: Sequence[int]) -> RingDescriptor:
    """Puckering, shape and torsions of one ring in one conformer."""
    xyz = np.asarray(coords, dtype=float)[list(ring)]
    q_total, theta, phi = cremer_pople(xyz)
    return RingDescriptor(
        atoms=tuple(int(a) for a in ring),
        shape=ring_shape(q_total, theta, phi),
        q_total=q_total,
        theta=theta,
        phi=phi,
        torsions=ring_torsions(np.asarray(coords, dtype=float), ring),
    )


def substituent_position(
    coords: np.ndarray,
    ring: Sequence[int],
    ring_atom: int,
    atom: int,
    shape: RingShape,
    ring_atom_is_sp2: bool = False,
) -> tuple[Position, float]:
    """Position label of the bond ring_atom → atom relative to ring ``ring``.

    Returns
    -------
    tuple
        (:class:`Position`, |cos| of the angle between the bond and the mean-plane normal).
    """
    xyz = np.asarray(coords, dtype=float)
    normal = mean_plane_normal(xyz[list(ring)])
    bond = xyz[atom] - xyz[ring_atom]
    c = float(abs(np.dot(bond, normal)) / np.linalg.norm(bond))
    if ring_atom_is_sp2 and c < _IN_PLANE_COS:
        return Position.IN_PLANE, c
    if shape is RingShape.CHAIR:
        return (Position.AXIAL if c >= _AXIAL_COS else Position.EQUATORIAL), c
    if c >= _PSEUDO_AXIAL_COS:
        return Position.PSEUDO_AXIAL, c
    if c < _PSEUDO_EQ_COS:
        return Position.PSEUDO_EQUATORIAL, c
    return Position.ISOCLINAL, c


def describe_conformer(mol, analysis, coords: np.ndarray):
    """Ring descriptors and substituent descriptors of one conformer.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
    analysis : chairbuild.rings.RingAnalysis
    coords : numpy.ndarray
        (n_atoms, 3), Å.

    Returns
    -------
    tuple
        (tuple of RingDescriptor, tuple of SubstituentDescriptor)
    """
    from chairbuild.result import SubstituentDescriptor

    xyz = np.asarray(coords, dtype=float)
    rings = tuple(describe_ring(xyz, ring.atoms) for ring in analysis.rings)
    subs = []
    for sub in analysis.substituents:
        ring = analysis.rings[sub.ring_index]
        sp2 = ring.sp2[ring.atoms.index(sub.ring_atom)]
        position, cos_n = substituent_position(xyz, ring.atoms, sub.ring_atom, sub.atom, rings[sub.ring_index].shape, sp2)
        torsions = {}
        for rotor in analysis.rotors:
            i, j, k, l = rotor.atoms
            if (j, k) == (sub.ring_atom, sub.atom):
                torsions[f"{i}-{j}-{k}-{l}"] = dihedral(xyz[i], xyz[j], xyz[k], xyz[l])
        subs.append(
            SubstituentDescriptor(
                atom=sub.atom,
                ring_atom=sub.ring_atom,
                ring_index=sub.ring_index,
                group=sub.group,
                position=position,
                cos_normal=cos_n,
                torsions=torsions,
            )
        )
    return rings, tuple(subs)
