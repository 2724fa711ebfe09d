"""One self-contained HTML report for one or several ensembles.

:func:`write_report` writes a single HTML file that opens without a network: the
tables, the plots (PNG, base64 inline), the additive-estimate breakdown, notes,
method and provenance, the multi-conformer SDF and an interactive 3D viewer. The viewer
is 3Dmol.js, embedded inline from the copy bundled into the package at build time
(:mod:`chairbuild.assets`); only when that copy is missing does the report
load the same pinned version from a CDN, and it then says so at the top of the page.

The viewer replays the scene layers of :func:`chairbuild.viewer.scene_layers` with a
JavaScript twin of :func:`chairbuild.viewer.compose`, so labels, colours and legend
are the ones the notebook viewer shows. Its data is packed by
:mod:`chairbuild.report_pack` (the topology once, coordinates per conformer), so the file
grows with the number of conformers by their coordinates, properties and table rows
only. The report only reads the ensembles.
"""

from __future__ import annotations

import base64
import html
import json
import os
import re
import tempfile
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from chairbuild.errors import InputError, OptionError
from chairbuild.result import Ensemble

__all__ = ["write_report", "check_report_path", "report_html", "caveat_text", "NETWORK_NOTICE"]

#: Heading of the notice shown when 3Dmol.js is not embedded.
NETWORK_NOTICE = "The 3D viewer in this report needs a network connection"

