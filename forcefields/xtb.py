"""GFN2-xTB energies, gradients and Hessians through tblite, in vacuum or implicit solvent.

:class:`XTBModel` wraps one ``tblite.interface.Calculator`` per molecule. The calculator
is built at the first evaluation and then only its coordinates are updated for every
further geometry (``Calculator.update``); the converged wavefunction of the previous
geometry is passed to tblite as the starting guess of the next SCF. Both choices were
measured with tblite 0.8.0 on methylcyclohexane (21 atoms, one core): building a new
calculator per geometry costs about 6.3 ms per single point, updating the positions
about 6.0 ms, updating and restarting from the previous wavefunction about 5.1 ms.

Units
-----
tblite works in bohr and hartree. This module converts at its boundary only: the public
methods take coordinates in Å and return energies in kJ/mol, gradients in
kJ mol^-1 Å^-1 and Hessians in kJ mol^-1 Å^-2, using the CODATA 2018 factors of
:mod:`chairbuild.constants`.

Threads
-------
tblite parallelises with OpenMP. The OpenMP runtime (GNU libgomp for the tblite wheels on
Linux) reads ``OMP_NUM_THREADS`` once, when the runtime is loaded, i.e. at the first
import of tblite or of any other library that links the same runtime; setting the
variable later in the same process has no effect. ``XTBModel(threads=n)`` therefore sets
the thread count at run time instead: it finds the OpenMP runtimes mapped into the
process (``/proc/self/maps``, Linux only), calls their ``omp_set_num_threads(n)`` before
each tblite call and restores the previous value afterwards. The setting is per calling
thread, so models used from different Python threads do not interfere. Where no OpenMP
runtime can be found (another platform, a tblite built without OpenMP) ``threads`` is
ignored with a :class:`RuntimeWarning`; there, set ``OMP_NUM_THREADS`` in the environment
before Python starts.

Timing
------
One GFN2-xTB energy and gradient of methylcyclohexane (21 atoms) on this project's
2-core development machine, tblite 0.8.0: about 7 ms from the default guess and 4 ms
restarted from a neighbouring geometry's wavefunction (ALPB adds about 5 %); the
finite-difference Hessian (126 gradients) about 0.75 s with one thread and 0.6 s with
two on an otherwise idle machine. While other processes keep the cores busy, two
threads made the same Hessian 6-7 s (OpenMP threads spin while waiting) against
1.1-1.5 s with one. For molecules of this size, ``threads=1`` and parallelism over
conformers is the better choice.

Solvents
--------
The names accepted for ALPB and GBSA are those of tblite 0.8.0, listed with their
parameter sets in ``forcefields/data/xtb_solvents.txt`` (the file says how the list was
produced). Reference: ALPB and GBSA for GFN2-xTB, Ehlert, Stahn, Spicher & Grimme,
J. Chem. Theory Comput. 2021, 17, 4250 (cited from memory); GFN2-xTB, Bannwarth, Ehlert
& Grimme, J. Chem. Theory Comput. 2019, 15, 1652.
"""

from __future__ import annotations

import contextlib
import ctypes
import dataclasses
import enum
import functools
import os
import re
import warnings
from collections.abc import Iterator, Sequence
from typing import Any

import numpy as np

from chairbuild.constants import ANGSTROM_TO_BOHR, HARTREE_TO_KJ
from chairbuild.errors import (
    ConvergenceError,
    ForceFieldError,
    InputError,
    OptionError,
)
from chairbuild.forcefields.base import EnergyModel

__all__ = [
    "SolvationModel",
    "XTBModel",
    "XTBOptimizationResult",
    "available_solvents",
]

