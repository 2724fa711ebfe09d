"""Run one stage's tasks (energy, optimisation, Hessian) over conformers, in worker processes when it pays.

One code path for every engine: :class:`StageRunner` builds the stage's energy model
(:func:`build_model`) in this process and, for a pool, once in each forked worker; tasks
are handed out in a nearest-neighbour order of the geometries so that a DFT model's
warm start (the nearest density it has computed, see :mod:`chairbuild.forcefields.dft`)
finds a close neighbour. With a results cache (``get``/``put``, e.g.
:class:`~chairbuild.levels.cache.ResultCache`) a task whose key is stored is not run, and
each result is stored as soon as it arrives, so a killed run resumes where it stopped.

A task that fails (an SCF that does not converge, an engine error) does not stop the
others: its result is a :class:`TaskFailure` that the caller turns into a status and a
message on the conformer's record.

Workers: ``threads`` processes (default the number of CPUs), each with one OpenMP thread
(libgomp's thread pool is not fork-safe, and for these molecule sizes one thread per
conformer measured faster than several threads on one conformer, see
:mod:`chairbuild.forcefields.xtb`); below ``PARALLEL_MIN_TASKS`` tasks (two for a DFT
stage, whose single point takes tens of seconds against milliseconds to start a worker),
or without ``fork``, the tasks run in this process; a lone DFT task there gets ``threads``
OpenMP threads. A DFT model's warm start helps only between geometries closer than
:data:`chairbuild.forcefields.dft.WARM_START_MAX_RMSD_A` (the steps of one Hessian or
optimisation, which stay in one task), so spreading conformers over workers loses nothing.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from rdkit import Chem

from chairbuild.errors import ConvergenceError, ForceFieldError
from chairbuild.levels.chain import Engine, Stage
from chairbuild.result import Status

__all__ = ["StageRunner", "TaskFailure", "build_model", "level_name", "nearest_neighbour_order"]


@dataclass(frozen=True)
class TaskFailure:
    """A task that did not give a result."""

    status: Status
    message: str


def level_name(stage: Stage) -> str:
    """Display name of a stage's level, e.g. ``"GFN2-xTB/ALPB(water)"``, ``"B3LYP-D3(BJ)/def2-SVP"``."""
    if stage.engine is Engine.GFN2:
        return "GFN2-xTB" if stage.solvent is None else f"GFN2-xTB/{stage.solvation.upper()}({stage.solvent})"
    if stage.engine is Engine.DFT:
        return _dft_settings(stage).name
    return "MMFF94"


def _dft_settings(stage: Stage):
    from chairbuild.forcefields.dft import DFTSettings

    return DFTSettings(
        functional=stage.functional,
        basis=stage.basis,
        dispersion=stage.dispersion,
        solvent=stage.solvent,
        solvation_model=stage.solvation or "cpcm",
    ).validated()


def build_model(mol: Chem.Mol, stage: Stage, forcefield: str, threads: int | None = 1):
    """The energy model of ``stage`` for ``mol`` (misuse raises OptionError/ForceFieldError here, before work)."""
    if stage.engine is Engine.GFN2:
        from chairbuild.forcefields.xtb import XTBModel

        return XTBModel(mol, solvent=stage.solvent, solvation_model=stage.solvation or "alpb", threads=threads, label=level_name(stage))
    if stage.engine is Engine.DFT:
        from chairbuild.forcefields.dft import DFTModel

        return DFTModel(mol, _dft_settings(stage), threads=threads)
    from chairbuild.forcefields.mmff import MMFFModel

    return MMFFModel(mol, variant=forcefield, threads=threads)


def _cache_level(stage: Stage, forcefield: str) -> str:
    if stage.engine is Engine.DFT:
        return repr(_dft_settings(stage))
    if stage.engine is Engine.MMFF94:
        return forcefield
    return level_name(stage)


