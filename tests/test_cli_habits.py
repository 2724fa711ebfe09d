"""Command-line habits: pipes, --quiet, --version, exit codes, Ctrl-C, input files, output directories,
and one spelling of every value across the outputs (common practice, no source)."""

from __future__ import annotations

import csv
import json
import re
import signal
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest
from rdkit import Chem

from chairbuild.cli import main
from chairbuild.output import FAMILY_CONVENTION, format_table

MOL = "CC1CCCCC1"


def cli(*args: str, **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "chairbuild", *args], capture_output=True, text=True, timeout=600, **kwargs
    )


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    """One CLI run writing every format (in kcal/mol, narrow window), and its table."""
    folder = tmp_path_factory.mktemp("outputs")
    proc = cli(
        "analyze", MOL, "--units", "kcal", "--window", "2", "-o", "m.sdf", "-o", "m.csv", "-o", "m.json",
        "-o", "m.xyz", "--report", "r.html", cwd=folder,
    )
    assert proc.returncode == 0, proc.stderr
    return folder, proc


def test_quiet_silences_the_wrote_lines(outputs, capsys):
    _, loud = outputs
    assert "wrote m.sdf" in loud.stderr
    assert main(["analyze", MOL, "--quiet", "-o", "q.xyz"]) == 0
    assert "wrote" not in capsys.readouterr().err and Path("q.xyz").is_file()


def test_version_and_exit_codes_in_help():
    from chairbuild import __version__

    proc = cli("--version")
    assert proc.returncode == 0 and proc.stdout.strip() == f"chairbuild {__version__}"
    helptext = cli("analyze", "--help").stdout
    for code, meaning in ((" 1 ", "computation failed"), (" 2 ", "bad input or option"), ("130", "interrupted")):
        assert re.search(rf"{code.strip()}\s+.*{meaning}", helptext), (code, meaning)
    assert "0-based" in helptext


def test_a_failed_computation_exits_1(monkeypatch, capsys):
    import chairbuild.pipeline
    from chairbuild.errors import ConvergenceError

    def fail(*args, **kwargs):
        raise ConvergenceError("SCF did not converge for test at geometry 3")

    monkeypatch.setattr(chairbuild.pipeline, "analyze_all", fail)
    assert main(["analyze", MOL, "--quiet"]) == 1
    assert "computation failed: SCF did not converge" in capsys.readouterr().err


