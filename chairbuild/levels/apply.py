"""Apply the chain of levels to the build level's distinct minima.

Each stage takes the conformers handed on by the one before, computes (single points,
re-optimisation, frequencies), records its energies on every conformer it reached, and
narrows the ensemble by its window for the next stage (see :mod:`chairbuild.levels.chain`).
Conformers that fail at a stage (SCF or optimisation not converged, stereochemistry
changed) leave the chain with a status and a message and the energies they had reached.

Free energies: harmonic frequencies from a Hessian by central finite differences of
analytic gradients at a level whose minimum the geometry is; the qRRHO entropy
(Grimme, Chem. Eur. J. 2012, 18, 9955) with the rotational symmetry number of each
conformer gives the correction G_RRHO = G − E (:func:`chairbuild.thermo.qrrho_thermo`),
which the ranking formula adds to the last stage's energy.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace
from typing import Sequence

from rdkit import Chem

from chairbuild.build import stereo_signature
from chairbuild.levels.chain import RRHO_KEY, Chain, Engine, Operation
from chairbuild.levels.runner import StageRunner, TaskFailure, level_name
from chairbuild.minimise import MinimisedStructure, deduplicate
from chairbuild.result import Status

__all__ = ["RankedStructure", "ChainOutcome", "run_chain"]


@dataclass(frozen=True)
class RankedStructure:
    """A structure with its energies per level and the thermal quantities of the ranking."""

    structure: MinimisedStructure
    energies: dict[str, float]
    ranking_energy: float
    thermo: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class ChainOutcome:
    """What :func:`run_chain` returns.

    Attributes
    ----------
    ranked : list of RankedStructure
        Sorted by ranking quantity.
    rejected : list of RankedStructure
        Failed at a stage; ``structure.status`` and ``structure.message`` say why.
    method : str
        Name of the ranking level, e.g. ``"B3LYP-D3(BJ)/def2-SVP//GFN2-xTB"``.
    formula : str
        The ranking formula in words, e.g. ``"G = E[...] + G_RRHO[GFN2-xTB]"``.
    terms : tuple of (str, str)
        The formula's terms as (mapping, key) of the record: ``("energies", level key)``
        and, with free energies, ``("thermo", "rrho_correction")``.
    ranking : str
        ``"energy"`` or ``"free_energy"``.
    stages : list of dict
        Per stage: spec, level, conformers in, computed, cached, failed, kept, seconds, SCF cycles.
    n_gfn2_optimisations : int
    """

    ranked: list
    rejected: list
    method: str
    formula: str
    terms: tuple
    ranking: str
    stages: list
    n_gfn2_optimisations: int


@dataclass
class _Candidate:
    structure: MinimisedStructure
    energies: dict
    term: str
    rrho: dict | None = None

    def value(self) -> float:
        e = self.energies[self.term]
        return e + self.rrho["gibbs_correction"] if self.rrho is not None else e


def run_chain(
    mol: Chem.Mol,
    structures: Sequence[MinimisedStructure],
    reference_signature: str,
    achiral: bool,
    chain: Chain,
    *,
    forcefield: str,
    temperature: float,
    window: float,
    threads: int | None,
    progress: bool,
    cache=None,
) -> ChainOutcome:
    """Run the build level's window and every stage of ``chain`` over ``structures`` (distinct OK minima)."""
    build_window, stage_windows = chain.windows(window)
    geometry = forcefield
    cands = [_Candidate(s, {forcefield: s.energy}, forcefield) for s in structures]
    cands = _narrow(cands, build_window)
    rejected: list[RankedStructure] = []
    report = []
    n_opt = 0
    rrho_level = None
    for stage, stage_window in zip(chain.stages, stage_windows):
        t0 = time.perf_counter()
        runner = StageRunner(mol, stage, forcefield, 1 if stage.engine is Engine.MMFF94 else threads, cache)
        name = runner.name
        info = {"stage": stage.spec(), "level": name, "conformers_in": len(cands), "computed": 0, "cached": 0, "failed": 0}
        for op in stage.operations:
            if op is Operation.OPTIMISE:
                cands, failed = _optimise(mol, cands, runner, name, reference_signature, achiral, progress)
                geometry = name
                rrho_level = None
                n_opt += info["conformers_in"] if stage.engine is Engine.GFN2 else 0
            elif op is Operation.SINGLE_POINT:
                cands, failed, cycles = _single_points(cands, runner, f"{name}//{geometry}", progress)
                if cycles:
                    info["scf_cycles"] = cycles
            else:
                cands, failed = _frequencies(mol, cands, runner, name, temperature, progress)
                rrho_level = name
            info["computed"] += len(cands) + len(failed) - runner.n_cached
            info["cached"] += runner.n_cached
            info["failed"] += len(failed)
            rejected += failed
        cands = _narrow(cands, stage_window)
        info["kept"] = len(cands)
        info["window_kJ"] = stage_window
        info["seconds"] = round(time.perf_counter() - t0, 3)
        report.append(info)
    term = cands[0].term if cands else (_last_term(chain, forcefield, geometry))
    ranked = [_ranked(c, temperature) for c in cands]
    ranked.sort(key=lambda r: r.ranking_energy)
    free = rrho_level is not None
    formula = f"G = E[{term}] + G_RRHO[{rrho_level}]" if free else f"E = E[{term}]"
    terms = (("energies", term), ("thermo", RRHO_KEY)) if free else (("energies", term),)
    return ChainOutcome(
        ranked=ranked,
        rejected=rejected,
        method=term,
        formula=formula,
        terms=terms,
        ranking="free_energy" if free else "energy",
        stages=report,
        n_gfn2_optimisations=n_opt,
    )


