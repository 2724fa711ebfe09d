"""DFT stage: single points cold versus warm-started, SCF cycles saved, and the refinement's time.

Three measurements at the default DFT level (B3LYP-D3(BJ)/def2-SVP, C-PCM chloroform), with
``--threads`` OpenMP threads per single point:

1. **Neighbouring conformers.** The lowest GFN2-xTB minima of one molecule (``--warm-molecule``,
   up to ``--conformers``) get a single point each, in the runner's nearest-neighbour order, twice:
   from PySCF's atomic guess (cold), and each from the density of the nearest conformer already
   computed, turned into its orientation, whatever its distance (the warm start without its
   threshold). The warm pass's first SCF has nothing to start from; the comparison covers the others.
2. **Hessian steps.** The lowest minimum and ``--steps`` geometries displaced from it by ±0.005 Å
   along single Cartesian coordinates (the steps of the finite-difference Hessian of a frequency
   stage): each displaced geometry cold, and warm with the model's default rule (start from a kept
   density within ``WARM_START_MAX_RMSD_A``), after the undisplaced one.
   Both comparisons print seconds per single point, SCF cycles and the cycles saved, and the
   largest energy difference between the passes (warm and cold must agree to the SCF threshold).
3. **Refinement.** The whole analysis with the chain ``gfn2:optimise+frequencies,window=8`` →
   ``dft:single-point`` in chloroform (ALPB for GFN2-xTB, C-PCM for DFT) for three molecules, with
   ``--threads`` workers: wall time, time of each stage, number of single points, SCF cycles.
4. **Cost per level.** One cold single point at each candidate level of ``tests/dft_levels.py``
   (``CANDIDATES``) on the same geometries (both family minima of ``--cost-cases``, cases of the
   accuracy set), side by side in one run: seconds, SCF cycles, basis functions, and the time
   relative to the default level. With the accuracy table in the README this gives accuracy per cost.

Target (issue "DFT refinement"): the warm start saves at least 30 % of the SCF cycles.
Run: ``python tests/benchmarks/bench_dft.py [--molecules KEY,KEY] [--threads N] [--skip-conformers]
[--skip-steps] [--skip-refinement] [--skip-levels] [--cost-cases KEY,KEY]``. It is slow: a def2-SVP single point of these molecules takes
20–200 s on a loaded 2-core machine.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

#: The three molecules of the refinement (our own choice: a carbocycle, a piperidine, a tetrahydropyran).
MOLECULES = {
    "methylcyclohexane": "CC1CCCCC1",
    "N-methylpiperidine": "CN1CCCCC1",
    "2-methyltetrahydropyran": "C[C@@H]1CCCCO1",
}
SOLVENT = "chloroform"
CHAIN = ["gfn2:optimise+frequencies,window=8", "dft:single-point"]
#: Fraction of SCF cycles the warm start should save (issue target).
TARGET_CYCLES_SAVED = 0.30


#: Orbital basis of the measurement (``--basis``; default: the dft stage's default).
BASIS: list[str] = []


def default_settings():
    """The default DFT level of a dft stage (``--basis`` aside), with C-PCM chloroform."""
    from chairbuild.forcefields.dft import DFTSettings
    from chairbuild.levels.chain import (
        DEFAULT_DFT_BASIS,
        DEFAULT_DFT_DISPERSION,
        DEFAULT_DFT_FUNCTIONAL,
        DEFAULT_DFT_SOLVATION,
    )

    return DFTSettings(
        functional=DEFAULT_DFT_FUNCTIONAL,
        basis=BASIS[0] if BASIS else DEFAULT_DFT_BASIS,
        dispersion=DEFAULT_DFT_DISPERSION,
        solvent=SOLVENT,
        solvation_model=DEFAULT_DFT_SOLVATION,
    ).validated()


def _passes(mol, settings, threads, geoms, order, warm_kwargs, warm_prefix=()) -> dict:
    """Single points over ``geoms`` in ``order``: cold, then warm after computing ``warm_prefix``."""
    from chairbuild.forcefields.dft import DFTModel

    out = {}
    for label, kwargs in (("cold", {"reuse_density": False}), ("warm", warm_kwargs)):
        model = DFTModel(mol, settings, threads=threads, **kwargs)
        for x in warm_prefix if label == "warm" else ():
            model.energy(x)
        rows = []
        for k in order:
            t0 = time.perf_counter()
            e = model.energy(geoms[k])
            rows.append({"seconds": time.perf_counter() - t0, "cycles": model.last_scf.cycles,
                         "warm_start": model.last_scf.warm_start, "energy": e})
            print(f"  {label} geometry {k}: {rows[-1]['seconds']:7.1f} s, {rows[-1]['cycles']:3d} cycles"
                  f"{' (warm start)' if rows[-1]['warm_start'] else ''}", flush=True)
        out[label] = rows
    return out


def _compare(passes: dict, skip_first: bool) -> dict:
    cold, warm = passes["cold"], passes["warm"]
    diff = max((abs(a["energy"] - b["energy"]) for a, b in zip(cold, warm)), default=0.0)
    if skip_first:  # the warm pass's first SCF has nothing to start from
        cold, warm = cold[1:], warm[1:]
    cycles_cold = sum(r["cycles"] for r in cold)
    cycles_warm = sum(r["cycles"] for r in warm)
    return {
        "n_compared": len(cold),
        "seconds_cold": float(np.mean([r["seconds"] for r in cold])) if cold else float("nan"),
        "seconds_warm": float(np.mean([r["seconds"] for r in warm])) if warm else float("nan"),
        "cycles_cold": cycles_cold,
        "cycles_warm": cycles_warm,
        "cycles_saved": 1.0 - cycles_warm / cycles_cold if cycles_cold else float("nan"),
        "max_energy_difference_kJ": diff,
    }


def _minima(smiles: str, threads: int):
    from rdkit import Chem

    from chairbuild.pipeline import analyze

    ens = analyze(smiles, stages=["gfn2:optimise"], threads=threads)
    return Chem.MolFromMolBlock(ens.mol_block, removeHs=False), [np.array(c.coords) for c in ens.conformers]


def neighbouring_conformers(smiles: str, n_conformers: int, threads: int) -> dict:
    """Cold versus warm single points over the lowest GFN2-xTB minima of ``smiles``."""
    from chairbuild.forcefields.dft import _superpose
    from chairbuild.levels.runner import nearest_neighbour_order

    mol, geoms = _minima(smiles, threads)
    geoms = geoms[:n_conformers]
    order = nearest_neighbour_order(geoms)
    steps = [_superpose(geoms[order[i]], geoms[order[i - 1]])[2] for i in range(1, len(order))]
    print(f"  RMSD to the previous conformer (Å): {', '.join(f'{r:.2f}' for r in steps)}", flush=True)
    passes = _passes(mol, default_settings(), threads, geoms, order, {"warm_start_max_rmsd": float("inf")})
    return {"n_atoms": mol.GetNumAtoms(), **_compare(passes, skip_first=True)}


def hessian_steps(smiles: str, n_steps: int, threads: int) -> dict:
    """Cold versus warm single points at ±0.005 Å steps from the lowest GFN2-xTB minimum of ``smiles``."""
    mol, geoms = _minima(smiles, threads)
    x0 = geoms[0]
    displaced = []
    for k in range(n_steps):
        x = x0.copy()
        x.flat[k // 2] += 0.005 if k % 2 == 0 else -0.005  # as in EnergyModel.hessian
        displaced.append(x)
    passes = _passes(mol, default_settings(), threads, displaced, range(n_steps), {}, warm_prefix=(x0,))
    return {"n_atoms": mol.GetNumAtoms(), **_compare(passes, skip_first=False)}


def _print_comparison(title: str, key: str, w: dict) -> None:
    print(f"\n{title}")
    print(f"{'molecule':24s} {'atoms':>5s} {'SPs':>4s} {'s/SP cold':>9s} {'s/SP warm':>9s} "
          f"{'cycles cold':>11s} {'cycles warm':>11s} {'saved':>7s} {'target':>6s} {'max |dE| kJ/mol':>15s}")
    print(f"{key:24s} {w['n_atoms']:5d} {w['n_compared']:4d} {w['seconds_cold']:9.1f} "
          f"{w['seconds_warm']:9.1f} {w['cycles_cold']:11d} {w['cycles_warm']:11d} {w['cycles_saved']:7.1%} "
          f"{TARGET_CYCLES_SAVED:6.0%} {w['max_energy_difference_kJ']:15.2e}", flush=True)


def refinement(smiles: str, threads: int) -> dict:
    """The whole analysis with :data:`CHAIN`: wall time and per-stage figures."""
    from chairbuild.pipeline import analyze

    t0 = time.perf_counter()
    extra = {"basis": BASIS[0]} if BASIS else {}
    ens = analyze(smiles, stages=CHAIN, solvent=SOLVENT, threads=threads, **extra)
    wall = time.perf_counter() - t0
    stages = ens.provenance["stages"]
    timings = ens.provenance["timings"]
    dft = stages[-1]
    return {
        "wall_s": wall,
        "build_and_minimise_s": timings["build_s"] + timings["minimise_s"],
        "gfn2_s": stages[0]["seconds"],
        "dft_s": dft["seconds"],
        "single_points": dft["computed"],
        "scf_cycles": dft.get("scf_cycles", 0),
        "conformers": len(ens.conformers),
        "formula": ens.ranking_formula,
    }


def level_cost(case_keys: list[str], threads: int) -> dict:
    """Seconds and SCF cycles of one cold single point per candidate level, same geometries for all."""
    from chairbuild.forcefields.dft import DFTModel, DFTSettings
    from tests.dft_levels import CANDIDATES, family_minima, load_cases

    cases = {c.key: c for c in load_cases()}
    unknown = [k for k in case_keys if k not in cases]
    if unknown:
        raise SystemExit(f"unknown case(s) {unknown}; choose from: {', '.join(cases)}")
    rows: dict[str, dict] = {}
    for key in case_keys:
        case = cases[key]
        mol, minima = family_minima(case.smiles, case.temperature)
        for level, kwargs in CANDIDATES.items():
            model = DFTModel(mol, DFTSettings(solvent=case.dft_solvent, **kwargs), threads=threads,
                             reuse_density=False, label=key)
            for coords, _ in minima:
                t0 = time.perf_counter()
                model.energy(coords)
                row = rows.setdefault(level, {"seconds": 0.0, "cycles": 0, "single_points": 0, "nbf": []})
                row["seconds"] += time.perf_counter() - t0
                row["cycles"] += model.last_scf.cycles
                row["single_points"] += 1
            row["nbf"].append(model.n_basis_functions)
            print(f"  {key}: {level} {row['seconds']:.1f} s so far", flush=True)
    return rows


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--molecules", default=",".join(MOLECULES), help="keys of MOLECULES for the refinement, comma-separated")
    p.add_argument("--warm-molecule", default="N-methylpiperidine", help="key of MOLECULES for the warm-start comparisons")
    p.add_argument("--conformers", type=int, default=5, help="conformers in the neighbouring-conformer comparison (default 5)")
    p.add_argument("--steps", type=int, default=4, help="Hessian steps in the step comparison (default 4)")
    p.add_argument("--threads", type=int, default=2, help="worker processes / OpenMP threads (default 2)")
    p.add_argument("--skip-conformers", action="store_true", help="leave out the neighbouring-conformer comparison")
    p.add_argument("--skip-steps", action="store_true", help="leave out the Hessian-step comparison")
    p.add_argument("--skip-refinement", action="store_true", help="leave out the refinement")
    p.add_argument("--skip-levels", action="store_true", help="leave out the cost per candidate level")
    p.add_argument("--cost-cases", default="CH3",
                   help="cases of tests/dft_levels.py for the cost per level, comma-separated")
    p.add_argument("--basis", default=None, help="orbital basis instead of the default (a quick check of the script)")
    args = p.parse_args(argv)
    if args.basis:
        BASIS.append(args.basis)
    settings = default_settings()
    print(f"level {settings.name}, threads {args.threads}", flush=True)
    key = args.warm_molecule
    if not args.skip_conformers:
        print(f"\nneighbouring conformers: {key}, up to {args.conformers} lowest GFN2-xTB minima", flush=True)
        w = neighbouring_conformers(MOLECULES[key], args.conformers, args.threads)
        _print_comparison("single points over neighbouring conformers (warm: any distance)", key, w)
    if not args.skip_steps:
        print(f"\nHessian steps: {key}, {args.steps} steps of 0.005 Å from the lowest GFN2-xTB minimum", flush=True)
        w = hessian_steps(MOLECULES[key], args.steps, args.threads)
        _print_comparison("single points at Hessian steps (warm: the model's default rule)", key, w)
    if not args.skip_refinement:
        rows = {}
        for key in args.molecules.split(","):
            print(f"\nrefinement: {key} ({' -> '.join(CHAIN)}, {SOLVENT})", flush=True)
            rows[key] = refinement(MOLECULES[key], args.threads)
        print(f"\n{'molecule':24s} {'wall s':>7s} {'MMFF s':>7s} {'GFN2 s':>7s} {'DFT s':>7s} {'SPs':>4s} "
              f"{'DFT s/SP':>8s} {'cycles':>6s} {'confs':>5s}")
        for key, r in rows.items():
            per_sp = r["dft_s"] / r["single_points"] if r["single_points"] else float("nan")
            print(f"{key:24s} {r['wall_s']:7.1f} {r['build_and_minimise_s']:7.1f} {r['gfn2_s']:7.1f} {r['dft_s']:7.1f} "
                  f"{r['single_points']:4d} {per_sp:8.1f} {r['scf_cycles']:6d} {r['conformers']:5d}")
        total = sum(r["wall_s"] for r in rows.values())
        print(f"{'all':24s} {total:7.1f}   formula: {next(iter(rows.values()))['formula']}", flush=True)
    if not args.skip_levels:
        cases = args.cost_cases.split(",")
        print(f"\ncost per level: cold single points at both family minima of {', '.join(cases)}", flush=True)
        rows = level_cost(cases, args.threads)
        base = next(iter(rows.values()))
        print(f"\n{'level':28s} {'SPs':>4s} {'basis functions':>15s} {'s per SP':>8s} {'cycles/SP':>9s} {'time ratio':>10s}")
        for level, r in rows.items():
            print(f"{level:28s} {r['single_points']:4d} {'/'.join(map(str, r['nbf'])):>15s} "
                  f"{r['seconds'] / r['single_points']:8.1f} {r['cycles'] / r['single_points']:9.1f} "
                  f"{r['seconds'] / base['seconds']:10.2f}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
