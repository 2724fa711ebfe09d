"""Accuracy guards of the DFT levels against experiment (slow: ``make test-all`` only).

Check set: ``tests/data/dft_check_set.csv``, 15 conformational equilibria (five A-values read by key
from ``forcefields/data/increments.csv``, tetrahydropyran, 1,3-dioxane and piperidine substituents,
2-halocyclohexanones in the vapour and in chloroform, trans-1,2-difluorocyclohexane in three
solvents), each with its source and flag in those files. Each value is computed as in
``tests/dft_levels.py`` (shared with ``tests/benchmarks/measure_dft_levels.py``): a single point at
the level (C-PCM where the case has a solvent) at the lowest GFN2-xTB minimum of each chair family,
ΔG = ΔE(DFT) + ΔG_RRHO(GFN2-xTB) (ΔE alone where the reference is an energy).

Two levels are guarded: the default, B3LYP-D3(BJ)/def2-SVP, and the most accurate one measured,
B3LYP-D3(BJ)/def2-TZVP (``--basis def2-tzvp``).

**The issue's target is not met.** The target is an MAE of at most 1.5 kJ/mol with no wrong sign
where |ΔG| > 2 kJ/mol. Measured on 2026-12-02 (raw rows in ``tests/benchmarks/results/``):

* B3LYP-D3(BJ)/def2-SVP (``dft_levels_2026-12-02.jsonl``): MAE 2.42 kJ/mol, 0.92 over the target,
  and one wrong sign (trans-1,2-difluorocyclohexane in methylcyclohexane, computed −0.90 against
  +3.67 kJ/mol);
* B3LYP-D3(BJ)/def2-TZVP (``dft_tzvp_all_2026-12-02.jsonl``): MAE 1.55 kJ/mol, 0.05 over the
  target, no wrong sign (largest errors: 2-fluorocyclohexanone in chloroform +3.8, piperidine N–H
  +2.9 kJ/mol).

These guards therefore only keep each level from getting worse: each sits at its measured MAE plus
:data:`MAE_MARGIN_KJ` and at its measured number of wrong signs.

Margin: a run is deterministic up to the SCF threshold (1e-9 hartree), but the values move when the
GFN2-xTB minima or the SCF start change. Re-running two cases on 2026-12-02 after the GFN2-xTB
determinism changes and the new warm-start rule gave 12.297 against the recorded 12.227 kJ/mol
(4-methyl-1,3-dioxane, +0.07) and 4.377 against 4.336 kJ/mol (piperidine N-H, +0.04) at
def2-SVP; the two-case run took 9 minutes on the loaded 2-core machine. 0.3 kJ/mol, about four
times the larger shift, leaves room for such changes while catching a real loss of accuracy. The
whole set takes about an hour on two cores at def2-SVP and about an hour and a half at def2-TZVP.
"""

from __future__ import annotations

import pytest

from tests.dft_levels import load_cases, summary

#: The default level's label in ``tests/dft_levels.CANDIDATES``.
DEFAULT_LEVEL = "B3LYP-D3(BJ)/def2-SVP"
#: Measured MAE (kJ/mol) and wrong signs (|ΔG| > 2 kJ/mol) of each guarded level, 2026-12-02.
MEASURED = {
    DEFAULT_LEVEL: (2.42, 1),
    "B3LYP-D3(BJ)/def2-TZVP": (1.55, 0),
}
#: Margin over the run-to-run spread (see the module text).
MAE_MARGIN_KJ = 0.3
#: The issue's target, not met at either level (see the module text).
TARGET_MAE_KJ = 1.5


def check_cases(cases, level: str = DEFAULT_LEVEL) -> tuple[float, int, dict[str, float]]:
    """MAE, wrong signs and the computed value (kJ/mol) of each case at ``level``."""
    from tests.dft_levels import compute

    values = {case.key: compute(case, level)["value"] for case in cases}
    mae, wrong = summary([(values[case.key], case.reference_kj) for case in cases])
    return mae, wrong, values


def test_default_level_is_in_the_project():
    from chairbuild.levels.chain import DEFAULT_DFT_BASIS, DEFAULT_DFT_FUNCTIONAL
    from tests.dft_levels import CANDIDATES

    assert CANDIDATES[DEFAULT_LEVEL] == {"functional": DEFAULT_DFT_FUNCTIONAL, "basis": DEFAULT_DFT_BASIS}
    assert set(MEASURED) <= set(CANDIDATES)
    assert len(load_cases()) == 15


@pytest.mark.slow
@pytest.mark.parametrize("level", list(MEASURED))
def test_level_accuracy_guard(level):
    measured_mae, measured_wrong = MEASURED[level]
    cases = load_cases()
    mae, wrong, values = check_cases(cases, level)
    for case in cases:
        print(f"{case.key}: calc {values[case.key]:.2f} ref {case.reference_kj:.2f} kJ/mol")
    print(f"{level}: MAE {mae:.2f} kJ/mol (target {TARGET_MAE_KJ}, not met), wrong signs {wrong}")
    assert mae <= measured_mae + MAE_MARGIN_KJ, f"MAE {mae:.2f} kJ/mol above the guard {measured_mae + MAE_MARGIN_KJ}"
    assert wrong <= measured_wrong, f"{wrong} wrong signs, measured {measured_wrong}"
