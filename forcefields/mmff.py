"""MMFF94/MMFF94s in OpenMM: System, energy model and batched minimiser.

:func:`create_system` turns an RDKit molecule (explicit hydrogens) into an OpenMM
``System`` holding the seven MMFF terms, each in its own force group
(:data:`chairbuild.forcefields.mmff_terms.TERM_GROUPS`). :class:`MMFFModel` wraps one such System
and one CPU ``Context`` per molecule and implements :class:`chairbuild.forcefields.base.EnergyModel`
(coordinates in Å, energies in kJ/mol, gradients in kJ mol^-1 Å^-1).

Minimisation (:meth:`MMFFModel.minimize`) is designed around OpenMM's large per-call
cost and the stiffness of bonded terms:

* a *replicated* System holds ``slots`` non-interacting copies of the molecule (every
  term is written per copy, non-bonded pairs only within a copy), so one OpenMM call
  returns the forces of ``slots`` conformers;
* every slot runs its own preconditioned L-BFGS (memory 20) on its conformer; when a
  slot converges it is refilled with the next waiting conformer, so the Context is
  built once per model and stays busy;
* the preconditioner is the Gauss-Newton Hessian of the MMFF bond, angle and torsion
  terms (force constants from the parameters, plus a small multiple of the identity),
  refreshed when the geometry has moved; it cuts the number of force evaluations
  several-fold against plain L-BFGS;
* the line search uses directional derivatives only (the replicated Context gives no
  per-copy energy): a step is accepted when the trapezoidal estimate of the energy
  change satisfies the Armijo condition, and otherwise shortened by secant
  interpolation. Each result's energy is then evaluated exactly on the single Context.

Convergence criterion: a conformer is converged when the root-mean-square of all
``3 * n_atoms`` Cartesian gradient components of the minimised function falls below
``tolerance`` (kJ mol^-1 Å^-1; default :data:`DEFAULT_TOLERANCE` = 0.01, about
0.0024 kcal mol^-1 Å^-1; tightening it costs few evaluations near a minimum).
"""

from __future__ import annotations

import contextlib
import ctypes
import math
import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import openmm

from chairbuild.constants import ANGSTROM_TO_NM
from chairbuild.errors import ForceFieldError, OptionError
from chairbuild.forcefields.base import EnergyModel
from chairbuild.forcefields.mmff_terms import (
    RESTRAINT_GROUP,
    TERM_GROUPS,
    MMFFParameters,
    Preconditioner,
    build_forces,
    extract_parameters,
    restraint_force,
)

if TYPE_CHECKING:
    from rdkit import Chem

__all__ = [
    "DEFAULT_TOLERANCE",
    "DEFAULT_MAX_ITERATIONS",
    "DEFAULT_RESTRAINT_FORCE_CONSTANT",
    "MinimizationResult",
    "MMFFModel",
    "create_system",
]

#: Default convergence threshold: RMS Cartesian gradient, kJ mol^-1 Å^-1.
DEFAULT_TOLERANCE = 0.01
#: Default iteration limit per conformer.
DEFAULT_MAX_ITERATIONS = 2000
#: Default dihedral-restraint force constant k in E = k * dphi^2, kJ mol^-1 rad^-2.
DEFAULT_RESTRAINT_FORCE_CONSTANT = 1000.0

_KJ_PER_MOL = openmm.unit.kilojoule_per_mole
_FORCE_UNIT = openmm.unit.kilojoule_per_mole / openmm.unit.nanometer
_MMFF_GROUPS = frozenset(TERM_GROUPS.values())
_ALL_GROUPS = _MMFF_GROUPS | {RESTRAINT_GROUP}

# Optimiser settings (see the module docstring).
_MEMORY = 20  # L-BFGS pairs kept per conformer
_MAX_STEP = 0.3  # Å, largest displacement of any atom in one trial step
_ARMIJO = 1.0e-4
_MAX_BACKTRACKS = 30
_REFRESH_DISPLACEMENT = 0.5  # Å moved by some atom since the preconditioner was built


