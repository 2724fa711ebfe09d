"""Kohn–Sham DFT energies and gradients through PySCF, with D3(BJ) dispersion and implicit solvent.

:class:`DFTModel` runs one self-consistent field calculation per geometry: restricted
Kohn–Sham (RKS) for a closed shell, unrestricted (UKS) when the multiplicity is above 1.
Charge and multiplicity come from the molecule (:func:`chairbuild.input.charge_and_multiplicity`:
the sum of the formal charges and the radical electrons, high spin). The Coulomb and
exchange integrals use density fitting with PySCF's default auxiliary basis for the
orbital basis (``def2-universal-jkfit`` for the def2 family).

Dispersion
----------
DFT-D3 with Becke–Johnson damping (Grimme, Ehrlich & Goerigk, J. Comput. Chem. 2011,
32, 1456; cited from memory) from the ``dftd3`` package (simple-dftd3), whose parameter
table is looked up by the functional's name; the energy and its analytic gradient are
added to the SCF's. ``dispersion=None`` switches it off.

Solvent
-------
``solvation_model`` is ``"cpcm"`` or ``"iefpcm"`` (PySCF's PCM family) or ``"smd"``.
The dielectric constant of a named solvent for C-PCM and IEF-PCM is the one of the
Minnesota Solvent Descriptor Database as shipped in PySCF
(``pyscf.solvent.smd.solvent_db``, column epsilon), which is also the table SMD uses;
the valid names are those of that table plus the few aliases of :data:`SOLVENT_ALIASES`.
An unknown name raises :class:`~chairbuild.errors.OptionError` listing them.

Gradients
---------
Analytic nuclear gradients for RKS/UKS with density fitting, PCM or SMD, plus the D3
gradient. Checked against central finite differences in ``tests/test_dft.py``.

Start guess, failures
---------------------
With ``reuse_density`` (default) an SCF starts from the converged density of the nearest
geometry this model has already computed (root-mean-square deviation after a Kabsch
superposition, among the last :data:`HISTORY_SIZE`) when that geometry lies within
``warm_start_max_rmsd`` (default :data:`WARM_START_MAX_RMSD_A`); otherwise from PySCF's
atomic guess. The density is rotated into the new geometry's orientation
(``pyscf.gto.mole.ao_rotation_matrix``), and the calculation itself always runs in the
caller's frame: the integration grid and the PCM surface are not rotation-invariant (up to
0.05 kJ/mol for N-methylpiperidine at B3LYP-D3(BJ)/def2-SVP/C-PCM), so computing in another
frame would make a result depend on what the model computed before. Measured (``tests/benchmarks/bench_dft.py``):
a start guess from a geometry 0.005 Å away (a Hessian step) saves about a third of the SCF
cycles, one 0.05 Å away about a tenth, while a neighbouring conformer (0.5–1 Å) costs cycles
rather than saving them; hence the threshold. An SCF that does not converge is retried on a
ladder: level shift, then damping with a later start of DIIS, then
second-order SCF (Newton), each from the atomic guess; when the last fails,
:class:`~chairbuild.errors.ConvergenceError` names every attempt.

Limits
------
A molecule with more than ``max_basis_functions`` basis functions (default
:data:`DEFAULT_MAX_BASIS_FUNCTIONS`) is refused when the model is built, before any
integral is computed: at def2-SVP 600 functions is about 60 heavy atoms, and one single
point of a 350-function molecule took about 40 s on one core here.

Units
-----
PySCF works in bohr and hartree; this module converts at its boundary only, with the
CODATA 2018 factors of :mod:`chairbuild.constants`.
"""

from __future__ import annotations

import dataclasses
import functools
from typing import Any

import numpy as np

from chairbuild.constants import ANGSTROM_TO_BOHR, HARTREE_TO_KJ
from chairbuild.errors import ConvergenceError, ForceFieldError, InputError, OptionError
from chairbuild.forcefields.base import EnergyModel

