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
from chairbuild.levels.chain import (
    DEFAULT_DFT_BASIS,
    DEFAULT_DFT_DISPERSION,
    DEFAULT_DFT_FUNCTIONAL,
    DEFAULT_DFT_SOLVATION,
)
from chairbuild.minimise import ForceFieldVariant
from chairbuild.optnames import spell
from chairbuild.result import Status

__all__ = ["AnalysisOptions", "analyze", "analyze_all", "DEFAULT_WINDOW_KJ"]

#: Default energy window (kJ/mol): keeps cyclohexane's twist-boat (about 23 kJ/mol above the chair).
DEFAULT_WINDOW_KJ = 30.0
#: Starts whose energy after the screening pass of the minimisation lies more than the build
#: window plus this margin (kJ/mol) above the lowest are not minimised further
#: (:func:`chairbuild.minimise.minimise_starts`).
SCREEN_MARGIN_KJ = 20.0


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
        Rank and weight by the qRRHO free energy G instead of the energy E (a shorthand:
        adds frequencies to the chain, see :func:`chairbuild.levels.chain.shorthand_chain`).
    stages : sequence of str or Stage
        The chain of levels after the build, in order, e.g.
        ``["gfn2:optimise+frequencies,window=15", "dft:single-point,window=8"]``
        (syntax in :mod:`chairbuild.levels.chain`); replaces ``method``/``rerank``/``free_energy``.
    functional, basis, dispersion, dft_solvation_model : str
        Settings of every dft stage that does not set its own (default: the measured
        default level, see README "DFT refinement").
    cache : str or None
        Path of a results cache file (SQLite): finished single points, optimisations and
        Hessians are stored as they arrive and reused by a later run.
    chain : Chain
        Filled by :meth:`validate`: the checked chain, settings filled in.
    temperature : float
        K, default 298.15.
    window : float
        Keep conformers within this energy (kJ/mol) of the lowest; applied before the
        Boltzmann weighting.
    max_rotamers : int or None
        Cap on rotamer combinations per all-chair ring-state combination; None (default)
        chooses 81–729 from the number of those combinations
        (:func:`chairbuild.build.rotamer_cap`).
    reduced_search : bool
        Search a molecule beyond the size cap (:mod:`chairbuild.limits`: more than 100 heavy
        atoms or 30 rotatable bonds) with only the rotors nearest the rings enumerated and no
        rotor refinement, with a note, instead of refusing it with an InputError.
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
    max_rotamers: int | None = None
    reduced_search: bool = False
    twist_boats: bool = True
    threads: int | None = None
    progress: bool = False
    stages: tuple = ()
    functional: str = DEFAULT_DFT_FUNCTIONAL
    basis: str = DEFAULT_DFT_BASIS
    dispersion: str = DEFAULT_DFT_DISPERSION
    dft_solvation_model: str = DEFAULT_DFT_SOLVATION
    cache: str | None = None
    extra: dict[str, Any] = field(default_factory=dict)
    chain: Any = field(default=None, init=False)

    def validate(self) -> "AnalysisOptions":
        """Return self after checking ranges; raise OptionError on a bad value."""
        from chairbuild.levels.chain import Engine

        if not isinstance(self.forcefield, ForceFieldVariant):
            object.__setattr__(self, "forcefield", ForceFieldVariant.parse(str(self.forcefield)))
        object.__setattr__(self, "method", Engine.parse(self.method))
        if self.rerank is not None:
            object.__setattr__(self, "rerank", Engine.parse(self.rerank))
        object.__setattr__(self, "stages", tuple(self.stages) if not isinstance(self.stages, str) else self.stages)
        object.__setattr__(self, "chain", self._make_chain())
        if not (np.isfinite(self.temperature) and self.temperature > 0):
            raise OptionError(f"temperature must be a positive number of kelvin, got {self.temperature}")
        if not (np.isfinite(self.window) and self.window > 0):
            raise OptionError(f"window must be a positive energy, got {self.window}")
        if self.max_rotamers is not None and self.max_rotamers < 1:
            raise OptionError(f"max_rotamers must be at least 1, got {self.max_rotamers}")
        if self.threads is not None and self.threads < 1:
            raise OptionError(f"threads must be at least 1, got {self.threads}")
        return self

    def _make_chain(self):
        """The checked chain of levels, with the analysis-wide solvent and DFT settings filled in."""
        from chairbuild.levels.chain import Engine, make_chain, shorthand_chain, with_defaults

        if isinstance(self.stages, str):
            raise OptionError("stages must be a list of stage specifications, e.g. ['gfn2:optimise', 'dft:single-point']")
        if self.stages:
            if self.method is not Engine.MMFF94 or self.rerank is not None or self.free_energy:
                raise OptionError(
                    f"{spell('stages')} and the shorthands {spell('method')}, {spell('rerank')}, {spell('free_energy')} "
                    "do not mix; give one or the other "
                    "(for free energies add 'frequencies' to a stage, e.g. 'gfn2:optimise+frequencies')"
                )
            chain = make_chain(self.stages)
        else:
            chain = shorthand_chain(self.method.value, None if self.rerank is None else self.rerank.value, self.free_energy)
        if not any(st.engine is Engine.DFT for st in chain.stages):
            defaults = {
                "functional": DEFAULT_DFT_FUNCTIONAL,
                "basis": DEFAULT_DFT_BASIS,
                "dispersion": DEFAULT_DFT_DISPERSION,
                "dft_solvation_model": DEFAULT_DFT_SOLVATION,
            }
            given = [spell(k) for k, d in defaults.items() if str(getattr(self, k)).strip().lower() != d]
            if given:
                raise OptionError(
                    f"{', '.join(given)} set the DFT level, but no stage is a dft stage; add one "
                    f"({spell('stages')}, e.g. 'dft:single-point')"
                )
        dft_defaults = {
            "functional": self.functional,
            "basis": self.basis,
            "dispersion": self.dispersion,
            "solvation": self.dft_solvation_model,
        }
        if self.solvent is not None and not any(st.engine is not Engine.MMFF94 for st in chain.stages):
            raise OptionError(
                f"{spell('solvent')} needs the GFN2-xTB level: add {spell('method', 'gfn2')} or "
                f"{spell('rerank', 'gfn2')} (or a gfn2/dft stage)"
            )
        stages = tuple(with_defaults(st, self.solvent, self.solvation_model, dft_defaults) for st in chain.stages)
        for st in stages:
            _check_stage_settings(st)
        return replace(chain, stages=stages)


