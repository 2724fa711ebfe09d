"""Vicinal 3J(H,H): the HLA equation, ensemble averages, the population fit, outputs.

Check values: ``tests/data/couplings_measured.csv`` (source and P/S/M flag per value) and
the published equations in ``chairbuild/data/karplus_parameters.csv``.
"""

from __future__ import annotations

import csv
import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from rdkit import Chem

from helpers import assert_close

import chairbuild
from chairbuild.couplings.ensemble import compute_couplings, geometry_couplings
from chairbuild.couplings.fit import Measurement, fit_couplings, fit_populations, parse_measurements
from chairbuild.couplings.karplus import garbisch_coupling, hla_coupling, hla_parameters
from chairbuild.couplings.records import CouplingTable
from chairbuild.describe import dihedral
from chairbuild.errors import InputError
from chairbuild.thermo import boltzmann_populations
from tests.benchmarks.bench_coupling_errors import rotamer_states

DATA = Path(__file__).parent / "data" / "couplings_measured.csv"
GLUCOSIDE = "CO[C@@H]1O[C@H](CO)[C@@H](O)[C@H](O)[C@H]1O"  # methyl beta-D-glucopyranoside
FLUORO_ACETATE = "CC(=O)O[C@@H]1CCCC[C@H]1F"  # trans-2-fluorocyclohexyl acetate


def _rows(kind: str) -> list[dict[str, str]]:
    with DATA.open(encoding="utf-8") as fh:
        return [r for r in csv.DictReader(ln for ln in fh if not ln.startswith("#")) if r["kind"] == kind]


# ----------------------------------------------------------------- ideal geometry
def _ideal_chair(smiles: str = "C1CCCCC1", replace_h: tuple[int, str] | None = None):
    """Cyclohexane chair with tetrahedral angles (C–C 1.53, C–H 1.09 Å); optionally one H of C0 (ax/eq) → F."""
    d, dh = 1.53, 1.09
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    r_ring, h = d * np.sqrt(8.0) / 3.0, d / 6.0  # tetrahedral ring angle: R = d √8/3, z = ±d/6
    xyz = np.zeros((mol.GetNumAtoms(), 3))
    ring = list(range(6))
    for k in ring:
        xyz[k] = [r_ring * np.cos(np.pi / 3 * k), r_ring * np.sin(np.pi / 3 * k), h * (-1) ** k]
    for k in ring:
        atom = mol.GetAtomWithIdx(k)
        subs = sorted(n.GetIdx() for n in atom.GetNeighbors() if n.GetIdx() not in ring)
        u = [(xyz[j] - xyz[k]) / d for j in ring if mol.GetBondBetweenAtoms(j, k)]
        u_ax = np.array([0.0, 0.0, np.sign(xyz[k, 2])])
        u_eq = -(u[0] + u[1] + u_ax)
        u_eq /= np.linalg.norm(u_eq)
        if k == 0 and replace_h is not None:
            f = next(s for s in subs if mol.GetAtomWithIdx(s).GetSymbol() == "F")
            other = next(s for s in subs if s != f)
            ax_atom, eq_atom = (f, other) if replace_h[1] == "ax" else (other, f)
            xyz[ax_atom] = xyz[k] + (1.39 if ax_atom == f else dh) * u_ax
            xyz[eq_atom] = xyz[k] + (1.39 if eq_atom == f else dh) * u_eq
            continue
        xyz[subs[0]] = xyz[k] + dh * u_ax
        xyz[subs[1]] = xyz[k] + dh * u_eq
    return mol, xyz