#: Largest atomic number GFN2-xTB is parametrised for.
_MAX_ATOMIC_NUMBER = 86
#: Gradient of tblite (hartree/bohr) to kJ mol^-1 Å^-1.
_GRADIENT_TO_KJ_PER_A = HARTREE_TO_KJ * ANGSTROM_TO_BOHR
#: tblite accuracy parameter used at most while finite-differencing a Hessian.
_HESSIAN_ACCURACY = 0.1
#: Restarts of L-BFGS-B when it stops (line search on SCF noise) with the gradient above gtol.
_OPTIMISE_RESTARTS = 3
_OPENMP_NAME = re.compile(r"^lib(gomp|omp|iomp5)([-.][^/]*)?\.so")


class SolvationModel(enum.Enum):
    """Implicit solvation model of GFN2-xTB."""

    #: Analytical linearised Poisson-Boltzmann model.
    ALPB = "alpb"
    #: Generalised Born model with solvent-accessible surface area term.
    GBSA = "gbsa"


@dataclasses.dataclass(frozen=True, eq=False)
class XTBOptimizationResult:
    """Outcome of :meth:`XTBModel.optimize`.

    Attributes
    ----------
    coords : numpy.ndarray
        Final coordinates, Å, shape ``(n_atoms, 3)``.
    energy : float
        Energy at ``coords``, kJ/mol.
    rms_gradient : float
        Root-mean-square Cartesian gradient component at ``coords``, kJ mol^-1 Å^-1.
    max_gradient : float
        Largest absolute Cartesian gradient component at ``coords``, kJ mol^-1 Å^-1.
    converged : bool
        True when ``max_gradient <= gtol``.
    n_steps : int
        L-BFGS-B iterations taken.
    n_evaluations : int
        Energy-and-gradient evaluations taken.
    message : str
        Stopping message of the minimiser.
    """

    coords: np.ndarray
    energy: float
    rms_gradient: float
    max_gradient: float
    converged: bool
    n_steps: int
    n_evaluations: int
    message: str


@functools.lru_cache(maxsize=1)
def _solvent_table() -> dict[SolvationModel, dict[str, str]]:
    """Read ``data/xtb_solvents.txt``: model -> {accepted name: parameter set}."""
    from importlib import resources

    text = resources.files("chairbuild.forcefields").joinpath("data/xtb_solvents.txt").read_text()
    table: dict[SolvationModel, dict[str, str]] = {m: {} for m in SolvationModel}
    for line in text.splitlines():
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        model, name, parameter_set = line.split()
        table[SolvationModel(model)][name.lower()] = parameter_set
    return table


def available_solvents(
    solvation_model: SolvationModel | str = SolvationModel.ALPB,
    include_aliases: bool = False,
) -> list[str]:
    """Return the solvent names accepted for ``solvation_model``.

    Parameters
    ----------
    solvation_model : SolvationModel or str
        ``"alpb"`` or ``"gbsa"``.
    include_aliases : bool
        When False (default) only the canonical parameter-set names are returned,
        otherwise every accepted spelling.

    Returns
    -------
    list of str
        Sorted names.
    """
    table = _solvent_table()[_as_solvation_model(solvation_model)]
    if include_aliases:
        return sorted(table)
    return sorted(set(table.values()))


def _as_solvation_model(value: SolvationModel | str) -> SolvationModel:
    if isinstance(value, SolvationModel):
        return value
    try:
        return SolvationModel(str(value).lower())
    except ValueError:
        valid = ", ".join(m.value for m in SolvationModel)
        raise OptionError(
            f"unknown solvation model {value!r}; valid: {valid}"
        ) from None


# --------------------------------------------------------------------------- threads
_RUNTIME_CACHE: list[Any] = []


