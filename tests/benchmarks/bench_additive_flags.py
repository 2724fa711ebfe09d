"""Benchmark: how many ring families the additive-versus-force-field check flags on a drug-like set.

Analyses every molecule of ``tests/data/druglike_set.csv`` at the default level (MMFF94, one
thread, no progress bars) and writes one row per chair family (twist-boats have no additive
estimate) with its additive status, value, force-field value, terms and notes. The counts:

* ``chair_families``: every chair family of every ring;
* ``compared``: families with an additive number set beside the force field;
* ``flagged``: families whose additive estimate disagrees with the force field
  (:attr:`chairbuild.result.FamilyRecord.disagreement`);
* ``flagged_partial``: flagged families whose estimate lacked a term;
* ``flagged_no_increments``: flagged families of a ring where no chair family has any term;
* ``compared_partial``: families with a number although their estimate lacked a term;
* ``increment_unknown`` and ``no_increments_known``: families shown without a number
  because a term is missing, or because no chair family of the ring has any term.

The rows are read with ``getattr`` so that the same script runs on the code before the
ring-specific increments (issue 11), where every chair family got a number, partial or not,
and the flag threshold was 2.0 kJ/mol without the estimate's uncertainty: run it with that
checkout first on ``PYTHONPATH`` and ``--save`` both runs (see the README, "Checks and figures").

Every flagged family is printed with its additive and force-field values, the terms of its
estimate and its notes, so that each flag can be read. ``--save FILE`` writes the per-family
rows as JSON (the benchmark's record of one run; compare two saved runs with ``--compare``,
which also lists the families flagged in either run).
Run: ``make bench`` or ``python tests/benchmarks/bench_additive_flags.py [--limit N] [--save F]``.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys
import time
from pathlib import Path

DATA = Path(__file__).resolve().parents[1] / "data" / "druglike_set.csv"

#: Monosubstituted rings of our own choosing whose force-field axial-minus-equatorial ΔG
#: (``--model-a-values``) tells whether a flag on a polysubstituted ring comes from the
#: force field's own A-values (then the model's values add up) or from a real failure of
#: additivity. No experimental value is attached here; the table's values are printed beside.
MODEL_A_VALUE_RINGS = (
    ("methylcyclohexane", "CC1CCCCC1"),
    ("phenylcyclohexane", "c1ccccc1C1CCCCC1"),
    ("cyclohexanol", "OC1CCCCC1"),
    ("cyclohexylamine", "NC1CCCCC1"),
    ("cyclohexanecarboxylic acid", "OC(=O)C1CCCCC1"),
    ("cyclohexyl acetate", "CC(=O)OC1CCCCC1"),
    ("chlorocyclohexane", "ClC1CCCCC1"),
    ("methoxycyclohexane", "COC1CCCCC1"),
    ("tert-butylcyclohexane", "CC(C)(C)C1CCCCC1"),
    ("piperidine", "C1CCNCC1"),
)


def load_set(path: Path = DATA) -> list[tuple[str, str]]:
    """(name, SMILES) rows of the drug-like set (lines starting with # are comments)."""
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(line for line in handle if not line.startswith("#")))
    return [(r["name"], r["smiles"]) for r in rows]


