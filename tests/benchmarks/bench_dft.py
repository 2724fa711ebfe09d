"""DFT stage: single points cold versus warm-started, SCF cycles saved, and the refinement's time.

Two measurements at the default DFT level (B3LYP-D3(BJ)/def2-SVP, C-PCM chloroform):

1. **Warm start.** The lowest GFN2-xTB minima of one molecule (``--warm-molecule``, up to
   ``--conformers`` of them) get a single point each, in the runner's nearest-neighbour
   order, twice: with a model that starts every SCF from PySCF's atomic guess (cold), and
   with one that starts each SCF from the nearest geometry already computed (warm, what the
   chain does). The first single point of the warm pass has nothing to start from, so the
   comparison covers the others: seconds per single point and SCF cycles, cold versus warm,
   and the energies of both passes (they must agree to the SCF threshold).
2. **Refinement.** The whole analysis with the chain
   ``gfn2:optimise+frequencies,window=8`` → ``dft:single-point`` in chloroform (ALPB for
   GFN2-xTB, C-PCM for DFT) for three molecules, with ``--threads`` workers: wall time,
   time of each stage, number of single points, SCF cycles.

Target (issue "DFT refinement"): the warm start saves at least 30 % of the SCF cycles.
Run: ``python tests/benchmarks/bench_dft.py [--molecules KEY,KEY] [--threads N]``; one
molecule at a time is possible (``--molecules N-methylpiperidine --skip-warm``). It is
slow: a def2-SVP single point of these molecules takes 20–150 s on one core.
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


def default_settings():
    """The default DFT level of a dft stage, with C-PCM chloroform."""
    from chairbuild.forcefields.dft import DFTSettings
    from chairbuild.levels.chain import (
        DEFAULT_DFT_BASIS,
        DEFAULT_DFT_DISPERSION,
        DEFAULT_DFT_FUNCTIONAL,
        DEFAULT_DFT_SOLVATION,
    )

    return DFTSettings(
        functional=DEFAULT_DFT_FUNCTIONAL,
        basis=DEFAULT_DFT_BASIS,
        dispersion=DEFAULT_DFT_DISPERSION,
        solvent=SOLVENT,
        solvation_model=DEFAULT_DFT_SOLVATION,
    ).validated()


def warm_start(smiles: str, n_conformers: int, threads: int) -> dict:
    """Cold and warm single points over the lowest GFN2-xTB minima of ``smiles``."""
    from rdkit import Chem

    from chairbuild.forcefields.dft import DFTModel
    from chairbuild.levels.runner import nearest_neighbour_order
    from chairbuild.pipeline import analyze

    ens = analyze(smiles, stages=["gfn2:optimise"], threads=threads)
    geoms = [np.array(c.coords) for c in ens.conformers[:n_conformers]]
    order = nearest_neighbour_order(geoms)
    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    settings = default_settings()
    passes = {}
    for label, reuse in (("cold", False), ("warm", True)):
        model = DFTModel(mol, settings, threads=threads, reuse_density=reuse, label=smiles)
        rows = []
        for k in order:
            t0 = time.perf_counter()
            e = model.energy(geoms[k])
            rows.append({"conformer": k, "seconds": time.perf_counter() - t0, "cycles": model.last_scf.cycles,
                         "warm_start": model.last_scf.warm_start, "energy": e})
            print(f"  {label} conformer {k}: {rows[-1]['seconds']:7.1f} s, {rows[-1]['cycles']:3d} cycles"
                  f"{' (warm start)' if rows[-1]['warm_start'] else ''}", flush=True)
        passes[label] = rows
    cold, warm = passes["cold"][1:], passes["warm"][1:]  # the warm pass's first SCF is cold by necessity
    cycles_cold = sum(r["cycles"] for r in cold)
    cycles_warm = sum(r["cycles"] for r in warm)
    return {
        "n_atoms": mol.GetNumAtoms(),
        "n_basis_functions": DFTModel(mol, settings).n_basis_functions,
        "n_compared": len(cold),
        "seconds_cold": float(np.mean([r["seconds"] for r in cold])) if cold else float("nan"),
        "seconds_warm": float(np.mean([r["seconds"] for r in warm])) if warm else float("nan"),
        "cycles_cold": cycles_cold,
        "cycles_warm": cycles_warm,
        "cycles_saved": 1.0 - cycles_warm / cycles_cold if cycles_cold else float("nan"),
        "max_energy_difference_kJ": max(
            (abs(a["energy"] - b["energy"]) for a, b in zip(passes["cold"], passes["warm"])), default=0.0
        ),
    }


def refinement(smiles: str, threads: int) -> dict:
    """The whole analysis with :data:`CHAIN`: wall time and per-stage figures."""
    from chairbuild.pipeline import analyze

    t0 = time.perf_counter()
    ens = analyze(smiles, stages=CHAIN, solvent=SOLVENT, threads=threads)
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


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--molecules", default=",".join(MOLECULES), help="keys of MOLECULES for the refinement, comma-separated")
    p.add_argument("--warm-molecule", default="N-methylpiperidine", help="key of MOLECULES for the warm-start comparison")
    p.add_argument("--conformers", type=int, default=5, help="conformers in the warm-start comparison (default 5)")
    p.add_argument("--threads", type=int, default=2, help="worker processes / OpenMP threads (default 2)")
    p.add_argument("--skip-warm", action="store_true", help="only the refinement")
    p.add_argument("--skip-refinement", action="store_true", help="only the warm-start comparison")
    args = p.parse_args(argv)
    settings = default_settings()
    print(f"level {settings.name}, threads {args.threads}", flush=True)
    if not args.skip_warm:
        key = args.warm_molecule
        print(f"\nwarm start: {key}, up to {args.conformers} lowest GFN2-xTB minima", flush=True)
        w = warm_start(MOLECULES[key], args.conformers, args.threads)
        print(f"\n{'molecule':24s} {'atoms':>5s} {'nbf':>4s} {'SPs':>4s} {'s/SP cold':>9s} {'s/SP warm':>9s} "
              f"{'cycles cold':>11s} {'cycles warm':>11s} {'saved':>6s} {'target':>6s} {'max |dE| kJ/mol':>15s}")
        print(f"{key:24s} {w['n_atoms']:5d} {w['n_basis_functions']:4d} {w['n_compared']:4d} {w['seconds_cold']:9.1f} "
              f"{w['seconds_warm']:9.1f} {w['cycles_cold']:11d} {w['cycles_warm']:11d} {w['cycles_saved']:6.1%} "
              f"{TARGET_CYCLES_SAVED:6.0%} {w['max_energy_difference_kJ']:15.2e}", flush=True)
    if not args.skip_refinement:
        rows = {}
        for key in args.molecules.split(","):
            print(f"\nrefinement: {key} ({' -> '.join(CHAIN)}, {SOLVENT})", flush=True)
            rows[key] = refinement(MOLECULES[key], args.threads)
        print(f"\n{'molecule':24s} {'wall s':>7s} {'MMFF s':>7s} {'GFN2 s':>7s} {'DFT s':>7s} {'SPs':>4s} "
              f"{'s/SP':>6s} {'cycles':>6s} {'confs':>5s}")
        for key, r in rows.items():
            per_sp = r["dft_s"] / r["single_points"] if r["single_points"] else float("nan")
            print(f"{key:24s} {r['wall_s']:7.1f} {r['build_and_minimise_s']:7.1f} {r['gfn2_s']:7.1f} {r['dft_s']:7.1f} "
                  f"{r['single_points']:4d} {per_sp:6.1f} {r['scf_cycles']:6d} {r['conformers']:5d}")
        total = sum(r["wall_s"] for r in rows.values())
        print(f"{'all':24s} {total:7.1f}   formula: {next(iter(rows.values()))['formula']}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
