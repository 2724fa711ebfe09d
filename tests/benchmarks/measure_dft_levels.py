"""Measure the candidate DFT levels on the check set; resumable through a results cache.

Usage: ``python tests/benchmarks/measure_dft_levels.py [--cache FILE] [--out FILE] [--levels L1,L2]
[--tz-all] [--threads N] [--skip-gfn2]``.
Writes one JSON line per (level, case) to ``--out`` as soon as it is computed and prints
the summary table (MAE, wrong signs with |ΔG| > 2 kJ/mol, seconds per single point).
The def2-TZVP candidate runs on the subset ``TZ_SUBSET`` only, or on every case with ``--tz-all``.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.dft_levels import CANDIDATES, TZ_SUBSET, compute, gfn2_value, load_cases, summary  # noqa: E402


def main(argv=None) -> int:
    p = argparse.ArgumentParser()
    p.add_argument("--cache", default="dft_levels.sqlite")
    p.add_argument("--out", default="dft_levels.jsonl")
    p.add_argument("--levels", default=",".join(CANDIDATES))
    p.add_argument("--tz-all", action="store_true", help="run the def2-TZVP candidate on every case, not the subset")
    p.add_argument("--threads", type=int, default=1, help="threads per single point")
    p.add_argument("--skip-gfn2", action="store_true", help="do not recompute the GFN2-xTB rows")
    args = p.parse_args(argv)
    from chairbuild.levels.cache import ResultCache

    cache = ResultCache(args.cache)
    cases = load_cases()
    out = Path(args.out)
    rows = []
    for case in [] if args.skip_gfn2 else cases:
        row = {"level": "GFN2-xTB (gas)", "case": case.key, "reference": case.reference_kj, "value": gfn2_value(case)}
        rows.append(row)
        with out.open("a") as fh:
            fh.write(json.dumps(row) + "\n")
    for level in args.levels.split(","):
        for case in cases:
            if "TZVP" in level and case.key not in TZ_SUBSET and not args.tz_all:
                continue
            res = compute(case, level, cache, threads=args.threads)
            row = {"level": level, "case": case.key, "reference": case.reference_kj, **res}
            rows.append(row)
            with out.open("a") as fh:
                fh.write(json.dumps(row) + "\n")
            print(f"{level:28s} {case.key:48s} calc {res['value']:7.2f} ref {case.reference_kj:7.2f} "
                  f"s/SP {sum(res['seconds']) / 2:6.1f}", flush=True)
    print(f"\n{'level':28s} {'subset':10s} {'n':>3s} {'MAE kJ/mol':>10s} {'wrong signs':>11s} {'s per SP':>9s}")
    for level in ["GFN2-xTB (gas)"] + args.levels.split(","):
        sel = [r for r in rows if r["level"] == level]
        for subset, keep in (("all", None), ("TZ subset", TZ_SUBSET)):
            part = [r for r in sel if keep is None or r["case"] in keep]
            if not part:
                continue
            mae, wrong = summary([(r["value"], r["reference"]) for r in part])
            secs = [s for r in part for s in r.get("seconds", [])]
            t = f"{sum(secs) / len(secs):9.1f}" if secs else f"{'-':>9s}"
            print(f"{level:28s} {subset:10s} {len(part):3d} {mae:10.2f} {wrong:11d} {t}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
