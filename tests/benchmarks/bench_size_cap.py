"""Benchmark: time and peak memory of the reduced search on molecules beyond the size cap.

Each case runs in its own Python process (so that its peak resident memory, ``ru_maxrss``
of the child, is its own): a cyclohexanol carrying an oligo(ethylene glycol) chain of 10,
24 and 48 units (35, 77 and 152 heavy atoms; 32, 74 and 146 rotatable bonds), analysed
with ``reduced_search=True`` at the default level on one thread. Printed side by side:
heavy atoms, rotors, the exact rotamer count the full product would have, starting
structures, minimisations, wall time and peak RSS, and the memory held by the starting
structures themselves (the bound documented in :mod:`chairbuild.limits`).
Run: ``make bench`` or ``python tests/benchmarks/bench_size_cap.py [UNITS ...]``.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

CHILD = textwrap.dedent(
    """
    import json, resource, sys, time
    from chairbuild.input import read_molecules
    from chairbuild.limits import count_rotamers, format_count
    from chairbuild.pipeline import analyze
    from chairbuild.rings import analyse_rings
    smiles = "O[C@H]1CC[C@H](CC1)" + "OCC" * int(sys.argv[1]) + "O"
    prepared = read_molecules(smiles)[0]
    rotors = analyse_rings(prepared.mol).rotors
    t0 = time.perf_counter()
    ens = analyze(smiles, reduced_search=True, threads=1)
    wall = time.perf_counter() - t0
    counts = ens.provenance["counts"]
    print(json.dumps({
        "heavy": prepared.mol.GetNumHeavyAtoms(), "atoms": prepared.mol.GetNumAtoms(), "rotors": len(rotors),
        "product": format_count(count_rotamers(rotors)), "starts": counts["starting_structures"],
        "minimisations": counts["minimisations"], "conformers": len(ens.conformers), "wall_s": wall,
        "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
    }))
    """
)


def main(units: list[int]) -> None:
    print(
        f"{'units':>5s} {'heavy':>5s} {'rotors':>6s} {'full product':>14s} {'starts':>6s} {'minim.':>6s} "
        f"{'confs':>5s} {'wall s':>7s} {'peak RSS MB':>11s} {'starts MB':>9s}"
    )
    for n in units:
        out = subprocess.run([sys.executable, "-c", CHILD, str(n)], capture_output=True, text=True)
        if out.returncode != 0:
            print(f"{n:5d} failed: {out.stderr.strip().splitlines()[-1]}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        starts_mb = r["starts"] * r["atoms"] * 3 * 8 / 1e6
        print(
            f"{n:5d} {r['heavy']:5d} {r['rotors']:6d} {r['product']:>14s} {r['starts']:6d} {r['minimisations']:6d} "
            f"{r['conformers']:5d} {r['wall_s']:7.1f} {r['peak_mb']:11.0f} {starts_mb:9.2f}",
            flush=True,
        )


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [10, 24, 48])
