"""Axial/equatorial free-energy differences of monosubstituted cyclohexanes against experimental A-values.

Shared by the A-value test and the benchmark. Reference values (and their conditions,
sources and flags) come from the project's increments table,
``forcefields/data/increments.csv``; the molecules from ``tests/data/a_value_set.csv``.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chairbuild.constants import KCAL_TO_KJ, rt_kj

DATA = Path(__file__).parent / "data" / "a_value_set.csv"

#: Levels compared: name -> analyze() options (solvent added per molecule for GFN2 levels).
LEVELS = {
    "MMFF94 E": dict(),
    "MMFF94 G": dict(free_energy=True),
    "GFN2//MMFF94 E (ALPB)": dict(rerank="gfn2"),
    "GFN2//MMFF94 E + G(MMFF) (ALPB)": dict(rerank="gfn2", free_energy=True),
    "GFN2 E (ALPB)": dict(method="gfn2"),
    "GFN2 G (ALPB)": dict(method="gfn2", free_energy=True),
}


@dataclass
class AValueCase:
    key: str
    smiles: str
    solvent: str
    reference_kj: float
    source: str
    flag: str


def load_cases() -> list[AValueCase]:
    from chairbuild.forcefields.additive import load_increments

    table = {row.key: row for row in load_increments().rows}
    cases = []
    with DATA.open() as fh:
        rows = [line for line in fh if not line.startswith("#")]
    for row in csv.DictReader(rows):
        ref = table[row["key"]]
        cases.append(
            AValueCase(
                key=row["key"],
                smiles=row["smiles"],
                solvent=row["solvent"],
                reference_kj=float(ref.value_kcal) * KCAL_TO_KJ,
                source=ref.source,
                flag=ref.flag.value,
            )
        )
    return cases


def axial_minus_equatorial(ensemble) -> float:
    """ΔG(axial − equatorial) in kJ/mol from the chair-family populations of ring 0."""
    p_eq = p_ax = 0.0
    for fam in ensemble.families:
        if fam.ring_index != 0 or ":chair[" not in fam.key:
            continue
        if fam.key.endswith("[all-eq]"):
            p_eq += fam.population
        else:
            p_ax += fam.population
    return float(rt_kj(ensemble.temperature) * np.log(p_eq / p_ax))


def compute(case: AValueCase, level: str, threads: int | None = None) -> float:
    from chairbuild.pipeline import analyze

    options = dict(LEVELS[level])
    if "method" in options or "rerank" in options:
        options["solvent"] = case.solvent
    ens = analyze(case.smiles, threads=threads, **options)
    return axial_minus_equatorial(ens)