def test_ideal_chair_couplings_match_the_equation_and_the_expected_ranges():
    mol, xyz = _ideal_chair()
    j = geometry_couplings(mol, xyz, [tuple(range(6))])
    aa, ae, ee = j[("H0ax", "H1ax")], j[("H0ax", "H1eq")], j[("H0eq", "H1eq")]
    # the published HLA equation (set C, two ring-carbon substituents) evaluated by hand at the ideal
    # torsions 180°/60°: Δχ(C) = (2.60 − 2.20) − 0.24 (2.60 − 2.20) = 0.304
    p = hla_parameters()["C"].p
    dchi = 0.304
    term = lambda phi, xi: dchi * (p[3] + p[4] * np.cos(np.radians(xi * phi + p[5] * dchi)) ** 2)  # noqa: E731
    base = lambda phi: p[0] * np.cos(np.radians(phi)) ** 2 + p[1] * np.cos(np.radians(phi))  # noqa: E731
    assert_close(aa, base(180) + 2 * term(180, 1), 1e-3, "J(ax,ax), ideal chair vs hand-evaluated HLA equation")
    assert_close(ee, base(60) + 2 * term(60, -1), 1e-3, "J(eq,eq): both ring carbons antiperiplanar to the other proton")
    assert_close(ae, base(60) + term(60, -1) + term(60, 1), 1e-3, "J(ax,eq): one ring carbon antiperiplanar, one gauche")
    # expected ranges for HLA on an ideal chair (issue 12 check values, from memory): 13.1–13.4, ≈3.0, 2.8–2.9
    assert 13.1 <= aa <= 13.5, aa
    assert 2.85 <= ae <= 3.15, ae
    assert 2.8 <= ee <= 3.0, ee
    assert ee < ae  # the orientation rule: two antiperiplanar substituents lower the gauche coupling more


def test_orientation_rule_lowers_a_gauche_coupling_when_fluorine_is_antiperiplanar():
    ring = [tuple(range(6))]
    ax_mol, ax_xyz = _ideal_chair("C1(CCCCC1)F", replace_h=(0, "ax"))  # F (atom 6) on C0
    eq_mol, eq_xyz = _ideal_chair("C1(CCCCC1)F", replace_h=(0, "eq"))
    h0 = next(n.GetIdx() for n in ax_mol.GetAtomWithIdx(0).GetNeighbors() if n.GetSymbol() == "H")
    h1ax = max((n.GetIdx() for n in ax_mol.GetAtomWithIdx(1).GetNeighbors() if n.GetSymbol() == "H"),
               key=lambda i: abs(ax_xyz[i, 2] - ax_xyz[1, 2]))
    assert abs(dihedral(ax_xyz[6], ax_xyz[0], ax_xyz[1], ax_xyz[h1ax])) > 179.0  # axial F antiperiplanar to H1ax
    assert abs(dihedral(ax_xyz[h0], ax_xyz[0], ax_xyz[1], ax_xyz[h1ax])) == pytest.approx(60.0, abs=0.5)
    anti = geometry_couplings(ax_mol, ax_xyz, ring)[("H0", "H1ax")]  # gauche pair, F anti to H1ax
    gauche = geometry_couplings(eq_mol, eq_xyz, ring)[("H0", "H1eq")]  # gauche pair, F gauche to H1eq
    assert anti < gauche - 0.5, (anti, gauche)
    # the same sign rule on the equation alone, both torsion signs: ξ = −sign(φ) for the antiperiplanar substituent
    params = hla_parameters()["D"]
    for phi in (60.0, -60.0):
        assert hla_coupling(phi, [(1.3, -int(np.sign(phi)))], params) < hla_coupling(phi, [(1.3, int(np.sign(phi)))], params)


def test_mirror_image_has_the_same_couplings():
    mol, xyz = _ideal_chair("C1(CCCCC1)F", replace_h=(0, "ax"))
    ring = [tuple(range(6))]
    a = geometry_couplings(mol, xyz, ring)
    b = geometry_couplings(mol, xyz * np.array([1.0, 1.0, -1.0]), ring)
    assert_close([a[k] for k in sorted(a)], [b[k] for k in sorted(a)], 1e-9, "couplings of a geometry and its mirror image")


def test_garbisch_form_at_its_end_points():
    # Garbisch, JACS 1964, 86, 5561: 6.6 cos² + 2.6 sin² (0–90°), 11.6 cos² + 2.6 sin² (90–180°)
    assert_close([garbisch_coupling(0), garbisch_coupling(90), garbisch_coupling(180), garbisch_coupling(-180)],
                 [6.6, 2.6, 11.6, 11.6], 1e-9, "Garbisch allylic coupling at 0/90/180°")


