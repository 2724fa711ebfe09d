"""The command line: output formats, and bad input answered with one message and exit code 2."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from rdkit import Chem

from chairbuild.cli import main


def run_cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "chairbuild", *args], capture_output=True, text=True, timeout=600)


@pytest.mark.parametrize(
    "args, message",
    [
        (["analyze", "C1CC("], "invalid SMILES"),
        (["analyze", "CCCC"], "no non-aromatic six-membered ring"),
        (["analyze", "CC1CCC(C)CC1"], "--enumerate-stereo"),
        (["analyze", "nothere.sdf"], "no such file"),
        (["analyze", "CC1CCCCC1", "--colour", "red"], "unrecognized arguments"),
        (["analyze", "CC1CCCCC1", "-o", "out.pdf"], "unknown extension '.pdf'"),
        (["analyze", "CC1CCCCC1", "--rerank", "gfn2", "--solvent", "unobtainium"], "valid: "),
        (["analyze", "CC1CCCCC1", "--solvent", "water"], "needs the GFN2-xTB level"),
        (["analyze", "CC1CCCCC1", "-T", "-3"], "must be positive"),
    ],
)
def test_bad_input_exits_2_with_one_message(args, message):
    proc = run_cli(*args)
    assert proc.returncode == 2, proc.stderr
    assert message in proc.stderr
    assert "Traceback" not in proc.stderr
    assert not list(Path.cwd().glob("out.*"))


def test_outputs_by_extension(capsys):
    code = main(["analyze", "CC1CCCCC1", "--quiet", "-o", "m.sdf", "-o", "m.xyz", "-o", "m.csv", "-o", "m.json", "-o", "xyzdir/"])
    assert code == 0
    table = capsys.readouterr().out
    assert "chair" in table and "ring 0" in table
    data = json.loads(Path("m.json").read_text())
    n = len(data["conformers"])
    sdf = [m for m in Chem.SDMolSupplier("m.sdf", removeHs=False)]
    assert len(sdf) == n
    assert sdf[0].GetProp("ring0_shape") == "chair"
    assert float(sdf[0].GetProp("population")) == pytest.approx(data["conformers"][0]["population"], abs=1e-6)
    frames = Path("m.xyz").read_text().splitlines()
    assert frames.count("21") == n  # 21 atoms per frame
    assert len(Path("m.csv").read_text().splitlines()) == n + 1
    files = sorted(Path("xyzdir").glob("rank_*.xyz"))
    assert len(files) == n
    comment = files[0].read_text().splitlines()[1]
    assert "E_rel=0.0000 kJ/mol" in comment and "population=" in comment


def test_json_to_stdout_in_kcal(capsys):
    assert main(["analyze", "OC1CCCCC1", "--quiet", "--json", "--units", "kcal", "--window", "3"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["energy_unit"] == "kcal/mol"
    assert all(c["relative_energy"] <= 3.0 for c in data["conformers"])


def test_unwritable_output_is_refused_before_any_work(tmp_path):
    locked = tmp_path / "locked"
    locked.mkdir()
    (locked / "file").write_text("x")
    # a path below a regular file can never be created
    proc = run_cli("analyze", "CC1CCCCC1", "-o", str(locked / "file" / "out.sdf"))
    assert proc.returncode == 2
    assert "not a writable directory" in proc.stderr and "Traceback" not in proc.stderr
    assert proc.stdout == ""