__all__ = [
    "DFTModel",
    "DFTSettings",
    "available_dft_solvents",
    "DEFAULT_MAX_BASIS_FUNCTIONS",
    "SOLVATION_MODELS",
]

#: Largest number of basis functions a DFTModel accepts unless told otherwise.
DEFAULT_MAX_BASIS_FUNCTIONS = 600
#: How many converged densities a model keeps as start guesses.
HISTORY_SIZE = 8
#: Largest RMSD (Å, after superposition) of a kept geometry whose density starts a new SCF
#: (measured, see the module notes and ``tests/benchmarks/bench_dft.py``).
WARM_START_MAX_RMSD_A = 0.1
#: Solvation models accepted, lower case -> PySCF's name of the PCM variant (None: SMD).
SOLVATION_MODELS = {"cpcm": "C-PCM", "iefpcm": "IEF-PCM", "smd": None}
#: Extra spellings of solvent names (lower case) -> the name in PySCF's table.
SOLVENT_ALIASES = {
    "dmso": "dimethylsulfoxide",
    "thf": "tetrahydrofuran",
    "ch2cl2": "dichloromethane",
    "dcm": "dichloromethane",
    "chcl3": "chloroform",
    "ccl4": "carbon tetrachloride",
    "cs2": "carbon disulfide",
    "dibutyl ether": "butylether",
    "di-n-butyl ether": "butylether",
    "meoh": "methanol",
    "mecn": "acetonitrile",
    "h2o": "water",
}
_GRADIENT_TO_KJ_PER_A = HARTREE_TO_KJ * ANGSTROM_TO_BOHR
#: Rungs of the SCF retry ladder after the first attempt.
_LADDER = ("level shift 0.3 Eh", "damping 0.5, DIIS from cycle 8", "second-order SCF (Newton)")


@functools.lru_cache(maxsize=1)
def _solvent_db() -> dict[str, list[float]]:
    from pyscf.solvent import smd

    return {k.lower(): v for k, v in smd.solvent_db.items() if k.strip()}


def available_dft_solvents(include_aliases: bool = False) -> list[str]:
    """Names of the solvents the DFT model knows (PySCF's Minnesota descriptor table)."""
    names = sorted(_solvent_db())
    return sorted(names + list(SOLVENT_ALIASES)) if include_aliases else names


def _solvent_key(solvent: str) -> str:
    key = str(solvent).strip().lower()
    key = SOLVENT_ALIASES.get(key, key)
    if key not in _solvent_db():
        raise OptionError(
            f"unknown solvent {solvent!r} for the DFT level; valid names: "
            + ", ".join(available_dft_solvents())
            + " (aliases: "
            + ", ".join(sorted(SOLVENT_ALIASES))
            + ")"
        )
    return key


