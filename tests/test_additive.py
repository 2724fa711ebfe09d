"""Tests of the additive increment estimate (chairbuild.forcefields.additive) and its data table.

Every check value names its source beside it. The increments used in the hand
calculations (kcal/mol, converted with 1 kcal = 4.184 kJ, the thermochemical calorie):

* A(CH3) = 1.74: Booth & Everett, J. Chem. Soc. Perkin Trans. 2 1980, 255 (flag P);
* gauche-butane = 0.87: Eliel, Wilen & Mander, Stereochemistry of Organic Compounds,
  1994 (flag M; the low end of the quoted 0.87-0.9, = A(CH3)/2);
* syn-1,3-diaxial CH3/CH3 = 3.7, replacing one CH3/H syn-axial interaction (A/2) of each
  methyl: Allinger & Miller, J. Am. Chem. Soc. 1961, 83, 2145 (flag M).

Test geometries: RDKit ETKDG conformers (fixed seeds) minimised with MMFF94, picked by
their chairbuild.describe labels.
"""

from __future__ import annotations

import csv
import functools

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from chairbuild.describe import describe_ring, substituent_position
from chairbuild.errors import ForceFieldError, InputError
from chairbuild.input import read_molecules
from chairbuild.rings import analyse_rings
from chairbuild.forcefields.additive import (
    INCREMENTS_PATH,
    AdditiveModel,
    Bound,
    IncrementKind,
    load_increments,
    match_group,
    read_increments,
)
from chairbuild.forcefields.base import EnergyModel

KCAL = 4.184  # kJ per thermochemical kcal (definition of the calorie)
A_CH3 = 1.74  # Booth & Everett 1980, P
GAUCHE = 0.87  # Eliel, Wilen & Mander 1994, M
SYN_ME_ME = 3.7  # Allinger & Miller 1961, M

_TOL = 1e-9


# --------------------------------------------------------------------------- helpers
@functools.lru_cache(maxsize=None)
def _ensemble(smiles: str, seed: int = 0xC4A1, n_confs: int = 40):
    """Molecule, ring analysis and MMFF94-minimised ETKDG conformers (fixed seed)."""
    mol = read_molecules(smiles)[0].mol
    params = AllChem.ETKDGv3()
    params.randomSeed = seed
    ids = list(AllChem.EmbedMultipleConfs(mol, n_confs, params))
    AllChem.MMFFOptimizeMoleculeConfs(mol, maxIters=2000)
    coords = tuple(mol.GetConformer(i).GetPositions() for i in ids)
    return mol, analyse_rings(mol), coords


def _label(mol, ra, xyz) -> tuple:
    """(shape of ring 0, positions of the ring-0 substituents in analysis order)."""
    ring = ra.rings[0].atoms
    shape = describe_ring(xyz, ring).shape
    positions = tuple(
        substituent_position(xyz, ring, s.ring_atom, s.atom, shape)[0].value
        for s in ra.substituents
        if s.ring_index == 0
    )
    return (shape.value, positions)


def _pick(smiles: str, *wanted: tuple) -> tuple:
    """Molecule, ring analysis and one conformer per wanted label."""
    mol, ra, confs = _ensemble(smiles)
    found = {}
    for xyz in confs:
        found.setdefault(_label(mol, ra, xyz), xyz)
    missing = [w for w in wanted if w not in found]
    if missing:
        raise AssertionError(f"{smiles}: no conformer labelled {missing}; found {sorted(found)}")
    return mol, ra, [found[w] for w in wanted]


def _chair(*positions: str) -> tuple:
    return ("chair", tuple(positions))


# ------------------------------------------------------------------------ data table
REQUIRED_GROUPS = [
    "CH3", "C2H5", "CH(CH3)2", "C(CH3)3", "C6H5", "CH=CH2", "C#CH", "C#N", "F", "Cl", "Br", "I",
    "OH", "OCH3", "OC(O)CH3", "NH2", "N(CH3)2", "NO2", "CO2H", "CO2CH3", "CHO", "C(O)CH3",
    "CF3", "SH", "SCH3", "Si(CH3)3",
]


