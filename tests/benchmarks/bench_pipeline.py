"""Benchmark: chairbuild versus ETKDG(500) + RDKit MMFF on the completeness set, side by side in one run.

Prints, per molecule and in total: wall time of each, the ratio, the number of minimisations
per distinct minimum, and whether every ETKDG minimum within 12 kJ/mol was found.
Run: ``make bench`` or ``python tests/benchmarks/bench_pipeline.py``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from etkdg_reference import COMPLETENESS_SET, etkdg_reference, missing_minima  # noqa: E402


def main(n_embeddings: int = 500) -> None:
    from chairbuild.input import read_molecules
    from chairbuild.pipeline import analyze

    analyze("C1CCCCC1", threads=1)  # warm-up: imports and OpenMM plugin loading
    rows = []
    header = f"{'molecule':38s} {'ours s':>7s} {'ETKDG s':>8s} {'ratio':>6s} {'min/min ours':>12s} {'min/min ETKDG':>13s} {'complete':>9s}"
    print(header)
    print("-" * len(header))
    for name, smiles in COMPLETENESS_SET:
        prepared = read_molecules(smiles)[0]
        t0 = time.perf_counter()
        ens = analyze(smiles, threads=1)
        t_ours = time.perf_counter() - t0
        ref = etkdg_reference(prepared.mol, n=n_embeddings, seed=42, window_kj=12.0, achiral=prepared.achiral, threads=1)
        # distinct minima of the reference over its whole energy range, for a fair per-minimum count
        ref_all = etkdg_reference(prepared.mol, n=n_embeddings, seed=42, window_kj=1e9, achiral=prepared.achiral, threads=1)
        missing = missing_minima(ens, ref, prepared.achiral)
        counts = ens.provenance["counts"]
        rows.append((t_ours, ref.seconds, counts["minimisations"], counts["distinct_minima"], ref.n_minimisations, len(ref_all.minima), not missing))
        print(
            f"{name:38s} {t_ours:7.2f} {ref.seconds:8.2f} {t_ours / ref.seconds:6.3f} "
            f"{counts['minimisations'] / counts['distinct_minima']:12.2f} {ref.n_minimisations / len(ref_all.minima):13.1f} "
            f"{'yes' if not missing else 'NO':>9s}",
            flush=True,
        )
    print("-" * len(header))
    n_flex = 3  # the last three of the set carry flexible substituents in both chair families
    for label, part in (("total", rows), ("without the last three", rows[:-n_flex]), ("last three (flexible)", rows[-n_flex:])):
        t_ours, t_ref, mins_ours, mins_ref, complete = _totals(part)
        print(f"{label:38s} {t_ours:7.2f} {t_ref:8.2f} {t_ours / t_ref:6.3f} {mins_ours:12.2f} {mins_ref:13.1f} "
              f"{complete}/{len(part)}")
    t_ours, t_ref, mins_ours, mins_ref, _ = _totals(rows)
    mono = rows[0]
    print(f"\nmethylcyclohexane with chairbuild: {mono[0]:.2f} s; time ratio chairbuild/ETKDG({n_embeddings}) = {t_ours / t_ref:.3f} (target <= 0.25)")
    print(f"minimisations per distinct minimum: chairbuild {mins_ours:.2f} (target <= 2), ETKDG {mins_ref:.1f}")


def _totals(rows):
    """Summed times, minimisations per distinct minimum of each side, and complete molecules."""
    return (
        sum(r[0] for r in rows),
        sum(r[1] for r in rows),
        sum(r[2] for r in rows) / sum(r[3] for r in rows),
        sum(r[4] for r in rows) / sum(r[5] for r in rows),
        sum(r[6] for r in rows),
    )


if __name__ == "__main__":
    main()
