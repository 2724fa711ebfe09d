"""Plots of an ensemble (matplotlib; figures are drawn off-screen with the Agg canvas).

Every function only reads the :class:`~chairbuild.result.Ensemble` and returns a
:class:`matplotlib.figure.Figure` that is not registered with ``pyplot``, so nothing
here changes a notebook's or a script's backend. :func:`figure_png` renders a figure
to PNG bytes (the HTML report embeds them). Colours come from :mod:`chairbuild.viewer`
where they mean a ring position, so the plots and the 3D scene agree.
"""

from __future__ import annotations

import io
from typing import Any, Sequence

import numpy as np

from chairbuild.errors import InputError, OptionError
from chairbuild.result import Ensemble, RingShape

__all__ = [
    "SHAPE_COLOURS",
    "energy_population_figure",
    "family_populations_vs_temperature",
    "family_temperature_figure",
    "additive_vs_model_figure",
    "coupling_temperature_figure",
    "figure_png",
]

#: Bar colour of a conformer by the shape of its first ring (this project's scheme).
SHAPE_COLOURS: dict[RingShape, str] = {
    RingShape.CHAIR: "#1d4ed8",
    RingShape.TWIST_BOAT: "#d97706",
    RingShape.BOAT: "#b91c1c",
    RingShape.HALF_CHAIR: "#7c3aed",
    RingShape.ENVELOPE: "#0d9488",
    RingShape.SCREW_BOAT: "#be185d",
    RingShape.PLANAR: "#4b5563",
}
_CAVEAT = "model estimate"


