"""Charge and spin: radicals refused at MMFF94, open shell at GFN2-xTB, charge and multiplicity in every output.

Reference for the open-shell energy: tblite's own Calculator called directly with the
number of unpaired electrons (``uhf``), a general-purpose library outside chairbuild.
"""

from __future__ import annotations

import csv
import io
import json
import subprocess
import sys

import numpy as np
import pytest
from rdkit import Chem

from chairbuild.constants import ANGSTROM_TO_BOHR, HARTREE_TO_KJ
from chairbuild.errors import InputError
from chairbuild.output import csv_text, format_table, sdf_text, xyz_text
from chairbuild.pipeline import analyze
from helpers import assert_close

RADICAL = "[CH2]C1CCCCC1"  # cyclohexylmethyl radical: one unpaired electron on atom 0


@pytest.fixture(scope="module")
def radical_gfn2():
    return analyze(RADICAL, rerank="gfn2", threads=1)


def test_radical_is_refused_at_mmff94_with_the_atom_and_the_way_out():
    with pytest.raises(InputError, match=r"radical: 1 unpaired electron\(s\) on atom 0 \(C\).*multiplicity 2") as err:
        analyze(RADICAL)
    assert "MMFF94 describes closed shells only" in str(err.value)
    assert "method='gfn2'" in str(err.value)  # Python spelling of the option


def test_radical_on_the_command_line_exits_2_naming_the_flag():
    proc = subprocess.run(
        [sys.executable, "-m", "chairbuild", "analyze", RADICAL, "--quiet"], capture_output=True, text=True, timeout=300
    )
    assert proc.returncode == 2
    assert "--method gfn2" in proc.stderr and "atom 0 (C)" in proc.stderr
    assert "Traceback" not in proc.stderr and proc.stdout == ""


def test_free_energies_of_a_radical_need_an_open_shell_hessian():
    # rerank=gfn2 takes the thermal corrections from MMFF94, which cannot describe the radical
    with pytest.raises(InputError, match="thermal corrections from MMFF94"):
        analyze(RADICAL, rerank="gfn2", free_energy=True)


def test_gfn2_ranks_the_radical_open_shell(radical_gfn2):
    ens = radical_gfn2
    assert (ens.charge, ens.multiplicity) == (0, 2)
    assert any("open shell" in n and "MMFF94 only pre-optimised" in n for n in ens.notes)
    assert any("geometries are MMFF94 minima" in n for n in ens.notes)
    from tblite.interface import Calculator

    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    numbers = np.array([a.GetAtomicNum() for a in mol.GetAtoms()])
    level = next(k for k in ens.conformers[0].energies if k.startswith("GFN2"))
    for rec in ens.conformers[:2]:
        calc = Calculator("GFN2-xTB", numbers, rec.coords * ANGSTROM_TO_BOHR, charge=0.0, uhf=1)
        calc.set("verbosity", 0)
        reference = calc.singlepoint().get("energy") * HARTREE_TO_KJ
        assert_close(rec.energies[level], reference, 1e-3, "GFN2-xTB energy of the radical against tblite with uhf=1")


def test_charge_and_multiplicity_in_every_output(radical_gfn2):
    ens = radical_gfn2
    supplier = Chem.SDMolSupplier()
    supplier.SetData(sdf_text(ens), removeHs=False)
    records = list(supplier)
    assert records[0].GetProp("total_charge") == "0" and records[0].GetProp("multiplicity") == "2"
    assert records[0].GetAtomWithIdx(0).GetNumRadicalElectrons() == 1  # the molfile keeps the radical centre
    assert "charge=0 multiplicity=2" in xyz_text(ens).splitlines()[1]
    rows = list(csv.DictReader(io.StringIO(csv_text(ens))))
    assert rows[0]["total_charge"] == "0" and rows[0]["multiplicity"] == "2"
    assert "charge 0, multiplicity 2" in format_table(ens).splitlines()[1]
    data = json.loads(ens.to_json())
    assert (data["charge"], data["multiplicity"]) == (0, 2)


def test_a_cation_states_its_charge():
    ens = analyze("C[NH+]1CCCCC1")
    assert (ens.charge, ens.multiplicity) == (1, 1)
    assert "charge=1 multiplicity=1" in xyz_text(ens).splitlines()[1]
    assert "charge +1, multiplicity 1" in format_table(ens)
    assert "charge +1" in repr(ens)