def test_every_row_has_source_and_flag():
    with INCREMENTS_PATH.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) >= len(REQUIRED_GROUPS) + 2
    for row in rows:
        assert None not in row, row
        assert row["source"].strip(), row["key"]
        assert row["flag"] in {"P", "S", "M"}, row["key"]
        assert row["unit"] in {"kcal/mol", "kJ/mol"}, row["key"]
        float(row["value"])
        assert row["range"] == "" or float(row["range"]) >= 0, row["key"]
    a_keys = {r["key"] for r in rows if r["kind"] == "A-value"}
    assert set(REQUIRED_GROUPS) <= a_keys


def test_table_values_as_transcribed():
    table = load_increments()
    # A(CH3) 1.74 kcal/mol at 300 K: Booth & Everett 1980 (P)
    assert table["CH3"].value_kcal == 1.74 and table["CH3"].flag.value == "P"
    assert "Booth & Everett" in table["CH3"].source
    # A(CH(CH3)2) 2.21: Booth & Everett 1980 (P)
    assert table["CH(CH3)2"].value_kcal == 2.21
    # A(OH) 0.7 in dilute CCl4: Abraham et al. 1993 (P)
    assert table["OH"].value_kcal == 0.7 and "Abraham" in table["OH"].source
    # A(Cl) 0.53: Jensen, Bushweller & Beck 1969, via compilations (S)
    assert table["Cl"].value_kcal == 0.53 and table["Cl"].flag.value == "S"
    # A(C(CH3)3) > 4.5 kcal/mol, a lower bound only: compilations (S/M, kept as M)
    assert table["C(CH3)3"].value_kcal == 4.5 and table["C(CH3)3"].bound is Bound.LOWER
    assert table["C(CH3)3"].flag.value == "M"
    # gauche-butane 0.87 (Eliel, Wilen & Mander 1994, M); syn CH3/CH3 3.7 (Allinger & Miller 1961, M)
    assert table["gauche-butane"].value_kcal == GAUCHE and table["gauche-butane"].flag.value == "M"
    assert table["syn-CH3/CH3"].value_kcal == SYN_ME_ME and table["syn-CH3/CH3"].flag.value == "M"
    assert table["syn-CH3/CH3"].kind is IncrementKind.SYN_DIAXIAL
    # kJ conversion with the thermochemical calorie
    assert table["CH3"].value_kj == pytest.approx(1.74 * KCAL, abs=_TOL)


def test_bad_table_is_rejected(tmp_path):
    text = INCREMENTS_PATH.read_text(encoding="utf-8").splitlines()
    header, first = text[0], text[1]
    bad = tmp_path / "bad.csv"
    bad.write_text(header + "\n" + first.replace(",P,", ",X,", 1) + "\n", encoding="utf-8")
    with pytest.raises(ForceFieldError, match="X"):
        read_increments(bad)
    no_source = tmp_path / "nosource.csv"
    no_source.write_text(header + "\nCH3,A-value,alkyl,[CH3],cyclohexane,,1.74,kcal/mol,,=,,,P,\n", encoding="utf-8")
    with pytest.raises(ForceFieldError, match="no source"):
        read_increments(no_source)


# ---------------------------------------------------------------------- group matcher
GROUPS = [
    ("C", "CH3"), ("CC", "C2H5"), ("C(C)C", "CH(CH3)2"), ("C(C)(C)C", "C(CH3)3"),
    ("c1ccccc1", "C6H5"), ("C=C", "CH=CH2"), ("C#C", "C#CH"), ("C#N", "C#N"),
    ("F", "F"), ("Cl", "Cl"), ("Br", "Br"), ("I", "I"),
    ("O", "OH"), ("OC", "OCH3"), ("OC(C)=O", "OC(O)CH3"),
    ("N", "NH2"), ("N(C)C", "N(CH3)2"), ("[N+](=O)[O-]", "NO2"),
    ("C(=O)O", "CO2H"), ("C(=O)[O-]", "CO2-"), ("C(=O)OC", "CO2CH3"), ("C=O", "CHO"),
    ("C(C)=O", "C(O)CH3"), ("C(F)(F)F", "CF3"), ("S", "SH"), ("SC", "SCH3"),
    ("[Si](C)(C)C", "Si(CH3)3"),
    # absent from the table: propyl, ethoxy, NHCH3, CHF2, p-tolyl, CH2OH
    ("CCC", None), ("OCC", None), ("NC", None), ("C(F)F", None), ("c1ccc(C)cc1", None), ("CO", None),
]