def _check_stage_settings(stage) -> None:
    """Check names (solvent, functional, basis) of one stage before any work; raise OptionError."""
    from chairbuild.levels.chain import Engine

    if stage.engine is Engine.GFN2 and stage.solvent is not None:
        from chairbuild.forcefields.xtb import available_solvents

        valid = available_solvents(stage.solvation, include_aliases=True)
        if stage.solvent.strip().lower() not in [v.lower() for v in valid]:
            raise OptionError(
                f"unknown solvent {stage.solvent!r} for {stage.solvation.upper()}; valid: "
                + ", ".join(available_solvents(stage.solvation))
            )
    if stage.engine is Engine.DFT:
        from chairbuild.levels.runner import _dft_settings

        _dft_settings(stage)


def _options(kwargs: dict[str, Any]) -> AnalysisOptions:
    known = {k for k, f in AnalysisOptions.__dataclass_fields__.items() if f.init} - {"extra"}
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
        raise StereoError(f"several diastereomers; use {spell('enumerate_stereo', True)}")
    prepared = [replace(p, notes=p.notes + _open_shell_notes(p, opts)) for p in prepared]
    for p in prepared:
        _check_models(p.mol, opts)
    return [_run_one(p, opts) for p in prepared]


def _check_models(mol, opts: AnalysisOptions) -> None:
    """Build each dft stage's model once before any work: basis names, elements and the basis-function limit."""
    from chairbuild.levels.chain import Engine
    from chairbuild.levels.runner import build_model

    for stage in opts.chain.stages:
        if stage.engine is Engine.DFT:
            build_model(mol, stage, opts.forcefield.value)


