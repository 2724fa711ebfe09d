"""Reading molecules and the stereochemistry rules (chairbuild.input, chairbuild.rings)."""

from __future__ import annotations

import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from chairbuild.errors import InputError, StereoError
from chairbuild.input import read_molecules
from chairbuild.rings import analyse_rings


def test_enantiomer_only_choice_is_one_analysis_with_a_note():
    # 2-methyltetrahydropyran: one undefined centre decides only between mirror images.
    prepared = read_molecules("CC1CCCCO1")
    assert len(prepared) == 1
    assert "mirror images" in prepared[0].notes[0]
    assert "@" in prepared[0].smiles


def test_diastereomer_choice_is_an_error_naming_atoms():
    with pytest.raises(StereoError, match=r"atom 1 \(C\), atom 4 \(C\)"):
        read_molecules("CC1CCC(C)CC1")


def test_enumerate_stereo_gives_each_diastereomer_once():
    prepared = read_molecules("CC1CCC(C)CC1", enumerate_stereo=True)
    assert len(prepared) == 2  # cis and trans 1,4-dimethylcyclohexane
    assert len({p.smiles for p in prepared}) == 2
    # 1,2-dimethylcyclohexane: cis (meso) and the trans pair -> two diastereomers analysed
    assert len(read_molecules("CC1CCCCC1C", enumerate_stereo=True)) == 2


@pytest.mark.parametrize(
    "text, message",
    [
        ("C1CC(", "invalid SMILES"),
        ("CCCC", "no non-aromatic six-membered ring"),
        ("c1ccccc1", "only aromatic"),
        ("   ", "empty input"),
        ("missing.sdf", "no such file"),
        ("C1CC[Se]CC1", "contains atom 3 (Se)"),
    ],
)
def test_bad_input_names_the_problem(text, message):
    with pytest.raises(InputError) as err:
        for prepared in read_molecules(text):
            analyse_rings(prepared.mol)
    assert message in str(err.value)


def test_sdf_records_and_atom_order(tmp_path):
    mols = []
    for smi in ("C[C@H]1CC[C@@H](O)CC1", "CC1CCCCC1"):
        m = Chem.AddHs(Chem.MolFromSmiles(smi))
        AllChem.EmbedMolecule(m, randomSeed=3)
        m.SetProp("_Name", f"rec-{smi}")
        mols.append(m)
    path = tmp_path / "two.sdf"
    with Chem.SDWriter(str(path)) as w:
        for m in mols:
            w.write(m)
    first = read_molecules(str(path))[0]
    assert first.name == "rec-C[C@H]1CC[C@@H](O)CC1"
    assert first.smiles == Chem.MolToSmiles(Chem.MolFromSmiles("C[C@H]1CC[C@@H](O)CC1"))
    # heavy atoms first in input order, then hydrogens
    symbols = [a.GetSymbol() for a in first.mol.GetAtoms()]
    assert symbols[:8] == ["C", "C", "C", "C", "C", "O", "C", "C"]
    assert set(symbols[8:]) == {"H"}
    second = read_molecules(str(path), record=2)[0]
    assert second.smiles == "CC1CCCCC1"
    with pytest.raises(InputError, match="record 3 does not exist"):
        read_molecules(str(path), record=3)


def test_ring_perception_of_heterocycles_and_fused_systems():
    ra = analyse_rings(read_molecules("C1CC[C@H]2CCCC[C@H]2C1")[0].mol)  # cis-decalin
    assert len(ra.rings) == 2 and len(ra.systems) == 1
    ra = analyse_rings(read_molecules("CN1CCOCC1")[0].mol)  # N-methylmorpholine
    assert ra.invertible_nitrogens == (1,)
    assert [s.group for s in ra.substituents] == ["C"]
    ra = analyse_rings(read_molecules("C1CCNCC1")[0].mol)  # piperidine: N-H is a substituent
    assert [s.group for s in ra.substituents] == ["H"]
    ra = analyse_rings(read_molecules("CC(=O)N1CCCCC1")[0].mol)  # amide N is not invertible
    assert ra.invertible_nitrogens == ()


def test_directory_input_and_salts(tmp_path):
    (tmp_path / "folder").mkdir()
    with pytest.raises(InputError, match="is a directory"):
        read_molecules(str(tmp_path / "folder"))
    prepared = read_molecules("C1CC[NH2+]CC1.[Cl-]")[0]
    assert prepared.smiles == "C1CC[NH2+]CC1"
    assert "removed [Cl-]" in prepared.notes[0]