def family_rows(name: str, ens) -> list[dict]:
    """One JSON-ready row per chair family (with or without an additive number)."""
    out = []
    for f in ens.families:
        if ":chair[" not in f.key:
            continue
        status = getattr(f, "additive_status", None)
        if status is not None:
            status = status.value
        elif f.additive_energy is not None:  # the code before issue 11: a number for every chair family
            status = "estimated (partial)" if f.additive_notes else "estimated"
        else:
            status = "none"
        out.append(
            {
                "molecule": name,
                "smiles": ens.smiles,
                "ring": f.ring_index,
                "family": f.label,
                "status": status,
                "population": round(f.population, 4),
                "delta_g_kj": None if not math.isfinite(f.delta_g) else round(f.delta_g, 3),
                "additive_kj": None if f.additive_energy is None else round(f.additive_energy, 3),
                "model_kj": None if f.model_energy is None else round(f.model_energy, 3),
                "uncertainty_kj": getattr(f, "additive_uncertainty", None),
                "flagged": bool(f.disagreement),
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
    """The counts of one run (see the module doc)."""
    ring_terms: dict[tuple[str, int], int] = {}
    for r in rows:
        ring_terms[(r["molecule"], r["ring"])] = ring_terms.get((r["molecule"], r["ring"]), 0) + len(r["terms"])
    bare = [ring_terms[(r["molecule"], r["ring"])] == 0 for r in rows]
    compared = [r["additive_kj"] is not None for r in rows]
    return {
        "molecules": len({r["molecule"] for r in rows}),
        "chair_families": len(rows),
        "compared": sum(compared),
        "flagged": sum(r["flagged"] for r in rows),
        "flagged_partial": sum(r["flagged"] and bool(r["notes"]) for r in rows),
        "flagged_no_increments": sum(r["flagged"] and b for r, b in zip(rows, bare)),
        "compared_partial": sum(c and bool(r["notes"]) for r, c in zip(rows, compared)),
        "increment_unknown": sum(r["status"] == "increment unknown" for r in rows),
        "no_increments_known": sum(r["status"] == "no increments known" for r in rows),
    }


def flagged_names(rows: list[dict]) -> list[str]:
    """'molecule ring k: family' of every flagged row."""
    return [f"{r['molecule']} ring {r['ring']}: {r['family']}" for r in rows if r["flagged"]]


def print_flagged(rows: list[dict]) -> None:
    for r in rows:
        if not r["flagged"]:
            continue
        unc = "" if r["uncertainty_kj"] is None else f" +/- {r['uncertainty_kj']:.2f}"
        model = "-" if r["model_kj"] is None else f"{r['model_kj']:+.2f}"
        print(f"\n* {r['molecule']} ring {r['ring']}: {r['family']}")
        print(f"    additive {r['additive_kj']:+.2f}{unc}, force field {model} kJ/mol ({r['status']})")
        for t in r["terms"]:
            extra = "".join(f"; {k} {v}" for k, v in t.items() if k not in ("kind", "value_kj", "source"))
            print(f"    {t['kind']:<28} {t['value_kj']:+7.2f}  [{t['source'][:60]}{extra[:120]}]")
        for n in r["notes"]:
            print(f"    note: {n}")


def model_a_values() -> list[dict]:
    """Force-field and table ΔG(axial − equatorial) of :data:`MODEL_A_VALUE_RINGS` (kJ/mol)."""
    from chairbuild.constants import rt_kj
    from chairbuild.pipeline import analyze

    out = []
    for name, smiles in MODEL_A_VALUE_RINGS:
        ens = analyze(smiles, name=name, threads=1)
        chairs = {f.key: f for f in ens.families if ":chair[" in f.key}
        eq = next(f for k, f in chairs.items() if k.endswith("[all-eq]"))
        ax = next(f for k, f in chairs.items() if not k.endswith("[all-eq]"))
        model = -rt_kj(ens.temperature) * math.log(ax.population / eq.population)
        table = None
        if ax.additive_energy is not None and eq.additive_energy is not None:
            table = ax.additive_energy - eq.additive_energy
        out.append({"molecule": name, "smiles": smiles, "axial": ax.label, "model_kj": round(model, 2),
                     "table_kj": None if table is None else round(table, 2)})
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--limit", type=int, default=0, help="only the first N molecules")
    parser.add_argument("--save", type=Path, help="write the per-family rows to this JSON file")
    parser.add_argument("--compare", type=Path, nargs=2, metavar=("BEFORE", "AFTER"),
                        help="print the counts of two saved runs side by side and exit")
    parser.add_argument("--model-a-values", action="store_true",
                        help="print the force field's own A-values of a few monosubstituted rings and exit")
    args = parser.parse_args(argv)
    if args.model_a_values:
        print(f"{'ring':28s} {'force field':>11s} {'table':>7s}  (dG axial - equatorial, kJ/mol)")
        for r in model_a_values():
            table = "-" if r["table_kj"] is None else f"{r['table_kj']:7.2f}"
            print(f"{r['molecule']:28s} {r['model_kj']:11.2f} {table:>7s}  {r['axial']}")
        return 0
    if args.compare:
        before, after = (json.loads(p.read_text(encoding="utf-8")) for p in args.compare)
        b, a = summarise(before), summarise(after)
        print(f"{'count':28s} {'before':>8s} {'after':>8s}")
        for key in b:
            print(f"{key:28s} {b[key]:8d} {a[key]:8d}")
        fb, fa = flagged_names(before), flagged_names(after)
        print("\nflagged before only:\n  " + "\n  ".join(n for n in fb if n not in fa))
        print("flagged in both:\n  " + "\n  ".join(n for n in fb if n in fa))
        print("flagged after only:\n  " + "\n  ".join(n for n in fa if n not in fb))
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