def _openmp_runtimes() -> list[Any]:
    """Return ctypes handles of the OpenMP runtimes already loaded in this process.

    The first non-empty answer is cached (a loaded runtime is never unloaded), so the
    process map is read once rather than at every single point (about 0.5 ms).
    """
    if _RUNTIME_CACHE:
        return list(_RUNTIME_CACHE)
    paths: list[str] = []
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                fields = line.split(maxsplit=5)
                if len(fields) < 6:
                    continue
                path = fields[5].strip()
                if _OPENMP_NAME.match(os.path.basename(path)) and path not in paths:
                    paths.append(path)
    except OSError:
        return []
    mode = getattr(os, "RTLD_NOLOAD", 0) | getattr(os, "RTLD_LOCAL", 0)
    handles = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path, mode=mode)
            lib.omp_set_num_threads.argtypes = [ctypes.c_int]
            lib.omp_get_max_threads.restype = ctypes.c_int
        except (OSError, AttributeError):
            continue
        handles.append(lib)
    _RUNTIME_CACHE.extend(handles)
    return handles


@contextlib.contextmanager
def _openmp_threads(n_threads: int | None) -> Iterator[None]:
    """Run the body with ``n_threads`` OpenMP threads in the calling thread."""
    if n_threads is None:
        yield
        return
    runtimes = _openmp_runtimes()
    if not runtimes:
        warnings.warn(
            "no OpenMP runtime found in this process; 'threads' is ignored "
            "(set OMP_NUM_THREADS before Python starts instead)",
            RuntimeWarning,
            stacklevel=4,
        )
        yield
        return
    previous = [lib.omp_get_max_threads() for lib in runtimes]
    for lib in runtimes:
        lib.omp_set_num_threads(n_threads)
    try:
        yield
    finally:
        for lib, n_prev in zip(runtimes, previous):
            lib.omp_set_num_threads(n_prev)


