"""Benchmark: errors in Hz of chairbuild's vicinal couplings against published values.

Every published value comes from ``tests/data/couplings_measured.csv`` (source and P/S/M
flag per row); each molecule is analysed at the default level (MMFF94 ensemble of the
isolated molecule, 298.15 K, one thread) and its couplings come from the HLA equation as
the pipeline computes them. Four checks, each printed as a table with its mean absolute
error (MAE):

1. **Ring couplings**: population-weighted ⟨J⟩ of the ring protons of methyl
   β-D-glucopyranoside and of the two D-glucopyranose anomers against measured couplings;
   error = computed − measured.
2. **Hydroxymethyl group**: (a) predicted ⟨J5,6R⟩ and ⟨J5,6S⟩ against Bock & Duus for every
   compound of the file with a SMILES; (b) the populations of the gt/gg/tg rotamers fitted
   to their couplings, with the limiting couplings of our own methyl β-D-glucopyranoside
   rotamers (as ``tests/test_couplings.py`` does), against the populations the authors
   derived with HLA limiting couplings, in percentage points; and the residuals (Hz) of
   the constrained fit (populations kept in [0, 1]; the free fit reproduces two couplings
   with two free parameters exactly).
3. **trans-1,2-Disubstituted cyclohexanes**: the references give the diaxial fraction x(aa)
   the authors derived from 3J(H1,H2), not the couplings themselves. We compare our x(aa)
   with the vapour value (the force field describes the isolated molecule) and express the
   difference in Hz on our own limiting couplings: ⟨J1,2⟩ − [x_pub L_aa + (1 − x_pub) L_ee]
   = (x_model − x_pub)(L_aa − L_ee). For trans-1,2-dichlorocyclohexane the published
   quantity is E(ee) − E(aa); it is turned into x(aa) = 1/(1 + exp(−ΔE/RT)) (an energy
   used as a free energy: said in the output).
4. **Cyclohexane** J(aa), J(ae), J(eq,eq) at the chair minimum (reference flagged M,
   comparison only).

Run: ``python tests/benchmarks/bench_coupling_errors.py [--save results.json]`` (about a
minute on one core; glucose and the glucosides take most of it).
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys
import time
from pathlib import Path

import numpy as np

DATA = Path(__file__).resolve().parents[1] / "data" / "couplings_measured.csv"
GLUCOSIDE = "CO[C@@H]1O[C@H](CO)[C@@H](O)[C@H](O)[C@H]1O"  # methyl beta-D-glucopyranoside


def load_rows(path: Path = DATA) -> list[dict[str, str]]:
    """Rows of the published-values file (``#`` lines are comments)."""
    with path.open(encoding="utf-8") as fh:
        return list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))


class Analyses:
    """One MMFF94 analysis per SMILES, made on first use."""

    def __init__(self) -> None:
        self._cache: dict[str, object] = {}
        self.seconds: dict[str, float] = {}

    def __call__(self, smiles: str, name: str):
        if smiles not in self._cache:
            from chairbuild.pipeline import analyze

            t0 = time.perf_counter()
            self._cache[smiles] = analyze(smiles, name=name, threads=1)
            self.seconds[name] = time.perf_counter() - t0
        return self._cache[smiles]


def _mae(values: list[float]) -> float:
    finite = [abs(v) for v in values if math.isfinite(v)]
    return float(np.mean(finite)) if finite else float("nan")


def measured_couplings(rows: list[dict[str, str]], analyses: Analyses, kind: str) -> list[dict]:
    """Checks 1 and 2a: ⟨J⟩ against the measured values of the rows of ``kind``.

    ``kind`` is ``"coupling"`` (ring couplings) or ``"hydroxymethyl"`` (predicted ⟨J5,6R⟩, ⟨J5,6S⟩).
    """
    out = []
    for r in rows:
        if r["kind"] != kind or not r["smiles"] or not r["proton_a"]:
            continue
        ens = analyses(r["smiles"], r["molecule"])
        rec = ens.couplings.find(r["proton_a"], r["proton_b"])
        out.append({
            "molecule": r["molecule"], "solvent": r["solvent"], "quantity": r["quantity"],
            "pair": rec.name, "measured_Hz": float(r["value"]), "computed_Hz": round(rec.average, 3),
            "error_Hz": round(rec.average - float(r["value"]), 3), "source": f"{r['source']} [{r['flag']}]",
        })
    return out


def rotamer_states(ens) -> dict[str, list[int]]:
    """Lowest conformer of each hydroxymethyl rotamer of methyl β-D-glucopyranoside (O6 vs O5 and C4)."""
    from chairbuild.describe import dihedral

    groups: dict[str, list] = {"gt": [], "gg": [], "tg": []}
    for c in ens.conformers:
        x = c.coords
        o5 = dihedral(x[3], x[4], x[5], x[6])  # O5–C5–C6–O6 (atoms of GLUCOSIDE)
        c4 = dihedral(x[7], x[4], x[5], x[6])  # C4–C5–C6–O6
        key = "tg" if abs(o5) > 120 else ("gt" if abs(c4) > 120 else "gg")
        groups[key].append(c)
    return {k: [min(v, key=lambda c: c.relative_energy).id] for k, v in groups.items() if v}


