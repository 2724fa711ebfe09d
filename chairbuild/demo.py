"""The built-in demonstration scenario (invented for the demo; no value here is a check value).

Scenario: a fragment team must choose between the two diastereomers of a
3-fluoro-4-methylpiperidine building block. The question is where the fluorine sits
in each: axial or equatorial, and how firmly, since that decides the vector the
fragment presents. Both isomers are analysed and written to the output directory.
"""

from __future__ import annotations

import sys
from pathlib import Path

__all__ = ["DEMO_MOLECULES", "run_demo"]

#: (name, SMILES) of the demo scenario.
DEMO_MOLECULES: tuple[tuple[str, str], ...] = (
    ("3-fluoro-4-methylpiperidine, (3R,4S) isomer", "F[C@@H]1CNCC[C@@H]1C"),
    ("3-fluoro-4-methylpiperidine, (3S,4S) isomer", "F[C@H]1CNCC[C@@H]1C"),
)


def run_demo(output_dir: str = "demo-output", progress: bool = False, quiet: bool = False) -> int:
    """Analyse the demo molecules, print their tables and write SDF/JSON/XYZ files.

    The demo replaces its own earlier files in ``output_dir``; ``quiet`` drops the
    "wrote FILE" lines on stderr.
    """
    from chairbuild.output import format_table, write
    from chairbuild.pipeline import analyze

    from chairbuild.report import write_report

    out = Path(output_dir)
    ensembles = []
    print(__doc__.strip().split("\n\n")[1].replace("\n", " "), end="\n\n")
    for k, (name, smiles) in enumerate(DEMO_MOLECULES, start=1):
        ens = analyze(smiles, name=name, progress=progress)
        ensembles.append(ens)
        print(format_table(ens))
        print()
        # the same ensemble re-scored with GFN2-xTB in water (single points at the MMFF geometries)
        wet = analyze(smiles, name=name, progress=progress, rerank="gfn2", solvent="water")
        print(f"re-ranked with {wet.method}: chair families of ring 0")
        for fam in wet.families:
            if fam.ring_index == 0 and ":chair[" in fam.key:
                print(f"  {100 * fam.population:6.2f} %  dG {fam.delta_g:6.2f} kJ/mol  {fam.label}")
        print()
        for suffix in (".sdf", ".json"):
            for path in write(ens, str(out / f"isomer_{k}{suffix}")):
                if not quiet:
                    print(f"wrote {path}", file=sys.stderr)
        write(ens, str(out / f"isomer_{k}_xyz") + "/", overwrite=True)
        counts = ens.provenance["counts"]
        timing = ens.provenance["timings"]["total_s"]
        print(
            f"[{counts['starting_structures']} starting structures, {counts['minimisations']} minimisations, "
            f"{counts['distinct_minima']} distinct minima, {timing:.1f} s]\n"
        )
    print(f"wrote {write_report(ensembles, str(out / 'report.html'))} (open it in a browser)")
    print(
        "These are model estimates (MMFF94 in the gas phase; GFN2-xTB with implicit water); confirm decisions "
        "by experiment or higher-level calculation."
    )
    return 0