# --------------------------------------------------------------------------- model
class XTBModel(EnergyModel):
    """GFN2-xTB (tblite) energy model of one molecule, in gas phase or implicit solvent.

    Parameters
    ----------
    mol_or_numbers : rdkit.Chem.Mol or sequence of int
        The molecule with explicit hydrogen atoms, or its atomic numbers. With a
        molecule, the total charge is the sum of the formal charges and the number of
        unpaired electrons the sum of the radical electrons.
    charge : int, optional
        Total charge; overrides the molecule's formal charges. Default: from the
        molecule, or 0 for atomic numbers.
    solvent : str, optional
        Solvent name (see :func:`available_solvents`); None for the gas phase.
    solvation_model : SolvationModel or str
        ``"alpb"`` (default) or ``"gbsa"``; used only with ``solvent``.
    threads : int, optional
        OpenMP threads for tblite during this model's calls (see the module notes).
        None leaves the process setting alone.
    label : str, optional
        Name of the molecule used in error messages. Default: the molecule's ``_Name``
        property or its SMILES.
    unpaired_electrons : int, optional
        Overrides the number of unpaired electrons (tblite's ``uhf``).
    max_scf_iterations : int
        Maximum number of SCF cycles (tblite default 250).
    accuracy : float
        tblite's numerical accuracy parameter (smaller is tighter; default 1.0).
    reuse_wavefunction : bool
        Start each SCF from the previous geometry's wavefunction (default True). A
        failed SCF is retried once from the default guess before an error is raised.

    Raises
    ------
    InputError
        Implicit hydrogens on the molecule, no atoms, or an electron count that does
        not fit the number of unpaired electrons.
    ForceFieldError
        An element GFN2-xTB is not parametrised for (Z > 86 or dummy atoms).
    OptionError
        Unknown solvent or solvation model, or an option out of range.
    """

    has_gradient = True

    def __init__(
        self,
        mol_or_numbers: Any,
        charge: int | None = None,
        solvent: str | None = None,
        solvation_model: SolvationModel | str = SolvationModel.ALPB,
        threads: int | None = None,
        label: str | None = None,
        *,
        unpaired_electrons: int | None = None,
        max_scf_iterations: int = 250,
        accuracy: float = 1.0,
        reuse_wavefunction: bool = True,
    ) -> None:
        numbers, mol_charge, mol_unpaired, default_label = _read_system(mol_or_numbers)
        self.numbers: np.ndarray = numbers
        self.charge: int = int(mol_charge if charge is None else charge)
        self.unpaired_electrons: int = int(
            mol_unpaired if unpaired_electrons is None else unpaired_electrons
        )
        self.label: str = default_label if label is None else str(label)
        if self.unpaired_electrons < 0:
            raise OptionError("unpaired_electrons must be >= 0")
        n_electrons = int(numbers.sum()) - self.charge
        if n_electrons < 0 or (n_electrons - self.unpaired_electrons) % 2 != 0:
            raise InputError(
                f"{self.label}: {n_electrons} electrons (charge {self.charge}) do not "
                f"fit {self.unpaired_electrons} unpaired electron(s)"
            )
        if threads is not None and (int(threads) != threads or threads < 1):
            raise OptionError(f"threads must be a positive integer, got {threads!r}")
        if int(max_scf_iterations) != max_scf_iterations or max_scf_iterations < 1:
            raise OptionError(
                f"max_scf_iterations must be a positive integer, got {max_scf_iterations!r}"
            )
        if not accuracy > 0:
            raise OptionError(f"accuracy must be > 0, got {accuracy!r}")
        self.threads: int | None = None if threads is None else int(threads)
        self.max_scf_iterations = int(max_scf_iterations)
        self.accuracy = float(accuracy)
        self.reuse_wavefunction = bool(reuse_wavefunction)

        self.solvation_model: SolvationModel | None = None
        self.solvent: str | None = None
        self.solvent_parameter_set: str | None = None
        if solvent is not None:
            model = _as_solvation_model(solvation_model)
            key = str(solvent).strip().lower()
            table = _solvent_table()[model]
            if key not in table:
                raise OptionError(
                    f"unknown solvent {solvent!r} for {model.name}; valid names: "
                    + ", ".join(available_solvents(model))
                    + " (aliases: "
                    + ", ".join(n for n in sorted(table) if table[n] != n)
                    + ")"
                )
            self.solvation_model = model
            self.solvent = key
            self.solvent_parameter_set = table[key]
            self.name = f"GFN2-xTB/{model.name}({key})"
        else:
            self.name = "GFN2-xTB (gas)"

        self._calc: Any = None
        self._result: Any = None
        #: Number of geometries evaluated so far (the count error messages refer to).
        self.n_geometries: int = 0

    def __repr__(self) -> str:
        return (
            f"XTBModel({self.label!r}, name={self.name!r}, n_atoms={self.numbers.size}, "
            f"charge={self.charge}, unpaired_electrons={self.unpaired_electrons})"
        )

    # ----------------------------------------------------------------- engine
    def _build_calculator(self, positions_bohr: np.ndarray) -> Any:
        from tblite.interface import Calculator

        kwargs = {"charge": float(self.charge), "uhf": self.unpaired_electrons}
        try:
            calc = Calculator(
                "GFN2-xTB",
                self.numbers,
                positions_bohr,
                logger=_discard,
                color=False,
                **kwargs,
            )
        except TypeError:  # tblite without context keyword arguments
            calc = Calculator("GFN2-xTB", self.numbers, positions_bohr, **kwargs)
        calc.set("verbosity", 0)
        calc.set("max-iter", self.max_scf_iterations)
        calc.set("accuracy", self.accuracy)
        if self.solvation_model is not None:
            interaction = f"{self.solvation_model.value}-solvation"
            calc.add(interaction, self.solvent)
        return calc

    def _singlepoint(self, coords: np.ndarray) -> tuple[float, np.ndarray]:
        """Run one SCF; return (energy in hartree, gradient in hartree/bohr)."""
        import tblite.interface  # noqa: F401 - loads the library and its OpenMP runtime
        from tblite.exceptions import TBLiteRuntimeError

        positions = self._check_coords(coords) * ANGSTROM_TO_BOHR
        self.n_geometries += 1
        with _openmp_threads(self.threads):
            if self._calc is None:
                self._calc = self._build_calculator(positions)
            else:
                self._calc.update(positions)
            restart = self._result if self.reuse_wavefunction else None
            try:
                try:
                    result = self._calc.singlepoint(restart)
                except TBLiteRuntimeError:
                    if restart is None:
                        raise
                    self._result = None
                    result = self._calc.singlepoint(None)
            except TBLiteRuntimeError as exc:
                self._result = None
                message = str(exc)
                if "converge" in message.lower():
                    raise ConvergenceError(
                        f"SCF did not converge for {self.label} at geometry "
                        f"{self.n_geometries} ({message})"
                    ) from exc
                raise ForceFieldError(
                    f"tblite failed for {self.label} at geometry {self.n_geometries}: "
                    f"{message}"
                ) from exc
            self._result = result
            energy = float(result.get("energy"))
            gradient = np.array(result.get("gradient"), dtype=float).reshape(-1, 3)
        return energy, gradient

    def reset(self) -> None:
        """Drop the stored wavefunction and calculator: the next SCF starts from the default guess.

        Within one task (an optimisation, a Hessian) each SCF restarts from the previous
        geometry's wavefunction; between tasks the restart must not carry over, or a
        conformer's result would depend on which conformer the same worker computed
        before it (the restarted SCF converges to within tblite's accuracy, not exactly,
        and an optimisation that ends near its gradient threshold can flip from
        converged to not converged).
        """
        self._calc = None
        self._result = None

    def _check_coords(self, coords: np.ndarray) -> np.ndarray:
        x = np.asarray(coords, dtype=float)
        if x.shape != (self.numbers.size, 3):
            raise InputError(
                f"{self.label}: coordinates of shape {x.shape} given, "
                f"expected ({self.numbers.size}, 3)"
            )
        if not np.all(np.isfinite(x)):
            raise InputError(f"{self.label}: coordinates contain NaN or infinity")
        return x

    # ----------------------------------------------------------------- public API
    def energy(self, coords: np.ndarray) -> float:
        """Return the GFN2-xTB energy in kJ/mol.

        Parameters
        ----------
        coords : numpy.ndarray
            Coordinates, Å, shape ``(n_atoms, 3)``.

        Returns
        -------
        float
            Total energy (electronic plus solvation free energy in solvent), kJ/mol.

        Raises
        ------
        ConvergenceError
            The SCF did not converge.
        """
        return self._singlepoint(coords)[0] * HARTREE_TO_KJ

    def energy_and_gradient(self, coords: np.ndarray) -> tuple[float, np.ndarray]:
        """Return the energy (kJ/mol) and its analytic gradient (kJ mol^-1 Å^-1).

        Parameters
        ----------
        coords : numpy.ndarray
            Coordinates, Å, shape ``(n_atoms, 3)``.

        Returns
        -------
        energy : float
            kJ/mol.
        gradient : numpy.ndarray
            kJ mol^-1 Å^-1, shape ``(n_atoms, 3)``.

        Raises
        ------
        ConvergenceError
            The SCF did not converge.
        """
        energy, gradient = self._singlepoint(coords)
        return energy * HARTREE_TO_KJ, gradient * _GRADIENT_TO_KJ_PER_A

    def hessian(self, coords: np.ndarray, step: float = 0.005) -> np.ndarray:
        """Return the Cartesian Hessian by central differences of analytic gradients.

        Each of the ``3 n_atoms`` Cartesian coordinates is displaced by ``+step`` and
        ``-step``; row ``k`` is ``(g(x + step e_k) - g(x - step e_k)) / (2 step)``. The
        result is symmetrised, ``(H + H^T) / 2``. Cost: ``6 n_atoms`` gradients. The
        SCF runs with tblite accuracy ``min(accuracy, 0.1)`` meanwhile: at the default
        1.0 the gradient of a restarted SCF differs from a fresh one by up to about
        3e-3 kJ mol^-1 Å^-1 (methylcyclohexane), i.e. 0.3 kJ mol^-1 Å^-2 of noise in a
        Hessian element at ``step`` 0.005 Å; at 0.1 about 1e-4.

        Parameters
        ----------
        coords : numpy.ndarray
            Coordinates, Å, shape ``(n_atoms, 3)``.
        step : float
            Displacement, Å (default 0.005).

        Returns
        -------
        numpy.ndarray
            Hessian, kJ mol^-1 Å^-2, shape ``(3 n_atoms, 3 n_atoms)``.

        Raises
        ------
        OptionError
            ``step`` not positive.
        ConvergenceError
            An SCF did not converge.
        """
        if not step > 0:
            raise OptionError(f"step must be > 0, got {step!r}")
        x0 = self._check_coords(coords)
        with self._scf_accuracy(min(self.accuracy, _HESSIAN_ACCURACY)):
            return super().hessian(x0, step)

    @contextlib.contextmanager
    def _scf_accuracy(self, accuracy: float) -> Iterator[None]:
        """Run the body with tblite's accuracy parameter set to ``accuracy``."""
        saved = self.accuracy
        self.accuracy = accuracy
        if self._calc is not None:
            self._calc.set("accuracy", accuracy)
        try:
            yield
        finally:
            self.accuracy = saved
            if self._calc is not None:
                self._calc.set("accuracy", saved)

    def optimize(
        self,
        coords: np.ndarray,
        max_steps: int = 500,
        gtol: float = 0.1,
    ) -> XTBOptimizationResult:
        """Minimise the energy with SciPy's L-BFGS-B.

        Convergence criterion: the largest absolute Cartesian gradient component is at
        most ``gtol`` (kJ mol^-1 Å^-1); this is L-BFGS-B's own ``gtol`` test (no
        bounds are used) and is checked again on the final geometry. The relative
        energy-change test of L-BFGS-B is switched off (``ftol`` = 0), so the
        minimiser stops at ``gtol``, at ``max_steps`` iterations, or when its line
        search fails (SCF noise near a very tight ``gtol``). After a stop with the gradient
        still above ``gtol``, L-BFGS-B is restarted from the last geometry (up to
        three times, within ``max_steps`` iterations in all); ``converged`` is False only
        when the gradient test still fails then. The returned energy and gradient are the
        minimiser's own last evaluation at the returned geometry, so the convergence test
        and the result agree.

        Parameters
        ----------
        coords : numpy.ndarray
            Start coordinates, Å, shape ``(n_atoms, 3)``.
        max_steps : int
            Maximum L-BFGS-B iterations (default 500).
        gtol : float
            Gradient threshold, kJ mol^-1 Å^-1 (default 0.1, about 2e-5 hartree/bohr).

        Returns
        -------
        XTBOptimizationResult

        Raises
        ------
        OptionError
            ``max_steps`` or ``gtol`` out of range.
        ConvergenceError
            An SCF did not converge.
        """
        from scipy.optimize import minimize

        if int(max_steps) != max_steps or max_steps < 1:
            raise OptionError(f"max_steps must be a positive integer, got {max_steps!r}")
        if not gtol > 0:
            raise OptionError(f"gtol must be > 0, got {gtol!r}")
        x = self._check_coords(coords).ravel().copy()
        e_ref = self.energy(x.reshape(-1, 3))
        last: dict[str, Any] = {}

        def fun(y: np.ndarray) -> tuple[float, np.ndarray]:
            e, g = self.energy_and_gradient(y.reshape(-1, 3))
            last.update(x=y.copy(), e=e, g=g)
            return e - e_ref, g.ravel()

        n_steps = n_evaluations = 0
        message = ""
        for _ in range(_OPTIMISE_RESTARTS + 1):
            res = minimize(
                fun,
                x,
                jac=True,
                method="L-BFGS-B",
                options={"maxiter": int(max_steps) - n_steps, "gtol": float(gtol), "ftol": 0.0},
            )
            n_steps += int(res.nit)
            n_evaluations += int(res.nfev)
            message = str(res.message)
            x = np.asarray(res.x, dtype=float)
            if "x" in last and np.array_equal(last["x"], x):
                energy, gradient = last["e"], last["g"]  # the minimiser's own last evaluation
            else:
                energy, gradient = self.energy_and_gradient(x.reshape(-1, 3))
                n_evaluations += 1
            max_g = float(np.max(np.abs(gradient)))
            # a line search that fails on SCF noise just above gtol: restart L-BFGS-B from here
            if max_g <= gtol or n_steps >= max_steps or int(res.nit) == 0:
                break
        return XTBOptimizationResult(
            coords=x.reshape(-1, 3),
            energy=float(energy),
            rms_gradient=float(np.sqrt(np.mean(gradient**2))),
            max_gradient=max_g,
            converged=max_g <= gtol,
            n_steps=n_steps,
            n_evaluations=n_evaluations + 1,
            message=message,
        )

    def atomic_charges(self, coords: np.ndarray) -> np.ndarray:
        """Return the GFN2-xTB (Mulliken-type) atomic partial charges, e.

        Parameters
        ----------
        coords : numpy.ndarray
            Coordinates, Å, shape ``(n_atoms, 3)``.

        Returns
        -------
        numpy.ndarray
            Charges, shape ``(n_atoms,)``; they sum to the total charge.
        """
        self._singlepoint(coords)
        return np.array(self._result.get("charges"), dtype=float)


