"""Proton groups and vicinal H–C–C–H fragments of a molecule (topology and labels).

Fragments taken: every bond C–C' whose two carbons both carry hydrogens, with

* both carbons sp3 → the HLA equation (set by the number of non-H substituents);
* one carbon an sp2 carbon of a C=C double bond, the other sp3 → Garbisch's allylic form;
* anything else (both sp2, aromatic, an sp2 carbon without a C=C bond such as an
  aldehyde carbon) → left out with a note: no equation of the data file covers it.

Couplings to protons on heteroatoms (OH, NH) are not computed: they exchange and are
rarely resolved. Labels follow :mod:`chairbuild.couplings.records`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from chairbuild.couplings.records import ProtonGroup

__all__ = ["Fragment", "Substituent", "proton_groups", "fragments"]


@dataclass(frozen=True)
class Substituent:
    """A non-H substituent of a fragment carbon, with its Δχ."""

    atom: int
    carrier: int
    delta_chi: float


@dataclass(frozen=True)
class Fragment:
    """Two proton groups on bonded carbons and what the coupling equation needs."""

    group_a: ProtonGroup
    group_b: ProtonGroup
    equation: str
    substituents: tuple[Substituent, ...]
    ring_index: int | None


def _is_sp3_carbon(atom) -> bool:
    from rdkit import Chem

    return atom.GetAtomicNum() == 6 and atom.GetHybridization() == Chem.HybridizationType.SP3


def _is_alkene_carbon(atom) -> bool:
    from rdkit import Chem

    if atom.GetAtomicNum() != 6 or atom.GetIsAromatic():
        return False
    return any(
        b.GetBondType() == Chem.BondType.DOUBLE and b.GetOtherAtom(atom).GetAtomicNum() == 6 for b in atom.GetBonds()
    )


def _hydrogens(atom) -> list[int]:
    return sorted(n.GetIdx() for n in atom.GetNeighbors() if n.GetAtomicNum() == 1)


def _pro_label(mol, coords: np.ndarray, carbon: int, h: int) -> str | None:
    """``"R"`` or ``"S"`` when replacing ``h`` by deuterium makes ``carbon`` that CIP centre, else None."""
    from rdkit import Chem
    from rdkit.Chem import rdCIPLabeler
    from rdkit.Geometry import Point3D

    m = Chem.Mol(mol)
    m.RemoveAllConformers()
    conf = Chem.Conformer(m.GetNumAtoms())
    for i, (x, y, z) in enumerate(coords):
        conf.SetAtomPosition(i, Point3D(float(x), float(y), float(z)))
    m.AddConformer(conf, assignId=True)
    m.GetAtomWithIdx(h).SetIsotope(2)
    Chem.AssignStereochemistryFrom3D(m)
    try:
        rdCIPLabeler.AssignCIPLabels(m, atomsToLabel=[carbon], maxRecursiveIterations=200000)
    except RuntimeError:
        return None
    atom = m.GetAtomWithIdx(carbon)
    code = atom.GetProp("_CIPCode") if atom.HasProp("_CIPCode") else ""
    return code.upper() if code.upper() in ("R", "S") else None


def proton_groups(
    mol,
    coords: np.ndarray,
    ring_atoms: Sequence[Sequence[int]],
    dominant_chairs: dict[int, np.ndarray],
) -> tuple[ProtonGroup, ...]:
    """Proton groups of every carbon with hydrogens, labelled (see :mod:`chairbuild.couplings.records`).

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        With explicit hydrogens.
    coords : numpy.ndarray
        Any conformer's coordinates (Å): configuration only (pro-R/pro-S).
    ring_atoms : sequence of sequence of int
    dominant_chairs : dict
        Ring index → coordinates of that ring's dominant chair conformer.
    """
    from chairbuild.describe import substituent_position
    from chairbuild.result import Position, RingShape

    groups: list[ProtonGroup] = []
    for atom in mol.GetAtoms():
        if atom.GetAtomicNum() != 6:
            continue
        hs = _hydrogens(atom)
        c = atom.GetIdx()
        if not hs:
            continue
        if len(hs) == 1:
            groups.append(ProtonGroup(f"H{c}", (hs[0],), c, "CH"))
            continue
        if len(hs) >= 3:
            groups.append(ProtonGroup(f"H{c}", tuple(hs), c, "CH3"))
            continue
        pro = {h: _pro_label(mol, coords, c, h) for h in hs}
        pro_ok = sorted(v for v in pro.values() if v) == ["R", "S"]
        ring = next((r for r, atoms in enumerate(ring_atoms) if c in atoms), None)
        axial: dict[int, str] = {}
        if ring is not None and ring in dominant_chairs:
            xyz = dominant_chairs[ring]
            pos = {h: substituent_position(xyz, ring_atoms[ring], c, h, RingShape.CHAIR)[0] for h in hs}
            if sorted(p.value for p in pos.values()) == ["axial", "equatorial"]:
                axial = {h: ("ax" if pos[h] is Position.AXIAL else "eq") for h in hs}
        for k, h in enumerate(hs):
            names = []
            if axial:
                names.append(f"H{c}{axial[h]}")
            if pro_ok:
                names.append(f"H{c}{pro[h]}")
            if not names:
                names.append(f"H{c}{'ab'[k]}")
            groups.append(ProtonGroup(names[0], (h,), c, "CH2", tuple(names[1:])))
    return tuple(groups)


def fragments(mol, groups: Sequence[ProtonGroup], ring_atoms: Sequence[Sequence[int]]) -> tuple[list[Fragment], list[str]]:
    """Vicinal fragments between proton groups, and notes on the ones left out.

    Returns
    -------
    tuple
        (list of Fragment, list of str)
    """
    from chairbuild.couplings.karplus import delta_chi, electronegativities, parameter_set_for

    chi = electronegativities()
    by_carbon: dict[int, list[ProtonGroup]] = {}
    for g in groups:
        by_carbon.setdefault(g.carbon, []).append(g)
    out: list[Fragment] = []
    notes: list[str] = []
    for bond in mol.GetBonds():
        a, b = bond.GetBeginAtom(), bond.GetEndAtom()
        ca, cb = a.GetIdx(), b.GetIdx()
        if ca not in by_carbon or cb not in by_carbon:
            continue
        if _is_sp3_carbon(a) and _is_sp3_carbon(b):
            equation = None
        elif (_is_sp3_carbon(a) and _is_alkene_carbon(b)) or (_is_sp3_carbon(b) and _is_alkene_carbon(a)):
            equation = "Garbisch"
        else:
            notes.append(f"C{ca}–C{cb}: no vicinal coupling computed (neither sp3–sp3 nor allylic sp3–alkene)")
            continue
        subs: list[tuple[int, int]] = []
        for carrier, other in ((a, cb), (b, ca)):
            subs += [(n.GetIdx(), carrier.GetIdx()) for n in carrier.GetNeighbors() if n.GetAtomicNum() > 1 and n.GetIdx() != other]
        substituents: tuple[Substituent, ...] = ()
        if equation is None:
            params = parameter_set_for(len(subs))
            equation = f"HLA-{params.name}"
            items = []
            missing = set()
            for s, carrier in subs:
                sa = mol.GetAtomWithIdx(s)
                betas = [n.GetSymbol() for n in sa.GetNeighbors() if n.GetIdx() != carrier]
                for el in [sa.GetSymbol(), *betas]:
                    if el not in chi:
                        missing.add(el)
                if not missing:
                    items.append(Substituent(s, carrier, delta_chi(sa.GetSymbol(), betas, params)))
            if missing:
                notes.append(
                    f"C{ca}–C{cb}: no coupling computed, no Huggins electronegativity in the data file for "
                    + ", ".join(sorted(missing))
                )
                continue
            substituents = tuple(items)
        ring = next((r for r, atoms in enumerate(ring_atoms) if ca in atoms or cb in atoms), None)
        if ring is None and ring_atoms:
            ring = 0
        for ga in by_carbon[ca]:
            for gb in by_carbon[cb]:
                out.append(Fragment(ga, gb, equation, substituents, ring))
    return out, notes
