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
    '"additive_energy_kJ_mol", "additive_uncertainty_kJ_mol", "model_energy_kJ_mol", "disagreement", "additive_status"]'
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
tabulated increments (A-values), `model` the force-field value, both relative to the ring's reference
family (the chair family with the lowest complete additive estimate); where a family has no additive
number, `additive_status` says why (`increment unknown`, `no increments known`)."""),
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
  the force field puts a minority population there (see the first family table). Its additive column
  says `none` ("no increments known"): the increments table has no value for CH2F, so nothing is
  compared and only the force-field column means something for this group.
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
            ("md", """# A crowded ring where the increments fail, and two heterocycles

**Scenario (invented for this gallery).** A lipophilic core, 1-isopropyl-2,2,3-trimethylcyclohexane, is
being considered as a rigid hydrophobic piece. A quick estimate from tabulated increments (A-values,
gauche-butane and syn-diaxial terms) says the two chairs are close in energy, so the core would be a
mixture. Does the explicit ensemble agree?

Several crowded candidates were screened while preparing this study; this one was kept because every
increment it needs is in the table, yet the family table still flags a disagreement, which makes it
a clean case of non-additivity rather than of a missing value.

The same team also needs two heterocyclic pieces, looked at in the second half: an acetonide-protected
diol, where the increment that belongs to the ring and position makes the estimate agree with the force
field, and an aryl piperidinol, where additivity fails even so."""),
            ("code", """import math
import warnings

import chairbuild
from chairbuild.constants import rt_kj
from chairbuild.families import DISAGREEMENT_KJ
from chairbuild.forcefields.additive import load_increments
from chairbuild.output import format_table

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

ens = chairbuild.analyze("CC(C)[C@@H]1CCC[C@@H](C)C1(C)C", name="1-isopropyl-2,2,3-trimethylcyclohexane")
print(format_table(ens, max_rows=12))"""),
            ("code", family_summary("ens")),
            ("md", """### The additive breakdown of each chair family
Each increment with the table row it comes from (its key), what it scores, its source with the P/S/M
flag and the conditions of the published value; a cyclohexane value standing in for a missing
ring-specific one is named as a generic fallback, and a term the table lacks is listed as unknown
(the family then gets no number and no flag)."""),
            ("code", """def breakdown(result):
    for fam in result.families:
        status = fam.additive_status.value
        if status == "none":
            continue  # not a chair family
        value = "no number" if fam.additive_energy is None else f"{fam.additive_energy:+.2f} ± {fam.additive_uncertainty:.2f}"
        model = "–" if fam.model_energy is None else f"{fam.model_energy:+.2f}"
        flag = "   << disagrees" if fam.disagreement else ""
        print(f"{fam.label}  [{status}]  additive {value}, force field {model} kJ/mol{flag}")
        for t in fam.additive_terms:
            print(f"    {t.value:+6.2f}  {t.increment:<12} {t.applies_to}")
            print(f"            {t.source}" + (f"; {t.conditions}" if t.conditions else ""))
            if t.fallback:
                print(f"            generic fallback: {t.fallback}")
        for note in fam.additive_notes:
            print(f"    {note.split(': ', 1)[-1]}")


breakdown(ens)"""),
            ("code", PLOTS),
            ("md", "### 3D view\nThe lowest conformer, then all conformers overlaid on the ring atoms (the labelled one drawn in full)."),
            ("code", "chairbuild.view(ens, conformer=0, torsion_labels=True, width=640, height=420)"),
            ("code", "chairbuild.view(ens, conformer=0, overlay=True, show_hydrogens='none', width=640, height=420)"),
            ("md", """## A heterocycle where the ring's own increment makes the estimate agree

The acetonide of a 2-methylpropane-1,3-diol is 2,2,5-trimethyl-1,3-dioxane. One C2 methyl group is axial
in either chair, so the question is the 5-methyl group. Next to the two ring oxygens an axial group has no
syn-axial hydrogens on one side, and the table has a value for a methyl group at C5 of a 1,3-dioxane."""),
            ("code", """acetonide = chairbuild.analyze("CC1(C)OCC(C)CO1", name="2,2,5-trimethyl-1,3-dioxane")
