"""Write (and optionally execute) the worked-study notebooks of the gallery.

Every notebook is generated here with nbformat, so the gallery is reproducible:

    python gallery/make_gallery.py             # write the notebooks without outputs
    python gallery/make_gallery.py --execute   # write and run them (nbclient), saving outputs
    python gallery/make_gallery.py --screenshot  # also render an HTML report in headless
                                                 # Chromium to gallery/report_screenshot.png

The scenarios are invented for this gallery; the numbers in the notebooks are model
estimates computed when the notebook runs.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent

CAVEAT = (
    "**Model estimates.** Every energy and population here comes from the MMFF94 force field "
    "for an isolated molecule (no solvent, no counter-ions) and a Boltzmann weighting of the minima "
    "chairbuild found. Treat them as a ranked hypothesis: confirm any decision that rests on them by "
    "experiment (for example low-temperature NMR, coupling constants, crystal structures) or by a "
    "higher-level calculation with solvent."
)

PLOTS = """from IPython.display import Image, display
from chairbuild.plots import (additive_vs_model_figure, energy_population_figure,
                              family_temperature_figure, figure_png)

for fig in (energy_population_figure(ens), family_temperature_figure(ens), additive_vs_model_figure(ens)):
    display(Image(figure_png(fig, dpi=80)))"""


#: Columns of ``Ensemble.families_dataframe()`` shown in the notebooks.
FAMILY_COLUMNS = (
    '["ring_index", "label", "population", "delta_g_kJ_mol", "K", '
    '"additive_energy_kJ_mol", "model_energy_kJ_mol", "disagreement", "additive_partial"]'
)


def family_summary(*names: str) -> str:
    """Code that displays each ensemble's family table (one DataFrame per ensemble)."""
    return "\n".join(f"display({var}.families_dataframe()[{FAMILY_COLUMNS}].round(3))" for var in names)


@dataclass(frozen=True)
class Study:
    """One notebook: file name and its cells as (kind, source) pairs."""

    file_name: str
    cells: tuple[tuple[str, str], ...]


