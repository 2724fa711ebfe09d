"""Tests of chairbuild.plots.

Check values are internal-consistency checks (common practice, no source): at the
analysis temperature the re-weighted family populations must equal the families stored
in the result, and the plotted bars must be the values of the result.
"""

from __future__ import annotations

import numpy as np
import pytest

from chairbuild.errors import InputError, OptionError
from chairbuild.plots import (
    additive_vs_model_figure,
    energy_population_figure,
    family_populations_vs_temperature,
    family_temperature_figure,
    figure_png,
)

TBU_METHYL = "CC(C)(C)[C@H]1CC[C@@H](C)CC1"
# 1,3-dimethylcyclohexane, cis isomer: the diaxial chair is a clear minority.
DIMETHYL = "C[C@H]1CCC[C@@H](C)C1"


@pytest.fixture(scope="module")
def locked():
    from chairbuild.pipeline import analyze

    return analyze(TBU_METHYL, name="tBu-locked methylcyclohexane")


@pytest.fixture(scope="module")
def dimethyl():
    from chairbuild.pipeline import analyze

    return analyze(DIMETHYL, name="cis-1,3-dimethylcyclohexane")


def test_family_populations_at_the_analysis_temperature_match_the_result(locked, dimethyl):
    for ens in (locked, dimethyl):
        curves = family_populations_vs_temperature(ens, [ens.temperature])
        assert set(curves) == {f.key for f in ens.families}
        for fam in ens.families:
            assert curves[fam.key][0] == pytest.approx(fam.population, abs=1e-9)


def test_family_populations_sum_to_one_per_ring_and_follow_boltzmann(dimethyl):
    temps = np.linspace(150.0, 400.0, 11)
    curves = family_populations_vs_temperature(dimethyl, temps)
    for r in range(len(dimethyl.ring_atoms)):
        total = sum(v for k, v in curves.items() if k.startswith(f"ring{r}:"))
        np.testing.assert_allclose(total, 1.0, atol=1e-12)
    # the most populated family at 298 K loses population as T rises, the others gain
    top = max(dimethyl.families, key=lambda f: f.population).key
    assert np.all(np.diff(curves[top]) < 0)
    # two-level check against an explicit Boltzmann sum over the members
    from chairbuild.constants import R_KJ

    recs = dimethyl.conformers
    fam = min(dimethyl.families, key=lambda f: f.population)
    t = 350.0
    w = np.array([r.degeneracy * np.exp(-r.relative_energy / (R_KJ * t)) for r in recs])
    expected = sum(w[i] for i, r in enumerate(recs) if fam.key in r.families) / w.sum()
    assert family_populations_vs_temperature(dimethyl, [t])[fam.key][0] == pytest.approx(expected, rel=1e-9)


def test_energy_population_figure_bars_are_the_result_values(locked):
    fig = energy_population_figure(locked)
    ax_e, ax_p = fig.axes[:2]
    heights_e = [p.get_height() for p in ax_e.patches]
    heights_p = [p.get_height() for p in ax_p.patches]
    np.testing.assert_allclose(heights_e, [c.relative_energy for c in locked.conformers])
    np.testing.assert_allclose(heights_p, [100 * c.population for c in locked.conformers])
    assert "model estimate" in ax_e.get_title()


def test_temperature_figure_has_one_line_per_family(locked):
    fig = family_temperature_figure(locked, 150.0, 400.0, n_points=26)
    lines = [ln for ln in fig.axes[0].get_lines() if ln.get_label() and not ln.get_label().startswith("_")]
    assert len(lines) == len([f for f in locked.families if f.ring_index == 0])
    assert lines[0].get_xdata()[0] == pytest.approx(150.0)
    assert lines[0].get_xdata()[-1] == pytest.approx(400.0)


def test_additive_figure_marks_each_disagreement(locked, dimethyl):
    for ens in (locked, dimethyl):
        fig = additive_vs_model_figure(ens)
        chair = [f for f in ens.families if f.additive_energy is not None and f.model_energy is not None]
        ax = fig.axes[0]
        assert len(ax.patches) == 2 * len(chair)
        marks = [t for t in ax.texts if t.get_text() == "!"]
        assert len(marks) == sum(f.disagreement for f in chair)
        model_bars = ax.patches[: len(chair)]
        np.testing.assert_allclose([b.get_height() for b in model_bars], [f.model_energy for f in chair])


def test_png_bytes_and_errors(locked):
    png = figure_png(energy_population_figure(locked), dpi=50)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(OptionError):
        family_populations_vs_temperature(locked, [0.0, 300.0])
    with pytest.raises(OptionError):
        family_temperature_figure(locked, 400.0, 150.0)
    with pytest.raises(OptionError):
        figure_png(energy_population_figure(locked), dpi=0)
    with pytest.raises(InputError):
        energy_population_figure("nothing")


def test_plots_do_not_touch_pyplot(locked):
    import matplotlib.pyplot as plt

    before = plt.get_fignums()
    energy_population_figure(locked)
    family_temperature_figure(locked)
    additive_vs_model_figure(locked)
    assert plt.get_fignums() == before
