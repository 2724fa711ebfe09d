"""The Python surface in the ecosystem's terms: RDKit molecules in and out, DataFrames, notebooks.

Check values are internal-consistency checks against the Ensemble itself and against
RDKit's own readers (common practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem, RDLogger, rdBase
from rdkit.Chem import AllChem

import chairbuild
from chairbuild.errors import InputError, StereoError
from chairbuild.optnames import command_line, spell
from chairbuild.result import ConformerRecord
from helpers import assert_close

SMILES = "C[C@H]1CC[C@H](O)CC1"  # cis-4-methylcyclohexanol


@pytest.fixture(scope="module")
def ens():
    return chairbuild.analyze(SMILES, name="cis-4-methylcyclohexanol")


def test_indexing_repr_and_html(ens):
    assert isinstance(ens[0], ConformerRecord) and ens[0] is ens.conformers[0] and ens[-1] is ens.conformers[-1]
    text = repr(ens)
    assert text.startswith("<Ensemble 'cis-4-methylcyclohexanol':") and f"{len(ens)} conformer(s)" in text
    assert len(text) < 200 and "MMFF94" in text and "multiplicity 1" in text
    page = ens._repr_html_()
    assert page.count("<tr>") == 1 + min(len(ens), 10) and "cis-4-methylcyclohexanol" in page


def test_to_rdkit_carries_every_conformer_and_its_properties(ens):
    mol = ens.to_rdkit()
    assert mol.GetProp("_Name") == "cis-4-methylcyclohexanol"
    assert mol.GetIntProp("total_charge") == 0 and mol.GetIntProp("multiplicity") == 1
    assert mol.GetProp("ranking_method") == "MMFF94"
    assert mol.GetNumConformers() == len(ens)
    for rec in ens:
        conf = mol.GetConformer(rec.id)
        assert conf.Is3D()
        assert_close(conf.GetPositions(), rec.coords, 1e-9, "conformer coordinates")
        assert conf.GetDoubleProp("population") == pytest.approx(rec.population)
        assert conf.GetDoubleProp("relative_energy_kJ_mol") == pytest.approx(rec.relative_energy)
        assert conf.GetDoubleProp("energy_MMFF94_kJ_mol") == pytest.approx(rec.energies["MMFF94"])
        assert conf.GetProp("ring0_shape") == rec.rings[0].shape.value
        for sub in rec.substituents:
            assert conf.GetProp(f"position_{ens.symbols[sub.atom]}{sub.atom}") == sub.position.value
    # RDKit's own MMFF on the returned molecule agrees with the recorded MMFF94 energy (kcal → kJ)
    props = AllChem.MMFFGetMoleculeProperties(mol)
    ff = AllChem.MMFFGetMoleculeForceField(mol, props, confId=ens[0].id)
    assert ff.CalcEnergy() * 4.184 == pytest.approx(ens[0].energies["MMFF94"], abs=0.01)
    kcal = ens.to_rdkit(unit="kcal")
    assert kcal.GetConformer(1).GetDoubleProp("relative_energy_kcal_mol") == pytest.approx(ens[1].relative_energy / 4.184)


def test_to_dataframe_has_one_typed_row_per_conformer(ens):
    pd = pytest.importorskip("pandas")
    df = ens.to_dataframe()
    assert len(df) == len(ens) and df.index.name == "conformer_id" and list(df.index) == [r.id for r in ens]
    assert df["relative_energy_kJ_mol"].dtype == np.float64 and df["population"].dtype == np.float64
    assert df["degeneracy"].dtype == np.int64 and df["converged"].dtype == bool
    assert isinstance(df["ring0_shape"].dtype, pd.CategoricalDtype)
    assert df["population"].sum() == pytest.approx(1.0, abs=1e-9)
    assert (df["multiplicity"] == 1).all() and (df["name"] == ens.name).all()
    fam = ens.families_dataframe()
    assert len(fam) == len(ens.families) and fam.index.name == "key"
    for f in ens.families:  # what the additive column holds, and the estimate's uncertainty, per family
        assert fam.loc[f.key, "additive_status"] == f.additive_status.value
        want = np.nan if f.additive_uncertainty is None else f.additive_uncertainty
        assert fam.loc[f.key, "additive_uncertainty_kJ_mol"] == pytest.approx(want, nan_ok=True)
    assert fam["population"].sum() == pytest.approx(1.0, abs=1e-6)
    best = fam["delta_g_kJ_mol"].idxmin()
    assert fam.loc[best, "K"] == pytest.approx(1.0)
    # the stated convention: K = exp(dG/RT)
    from chairbuild.constants import rt_kj

    finite = fam[np.isfinite(fam["K"])]
    assert_close(np.log(finite["K"]), finite["delta_g_kJ_mol"] / rt_kj(ens.temperature), 1e-3, "ln K = dG/RT")


def test_analyze_all_is_exported():
    assert "analyze_all" in chairbuild.__all__
    from chairbuild.pipeline import analyze_all

    assert chairbuild.analyze_all is analyze_all


def test_option_errors_speak_python_in_python_and_flags_on_the_command_line():
    with pytest.raises(StereoError, match=r"enumerate_stereo=True") as err:
        chairbuild.analyze("CC1CCC(C)CC1")
    assert "--enumerate-stereo" not in str(err.value)
    with command_line():
        with pytest.raises(StereoError, match="--enumerate-stereo"):
            chairbuild.analyze("CC1CCC(C)CC1")
        assert spell("twist_boats", False) == "--no-twist-boats" and spell("method", "gfn2") == "--method gfn2"
    assert spell("method", "gfn2") == "method='gfn2'"
    from chairbuild.errors import OptionError

    with pytest.raises(OptionError, match=r"solvent needs the GFN2-xTB level: add method='gfn2' or rerank='gfn2'"):
        chairbuild.analyze("CC1CCCCC1", solvent="water")


# ----------------------------------------------------------------------------- RDKit Mol in
def _embedded(smiles: str) -> Chem.Mol:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(mol, randomSeed=11)
    return mol


@pytest.mark.parametrize(
    "make",
    [
        pytest.param(lambda: Chem.MolFromSmiles(SMILES), id="2D-no-H"),
        pytest.param(lambda: Chem.AddHs(Chem.MolFromSmiles(SMILES)), id="no-coords-with-H"),
        pytest.param(lambda: _embedded(SMILES), id="3D-with-H"),
        pytest.param(lambda: Chem.RemoveHs(_embedded(SMILES)), id="3D-no-H"),
    ],
)
def test_rdkit_molecules_are_read_with_or_without_3d_and_hydrogens(make):
    from chairbuild.input import read_molecules

    mol = make()
    before = (mol.GetNumAtoms(), mol.GetNumConformers(), Chem.MolToSmiles(mol))
    prepared = read_molecules(mol)
    assert [p.smiles for p in prepared] == [Chem.MolToSmiles(Chem.MolFromSmiles(SMILES))]
    assert prepared[0].mol.GetNumAtoms() == 22  # C7H14O with explicit hydrogens
    assert (mol.GetNumAtoms(), mol.GetNumConformers(), Chem.MolToSmiles(mol)) == before  # caller's Mol untouched


def test_rdkit_stereo_comes_from_3d_when_tags_are_missing():
    from chairbuild.input import read_molecules

    trans = _embedded("C[C@H]1CC[C@@H](O)CC1")
    for atom in trans.GetAtoms():
        atom.SetChiralTag(Chem.ChiralType.CHI_UNSPECIFIED)
    assert read_molecules(trans)[0].smiles == Chem.MolToSmiles(Chem.MolFromSmiles("C[C@H]1CC[C@@H](O)CC1"))
    flat = Chem.MolFromSmiles("CC1CCC(O)CC1")  # no coordinates, no tags: undefined, decides diastereomers
    with pytest.raises(StereoError, match="enumerate_stereo=True"):
        read_molecules(flat)
    named = Chem.MolFromSmiles(SMILES)
    named.SetProp("_Name", "from a notebook")
    assert read_molecules(named)[0].name == "from a notebook"
    with pytest.raises(InputError, match="record"):
        read_molecules(named, record=2)


# ----------------------------------------------------------------------------- RDKit logging
def _log_state() -> str:
    return rdBase.LogStatus()


def test_analyze_leaves_the_callers_rdkit_logging_alone():
    before = _log_state()
    try:
        RDLogger.DisableLog("rdApp.error")
        with pytest.raises(InputError, match="invalid SMILES"):
            chairbuild.analyze("C1CC(")
        assert "rdApp.error:disabled" in _log_state()  # stays disabled
        RDLogger.EnableLog("rdApp.error")
        with pytest.raises(InputError, match="invalid SMILES"):
            chairbuild.analyze("C1CC(")
        assert "rdApp.error:enabled" in _log_state()  # stays enabled
        assert "rdApp.debug:disabled" in _log_state()  # and the default-off levels stay off
    finally:
        for line in before.splitlines():
            name, state = line.split(":")
            (RDLogger.EnableLog if state == "enabled" else RDLogger.DisableLog)(name)