def _studies() -> list[Study]:
    lock = Study(
        "01_tert_butyl_lock.ipynb",
        (
            ("md", """# Holding a fluoromethyl group axial with a tert-butyl lock

**Scenario (invented for this gallery).** A probe team wants a CH2F group that points *along* the
normal of a cyclohexane ring, so that its C–F bond sits perpendicular to the ring's mean plane. On its
own, fluoromethylcyclohexane spends most of its time with the CH2F group equatorial. The proposal is to
put a tert-butyl group *cis*-1,4 to it: the tert-butyl group should stay equatorial and force the CH2F
group axial. How complete is that lock according to the force field, and what is left of the other chair
and of the twist-boats?

We analyse the unlocked compound and the locked one side by side."""),
            ("code", """import warnings

import chairbuild
from chairbuild.output import format_table

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

free = chairbuild.analyze("FCC1CCCCC1", name="fluoromethylcyclohexane")
locked = chairbuild.analyze("FC[C@H]1CC[C@@H](C(C)(C)C)CC1", name="cis-1-tert-butyl-4-(fluoromethyl)cyclohexane")
print(format_table(free))"""),
            ("code", "print(format_table(locked))"),
            ("md", """The family tables group conformers by ring state: every rotamer of the same chair counts towards
one family. `pop %` is the summed Boltzmann population at 298 K; `additive` is the estimate from
tabulated increments (A-values), `model` the force-field value, both relative to the ring's lowest
additive chair family."""),
            ("code", family_summary("free", "locked")),
            ("md", "### Plots for the locked compound\nRelative energy and population per conformer, family populations re-weighted between 150 and 400 K, and force field against additive estimate per chair family."),
            ("code", "ens = locked\n" + PLOTS),
            ("md", """### 3D view
Labels mark each ring substituent axial (`ax`, orange) or equatorial (`eq`, teal); pink spheres are
the axial hydrogens syn-1,3 to an axial substituent, the contacts that make axial groups costly. The
title gives the conformer's relative energy and population."""),
            ("code", "chairbuild.view(locked, conformer=0, width=640, height=420)"),
            ("md", "Stepping through the conformers in energy order, without widgets: each call returns the next view."),
            ("code", """from chairbuild.viewer import ConformerBrowser

browser = ConformerBrowser(locked, torsion_labels=True, width=640, height=420)
print(browser.summary())
browser.next()"""),
            ("md", """## What to conclude

* In the unlocked compound the equatorial-CH2F chair dominates, but the axial chair is not negligible:
  the force field puts a minority population there (see the first family table). Its disagreement
  flag comes with "additive estimate partial": the increments table has no value for CH2F, so only the
  force-field column means something for this group.
* With the *cis* tert-butyl group, the chair with **CH2F axial and tert-butyl equatorial** carries
  essentially all of the population; the flipped chair (tert-butyl axial) and the twist-boats sit more
  than 15 kJ/mol higher and together stay well below one per cent at room temperature.
* The temperature plot shows the lock holding over the whole 150–400 K range on these fixed energies.
* For the probe this means the ring geometry is settled; what remains open is the CH2F rotamer, which the
  ensemble lists as separate conformers of the same chair.

""" + CAVEAT),
        ),
    )
    crowded = Study(
        "02_crowded_ring_additivity.ipynb",
        (
            ("md", """# A crowded ring where the increments fail

**Scenario (invented for this gallery).** A lipophilic core, 1-isopropyl-2,2,3-trimethylcyclohexane, is
being considered as a rigid hydrophobic piece. A quick estimate from tabulated increments (A-values,
gauche-butane and syn-diaxial terms) says the two chairs are close in energy, so the core would be a
mixture. Does the explicit ensemble agree?

Several crowded candidates were screened while preparing this study; this one was kept because every
increment it needs is in the table, yet the family table still flags a disagreement, which makes it
a clean case of non-additivity rather than of a missing value."""),
            ("code", """import warnings

import chairbuild
from chairbuild.output import format_table

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

ens = chairbuild.analyze("CC(C)[C@@H]1CCC[C@@H](C)C1(C)C", name="1-isopropyl-2,2,3-trimethylcyclohexane")
print(format_table(ens, max_rows=12))"""),
            ("code", family_summary("ens")),
            ("md", "### The additive breakdown of each chair family\nEach increment, the atoms it refers to and the source of its value:"),
            ("code", """for fam in ens.families:
    if fam.additive_energy is None:
        continue
    print(f"{fam.label}: additive {fam.additive_energy:.2f}, force field {fam.model_energy:.2f} kJ/mol")
    for term in fam.additive_terms:
        print(f"    {term.kind:<14} atoms {term.atoms}  {term.value:+6.2f} kJ/mol   [{term.source[:70]}]")"""),
            ("code", PLOTS),
            ("md", "### 3D view\nThe lowest conformer, then all conformers overlaid on the ring atoms (the labelled one drawn in full)."),
            ("code", "chairbuild.view(ens, conformer=0, torsion_labels=True, width=640, height=420)"),
            ("code", "chairbuild.view(ens, conformer=0, overlay=True, show_hydrogens='none', width=640, height=420)"),
            ("md", """## What to conclude

* The increments put the two chair families within a few kJ/mol of each other; the force field puts the
  flipped family much higher, and the family table flags the gap (`<< additive estimate disagrees`,
  threshold 2 kJ/mol).
* The reason is visible in 3D: the isopropyl group is wedged between the gem-dimethyl carbon and the ring,
  so its rotamers cannot relieve all contacts at once. Increments assume each interaction is independent
  and this ring violates that assumption (buttressing).
* For the design question, the core is closer to a single chair than the quick estimate suggests. Where
  a decision depends on the minor chair, do not trust either number alone.

""" + CAVEAT),
        ),
    )
    anomeric = Study(
        "03_anomeric_tetrahydropyran.ipynb",
        (
            ("md", """# An acetal that prefers its alkoxy group axial

**Scenario (invented for this gallery).** A route builds a tetrahydropyranyl acetal on a ring that
already carries a 5-methyl group. In the *cis* diastereomer one chair has both the 2-ethoxy and the
5-methyl groups equatorial, the other has both axial. A carbocyclic A-value argument says: diequatorial,
clearly. But an alkoxy group next to the ring oxygen is subject to the anomeric preference for the axial
position. What does the force field say, and how far should we trust it?

We first look at the parent 2-methoxytetrahydropyran, for which the increments table has a value, then at
the target."""),
            ("code", """import warnings

import chairbuild
from chairbuild.output import format_table

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

parent = chairbuild.analyze("CO[C@@H]1CCCCO1", name="2-methoxytetrahydropyran")
print(format_table(parent, max_rows=8))"""),
            ("code", family_summary("parent")),
            ("code", """target = chairbuild.analyze("CCO[C@@H]1CC[C@@H](C)CO1", name="cis-2-ethoxy-5-methyltetrahydropyran")
print(format_table(target, max_rows=10))"""),
            ("code", family_summary("target")),
            ("code", "ens = target\n" + PLOTS),
            ("code", "chairbuild.view(target, conformer=0, width=640, height=420)"),
            ("md", """## What to conclude

* For 2-methoxytetrahydropyran MMFF94 puts the **axial** methoxy chair lowest, the opposite of the
  increment estimate, which only knows the carbocyclic A-value of OCH3; the family table flags the
  disagreement. The direction matches the known anomeric preference of 2-alkoxy-tetrahydropyrans.
* For the *cis*-2-ethoxy-5-methyl target the force field still favours the chair with **both groups
  axial**: the anomeric preference outweighs the methyl group's equatorial preference in this model. The
  increments table has no entry for OEt at this position, so the additive column is partial here.
* How large the preference is remains uncertain. These are gas-phase force-field numbers; the anomeric
  preference is known to shrink in polar solvents, and MMFF94 reproduces it through parameterised
  torsions and electrostatics, not through the orbital interactions usually invoked for it. Before relying on
  the diaxial chair (for example for a coupling-constant assignment), check it by NMR (H2 coupling
  constants) or with a solvated quantum-chemical calculation.

""" + CAVEAT),
        ),
    )
    fused = Study(
        "04_fused_decalin.ipynb",
        (
            ("md", """# Choosing a rigid spacer: trans- or cis-fused methoxydecalin

**Scenario (invented for this gallery).** Two bicyclic spacers carry a methoxy group at C2 of a decalin:
one with a *trans* ring fusion, one with a *cis* fusion. The spacer is supposed to hold the methoxy
group in one orientation. Which fusion does that, according to the force field?

Both rings of a decalin are analysed: every chair and twist-boat state of each ring, with families
reported per ring. The ring-fusion bonds appear as substituents of the other ring."""),
            ("code", """import warnings

import chairbuild
from chairbuild.output import format_table

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

trans = chairbuild.analyze("CO[C@H]1CC[C@@H]2CCCC[C@H]2C1", name="trans-fused 2-methoxydecalin")
cis = chairbuild.analyze("CO[C@@H]1CC[C@@H]2CCCC[C@@H]2C1", name="cis-fused 2-methoxydecalin")
print(format_table(trans, max_rows=8))"""),
            ("code", "print(format_table(cis, max_rows=8))"),
            ("code", family_summary("trans", "cis")),
            ("code", "ens = cis\n" + PLOTS),
            ("md", "### 3D view of the cis-fused spacer\nThe lowest chair-chair form, then the two chair-chair forms overlaid on the ring atoms."),
            ("code", "chairbuild.view(cis, conformer=0, width=640, height=420)"),
            ("code", "chairbuild.view(cis, conformer=0, overlay=True, show_hydrogens='none', width=640, height=420)"),
            ("md", """## What to conclude

* The *trans*-fused spacer is locked: a ring flip would need the fusion bonds axial, which a trans fusion
  cannot accommodate in a chair-chair form, so the methoxy group keeps one orientation apart from its own
  rotamers.
* The *cis*-fused spacer has two chair-chair forms that interconvert by a double ring flip. The methoxy
  group is equatorial in one and axial in the other; the family tables give their populations, and the
  minor form is not negligible at room temperature.
* The disagreement flags in the cis-fused tables come with "additive estimate partial": the increments
  table has no terms for ring-fusion bonds, so the additive column is incomplete for decalins and the
  force-field column is the one to read.
* For a spacer meant to hold one vector, the trans fusion is the safer choice on this evidence.

""" + CAVEAT),
        ),
    )
    return [lock, crowded, anomeric, fused]