def _open_shell_notes(prepared, opts: AnalysisOptions) -> tuple[str, ...]:
    """Refuse a radical at a closed-shell level (see :mod:`chairbuild.spin`); notes otherwise."""
    from chairbuild.input import charge_and_multiplicity
    from chairbuild.levels.chain import Engine, Operation
    from chairbuild.spin import open_shell_notes

    _, multiplicity = charge_and_multiplicity(prepared.mol)
    stages = opts.chain.stages
    ranking = opts.chain.ranking_engine()
    thermal = next((st.engine for st in reversed(stages) if Operation.FREQUENCIES in st.operations), None)
    geometry = next((st.engine for st in reversed(stages) if Operation.OPTIMISE in st.operations), Engine.MMFF94)
    ff = opts.forcefield.value

    def name(engine) -> str:
        return ff if engine is Engine.MMFF94 else {"gfn2": "GFN2-xTB", "dft": "DFT"}[engine.value]

    return open_shell_notes(
        prepared.mol,
        multiplicity,
        ranking_level=name(ranking),
        ranking_open_shell=ranking is not Engine.MMFF94,
        thermal_level=None if thermal is None else name(thermal),
        thermal_open_shell=thermal is not Engine.MMFF94,
        geometry_level=ff if geometry is Engine.MMFF94 and ranking is not Engine.MMFF94 else None,
    )


def _run_one(prepared, opts: AnalysisOptions):
    from chairbuild import __version__
    from chairbuild.build import build_starting_structures
    from chairbuild.minimise import deduplicate, minimise_starts
    from chairbuild.levels.apply import run_chain
    from chairbuild.limits import REDUCED_MAX_ROTAMERS, check_search_size
    from chairbuild.rings import analyse_rings

    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    mol = prepared.mol
    analysis = analyse_rings(mol)
    size_notes = check_search_size(mol.GetNumHeavyAtoms(), analysis.rotors, opts.reduced_search)
    prepared = replace(prepared, notes=prepared.notes + size_notes)
    report = build_starting_structures(
        mol,
        analysis,
        prepared.smiles,
        prepared.achiral,
        max_rotamers=min(opts.max_rotamers or REDUCED_MAX_ROTAMERS, REDUCED_MAX_ROTAMERS) if size_notes else opts.max_rotamers,
        include_twist_boats=opts.twist_boats,
        progress=opts.progress,
    )
    timings["build_s"] = time.perf_counter() - t0
    t1 = time.perf_counter()
    build_window = opts.chain.windows(opts.window)[0]
    screen = (opts.window if build_window is None else build_window) + SCREEN_MARGIN_KJ
    minimised, n_min = minimise_starts(
        mol,
        report.starts,
        prepared.smiles,
        variant=opts.forcefield,
        threads=opts.threads,
        progress=opts.progress,
        screen_above=screen,
    )
    distinct = deduplicate(mol, minimised, prepared.achiral)
    n_refine_dup = 0
    if report.capped and not size_notes:  # the reduced search skips the rotor refinement
        extra, n_extra, n_refine_dup = _refine_rotamers(mol, analysis, prepared, distinct, opts, screen)
        minimised += extra
        n_min += n_extra
        distinct = deduplicate(mol, minimised, prepared.achiral)
    timings["minimise_s"] = time.perf_counter() - t1
    rejected = [m for m in minimised if m.status is not Status.OK]
    t2 = time.perf_counter()
    cache = None
    if opts.cache is not None:
        from chairbuild.levels.cache import ResultCache

        cache = ResultCache(opts.cache)
    outcome = run_chain(
        mol,
        distinct,
        prepared.smiles,
        prepared.achiral,
        opts.chain,
        forcefield=opts.forcefield.value,
        temperature=opts.temperature,
        window=opts.window,
        threads=opts.threads,
        progress=opts.progress,
        cache=cache,
    )
    ranked = outcome.ranked
    rejected += outcome.rejected
    n_xtb = outcome.n_gfn2_optimisations
    timings["rerank_s"] = time.perf_counter() - t2
    counts = {
        "ring_state_combinations": report.n_ring_combinations,
        "infeasible_combinations": report.n_infeasible,
        "placements_rejected_by_stereo": report.n_stereo_rejected,
        "duplicate_starts": report.n_duplicates,
        "duplicate_refinement_starts": n_refine_dup,
        "duplicate_cores": report.n_duplicate_cores,
        "rotamer_cap": report.rotamer_cap,
        "starting_structures": len(report.starts),
        "minimisations": n_min,
        "screened_out": n_min - len(minimised),
        "distinct_minima": len(distinct),
        "gfn2_optimisations": n_xtb,
        "rejected": len(rejected),
    }
    ensemble = _assemble_result(prepared, analysis, ranked, rejected, opts, outcome, report.notes, counts, timings)
    timings["total_s"] = time.perf_counter() - t0
    provenance = dict(ensemble.provenance)
    provenance["timings"] = {k: round(v, 3) for k, v in timings.items()}
    provenance["chairbuild"] = __version__
    return replace(ensemble, provenance=provenance)