# ----------------------------------------------------------------- fit arithmetic
def test_fit_recovers_known_populations_two_and_three_states():
    rng = np.random.default_rng(0)
    limits2 = np.array([[11.0, 3.2, 13.9], [3.0, 10.8, 2.6]])
    x2 = np.array([0.28, 0.72])
    res = fit_populations(limits2, x2 @ limits2, np.full(3, 0.3))
    assert_close(res["free"], x2, 1e-9, "two-state free fit of exact synthetic couplings")
    assert_close(res["constrained"], x2, 1e-6, "two-state constrained fit of exact synthetic couplings")
    limits3 = rng.uniform(1.0, 12.0, size=(3, 5))
    x3 = np.array([0.5, 0.3, 0.2])
    res3 = fit_populations(limits3, x3 @ limits3, np.full(5, 0.3))
    assert_close(res3["constrained"], x3, 1e-6, "three-state fit of exact synthetic couplings")
    # with noise of 0.3 Hz the fitted populations stay within 4 sigma of the truth
    noisy = x3 @ limits3 + rng.normal(0.0, 0.3, 5)
    res_n = fit_populations(limits3, noisy, np.full(5, 0.3))
    sig = np.sqrt(np.diag(res_n["covariance"]))
    assert np.all(np.abs(res_n["free"] - x3) < 4 * sig)
    # data outside the limits: the free fit goes negative, the constrained one stays on the simplex
    res_c = fit_populations(limits2, np.array([12.0, 2.0, 15.0]), np.full(3, 0.3))
    assert res_c["free"].min() < 0
    assert res_c["constrained"].min() >= 0 and res_c["constrained"].sum() == pytest.approx(1.0)


@pytest.mark.parametrize(
    "text, message",
    [
        ("proton_a,proton_b\nH1,H2\n", "lacks column"),
        ("proton_a,proton_b,J_Hz\nH1,H2,abc\n", "not a number"),
        ("proton_a,proton_b,J_Hz,uncertainty_Hz\nH1,H2,7.0,0\n", "must be > 0"),
        ("proton_a,proton_b,J_Hz\nH1,H2,7.0\nH2,H1,7.1\n", "given twice"),
        ("proton_a,proton_b,J_Hz,colour\nH1,H2,7.0,red\n", "unknown column"),
        ("# only a comment\n", "no measured coupling"),
    ],
)
def test_measurement_file_errors_name_the_problem(text, message):
    with pytest.raises(InputError, match=message):
        parse_measurements(text)


# ----------------------------------------------------------------- methyl beta-D-glucopyranoside
@pytest.fixture(scope="module")
def glucoside():
    return chairbuild.analyze(GLUCOSIDE, name="methyl beta-D-glucopyranoside")


def test_glucoside_ring_couplings_within_1_hz_of_measurement(glucoside):
    rows = _rows("coupling")
    rows = [r for r in rows if r["smiles"] == GLUCOSIDE]
    assert len(rows) == 3
    computed = [glucoside.couplings.find(r["proton_a"], r["proton_b"]).average for r in rows]
    measured = [float(r["value"]) for r in rows]
    assert_close(computed, measured, 1.0, "ring 3J of methyl beta-D-glucopyranoside (MMFF94 ensemble, HLA) vs "
                 "a beta-D-glucopyranosyl unit in CD3OD (PMC5430897 table 5, P)")


def _hydroxymethyl_sets():
    rows = _rows("hydroxymethyl")
    sets: dict[tuple[str, str], dict[str, str]] = {}
    for r in rows:
        sets.setdefault((r["molecule"], r["solvent"]), {})[r["quantity"]] = r["value"]
    return sets


def test_hydroxymethyl_rotamer_populations_reproduce_the_published_hla_populations(glucoside):
    states = rotamer_states(glucoside)
    # limiting couplings of the three rotamers (our HLA on MMFF geometries): gt has H5 antiperiplanar to H6R
    jr = glucoside.couplings.find("H4", "H5R")
    gt_index = [c.id for c in glucoside.conformers].index(states["gt"][0])
    assert jr.values[gt_index] > 9.0
    worst = 0.0
    for (molecule, solvent), q in _hydroxymethyl_sets().items():
        ms = [Measurement("H4", "H5R", float(q["J5_6R"])), Measurement("H4", "H5S", float(q["J5_6S"]))]
        fit = fit_couplings(glucoside, ms, states=states)
        free = dict(zip(fit.states, fit.free_populations))
        gt, gg, tg = (float(v) / 100 for v in q["gt_gg_tg_percent"].split("/"))
        # Bock & Duus 1994 (S): gt/gg/tg from HLA limiting couplings; ours come from our own geometries
        assert_close([free["gt"], free["gg"]], [gt, gg], 0.05, f"free-fit gt, gg of {molecule} ({solvent}) vs Bock & Duus")
        assert_close(free["tg"], tg, 0.08, f"free-fit tg of {molecule} ({solvent}) vs Bock & Duus")
        assert free["tg"] < 0  # slightly negative, as published
        worst = max(worst, abs(free["gt"] - gt), abs(free["gg"] - gg))
        # J back-calculated from the free populations reproduces the measurement (2 couplings, 2 free parameters)
        limits = np.array([c.limits for c in fit.couplings]).T
        back = np.array(fit.free_populations) @ limits
        assert_close(back, [m.value for m in ms], 1e-6, f"J5,6 back-calculated from free populations, {molecule}")
        # constrained fit: on the simplex, tg at the bound, gt still close to the published value
        x = dict(zip(fit.states, fit.populations))
        assert min(x.values()) >= 0 and sum(x.values()) == pytest.approx(1.0)
        assert x["tg"] == 0.0
        assert_close(x["gt"], gt, 0.05, f"constrained gt of {molecule} ({solvent})")
        assert len(fit.couplings) == 2 and all(np.isfinite(c.residual) for c in fit.couplings)
    assert worst < 0.05