def _last_term(chain: Chain, forcefield: str, geometry: str) -> str:
    term = forcefield
    for stage in chain.stages:
        if Operation.OPTIMISE in stage.operations:
            term = level_name(stage)
        if Operation.SINGLE_POINT in stage.operations:
            term = f"{level_name(stage)}//{geometry}"
    return term


def _narrow(cands: list[_Candidate], window: float | None) -> list[_Candidate]:
    if window is None or not cands:
        return cands
    low = min(c.value() for c in cands)
    return [c for c in cands if c.value() - low <= window]


def _reject(c: _Candidate, status: Status, message: str) -> RankedStructure:
    s = replace(c.structure, status=status, message=message)
    return RankedStructure(structure=s, energies=dict(c.energies), ranking_energy=float("nan"))


def _optimise(mol, cands, runner: StageRunner, name, reference_signature, achiral, progress):
    results = runner.map("optimize", [c.structure.coords for c in cands], f"{name} optimisation", progress)
    ok, failed = [], []
    for c, res in zip(cands, results):
        if isinstance(res, TaskFailure):
            failed.append(_reject(c, res.status, res.message))
            continue
        coords, energy, rms, converged, msg = res
        energies = dict(c.energies)
        energies[name] = energy
        new = replace(c.structure, coords=coords, energy=energy, rms_gradient=rms, converged=converged)
        moved = _Candidate(new, energies, name)
        if not converged:
            failed.append(_reject(moved, Status.NOT_CONVERGED, f"{name} optimisation: {msg}"))
        elif stereo_signature(mol, coords) != reference_signature:
            failed.append(_reject(moved, Status.STEREO_CHANGED, f"stereochemistry changed during {name} optimisation"))
        else:
            ok.append(moved)
    by_coords = {id(c.structure.coords): c for c in ok}
    kept = deduplicate(mol, [c.structure for c in ok], achiral)
    return [replace_structure(by_coords[id(k.coords)], k) for k in kept], failed


def replace_structure(c: _Candidate, structure: MinimisedStructure) -> _Candidate:
    return _Candidate(structure, c.energies, c.term, c.rrho)


def _single_points(cands, runner: StageRunner, key, progress):
    results = runner.map("energy", [c.structure.coords for c in cands], f"{runner.name} single points", progress)
    ok, failed = [], []
    cycles = 0
    for c, res in zip(cands, results):
        if isinstance(res, TaskFailure):
            failed.append(_reject(c, res.status, res.message))
            continue
        energies = dict(c.energies)
        energies[key] = float(res["energy"])
        if not res.get("cached"):
            cycles += int(res.get("scf_cycles", 0))
        ok.append(_Candidate(c.structure, energies, key, c.rrho))
    return ok, failed, cycles


def _frequencies(mol, cands, runner: StageRunner, name, temperature, progress):
    from chairbuild.thermo import atomic_masses, harmonic_frequencies, qrrho_thermo, rotational_symmetry_number

    masses = atomic_masses(mol)
    hessians = runner.map("hessian", [c.structure.coords for c in cands], f"Hessians ({name})", progress)
    probe = Chem.Mol(mol)
    ok, failed = [], []
    for c, hess in zip(cands, hessians):
        if isinstance(hess, TaskFailure):
            failed.append(_reject(c, hess.status, hess.message))
            continue
        coords = c.structure.coords
        freqs = harmonic_frequencies(hess, masses, coords)
        conf = Chem.Conformer(mol.GetNumAtoms())
        for i, p in enumerate(coords):
            conf.SetAtomPosition(i, p.tolist())
        probe.RemoveAllConformers()
        probe.AddConformer(conf, assignId=True)
        sigma = rotational_symmetry_number(probe)
        th = qrrho_thermo(freqs, masses, coords, temperature, symmetry_number=sigma)
        rrho = {
            "gibbs_correction": th.gibbs_correction,
            "enthalpy_correction": th.enthalpy_correction,
            "zpe": th.zpe,
            "entropy": th.entropy,
            "sigma": sigma,
            "n_imaginary": th.n_imaginary,
        }
        ok.append(_Candidate(c.structure, c.energies, c.term, rrho))
    return ok, failed


def _ranked(c: _Candidate, temperature: float) -> RankedStructure:
    e = c.energies[c.term]
    thermo = {"energy": e}
    if c.rrho is not None:
        r = c.rrho
        thermo.update(
            {
                "enthalpy": e + r["enthalpy_correction"],
                "free_energy": e + r["gibbs_correction"],
                "zpe": r["zpe"],
                "entropy_J_per_molK": r["entropy"] * 1000.0,
                "symmetry_number": float(r["sigma"]),
                "imaginary_modes": float(r["n_imaginary"]),
                RRHO_KEY: r["gibbs_correction"],
            }
        )
    return RankedStructure(structure=c.structure, energies=dict(c.energies), ranking_energy=c.value(), thermo=thermo)