def test_closed_pipe_gives_no_traceback():
    proc = subprocess.Popen(
        [sys.executable, "-m", "chairbuild", "analyze", MOL, "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    proc.stdout.close()  # the reader goes away before the table is printed, as `| head -0` would
    err = proc.stderr.read()
    proc.wait(timeout=300)
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert proc.returncode == 141


def test_ctrl_c_at_the_gfn2_level_stops_within_two_seconds():
    psutil = pytest.importorskip("psutil")
    proc = subprocess.Popen(
        [sys.executable, "-m", "chairbuild", "analyze", MOL, "--method", "gfn2", "--threads", "2", "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    parent = psutil.Process(proc.pid)
    deadline = time.monotonic() + 300
    while not parent.children() and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)  # wait for the forked GFN2-xTB workers
    workers = parent.children()
    assert workers, "the GFN2-xTB stage never started its workers"
    time.sleep(0.3)
    sent = time.monotonic()
    proc.send_signal(signal.SIGINT)  # to the parent only: it must stop the workers itself
    _, err = proc.communicate(timeout=60)
    took = time.monotonic() - sent
    assert proc.returncode == 130 and "interrupted" in err and "Traceback" not in err, err
    assert took < 2.0, f"took {took:.2f} s to stop"
    assert not any(w.is_running() and w.status() != psutil.STATUS_ZOMBIE for w in workers)


def test_multi_record_sdf_says_what_it_took():
    writer = Chem.SDWriter("three.sdf")
    for smi in ("CC1CCCCC1", "OC1CCCCC1", "NC1CCCCC1"):
        writer.write(Chem.MolFromSmiles(smi))
    writer.close()
    from chairbuild.input import read_molecules

    note = read_molecules("three.sdf")[0].notes[0]
    assert "holds 3 records; analysed record 1 only" in note and "chairbuild batch" in note and "record" in note
    assert read_molecules("three.sdf", record=2)[0].notes == ()


def test_smiles_files_are_read_as_smiles_lines():
    Path("mols.smi").write_text("smiles name\nCC1CCCCC1 methyl ring\n\n# a comment\nOC1CCCCC1 the alcohol\n")
    Path("one.txt").write_text("OC1CCCCC1\n")
    from chairbuild.input import read_molecules

    first = read_molecules("mols.smi")[0]
    assert (first.smiles, first.name) == ("CC1CCCCC1", "methyl ring") and "holds 2 molecules" in first.notes[0]
    second = read_molecules("mols.smi", record=2)[0]
    assert (second.smiles, second.name, second.notes) == ("OC1CCCCC1", "the alcohol", ())
    assert read_molecules("one.txt")[0].smiles == "OC1CCCCC1"
    proc = cli("analyze", "mols.smi", "--record", "3", "--quiet")
    assert proc.returncode == 2 and "2 SMILES line(s); line 3 does not exist" in proc.stderr


def test_output_directory_of_an_earlier_run_needs_overwrite(capsys):
    assert main(["analyze", MOL, "--quiet", "-o", "confs/", "--window", "50"]) == 0
    n_before = len(list(Path("confs").glob("rank_*.xyz")))
    Path("confs/notes.txt").write_text("mine")
    proc = cli("analyze", MOL, "--quiet", "-o", "confs/", "--window", "2")
    assert proc.returncode == 2 and "--overwrite" in proc.stderr and "earlier run" in proc.stderr
    assert len(list(Path("confs").glob("rank_*.xyz"))) == n_before  # nothing touched
    assert main(["analyze", MOL, "--quiet", "-o", "confs/", "--window", "2", "--overwrite"]) == 0
    kept = json.loads(subprocess.run([sys.executable, "-m", "chairbuild", "analyze", MOL, "--quiet", "--json", "--window", "2"],
                                     capture_output=True, text=True, timeout=300).stdout)
    assert len(list(Path("confs").glob("rank_*.xyz"))) == len(kept["conformers"]) < n_before  # no stale files
    assert Path("confs/notes.txt").read_text() == "mine"  # only conformer files are replaced


def test_table_speaks_the_unit_the_ranking_and_the_conventions(outputs):
    folder, proc = outputs
    table = proc.stdout
    assert "above the 2 kcal/mol window were left out" in table  # the window in the chosen unit
    assert "atom numbers 0-based" in table
    assert FAMILY_CONVENTION in table
    header = next(line for line in table.splitlines() if line.lstrip().startswith("id "))
    assert header.split()[1] == "dE"
    from chairbuild.pipeline import analyze

    ens = analyze(MOL)
    as_g = replace(ens, ranking="free_energy")
    g_header = next(line for line in format_table(as_g).splitlines() if line.lstrip().startswith("id "))
    assert g_header.split()[1] == "dG"
    data = json.loads((folder / "m.json").read_text())
    assert any("above the 2 kcal/mol window" in n for n in data["notes"]) and data["outside_window"] > 0


def test_one_spelling_of_values_across_outputs(outputs):
    folder, proc = outputs
    spelled = "C0(C)"  # element, 0-based atom number, group
    assert spelled in proc.stdout
    report = (folder / "r.html").read_text()
    assert spelled in report and "0-based" in report and "Sign convention: " in report
    data = json.loads((folder / "m.json").read_text())
    assert any(spelled in f["label"] for f in data["families"] if "ax" in f["key"])
    assert all("start_state" in c and "origin" not in c for c in data["conformers"])
    rows = list(csv.DictReader((folder / "m.csv").open()))
    assert spelled in rows[0]["substituents"] and rows[0]["start_state"]
    sdf = list(Chem.SDMolSupplier(str(folder / "m.sdf"), removeHs=False))
    names = set(sdf[0].GetPropNames())
    assert {"relative_energy_kcal_mol", "total_charge", "multiplicity", "start_state"} <= names
    assert all(re.fullmatch(r"[A-Za-z0-9_+-]+", name) for name in names), sorted(names)
    assert spelled in sdf[0].GetProp("substituents")
