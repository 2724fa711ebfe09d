"""Run every benchmark in turn (``make bench``)."""

from __future__ import annotations

import runpy
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

if __name__ == "__main__":
    for name in ("bench_mmff.py", "bench_pipeline.py", "bench_avalues.py", "bench_batch.py", "bench_additive_flags.py",
                 "bench_coupling_errors.py", "bench_size_cap.py", "bench_slow_class.py", "bench_dft.py"):
        path = HERE / name
        if not path.exists():
            continue
        print(f"\n===== {name} =====", flush=True)
        sys.argv = [str(path)]
        runpy.run_path(str(path), run_name="__main__")
