"""Energy models of chairbuild: additive increments, MMFF94/MMFF94s in OpenMM, GFN2-xTB.

All models share the small interface of :class:`chairbuild.forcefields.base.EnergyModel`:
coordinates in Å in, energies in kJ/mol and gradients in kJ mol^-1 Å^-1 out.
Heavy libraries (OpenMM, tblite) are imported inside the module that needs them.
"""

from chairbuild.forcefields.base import EnergyModel

__all__ = ["EnergyModel"]
