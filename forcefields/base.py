"""The interface every energy model of chairbuild implements.

A model is built for one molecule (fixed atoms and connectivity) and then evaluated at
any number of geometries. Units at this boundary are always Å for coordinates,
kJ/mol for energies and kJ mol^-1 Å^-1 for gradients; each model converts to its
engine's units (nm for OpenMM, bohr/hartree for tblite) inside itself.
"""

from __future__ import annotations

import abc

import numpy as np

__all__ = ["EnergyModel"]


class EnergyModel(abc.ABC):
    """Energy (and, where defined, gradient) of one molecule at given coordinates.

    Attributes
    ----------
    name : str
        Declared name of the method, e.g. ``"MMFF94"`` or ``"GFN2-xTB/ALPB(water)"``.
    energy_unit : str
        Always ``"kJ/mol"``.
    length_unit : str
        Always ``"angstrom"``.
    has_gradient : bool
        False for models whose energy is piecewise constant in the coordinates
        (the additive increment scheme); :meth:`energy_and_gradient` then raises.
    """

    name: str = "abstract"
    energy_unit: str = "kJ/mol"
    length_unit: str = "angstrom"
    has_gradient: bool = True

    @abc.abstractmethod
    def energy(self, coords: np.ndarray) -> float:
        """Return the energy (kJ/mol) at ``coords`` (shape ``(n_atoms, 3)``, Å)."""

    def reset(self) -> None:
        """Forget state carried over from earlier evaluations (e.g. an SCF starting guess).

        Called before each independent task (one conformer's optimisation, single point or
        Hessian) so that its result depends only on its own input, never on which tasks
        the same model (or the same worker process) ran before. Models without such state
        keep this no-op.
        """

    def energy_and_gradient(self, coords: np.ndarray) -> tuple[float, np.ndarray]:
        """Return the energy (kJ/mol) and its gradient (kJ mol^-1 Å^-1, shape ``(n_atoms, 3)``)."""
        from chairbuild.errors import ForceFieldError

        raise ForceFieldError(f"energy model {self.name!r} provides no gradient")

    def hessian(self, coords: np.ndarray, step: float = 0.005) -> np.ndarray:
        """Hessian (kJ mol^-1 Å^-2) by central finite differences of the analytic gradient.

        Each Cartesian coordinate is displaced by ±``step`` Å (6N gradient evaluations);
        the result is symmetrised.
        """
        from chairbuild.errors import OptionError

        if not step > 0:
            raise OptionError(f"step must be > 0, got {step!r}")
        x0 = np.array(coords, dtype=float)
        n = x0.size
        hess = np.empty((n, n))
        flat = x0.ravel()
        for k in range(n):
            plus = flat.copy()
            plus[k] += step
            minus = flat.copy()
            minus[k] -= step
            _, g_plus = self.energy_and_gradient(plus.reshape(x0.shape))
            _, g_minus = self.energy_and_gradient(minus.reshape(x0.shape))
            hess[k] = (g_plus.ravel() - g_minus.ravel()) / (2.0 * step)
        return 0.5 * (hess + hess.T)