#: Rotamer refinement after the cap bit: seeds per round overall and per conformer family, rounds, and the
#: energy range of seeds above the lowest (overall, or of their own family) in kJ/mol.
REFINE_SEEDS = 6
REFINE_SEEDS_PER_FAMILY = 2
REFINE_ROUNDS = 3
REFINE_RANGE_KJ = 15.0


def _refine_rotamers(mol, analysis, prepared, distinct, opts, screen: float):
    """Vary rotors around the lowest minima overall and of every conformer family until none gains a new low minimum.

    Seeds of a round: the ``REFINE_SEEDS`` lowest minima within ``REFINE_RANGE_KJ`` of the
    lowest overall, plus, for every ring's every chair family (its axial substituents, as
    in :func:`chairbuild.families.family_keys`, the families whose populations are
    reported) whose lowest member lies within the energy window, its two lowest members not
    yet used as seeds (``REFINE_SEEDS_PER_FAMILY``). Seeds are counted per ring family, not
    per combination of families, so their number grows with the rings, not with the
    product of their states; twist-boat families, 20 kJ/mol or more above the chairs, are
    refined only through the seeds overall. After the first round a family is seeded again
    only if it gained a new low minimum in the round before. Seeding each family finds its lowest member even when another family holds all
    the low minima overall (an intramolecular hydrogen bond in one chair, say), so the
    ratio of the chair families does not depend on which family the capped product
    happened to favour. Rounds stop when no family's set of low minima changes. A move that
    repeats a start of this or an earlier round (another seed turned into the same place,
    within 0.05 Å as in the build) is not minimised again.

    Returns
    -------
    tuple
        New minimised structures, the number of minimisations, the number of repeated starts skipped.
    """
    from chairbuild.rotamers import rotamer_variations
    from chairbuild.dedupe import StructureDeduplicator
    from chairbuild.describe import describe_conformer
    from chairbuild.families import family_keys
    from chairbuild.minimise import deduplicate, minimise_starts

    n_rings = len(analysis.rings)
    families: dict[int, tuple[str, ...]] = {}

    def family(s) -> tuple[str, ...]:
        """Family key of each ring (ring shape and axial substituents) of structure ``s``."""
        if id(s) not in families:
            families[id(s)] = family_keys(n_rings, *describe_conformer(mol, analysis, s.coords))
        return families[id(s)]

    def groups(structures) -> dict[str, list]:
        """Structures by ring family key (each structure in one group per ring), lowest first."""
        out: dict[str, list] = {}
        for s in sorted(structures, key=lambda m: m.energy):
            for key in family(s):
                out.setdefault(key, []).append(s)
        return out

    def low_sets(structures) -> dict[str, set[float]]:
        return {
            k: {round(m.energy, 3) for m in v if m.energy - v[0].energy <= REFINE_RANGE_KJ}
            for k, v in groups(structures).items()
        }

    extra = []
    n_min = n_dup = 0
    tried: set[float] = set()
    seen_starts = StructureDeduplicator(mol, None, achiral=prepared.achiral, rmsd_threshold=0.05, all_polar_hydrogens=True)
    current = sorted(distinct, key=lambda m: m.energy)
    changed: set[str] | None = None  # families that gained a low minimum in the last round (None: all)
    for round_k in range(REFINE_ROUNDS):
        e0 = current[0].energy
        fresh = [s for s in current if round(s.energy, 4) not in tried]
        seeds = [s for s in fresh if s.energy - e0 <= REFINE_RANGE_KJ][:REFINE_SEEDS]
        for key, members in groups(current).items():
            low = members[0].energy
            if low - e0 > opts.window or ":chair[" not in key or (changed is not None and key not in changed):
                continue
            picked = [s for s in members if s.energy - low <= REFINE_RANGE_KJ and round(s.energy, 4) not in tried]
            seeds += [s for s in picked[:REFINE_SEEDS_PER_FAMILY] if not any(s is t for t in seeds)]
        if not seeds:
            break
        tried.update(round(s.energy, 4) for s in seeds)
        starts = []
        for start in rotamer_variations(mol, analysis, [s.coords for s in seeds], origin=f"refine{round_k + 1}"):
            if seen_starts.is_duplicate(start.coords):
                n_dup += 1
            else:
                seen_starts.add(start.coords)
                starts.append(start)
        new, n = minimise_starts(
            mol,
            starts,
            prepared.smiles,
            variant=opts.forcefield,
            threads=opts.threads,
            progress=opts.progress,
            screen_above=screen,
            reference_energy=e0,
        )
        extra += new
        n_min += n
        before = low_sets(current)
        current = sorted(deduplicate(mol, list(current) + new, prepared.achiral), key=lambda m: m.energy)
        after = low_sets(current)
        changed = {k for k in after if not after[k] <= before.get(k, set())}
        if not changed:
            break
    return extra, n_min, n_dup


