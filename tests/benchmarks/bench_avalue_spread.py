"""Run-to-run spread of the A-value levels guarded in ``tests/test_avalues.py``.

Computes every group twice in one process: first in table order with the default worker
count, then in reverse order with one worker, and prints per level the MAE of each pass
and the largest per-group difference between the passes. The guards in the test sit at
the measured MAE plus a margin that must exceed this spread.
Run: ``python tests/benchmarks/bench_avalue_spread.py [LEVEL ...]``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from a_values import compute, load_cases  # noqa: E402
from test_avalues import GUARDS  # noqa: E402


def main(levels: list[str] | None = None) -> None:
    cases = load_cases()
    levels = levels or list(GUARDS)
    print(f"{'level':28s} {'MAE pass 1':>10s} {'MAE pass 2':>10s} {'max |diff|':>10s}  group   guard")
    for level in levels:
        forward = {c.key: compute(c, level) for c in cases}
        backward = {c.key: compute(c, level, threads=1) for c in reversed(cases)}
        mae = [float(np.mean([abs(run[c.key] - c.reference_kj) for c in cases])) for run in (forward, backward)]
        diffs = {k: abs(forward[k] - backward[k]) for k in forward}
        worst = max(diffs, key=diffs.get)
        print(f"{level:28s} {mae[0]:10.3f} {mae[1]:10.3f} {diffs[worst]:10.2e}  {worst:7s} {GUARDS[level][0]:.2f}", flush=True)


if __name__ == "__main__":
    main(sys.argv[1:] or None)