@dataclass(frozen=True)
class MinimizationResult:
    """Outcome of minimising one conformer.

    Attributes
    ----------
    coords : numpy.ndarray
        Final coordinates, shape ``(n_atoms, 3)``, Å.
    energy : float
        MMFF energy at ``coords``, kJ/mol (never includes restraint energy).
    rms_gradient : float
        RMS of the Cartesian gradient of the minimised function (MMFF plus any
        restraints) at ``coords``, kJ mol^-1 Å^-1.
    converged : bool
        True when ``rms_gradient`` fell below the tolerance within the iteration limit.
    n_iterations : int
        Accepted L-BFGS steps.
    n_evaluations : int
        Force evaluations spent on this conformer.
    """

    coords: np.ndarray
    energy: float
    rms_gradient: float
    converged: bool
    n_iterations: int
    n_evaluations: int


def create_system(
    mol: Chem.Mol,
    variant: str = "MMFF94",
    dielectric: float = 1.0,
    distance_dependent: bool = False,
    *,
    n_copies: int = 1,
) -> openmm.System:
    """Build an OpenMM System with the seven MMFF terms of ``mol``.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogens.
    variant : str
        ``"MMFF94"`` or ``"MMFF94s"`` (own torsion and out-of-plane parameters).
    dielectric : float
        Dielectric constant D.
    distance_dependent : bool
        Use the distance-dependent dielectric ``D * (R + 0.05)``.
    n_copies : int
        Number of non-interacting copies of the molecule (copy ``c`` is particles
        ``c * n_atoms`` to ``(c + 1) * n_atoms - 1``; non-bonded pairs only within a copy),
        the layout :meth:`MMFFModel.minimize` evaluates many conformers with.

    Returns
    -------
    openmm.System
        Particles with the atoms' masses and forces in groups
        :data:`chairbuild.forcefields.mmff_terms.TERM_GROUPS` (bond 0 ... electrostatic 6; a term
        the molecule lacks has no force); OpenMM units (nm, kJ/mol).

    Raises
    ------
    ForceFieldError
        Empty molecule, missing hydrogens, untypable atom or missing parameters.
    """
    if int(n_copies) < 1:
        raise OptionError(f"n_copies must be at least 1, got {n_copies!r}")
    params = extract_parameters(mol, variant, dielectric, distance_dependent)
    masses = [atom.GetMass() for atom in mol.GetAtoms()]
    return _build_system(params, masses, n_copies=int(n_copies), with_restraints=False)


def _build_system(
    params: MMFFParameters, masses: Sequence[float], n_copies: int, with_restraints: bool
) -> openmm.System:
    system = openmm.System()
    for _ in range(n_copies):
        for mass in masses:
            system.addParticle(mass)
    for force in build_forces(params, n_copies):
        system.addForce(force)
    if with_restraints:
        system.addForce(restraint_force(params, n_copies))
    return system


def _make_context(system: openmm.System, threads: int | None) -> openmm.Context:
    platform = openmm.Platform.getPlatformByName("CPU")
    properties = {} if threads is None else {"Threads": str(int(threads))}
    return openmm.Context(system, openmm.VerletIntegrator(0.001), platform, properties)


# --------------------------------------------------------------------------------------
# BLAS threads: the minimiser's small dense factorisations and products are far slower
# with several BLAS threads on a busy machine, so the minimiser runs them single-threaded.
# --------------------------------------------------------------------------------------

_BLAS_HANDLES: list[tuple[object, object]] | None = None


def _blas_handles() -> list[tuple[object, object]]:
    global _BLAS_HANDLES
    if _BLAS_HANDLES is None:
        import scipy.linalg  # noqa: F401  (load SciPy's BLAS before looking for it)

        handles = []
        try:
            with open("/proc/self/maps", encoding="utf-8") as maps:
                paths = {line.split()[-1] for line in maps if "openblas" in line.lower()}
        except OSError:
            paths = set()
        for path in sorted(paths):
            try:
                lib = ctypes.CDLL(path)
            except OSError:
                continue
            for stem in ("scipy_openblas", "openblas"):
                for suffix in ("64_", ""):
                    get = getattr(lib, f"{stem}_get_num_threads{suffix}", None)
                    put = getattr(lib, f"{stem}_set_num_threads{suffix}", None)
                    if get is not None and put is not None:
                        handles.append((get, put))
        _BLAS_HANDLES = handles
    return _BLAS_HANDLES


@contextlib.contextmanager
def _blas_threads(n: int) -> Iterator[None]:
    handles = _blas_handles()
    old = [get() for get, _ in handles]
    for _, put in handles:
        put(n)
    try:
        yield
    finally:
        for (_, put), value in zip(handles, old):
            put(value)