# ------------------------------------------------------------------ tasks
def _optimize(model, coords: np.ndarray, max_steps: int = 500, gtol: float = 0.1):
    """L-BFGS-B on the model's energy and gradient (the model's own ``optimize`` when it has one)."""
    if hasattr(model, "optimize"):
        res = model.optimize(coords)
        return (np.asarray(res.coords, dtype=float), float(res.energy), float(res.rms_gradient), bool(res.converged), res.message)
    from scipy.optimize import minimize

    x0 = np.asarray(coords, dtype=float).ravel()

    def fun(x):
        e, g = model.energy_and_gradient(x.reshape(-1, 3))
        return e, g.ravel()

    res = minimize(fun, x0, jac=True, method="L-BFGS-B", options={"maxiter": max_steps, "gtol": gtol, "ftol": 0.0})
    final = np.asarray(res.x, dtype=float).reshape(-1, 3)
    e, g = model.energy_and_gradient(final)
    return final, float(e), float(np.sqrt(np.mean(g**2))), bool(np.max(np.abs(g)) <= gtol), str(res.message)


def _run_task(model, kind: str, coords: np.ndarray):
    # each task starts clean: its result must not depend on which task this model (or this
    # forked worker) ran before, or results would change with the worker count and timing
    model.reset()
    try:
        if kind == "optimize":
            return _optimize(model, coords)
        if kind == "energy":
            out = {"energy": float(model.energy(coords))}
            scf = getattr(model, "last_scf", None)
            if scf is not None:
                out.update(scf_cycles=scf.cycles, scf_attempt=scf.attempt, warm_start=scf.warm_start)
            return out
        if kind == "hessian":
            return np.asarray(model.hessian(coords))
    except ConvergenceError as exc:
        return TaskFailure(Status.NOT_CONVERGED, f"{model.name}: {exc}")
    except ForceFieldError as exc:
        return TaskFailure(Status.FAILED, f"{model.name}: {exc}")
    raise ValueError(kind)


_WORKER: dict = {}


def _worker_init(mol_block: str, stage: Stage, forcefield: str) -> None:
    import signal

    # Ctrl-C is the parent's to handle: it cancels the tasks and terminates the workers
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    mol = Chem.MolFromMolBlock(mol_block, removeHs=False)
    _WORKER["model"] = build_model(mol, stage, forcefield, threads=1)


def _worker_task(kind: str, coords: np.ndarray):
    return _run_task(_WORKER["model"], kind, coords)


def _to_json(kind: str, value):
    if isinstance(value, TaskFailure):
        return None  # failures are not cached: a later run may try again
    if kind == "optimize":
        c, e, rms, conv, msg = value
        return {"coords": np.asarray(c).tolist(), "energy": e, "rms": rms, "converged": conv, "message": msg}
    if kind == "hessian":
        return {"hessian": np.asarray(value).tolist()}
    return value


def _from_json(kind: str, value):
    if kind == "optimize":
        return (np.array(value["coords"]), value["energy"], value["rms"], value["converged"], value["message"])
    if kind == "hessian":
        return np.array(value["hessian"])
    return dict(value, cached=True)


def nearest_neighbour_order(coords_list: Sequence[np.ndarray]) -> list[int]:
    """A greedy path through the geometries, each next one the nearest (RMSD after superposition) to the last."""
    from chairbuild.forcefields.dft import _superpose

    n = len(coords_list)
    if n <= 2:
        return list(range(n))
    left = set(range(1, n))
    order = [0]
    while left:
        last = coords_list[order[-1]]
        nxt = min(left, key=lambda j: _superpose(coords_list[j], last)[2])
        order.append(nxt)
        left.remove(nxt)
    return order