@pytest.mark.parametrize("group, key", GROUPS)
def test_match_group(group, key):
    # ring atoms 0-5, the group's first atom is atom 6 (common practice, no source)
    mol = Chem.AddHs(Chem.MolFromSmiles("C1CCCCC1" + group))
    assert match_group(mol, 5, 6) == key


def test_match_group_ring_bonds_and_double_bonds():
    decalin = Chem.AddHs(Chem.MolFromSmiles("C1CCC2CCCCC2C1"))
    assert match_group(decalin, 3, 4) is None  # fusion bond
    ketone = Chem.AddHs(Chem.MolFromSmiles("O=C1CCCCC1"))
    assert match_group(ketone, 1, 0) is None  # C=O is not OH
    with pytest.raises(InputError):
        match_group(ketone, 0, 3)


# ------------------------------------------------------------------- energy checks
def test_methylcyclohexane_axial_minus_equatorial_is_a_ch3():
    mol, ra, (ax, eq) = _pick("CC1CCCCC1", _chair("axial"), _chair("equatorial"))
    model = AdditiveModel(mol, ra)
    assert isinstance(model, EnergyModel) and model.name == "additive increments"
    assert model.terms(eq) == [] and model.energy(eq) == 0.0
    terms = model.terms(ax)
    assert [t.kind for t in terms] == ["A-value"] and terms[0].atoms == (1, 0)
    assert "Booth & Everett" in terms[0].source and terms[0].source.endswith("[P]")
    # A(CH3) = 1.74 kcal/mol (Booth & Everett 1980) = 7.28016 kJ/mol
    assert model.energy(ax) - model.energy(eq) == pytest.approx(7.28016, abs=_TOL)
    assert model.unscored(ax) == []


def test_14_dimethyl_cis_versus_trans():
    cis_mol, cis_ra, (cis_ae,) = _pick("C[C@H]1CC[C@@H](C)CC1", _chair("axial", "equatorial"))
    trans_mol, trans_ra, (ee, aa) = _pick(
        "C[C@H]1CC[C@H](C)CC1", _chair("equatorial", "equatorial"), _chair("axial", "axial")
    )
    cis = AdditiveModel(cis_mol, cis_ra)
    trans = AdditiveModel(trans_mol, trans_ra)
    # cis (ax/eq): 1 x A(CH3) = 1.74 kcal = 7.28016 kJ (Booth & Everett 1980); 1,4 is no pair
    assert cis.energy(cis_ae) == pytest.approx(7.28016, abs=_TOL)
    # trans: diequatorial 0; diaxial 2 x 1.74 = 3.48 kcal = 14.56032 kJ (Booth & Everett 1980)
    assert trans.energy(ee) == 0.0
    assert trans.energy(aa) == pytest.approx(14.56032, abs=_TOL)
    # cis - trans, best chair of each: 1.74 kcal = 7.28016 kJ
    assert cis.energy(cis_ae) - trans.energy(ee) == pytest.approx(7.28016, abs=_TOL)