display(acetonide.families_dataframe()[""" + FAMILY_COLUMNS + """].round(3))
breakdown(acetonide)"""),
            ("md", "What the estimate would have been with cyclohexane's methyl A-value in place of the ring's own value:"),
            ("code", """table = load_increments()
axial = next(f for f in acetonide.families if f.additive_status.value == "estimated")
specific = next(t for t in axial.additive_terms if t.increment == "DIOX-C5-CH3")
generic = table.a_value("CH3")
with_generic = axial.additive_energy - specific.value + generic.value_kj
print(f"force field (MMFF94)                           {axial.model_energy:6.2f} kJ/mol")
print(f"additive, 1,3-dioxane C5 value ({specific.increment})    {axial.additive_energy:6.2f} kJ/mol, "
      f"off by {axial.model_energy - axial.additive_energy:+.2f} (flag beyond {DISAGREEMENT_KJ:.1f} + {axial.additive_uncertainty:.2f})")
print(f"additive, cyclohexane A-value ({generic.key})             {with_generic:6.2f} kJ/mol, "
      f"off by {axial.model_energy - with_generic:+.2f} (flag beyond {DISAGREEMENT_KJ:.1f} + {generic.range_kj:.2f})")"""),
            ("md", """## A heterocycle where additivity still fails

An aryl piperidinol, 1-methyl-4-phenylpiperidin-4-ol, carries a phenyl and a hydroxy group on the same
ring carbon: one of them must be axial. C4 of a piperidine is far enough from the nitrogen for the
cyclohexane A-values to stand in (named as generic fallbacks), so the estimate is the difference of the
two A-values. The chairs with the N-methyl group axial have no increment at all (the table has no value
for a methyl group on a ring nitrogen) and say so."""),
            ("code", """piperidinol = chairbuild.analyze("CN1CCC(O)(c2ccccc2)CC1", name="1-methyl-4-phenylpiperidin-4-ol")
display(piperidinol.families_dataframe()[""" + FAMILY_COLUMNS + """].round(3))
breakdown(piperidinol)"""),
            ("md", """Is the flag a matter of the force field's own A-values, or does additivity fail? The force field's
A-values of the two groups, from phenylcyclohexane and cyclohexanol analysed the same way, should add up to
its result for the geminal pair if the two groups were independent:"""),
            ("code", """def model_a_value(smiles):
    \"\"\"Force-field dG(axial - equatorial) of a monosubstituted ring, from the family populations.\"\"\"
    result = chairbuild.analyze(smiles)
    chairs = [f for f in result.families if ":chair[" in f.key]
    eq = next(f for f in chairs if f.key.endswith("[all-eq]"))
    ax = next(f for f in chairs if f is not eq)
    return -rt_kj(result.temperature) * math.log(ax.population / eq.population)


a_phenyl, a_hydroxy = model_a_value("c1ccccc1C1CCCCC1"), model_a_value("OC1CCCCC1")
phenyl_axial = next(f for f in piperidinol.families if f.additive_status.value == "estimated" and "c1ccccc1" in f.label)
print(f"force field A-values: phenyl {a_phenyl:.2f}, hydroxy {a_hydroxy:.2f} kJ/mol; if additive, "
      f"phenyl-axial chair {a_phenyl - a_hydroxy:+.2f} kJ/mol above the hydroxy-axial one")
print(f"force field, the geminal pair itself: {phenyl_axial.model_energy:+.2f} kJ/mol; "
      f"table estimate {phenyl_axial.additive_energy:+.2f} kJ/mol")"""),
            ("md", """## What to conclude