def test_unmatched_coupling_is_refused_naming_it(glucoside):
    with pytest.raises(InputError, match="H2–H7"):
        fit_couplings(glucoside, [Measurement("H2", "H7", 3.0, None, 4)])  # H1 and H4 of the sugar: not vicinal
    with pytest.raises(InputError, match="H99"):
        fit_couplings(glucoside, [Measurement("H99", "H2", 3.0)])


def test_labels_pro_chirality_and_methyl_averaging(glucoside):
    t = glucoside.couplings
    assert {"H5R", "H5S"} <= {g.label for g in t.protons}  # diastereotopic CH2OH protons kept apart
    assert t.group(t.group("H5R").atoms[0]).label == "H5R"  # an H atom index resolves to its group
    assert t.group(2).label == "H2"  # a CH carbon resolves to its one proton
    assert not any(g.carbon == 0 for g in t.protons)  # the OCH3 carbon has no vicinal H (O between)
    mol = Chem.AddHs(Chem.MolFromSmiles("CC1CCCCC1"))
    from rdkit.Chem import AllChem

    AllChem.EmbedMolecule(mol, randomSeed=7)
    xyz = mol.GetConformer().GetPositions()
    j = geometry_couplings(mol, xyz, [tuple(range(1, 7))])
    methyl = [k for k in j if "H0" in k]
    assert len(methyl) == 1  # three methyl protons are one averaged site
    assert 6.0 < j[methyl[0]] < 8.5  # an averaged CH3–CH coupling near 7 Hz (common practice, no source)


def test_json_carries_couplings_and_reads_back(glucoside):
    d = json.loads(glucoside.to_json())
    assert d["couplings"]["pairs"] and d["couplings"]["protons"]
    back = CouplingTable.from_dict(d["couplings"])
    assert [p.name for p in back.pairs] == [p.name for p in glucoside.couplings.pairs]
    assert_close([p.average for p in back.pairs], [p.average for p in glucoside.couplings.pairs], 1e-3, "JSON round trip of <J>")


# ----------------------------------------------------------------- a trans-1,2-disubstituted cyclohexane
@pytest.fixture(scope="module")
def fluoro_acetate():
    return chairbuild.analyze(FLUORO_ACETATE, name="trans-2-fluorocyclohexyl acetate")


def test_average_lies_between_family_limits_and_ignores_an_energy_shift(fluoro_acetate):
    ens = fluoro_acetate
    for p in ens.couplings.pairs:
        lo, hi = min(p.family_limits.values()), max(p.family_limits.values())
        assert lo - 1e-9 <= p.average <= hi + 1e-9, p.name
    from rdkit import Chem as _Chem

    mol = _Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    shifted_e = np.array([c.relative_energy for c in ens.conformers]) + 37.5
    pops = boltzmann_populations(shifted_e, ens.temperature, [c.degeneracy for c in ens.conformers])
    records = [replace(c, relative_energy=e, population=float(q)) for c, e, q in zip(ens.conformers, shifted_e, pops)]
    again = compute_couplings(mol, records, ens.families, ens.ring_atoms, ens.temperature)
    assert_close([p.average for p in again.pairs], [p.average for p in ens.couplings.pairs], 1e-9,
                 "<J> after shifting every energy by 37.5 kJ/mol")