def test_13_dimethyl_cis_versus_trans_and_syn_diaxial():
    cis_mol, cis_ra, (ee, aa) = _pick(
        "C[C@H]1C[C@@H](C)CCC1", _chair("equatorial", "equatorial"), _chair("axial", "axial")
    )
    trans_mol, trans_ra, (ae,) = _pick("C[C@H]1C[C@H](C)CCC1", _chair("axial", "equatorial"))
    cis = AdditiveModel(cis_mol, cis_ra)
    trans = AdditiveModel(trans_mol, trans_ra)
    assert cis.energy(ee) == 0.0
    # trans (ax/eq): 1.74 kcal = 7.28016 kJ (Booth & Everett 1980); trans - cis(ee) the same
    assert trans.energy(ae) - cis.energy(ee) == pytest.approx(7.28016, abs=_TOL)
    # cis diaxial: A + A (2 x 1.74, Booth & Everett 1980) + syn CH3/CH3 3.7 (Allinger & Miller
    # 1961, M) - A/2 - A/2 (the two CH3/H interactions it replaces)
    # = 3.48 + 3.7 - 1.74 = 5.44 kcal = 22.76096 kJ
    assert cis.energy(aa) == pytest.approx(22.76096, abs=_TOL)
    syn = [t for t in cis.terms(aa) if t.kind == "syn-1,3-diaxial"]
    assert len(syn) == 1
    assert set(syn[0].atoms) == {0, 1, 3, 4}  # the two methyls and their ring carbons
    assert syn[0].value == pytest.approx(3.7 * KCAL, abs=_TOL)
    assert "Allinger & Miller" in syn[0].source and "[M]" in syn[0].source
    replaced = [t for t in cis.terms(aa) if t.kind == "syn-axial CH3/H replaced"]
    assert [t.value for t in replaced] == pytest.approx([-0.87 * KCAL] * 2, abs=_TOL)
    assert not any(t.kind == "gauche" for t in cis.terms(aa))


def test_12_dimethyl_gauche_bookkeeping():
    trans_mol, trans_ra, (ee, aa) = _pick(
        "C[C@@H]1CCCC[C@H]1C", _chair("equatorial", "equatorial"), _chair("axial", "axial")
    )
    cis_mol, cis_ra, (ae,) = _pick("C[C@@H]1CCCC[C@@H]1C", _chair("axial", "equatorial"))
    trans = AdditiveModel(trans_mol, trans_ra)
    cis = AdditiveModel(cis_mol, cis_ra)
    # trans diequatorial: the methyls are gauche: 1 x 0.87 kcal (Eliel, Wilen & Mander 1994, M)
    # = 3.64008 kJ
    assert [t.kind for t in trans.terms(ee)] == ["gauche"]
    assert trans.energy(ee) == pytest.approx(3.64008, abs=_TOL)
    # trans diaxial: the methyls are anti: 2 x A(CH3) = 3.48 kcal (Booth & Everett 1980)
    # = 14.56032 kJ, no gauche term
    assert sorted(t.kind for t in trans.terms(aa)) == ["A-value", "A-value"]
    assert trans.energy(aa) == pytest.approx(14.56032, abs=_TOL)
    # diaxial - diequatorial = 3.48 - 0.87 = 2.61 kcal = 10.92024 kJ
    assert trans.energy(aa) - trans.energy(ee) == pytest.approx(10.92024, abs=_TOL)
    # cis (ax/eq): A + gauche = 1.74 + 0.87 = 2.61 kcal = 10.92024 kJ
    assert sorted(t.kind for t in cis.terms(ae)) == ["A-value", "gauche"]
    assert cis.energy(ae) == pytest.approx(10.92024, abs=_TOL)


def test_geminal_dimethyl_scores_the_axial_methyl():
    mol, ra, (chair,) = _pick("CC1(C)CCCCC1", _chair("axial", "equatorial"))
    terms = AdditiveModel(mol, ra).terms(chair)
    # one axial methyl: A(CH3) = 1.74 kcal = 7.28016 kJ (Booth & Everett 1980); the geminal
    # pair is not vicinal and gets no gauche term
    assert [t.kind for t in terms] == ["A-value"]
    assert terms[0].value == pytest.approx(7.28016, abs=_TOL)


def test_axial_tert_butyl_is_a_lower_bound():
    mol, ra, (ax,) = _pick("CC(C)(C)C1CCCCC1", _chair("axial"))
    est = AdditiveModel(mol, ra).evaluate(ax)
    # A(C(CH3)3) > 4.5 kcal (compilations, M) = 18.828 kJ as a lower bound
    assert est.energy == pytest.approx(18.828, abs=_TOL)
    assert "lower bound" in est.terms[0].source
    assert any("lower bound" in c for c in est.caveats)