_VIEWER_HEIGHT = 460

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;margin:0;color:#111827;background:#f8fafc}
main{max-width:1150px;margin:0 auto;padding:12px 24px 40px}
h1{font-size:1.5em;margin:.4em 0}h2{border-bottom:2px solid #cbd5e1;padding-bottom:4px;margin-top:1.6em}
h3{font-size:1.05em;margin:1.2em 0 .4em}
table{border-collapse:collapse;margin:.4em 0;font-size:.88em;background:white}
th,td{border:1px solid #cbd5e1;padding:3px 7px;text-align:left;vertical-align:top}
th{background:#e2e8f0}td.num{text-align:right;font-variant-numeric:tabular-nums}
.caveat{background:#fef3c7;border:2px solid #d97706;padding:8px 12px;margin:10px 0;border-radius:4px}
.network{background:#fee2e2;border:2px solid #dc2626;padding:8px 12px;margin:10px 0;border-radius:4px}
.chip{display:inline-block;color:white;border-radius:3px;padding:0 5px;margin:1px 2px;font-size:.85em;white-space:nowrap}
.flag{color:white;background:#dc2626;border-radius:3px;padding:0 5px;font-weight:bold;white-space:nowrap}
.viewerbox{display:flex;gap:16px;flex-wrap:wrap;align-items:flex-start}
.viewer{position:relative;width:720px;height:%(h)dpx;border:1px solid #94a3b8;background:white}
.controls{margin:6px 0;display:flex;gap:8px;flex-wrap:wrap;align-items:center;font-size:.9em}
.controls button{padding:3px 10px}
.legend{font-size:.85em;max-width:360px}.legend div{margin:3px 0}
pre{background:white;border:1px solid #cbd5e1;padding:8px;overflow-x:auto;font-size:.8em}
img.plot{max-width:100%%;border:1px solid #e2e8f0;background:white;margin:4px 0}
ul.terms{margin:0;padding-left:1.1em}li.unknown{color:#b91c1c}ol.sources{font-size:.8em;margin:.2em 0 1em}
nav a{margin-right:12px}
""" % {"h": _VIEWER_HEIGHT}

# JavaScript twin of chairbuild.viewer.compose(): keep the two in step.
_JS = r"""
function cbCompose(L, mode, torsions, height, cfg, keepView) {
  var calls = L.styles[mode].slice();
  calls = calls.concat(L.labels);
  if (torsions) calls = calls.concat(L.torsions);
  calls.push(["addLabel", [L.title, Object.assign({}, cfg.title_spec)]]);
  var entries = L.legend.slice();
  if (mode !== "none" && L.has_relevant_h) entries.push(cfg.h_entry);
  if (torsions && L.torsions.length) entries.push(cfg.torsion_entry);
  entries.reverse().forEach(function (e, i) {
    var spec = Object.assign({}, cfg.legend_spec);
    spec.position = {x: 6, y: height - 6 - cfg.legend_step * i, z: 0};
    spec.backgroundColor = e.colour;
    spec.fontColor = (e.colour === cfg.torsion_entry.colour) ? cfg.torsion_font : "white";
    calls.push(["addLabel", [e.text + " = " + e.meaning, spec]]);
  });
  if (!keepView) calls.push(["zoomTo", [{model: L.main}]]);
  return calls;
}
function cbSetup(idx) {
  var data = JSON.parse(document.getElementById("cb-data-" + idx).textContent);
  var box = document.getElementById("cb-viewer-" + idx);
  var status = document.getElementById("cb-status-" + idx);
  if (typeof $3Dmol === "undefined") {
    box.innerHTML = "<p style='padding:1em;color:#b91c1c'>3D viewer unavailable: 3Dmol.js could not be loaded.</p>";
    return;
  }
  var viewer = $3Dmol.createViewer(box, {backgroundColor: "white"});
  var state = {k: 0, overlay: false, mode: "relevant", torsions: false, drawn: false};
  function draw() {
    var keep = state.drawn, view = keep ? viewer.getView() : null;
    viewer.clear();
    var L = cbLayer(data.single[state.k], data.pool);
    if (state.overlay) L = cbOverlay(L, state.k, data.n, data.overlay);
    L.models.forEach(function (m) { viewer.addModel(cbRecord(data.sdf, m), "sdf"); });
    cbCompose(L, state.mode, state.torsions, data.height, data.config, keep).forEach(function (c) {
      viewer[c[0]].apply(viewer, c[1]);
    });
    if (keep) viewer.setView(view);
    viewer.render();
    state.drawn = true;
    status.textContent = L.title;
    var r = box.getBoundingClientRect();  // page position of the canvas, read by the browser test
    box.setAttribute("data-rect", [r.left + window.scrollX, r.top + window.scrollY, r.width, r.height].map(Math.round).join(","));
    document.getElementById("cb-select-" + idx).value = String(state.k);
  }
  function on(id, ev, fn) { document.getElementById(id + "-" + idx).addEventListener(ev, fn); }
  on("cb-prev", "click", function () { state.k = (state.k + data.n - 1) % data.n; draw(); });
  on("cb-next", "click", function () { state.k = (state.k + 1) % data.n; draw(); });
  on("cb-select", "change", function (e) { state.k = parseInt(e.target.value, 10); draw(); });
  on("cb-overlay", "change", function (e) { state.overlay = e.target.checked; draw(); });
  on("cb-hmode", "change", function (e) { state.mode = e.target.value; draw(); });
  on("cb-torsions", "change", function (e) { state.torsions = e.target.checked; draw(); });
  on("cb-reset", "click", function () { state.drawn = false; draw(); });
  on("cb-sdf", "click", function () {
    var a = document.createElement("a");
    a.href = URL.createObjectURL(new Blob([cbSdf(data.sdf)], {type: "chemical/x-mdl-sdfile"}));
    a.download = data.file_name;
    document.body.appendChild(a); a.click(); a.remove();
  });
  draw();
}
"""


def caveat_text(ensembles: Sequence[Ensemble]) -> str:
    """The model-estimate caveat, shown once at the top of the report (each section links to it)."""
    methods = ", ".join(sorted({e.method for e in ensembles})) or "the force field"
    return (
        f"These are model estimates ({methods}): energies, populations and ring preferences of "
        "isolated molecules computed with an empirical or semi-empirical model, not measurements. "
        "Confirm any decision that depends on them by experiment (for example low-temperature NMR "
        "or coupling constants) or by a higher-level calculation."
    )


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _json_for_script(obj: Any) -> str:
    """JSON that is safe inside a <script> element."""
    text = json.dumps(obj, separators=(",", ":"), ensure_ascii=True)
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def _slug(text: str) -> str:
    slug = re.sub(r"[^A-Za-z0-9]+", "_", text).strip("_")
    return (slug or "ensemble")[:60]


def _chip(text: str, colour: str) -> str:
    from chairbuild.viewer import TORSION_COLOUR

    font = "#1e293b" if colour == TORSION_COLOUR else "white"
    return f'<span class="chip" style="background:{_e(colour)};color:{font}">{_e(text)}</span>'


def _num(value: float | None, fmt: str = ".2f") -> str:
    if value is None or not np.isfinite(value):
        return '<td class="num">–</td>'
    return f'<td class="num">{format(value, fmt)}</td>'


def _png_tag(fig: Any, alt: str) -> str:
    from chairbuild.plots import figure_png

    data = base64.b64encode(figure_png(fig, dpi=100)).decode("ascii")
    return f'<img class="plot" alt="{_e(alt)}" src="data:image/png;base64,{data}">'


# ---------------------------------------------------------------------------- sections
def _summary_rows(ensembles: Sequence[Ensemble]) -> str:
    rows = []
    for i, ens in enumerate(ensembles):
        best = ens.conformers[0] if ens.conformers else None
        top = []
        for r in range(len(ens.ring_atoms)):
            fams = [f for f in ens.families if f.ring_index == r]
            if fams:
                f = max(fams, key=lambda f: f.population)
                top.append(f"ring {r}: {_e(f.label)} ({100 * f.population:.1f} %)")
        rows.append(
            f'<tr><td><a href="#cb-ens-{i}">{_e(ens.name)}</a></td><td><code>{_e(ens.smiles)}</code></td>'
            f'<td class="num">{len(ens.conformers)}</td>'
            f"<td>{_e(', '.join(r.shape.value for r in best.rings)) if best else '–'}</td>"
            f"{_num(100 * best.population if best else None, '.1f')}<td>{'<br>'.join(top) or '–'}</td></tr>"
        )
    return (
        "<table><tr><th>molecule</th><th>SMILES</th><th>conformers</th><th>lowest: ring shapes</th>"
        "<th>lowest: pop. %</th><th>most populated family per ring</th></tr>" + "".join(rows) + "</table>"
    )


def _conformer_table(ens: Ensemble) -> str:
    from chairbuild.constants import KJ_TO_KCAL
    from chairbuild.viewer import POSITION_COLOURS, POSITION_TEXT

    head = "".join(f"<th>ring {r}</th>" for r in range(len(ens.ring_atoms)))
    rows = []
    for rec in ens.conformers:
        subs = " ".join(
            _chip(f"{s.label(ens.symbols)} {POSITION_TEXT[s.position]}"
                  + (f" r{s.ring_index}" if len(ens.ring_atoms) > 1 else ""), POSITION_COLOURS[s.position])
            for s in rec.substituents
        )
        rings = "".join(
            f"<td>{_e(r.shape.value)}<br><small>Q {r.q_total:.3f} Å, θ {r.theta:.1f}°, φ {r.phi:.1f}°</small></td>"
            for r in rec.rings
        )
        rows.append(
            f'<tr><td class="num">{rec.id}</td>{_num(rec.relative_energy)}{_num(rec.relative_energy * KJ_TO_KCAL)}'
            f"{_num(100 * rec.population)}<td class=\"num\">{rec.degeneracy}</td>{rings}<td>{subs}</td>"
            f"<td>{'yes' if rec.converged else 'no'}</td></tr>"
        )
    delta = "ΔG" if ens.ranking == "free_energy" else "ΔE"
    return (
        f"<table><tr><th>id</th><th>{delta} (kJ/mol)</th><th>{delta} (kcal/mol)</th><th>pop. %</th><th>g</th>{head}"
        "<th>substituents</th><th>converged</th></tr>" + "".join(rows) + "</table>"
    )


def _additive_cell(f) -> str:
    """The additive column: a number, or why there is none (terminal table's wording)."""
    from chairbuild.result import AdditiveStatus

    if f.additive_energy is not None:
        return _num(f.additive_energy)
    text = {AdditiveStatus.UNKNOWN: "unknown", AdditiveStatus.NO_INCREMENTS: "none"}.get(f.additive_status, "–")
    return f'<td class="num">{_e(text)}</td>'


def _flag_html(f) -> str:
    """The check column: the flag with the threshold it crossed (2.0 kJ/mol plus the estimate's uncertainty)."""
    from chairbuild.families import DISAGREEMENT_KJ

    if not (f.disagreement and f.model_energy is not None and f.additive_energy is not None):
        return ""
    diff = f.model_energy - f.additive_energy
    return (
        f'<span class="flag">disagrees</span> force field − additive = {diff:+.1f} kJ/mol '
        f"(threshold {DISAGREEMENT_KJ:.1f} + uncertainty {f.additive_uncertainty or 0.0:.1f})"
    )


def _breakdown_html(f, sources: dict[str, int]) -> str:
    """One family's increments: value, what each scores, [n] source, conditions, fallback; what is missing.

    ``sources`` numbers each distinct (increment, source, conditions) of the ring in order of
    first use; :func:`_sources_html` lists them under the table.
    """
    from chairbuild.result import AdditiveStatus

    status = f.additive_status
    if status is AdditiveStatus.NONE:
        return "<small>no additive estimate (not a chair family)</small>"
    items = []
    for t in f.additive_terms:
        ref = f"{t.increment}: {t.source}" + (f"; {t.conditions}" if t.conditions else "")
        n = sources.setdefault(ref, len(sources) + 1)
        spread = f" ± {t.uncertainty:.2f}" if t.uncertainty else ""
        where = t.applies_to or t.kind
        back = f'<br><small class="fallback">generic fallback: {_e(t.fallback)}</small>' if t.fallback else ""
        items.append(
            f"<li>{t.value:+.2f}{spread} kJ/mol {_e(t.kind)}: {_e(where)} "
            f"<small>(atoms {_e('–'.join(map(str, t.atoms)))})</small> "
            f'<a href="#{_e(_source_anchor(f.key, n))}">[{n}]</a>{back}</li>'
        )
    if status is AdditiveStatus.REFERENCE and not items:
        items.append("<li>no increment: the reference family (0 by definition)</li>")
    elif status is AdditiveStatus.ESTIMATED and not items:
        items.append("<li>no increment (no axial substituent or pair that the table scores)</li>")
    elif status is AdditiveStatus.REFERENCE:
        items.append("<li><small>the reference family: its increments are the zero of the ring's additive scale</small></li>")
    missing = "".join(f"<li class=\"unknown\">{_e(n.split(': ', 1)[-1])}</li>" for n in f.additive_notes)
    shown = [t.fallback for t in f.additive_terms if t.fallback]
    caveats = "".join(
        f"<li><small>approximate: {_e(c.split(': ', 1)[-1])}</small></li>"
        for c in f.additive_caveats if not any(fb in c for fb in shown)
    )
    head = ""
    if status in (AdditiveStatus.UNKNOWN, AdditiveStatus.NO_INCREMENTS):
        head = f"<b>{_e(status.value)}</b>: no number is compared with the force field"
    return f'{head}<ul class="terms">{"".join(items)}{missing}{caveats}</ul>'


def _source_anchor(family_key: str, n: int) -> str:
    ring = family_key.split(":", 1)[0]
    return f"cb-src-{_slug(ring)}-{n}"


def _sources_html(ring_key: str, sources: dict[str, int]) -> str:
    """The numbered sources (increment key: citation with its P/S/M flag; conditions) under a ring's table."""
    if not sources:
        return ""
    rows = "".join(
        f'<li id="{_e(_source_anchor(ring_key, n))}" value="{n}">{_e(ref)}</li>' for ref, n in sources.items()
    )
    return f'<p><small>Sources of the increments (key: citation [flag P/S/M]; conditions):</small></p><ol class="sources">{rows}</ol>'


def _family_tables(ens: Ensemble) -> str:
    from chairbuild.families import DISAGREEMENT_KJ

    out = []
    for r, ring in enumerate(ens.ring_atoms):
        fams = [f for f in ens.families if f.ring_index == r]
        if not fams:
            continue
        rows = []
        sources: dict[str, int] = {}
        for f in fams:
            breakdown = _breakdown_html(f, sources)
            kval = f.equilibrium_constant
            kcell = _num(kval) if np.isfinite(kval) and kval < 1e6 else '<td class="num">&gt;1e6</td>'
            rows.append(
                f"<tr><td>{_e(f.label)}</td>{_num(100 * f.population)}{_num(f.delta_g)}"
                f"{kcell}"
                f"{_additive_cell(f)}{_num(f.model_energy)}<td>{_flag_html(f)}</td><td>{breakdown}</td></tr>"
            )
        out.append(
            f"<h3>Ring {r} (atoms {_e('–'.join(map(str, ring)))}): families</h3>"
            "<table><tr><th>family</th><th>pop. %</th><th>ΔG (kJ/mol)</th><th>K</th><th>additive (kJ/mol)</th>"
            "<th>force field (kJ/mol)</th><th>check</th><th>additive breakdown</th></tr>" + "".join(rows) + "</table>"
            + _sources_html(f"ring{r}", sources)
        )
    if out:
        from chairbuild.output import FAMILY_CONVENTION

        out.append(
            f"<p><small>Sign convention: {_e(FAMILY_CONVENTION)}. "
            "Additive and force-field values are relative to the ring's chair family with the "
            "lowest complete additive estimate (the reference). Each increment is the most specific one the table "
            "has for the ring type and position; a cyclohexane value standing in for a missing one is marked "
            "as a generic fallback. A family whose estimate lacks a term says <i>increment unknown</i>, and one "
            "whose ring has no increment at all says <i>no increments known</i>; neither gets a number or a flag. "
            f"A family is flagged when the two values differ by more than {DISAGREEMENT_KJ:g} kJ/mol plus the "
            "estimate's uncertainty (the sum of the quoted ranges of its terms and the reference's): then the "
            "increments do not describe this ring well, and the explicit ensemble is the better of the two "
            "estimates, but still a model estimate.</small></p>"
        )
    return "".join(out)


def _legend_html() -> str:
    from chairbuild.viewer import legend_entries

    lines = [f"<div>{_chip(e.text, e.colour)} {_e(e.meaning)}</div>" for e in legend_entries(complete=True)]
    return (
        '<div class="legend"><b>Legend</b>' + "".join(lines)
        + "<div><small>Other conformers in the overlay: thin coloured sticks. Hydrogens are hidden except "
        "the pink ones in the default mode. Title: energy relative to the lowest conformer and Boltzmann "
        "population.</small></div></div>"
    )


def _viewer_html(ens: Ensemble, idx: int) -> str:
    from chairbuild.report_pack import viewer_data

    if not ens.conformers:
        return "<p>No conformer to show.</p>"
    data = viewer_data(ens, _VIEWER_HEIGHT, f"{_slug(ens.name)}.sdf")
    options = "".join(
        f'<option value="{k}">conformer {rec.id}: {"ΔG" if ens.ranking == "free_energy" else "ΔE"} '
        f'{rec.relative_energy:.2f} kJ/mol, {100 * rec.population:.1f} %</option>'
        for k, rec in enumerate(ens.conformers)
    )
    return f"""
<div class="controls">
  <button id="cb-prev-{idx}" title="lower energy">&#9664; previous</button>
  <select id="cb-select-{idx}">{options}</select>
  <button id="cb-next-{idx}" title="higher energy">next &#9654;</button>
  <label><input type="checkbox" id="cb-overlay-{idx}"> overlay all</label>
  <label>hydrogens <select id="cb-hmode-{idx}"><option value="relevant">syn-axial only</option>
    <option value="all">all</option><option value="none">none</option></select></label>
  <label><input type="checkbox" id="cb-torsions-{idx}"> ring torsions</label>
  <button id="cb-reset-{idx}">reset view</button>
  <button id="cb-sdf-{idx}" title="conformers superposed on the ring atoms of conformer 0">download SDF</button>
</div>
<div class="viewerbox"><div class="viewer" id="cb-viewer-{idx}"></div>{_legend_html()}</div>
<p><small id="cb-status-{idx}"></small></p>
<script type="application/json" id="cb-data-{idx}">{_json_for_script(data)}</script>
<script>cbSetup({idx});</script>
"""


def _provenance_html(ens: Ensemble) -> str:
    from chairbuild.assets import THREEDMOL_LICENSE, THREEDMOL_VERSION
    prov = ens.to_dict()["provenance"]
    rows = [
        ("method (ranking level)", ens.method),
        ("ranked by", ens.ranking.replace("_", " ")),
        ("temperature", f"{ens.temperature:.2f} K"),
        ("energy window", f"{ens.window:g} kJ/mol"),
        ("conformers kept / rejected", f"{len(ens.conformers)} / {len(ens.rejected)}"),
        ("chairbuild", prov.get("chairbuild", "")),
        ("3D viewer", f"3Dmol.js {THREEDMOL_VERSION} ({THREEDMOL_LICENSE})"),
    ]
    table = "<table>" + "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in rows) + "</table>"
    return (
        "<p>Every chair and twist-boat state of each six-membered ring was built, minimised with the force "
        "field and de-duplicated; populations are Boltzmann weights of the ranking energy (degeneracies "
        "included) within the energy window. Ring shapes come from Cremer–Pople coordinates of the final "
        "geometries; axial/equatorial labels from the angle between the ring–substituent bond and the ring's "
        "mean-plane normal.</p>"
        + table
        + f"<details><summary>full provenance (options, counts, versions, timings)</summary><pre>{_e(json.dumps(prov, indent=2))}</pre></details>"
    )


def _section(ens: Ensemble, idx: int) -> str:
    from chairbuild.output import format_table
    from chairbuild.plots import additive_vs_model_figure, energy_population_figure, family_temperature_figure

    plots = ""
    if ens.conformers:
        plots = (
            _png_tag(energy_population_figure(ens), "relative energy and population of each conformer")
            + _png_tag(family_temperature_figure(ens), "family populations against temperature")
            + _png_tag(additive_vs_model_figure(ens), "force field against additive estimate per chair family")
        )
    notes = list(ens.notes_in("kJ/mol"))
    if ens.rejected:
        notes.append(f"{len(ens.rejected)} structure(s) rejected: " + "; ".join(
            f"{r.status.value}{': ' + r.message if r.message else ''}" for r in ens.rejected[:10]))
    notes_html = "<ul>" + "".join(f"<li>{_e(n)}</li>" for n in notes) + "</ul>" if notes else "<p>No notes.</p>"
    return f"""
<section id="cb-ens-{idx}">
<h2>{_e(ens.name)}</h2>
<p><code>{_e(ens.smiles)}</code> — {len(ens.conformers)} conformer(s), {_e(ens.method)},
ranked by {_e(ens.ranking.replace('_', ' '))}, T = {ens.temperature:.2f} K,
total charge {ens.charge}, multiplicity {ens.multiplicity}; atom numbers are 0-based</p>
<p><small><b>Model estimates</b>: see <a href="#cb-caveat">the note at the top</a>.</small></p>
<h3>Conformers (energy order)</h3>
{_conformer_table(ens)}
<h3>3D view</h3>
{_viewer_html(ens, idx)}
<h3>Energies and populations</h3>
{plots}
<p><small>The temperature plot re-weights the fixed energies of this analysis at each temperature;
geometries and energies are not recomputed.</small></p>
<h3>Ring-state families and the additive estimate</h3>
{_family_tables(ens)}
<h3>Vicinal couplings 3J(H,H)</h3>
{_couplings_section(ens)}
<h3>Notes</h3>
{notes_html}
<details><summary>plain-text table</summary><pre>{_e(format_table(ens))}</pre></details>
<h3>Method and provenance</h3>
{_provenance_html(ens)}
</section>
"""


def _couplings_section(ens: Ensemble) -> str:
    from chairbuild.couplings.tables import couplings_html

    return couplings_html(ens)


def _library_tag() -> tuple[str, str]:
    """(script element that defines $3Dmol, notice HTML or '')."""
    from chairbuild.assets import THREEDMOL_VERSION, cdn_url, read_js

    js = read_js()
    if js is not None:
        js = re.sub(r"</(script)", r"<\\/\1", js, flags=re.IGNORECASE)
        return f"<script>/* 3Dmol.js {THREEDMOL_VERSION}, BSD-3-Clause, embedded */\n{js}\n</script>", ""
    url = cdn_url()
    notice = (
        f'<div class="network"><b>{NETWORK_NOTICE}.</b> 3Dmol.js {THREEDMOL_VERSION} was not bundled when '
        "chairbuild was installed (the build needs npm: reinstall with npm on the PATH, or run "
        "<code>python -m chairbuild.assets fetch</code>), so this page loads it "
        f"from <code>{_e(url)}</code>. Without a network the 3D view stays empty; the tables, plots and the "
        "embedded SDF work offline.</div>"
    )
    return f'<script src="{_e(url)}"></script>', notice


def _as_list(ensembles: Ensemble | Iterable[Ensemble]) -> list[Ensemble]:
    items = [ensembles] if isinstance(ensembles, Ensemble) else list(ensembles)
    if not items:
        raise InputError("no ensemble to report")
    for item in items:
        if not isinstance(item, Ensemble):
            raise InputError(f"expected chairbuild.result.Ensemble objects, got {type(item).__name__}")
    return items


def report_html(ensembles: Ensemble | Iterable[Ensemble], title: str | None = None) -> str:
    """The report as one HTML string (see :func:`write_report`)."""
    from chairbuild.report_pack import PACK_JS

    items = _as_list(ensembles)
    title = title or ("chairbuild report: " + ", ".join(e.name for e in items[:3]) + (" …" if len(items) > 3 else ""))
    caveat = caveat_text(items)
    library, notice = _library_tag()
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    nav = ""
    if len(items) > 1:
        nav = "<nav>" + "".join(f'<a href="#cb-ens-{i}">{_e(e.name)}</a>' for i, e in enumerate(items)) + "</nav>"
    sections = "".join(_section(ens, i) for i, ens in enumerate(items))
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_e(title)}</title>
<style>{_CSS}</style>
{library}
<script>{PACK_JS}{_JS}</script>
</head><body><main>
<h1>{_e(title)}</h1>
<p><small>Written {stamp} by chairbuild.</small></p>
{notice}
<div class="caveat" id="cb-caveat"><b>Read this first.</b> {_e(caveat)}</div>
<h2>Summary</h2>
{_summary_rows(items)}
{nav}
{sections}
</main></body></html>
"""


def check_report_path(path: str | os.PathLike) -> Path:
    """Return ``path`` as a Path if a report can be written there; raise OptionError otherwise.

    Lets a caller (the command line) reject a bad target before any work starts.
    """
    target = Path(path)
    if target.suffix.lower() not in (".html", ".htm"):
        raise OptionError(f"the report is an HTML file; give a path ending in .html, got {str(target)!r}")
    if target.is_dir():
        raise OptionError(f"{str(target)!r} is a directory")
    return target


def write_report(ensembles: Ensemble | Sequence[Ensemble], path: str | os.PathLike, title: str | None = None) -> Path:
    """Write one self-contained HTML report for one or several ensembles.

    Parameters
    ----------
    ensembles : Ensemble or sequence of Ensemble
    path : str or path-like
        Target file; should end in ``.html`` or ``.htm``. Written to a temporary name
        first and moved into place.
    title : str, optional

    Returns
    -------
    pathlib.Path

    Raises
    ------
    InputError
        Nothing to report, or not Ensemble objects.
    OptionError
        ``path`` does not end in .html/.htm or is a directory.
    """
    target = check_report_path(path)
    text = report_html(ensembles, title=title)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=str(target.parent))
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.chmod(tmp, 0o644)
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target