def build_notebook(study: Study):
    """The nbformat notebook of one study (no outputs)."""
    import nbformat

    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    for kind, source in study.cells:
        cell = nbformat.v4.new_markdown_cell(source) if kind == "md" else nbformat.v4.new_code_cell(source)
        nb.cells.append(cell)
    for k, cell in enumerate(nb.cells):
        cell["id"] = f"cell-{k:02d}"  # stable ids: regenerating gives the same file
    return nb


def execute(nb, workdir: Path, timeout: int = 300):
    """Run a notebook top to bottom in a fresh kernel (nbclient)."""
    from nbclient import NotebookClient

    client = NotebookClient(nb, timeout=timeout, kernel_name="python3", resources={"metadata": {"path": str(workdir)}})
    client.execute()
    return nb


def screenshot(target: Path) -> Path:
    """Render an HTML report of two studies in headless Chromium and save a PNG screenshot."""
    import chairbuild
    from chairbuild.report import write_report

    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        raise SystemExit("chromium is not installed")
    ens = chairbuild.analyze("FC[C@H]1CC[C@@H](C(C)(C)C)CC1", name="cis-1-tert-butyl-4-(fluoromethyl)cyclohexane")
    with tempfile.TemporaryDirectory() as tmp:
        report = write_report(ens, Path(tmp) / "report.html")
        subprocess.run(
            [exe, "--headless", "--no-sandbox", "--enable-unsafe-swiftshader", "--use-angle=swiftshader",
             "--disable-background-networking", "--disable-component-update", "--disable-sync", "--no-first-run",
             "--hide-scrollbars", f"--user-data-dir={Path(tmp) / 'profile'}", f"--screenshot={target}",
             "--window-size=1200,1600", "--virtual-time-budget=8000", report.resolve().as_uri()],
            check=True, capture_output=True, timeout=180,
        )
    return target


def main(argv: list[str] | None = None) -> int:
    """Write the notebooks; with --execute run them and save outputs."""
    import nbformat

    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--execute", action="store_true", help="run each notebook and save its outputs")
    parser.add_argument("--screenshot", action="store_true", help="write gallery/report_screenshot.png")
    parser.add_argument("--only", default="", help="only notebooks whose file name contains this text")
    args = parser.parse_args(argv)
    for study in _studies():
        if args.only and args.only not in study.file_name:
            continue
        nb = build_notebook(study)
        if args.execute:
            t0 = time.perf_counter()
            execute(nb, HERE)
            print(f"{study.file_name}: executed in {time.perf_counter() - t0:.1f} s")
        path = HERE / study.file_name
        nbformat.write(nb, str(path))
        print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KiB)")
    if args.screenshot:
        print(f"wrote {screenshot(HERE / 'report_screenshot.png')}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