# ---------------------------------------------------------------- unscored reporting
def test_group_absent_from_table_is_unscored():
    mol, ra, (ax,) = _pick("CCCC1CCCCC1", _chair("axial"))
    est = AdditiveModel(mol, ra).evaluate(ax)
    assert est.terms == () and est.partial
    assert est.unscored == (
        "ring 0: increment unknown for CCC (atom 2) at atom 3 of cyclohexane (group not in the increments table)",
    )


def test_twist_boat_is_unscored():
    mol, ra, (tb,) = _pick("CC1CCCCC1", ("twist-boat", ("pseudo-equatorial",)))
    model = AdditiveModel(mol, ra)
    assert model.terms(tb) == [] and model.energy(tb) == 0.0
    assert model.unscored(tb) == ["ring 0: twist-boat, not a chair; only chairs are scored"]


def test_heteroatom_fusion_and_pair_gaps_are_reported():
    # an equatorial N-methyl costs nothing (A-values are axial - equatorial): nothing is missing
    mol, ra, confs = _ensemble("CN1CCCCC1")
    chairs = [x for x in confs if describe_ring(x, ra.rings[0].atoms).shape.value == "chair"]
    model = AdditiveModel(mol, [ra.rings[0].atoms])
    by_pos = {}
    for xyz in chairs:
        me = substituent_position(xyz, ra.rings[0].atoms, 1, 0, describe_ring(xyz, ra.rings[0].atoms).shape)[0]
        by_pos.setdefault(me.value, xyz)
    assert model.unscored(by_pos["equatorial"]) == []
    # an axial N-methyl has no piperidine N1 value and no cyclohexane value transfers to a nitrogen
    assert model.unscored(by_pos["axial"]) == [
        "ring 0: increment unknown for CH3 (atom 0) at position N1 of piperidine (atom 1) (no value for this "
        "position; the cyclohexane value does not transfer next to a heteroatom or sp2 atom)"
    ]

    mol, ra, confs = _ensemble("C1CC[C@H]2CCCC[C@@H]2C1")  # trans-decalin
    chairs = [x for x in confs if all(describe_ring(x, r.atoms).shape.value == "chair" for r in ra.rings)]
    est = AdditiveModel(mol, ra).evaluate(chairs[0])
    assert est.terms == ()
    # the two equatorial fusion bonds of each ring are vicinal: a gauche pair with no increment
    assert len(est.unscored) == 2 and all("gauche pair the ring bond" in n for n in est.unscored)

    # trans-1,2-dichloro, diequatorial: A-values exist, a Cl/Cl gauche increment does not
    mol, ra, (ee,) = _pick("Cl[C@@H]1CCCC[C@H]1Cl", _chair("equatorial", "equatorial"))
    assert AdditiveModel(mol, ra).unscored(ee) == [
        "ring 0: increment unknown for the gauche pair Cl (atom 0)/Cl (atom 7) at positions C1/C2 of cyclohexane"
    ]


# -------------------------------------------------------------------- API and errors
def test_ring_tuples_give_the_same_estimate_as_ring_analysis():
    mol, ra, (aa,) = _pick("C[C@H]1C[C@@H](C)CCC1", _chair("axial", "axial"))
    by_analysis = AdditiveModel(mol, ra).evaluate(aa)
    by_tuples = AdditiveModel(mol, [ra.rings[0].atoms]).evaluate(aa)
    assert by_tuples == by_analysis
    assert by_analysis.energy == pytest.approx(sum(t.value for t in by_analysis.terms), abs=_TOL)


def test_invalid_input_raises():
    mol, ra, (eq,) = _pick("CC1CCCCC1", _chair("equatorial"))
    model = AdditiveModel(mol, ra)
    assert model.has_gradient is False
    with pytest.raises(ForceFieldError):
        model.energy_and_gradient(eq)
    with pytest.raises(InputError):
        model.energy(eq[:-1])
    bad = np.array(eq)
    bad[0, 0] = np.nan
    with pytest.raises(InputError):
        model.energy(bad)
    with pytest.raises(InputError):
        AdditiveModel(mol, [(1, 2, 3, 4, 5)])
    with pytest.raises(InputError):
        AdditiveModel(mol, [(1, 3, 2, 4, 5, 6)])  # not in ring order