class StageRunner:
    """Run a stage's tasks over conformers.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
    stage : Stage
        With its settings filled in (:func:`chairbuild.levels.chain.with_defaults`).
    forcefield : str
        The build level's name (``MMFF94`` or ``MMFF94s``), for mmff94 stages.
    threads : int or None
        Worker processes (default: the number of CPUs).
    cache : object with get/put, optional
        Results cache.
    """

    PARALLEL_MIN_TASKS = 4

    def __init__(self, mol: Chem.Mol, stage: Stage, forcefield: str, threads: int | None, cache=None) -> None:
        import os

        self.mol = mol
        self.stage = stage
        self.forcefield = forcefield
        self.local = build_model(mol, stage, forcefield, threads=1)
        self.name = level_name(stage) if stage.engine is not Engine.MMFF94 else self.local.name
        self.workers = threads if threads is not None else (os.cpu_count() or 1)
        self.cache = cache
        self._cache_level = _cache_level(stage, forcefield)
        self._symbols = [a.GetSymbol() for a in mol.GetAtoms()]
        from chairbuild.input import charge_and_multiplicity

        self._charge, self._mult = charge_and_multiplicity(mol)
        #: Tasks answered from the cache in the last :meth:`map`.
        self.n_cached = 0

    def _key(self, kind: str, coords: np.ndarray) -> str:
        from chairbuild.levels.cache import result_key

        return result_key(self._cache_level, kind, self._symbols, coords, self._charge, self._mult)

    def map(self, kind: str, coords_list: list[np.ndarray], desc: str, progress: bool) -> list[Any]:
        """Results of task ``kind`` (``"energy"``, ``"optimize"``, ``"hessian"``) in the order of ``coords_list``."""
        from tqdm import tqdm

        results: list[Any] = [None] * len(coords_list)
        todo = []
        self.n_cached = 0
        for i, c in enumerate(coords_list):
            hit = self.cache.get(self._key(kind, c)) if self.cache is not None else None
            if hit is not None:
                results[i] = _from_json(kind, hit)
                self.n_cached += 1
            else:
                todo.append(i)
        order = [todo[k] for k in nearest_neighbour_order([coords_list[i] for i in todo])]
        bar = tqdm(total=len(coords_list), initial=self.n_cached, desc=desc, unit="conf", disable=not progress, leave=False)

        def done(i, value):
            results[i] = value
            payload = _to_json(kind, value)
            if self.cache is not None and payload is not None:
                self.cache.put(self._key(kind, coords_list[i]), payload)
            bar.update(1)

        dft = self.stage.engine is Engine.DFT
        min_tasks = 2 if dft else self.PARALLEL_MIN_TASKS
        try:
            if self.workers <= 1 or len(order) < min_tasks or not _fork_available():
                if dft:
                    self.local.threads = self.workers  # one task at a time: its SCF uses the cores
                for i in order:
                    done(i, _run_task(self.local, kind, coords_list[i]))
            else:
                self._pool(kind, coords_list, order, done)
        finally:
            bar.close()
        return results

    def _pool(self, kind, coords_list, order, done) -> None:
        import multiprocessing
        from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

        ctx = multiprocessing.get_context("fork")
        args = (Chem.MolToMolBlock(self.mol), self.stage, self.forcefield)
        pool = ProcessPoolExecutor(
            max_workers=min(self.workers, len(order)), mp_context=ctx, initializer=_worker_init, initargs=args
        )
        try:
            futures = {pool.submit(_worker_task, kind, coords_list[i]): i for i in order}
            pending = set(futures)
            while pending:
                # short slices: a SIGINT that the kernel hands to another thread of this
                # process still reaches the main thread within _WAIT_SLICE_S
                finished, pending = wait(pending, timeout=_WAIT_SLICE_S, return_when=FIRST_COMPLETED)
                for fut in finished:
                    done(futures[fut], fut.result())
        except BaseException:  # Ctrl-C (KeyboardInterrupt) or a failed task: stop now, not after the queue
            _abandon_pool(pool)
            raise
        pool.shutdown(wait=True)


#: Seconds between wake-ups of the parent while it waits for a worker (how soon Ctrl-C is seen).
_WAIT_SLICE_S = 0.1


def _abandon_pool(pool) -> None:
    """Cancel the queued tasks and terminate the worker processes without waiting for running ones."""
    workers = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in workers:
        if proc.is_alive():
            proc.terminate()
    for proc in workers:
        proc.join(timeout=1.0)


def _fork_available() -> bool:
    import multiprocessing

    return "fork" in multiprocessing.get_all_start_methods()
