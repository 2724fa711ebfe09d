"""Benchmark: the slow class (fused saturated bicyclic amines with several N-H), old search against new.

Molecules of our own: saturated diaza-bicycles with two or three N-H, carrying an amide-linked
piperidine or tetrahydropyran (18-27 heavy atoms). Each is analysed at the default level
(MMFF94, one thread) twice in this run, each time in a fresh process: with the search as it
was at commit ``11b69ee`` (rebuilt from git into a temporary directory) and with the
working tree's. Printed side by side: wall time, minimisations and conformers of each, the
speed-up, and how many minima within 12 kJ/mol of RDKit's ETKDG(500) + MMFF94 reference
(tests/etkdg_reference.py) each one misses. Target: at least 3x faster with no minimum missed.
Run: ``make bench`` or ``python tests/benchmarks/bench_slow_class.py [SMILES ...]``.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
BASELINE_COMMIT = "11b69ee"

SLOW_CLASS = (
    ("piperidine amide of a diazadecalin amine", "C1C[C@@H]2CNC[C@H](NC(=O)C3CCNCC3)[C@@H]2CN1"),
    ("piperidine amide of a naphthyridine amine", "O=C(N[C@@H]1CCN[C@H]2CCCN[C@@H]12)C1CCNCC1"),
    ("hydroxymethyl diazadecalin, THP amide", "OC[C@H]1CN[C@@H]2CCN[C@@H](CNC(=O)C3CCOCC3)[C@H]2C1"),
    ("triaza-decalin bis-amide", "NC(=O)[C@@H]1CC[C@H]2CNC[C@@H](C(=O)NC3CCNCC3)[C@H]2N1"),
)

CHILD = """
import json, sys, time
sys.path.insert(0, sys.argv[2])
from etkdg_reference import missing_minima
from chairbuild.pipeline import analyze
import pickle
t0 = time.perf_counter()
ens = analyze(sys.argv[1], threads=1)
wall = time.perf_counter() - t0
reference, achiral = pickle.load(open(sys.argv[3], "rb"))
missing = missing_minima(ens, reference, achiral)
print(json.dumps({"wall": wall, "minimisations": ens.provenance["counts"]["minimisations"],
                  "conformers": len(ens.conformers),
                  "missing": [round(m.energy_kj - reference.minima[0].energy_kj, 2) for m in missing]}))
"""


def _baseline_tree(tmp: Path) -> Path | None:
    """The package as it was at BASELINE_COMMIT, importable from the returned directory."""
    out = tmp / "baseline"
    out.mkdir()
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", BASELINE_COMMIT], capture_output=True)
    if archive.returncode != 0:
        return None
    subprocess.run(["tar", "-x", "-C", str(out)], input=archive.stdout, check=True)
    (out / "forcefields").rename(out / "chairbuild" / "forcefields")  # installed as chairbuild.forcefields
    return out


def _run(smiles: str, reference_file: Path, pythonpath: Path | None) -> dict:
    env = None
    if pythonpath is not None:
        import os

        env = dict(os.environ, PYTHONPATH=str(pythonpath))
    out = subprocess.run(
        [sys.executable, "-c", CHILD, smiles, str(HERE.parent), str(reference_file)],
        capture_output=True, text=True, env=env, cwd=str(reference_file.parent),
    )
    if out.returncode != 0:
        return {"error": out.stderr.strip().splitlines()[-1]}
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(cases) -> None:
    import pickle

    sys.path.insert(0, str(HERE.parent))
    from etkdg_reference import etkdg_reference

    from chairbuild.input import read_molecules

    with tempfile.TemporaryDirectory() as tmp_name:
        tmp = Path(tmp_name)
        baseline = _baseline_tree(tmp)
        print(f"old search: commit {BASELINE_COMMIT}" + ("" if baseline else " (not available: no git history)"))
        print(f"{'molecule':42s} {'heavy':>5s} {'ETKDG':>5s} | {'old s':>7s} {'min.':>5s} {'miss':>4s} | "
              f"{'new s':>7s} {'min.':>5s} {'miss':>4s} | {'speed-up':>8s}")
        for name, smiles in cases:
            prepared = read_molecules(smiles)[0]
            reference = etkdg_reference(prepared.mol, n=500, seed=42, window_kj=12.0, achiral=prepared.achiral)
            ref_file = tmp / "reference.pkl"
            ref_file.write_bytes(pickle.dumps((reference, prepared.achiral)))
            old = _run(smiles, ref_file, baseline) if baseline else {"error": "no baseline"}
            new = _run(smiles, ref_file, None)

            def cells(r: dict) -> str:
                if "error" in r:
                    return f"{'error':>7s} {'':>5s} {'':>4s}"
                return f"{r['wall']:7.1f} {r['minimisations']:5d} {len(r['missing']):4d}"

            ratio = old["wall"] / new["wall"] if "wall" in old and "wall" in new else float("nan")
            print(f"{name[:42]:42s} {prepared.mol.GetNumHeavyAtoms():5d} {len(reference.minima):5d} | {cells(old)} | "
                  f"{cells(new)} | {ratio:8.2f}", flush=True)
            for label, r in (("old", old), ("new", new)):
                if r.get("missing"):
                    print(f"    {label} misses ETKDG minima at {r['missing']} kJ/mol")


if __name__ == "__main__":
    args = sys.argv[1:]
    main([(s, s) for s in args] if args else SLOW_CLASS)