def hydroxymethyl_fits(rows: list[dict[str, str]], analyses: Analyses) -> list[dict]:
    """Check 2b: gt/gg/tg populations fitted to each published J5,6R/J5,6S pair."""
    from chairbuild.couplings.fit import Measurement, fit_couplings

    ens = analyses(GLUCOSIDE, "methyl beta-D-glucopyranoside")
    states = rotamer_states(ens)
    sets: dict[tuple[str, str], dict[str, str]] = {}
    for r in rows:
        if r["kind"] == "hydroxymethyl":
            sets.setdefault((r["molecule"], r["solvent"]), {})[r["quantity"]] = r["value"]
            sets[(r["molecule"], r["solvent"])]["source"] = f"{r['source']} [{r['flag']}]"
    out = []
    for (molecule, solvent), q in sets.items():
        ms = [Measurement("H4", "H5R", float(q["J5_6R"])), Measurement("H4", "H5S", float(q["J5_6S"]))]
        fit = fit_couplings(ens, ms, states=states)
        free = dict(zip(fit.states, fit.free_populations))
        fixed = dict(zip(fit.states, fit.populations))
        published = dict(zip(("gt", "gg", "tg"), (float(v) / 100 for v in q["gt_gg_tg_percent"].split("/"))))
        out.append({
            "molecule": molecule, "solvent": solvent,
            "published_percent": {k: round(100 * v, 1) for k, v in published.items()},
            "free_fit_percent": {k: round(100 * free[k], 1) for k in published},
            "constrained_fit_percent": {k: round(100 * fixed[k], 1) for k in published},
            "free_minus_published_points": {k: round(100 * (free[k] - published[k]), 1) for k in published},
            "constrained_residuals_Hz": [round(c.residual, 3) for c in fit.couplings],
            "source": q["source"],
        })
    return out


def trans_diaxial(rows: list[dict[str, str]], analyses: Analyses) -> list[dict]:
    """Check 3: diaxial fractions of trans-1,2-disubstituted cyclohexanes, and their size in Hz."""
    from chairbuild.constants import KCAL_TO_KJ, rt_kj

    out = []
    for r in rows:
        if r["kind"] != "population" or r["solvent"] != "vapour":
            continue
        ens = analyses(r["smiles"], r["molecule"])
        chairs = [f for f in ens.families if ":chair[" in f.key]
        ee = next(f for f in chairs if f.key.endswith("[all-eq]"))
        aa = next(f for f in chairs if f is not ee)
        table = ens.couplings
        pair = next(p for p in table.pairs
                    if p.ring_index is not None and all(table.group(x).kind == "CH" for x in p.protons))
        if r["quantity"] == "x_aa":
            x_pub, how = float(r["value"]), "x(aa) as published"
        else:
            de = float(r["value"]) * (KCAL_TO_KJ if r["unit"] == "kcal/mol" else 1.0)
            x_pub, how = 1.0 / (1.0 + math.exp(-de / rt_kj(ens.temperature))), "x(aa) from E(ee) - E(aa), energy taken as free energy"
        x_model = aa.population / (aa.population + ee.population)
        l_aa, l_ee = pair.family_limits[aa.key], pair.family_limits[ee.key]
        implied = x_pub * l_aa + (1 - x_pub) * l_ee
        out.append({
            "molecule": r["molecule"], "pair": pair.name, "x_aa_published": round(x_pub, 3), "x_aa_model": round(x_model, 3),
            "limits_Hz": {"aa": round(l_aa, 3), "ee": round(l_ee, 3)}, "computed_Hz": round(pair.average, 3),
            "implied_by_published_Hz": round(implied, 3), "error_Hz": round(pair.average - implied, 3),
            "note": how, "source": f"{r['source']} [{r['flag']}]",
        })
    return out


def cyclohexane(rows: list[dict[str, str]], analyses: Analyses) -> list[dict]:
    """Check 4: J(aa), J(ae), J(ee) of the cyclohexane chair minimum."""
    ens = analyses("C1CCCCC1", "cyclohexane")
    kinds: dict[str, list[float]] = {"J_ax_ax": [], "J_ax_eq": [], "J_eq_eq": []}
    for p in ens.couplings.pairs:
        tags = sorted(lab[-2:] for lab in p.protons)
        kinds["J_" + "_".join(tags)].append(p.values[0])
    out = []
    for r in rows:
        if r["kind"] == "coupling" and r["molecule"] == "cyclohexane" and r["quantity"] in kinds:
            value = float(np.mean(kinds[r["quantity"]]))
            out.append({"quantity": r["quantity"], "measured_Hz": float(r["value"]), "computed_Hz": round(value, 3),
                        "error_Hz": round(value - float(r["value"]), 3), "source": f"{r['source']} [{r['flag']}]"})
    return out


