"""Benchmark: A-values of monosubstituted cyclohexanes per level against experiment.

Reads the same data as the A-value test (tests/data/a_value_set.csv and the project's
increments table) and prints ΔG(axial − equatorial) per level, the mean absolute error,
the wrong signs, and the time per molecule and per conformer for each level.
Run: ``make bench`` or ``python tests/benchmarks/bench_avalues.py [LEVEL ...]``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from a_values import LEVELS, axial_minus_equatorial, load_cases  # noqa: E402


def main(levels: list[str] | None = None) -> None:
    from chairbuild.pipeline import analyze

    levels = levels or list(LEVELS)
    cases = load_cases()
    errors = {lvl: [] for lvl in levels}
    times = {lvl: [] for lvl in levels}
    n_confs = {lvl: 0 for lvl in levels}
    stage_times = {lvl: {} for lvl in levels}
    print(f"{'group':10s} {'exp':>6s} " + " ".join(f"{lvl[:24]:>24s}" for lvl in levels))
    for case in cases:
        cells = []
        for lvl in levels:
            opts = dict(LEVELS[lvl])
            if "method" in opts or "rerank" in opts:
                opts["solvent"] = case.solvent
            t0 = time.perf_counter()
            ens = analyze(case.smiles, threads=1, **opts)
            times[lvl].append(time.perf_counter() - t0)
            n_confs[lvl] += len(ens.conformers)
            for k, v in ens.provenance["timings"].items():
                stage_times[lvl][k] = stage_times[lvl].get(k, 0.0) + v
            value = axial_minus_equatorial(ens)
            errors[lvl].append(value - case.reference_kj)
            cells.append(f"{value:24.2f}")
        print(f"{case.key:10s} {case.reference_kj:6.2f} " + " ".join(cells), flush=True)
    print("\nlevel                               MAE kJ/mol  max err  wrong signs (|A|>1 kJ/mol)  s/molecule  s/conformer")
    refs = np.array([c.reference_kj for c in cases])
    for lvl in levels:
        err = np.array(errors[lvl])
        calc = refs + err
        wrong = int(np.sum((np.abs(refs) > 1.0) & (np.sign(calc) != np.sign(refs))))
        print(
            f"{lvl:36s} {np.abs(err).mean():10.2f} {np.abs(err).max():8.2f} {wrong:27d} "
            f"{np.mean(times[lvl]):11.2f} {sum(times[lvl]) / max(n_confs[lvl], 1):12.3f}"
        )
    print("\nwhere the time goes (s, summed over molecules):")
    for lvl in levels:
        parts = ", ".join(f"{k} {v:.1f}" for k, v in stage_times[lvl].items() if k != "total_s")
        print(f"  {lvl}: {parts}")


if __name__ == "__main__":
    main(sys.argv[1:] or None)
