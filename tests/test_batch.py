"""Checks of ``chairbuild batch`` / :func:`chairbuild.analyze_many`: no row lost, kill and resume,
identical tables on local workers and on a Dask cluster, input readers, store bookkeeping.

The batch machinery must not change any result: the figures of a row are compared with
:func:`chairbuild.analyze` of the same molecule in this process, and the tables of different
runs (worker counts, scheduler, interrupted + resumed) are compared exactly, timing columns
(:data:`chairbuild.batch.export.TIMING_COLUMNS`) left out of the comparison.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest

from chairbuild.batch.export import TIMING_COLUMNS
from chairbuild.batch.records import RowStatus, content_key, read_records, records_from_molecules, status_of_exception
from chairbuild.batch.store import STORE_NAME, Store, open_store
from chairbuild.cli import main
from chairbuild.errors import ChairbuildError, InputError, OptionError

DATA = Path(__file__).resolve().parent / "data"
MIXED = DATA / "batch_mixed.smi"
SMALL = DATA / "batch_small.smi"
FAST = ["--no-twist-boats", "--quiet"]


def _comparable(df: pd.DataFrame) -> pd.DataFrame:
    return df.drop(columns=[c for c in TIMING_COLUMNS if c in df.columns]).reset_index(drop=True)


def _tables(folder) -> tuple[pd.DataFrame, pd.DataFrame]:
    with open_store(folder) as reader:
        return _comparable(reader.summary()), _comparable(reader.families())


def _expected_status(smiles: str) -> RowStatus:
    """Status of a molecule analysed directly (what its batch row must say)."""
    from chairbuild import analyze

    try:
        analyze(smiles, twist_boats=False, threads=1)
    except ChairbuildError as exc:
        return status_of_exception(exc)
    return RowStatus.OK


# ------------------------------------------------------------------ no row lost
def test_mixed_batch_every_row_present_in_order_with_its_status():
    faults = {24: "exit", 25: "segv", 26: "kill", 27: "convergence"}
    argv = ["batch", str(MIXED), "--out", "mixed", "--workers", "2", "--timeout", "5", "--per-molecule", "sdf", *FAST]
    for index, kind in faults.items():
        argv += ["--test-fault", f"{index}={kind}"]
    assert main(argv) == 1  # some rows failed
    records = read_records(MIXED)
    assert len(records) == 30
    csv = pd.read_csv("mixed/summary.csv", keep_default_na=False)
    parquet = pd.read_parquet("mixed/summary.parquet")
    assert list(csv["index"]) == list(range(30)) == list(parquet["index"])
    assert list(csv["name"]) == [r.name for r in records] == list(parquet["name"])
    expected = {r.index: RowStatus.OK for r in records}
    expected.update({12: RowStatus.BAD_INPUT, 13: RowStatus.BAD_INPUT, 14: RowStatus.BAD_INPUT, 15: RowStatus.UNTYPABLE,
                     16: RowStatus.BAD_INPUT, 18: RowStatus.TIMEOUT, 24: RowStatus.CRASHED, 25: RowStatus.CRASHED,
                     26: RowStatus.CRASHED, 27: RowStatus.NOT_CONVERGED, 28: RowStatus.BAD_INPUT})
    # a radical is analysed or refused depending on the ranking level's rules: the same as analyze() says
    expected[17] = _expected_status(records[17].payload)
    assert {i: RowStatus.parse(s) for i, s in zip(csv["index"], csv["status"])} == expected
    assert list(parquet["status"]) == list(csv["status"])
    for i, status in expected.items():
        error = csv.loc[i, "error"]
        assert (error == "") == (status is RowStatus.OK), (i, error)
        assert "\n" not in error
    assert "SIGSEGV" in csv.loc[25, "error"] and "SIGKILL" in csv.loc[26, "error"] and "status 70" in csv.loc[24, "error"]
    assert "invalid SMILES" in csv.loc[12, "error"] and "diastereomers" in csv.loc[16, "error"]
    assert "too large for the systematic search" in csv.loc[28, "error"]
    # the batch changes no figure: row 1 equals analyze() in this process
    from chairbuild import analyze

    ens = analyze("CC1CCCCC1", name="methylcyclohexane", twist_boats=False, threads=1)
    chairs = sorted((f for f in ens.families if "chair" in f.key), key=lambda f: -f.population)
    assert parquet.loc[1, "n_conformers"] == len(ens.conformers)
    assert parquet.loc[1, "ring0_major_population"] == pytest.approx(chairs[0].population, abs=1e-12)
    assert parquet.loc[1, "ring0_second_dG_kj"] == pytest.approx(chairs[1].delta_g, abs=1e-9)
    assert float(csv.loc[1, "ring0_second_dG_kj"]) == parquet.loc[1, "ring0_second_dG_kj"]
    with open_store("mixed") as reader:
        assert reader.ensemble(1).to_dict()["families"] == ens.to_dict()["families"]
        assert reader.ensemble(12) is None
    # per-molecule SDF files: one per analysed row, every conformer in it
    from rdkit import Chem

    ok_rows = [i for i, s in expected.items() if s is RowStatus.OK]
    assert sorted(int(p.stem) for p in Path("mixed/molecules").glob("*.sdf")) == ok_rows
    n_sdf = sum(1 for _ in Chem.SDMolSupplier("mixed/molecules/00001.sdf", removeHs=False))
    assert n_sdf == parquet.loc[1, "n_conformers"]


# --------------------------------------------------------------- reference run
@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """An uninterrupted run of the small set on one local worker (chairs only, to keep it short)."""
    folder = tmp_path_factory.mktemp("reference") / "out"
    assert main(["batch", str(SMALL), "--out", str(folder), "--workers", "1", *FAST]) == 0
    return _tables(folder)


def _rows_done(store: Path) -> int:
    if not store.exists():
        return 0
    try:
        conn = sqlite3.connect(str(store), timeout=1)
        try:
            return conn.execute("SELECT count(*) FROM records WHERE status != 'pending'").fetchone()[0]
        finally:
            conn.close()
    except sqlite3.OperationalError:  # tables not created yet
        return 0


def test_killed_batch_resumes_to_the_uninterrupted_tables(reference):
    store = Path("killed") / STORE_NAME
    cmd = [sys.executable, "-m", "chairbuild", "batch", str(SMALL), "--out", "killed", "--workers", "2", *FAST]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        deadline = time.monotonic() + 120
        while _rows_done(store) < 3 and time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.05)
        os.kill(proc.pid, signal.SIGKILL)  # the driver, by a real signal
        proc.wait(timeout=30)
    finally:
        try:  # the driver's own worker processes, orphaned by the kill
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    done = _rows_done(store)
    assert 3 <= done < 24, f"the kill came too late or too early ({done} rows done)"
    assert main(["batch", str(SMALL), "--out", "killed", "--workers", "2", "--resume", *FAST]) == 0
    summary, families = _tables("killed")
    pd.testing.assert_frame_equal(summary, reference[0])
    pd.testing.assert_frame_equal(families, reference[1])
    with open_store("killed") as reader:
        log = reader.computations()
        runs = reader.runs()
    assert sorted(log["idx"]) == list(range(24)), "a row was computed twice, or not at all"
    assert list(runs["n_computed"]) == [done, 24 - done]


def test_dask_cluster_gives_the_same_tables_as_local_workers(reference):
    from distributed import LocalCluster

    import chairbuild

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        run = chairbuild.analyze_many(SMALL, out="cluster", scheduler=cluster.scheduler_address, twist_boats=False)
        results = list(run)
    assert [r.index for r in results] == list(range(24)) and all(r.ok for r in results)
    summary, families = _tables("cluster")
    pd.testing.assert_frame_equal(summary, reference[0])
    pd.testing.assert_frame_equal(families, reference[1])
    with open_store("cluster") as reader:
        assert reader.runs()["scheduler"].iloc[0] == cluster.scheduler_address


# ----------------------------------------------------------- fast: no compute
def test_store_keeps_rows_with_the_same_key_and_resets_the_rest():
    recs = records_from_molecules(["CC1CCCCC1", "OC1CCCCC1", "NC1CCCCC1"])
    keys = [f"k{i}" for i in range(3)]
    store = Store("s")
    assert store.begin_run(recs, keys, {}, "python", "1", None) == [0, 1, 2]
    for i, status in ((0, "ok"), (1, "timeout")):
        store.write_result(i, keys[i], {"status": status, "error": "" if status == "ok" else "slow"})
    store.close()
    with pytest.raises(OptionError, match="--resume"):
        Store("s")
    store = Store("s", resume=True)
    assert store.begin_run(recs, keys, {}, "python", "1", None) == [2]  # pending only
    assert store.begin_run(recs, keys, {}, "python", "1", None, retry=("timeout",)) == [1, 2]
    assert store.begin_run(recs[:2], ["k0", "changed"], {}, "python", "1", None) == [1]
    assert store.conn.execute("SELECT count(*) FROM records").fetchone()[0] == 2  # row 2 left the input
    store.close()


def test_content_key_follows_result_options_not_threads():
    from chairbuild.pipeline import _options

    rec = records_from_molecules(["CC1CCCCC1"])[0]
    from chairbuild.batch.records import result_options

    base = content_key(rec, result_options(_options({})), "0.1.0")
    assert content_key(rec, result_options(_options({"threads": 4, "progress": True})), "0.1.0") == base
    assert content_key(rec, result_options(_options({"temperature": 310.0})), "0.1.0") != base
    assert content_key(rec, result_options(_options({})), "0.2.0") != base
    other_order = records_from_molecules(["C1CCCCC1C"])[0]  # same molecule, other atom order
    assert content_key(other_order, result_options(_options({})), "0.1.0") != base


def test_readers_csv_tsv_sdf_and_smiles_file():
    Path("t.csv").write_text("id,structure,note\nA,CC1CCCCC1,x\nB,not-a-smiles,y\n\nC,OC1CCCCC1,z\n")
    recs = read_records("t.csv", smiles_column="structure")
    assert [(r.index, r.name, r.input_smiles, bool(r.error)) for r in recs] == [
        (0, "A", "CC1CCCCC1", False), (1, "B", "not-a-smiles", True), (2, "C", "OC1CCCCC1", False)]
    Path("t.tsv").write_text("SMILES\tName\nCC1CCCCC1\tmethyl\n")
    assert [(r.name, r.location) for r in read_records("t.tsv")] == [("methyl", "line 2")]
    with pytest.raises(InputError, match="no column 'smi'"):
        read_records("t.tsv", smiles_column="smi")
    Path("no.csv").write_text("a,b\n1,2\n")
    with pytest.raises(InputError, match="no SMILES column"):
        read_records("no.csv")
    from rdkit import Chem
    from rdkit.Chem import AllChem

    mol = Chem.AddHs(Chem.MolFromSmiles("C[C@H]1CC[C@@H](O)CC1"))
    AllChem.EmbedMolecule(mol, randomSeed=7)
    mol.SetProp("_Name", "trans-4-methylcyclohexanol")
    block = Chem.MolToMolBlock(mol)
    broken = "broken\n  made by hand\n\n  1  0  0  0  0  0  0  0  0  0999 V2000\n    0.0 0.0 0.0 Qq  0\nM  END\n"
    Path("t.sdf").write_text(block + "$$$$\n" + broken + "$$$$\n" + block + "$$$$\n")
    recs = read_records("t.sdf")
    assert [r.location for r in recs] == ["record 1", "record 2", "record 3"]
    assert recs[0].name == "trans-4-methylcyclohexanol" and not recs[0].error
    assert recs[0].input_smiles == Chem.MolToSmiles(Chem.MolFromSmiles("C[C@H]1CC[C@@H](O)CC1"))  # stereo from 3D
    assert "not a valid molecule" in recs[1].error
    Path("t.smi").write_text("# header\n\nCC1CCCCC1 methyl cyclohexane\nOC1CCCCC1\n")
    assert [(r.name, r.location) for r in read_records("t.smi")] == [("methyl cyclohexane", "line 3"), ("OC1CCCCC1", "line 4")]
    Path("empty.smi").write_text("# nothing\n")
    with pytest.raises(InputError, match="no molecule record"):
        read_records("empty.smi")


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "exclude each other"),
        (["--tables", "xlsx"], "unknown table format"),
        (["--per-molecule", "pdb"], "unknown per-molecule format"),
        (["--retry-failed"], "applies with --resume"),
        (["--temperature", "-3"], "must be positive"),
        (["--test-fault", "1=melt"], "unknown test fault"),
    ],
)
def test_bad_invocation_exits_2_before_any_work(extra, message, capsys):
    Path("in.smi").write_text("CC1CCCCC1\n")
    with pytest.raises(SystemExit) as info:
        raise SystemExit(main(["batch", "in.smi", "--out", "o", *extra]))
    assert info.value.code == 2
    assert message in capsys.readouterr().err
    assert not Path("o/summary.csv").exists()


def test_existing_store_needs_resume_or_overwrite(capsys):
    Path("in.smi").write_text("xx(\n")  # unparsable: its row is written by the driver, no worker started
    assert main(["batch", "in.smi", "--out", "o", "--quiet"]) == 1
    assert main(["batch", "in.smi", "--out", "o", "--quiet"]) == 2
    assert "--resume" in capsys.readouterr().err
    assert main(["batch", "in.smi", "--out", "o", "--overwrite", "--quiet"]) == 1
    assert main(["batch", "missing.smi", "--out", "o2"]) == 2