# --------------------------------------------------------------------------------------
# Slot-parallel preconditioned L-BFGS
# --------------------------------------------------------------------------------------

_IDLE, _START, _TRIAL = 0, 1, 2


class _SlotMinimizer:
    """Independent L-BFGS runs on ``n_slots`` conformers sharing each force call.

    ``evaluate(slots, coords)`` must return the gradient (kJ mol^-1 Å^-1) of the
    minimised function for the given slots at ``coords`` (shape ``(k, 3 * n_atoms)``, Å).
    The L-BFGS memory is one ring buffer shared by all slots (a slot that did not step
    in a round stores an empty pair), so every operation is a contiguous array op.
    """

    def __init__(
        self, n_slots: int, precond: Preconditioner, tolerance: float, max_iterations: int
    ) -> None:
        n3 = precond.n3
        self.precond = precond
        self.tolerance = tolerance
        self.max_iterations = max_iterations
        self.n_slots = n_slots
        self.phase = np.zeros(n_slots, dtype=int)
        self.conf = np.full(n_slots, -1)
        self.x = np.zeros((n_slots, n3))
        self.g = np.zeros((n_slots, n3))
        self.d = np.zeros((n_slots, n3))
        self.trial = np.zeros((n_slots, n3))
        self.gd = np.zeros(n_slots)
        self.alpha = np.zeros(n_slots)
        self.mem_s = np.zeros((_MEMORY, n_slots, n3))
        self.mem_y = np.zeros((_MEMORY, n_slots, n3))
        self.rho = np.zeros((_MEMORY, n_slots))
        self.head = 0
        self.last_y = np.zeros((n_slots, n3))
        self.last_sy = np.zeros(n_slots)
        self.pinv = np.zeros((n_slots, n3, n3))
        self.xref = np.zeros((n_slots, n3))
        self.iters = np.zeros(n_slots, dtype=int)
        self.evals = np.zeros(n_slots, dtype=int)
        self.backtracks = np.zeros(n_slots, dtype=int)
        self.steepest = np.zeros(n_slots, dtype=bool)

    def _forget(self, slots: np.ndarray) -> None:
        self.rho[:, slots] = 0.0
        self.last_sy[slots] = 0.0

    def _load(self, slot: int) -> None:
        try:
            conf = next(self._queue)
        except StopIteration:
            self.phase[slot], self.conf[slot] = _IDLE, -1
            return
        self.conf[slot] = conf
        self.phase[slot] = _START
        self.x[slot] = self.trial[slot] = self._starts[conf]
        self._forget(np.array([slot]))
        self.iters[slot] = self.evals[slot] = self.backtracks[slot] = 0
        self.steepest[slot] = False

    def _finish(self, slots: list[int], converged: list[bool]) -> None:
        for slot, ok in zip(slots, converged):
            rms = float(np.sqrt(np.mean(self.g[slot] ** 2)))
            self._results[self.conf[slot]] = (
                self.x[slot].copy(), rms, bool(ok), int(self.iters[slot]), int(self.evals[slot])
            )
            self._load(slot)

    def _refresh(self, slots: np.ndarray) -> None:
        if len(slots):
            self.pinv[slots] = self.precond.inverses(self.x[slots].reshape(len(slots), -1, 3))
            self.xref[slots] = self.x[slots]

    def _directions(self, need: np.ndarray) -> None:
        """Two-loop recursion with H0 = gamma * P^-1 for the slots in ``need``.

        The loops run on all slots at once (contiguous arrays); only the rows of
        ``need`` are kept. Sets d, gd, alpha and the trial point.
        """
        slots = np.flatnonzero(need)
        if not len(slots):
            return
        order = [(self.head - 1 - j) % _MEMORY for j in range(_MEMORY)]  # newest first
        q = self.g.copy()
        a = np.zeros((_MEMORY, self.n_slots))
        for i in order:
            a[i] = self.rho[i] * np.einsum("kn,kn->k", self.mem_s[i], q)
            q -= a[i, :, None] * self.mem_y[i]
        both = np.matmul(self.pinv, np.stack([q, self.last_y], axis=2))  # P^-1 q, P^-1 y_last
        z, py = both[:, :, 0], both[:, :, 1]
        ypy = np.einsum("kn,kn->k", self.last_y, py)
        have = (self.last_sy > 0.0) & (ypy > 0.0)
        z *= np.where(have, self.last_sy / np.where(have, ypy, 1.0), 1.0)[:, None]
        for i in reversed(order):
            b = self.rho[i] * np.einsum("kn,kn->k", self.mem_y[i], z)
            z += (a[i] - b)[:, None] * self.mem_s[i]
        d = -z[slots]
        gd = np.einsum("kn,kn->k", self.g[slots], d)
        bad = ~(gd < 0.0)
        if bad.any():  # not a descent direction: forget the memory, use -P^-1 g
            worst = slots[bad]
            self._forget(worst)
            d[bad] = [-(self.pinv[w] @ self.g[w]) for w in worst.tolist()]
            gd[bad] = np.einsum("kn,kn->k", self.g[worst], d[bad])
        step = np.sqrt((d.reshape(len(slots), -1, 3) ** 2).sum(axis=2)).max(axis=1)
        self.alpha[slots] = np.minimum(1.0, _MAX_STEP / np.maximum(step, 1e-300))
        self.d[slots], self.gd[slots] = d, gd
        self.trial[slots] = self.x[slots] + self.alpha[slots, None] * d
        self.phase[slots] = _TRIAL

    def run(
        self, starts: np.ndarray, evaluate: Callable[[np.ndarray, np.ndarray], np.ndarray]
    ) -> list[tuple]:
        """Minimise every row of ``starts`` (shape ``(n_conf, 3 * n_atoms)``)."""
        self._starts = starts
        self._queue = iter(range(len(starts)))
        self._results: list = [None] * len(starts)
        for slot in range(self.n_slots):
            self._load(slot)
        tol2 = self.tolerance**2
        with np.errstate(all="ignore"):  # idle rows may hold stale numbers
            while True:
                active = np.flatnonzero(self.phase != _IDLE)
                if not len(active):
                    break
                grad = np.full_like(self.g, np.nan)
                grad[active] = evaluate(active, self.trial[active])
                self.evals[active] += 1
                finite = np.isfinite(grad).all(axis=1)
                need_dir = np.zeros(self.n_slots, dtype=bool)
                need_ref = np.zeros(self.n_slots, dtype=bool)
                done: list[int] = []
                done_ok: list[bool] = []

                # First evaluation of a newly loaded conformer.
                start = self.phase == _START
                self.g[start] = grad[start]
                ok_now = start & finite & (np.mean(grad**2, axis=1) <= tol2)
                fail = start & ~finite
                for slot in np.flatnonzero(ok_now | fail).tolist():
                    done.append(slot)
                    done_ok.append(bool(ok_now[slot]))
                go = start & ~ok_now & ~fail
                need_dir |= go
                need_ref |= go

                # A trial step: accept on the trapezoidal Armijo test, else shorten it.
                trial = self.phase == _TRIAL
                gtd = np.einsum("kn,kn->k", np.where(finite[:, None], grad, 0.0), self.d)
                test = 0.5 * self.alpha * (self.gd + gtd) <= _ARMIJO * self.alpha * self.gd
                accept = trial & finite & test
                reject = trial & ~accept
                if accept.any():
                    s_all = np.where(accept[:, None], self.trial - self.x, 0.0)
                    y_all = np.where(accept[:, None], grad - self.g, 0.0)
                    sy = np.einsum("kn,kn->k", s_all, y_all)
                    ss = np.einsum("kn,kn->k", s_all, s_all)
                    scale = np.sqrt(ss * np.einsum("kn,kn->k", y_all, y_all))
                    good = accept & (sy > 1e-12 * scale)
                    if good.any():
                        h = self.head
                        self.mem_s[h], self.mem_y[h] = s_all, y_all
                        self.rho[h] = np.where(good, 1.0 / np.where(good, sy, 1.0), 0.0)
                        self.last_y[good], self.last_sy[good] = y_all[good], sy[good]
                        self.head = (h + 1) % _MEMORY
                    self.x[accept] = self.trial[accept]
                    self.g[accept] = grad[accept]
                    self.iters[accept] += 1
                    self.backtracks[accept] = 0
                    self.steepest[accept] = False
                    converged = accept & (np.mean(grad**2, axis=1) <= tol2)
                    stop = accept & (converged | (self.iters >= self.max_iterations))
                    for slot in np.flatnonzero(stop).tolist():
                        done.append(slot)
                        done_ok.append(bool(converged[slot]))
                    go = accept & ~stop
                    moved = np.sqrt(((self.x - self.xref).reshape(self.n_slots, -1, 3) ** 2).sum(axis=2))
                    need_ref |= go & (moved.max(axis=1) > _REFRESH_DISPLACEMENT)
                    need_dir |= go
                if reject.any():
                    self.backtracks[reject] += 1
                    alpha, gd = self.alpha[reject], self.gd[reject]
                    up = gtd[reject]
                    rising = finite[reject] & (up > gd)  # derivative root by the secant rule
                    secant = np.where(rising, alpha * gd / np.where(rising, gd - up, -1.0), 0.5 * alpha)
                    self.alpha[reject] = np.clip(secant, 0.1 * alpha, 0.5 * alpha)
                    self.trial[reject] = self.x[reject] + self.alpha[reject, None] * self.d[reject]
                    stuck = reject & (self.backtracks > _MAX_BACKTRACKS)
                    for slot in np.flatnonzero(stuck & self.steepest).tolist():
                        done.append(slot)
                        done_ok.append(False)
                    retry = stuck & ~self.steepest  # restart from the preconditioned gradient
                    self._forget(np.flatnonzero(retry))
                    self.backtracks[retry] = 0
                    self.steepest[retry] = True
                    need_ref |= retry
                    need_dir |= retry

                for slot in done:
                    need_dir[slot] = need_ref[slot] = False
                self._finish(done, done_ok)
                self._refresh(np.flatnonzero(need_ref))
                self._directions(need_dir)
        return self._results


