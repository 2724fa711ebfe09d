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

from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np
from rdkit import Chem

from chairbuild.build import stereo_signature
from chairbuild.choices import Choice
from chairbuild.minimise import ForceFieldVariant, MinimisedStructure, deduplicate
from chairbuild.result import Status

__all__ = ["Level", "RankedStructure", "rerank_structures", "REOPTIMISE_MARGIN_KJ"]

#: Extra window (kJ/mol) over the user's window for the conformers passed to GFN2-xTB.
REOPTIMISE_MARGIN_KJ = 10.0


class Level(Choice):
    """Energy level of the final ranking."""

    MMFF94 = "mmff94"
    GFN2 = "gfn2"

    @classmethod
    def describe(cls) -> str:
        return "level"


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
    from tqdm import tqdm

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
        e0 = min(s.energy for s in structures)
        candidates = [s for s in structures if s.energy - e0 <= window + REOPTIMISE_MARGIN_KJ]
        runner = _XTBRunner(mol, solvent, solvation_model, label, threads)
        xtb_name = _xtb_name(solvent, solvation_model)
        if method is Level.GFN2:
            reopt: list[MinimisedStructure] = []
            results = runner.map("optimize", [s.coords for s in candidates], "GFN2-xTB optimisation", progress)
            for s, res in zip(candidates, results):
                n_xtb_opt += 1
                coords, energy, rms, converged, msg = res
                status, message = Status.OK, ""
                if not converged:
                    status, message = Status.NOT_CONVERGED, f"GFN2-xTB optimisation: {msg}"
                elif stereo_signature(mol, coords) != reference_signature:
                    status, message = Status.STEREO_CHANGED, "stereochemistry changed during GFN2-xTB optimisation"
                new = replace(
                    s, coords=coords, energy=energy, rms_gradient=rms, converged=converged, status=status, message=message
                )
                (reopt if status is Status.OK else rejected).append(new)
            kept = deduplicate(mol, reopt, achiral)
            ranked = [
                RankedStructure(structure=k, energies={xtb_name: k.energy}, ranking_energy=k.energy, thermo={"energy": k.energy})
                for k in kept
            ]
        else:
            energies = runner.map("energy", [s.coords for s in candidates], "GFN2-xTB single points", progress)
            ranked = [
                RankedStructure(
                    structure=s,
                    energies={ff_name: s.energy, f"{xtb_name}//{ff_name}": e},
                    ranking_energy=e,
                    thermo={"energy": e},
                )
                for s, e in zip(candidates, energies)
            ]
        thermo_model = runner if method is Level.GFN2 else None
    else:
        ranked = [
            RankedStructure(structure=s, energies={ff_name: s.energy}, ranking_energy=s.energy, thermo={"energy": s.energy})
            for s in structures
        ]
        thermo_model = None
    if free_energy:
        if thermo_model is None:
            from chairbuild.forcefields.mmff import MMFFModel

            thermo_model = MMFFModel(mol, variant=forcefield.value, threads=threads)
        ranked = _with_free_energies(mol, ranked, thermo_model, temperature, progress)
    ranked.sort(key=lambda r: r.ranking_energy)
    return ranked, rejected, label, n_xtb_opt


def _with_free_energies(mol, ranked, model, temperature, progress) -> list[RankedStructure]:
    from chairbuild.thermo import atomic_masses, harmonic_frequencies, qrrho_thermo, rotational_symmetry_number

    masses = atomic_masses(mol)
    coords_list = [r.structure.coords for r in ranked]
    if isinstance(model, _XTBRunner):
        hessians = model.map("hessian", coords_list, "Hessians (GFN2-xTB)", progress)
    else:
        hessians = [model.hessian(c) for c in _progress(coords_list, len(coords_list), f"Hessians ({model.name})", progress)]
    out = []
    probe = Chem.Mol(mol)
    for r, hess in zip(ranked, hessians):
        coords = r.structure.coords
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


# --------------------------------------------------------------- GFN2-xTB runner
_WORKER: dict = {}