def _short(source: str, width: int = 60) -> str:
    """A citation cut to ``width`` characters, keeping its trailing [flag]."""
    return source if len(source) <= width else source[: width - 5] + "… " + source[-3:]


def _print_j_table(title: str, items: list[dict]) -> None:
    print(f"\n{title}")
    print(f"  {'molecule':50s} {'solvent':7s} {'quantity':9s} {'pair':9s} {'measured':>8s} {'computed':>8s} {'error':>7s}  source")
    for it in items:
        print(f"  {it['molecule']:50s} {it['solvent']:7s} {it['quantity']:9s} {it['pair']:9s} {it['measured_Hz']:8.2f} "
              f"{it['computed_Hz']:8.2f} {it['error_Hz']:+7.2f}  {_short(it['source'])}")
    print(f"  MAE {_mae([it['error_Hz'] for it in items]):.2f} Hz over {len(items)} coupling(s); "
          f"largest |error| {max(abs(it['error_Hz']) for it in items):.2f} Hz")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--save", type=Path, help="write every check's rows as JSON")
    args = parser.parse_args(argv)
    rows = load_rows()
    analyses = Analyses()
    t0 = time.perf_counter()
    results = {
        "ring_couplings": measured_couplings(rows, analyses, "coupling"),
        "hydroxymethyl_predictions": measured_couplings(rows, analyses, "hydroxymethyl"),
        "hydroxymethyl_fits": hydroxymethyl_fits(rows, analyses),
        "trans_diaxial": trans_diaxial(rows, analyses),
        "cyclohexane": cyclohexane(rows, analyses),
    }
    _print_j_table("1. ring couplings <J> (MMFF94 ensemble, HLA) against measurement", results["ring_couplings"])
    _print_j_table("2a. hydroxymethyl J5,6R / J5,6S predicted from the ensemble", results["hydroxymethyl_predictions"])
    print("\n2b. gt/gg/tg fitted to J5,6R/J5,6S with methyl beta-D-glucopyranoside rotamer limits vs the published HLA populations")
    print(f"  {'molecule (solvent)':44s} {'published %':>17s} {'free fit %':>18s} {'free - pub.':>17s} {'constrained resid. Hz':>22s}")
    points: list[float] = []
    resid: list[float] = []
    for it in results["hydroxymethyl_fits"]:
        def triple(d: dict) -> str:
            return "/".join(f"{d[k]:.0f}" for k in ("gt", "gg", "tg"))
        diff = it["free_minus_published_points"]
        points += list(diff.values())
        resid += it["constrained_residuals_Hz"]
        print(f"  {it['molecule'] + ' (' + it['solvent'] + ')':44s} {triple(it['published_percent']):>17s} "
              f"{triple(it['free_fit_percent']):>18s} {'/'.join(f'{v:+.1f}' for v in diff.values()):>17s} "
              f"{' '.join(f'{v:+.2f}' for v in it['constrained_residuals_Hz']):>22s}")
    print(f"  populations: mean |free fit - published| {_mae(points):.1f} points, largest {max(abs(p) for p in points):.1f}; "
          f"constrained-fit residuals: MAE {_mae(resid):.2f} Hz, largest {max(abs(v) for v in resid):.2f} Hz")
    print("\n3. trans-1,2-disubstituted cyclohexanes, vapour: x(aa) and <J1,2> against the J the published x(aa) implies")
    for it in results["trans_diaxial"]:
        print(f"  {it['molecule']:34s} {it['pair']:8s} x(aa) published {it['x_aa_published']:.2f}, model {it['x_aa_model']:.2f}; "
              f"<J> {it['computed_Hz']:.2f} vs {it['implied_by_published_Hz']:.2f} Hz (limits aa {it['limits_Hz']['aa']:.2f}, "
              f"ee {it['limits_Hz']['ee']:.2f}): {it['error_Hz']:+.2f} Hz  [{it['note']}; {_short(it['source'])}]")
    print(f"  MAE {_mae([it['error_Hz'] for it in results['trans_diaxial']]):.2f} Hz")
    print("\n4. cyclohexane chair (reference flagged M, comparison only)")
    for it in results["cyclohexane"]:
        print(f"  {it['quantity']:8s} measured {it['measured_Hz']:.2f}, computed {it['computed_Hz']:.2f}, error {it['error_Hz']:+.2f} Hz")
    print("\nanalysis time: " + ", ".join(f"{k} {v:.1f} s" for k, v in analyses.seconds.items())
          + f"; total {time.perf_counter() - t0:.0f} s")
    if args.save:
        args.save.write_text(json.dumps(results, indent=1), encoding="utf-8")
        print(f"wrote {args.save}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
