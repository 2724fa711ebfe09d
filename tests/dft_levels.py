"""Axial/equatorial equilibria at DFT levels against experiment (shared by the accuracy test and the measurement).

Each case (``tests/data/dft_check_set.csv``) is one six-membered ring with two chair
families: all-equatorial and the other chair. The lowest GFN2-xTB (gas) minimum of each
family is taken, a DFT single point (C-PCM solvent where the case has one) is run at both
geometries, and ΔG = ΔE(DFT) + ΔG_RRHO(GFN2-xTB) (or ΔE alone where the reference is an
energy) is compared with the reference value. A-value references are read by key from
``forcefields/data/increments.csv``, the others from the check-set file itself.
"""

from __future__ import annotations

import csv
import functools
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chairbuild.constants import KCAL_TO_KJ, rt_kj

DATA = Path(__file__).parent / "data" / "dft_check_set.csv"

#: Candidate levels measured: label -> DFTSettings keyword arguments.
CANDIDATES = {
    "B3LYP-D3(BJ)/def2-SVP": dict(functional="b3lyp", basis="def2-svp"),
    "r2SCAN-D3(BJ)/def2-SVP": dict(functional="r2scan", basis="def2-svp"),
    "B3LYP-D3(BJ)/def2-TZVP": dict(functional="b3lyp", basis="def2-tzvp"),
}
#: Cases of the triple-zeta subset (cost: about 5x a def2-SVP single point).
TZ_SUBSET = ("CH3", "piperidine N-H", "4-methyl-1,3-dioxane", "trans-1,2-difluorocyclohexane THF")


@dataclass(frozen=True)
class Case:
    key: str
    smiles: str
    reference_kj: float
    temperature: float
    compare: str
    dft_solvent: str | None
    source: str
    flag: str


def load_cases() -> list[Case]:
    from chairbuild.forcefields.additive import load_increments

    increments = {row.key: row for row in load_increments().rows}
    with DATA.open() as fh:
        rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
    cases = []
    for row in rows:
        t = float(row["temperature_K"])
        kind = row["kind"]
        source, flag = row["source"], row["flag"]
        if kind == "A-value":
            ref = increments[row["key"]]
            value = float(ref.value_kcal) * KCAL_TO_KJ
            source, flag = ref.source, ref.flag.value
        elif kind == "dG_kcal":
            value = float(row["value"]) * KCAL_TO_KJ
        elif kind == "dE_eq_minus_ax_kcal":
            value = -float(row["value"]) * KCAL_TO_KJ
        elif kind == "K_ee_aa":
            value = rt_kj(t) * np.log(float(row["value"]))
        elif kind == "percent_eq":
            p = float(row["value"]) / 100.0
            value = rt_kj(t) * np.log(p / (1.0 - p))
        else:
            raise ValueError(f"unknown kind {kind!r} in {DATA.name}")
        cases.append(
            Case(row["key"], row["smiles"], float(value), t, row["compare"], row["dft_solvent"] or None, source, flag)
        )
    return cases


@functools.lru_cache(maxsize=None)
def family_minima(smiles: str, temperature: float):
    """(mol, [(coords, G_RRHO correction) for all-equatorial, axial]) at GFN2-xTB in the gas phase."""
    from rdkit import Chem

    from chairbuild.pipeline import analyze

    ens = analyze(smiles, method="gfn2", free_energy=True, temperature=temperature, threads=1)
    chairs = [f for f in ens.families if f.ring_index == 0 and ":chair[" in f.key]
    eq = [f for f in chairs if f.key.endswith("[all-eq]")]
    ax = [f for f in chairs if not f.key.endswith("[all-eq]")]
    if len(eq) != 1 or len(ax) != 1:
        raise ValueError(f"{smiles}: expected one all-equatorial and one other chair family, got {[f.key for f in chairs]}")
    by_id = {c.id: c for c in ens.conformers}
    out = []
    for fam in (eq[0], ax[0]):
        rec = min((by_id[m] for m in fam.members), key=lambda r: r.relative_energy)
        out.append((np.array(rec.coords), float(rec.thermo["free_energy"] - rec.thermo["energy"])))
    return Chem.MolFromMolBlock(ens.mol_block, removeHs=False), out


def compute(case: Case, level: str, cache=None, threads: int = 1) -> dict:
    """ΔG or ΔE (axial − equatorial, kJ/mol) at ``level`` for ``case``, with seconds and SCF cycles per single point."""
    from chairbuild.forcefields.dft import DFTModel, DFTSettings
    from chairbuild.levels.cache import result_key

    mol, minima = family_minima(case.smiles, case.temperature)
    settings = DFTSettings(solvent=case.dft_solvent, **CANDIDATES[level])
    model = DFTModel(mol, settings, threads=threads, label=case.key)
    energies, seconds, cycles = [], [], []
    for coords, _ in minima:
        key = result_key(model.name, "energy", model.symbols, coords, model.charge, model.multiplicity)
        hit = cache.get(key) if cache is not None else None
        if hit is None:
            t0 = time.perf_counter()
            e = model.energy(coords)
            hit = {"energy": e, "seconds": time.perf_counter() - t0, "cycles": model.last_scf.cycles}
            if cache is not None:
                cache.put(key, hit)
        energies.append(hit["energy"])
        seconds.append(hit["seconds"])
        cycles.append(hit["cycles"])
    delta = energies[1] - energies[0]
    if case.compare == "G":
        delta += minima[1][1] - minima[0][1]
    return {"value": delta, "seconds": seconds, "cycles": cycles, "nbf": model.n_basis_functions}


def gfn2_value(case: Case) -> float:
    """The same quantity at GFN2-xTB (gas) itself, for comparison."""
    from chairbuild.forcefields.xtb import XTBModel

    mol, minima = family_minima(case.smiles, case.temperature)
    model = XTBModel(mol, threads=1)
    e = [model.energy(c) for c, _ in minima]
    delta = e[1] - e[0]
    if case.compare == "G":
        delta += minima[1][1] - minima[0][1]
    return delta


def summary(pairs: list[tuple[float, float]], sign_threshold: float = 2.0) -> tuple[float, int]:
    """MAE (kJ/mol) and the number of wrong signs where |reference| > ``sign_threshold``."""
    errors = [abs(c - r) for c, r in pairs]
    wrong = sum(1 for c, r in pairs if abs(r) > sign_threshold and np.sign(c) != np.sign(r))
    return float(np.mean(errors)), wrong
