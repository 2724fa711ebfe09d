"""The command line of the chain of levels (``--stage`` and the DFT settings) and of ``chairbuild reweight``.

Bad values are refused before any work with one message and exit code 2 (common practice, no
source); cheap chains (MMFF94 window, GFN2-xTB single points, an STO-3G DFT single point) run end
to end. Energies handed to ``reweight`` are numbers of our own.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

from chairbuild.cli import build_parser, main

MOL = "C1CCNCC1"
README = Path(__file__).resolve().parents[1] / "README.md"


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "chairbuild", *args], capture_output=True, text=True, timeout=600)


@pytest.mark.parametrize(
    "args, message",
    [
        (["--stage", "hf:single-point"], "unknown level 'hf'"),
        (["--stage", "gfn2:relax"], "unknown stage operation 'relax'"),
        (["--stage", "dft:single-point,colour=red"], "expected key=value"),
        (["--stage", "gfn2:optimise", "--method", "gfn2"], "--stage and the shorthands --method, --rerank, --free-energy do not mix"),
        (["--functional", "pbe0"], "--functional set the DFT level, but no stage is a dft stage"),
        (["--stage", "dft:single-point", "--functional", "nonsense"], "unknown exchange-correlation functional"),
        (["--stage", "dft:single-point", "--basis", "nonsense"], "basis 'nonsense' unknown to PySCF"),
        (["--stage", "dft:single-point", "--dispersion", "d4"], "invalid choice: 'd4'"),
        (["--stage", "dft:single-point", "--solvent", "unobtainium"], "unknown solvent 'unobtainium' for the DFT level"),
        (["--stage", "gfn2:single-point", "--cache", "no/such/folder/c.sqlite"], "cannot use"),
    ],
)
def test_bad_chain_options_exit_2_with_one_message(args, message):
    proc = run_cli("analyze", MOL, "-o", "out.json", *args)
    assert proc.returncode == 2, proc.stderr
    assert message in proc.stderr
    assert "Traceback" not in proc.stderr
    assert [line for line in proc.stderr.splitlines() if line.startswith("chairbuild:")] == [proc.stderr.strip().splitlines()[-1]]
    assert not Path("out.json").exists()


def test_stages_and_cache_from_the_command_line(capsys):
    args = ["analyze", MOL, "--stage", "mmff94,window=3", "--stage", "gfn2:single-point", "--cache", "c.sqlite", "--json", "--quiet"]
    assert main(args) == 0
    first = json.loads(capsys.readouterr().out)
    assert first["ranking_formula"] == "E = E[GFN2-xTB//MMFF94]"
    assert first["provenance"]["options"]["stages"] == ["gfn2:single-point"]
    assert first["provenance"]["options"]["cache"] == "c.sqlite" and Path("c.sqlite").is_file()
    n = first["provenance"]["stages"][0]["computed"]
    assert n >= 1
    assert main(args) == 0
    again = json.loads(capsys.readouterr().out)
    assert again["provenance"]["stages"][0]["computed"] == 0 and again["provenance"]["stages"][0]["cached"] == n
    assert [c["relative_energy"] for c in again["conformers"]] == [c["relative_energy"] for c in first["conformers"]]


def test_dft_settings_reach_the_stage(capsys):
    # Hartree-Fock through the DFT stage (functional "hf"): no integration grid, a few seconds
    args = ["analyze", MOL, "--stage", "mmff94,window=1", "--stage", "dft:single-point", "--functional", "hf",
            "--basis", "sto-3g", "--dispersion", "none", "--no-twist-boats", "--threads", "1", "--json", "--quiet"]
    assert main(args) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["method"] == "HF/sto-3g//MMFF94"
    assert data["provenance"]["options"]["stages"] == ["dft:single-point,functional=hf,basis=sto-3g,dispersion=none"]
    assert all("HF/sto-3g//MMFF94" in c["energies"] for c in data["conformers"])


def _reweight_options():
    sub = next(a for a in build_parser()._actions if a.dest == "command")
    return [s for a in sub.choices["reweight"]._actions for s in a.option_strings if s not in ("-h", "--help")]


def test_chain_and_reweight_options_are_in_the_readme():
    readme = README.read_text()
    chain = ["--stage", "--functional", "--basis", "--dispersion", "--dft-solvation", "--cache"]
    missing = [flag for flag in chain + _reweight_options() if not re.search(rf"`{re.escape(flag)}\b", readme)]
    assert not missing, f"options without a README entry: {missing}"
    helptext = run_cli("analyze", "--help").stdout
    assert all(flag in helptext for flag in chain)


@pytest.fixture()
def saved_json():
    assert main(["analyze", "CC1CCCCC1", "--quiet", "-o", "saved.json", "-o", "confs/"]) == 0
    return Path("saved.json")


def test_reweight_from_the_command_line(saved_json, capsys):
    capsys.readouterr()
    Path("mine.csv").write_text("conformer,energy,unit\nrank_001.xyz,-0.5,kcal/mol\nrank_002.xyz,-1.0,kcal/mol\n")
    code = main(["reweight", str(saved_json), "mine.csv", "--level-name", "mine", "--units", "kcal", "-o", "new.json",
                 "--quiet"])
    assert code == 0
    table = capsys.readouterr().out
    assert "method mine//MMFF94" in table and "energies brought by the user (csv" in table
    new = json.loads(Path("new.json").read_text())
    assert new["ranking_formula"] == "E = E[mine//MMFF94]" and new["energy_unit"] == "kcal/mol"
    assert [c["relative_energy"] for c in new["conformers"]] == [0.0, 0.5]
    assert new["provenance"]["external_energies"]["files"] == {"1": "mine.csv row 2", "0": "mine.csv row 1"}


def test_reweight_refuses_a_wrong_folder_and_writes_nothing(saved_json, capsys):
    capsys.readouterr()
    Path("outputs").mkdir()
    Path("outputs/rank_001.txt").write_text("not an output file\n")
    code = main(["reweight", str(saved_json), "outputs", "-o", "new.json"])
    err = capsys.readouterr().err
    assert code == 2 and "no output file with an energy that cclib reads" in err and "rank_001.txt" in err
    assert not Path("new.json").exists()
    code = main(["reweight", str(saved_json), "mine.csv", "--add-thermal-correction"])
    assert code == 2 and "cannot read 'mine.csv'" in capsys.readouterr().err
