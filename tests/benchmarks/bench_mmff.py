"""Benchmark: MMFF94 minimisation of 200 conformers, this OpenMM path vs RDKit.

For three molecules of about 20, 40 and 80 atoms (hydrogens included) the same 200
ETKDG conformers (fixed seed) are minimised side by side in one run:

* ours: ``chairbuild.forcefields.mmff.MMFFModel(mol, threads=T).minimize(coords)`` (model
  construction included), to its default RMS-gradient tolerance;
* RDKit: ``AllChem.MMFFOptimizeMoleculeConfs(mol, numThreads=T, maxIters=M)``.

Both sides get the same thread count ``T`` (default 1). Library imports and
first-use costs are paid once on a small molecule before any timing. Each timing is
the best of ``--repeat`` alternating runs. Reported: wall times, their ratio
(ours / RDKit; target <= 1.0 on the 80-atom case), mean and median final-energy
difference (ours - RDKit, kcal/mol) and the share of conformers within 0.01 kcal/mol.

Run: ``python tests/benchmarks/bench_mmff.py [--threads T] [--repeat R] [--conformers N]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

#: (label, SMILES): about 20, 40 and 80 atoms with hydrogens.
MOLECULES = [
    ("methylcyclohexane", "CC1CCCCC1"),
    ("4-tBu-cyclohexyl benzoate", "CC(C)(C)C1CCC(CC1)OC(=O)c1ccccc1"),
    ("cholestanol", "CC(C)CCCC(C)C1CCC2C1(CCC3C2CCC4C3(CCC(C4)O)C)C"),
]
EMBED_SEED = 20240607


def _conformers(smiles: str, n: int):
    from rdkit import Chem
    from rdkit.Chem import AllChem

    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    params = AllChem.ETKDGv3()
    params.randomSeed = EMBED_SEED
    AllChem.EmbedMultipleConfs(mol, n, params)
    return mol


def _run_ours(mol, threads: int) -> tuple[float, np.ndarray, float]:
    from chairbuild.constants import KJ_TO_KCAL
    from chairbuild.forcefields.mmff import MMFFModel

    starts = np.array([c.GetPositions() for c in mol.GetConformers()])
    t0 = time.perf_counter()
    model = MMFFModel(mol, threads=threads)
    results = model.minimize(starts)
    elapsed = time.perf_counter() - t0
    energies = np.array([r.energy for r in results]) * KJ_TO_KCAL
    converged = float(np.mean([r.converged for r in results]))
    return elapsed, energies, converged


def _run_rdkit(mol, threads: int, max_iters: int) -> tuple[float, np.ndarray, float]:
    from rdkit import Chem
    from rdkit.Chem import AllChem

    work = Chem.Mol(mol)
    t0 = time.perf_counter()
    out = AllChem.MMFFOptimizeMoleculeConfs(work, numThreads=threads, maxIters=max_iters)
    elapsed = time.perf_counter() - t0
    energies = np.array([e for _, e in out])
    converged = float(np.mean([flag == 0 for flag, _ in out]))
    return elapsed, energies, converged


def _warm_up(threads: int) -> None:
    mol = _conformers("OC1CCCCC1", 4)
    _run_ours(mol, threads)
    _run_rdkit(mol, threads, 200)


def main(argv: list[str] | None = None) -> None:
    """Run the benchmark and print one table row per molecule."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--threads", type=int, default=1, help="threads on both sides (default 1)")
    parser.add_argument("--repeat", type=int, default=1, help="alternating repeats, best kept")
    parser.add_argument("--conformers", type=int, default=200)
    parser.add_argument("--rdkit-max-iters", type=int, default=10000,
                        help="RDKit maxIters (default 10000, so that RDKit converges too)")
    args = parser.parse_args(argv)

    _warm_up(args.threads)
    header = (
        f"{'molecule':28s} {'atoms':>5s} {'ours s':>8s} {'RDKit s':>8s} {'ratio':>6s} "
        f"{'mean dE':>9s} {'median dE':>10s} {'|dE|<0.01':>9s} {'conv ours/RDKit':>16s}"
    )
    print(f"MMFF94 minimisation of {args.conformers} ETKDG conformers, threads={args.threads} on both sides, "
          f"RDKit maxIters={args.rdkit_max_iters}; dE = E(ours) - E(RDKit), kcal/mol")
    print(header)
    print("-" * len(header))
    for label, smiles in MOLECULES:
        mol = _conformers(smiles, args.conformers)
        best_ours = best_rdkit = float("inf")
        for _ in range(max(1, args.repeat)):
            t_ours, e_ours, c_ours = _run_ours(mol, args.threads)
            t_rdkit, e_rdkit, c_rdkit = _run_rdkit(mol, args.threads, args.rdkit_max_iters)
            best_ours, best_rdkit = min(best_ours, t_ours), min(best_rdkit, t_rdkit)
        diff = e_ours - e_rdkit
        print(
            f"{label:28s} {mol.GetNumAtoms():5d} {best_ours:8.2f} {best_rdkit:8.2f} "
            f"{best_ours / best_rdkit:6.2f} {diff.mean():9.4f} {np.median(diff):10.5f} "
            f"{np.mean(np.abs(diff) < 0.01):9.2f} {c_ours:7.2f}/{c_rdkit:.2f}",
            flush=True,
        )


if __name__ == "__main__":
    main()
