"""Rotamer moves around minimised structures: the refinement pass of the systematic search.

After the capped rotamer product of :mod:`chairbuild.build` has been minimised,
:func:`rotamer_variations` makes new starting structures from chosen minima by turning
one rotor, or two rotors on consecutive bonds, to each of their other starting values.
"""

from __future__ import annotations

import itertools
from typing import Sequence

import numpy as np
from rdkit import Chem
from rdkit.Chem import rdMolTransforms

from chairbuild.rings import RingAnalysis

__all__ = ["rotamer_variations", "set_rotamer"]


def set_rotamer(conf: Chem.Conformer, rotor_atoms, angle: float) -> None:
    rdMolTransforms.SetDihedralDeg(conf, *rotor_atoms, float(angle))


def rotamer_variations(
    mol: Chem.Mol, analysis: RingAnalysis, seeds: Sequence[np.ndarray], origin: str = "refine"
) -> list:
    """New starts from minimised ``seeds``: each rotor, and each pair of rotors on consecutive bonds,
    set to each of its other values.

    Used after the rotamer cap bit: a hill-climbing pass over rotor settings around the
    lowest minima finds the cooperative arrangements (hydrogen-bond chains of polyols)
    that the capped product left out.
    """
    work = Chem.Mol(mol)
    work.RemoveAllConformers()
    work.AddConformer(Chem.Conformer(mol.GetNumAtoms()), assignId=True)
    conf = work.GetConformer()
    rotors = list(analysis.rotors)
    # single rotors, and pairs of rotors on consecutive bonds of one branch (C-C-O-H of CH2OH), which
    # often have to turn together
    moves: list[tuple[int, ...]] = [(r,) for r in range(len(rotors))]
    for a in range(len(rotors)):
        for b in range(len(rotors)):
            if a != b and rotors[a].atoms[2] == rotors[b].atoms[1] and rotors[a].atoms[1] != rotors[b].atoms[2]:
                moves.append((a, b))
    from chairbuild.build import StartingStructure

    out = []
    for k, xyz in enumerate(seeds):
        _set_positions(conf, xyz)
        current = [rdMolTransforms.GetDihedralDeg(conf, *r.atoms) for r in rotors]
        for move in moves:
            for values in itertools.product(*(rotors[r].angles for r in move)):
                if any(abs(((v - current[r] + 180.0) % 360.0) - 180.0) < 40.0 for r, v in zip(move, values)):
                    continue  # a rotor already sits there: covered by a smaller move
                _set_positions(conf, xyz)
                for r, v in zip(move, values):
                    set_rotamer(conf, rotors[r].atoms, v)
                label = ",".join(f"rotor{r}={v:.0f}" for r, v in zip(move, values))
                out.append(StartingStructure(coords=conf.GetPositions(), origin=f"{origin}:seed{k}:{label}"))
    return out


def _set_positions(conf: Chem.Conformer, xyz: np.ndarray) -> Chem.Conformer:
    for i, p in enumerate(xyz):
        conf.SetAtomPosition(i, p.tolist())
    return conf