@dataclasses.dataclass(frozen=True)
class DFTSettings:
    """The DFT level: what defines the energy (and so the cache key).

    Attributes
    ----------
    functional : str
        Exchange–correlation functional by PySCF/libxc name, e.g. ``"b3lyp"``, ``"r2scan"``.
    basis : str
        Orbital basis by PySCF name, e.g. ``"def2-svp"``.
    dispersion : str or None
        ``"d3bj"`` (default) or None.
    solvent : str or None
        Solvent name; None is the gas phase.
    solvation_model : str
        ``"cpcm"`` (default), ``"iefpcm"`` or ``"smd"``.
    density_fitting : bool
        Density fitting of the two-electron integrals (default True).
    grid_level : int
        PySCF integration grid level 0–9 (default 3).
    conv_tol : float
        SCF energy convergence threshold, hartree (default 1e-9).
    """

    functional: str = "b3lyp"
    basis: str = "def2-svp"
    dispersion: str | None = "d3bj"
    solvent: str | None = None
    solvation_model: str = "cpcm"
    density_fitting: bool = True
    grid_level: int = 3
    conv_tol: float = 1e-9

    def validated(self) -> "DFTSettings":
        """Return a normalised copy; raise OptionError on an unknown name or bad value."""
        from pyscf.dft import libxc

        functional = str(self.functional).strip().lower()
        try:
            libxc.parse_xc(functional)
        except (KeyError, ValueError, NotImplementedError):
            raise OptionError(f"unknown exchange-correlation functional {self.functional!r} (a PySCF/libxc name)") from None
        dispersion = None if self.dispersion in (None, "", "none") else str(self.dispersion).lower()
        if dispersion not in (None, "d3bj"):
            raise OptionError(f"unknown dispersion correction {self.dispersion!r}; choose from: d3bj, none")
        model = str(self.solvation_model).strip().lower().replace("-", "")
        if model not in SOLVATION_MODELS:
            raise OptionError(f"unknown DFT solvation model {self.solvation_model!r}; choose from: cpcm, iefpcm, smd")
        solvent = None if self.solvent is None else _solvent_key(self.solvent)
        if not (0 <= int(self.grid_level) <= 9):
            raise OptionError(f"grid_level must be 0-9, got {self.grid_level!r}")
        if not self.conv_tol > 0:
            raise OptionError(f"conv_tol must be > 0, got {self.conv_tol!r}")
        return dataclasses.replace(
            self,
            functional=functional,
            basis=str(self.basis).strip().lower(),
            dispersion=dispersion,
            solvent=solvent,
            solvation_model=model,
            grid_level=int(self.grid_level),
        )

    @property
    def name(self) -> str:
        """Level name, e.g. ``"B3LYP-D3(BJ)/def2-SVP/C-PCM(water)"``."""
        text = self.functional.upper().replace("R2SCAN", "r2SCAN")
        if self.dispersion == "d3bj":
            text += "-D3(BJ)"
        text += "/" + _basis_label(self.basis)
        if self.solvent is not None:
            model = SOLVATION_MODELS[self.solvation_model] or "SMD"
            text += f"/{model}({self.solvent})"
        return text


def _basis_label(basis: str) -> str:
    if basis.startswith("def2-"):
        return "def2-" + basis[5:].upper()
    return basis


@dataclasses.dataclass
class SCFRecord:
    """What the last SCF did: cycles, which rung of the ladder converged, whether warm-started."""

    cycles: int = 0
    attempt: str = ""
    warm_start: bool = False


