"""The analysis pipeline: input → rings → build → minimise → rerank → thermo → describe → result.

:func:`analyze` runs it for one molecule and returns the frozen
:class:`~chairbuild.result.Ensemble`; :func:`analyze_all` returns one ensemble per
diastereomer when stereochemistry is left open and ``enumerate_stereo`` is set.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from chairbuild.constants import T_DEFAULT
from chairbuild.errors import OptionError, StereoError
from chairbuild.minimise import ForceFieldVariant
from chairbuild.result import Status

__all__ = ["AnalysisOptions", "analyze", "analyze_all", "DEFAULT_WINDOW_KJ"]

#: Default energy window (kJ/mol): keeps cyclohexane's twist-boat (about 23 kJ/mol above the chair).
DEFAULT_WINDOW_KJ = 30.0


@dataclass(frozen=True)
class AnalysisOptions:
    """Options of one analysis (energies in kJ/mol, temperature in K).

    Attributes
    ----------
    forcefield : ForceFieldVariant
        MMFF94 (default) or MMFF94s, used to build and minimise.
    method : str
        ``"mmff94"`` (default) or ``"gfn2"`` (re-optimise with GFN2-xTB).
    rerank : str or None
        ``"gfn2"``: GFN2-xTB single points at the MMFF geometries.
    solvent : str or None
        Implicit solvent for GFN2-xTB (a name ALPB/GBSA knows); None is the gas phase.
    solvation_model : str
        ``"alpb"`` (default) or ``"gbsa"``.
    free_energy : bool
        Rank and weight by the qRRHO free energy G instead of the energy E.
    temperature : float
        K, default 298.15.
    window : float
        Keep conformers within this energy (kJ/mol) of the lowest; applied before the
        Boltzmann weighting.
    max_rotamers : int
        Cap on rotamer combinations per ring-state combination (see :mod:`chairbuild.build`).
    twist_boats : bool
        Build the twist-boat states too.
    threads : int or None
        CPU threads for OpenMM (None: OpenMM's default).
    progress : bool
        Show progress bars on stderr.
    """

    forcefield: ForceFieldVariant = ForceFieldVariant.MMFF94
    method: str = "mmff94"
    rerank: str | None = None
    solvent: str | None = None
    solvation_model: str = "alpb"
    free_energy: bool = False
    temperature: float = T_DEFAULT
    window: float = DEFAULT_WINDOW_KJ
    max_rotamers: int = 81
    twist_boats: bool = True
    threads: int | None = None
    progress: bool = False
    extra: dict[str, Any] = field(default_factory=dict)

    def validate(self) -> "AnalysisOptions":
        """Return self after checking ranges; raise OptionError on a bad value."""
        from chairbuild.rerank import Level

        if not isinstance(self.forcefield, ForceFieldVariant):
            object.__setattr__(self, "forcefield", ForceFieldVariant.parse(str(self.forcefield)))
        object.__setattr__(self, "method", Level.parse(self.method))
        if self.rerank is not None:
            rerank = Level.parse(self.rerank)
            if rerank is not Level.GFN2:
                raise OptionError("rerank accepts only 'gfn2'")
            if self.method is Level.GFN2:
                raise OptionError("rerank=gfn2 re-scores MMFF geometries; it cannot be combined with method=gfn2")
            object.__setattr__(self, "rerank", rerank)
        uses_xtb = self.method is Level.GFN2 or self.rerank is not None
        if self.solvent is not None:
            if not uses_xtb:
                raise OptionError("a solvent needs the GFN2-xTB level: add method='gfn2' or rerank='gfn2'")
            from chairbuild.forcefields.xtb import available_solvents

            valid = available_solvents(self.solvation_model, include_aliases=True)
            if self.solvent.strip().lower() not in [v.lower() for v in valid]:
                raise OptionError(
                    f"unknown solvent {self.solvent!r} for {self.solvation_model.upper()}; valid: "
                    + ", ".join(available_solvents(self.solvation_model))
                )
        if not (np.isfinite(self.temperature) and self.temperature > 0):
            raise OptionError(f"temperature must be a positive number of kelvin, got {self.temperature}")
        if not (np.isfinite(self.window) and self.window > 0):
            raise OptionError(f"window must be a positive energy, got {self.window}")
        if self.max_rotamers < 1:
            raise OptionError(f"max_rotamers must be at least 1, got {self.max_rotamers}")
        if self.threads is not None and self.threads < 1:
            raise OptionError(f"threads must be at least 1, got {self.threads}")
        return self


def _options(kwargs: dict[str, Any]) -> AnalysisOptions:
    known = set(AnalysisOptions.__dataclass_fields__) - {"extra"}
    unknown = sorted(set(kwargs) - known)
    if unknown:
        raise OptionError(f"unknown option(s): {', '.join(unknown)}; known: {', '.join(sorted(known))}")
    return AnalysisOptions(**kwargs).validate()


def analyze(molecule, *, name: str | None = None, record: int | None = None, **options: Any):
    """Analyse one molecule and return its conformer ensemble.

    Parameters
    ----------
    molecule : str, pathlib.Path or rdkit.Chem.Mol
        SMILES, the path of an SDF/MOL file, or an RDKit molecule.
    name : str, optional
    record : int, optional
        1-based record of a multi-record SDF.
    **options
        Fields of :class:`AnalysisOptions`; an unknown name raises OptionError.

    Returns
    -------
    chairbuild.result.Ensemble

    Raises
    ------
    InputError, StereoError, OptionError, ForceFieldError
    """
    ensembles = analyze_all(molecule, name=name, record=record, enumerate_stereo=False, **options)
    return ensembles[0]


def analyze_all(
    molecule,
    *,
    name: str | None = None,
    record: int | None = None,
    enumerate_stereo: bool = False,
    **options: Any,
):
    """Like :func:`analyze`, but returns a list: one ensemble per diastereomer with ``enumerate_stereo``."""
    from chairbuild.input import read_molecules

    opts = _options(options)
    prepared = read_molecules(molecule, record=record, enumerate_stereo=enumerate_stereo, name=name)
    if len(prepared) > 1 and not enumerate_stereo:
        raise StereoError("several diastereomers; use enumerate_stereo")
    return [_run_one(p, opts) for p in prepared]


def _run_one(prepared, opts: AnalysisOptions):
    from chairbuild import __version__
    from chairbuild.build import build_starting_structures
    from chairbuild.minimise import deduplicate, minimise_starts
    from chairbuild.rerank import rerank_structures
    from chairbuild.rings import analyse_rings

    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    mol = prepared.mol
    analysis = analyse_rings(mol)
    report = build_starting_structures(
        mol,
        analysis,
        prepared.smiles,
        prepared.achiral,
        max_rotamers=opts.max_rotamers,
        include_twist_boats=opts.twist_boats,
        progress=opts.progress,
    )
    timings["build_s"] = time.perf_counter() - t0
    t1 = time.perf_counter()
    minimised, n_min = minimise_starts(
        mol, report.starts, prepared.smiles, variant=opts.forcefield, threads=opts.threads, progress=opts.progress
    )
    distinct = deduplicate(mol, minimised, prepared.achiral)
    if report.capped:
        extra, n_extra = _refine_rotamers(mol, analysis, prepared, distinct, opts)
        minimised += extra
        n_min += n_extra
        distinct = deduplicate(mol, minimised, prepared.achiral)
    timings["minimise_s"] = time.perf_counter() - t1
    rejected = [m for m in minimised if m.status is not Status.OK]
    t2 = time.perf_counter()
    ranked, rejected_rerank, method_label, n_xtb = rerank_structures(
        mol,
        distinct,
        prepared.smiles,
        prepared.achiral,
        forcefield=opts.forcefield,
        method=opts.method,
        rerank=opts.rerank,
        solvent=opts.solvent,
        solvation_model=opts.solvation_model,
        free_energy=opts.free_energy,
        temperature=opts.temperature,
        window=opts.window,
        threads=opts.threads,
        progress=opts.progress,
    )
    rejected += rejected_rerank
    timings["rerank_s"] = time.perf_counter() - t2
    counts = {
        "ring_state_combinations": report.n_ring_combinations,
        "infeasible_combinations": report.n_infeasible,
        "placements_rejected_by_stereo": report.n_stereo_rejected,
        "duplicate_starts": report.n_duplicates,
        "starting_structures": len(report.starts),
        "minimisations": n_min,
        "distinct_minima": len(distinct),
        "gfn2_optimisations": n_xtb,
        "rejected": len(rejected),
    }
    ensemble = _assemble_result(prepared, analysis, ranked, rejected, opts, method_label, report.notes, counts, timings)
    timings["total_s"] = time.perf_counter() - t0
    provenance = dict(ensemble.provenance)
    provenance["timings"] = {k: round(v, 3) for k, v in timings.items()}
    provenance["chairbuild"] = __version__
    return replace(ensemble, provenance=provenance)


#: Rotamer refinement after the cap bit: seeds per round, rounds, and the energy range of seeds (kJ/mol).
REFINE_SEEDS = 6
REFINE_ROUNDS = 3
REFINE_RANGE_KJ = 15.0


def _refine_rotamers(mol, analysis, prepared, distinct, opts):
    """Vary rotors one at a time around the lowest minima until no new low minimum appears."""
    from chairbuild.build import rotamer_variations
    from chairbuild.minimise import deduplicate, minimise_starts

    extra = []
    n_min = 0
    tried: set[float] = set()
    current = list(distinct)
    for round_k in range(REFINE_ROUNDS):
        e0 = min(s.energy for s in current)
        seeds = [s for s in current if s.energy - e0 <= REFINE_RANGE_KJ and round(s.energy, 4) not in tried][:REFINE_SEEDS]
        if not seeds:
            break
        tried.update(round(s.energy, 4) for s in seeds)
        starts = rotamer_variations(mol, analysis, [s.coords for s in seeds], origin=f"refine{round_k + 1}")
        new, n = minimise_starts(mol, starts, prepared.smiles, variant=opts.forcefield, threads=opts.threads, progress=opts.progress)
        extra += new
        n_min += n
        merged = deduplicate(mol, list(current) + new, prepared.achiral)
        before = {round(s.energy, 3) for s in current if s.energy - e0 <= REFINE_RANGE_KJ}
        after = {round(s.energy, 3) for s in merged if s.energy - min(m.energy for m in merged) <= REFINE_RANGE_KJ}
        current = merged
        if after <= before:
            break
    return extra, n_min


def _assemble_result(prepared, analysis, ranked, rejected, opts, method_label, build_notes, counts, timings):
    from rdkit import Chem

    from chairbuild.describe import describe_conformer
    from chairbuild.families import build_families, family_keys
    from chairbuild.input import charge_and_multiplicity
    from chairbuild.result import ConformerRecord, Ensemble
    from chairbuild.thermo import boltzmann_populations

    t = time.perf_counter()
    mol = prepared.mol
    notes = list(prepared.notes) + list(build_notes)
    energies = np.array([r.ranking_energy for r in ranked])
    e_min = energies.min() if len(energies) else 0.0
    keep = [i for i, e in enumerate(energies) if e - e_min <= opts.window]
    dropped = len(ranked) - len(keep)
    if dropped:
        notes.append(f"{dropped} conformer(s) above the {opts.window:g} kJ/mol window were left out")
    kept = [ranked[i] for i in keep]
    pops = (
        boltzmann_populations(
            np.array([k.ranking_energy for k in kept]), opts.temperature, np.array([k.structure.degeneracy for k in kept])
        )
        if kept
        else np.array([])
    )
    n_rings = len(analysis.rings)

    def record(structure, **fields):
        rings, subs = describe_conformer(mol, analysis, structure.coords)
        return ConformerRecord(
            coords=structure.coords,
            rings=rings,
            substituents=subs,
            families=family_keys(n_rings, rings, subs),
            converged=structure.converged,
            rms_gradient=structure.rms_gradient,
            origin=structure.origin,
            **fields,
        )

    records = [
        record(
            k.structure,
            id=rank,
            energies=k.energies,
            relative_energy=k.ranking_energy - e_min,
            population=float(p),
            degeneracy=k.structure.degeneracy,
            thermo=k.thermo,
        )
        for rank, (k, p) in enumerate(zip(kept, pops))
    ]
    method = method_label
    # rejected structures: their last energy may belong to another level, so no relative energy
    rejected_records = [
        record(
            m,
            id=-(j + 1),
            energies={"last level": m.energy},
            relative_energy=float("nan"),
            population=0.0,
            degeneracy=1,
            status=m.status,
            message=m.message,
        )
        for j, m in enumerate(rejected)
    ]
    symbols = tuple(a.GetSymbol() for a in mol.GetAtoms())
    families = build_families(records, n_rings, symbols, opts.temperature, _additive_scorer(mol, analysis))
    timings["describe_s"] = time.perf_counter() - t
    provenance = {
        "options": {
            "forcefield": opts.forcefield.value,
            "method": opts.method.value,
            "rerank": None if opts.rerank is None else opts.rerank.value,
            "solvent": opts.solvent,
            "solvation_model": opts.solvation_model,
            "free_energy": opts.free_energy,
            "temperature_K": opts.temperature,
            "window_kJ": opts.window,
            "max_rotamers": opts.max_rotamers,
            "twist_boats": opts.twist_boats,
            "threads": opts.threads,
        },
        "counts": counts,
        "versions": _versions(),
    }
    charge, multiplicity = charge_and_multiplicity(mol)
    return Ensemble(
        name=prepared.name,
        charge=charge,
        multiplicity=multiplicity,
        smiles=prepared.smiles,
        mol_block=Chem.MolToMolBlock(mol, includeStereo=True),
        symbols=symbols,
        ring_atoms=tuple(r.atoms for r in analysis.rings),
        method=method,
        ranking="free_energy" if opts.free_energy else "energy",
        temperature=opts.temperature,
        window=opts.window,
        conformers=tuple(records),
        rejected=tuple(rejected_records),
        families=families,
        notes=tuple(notes),
        provenance=provenance,
    )


def _additive_scorer(mol, analysis):
    from chairbuild.forcefields.additive import AdditiveModel

    models = {r.index: AdditiveModel(mol, [r.atoms]) for r in analysis.rings}

    def score(ring_index: int, coords: np.ndarray):
        est = models[ring_index].evaluate(coords)
        return list(est.terms), list(est.unscored), list(est.caveats)

    return score


def _versions() -> dict[str, str]:
    from importlib.metadata import PackageNotFoundError, version

    out = {}
    for pkg in ("rdkit", "openmm", "numpy", "scipy", "tblite"):
        try:
            out[pkg] = version(pkg)
        except PackageNotFoundError:
            out[pkg] = "not installed"
    return out
