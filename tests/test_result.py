"""The result object: the JSON round trip (``to_json`` → ``from_json`` → ``to_json``) and loading files."""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

import chairbuild
from chairbuild.errors import InputError
from chairbuild.pipeline import analyze
from chairbuild.result import SCHEMA_VERSION, Ensemble, Status
from helpers import assert_close


@pytest.fixture(scope="module")
def ensemble():
    # MMFF free energies give the thermo keys (enthalpy, symmetry number, ...); a rejected record,
    # a note and a non-zero charge are added so that every part of the layout is exercised
    ens = analyze("C[C@H]1CC[C@H](O)CC1", free_energy=True)
    bad = replace(ens.conformers[-1], id=-1, relative_energy=float("nan"), status=Status.NOT_CONVERGED, message="test")
    return replace(ens, rejected=(bad,), notes=ens.notes + ("a note",), charge=1)


@pytest.mark.parametrize("unit", ["kJ/mol", "kcal/mol"])
def test_json_round_trip_is_exact(ensemble, unit):
    text = ensemble.to_json(unit)
    back = Ensemble.from_json(text)
    assert back.to_json(unit) == text
    # and again, through the dict form
    assert Ensemble.from_dict(json.loads(text)).to_dict(unit) == json.loads(text)


def test_round_trip_restores_kj_values_and_the_molecule(ensemble):
    back = Ensemble.from_json(ensemble.to_json("kcal"))
    # energies come back in kJ/mol, to the precision of the kcal file (1e-4 kcal/mol)
    assert_close(back.window, ensemble.window, 1e-3, "window after a kcal round trip")
    for a, b in zip(back.conformers, ensemble.conformers):
        assert_close(a.relative_energy, b.relative_energy, 1e-3, "relative energy after a kcal round trip")
        assert_close(a.thermo["free_energy"], b.thermo["free_energy"], 1e-3, "free energy after a kcal round trip")
        assert_close(a.coords, b.coords, 1e-5, "coordinates")
        assert a.substituents[0].position is b.substituents[0].position
        assert a.origin == b.origin and a.families == b.families
    assert_close(
        [t.value for f in back.families for t in f.additive_terms],
        [t.value for f in ensemble.families for t in f.additive_terms],
        2e-3,
        "additive terms after a kcal round trip",
    )
    assert back.rejected[0].status is Status.NOT_CONVERGED and np.isnan(back.rejected[0].relative_energy)
    assert (back.charge, back.multiplicity, back.symbols, back.mol_block) == (1, 1, ensemble.symbols, ensemble.mol_block)
    assert back.provenance["options"]["free_energy"] is True
    mol = back.to_rdkit()
    assert mol.GetNumConformers() == len(ensemble.conformers) and mol.GetNumAtoms() == len(ensemble.symbols)


def test_load_reads_saved_files(ensemble):
    Path("one.json").write_text(ensemble.to_json())
    assert chairbuild.load("one.json").to_json() == ensemble.to_json()
    Path("two.json").write_text(json.dumps([ensemble.to_dict(), ensemble.to_dict("kcal")]))
    both = chairbuild.load_all("two.json")
    assert [both[0].to_json(), both[1].to_json("kcal")] == [ensemble.to_json(), ensemble.to_json("kcal")]
    with pytest.raises(InputError, match="holds 2 results"):
        chairbuild.load("two.json")


def test_load_rejects_what_is_not_a_result(ensemble):
    Path("broken.json").write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        chairbuild.load("broken.json")
    with pytest.raises(InputError, match="no such file|cannot read"):
        chairbuild.load("missing.json")
    Path("other.json").write_text('{"a": 1}')
    with pytest.raises(InputError, match="not a chairbuild result"):
        chairbuild.load("other.json")
    old = ensemble.to_dict()
    del old["mol_block"]
    old["schema"] = "1.0"
    with pytest.raises(InputError, match="schema 1.0"):
        Ensemble.from_dict(old)
    cut = ensemble.to_dict()
    del cut["conformers"][0]["rings"]
    with pytest.raises(InputError, match="malformed"):
        Ensemble.from_dict(cut)
    assert ensemble.to_dict()["schema"] == SCHEMA_VERSION