def _new_figure(width: float, height: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _check(result: Ensemble) -> None:
    if not isinstance(result, Ensemble):
        raise InputError(f"expected a chairbuild.result.Ensemble, got {type(result).__name__}")
    if not result.conformers:
        raise InputError(f"{result.name!r} has no conformer to plot")


def energy_population_figure(result: Ensemble, max_conformers: int = 30):
    """Relative energy (top) and Boltzmann population (bottom) of each conformer, in energy order.

    Bars are coloured by the shape of the first ring (legend in the figure).

    Parameters
    ----------
    result : Ensemble
    max_conformers : int
        Plot at most this many of the lowest conformers.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.patches import Patch

    _check(result)
    if max_conformers < 1:
        raise OptionError(f"max_conformers must be at least 1, got {max_conformers}")
    recs = result.conformers[:max_conformers]
    x = np.arange(len(recs))
    shapes = [rec.rings[0].shape if rec.rings else RingShape.PLANAR for rec in recs]
    colours = [SHAPE_COLOURS[s] for s in shapes]
    fig = _new_figure(max(5.0, 0.35 * len(recs) + 3.0), 4.6)
    ax_e, ax_p = fig.subplots(2, 1, sharex=True)
    ax_e.bar(x, [rec.relative_energy for rec in recs], color=colours)
    ax_e.set_ylabel("relative free energy (kJ/mol)" if result.ranking == "free_energy" else "relative energy (kJ/mol)")
    ax_e.set_title(
        f"{_short_label(result.name, 70)}\nconformers by {result.ranking.replace('_', ' ')} ({result.method}; {_CAVEAT})",
        fontsize=9,
    )
    pops = [100.0 * rec.population for rec in recs]
    ax_p.bar(x, pops, color=colours)
    for xi, p in zip(x, pops):
        ax_p.text(xi, min(p, 88.0) + 1.5, f"{p:.1f}" if p >= 0.05 else "<0.1", ha="center", va="bottom", fontsize=7)
    ax_p.set_ylabel(f"population at {result.temperature:.0f} K (%)")
    ax_p.set_xlabel("conformer id (energy order)")
    ax_p.set_xticks(x, [str(rec.id) for rec in recs])
    ax_p.set_ylim(0, 100)
    seen = list(dict.fromkeys(shapes))
    label = "ring 0 shape" if len(result.ring_atoms) > 1 else "ring shape"
    ax_e.legend(
        handles=[Patch(color=SHAPE_COLOURS[s], label=s.value) for s in seen],
        title=label,
        fontsize=8,
        title_fontsize=8,
        loc="upper left",
    )
    if len(result.conformers) > len(recs):
        ax_p.annotate(
            f"{len(result.conformers) - len(recs)} higher conformer(s) not shown",
            xy=(1, 1), xycoords="axes fraction", ha="right", va="bottom", fontsize=8,
        )
    return fig


def family_populations_vs_temperature(
    result: Ensemble, temperatures: Sequence[float] | np.ndarray
) -> dict[str, np.ndarray]:
    """Population of each ring-state family at each temperature.

    At every temperature the conformer populations are recomputed with
    :func:`chairbuild.thermo.boltzmann_populations` from the conformers' relative
    energies (the ranking quantity of the result) and degeneracies, then summed per
    family. This re-weights *fixed* energies: geometries, energies and, when the
    ranking was by free energy, the entropy terms stay those computed at
    ``result.temperature``; only the Boltzmann factor changes with T.

    Parameters
    ----------
    result : Ensemble
    temperatures : sequence of float
        K.

    Returns
    -------
    dict
        Family key -> populations (0–1), one per temperature, in the order of
        ``result.families``.
    """
    from chairbuild.thermo import boltzmann_populations

    _check(result)
    temps = np.asarray(temperatures, dtype=float).ravel()
    if temps.size == 0 or not np.all(np.isfinite(temps)) or np.any(temps <= 0):
        raise OptionError("temperatures must be positive numbers of kelvin")
    energies = np.array([rec.relative_energy for rec in result.conformers])
    degeneracies = np.array([rec.degeneracy for rec in result.conformers], dtype=float)
    pops = np.array([boltzmann_populations(energies, t, degeneracies) for t in temps])  # (n_T, n_conf)
    out: dict[str, np.ndarray] = {}
    keys = [f.key for f in result.families] or sorted({k for rec in result.conformers for k in rec.families})
    for key in keys:
        mask = np.array([key in rec.families for rec in result.conformers])
        out[key] = pops[:, mask].sum(axis=1)
    return out


def family_temperature_figure(result: Ensemble, t_min: float = 150.0, t_max: float = 400.0, n_points: int = 126):
    """Population of each chair family (and of the non-chair families) against temperature.

    One panel per ring. See :func:`family_populations_vs_temperature`: the fixed
    energies are re-weighted at each temperature; the dotted line marks the
    temperature of the analysis.

    Returns
    -------
    matplotlib.figure.Figure
    """
    _check(result)
    if not (0 < t_min < t_max):
        raise OptionError(f"need 0 < t_min < t_max, got {t_min} and {t_max}")
    temps = np.linspace(t_min, t_max, int(n_points))
    curves = family_populations_vs_temperature(result, temps)
    n_rings = max(1, len(result.ring_atoms))
    fig = _new_figure(6.0, 3.0 * n_rings + 0.6)
    axes = np.atleast_1d(fig.subplots(n_rings, 1, squeeze=False)[:, 0])
    labels = {f.key: f.label for f in result.families}
    for r, ax in enumerate(axes):
        keys = [k for k in curves if k.startswith(f"ring{r}:")]
        for key in keys:
            style = "-" if ":chair[" in key else "--"
            ax.plot(temps, 100.0 * curves[key], style, label=_short_label(labels.get(key, key)))
        ax.axvline(result.temperature, color="0.5", lw=0.8, ls=":")
        ax.set_ylim(-2, 102)
        ax.set_xlim(t_min, t_max)
        ax.set_ylabel("population (%)")
        ax.set_title(f"ring {r}: families (fixed energies re-weighted; {_CAVEAT})", fontsize=10)
        ax.legend(fontsize=7, loc="best")
    axes[-1].set_xlabel("temperature (K)")
    return fig


def _short_label(text: str, width: int = 60) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"


def _tick_label(label: str) -> str:
    import textwrap

    text = _short_label(label, 200).removeprefix("chair, ")
    return "\n".join(textwrap.wrap(text, 24)[:3])


def additive_vs_model_figure(result: Ensemble):
    """Force-field energy against the additive estimate for each chair family.

    Grouped bars per chair family: ``FamilyRecord.model_energy`` (from the minimised
    ensemble) and ``FamilyRecord.additive_energy`` (sum of increments), both relative
    to the ring's lowest additive family. Families whose two values disagree by more
    than the threshold are marked with "!" and a red outline.

    Returns
    -------
    matplotlib.figure.Figure
    """
    _check(result)
    fams = [f for f in result.families if f.additive_energy is not None and f.model_energy is not None]
    n_rings = max(1, len(result.ring_atoms))
    fig = _new_figure(max(6.0, 1.1 * max(1, len(fams)) + 3.0), 3.2 * n_rings + 0.6)
    axes = np.atleast_1d(fig.subplots(n_rings, 1, squeeze=False)[:, 0])
    for r, ax in enumerate(axes):
        ring_fams = [f for f in fams if f.ring_index == r]
        ax.set_title(f"ring {r}: force field vs additive estimate (chair families; {_CAVEAT})", fontsize=10)
        ax.set_ylabel("energy vs lowest additive family (kJ/mol)", fontsize=8)
        if not ring_fams:
            ax.text(0.5, 0.5, "no chair family with an additive estimate", ha="center", va="center", transform=ax.transAxes)
            ax.set_xticks([])
            continue
        x = np.arange(len(ring_fams))
        model = [f.model_energy if np.isfinite(f.model_energy) else np.nan for f in ring_fams]
        additive = [f.additive_energy for f in ring_fams]
        bars_m = ax.bar(x - 0.2, model, 0.4, color="#1d4ed8", label=f"force field ({result.method})")
        ax.bar(x + 0.2, additive, 0.4, color="#a3a3a3", label="additive increments")
        for xi, fam, bar in zip(x, ring_fams, bars_m):
            if fam.disagreement:
                bar.set_edgecolor("#dc2626")
                bar.set_linewidth(2.0)
                top = max(v for v in (bar.get_height(), fam.additive_energy) if np.isfinite(v))
                ax.text(xi, top, "!", ha="center", va="bottom", color="#dc2626", fontsize=14, fontweight="bold")
        ax.axhline(0.0, color="0.3", lw=0.6)
        ax.margins(y=0.18)
        ax.set_xticks(x, [_tick_label(f.label) for f in ring_fams], fontsize=7)
        ax.legend(fontsize=7, loc="upper left", title="! = disagree beyond threshold", title_fontsize=7)
    return fig


def _deciding_pairs(result: Ensemble, max_pairs: int):
    """Pairs with the largest |d<J>/dG| for any family (the couplings that tell families apart)."""
    pairs = list(result.couplings.pairs)
    score = {p.name: max((abs(v) for v in p.sensitivity.values()), default=0.0) for p in pairs}
    spread = {p.name: (max(p.family_limits.values()) - min(p.family_limits.values())) if p.family_limits else 0.0 for p in pairs}
    return sorted(pairs, key=lambda p: (-score[p.name], -spread[p.name]))[:max_pairs]


def coupling_temperature_figure(
    result: Ensemble,
    pairs: Sequence[tuple[str, str]] | None = None,
    max_pairs: int = 6,
    t_min: float = 150.0,
    t_max: float = 400.0,
    n_points: int = 126,
):
    """Population-weighted <J> of chosen H-H pairs against temperature.

    The fixed energies of the analysis are re-weighted at each temperature
    (:func:`chairbuild.couplings.ensemble.couplings_vs_temperature`); the dotted line marks
    the temperature of the analysis, and the thin dashed lines at the right edge the
    limiting couplings of each pair's two most populated families.

    Parameters
    ----------
    result : Ensemble
    pairs : sequence of (str, str), optional
        Proton labels; default: the ``max_pairs`` pairs with the largest |d<J>/dG|.
    max_pairs : int
    t_min, t_max : float
        K.
    n_points : int

    Returns
    -------
    matplotlib.figure.Figure
    """
    from chairbuild.couplings.ensemble import couplings_vs_temperature

    _check(result)
    if result.couplings is None or not result.couplings.pairs:
        raise InputError(f"{result.name!r} has no couplings to plot")
    if not (0 < t_min < t_max):
        raise OptionError(f"need 0 < t_min < t_max, got {t_min} and {t_max}")
    if max_pairs < 1:
        raise OptionError(f"max_pairs must be at least 1, got {max_pairs}")
    chosen = [result.couplings.find(a, b) for a, b in pairs] if pairs else _deciding_pairs(result, max_pairs)
    temps = np.linspace(t_min, t_max, int(n_points))
    curves = couplings_vs_temperature(result, temps)
    fig = _new_figure(6.4, 3.8)
    ax = fig.subplots()
    for rec in chosen:
        (line,) = ax.plot(temps, curves[rec.name], label=rec.name)
        fams = sorted((f for f in result.families if f.key in rec.family_limits), key=lambda f: -f.population)[:2]
        for f in fams:
            ax.plot([t_max - 0.06 * (t_max - t_min), t_max], [rec.family_limits[f.key]] * 2, "--", color=line.get_color(), lw=0.8)
    ax.axvline(result.temperature, color="0.5", lw=0.8, ls=":")
    ax.set_xlim(t_min, t_max)
    ax.set_xlabel("temperature (K)")
    ax.set_ylabel("population-weighted 3J(H,H) (Hz)")
    ax.set_title(f"<J> against temperature (fixed energies re-weighted; {_CAVEAT})\ndashes: limits of the two main families", fontsize=9)
    ax.legend(fontsize=7, loc="best")
    return fig


def figure_png(fig: Any, dpi: int = 110) -> bytes:
    """Render a figure to PNG bytes."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if dpi <= 0:
        raise OptionError(f"dpi must be positive, got {dpi}")
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()