def test_sensitivity_matches_a_finite_difference(fluoro_acetate):
    ens = fluoro_acetate
    pair = ens.couplings.find("H4", "H9")  # H1–H2 of the ring: the coupling the published populations rest on
    fam = sorted(ens.families, key=lambda f: -f.population)[1]
    delta = 0.01
    energies = np.array([c.relative_energy + (delta if c.id in fam.members else 0.0) for c in ens.conformers])
    pops = boltzmann_populations(energies, ens.temperature, [c.degeneracy for c in ens.conformers])
    numeric = (pops @ np.array(pair.values) - pair.average) / delta
    assert_close(pair.sensitivity[fam.key], numeric, 2e-3, "d<J>/dG of the second family vs finite difference")


def test_two_state_fit_recovers_published_diaxial_fractions(fluoro_acetate):
    ens = fluoro_acetate
    pairs = [("H4", "H9"), ("H4", "H5ax"), ("H8ax", "H9")]
    diax = next(f for f in ens.families if "ax:" in f.key)
    diequ = next(f for f in ens.families if f.key.endswith("[all-eq]"))
    for row in [r for r in _rows("population") if r["smiles"] == FLUORO_ACETATE]:
        x_aa = float(row["value"])  # Freitas 2005 (P abstract): diaxial fraction derived from 3J
        ms = []
        for a, b in pairs:
            rec = ens.couplings.find(a, b)
            ms.append(Measurement(a, b, x_aa * rec.family_limits[diax.key] + (1 - x_aa) * rec.family_limits[diequ.key], 0.2))
        fit = fit_couplings(ens, ms, model="two-state")
        assert_close(fit.population(diax.key), x_aa, 1e-4, f"two-state fit of couplings made from x(aa) = {x_aa} ({row['solvent']})")
        k = fit.states.index(diax.key)
        assert np.isfinite(fit.uncertainties[k]) and fit.uncertainties[k] < 0.05
        assert all(abs(c.residual) < 1e-3 for c in fit.couplings)


def test_cli_prints_fits_and_refuses_an_unknown_pair(fluoro_acetate, capsys):
    from chairbuild.cli import main

    Path("good.csv").write_text("proton_a,proton_b,J_Hz,uncertainty_Hz\nH4,H9,6.0,0.3\nH4,H5ax,7.5,\n", encoding="utf-8")
    rc = main(["analyze", FLUORO_ACETATE, "--quiet", "--json", "--fit-couplings", "good.csv", "--couplings-csv", "j.csv"])
    out = capsys.readouterr().out
    assert rc == 0
    d = json.loads(out)
    assert d["couplings"]["pairs"] and {f["model"] for f in d["coupling_fits"]} == {"two-state", "multi-state"}
    assert Path("j.csv").read_text(encoding="utf-8").startswith("pair,proton_a,proton_b")
    Path("bad.csv").write_text("proton_a,proton_b,J_Hz\nH4,H9,6.0\nH4,H7eq,3.0\n", encoding="utf-8")
    rc = main(["analyze", FLUORO_ACETATE, "--quiet", "--fit-couplings", "bad.csv", "-o", "kept.json"])
    err = capsys.readouterr().err
    assert rc == 2 and "H4–H7eq" in err and "Traceback" not in err
    assert Path("kept.json").exists()  # the analysis written before the fit refused the pair: nothing lost


def test_text_table_report_and_viewer_label(fluoro_acetate):
    from chairbuild.couplings.tables import couplings_html, couplings_text
    from chairbuild.viewer import LabelKind, coupling_labels

    name = fluoro_acetate.couplings.find("H4", "H9").name
    text = couplings_text(fluoro_acetate)
    assert name in text and "F1" in text and "<J>" in text
    html = couplings_html(fluoro_acetate)
    assert name in html and "data:image/png;base64" in html
    (label,) = coupling_labels(fluoro_acetate, 0, [("H4", "H9")])
    rec = fluoro_acetate.couplings.find("H4", "H9")
    assert label.kind is LabelKind.COUPLING and f"{rec.values[0]:.1f} Hz" in label.text
    xyz = fluoro_acetate.conformers[0].coords
    assert_close(label.xyz, 0.5 * (xyz[rec.hydrogens[0][0]] + xyz[rec.hydrogens[1][0]]), 1e-9, "label at the H–H midpoint")