def _assemble_result(prepared, analysis, ranked, rejected, opts, outcome, build_notes, counts, timings):
    from rdkit import Chem

    from chairbuild.couplings.ensemble import compute_couplings
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
            start_state=structure.origin,
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
    method = outcome.method
    # rejected structures: their last energy may belong to another level, so no relative energy;
    # a structure that left the chain keeps the energies of every stage it reached
    rejected = [(m.structure, m.energies) if hasattr(m, "structure") else (m, {"last level": m.energy}) for m in rejected]
    rejected_records = [
        record(
            m,
            id=-(j + 1),
            energies=energies,
            relative_energy=float("nan"),
            population=0.0,
            degeneracy=1,
            status=m.status,
            message=m.message,
        )
        for j, (m, energies) in enumerate(rejected)
    ]
    symbols = tuple(a.GetSymbol() for a in mol.GetAtoms())
    families = build_families(records, n_rings, symbols, opts.temperature, _additive_scorer(mol, analysis))
    timings["describe_s"] = time.perf_counter() - t
    t_j = time.perf_counter()
    couplings = compute_couplings(mol, records, families, [r.atoms for r in analysis.rings], opts.temperature)
    timings["couplings_s"] = time.perf_counter() - t_j
    provenance = {
        "options": {
            "forcefield": opts.forcefield.value,
            "method": opts.method.value,
            "rerank": None if opts.rerank is None else opts.rerank.value,
            "solvent": opts.solvent,
            "solvation_model": opts.solvation_model,
            "free_energy": outcome.ranking == "free_energy",
            "temperature_K": opts.temperature,
            "window_kJ": opts.window,
            "max_rotamers": opts.max_rotamers,
            "reduced_search": opts.reduced_search,
            "twist_boats": opts.twist_boats,
            "threads": opts.threads,
            "stages": [st.spec() for st in opts.chain.stages],
            "cache": opts.cache,
        },
        "stages": outcome.stages,
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
        ranking=outcome.ranking,
        ranking_formula=outcome.formula,
        ranking_terms=outcome.terms,
        temperature=opts.temperature,
        window=opts.window,
        conformers=tuple(records),
        rejected=tuple(rejected_records),
        families=families,
        notes=tuple(notes),
        provenance=provenance,
        outside_window=dropped,
        couplings=couplings,
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
    for pkg in ("rdkit", "openmm", "numpy", "scipy", "tblite", "pyscf", "dftd3"):
        try:
            out[pkg] = version(pkg)
        except PackageNotFoundError:
            out[pkg] = "not installed"
    return out
