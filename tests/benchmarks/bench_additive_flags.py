"""Benchmark: how many ring families the additive-versus-force-field check flags on a drug-like set.

Analyses every molecule of ``tests/data/druglike_set.csv`` at the default level (MMFF94, one
thread, no progress bars) and counts, over all chair families that have an additive estimate:

* ``flagged``: families whose additive estimate disagrees with the force field
  (:attr:`chairbuild.result.FamilyRecord.disagreement`);
* ``no increments``: families whose estimate has no term at all, in any of the ring's chair
  families, so that there is nothing to compare;
* ``partial``: families whose estimate leaves something unscored.

Every flagged family is printed with its additive and force-field values, the terms of its
estimate and its notes, so that each flag can be read. ``--save FILE`` writes the per-family
rows as JSON (the benchmark's record of one run; compare two saved runs with ``--compare``).
Run: ``make bench`` or ``python tests/benchmarks/bench_additive_flags.py [--limit N] [--save F]``.
"""

from __future__ import annotations

import argparse
import csv
import json
import sys
import time
from pathlib import Path

DATA = Path(__file__).resolve().parents[1] / "data" / "druglike_set.csv"


def load_set(path: Path = DATA) -> list[tuple[str, str]]:
    """(name, SMILES) rows of the drug-like set (lines starting with # are comments)."""
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(line for line in handle if not line.startswith("#")))
    return [(r["name"], r["smiles"]) for r in rows]


def family_rows(name: str, ens) -> list[dict]:
    """One JSON-ready row per family with an additive estimate."""
    out = []
    for f in ens.families:
        if f.additive_energy is None:
            continue
        out.append(
            {
                "molecule": name,
                "smiles": ens.smiles,
                "ring": f.ring_index,
                "family": f.label,
                "additive_kj": round(f.additive_energy, 3),
                "model_kj": None if f.model_energy is None else round(f.model_energy, 3),
                "uncertainty_kj": getattr(f, "additive_uncertainty", None),
                "flagged": bool(f.disagreement),
                "no_increments": bool(getattr(f, "no_increments", False)),
                "terms": [
                    {"kind": t.kind, "value_kj": round(t.value, 3), "source": t.source, **_extra(t)}
                    for t in f.additive_terms
                ],
                "notes": list(f.additive_notes),
            }
        )
    return out


def _extra(term) -> dict:
    return {k: getattr(term, k) for k in ("increment", "fallback", "conditions", "uncertainty") if getattr(term, k, None)}


def summarise(rows: list[dict]) -> dict[str, int]:
    """Counts of families, flagged ones, ones with no increments and partial ones."""
    ring_terms: dict[tuple[str, int], int] = {}
    for r in rows:
        ring_terms[(r["molecule"], r["ring"])] = ring_terms.get((r["molecule"], r["ring"]), 0) + len(r["terms"])
    return {
        "molecules": len({r["molecule"] for r in rows}),
        "families": len(rows),
        "flagged": sum(r["flagged"] for r in rows),
        "no_increments": sum(ring_terms[(r["molecule"], r["ring"])] == 0 for r in rows),
        "flagged_with_no_increments": sum(r["flagged"] and ring_terms[(r["molecule"], r["ring"])] == 0 for r in rows),
        "partial": sum(bool(r["notes"]) for r in rows),
    }


def print_flagged(rows: list[dict]) -> None:
    for r in rows:
        if not r["flagged"]:
            continue
        unc = "" if r["uncertainty_kj"] is None else f" +/- {r['uncertainty_kj']:.2f}"
        print(f"\n* {r['molecule']} ring {r['ring']}: {r['family']}")
        print(f"    additive {r['additive_kj']:+.2f}{unc}, force field {r['model_kj']:+.2f} kJ/mol")
        for t in r["terms"]:
            extra = "".join(f"; {k} {v}" for k, v in t.items() if k not in ("kind", "value_kj", "source"))
            print(f"    {t['kind']:<28} {t['value_kj']:+7.2f}  [{t['source'][:60]}{extra[:120]}]")
        for n in r["notes"]:
            print(f"    note: {n}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--limit", type=int, default=0, help="only the first N molecules")
    parser.add_argument("--save", type=Path, help="write the per-family rows to this JSON file")
    parser.add_argument("--compare", type=Path, nargs=2, metavar=("BEFORE", "AFTER"),
                        help="print the counts of two saved runs side by side and exit")
    args = parser.parse_args(argv)
    if args.compare:
        before, after = (json.loads(p.read_text(encoding="utf-8")) for p in args.compare)
        b, a = summarise(before), summarise(after)
        print(f"{'count':28s} {'before':>8s} {'after':>8s}")
        for key in b:
            print(f"{key:28s} {b[key]:8d} {a[key]:8d}")
        return 0
    from chairbuild.pipeline import analyze

    molecules = load_set()
    if args.limit:
        molecules = molecules[: args.limit]
    rows: list[dict] = []
    t0 = time.perf_counter()
    for name, smiles in molecules:
        t = time.perf_counter()
        ens = analyze(smiles, name=name, threads=1)
        new = family_rows(name, ens)
        rows += new
        print(f"{name:42s} {len(ens.conformers):4d} conformers  {sum(r['flagged'] for r in new):2d} flagged"
              f"  {time.perf_counter() - t:6.1f} s", flush=True)
    print(f"\ntotal {time.perf_counter() - t0:.0f} s")
    counts = summarise(rows)
    print("  ".join(f"{k} {v}" for k, v in counts.items()))
    print_flagged(rows)
    if args.save:
        args.save.write_text(json.dumps(rows, indent=1), encoding="utf-8")
        print(f"\nwrote {args.save}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