# --------------------------------------------------------------------------------------
# The energy model
# --------------------------------------------------------------------------------------


def _default_slots(n_atoms: int) -> int:
    """Copies in the replicated System: enough to hide OpenMM's per-call cost."""
    return int(min(32, max(4, 1600 // max(n_atoms, 1))))


class _Engine:
    """One OpenMM Context (``n_copies`` copies) and its restraint bookkeeping."""

    def __init__(
        self, params: MMFFParameters, masses: Sequence[float], n_copies: int, threads: int | None
    ) -> None:
        self.n_copies = n_copies
        self.n_atoms = params.n_atoms
        self.system = _build_system(params, masses, n_copies, with_restraints=True)
        self.restraint = self.system.getForce(self.system.getNumForces() - 1)
        self.dihedrals = params.dihedrals
        self.context = _make_context(self.system, threads)
        self.active: dict[int, float] = {}
        self.seconds_per_call = math.nan

    def set_restraints(self, targets: dict[int, float], k: float, width: float) -> None:
        """Switch on dihedral slots ``targets`` (slot -> theta0, rad); all others off."""
        if targets != self.active:
            nd = len(self.dihedrals)
            for slot in set(self.active) | set(targets):
                on, theta0 = (1.0, targets[slot]) if slot in targets else (0.0, 0.0)
                for c in range(self.n_copies):
                    atoms = (self.dihedrals[slot] + c * self.n_atoms).tolist()
                    self.restraint.setTorsionParameters(c * nd + slot, *atoms, [on, theta0])
            self.restraint.updateParametersInContext(self.context)
            self.active = dict(targets)
        self.context.setParameter("k_restraint", k if targets else 0.0)
        self.context.setParameter("w_restraint", width)

    def forces(self, positions_nm: np.ndarray, groups: frozenset[int]) -> np.ndarray:
        """Forces (kJ mol^-1 nm^-1), shape ``(n_copies * n_atoms, 3)``."""
        start = time.perf_counter()
        self.context.setPositions(positions_nm)
        state = self.context.getState(getForces=True, groups=set(groups))
        out = state.getForces(asNumpy=True).value_in_unit(_FORCE_UNIT)
        elapsed = time.perf_counter() - start
        old = self.seconds_per_call
        self.seconds_per_call = elapsed if math.isnan(old) else 0.8 * old + 0.2 * elapsed
        return out


class MMFFModel(EnergyModel):
    """MMFF94 or MMFF94s energy, gradient and minimisation of one molecule in OpenMM.

    The System and a CPU Context are built once in the constructor and reused for
    every geometry; the replicated Context used by :meth:`minimize` is built on its
    first use and then kept.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        Molecule with explicit hydrogens (its conformers are not used).
    variant : str
        ``"MMFF94"`` or ``"MMFF94s"``.
    dielectric : float
        Dielectric constant D.
    distance_dependent : bool
        Use the distance-dependent dielectric ``D * (R + 0.05)``.
    threads : int or None
        ``Threads`` property of OpenMM's CPU platform (None: OpenMM's default).
    slots : int or None
        Conformers minimised side by side in one replicated System (None: chosen from
        the molecule size, 4 to 32).

    Raises
    ------
    ForceFieldError
        The molecule cannot be described by MMFF (see :func:`create_system`).
    """

    def __init__(
        self,
        mol: Chem.Mol,
        variant: str = "MMFF94",
        dielectric: float = 1.0,
        distance_dependent: bool = False,
        threads: int | None = None,
        *,
        slots: int | None = None,
    ) -> None:
        if threads is not None and int(threads) < 1:
            raise OptionError(f"threads must be a positive integer, got {threads!r}")
        if slots is not None and int(slots) < 1:
            raise OptionError(f"slots must be a positive integer, got {slots!r}")
        self.parameters = extract_parameters(mol, variant, dielectric, distance_dependent)
        self.name = self.parameters.variant
        self.n_atoms = self.parameters.n_atoms
        self.threads = threads
        self.slots = _default_slots(self.n_atoms) if slots is None else int(slots)
        self._masses = [atom.GetMass() for atom in mol.GetAtoms()]
        self._single = _Engine(self.parameters, self._masses, 1, threads)
        self._replicated: _Engine | None = None
        self._precond = Preconditioner(self.parameters)
        self._precond_key: tuple = ((), 0.0)
        quads = self.parameters.dihedrals.tolist()
        self._dihedral_slot = {tuple(q): i for i, q in enumerate(quads)}
        self._dihedral_slot.update({tuple(reversed(q)): i for i, q in enumerate(quads)})

    @property
    def system(self) -> openmm.System:
        """The single-copy System (seven MMFF forces plus the restraint slots, group 7)."""
        return self._single.system

    # -- single geometries ------------------------------------------------------------
    def _positions(self, coords: np.ndarray) -> np.ndarray:
        xyz = np.asarray(coords, dtype=float)
        if xyz.shape != (self.n_atoms, 3):
            raise ForceFieldError(
                f"coordinates of shape {xyz.shape} do not match the molecule's {self.n_atoms} atoms"
            )
        if not np.isfinite(xyz).all():
            raise ForceFieldError("coordinates contain NaN or infinity")
        return xyz * ANGSTROM_TO_NM

    def _state(self, coords: np.ndarray, groups: frozenset[int], forces: bool) -> openmm.State:
        context = self._single.context
        context.setPositions(self._positions(coords))
        return context.getState(getEnergy=True, getForces=forces, groups=set(groups))

    def energy(self, coords: np.ndarray) -> float:
        """Return the MMFF energy (kJ/mol) at ``coords`` (shape ``(n_atoms, 3)``, Å)."""
        state = self._state(coords, _MMFF_GROUPS, forces=False)
        return float(state.getPotentialEnergy().value_in_unit(_KJ_PER_MOL))

    def energy_and_gradient(self, coords: np.ndarray) -> tuple[float, np.ndarray]:
        """Return the MMFF energy (kJ/mol) and gradient (kJ mol^-1 Å^-1, ``(n_atoms, 3)``)."""
        state = self._state(coords, _MMFF_GROUPS, forces=True)
        energy = float(state.getPotentialEnergy().value_in_unit(_KJ_PER_MOL))
        grad = -state.getForces(asNumpy=True).value_in_unit(_FORCE_UNIT) * ANGSTROM_TO_NM
        return energy, np.asarray(grad)

    def term_energies(self, coords: np.ndarray) -> dict[str, float]:
        """Return each MMFF term's energy (kJ/mol) at ``coords``.

        Keys: ``bond``, ``angle``, ``stretch_bend``, ``oop``, ``torsion``, ``vdw``,
        ``electrostatic``.
        """
        context = self._single.context
        context.setPositions(self._positions(coords))
        return {
            name: float(
                context.getState(getEnergy=True, groups={group})
                .getPotentialEnergy()
                .value_in_unit(_KJ_PER_MOL)
            )
            for name, group in TERM_GROUPS.items()
        }

    def hessian(self, coords: np.ndarray, step: float = 0.005) -> np.ndarray:
        """Return the Cartesian Hessian by central differences of analytic gradients.

        Row ``k`` is ``(g(x + step e_k) - g(x - step e_k)) / (2 step)``; the result is
        symmetrised, ``(H + H^T) / 2``. The ``6 n_atoms`` displaced gradients are
        evaluated in batches on the replicated Context.

        Parameters
        ----------
        coords : numpy.ndarray
            Coordinates, Å, shape ``(n_atoms, 3)``.
        step : float
            Displacement, Å (default 0.005).

        Returns
        -------
        numpy.ndarray
            Hessian of the MMFF energy, kJ mol^-1 Å^-2, shape ``(3 n_atoms, 3 n_atoms)``.
        """
        if not step > 0.0:
            raise OptionError(f"step must be positive, got {step!r}")
        x0 = self._positions(coords) / ANGSTROM_TO_NM
        n3 = 3 * self.n_atoms
        shifts = np.eye(n3) * step
        displaced = np.concatenate([x0.reshape(1, n3) + shifts, x0.reshape(1, n3) - shifts])
        grads = self._gradients(displaced.reshape(-1, self.n_atoms, 3)).reshape(2, n3, n3)
        hess = (grads[0] - grads[1]) / (2.0 * step)
        return 0.5 * (hess + hess.T)

    def _gradients(self, coords_batch: np.ndarray) -> np.ndarray:
        """MMFF gradients (kJ mol^-1 Å^-1) of many geometries, ``(n, n_atoms, 3)``."""
        if len(coords_batch) > 2 and self._replicated is None:
            self._replicated = _Engine(self.parameters, self._masses, self.slots, self.threads)
        out = np.empty_like(coords_batch)
        if len(coords_batch) <= 2:
            for row, xyz in enumerate(coords_batch):
                out[row] = self._single.forces(xyz * ANGSTROM_TO_NM, _MMFF_GROUPS)
        else:
            many = self._replicated
            buffer = np.repeat(coords_batch[:1], many.n_copies, axis=0) * ANGSTROM_TO_NM
            for begin in range(0, len(coords_batch), many.n_copies):
                chunk = coords_batch[begin : begin + many.n_copies]
                buffer[: len(chunk)] = chunk * ANGSTROM_TO_NM
                forces = many.forces(buffer.reshape(-1, 3), _MMFF_GROUPS)
                out[begin : begin + len(chunk)] = forces.reshape(-1, self.n_atoms, 3)[: len(chunk)]
        return -out * ANGSTROM_TO_NM

    # -- minimisation -----------------------------------------------------------------
    def _restraint_targets(self, restraints: Sequence[Sequence[float]] | None) -> dict[int, float]:
        targets: dict[int, float] = {}
        for item in restraints or ():
            if len(item) != 5:
                raise OptionError(f"a restraint is (i, j, k, l, target_deg), got {item!r}")
            key = tuple(int(a) for a in item[:4])
            if key not in self._dihedral_slot:
                raise OptionError(f"restraint atoms {key} are not a bonded dihedral i-j-k-l")
            target = float(item[4])
            if not math.isfinite(target):
                raise OptionError(f"restraint target must be finite, got {item[4]!r}")
            targets[self._dihedral_slot[key]] = math.radians(target)
        return targets

    def minimize(
        self,
        coords_batch: np.ndarray,
        tolerance: float = DEFAULT_TOLERANCE,
        max_iterations: int = DEFAULT_MAX_ITERATIONS,
        restraints: Sequence[tuple[int, int, int, int, float]] | None = None,
        restraint_force_constant: float = DEFAULT_RESTRAINT_FORCE_CONSTANT,
        restraint_width: float = 0.0,
    ) -> list[MinimizationResult]:
        """Minimise each conformer of ``coords_batch`` independently.

        Parameters
        ----------
        coords_batch : numpy.ndarray
            Starting coordinates, shape ``(n_conf, n_atoms, 3)`` (or ``(n_atoms, 3)``), Å.
        tolerance : float
            Convergence threshold on the RMS of the ``3 * n_atoms`` Cartesian gradient
            components of the minimised function, kJ mol^-1 Å^-1.
        max_iterations : int
            Accepted steps allowed per conformer.
        restraints : sequence of (i, j, k, l, target_deg), optional
            Dihedral restraints (each i-j-k-l must be bonded), applied during the
            minimisation only: ``E = k * max(0, |phi - target| - width)^2`` with the
            difference wrapped to [-180, 180) degrees (dihedral sign as RDKit's
            ``GetDihedralDeg``).
        restraint_force_constant : float
            ``k`` in kJ mol^-1 rad^-2.
        restraint_width : float
            Half-width of the flat bottom, degrees (0: plain harmonic).

        Returns
        -------
        list of MinimizationResult
            One per conformer, in input order. ``energy`` is the MMFF energy without
            the restraints; ``rms_gradient`` is that of the minimised function.
        """
        batch = np.asarray(coords_batch, dtype=float)
        if batch.ndim == 2:
            batch = batch[None]
        if batch.ndim != 3 or batch.shape[1:] != (self.n_atoms, 3):
            raise ForceFieldError(
                f"coords_batch of shape {batch.shape} does not match (n_conf, {self.n_atoms}, 3)"
            )
        if not np.isfinite(batch).all():
            raise ForceFieldError("coords_batch contains NaN or infinity")
        if not tolerance > 0.0:
            raise OptionError(f"tolerance must be positive, got {tolerance!r}")
        if int(max_iterations) < 1:
            raise OptionError(f"max_iterations must be at least 1, got {max_iterations!r}")
        if not (restraint_force_constant >= 0.0 and restraint_width >= 0.0):
            raise OptionError("restraint force constant and width must be non-negative")
        if len(batch) == 0:
            return []
        targets = self._restraint_targets(restraints)
        groups = _ALL_GROUPS if targets else _MMFF_GROUPS
        width = math.radians(restraint_width)
        n_slots = min(self.slots, len(batch))
        use_replicated = n_slots > 2
        if use_replicated and self._replicated is None:
            self._replicated = _Engine(self.parameters, self._masses, self.slots, self.threads)
        engines = [self._single] + ([self._replicated] if use_replicated else [])
        for engine in engines:
            engine.set_restraints(targets, restraint_force_constant, width)
        key = (tuple(sorted(targets)), float(restraint_force_constant) if targets else 0.0)
        if key != self._precond_key:
            quads = self.parameters.dihedrals[list(key[0])] if targets else None
            self._precond.set_restraints(quads, restraint_force_constant)
            self._precond_key = key
        n3 = 3 * self.n_atoms
        if use_replicated and math.isnan(self._single.seconds_per_call):
            for _ in range(3):  # time the single Context to choose the cheaper path later
                self._single.forces(batch[0] * ANGSTROM_TO_NM, groups)
        buffer = np.repeat(batch[:1].reshape(1, n3), self.slots, axis=0) * ANGSTROM_TO_NM
        grad_scale = -ANGSTROM_TO_NM

        def evaluate(active: np.ndarray, coords: np.ndarray) -> np.ndarray:
            single = self._single
            many = self._replicated if use_replicated else None
            if many is not None and not (
                len(active) * single.seconds_per_call < many.seconds_per_call
            ):
                buffer[active] = coords * ANGSTROM_TO_NM
                f = many.forces(buffer.reshape(-1, 3), groups).reshape(self.slots, n3)
                return f[active] * grad_scale
            out = np.empty_like(coords)
            for row, xyz in enumerate(coords):
                out[row] = single.forces((xyz * ANGSTROM_TO_NM).reshape(-1, 3), groups).reshape(-1)
            return out * grad_scale

        with _blas_threads(1):
            n_run = self.slots if use_replicated else 1
            runner = _SlotMinimizer(n_run, self._precond, float(tolerance), int(max_iterations))
            raw = runner.run(batch.reshape(len(batch), n3), evaluate)
        results = []
        for x, rms, converged, iters, evals in raw:
            coords = x.reshape(self.n_atoms, 3)
            results.append(
                MinimizationResult(
                    coords=coords,
                    energy=self.energy(coords),
                    rms_gradient=rms,
                    converged=converged,
                    n_iterations=iters,
                    n_evaluations=evals,
                )
            )
        return results