* The increments put the two chair families of the carbocyclic core within a few kJ/mol of each other;
  the force field puts the flipped family much higher, and the family table flags the gap
  (`<< additive estimate disagrees`, threshold 2 kJ/mol plus the estimate's own uncertainty).
* The reason is visible in 3D: the isopropyl group is wedged between the gem-dimethyl carbon and the ring,
  so its rotamers cannot relieve all contacts at once. Increments assume each interaction is independent
  and this ring violates that assumption (buttressing).
* For the acetonide, the 1,3-dioxane C5 value of the methyl group brings the estimate within the
  threshold of the force field; cyclohexane's methyl A-value, about twice as large, would have raised a
  flag that says nothing about the ring. The breakdown names the row used and its source; that source
  is flagged M (quoted from memory, not verified), so check it before a decision rests on the number.
* For the aryl piperidinol the estimate, built from cyclohexane A-values (named as fallbacks), puts the
  phenyl-axial chair far above the hydroxy-axial one; the force field puts the two close together. The
  force field's own A-values of phenyl and hydroxy do not add up to its geminal result either: with both
  groups on one carbon they interact with each other in a way that no sum of A-values contains. This is a
  real failure of additivity (geminal crowding), not a missing value.
* For the design questions: the carbocyclic core is closer to a single chair than the quick estimate
  suggests, the acetonide's estimate can be used as it is, and for the piperidinol neither number alone
  should decide which way the phenyl group points.

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

* For 2-methoxytetrahydropyran MMFF94 puts the **axial** methoxy chair lowest. The increment estimate
  adds the table's anomeric term for a 2-methoxy group (measured against the carbocyclic A-value of
  OCH3, which it adds beside it) and agrees on the direction, only just; the force field's preference for
  the axial chair is several kJ/mol larger, and the family table flags the size of the gap. The
  published anomeric term comes from NMR in solution, the force-field number is for the isolated molecule.
* For the *cis*-2-ethoxy-5-methyl target the force field still favours the chair with **both groups
  axial**: the anomeric preference outweighs the methyl group's equatorial preference in this model. The
  increments table has no entry for OEt at this position, so the additive column of the diaxial chair
  says `unknown` and nothing is compared.
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
* The additive columns of the decalin tables say `unknown` or `none`: the increments table has no terms
  for ring-fusion bonds, so no additive number is compared for a decalin and the force-field column is
  the one to read.
* For a spacer meant to hold one vector, the trans fusion is the safer choice on this evidence.

""" + CAVEAT),
        ),
    )
    couplings = Study(
        "05_couplings_population_fit.ipynb",
        (
            ("md", """# Which chair is in the NMR tube? Couplings fitted to populations

**Scenario (invented for this gallery).** A fluorinated amide fragment, *trans*-N-(2-fluorocyclohexyl)acetamide,
is a candidate building block. Its two chairs put the fluorine and the acetamido group either both
equatorial or both axial. The force field gives populations for both; a chemist has a ¹H NMR spectrum in
CDCl₃ and wants to know what the vicinal couplings say about the same question.

**The "measured" couplings below are made up for this demonstration.** No spectrum of this compound was
recorded or looked up: we chose values that correspond to roughly 40 % of the diaxial chair, rounded them
and moved them by a few tenths of a hertz, as a real spectrum would differ from any Karplus equation.
Every other number is computed when the notebook runs."""),
            ("code", """import tempfile
import warnings
from pathlib import Path

import chairbuild
from chairbuild.couplings.fit import fit_couplings, read_measurements
from chairbuild.couplings.tables import couplings_text

warnings.filterwarnings("ignore", message="IProgress not found")  # progress bars are off anyway

ens = chairbuild.analyze("CC(=O)N[C@@H]1CCCC[C@H]1F", name="trans-N-(2-fluorocyclohexyl)acetamide")
print(couplings_text(ens))"""),
            ("md", """The table lists every vicinal H–C–C–H coupling of the ring: its limiting value in each family (the
population-weighted mean over that family's conformers, from the Haasnoot–de Leeuw–Altona equation with the
parameter set for the number of non-hydrogen substituents on the fragment), the ensemble average ⟨J⟩, and
how much ⟨J⟩ moves per kJ/mol of the second family's ΔG. Proton labels use the atom numbers of the SMILES
(0-based): `H4` is the proton on C4, the CH–N carbon; `H9` the one on C9, the CH–F carbon; `H5ax`/`H5eq`
are the protons of the ring CH2 at C5, axial or equatorial in the dominant chair. The couplings of H4 and H9
with each other and with their CH2 neighbours change most between the two chairs: they decide the question."""),
            ("code", """measured = Path(tempfile.mkdtemp()) / "measured_couplings.csv"