class DFTModel(EnergyModel):
    """Kohn–Sham DFT (PySCF) energy model of one molecule.

    Parameters
    ----------
    mol_or_symbols : rdkit.Chem.Mol or sequence of str
        The molecule with explicit hydrogens (charge and multiplicity read from it), or
        element symbols (then give ``charge`` and ``multiplicity``).
    settings : DFTSettings, optional
        The level; default B3LYP-D3(BJ)/def2-SVP in the gas phase.
    charge, multiplicity : int, optional
        Override what the molecule says.
    max_basis_functions : int
        Refuse larger molecules (see the module notes).
    max_scf_cycles : int
        SCF cycles per attempt (default 100).
    reuse_density : bool
        Start an SCF from the nearest computed geometry's density when it lies within
        ``warm_start_max_rmsd`` (default True).
    warm_start_max_rmsd : float
        Å; farther geometries start from the atomic guess (default :data:`WARM_START_MAX_RMSD_A`).
    threads : int, optional
        OpenMP threads for PySCF during this model's calls; None leaves PySCF's setting.
    max_memory_mb : int
        PySCF's memory limit per calculation (default 2000 MB).
    label : str, optional
        Name used in messages.

    Raises
    ------
    OptionError
        Unknown functional, basis, dispersion, solvent or solvation model.
    ForceFieldError
        More basis functions than ``max_basis_functions``, or no D3 parameters for the functional.
    InputError
        Implicit hydrogens, or an electron count that does not fit the multiplicity.
    """

    has_gradient = True

    def __init__(
        self,
        mol_or_symbols: Any,
        settings: DFTSettings | None = None,
        *,
        charge: int | None = None,
        multiplicity: int | None = None,
        max_basis_functions: int = DEFAULT_MAX_BASIS_FUNCTIONS,
        max_scf_cycles: int = 100,
        reuse_density: bool = True,
        warm_start_max_rmsd: float = WARM_START_MAX_RMSD_A,
        threads: int | None = None,
        max_memory_mb: int = 2000,
        label: str | None = None,
    ) -> None:
        self.settings = (settings or DFTSettings()).validated()
        symbols, mol_charge, mol_mult, default_label = _read_system(mol_or_symbols)
        self.symbols = symbols
        self.label = default_label if label is None else str(label)
        self.charge = int(mol_charge if charge is None else charge)
        self.multiplicity = int(mol_mult if multiplicity is None else multiplicity)
        if int(max_scf_cycles) < 1:
            raise OptionError(f"max_scf_cycles must be at least 1, got {max_scf_cycles!r}")
        self.max_scf_cycles = int(max_scf_cycles)
        self.reuse_density = bool(reuse_density)
        if not float(warm_start_max_rmsd) >= 0:
            raise OptionError(f"warm_start_max_rmsd must be >= 0 Å, got {warm_start_max_rmsd!r}")
        self.warm_start_max_rmsd = float(warm_start_max_rmsd)
        self.threads = threads
        self.max_memory_mb = int(max_memory_mb)
        self.name = self.settings.name
        probe = self._mole(np.arange(len(symbols))[:, None] * np.array([[3.0, 0.0, 0.0]]))
        self.n_basis_functions = int(probe.nao_nr())
        if self.n_basis_functions > max_basis_functions:
            raise ForceFieldError(
                f"{self.label}: {self.n_basis_functions} basis functions at {self.settings.basis}, over the limit of "
                f"{max_basis_functions} for the DFT level; choose a smaller basis, refine fewer atoms, or raise the limit"
            )
        if self.settings.dispersion == "d3bj":
            self._d3_check(probe)
        self._history: list[tuple[np.ndarray, Any]] = []
        #: Record of the last SCF.
        self.last_scf = SCFRecord()
        #: SCF cycles summed over every calculation of this model.
        self.total_scf_cycles = 0
        self.n_geometries = 0

    def __repr__(self) -> str:
        return (
            f"DFTModel({self.label!r}, name={self.name!r}, n_atoms={len(self.symbols)}, "
            f"charge={self.charge}, multiplicity={self.multiplicity}, nbf={self.n_basis_functions})"
        )

    # ------------------------------------------------------------------ engine
    def _mole(self, coords_bohr: np.ndarray):
        from pyscf import gto

        mol = gto.Mole()
        mol.atom = [(s, tuple(float(v) for v in xyz)) for s, xyz in zip(self.symbols, coords_bohr)]
        mol.unit = "Bohr"
        mol.basis = self.settings.basis
        mol.charge = self.charge
        mol.spin = self.multiplicity - 1
        mol.verbose = 0
        mol.max_memory = self.max_memory_mb
        import warnings

        from pyscf.lib.exceptions import BasisNotFoundError

        try:
            with warnings.catch_warnings():  # PySCF's hint to install another package, for an unknown basis
                warnings.simplefilter("ignore", UserWarning)
                mol.build()
        except BasisNotFoundError as exc:
            detail = " ".join(str(exc).split())
            raise OptionError(
                f"basis {self.settings.basis!r} unknown to PySCF for the elements {', '.join(sorted(set(self.symbols)))} "
                f"({detail})"
            ) from None
        except RuntimeError as exc:
            raise InputError(f"{self.label}: {exc}") from None
        except (KeyError, ValueError, OSError) as exc:
            raise OptionError(f"basis {self.settings.basis!r} unknown to PySCF for these elements ({exc})") from None
        return mol

    def _d3_check(self, mol) -> None:
        try:
            self._d3(mol)
        except RuntimeError as exc:  # simple-dftd3 raises RuntimeError for a missing parameter entry
            raise ForceFieldError(f"no D3(BJ) parameters for functional {self.settings.functional!r}: {exc}") from None

    def _d3(self, mol) -> tuple[float, np.ndarray]:
        from dftd3.pyscf import DFTD3Dispersion

        out = DFTD3Dispersion(mol, xc=self.settings.functional, version="d3bj").kernel()
        return float(out[0]), np.asarray(out[1], dtype=float)

    def _scf_object(self, mol):
        from pyscf import dft

        s = self.settings
        mf = dft.RKS(mol) if self.multiplicity == 1 else dft.UKS(mol)
        mf.xc = s.functional
        mf.grids.level = s.grid_level
        mf.conv_tol = s.conv_tol
        mf.max_cycle = self.max_scf_cycles
        mf.verbose = 0
        if s.density_fitting:
            mf = mf.density_fit()
        if s.solvent is not None:
            if s.solvation_model == "smd":
                mf = mf.SMD()
                mf.with_solvent.solvent = s.solvent
            else:
                mf = mf.PCM()
                mf.with_solvent.method = SOLVATION_MODELS[s.solvation_model]
                mf.with_solvent.eps = float(_solvent_db()[s.solvent][5])
        return mf

    def _check_coords(self, coords: np.ndarray) -> np.ndarray:
        x = np.asarray(coords, dtype=float)
        if x.shape != (len(self.symbols), 3):
            raise InputError(f"{self.label}: coordinates of shape {x.shape} given, expected ({len(self.symbols)}, 3)")
        if not np.all(np.isfinite(x)):
            raise InputError(f"{self.label}: coordinates contain NaN or infinity")
        return x

    def _guess(self, x: np.ndarray, mol) -> Any:
        """The kept density nearest to ``x``, rotated into its orientation; None beyond the threshold."""
        if not (self.reuse_density and self._history):
            return None
        best = None
        for ref, dm in self._history:
            rot, _, rmsd = _superpose(x, ref)
            if best is None or rmsd < best[0]:
                best = (rmsd, rot, dm)
        rmsd, rot, dm = best
        if rmsd > self.warm_start_max_rmsd:
            return None
        from pyscf.gto.mole import ao_rotation_matrix

        # rot superposes x on ref; as PySCF's orientation argument it turns the kept density into
        # x's orientation (checked against a converged density in tests/test_dft.py)
        u = ao_rotation_matrix(mol, rot)
        return np.einsum("ij,...jk,lk->...il", u, dm, u)

    def _run(self, coords: np.ndarray, gradient: bool) -> tuple[float, np.ndarray | None]:
        """One SCF (with the retry ladder) in the caller's frame; energy in hartree, gradient in hartree/bohr."""
        from pyscf import lib

        x = self._check_coords(coords)
        self.n_geometries += 1
        previous_threads = lib.num_threads()
        if self.threads is not None:
            lib.num_threads(int(self.threads))
        try:
            mol = self._mole(x * ANGSTROM_TO_BOHR)
            mf, record = self._converge(mol, self._guess(x, mol))
            energy = float(mf.e_tot)
            grad = None
            if gradient:
                grad = np.asarray(mf.nuc_grad_method().kernel(), dtype=float)
            if self.settings.dispersion == "d3bj":
                e_d3, g_d3 = self._d3(mol)
                energy += e_d3
                if gradient:
                    grad = grad + g_d3
        finally:
            lib.num_threads(previous_threads)
        self.last_scf = record
        self.total_scf_cycles += record.cycles
        if self.reuse_density:
            self._history.append((x.copy(), mf.make_rdm1()))
            del self._history[:-HISTORY_SIZE]
        return energy, grad

    def _converge(self, mol, dm0):
        """Run the SCF, then the ladder; return (converged SCF object, SCFRecord)."""
        attempts = []
        cycles = 0
        mf = self._scf_object(mol)
        mf.kernel(dm0=dm0)
        cycles += int(getattr(mf, "cycles", 0) or 0)
        attempts.append("default" + (" (warm start)" if dm0 is not None else ""))
        if mf.converged:
            return mf, SCFRecord(cycles=cycles, attempt=attempts[-1], warm_start=dm0 is not None)
        for rung in _LADDER:
            mf = self._scf_object(mol)
            if rung.startswith("level shift"):
                mf.level_shift = 0.3
            elif rung.startswith("damping"):
                mf.damp = 0.5
                mf.diis_start_cycle = 8
            else:
                mf = mf.newton()
                mf.max_cycle = self.max_scf_cycles
            mf.kernel()
            cycles += int(getattr(mf, "cycles", 0) or 0)
            attempts.append(rung)
            if mf.converged:
                return mf, SCFRecord(cycles=cycles, attempt=rung, warm_start=False)
        self.total_scf_cycles += cycles
        raise ConvergenceError(
            f"SCF of {self.label} at {self.name} did not converge in {self.max_scf_cycles} cycles per attempt; tried: "
            + "; ".join(attempts)
        )

    # ------------------------------------------------------------------ public API
    def energy(self, coords: np.ndarray) -> float:
        """Total energy (SCF, plus solvation and D3 where set), kJ/mol, at ``coords`` (Å).

        Raises
        ------
        ConvergenceError
            No rung of the retry ladder converged.
        """
        return self._run(coords, gradient=False)[0] * HARTREE_TO_KJ

    def energy_and_gradient(self, coords: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy (kJ/mol) and analytic gradient (kJ mol^-1 Å^-1, shape ``(n_atoms, 3)``)."""
        e, g = self._run(coords, gradient=True)
        return e * HARTREE_TO_KJ, g * _GRADIENT_TO_KJ_PER_A

    def density_history(self) -> list[tuple[np.ndarray, Any]]:
        """The (coordinates in Å, density matrix) pairs kept as start guesses."""
        return list(self._history)

    def clear_history(self) -> None:
        """Forget the kept densities (the next SCF starts from PySCF's atomic guess)."""
        self._history.clear()


def _superpose(x: np.ndarray, ref: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Kabsch: rotation R, x moved onto ref ((x − cx) R^T + c_ref) and the RMSD after."""
    cx, cr = x.mean(axis=0), ref.mean(axis=0)
    a, b = x - cx, ref - cr
    u, _, vt = np.linalg.svd(a.T @ b)
    d = np.sign(np.linalg.det(u @ vt))
    rot = (u @ np.diag([1.0, 1.0, d]) @ vt).T
    moved = a @ rot.T + cr
    return rot, moved, float(np.sqrt(np.mean(np.sum((moved - ref) ** 2, axis=1))))


def _read_system(mol_or_symbols: Any) -> tuple[list[str], int, int, str]:
    if hasattr(mol_or_symbols, "GetAtoms"):
        from chairbuild.input import charge_and_multiplicity

        mol = mol_or_symbols
        missing = [a.GetIdx() for a in mol.GetAtoms() if a.GetTotalNumHs(includeNeighbors=False) > 0]
        label = mol.GetProp("_Name") if mol.HasProp("_Name") and mol.GetProp("_Name").strip() else "molecule"
        if missing:
            raise InputError(f"{label}: atoms {missing} carry implicit hydrogens; add them as atoms first (rdkit.Chem.AddHs)")
        charge, mult = charge_and_multiplicity(mol)
        symbols = [a.GetSymbol() for a in mol.GetAtoms()]
    else:
        symbols = [str(s) for s in mol_or_symbols]
        charge, mult = 0, 1
        label = f"{len(symbols)}-atom system"
    if not symbols:
        raise InputError(f"{label}: no atoms")
    return symbols, int(charge), int(mult), label
