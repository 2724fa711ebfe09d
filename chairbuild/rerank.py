"""Re-rank the MMFF ensemble with GFN2-xTB and turn energies into free energies.

Levels (``method`` / ``rerank`` options):

* ``mmff94`` (default): MMFF94 (or MMFF94s) energies at MMFF minima.
* ``rerank=gfn2``: GFN2-xTB single points (with ALPB/GBSA solvent when asked) at the
  MMFF geometries, written ``GFN2-xTB//MMFF94``; the cheap middle.
* ``method=gfn2``: every MMFF conformer within the window plus a margin of
  :data:`REOPTIMISE_MARGIN_KJ` is re-optimised with GFN2-xTB, stereochemistry is checked
  again, and duplicates are removed again.

Free energies (``free_energy=True``): harmonic frequencies from a Hessian by central
finite differences of analytic gradients, at the level whose geometry is a stationary
point: GFN2-xTB for ``method=gfn2``, MMFF otherwise (for ``rerank=gfn2`` the thermal
corrections come from MMFF at the MMFF geometry: G = E(GFN2) + [G − E](MMFF)). The
quasi-rigid-rotor-harmonic-oscillator entropy (Grimme, Chem. Eur. J. 2012, 18, 9955)
with the rotational symmetry number of each conformer gives H and G
(:func:`chairbuild.thermo.qrrho_thermo`).
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np
from rdkit import Chem

from chairbuild.build import stereo_signature
from chairbuild.minimise import ForceFieldVariant, MinimisedStructure, deduplicate
from chairbuild.result import Status

__all__ = ["Level", "RankedStructure", "rerank_structures", "REOPTIMISE_MARGIN_KJ"]

#: Extra window (kJ/mol) over the user's window for the conformers passed to GFN2-xTB.
REOPTIMISE_MARGIN_KJ = 10.0


class Level(str, enum.Enum):
    """Energy level of the final ranking."""

    MMFF94 = "mmff94"
    GFN2 = "gfn2"

    @classmethod
    def parse(cls, text: "str | Level") -> "Level":
        from chairbuild.errors import OptionError

        if isinstance(text, Level):
            return text
        key = str(text).strip().lower()
        for member in cls:
            if member.value == key:
                return member
        raise OptionError(f"unknown level {text!r}; choose from: {', '.join(m.value for m in cls)}")


@dataclass(frozen=True)
class RankedStructure:
    """A structure with its energies per level and the thermal quantities of the ranking."""

    structure: MinimisedStructure
    energies: dict[str, float]
    ranking_energy: float
    thermo: dict[str, float] = field(default_factory=dict)


def _xtb_name(solvent: str | None, solvation_model: str) -> str:
    return "GFN2-xTB" if solvent is None else f"GFN2-xTB/{solvation_model.upper()}({solvent})"


def method_label(ff: ForceFieldVariant, method: Level, rerank: Level | None, solvent: str | None, solvation_model: str) -> str:
    """Human-readable name of the level combination."""
    if method is Level.GFN2:
        return _xtb_name(solvent, solvation_model)
    if rerank is Level.GFN2:
        return f"{_xtb_name(solvent, solvation_model)}//{ff.value}"
    return ff.value


def _progress(iterable, total, desc, enabled):
    from tqdm.auto import tqdm

    return tqdm(iterable, total=total, desc=desc, unit="conf", disable=not enabled, leave=False)


def rerank_structures(
    mol: Chem.Mol,
    structures: Sequence[MinimisedStructure],
    reference_signature: str,
    achiral: bool,
    *,
    forcefield: ForceFieldVariant,
    method: Level,
    rerank: Level | None,
    solvent: str | None,
    solvation_model: str,
    free_energy: bool,
    temperature: float,
    window: float,
    threads: int | None,
    progress: bool,
) -> tuple[list[RankedStructure], list[MinimisedStructure], str, int]:
    """Apply the chosen level to distinct MMFF minima.

    Returns
    -------
    tuple
        (ranked structures sorted by ranking energy, rejected structures, method label,
        number of GFN2-xTB optimisations run).
    """
    ff_name = forcefield.value
    label = method_label(forcefield, method, rerank, solvent, solvation_model)
    rejected: list[MinimisedStructure] = []
    n_xtb_opt = 0
    if method is Level.GFN2 or rerank is Level.GFN2:
        from forcefields.xtb import XTBModel

        e0 = min(s.energy for s in structures)
        candidates = [s for s in structures if s.energy - e0 <= window + REOPTIMISE_MARGIN_KJ]
        xtb = XTBModel(mol, solvent=solvent, solvation_model=solvation_model, threads=threads, label=label)
        xtb_name = _xtb_name(solvent, solvation_model)
        if method is Level.GFN2:
            reopt: list[MinimisedStructure] = []
            for s in _progress(candidates, len(candidates), "GFN2-xTB optimisation", progress):
                res = xtb.optimize(s.coords)
                n_xtb_opt += 1
                status, message = Status.OK, ""
                if not res.converged:
                    status, message = Status.NOT_CONVERGED, f"GFN2-xTB optimisation: {res.message}"
                elif stereo_signature(mol, res.coords) != reference_signature:
                    status, message = Status.STEREO_CHANGED, "stereochemistry changed during GFN2-xTB optimisation"
                new = replace(
                    s,
                    coords=np.asarray(res.coords, dtype=float),
                    energy=float(res.energy),
                    rms_gradient=float(res.rms_gradient),
                    converged=bool(res.converged),
                    status=status,
                    message=message,
                )
                if status is Status.OK:
                    reopt.append(new)
                else:
                    rejected.append(new)
            kept = deduplicate(mol, reopt, achiral)
            ranked = [
                RankedStructure(structure=k, energies={xtb_name: k.energy}, ranking_energy=k.energy, thermo={"energy": k.energy})
                for k in kept
            ]
        else:
            ranked = []
            for s in _progress(candidates, len(candidates), "GFN2-xTB single points", progress):
                e = xtb.energy(s.coords)
                ranked.append(
                    RankedStructure(
                        structure=s,
                        energies={ff_name: s.energy, f"{xtb_name}//{ff_name}": e},
                        ranking_energy=e,
                        thermo={"energy": e},
                    )
                )
        thermo_model = xtb if method is Level.GFN2 else None
    else:
        ranked = [
            RankedStructure(structure=s, energies={ff_name: s.energy}, ranking_energy=s.energy, thermo={"energy": s.energy})
            for s in structures
        ]
        thermo_model = None
    if free_energy:
        if thermo_model is None:
            from forcefields.mmff import MMFFModel

            thermo_model = MMFFModel(mol, variant=forcefield.value, threads=threads)
        ranked = _with_free_energies(mol, ranked, thermo_model, temperature, progress)
    ranked.sort(key=lambda r: r.ranking_energy)
    return ranked, rejected, label, n_xtb_opt


def _with_free_energies(mol, ranked, model, temperature, progress) -> list[RankedStructure]:
    from chairbuild.thermo import atomic_masses, harmonic_frequencies, qrrho_thermo, rotational_symmetry_number

    masses = atomic_masses(mol)
    out = []
    probe = Chem.Mol(mol)
    probe.RemoveAllConformers()
    for r in _progress(ranked, len(ranked), f"Hessians ({model.name})", progress):
        coords = r.structure.coords
        hess = model.hessian(coords)
        freqs = harmonic_frequencies(hess, masses, coords)
        conf = Chem.Conformer(mol.GetNumAtoms())
        for i, p in enumerate(coords):
            conf.SetAtomPosition(i, p.tolist())
        probe.RemoveAllConformers()
        probe.AddConformer(conf, assignId=True)
        sigma = rotational_symmetry_number(probe)
        th = qrrho_thermo(freqs, masses, coords, temperature, symmetry_number=sigma)
        e = r.ranking_energy
        thermo = {
            "energy": e,
            "enthalpy": e + th.enthalpy_correction,
            "free_energy": e + th.gibbs_correction,
            "zpe": th.zpe,
            "entropy_J_per_molK": th.entropy * 1000.0,
            "symmetry_number": float(sigma),
            "imaginary_modes": float(th.n_imaginary),
        }
        out.append(replace(r, ranking_energy=e + th.gibbs_correction, thermo=thermo))
    return out
