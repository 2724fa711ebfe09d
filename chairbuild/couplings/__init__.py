"""Vicinal 3J(H,H) couplings of an ensemble, and populations fitted to measured couplings.

* :mod:`chairbuild.couplings.karplus` — the Haasnoot–de Leeuw–Altona equation and
  Garbisch's allylic form, with their sourced parameters;
* :mod:`chairbuild.couplings.protons` — proton groups, labels and H–C–C–H fragments;
* :mod:`chairbuild.couplings.ensemble` — the pipeline stage: couplings per conformer,
  ⟨J⟩, family limits and sensitivities (stored on ``Ensemble.couplings``);
* :mod:`chairbuild.couplings.fit` — the inverse: family (or any state) populations
  fitted to measured couplings by weighted least squares.

Nothing heavy is imported here.
"""

from __future__ import annotations

from chairbuild.couplings.records import CouplingRecord, CouplingTable, ProtonGroup

__all__ = ["CouplingRecord", "CouplingTable", "ProtonGroup"]
