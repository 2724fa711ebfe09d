"""Minimise starting structures with MMFF94/MMFF94s in OpenMM, check stereochemistry, remove duplicates.

Every minimised structure is checked: its stereochemistry perceived from 3D (CIP labels
and ring cis/trans relations, compared through the canonical isomeric SMILES) must equal
the input's, else it is kept as a rejected record with status ``stereo-changed``. A
structure whose minimisation did not meet the gradient criterion is kept as a rejected
record with status ``not-converged``.

Duplicates: structures are sorted by energy and a structure is dropped when a kept one
lies within ``energy_tolerance`` (default 0.5 kJ/mol) and within ``rmsd_threshold``
(default 0.25 Å, heavy atoms and lone polar hydrogens, symmetry-aware; mirror images
count for achiral molecules) of it.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np
from rdkit import Chem

from chairbuild.build import StartingStructure, stereo_signature
from chairbuild.choices import Choice
from chairbuild.dedupe import StructureDeduplicator
from chairbuild.result import Status

__all__ = ["ForceFieldVariant", "MinimisedStructure", "minimise_starts", "deduplicate"]

#: Structures per OpenMM batch; also the granularity of the progress bar.
BATCH_SIZE = 256
DEFAULT_RMSD_THRESHOLD = 0.25
DEFAULT_ENERGY_TOLERANCE = 0.5


class ForceFieldVariant(Choice):
    """MMFF variant used for minimisation."""

    MMFF94 = "MMFF94"
    MMFF94S = "MMFF94s"

    @classmethod
    def describe(cls) -> str:
        return "force field"


@dataclass(frozen=True)
class MinimisedStructure:
    """A structure after minimisation (Å, kJ/mol)."""

    coords: np.ndarray
    energy: float
    rms_gradient: float
    converged: bool
    origin: str
    status: Status
    message: str = ""
    degeneracy: int = 1


#: Convergence of the first, screening pass (RMS gradient, kJ mol^-1 Å^-1).
SCREEN_TOLERANCE = 2.0


def minimise_starts(
    mol: Chem.Mol,
    starts: Sequence[StartingStructure],
    reference_signature: str,
    variant: ForceFieldVariant = ForceFieldVariant.MMFF94,
    threads: int | None = None,
    progress: bool = False,
    screen_above: float | None = None,
    reference_energy: float | None = None,
) -> tuple[list[MinimisedStructure], int]:
    """Minimise every start with MMFF in OpenMM; return the structures and the minimisation count.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
    starts : sequence of StartingStructure
    reference_signature : str
        Canonical isomeric SMILES every minimised structure must reproduce.
    variant : ForceFieldVariant
    threads : int or None
        OpenMM CPU threads.
    progress : bool
    screen_above : float, optional
        Screening, kJ/mol. When given, every start is first minimised to an RMS gradient of
        ``SCREEN_TOLERANCE``; starts whose energy then lies more than ``screen_above`` above
        the lowest (or above ``reference_energy`` when that is lower) are dropped, and only
        the others are minimised to convergence, from where the first pass left them. The
        energy still to be gained below ``SCREEN_TOLERANCE`` is a few kJ/mol at most for
        these molecules, so a screen well above the energy window loses nothing that the
        window would keep.
    reference_energy : float, optional
        Lowest energy known from earlier minimisations (kJ/mol), for the screen.

    Returns
    -------
    structures : list of MinimisedStructure
        One per start that was minimised to convergence (all of them without a screen).
    n_minimisations : int
        Number of starts minimised (screened ones included).
    """
    from chairbuild.forcefields.mmff import MMFFModel

    model = MMFFModel(mol, variant=variant.value, threads=threads)
    todo = list(starts)
    coords = [s.coords for s in todo]
    if screen_above is not None and todo:
        rough = _batched(model, coords, f"{variant.value} screening", progress, tolerance=SCREEN_TOLERANCE)
        energies = np.array([r.energy for r in rough])
        low = float(np.nanmin(energies))
        if reference_energy is not None:
            low = min(low, float(reference_energy))
        keep = [i for i, e in enumerate(energies) if np.isfinite(e) and e - low <= screen_above]
        todo = [todo[i] for i in keep]
        coords = [rough[i].coords for i in keep]
    results = _batched(model, coords, f"{variant.value} minimisation", progress)
    out: list[MinimisedStructure] = []
    for start, res in zip(todo, results):
        status, message = Status.OK, ""
        if not res.converged:
            status = Status.NOT_CONVERGED
            message = f"RMS gradient {res.rms_gradient:.3g} kJ/mol/Å above the convergence criterion"
        elif stereo_signature(mol, res.coords) != reference_signature:
            status = Status.STEREO_CHANGED
            message = f"stereochemistry changed during minimisation: {stereo_signature(mol, res.coords)}"
        out.append(
            MinimisedStructure(
                coords=np.asarray(res.coords, dtype=float),
                energy=float(res.energy),
                rms_gradient=float(res.rms_gradient),
                converged=bool(res.converged),
                origin=start.origin,
                status=status,
                message=message,
            )
        )
    return out, len(starts)


def _batched(model, coords: Sequence[np.ndarray], desc: str, progress: bool, **options) -> list:
    """``model.minimize`` over ``coords`` in batches of ``BATCH_SIZE`` (the progress bar's steps)."""
    from tqdm import tqdm

    results: list = []
    with tqdm(total=len(coords), desc=desc, unit="conf", disable=not progress or not coords, leave=False) as bar:
        for begin in range(0, len(coords), BATCH_SIZE):
            chunk = np.array(coords[begin : begin + BATCH_SIZE])
            results += model.minimize(chunk, **options)
            bar.update(len(chunk))
    return results


def deduplicate(
    mol: Chem.Mol,
    structures: Sequence[MinimisedStructure],
    achiral: bool,
    rmsd_threshold: float = DEFAULT_RMSD_THRESHOLD,
    energy_tolerance: float = DEFAULT_ENERGY_TOLERANCE,
) -> list[MinimisedStructure]:
    """Distinct OK structures, lowest energy first, each with its degeneracy.

    The degeneracy is 2 for a conformer of an achiral molecule that is not superposable
    on its mirror image (its mirror image is a distinct conformer of the same energy),
    else 1.
    """
    ok = sorted((s for s in structures if s.status is Status.OK), key=lambda s: s.energy)
    dedupe = StructureDeduplicator(mol, None, achiral=achiral, rmsd_threshold=rmsd_threshold, energy_tolerance=energy_tolerance)
    kept = []
    for s in ok:
        if dedupe.is_duplicate(s.coords, s.energy):
            continue
        dedupe.add(s.coords, s.energy)
        degeneracy = 2 if achiral and dedupe.is_chiral_conformer(s.coords) else 1
        kept.append(replace(s, degeneracy=degeneracy))
    return kept