def _discard(message: str) -> None:
    """Logger for tblite that drops every message (keeps the console silent)."""


def _read_system(mol_or_numbers: Any) -> tuple[np.ndarray, int, int, str]:
    """Return atomic numbers, charge, unpaired electrons and a label."""
    if hasattr(mol_or_numbers, "GetAtoms"):
        mol = mol_or_numbers
        atoms = list(mol.GetAtoms())
        missing = [a.GetIdx() for a in atoms if a.GetTotalNumHs(includeNeighbors=False) > 0]
        label = _mol_label(mol)
        if missing:
            raise InputError(
                f"{label}: atoms {missing} carry implicit hydrogens; "
                "add them as atoms first (rdkit.Chem.AddHs)"
            )
        numbers = np.array([a.GetAtomicNum() for a in atoms], dtype=int)
        charge = sum(a.GetFormalCharge() for a in atoms)
        unpaired = sum(a.GetNumRadicalElectrons() for a in atoms)
    else:
        if isinstance(mol_or_numbers, (str, bytes)) or not isinstance(
            mol_or_numbers, (Sequence, np.ndarray)
        ):
            raise InputError(
                "expected an RDKit molecule or a sequence of atomic numbers, "
                f"got {type(mol_or_numbers).__name__}"
            )
        numbers = np.asarray(mol_or_numbers)
        if numbers.ndim != 1 or not np.issubdtype(numbers.dtype, np.integer):
            raise InputError("atomic numbers must be a 1-D sequence of integers")
        numbers = numbers.astype(int)
        charge, unpaired = 0, 0
        label = f"{numbers.size}-atom system"
    if numbers.size == 0:
        raise InputError(f"{label}: no atoms")
    bad = sorted({int(z) for z in numbers if z < 1 or z > _MAX_ATOMIC_NUMBER})
    if bad:
        raise ForceFieldError(
            f"{label}: GFN2-xTB has no parameters for atomic number(s) {bad} "
            f"(elements 1-{_MAX_ATOMIC_NUMBER} only)"
        )
    return numbers, int(charge), int(unpaired), label


def _mol_label(mol: Any) -> str:
    if mol.HasProp("_Name") and mol.GetProp("_Name").strip():
        return mol.GetProp("_Name").strip()
    try:
        from rdkit import Chem

        return Chem.MolToSmiles(Chem.RemoveHs(mol, sanitize=False))
    except Exception:  # noqa: BLE001 - a label must never make construction fail
        return "molecule"