def _worker_init(mol_block: str, solvent, solvation_model: str, label: str, charge: int, unpaired: int) -> None:
    from chairbuild.forcefields.xtb import XTBModel

    import signal

    # Ctrl-C is the parent's to handle: it cancels the tasks and terminates the workers
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    mol = Chem.MolFromMolBlock(mol_block, removeHs=False)
    _WORKER["model"] = XTBModel(
        mol, charge=charge, unpaired_electrons=unpaired, solvent=solvent, solvation_model=solvation_model, threads=1, label=label
    )


def _run_task(model, kind: str, coords: np.ndarray):
    if kind == "optimize":
        res = model.optimize(coords)
        return (np.asarray(res.coords, dtype=float), float(res.energy), float(res.rms_gradient), bool(res.converged), res.message)
    if kind == "energy":
        return float(model.energy(coords))
    if kind == "hessian":
        return model.hessian(coords)
    raise ValueError(kind)


def _worker_task(kind: str, coords: np.ndarray):
    return _run_task(_WORKER["model"], kind, coords)


class _XTBRunner:
    """Run GFN2-xTB tasks over conformers, in worker processes when it pays.

    With more than one worker (``threads`` workers, default the number of CPUs) and at
    least ``PARALLEL_MIN_TASKS`` tasks, conformers are spread over a pool of forked
    processes (each runs tblite with one OpenMP thread, which measured faster than
    several threads on one small molecule); otherwise, or where ``fork`` is not
    available, they run in this process.
    """

    PARALLEL_MIN_TASKS = 4

    def __init__(self, mol: Chem.Mol, solvent, solvation_model: str, label: str, threads: int | None):
        import os

        from chairbuild.forcefields.xtb import XTBModel

        from chairbuild.input import charge_and_multiplicity

        self.mol_block = Chem.MolToMolBlock(mol)
        # total charge and unpaired electrons stated explicitly (open shell for a radical)
        charge, multiplicity = charge_and_multiplicity(mol)
        self.args = (self.mol_block, solvent, solvation_model, label, charge, multiplicity - 1)
        self.workers = threads if threads is not None else (os.cpu_count() or 1)
        self.local = XTBModel(
            mol, charge=charge, unpaired_electrons=multiplicity - 1, solvent=solvent, solvation_model=solvation_model, threads=1, label=label
        )
        self.name = self.local.name

    def map(self, kind: str, coords_list: list[np.ndarray], desc: str, progress: bool) -> list:
        if self.workers <= 1 or len(coords_list) < self.PARALLEL_MIN_TASKS:
            return [_run_task(self.local, kind, c) for c in _progress(coords_list, len(coords_list), desc, progress)]
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        if "fork" not in multiprocessing.get_all_start_methods():
            return [_run_task(self.local, kind, c) for c in _progress(coords_list, len(coords_list), desc, progress)]
        # fork: no re-import of the caller's script; the workers use tblite with one OpenMP
        # thread, so libgomp's thread pool (not fork-safe) is never needed in them
        ctx = multiprocessing.get_context("fork")
        pool = ProcessPoolExecutor(
            max_workers=min(self.workers, len(coords_list)), mp_context=ctx, initializer=_worker_init, initargs=self.args
        )
        try:
            futures = [pool.submit(_worker_task, kind, c) for c in coords_list]
            results = [_wait_for(fut) for fut in _progress(futures, len(futures), desc, progress)]
        except BaseException:  # Ctrl-C (KeyboardInterrupt) or a failed task: stop now, not after the queue
            _abandon_pool(pool)
            raise
        pool.shutdown(wait=True)
        return results


#: Seconds between wake-ups of the parent while it waits for a worker (how soon Ctrl-C is seen).
_WAIT_SLICE_S = 0.1


def _wait_for(future):
    """``future.result()`` in short slices: a SIGINT that the kernel hands to another thread
    of this process still reaches the main thread within :data:`_WAIT_SLICE_S`."""
    while True:
        try:
            return future.result(timeout=_WAIT_SLICE_S)
        except TimeoutError:
            continue


def _abandon_pool(pool) -> None:
    """Cancel the queued tasks and terminate the worker processes without waiting for running ones."""
    workers = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in workers:
        if proc.is_alive():
            proc.terminate()
    for proc in workers:
        proc.join(timeout=1.0)