measured.write_text(\"\"\"# made up for this demonstration (no spectrum was recorded); CDCl3, 298 K
proton_a,proton_b,J_Hz,uncertainty_Hz
H4,H9,6.3,0.3
H4,H5ax,8.1,0.3
H8ax,H9,7.7,0.3
H8eq,H9,4.2,0.3
\"\"\", encoding="utf-8")
for m in read_measurements(measured):
    print(f"{m.name:10s} {m.value:5.2f} ± {m.uncertainty:.2f} Hz")"""),
            ("md", """### The fit
A two-state fit keeps the two most populated families (the two chairs); the multi-state fit also lets the
twist-boat take a share. Both keep the populations between 0 and 1 and summing to 1 (weighted least
squares on the limiting couplings, weights 1/σ²); the free fit (sum only) is shown beside them. The
command line does the same with `chairbuild analyze SMILES --fit-couplings measured_couplings.csv`."""),
            ("code", """fits = [fit_couplings(ens, measured, model=m) for m in ("two-state", "multi-state")]
for fit in fits:
    print(fit.format(), end="\\n\\n")"""),
            ("md", "### Fitted beside computed populations"),
            ("code", """import numpy as np
import pandas as pd
from IPython.display import Image, display
from chairbuild.plots import coupling_temperature_figure, figure_png

two = fits[0]
display(pd.DataFrame({
    "state": two.labels,
    "fitted %": np.round(100 * np.array(two.populations), 1),
    "± %": np.round(100 * np.array(two.uncertainties), 1),
    "computed % (MMFF94)": np.round(100 * np.array(two.computed_populations), 1),
    "fitted dG (kJ/mol)": np.round(two.delta_g, 2),
    "± dG": np.round(two.delta_g_uncertainties, 2),
}))

from matplotlib.figure import Figure

fig = Figure(figsize=(6.0, 3.0))
ax = fig.subplots()
x = np.arange(len(two.states))
ax.bar(x - 0.2, 100 * np.array(two.computed_populations), 0.4, label="computed (MMFF94)")
ax.bar(x + 0.2, 100 * np.array(two.populations), 0.4, yerr=100 * np.nan_to_num(two.uncertainties), capsize=4,
       label="fitted to the couplings (made-up data)")
ax.set_xticks(x, [label.replace("chair, ", "") for label in two.labels], fontsize=8)
ax.set_ylabel("population (%)")
ax.legend(fontsize=8)
fig.tight_layout()
display(Image(figure_png(fig, dpi=80)))
pairs = [tuple(c.pair.split("–")) for c in two.couplings]
display(Image(figure_png(coupling_temperature_figure(ens, pairs=pairs), dpi=80)))"""),
            ("md", "### 3D view\nThe lowest conformer with the measured pairs labelled by their computed couplings in that conformer."),
            ("code", "chairbuild.view(ens, conformer=0, couplings=pairs, width=640, height=420)"),
            ("md", """## What to conclude

* Four couplings of the two ring protons next to the substituents pin down the chair populations: the
  fitted share of the diaxial chair comes with an uncertainty of a few per cent from the stated ±0.3 Hz
  alone (the error of the Karplus equation itself, often a few tenths of a hertz and more, is not in it).
* Set beside the fit, the force field gives the diaxial chair a smaller share than these made-up couplings
  do. With a real spectrum such a gap would mean that the isolated-molecule force field misses part of
  what stabilises the diaxial chair in the solvent (or that the limiting couplings of its geometries are
  off); the residual column shows whether one coupling alone carries the disagreement.
* The multi-state fit gives the twist-boat a share no larger than its own uncertainty: four couplings
  cannot tell a small twist-boat population from noise, while the force field puts the twist-boat far up.
  The two-state fit is the one to quote here.
* The sensitivities in the first table tell which coupling to measure most carefully: those with the largest
  d⟨J⟩/dG. The temperature plot shows how the same couplings would move on cooling, a check that
  needs no second compound.

""" + CAVEAT),
        ),
    )
    return [lock, crowded, anomeric, fused, couplings]


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
