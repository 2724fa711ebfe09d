"""Text and CSV views of ``Ensemble.couplings`` (they only read the Ensemble).

Text table, one block per ring: the ring's families as columns F1, F2, … (most populated
first) with their limiting couplings, the ensemble ⟨J⟩, and d⟨J⟩/dG of family F2 (the
second most populated, usually the other chair): the coupling with the largest |d⟨J⟩/dG|
is the one that tells the two apart.

CSV (long format), one row per pair and family of the pair's ring::

    pair,proton_a,proton_b,hydrogens_a,hydrogens_b,carbons,equation,ring_index,average_Hz,
    family_key,family_label,family_population,limit_Hz,sensitivity_Hz_per_kJ
"""

from __future__ import annotations

import csv
import io

__all__ = ["couplings_text", "couplings_csv_text", "sorted_families"]

_SOURCE = "HLA: Haasnoot, de Leeuw & Altona, Tetrahedron 1980, 36, 2783; allylic: Garbisch, JACS 1964, 86, 5561"


def sorted_families(ens, ring_index: int | None):
    """Families of one ring, most populated first."""
    return sorted((f for f in ens.families if f.ring_index == ring_index), key=lambda f: -f.population)


def _table(ens):
    from chairbuild.errors import InputError

    table = getattr(ens, "couplings", None)
    if table is None:
        raise InputError(f"{ens.name!r} has no computed couplings")
    return table


def couplings_text(ens, max_pairs: int = 200) -> str:
    """Human-readable coupling table (module doc)."""
    table = _table(ens)
    lines = [
        f"3J(H,H) couplings (Hz) of {ens.name}; <J> weighted by the populations at {ens.temperature:.2f} K ({ens.method})",
        f"equations: {_SOURCE}",
    ]
    if not table.pairs:
        lines.append("no vicinal H-C-C-H coupling computed")
    rings = sorted({p.ring_index for p in table.pairs}, key=lambda r: -1 if r is None else r)
    shown = 0
    for r in rings:
        pairs = [p for p in table.pairs if p.ring_index == r]
        fams = sorted_families(ens, r)
        lines.append("")
        if r is not None and fams:
            lines.append(f"ring {r} families: " + "; ".join(f"F{k + 1} = {f.label} ({100 * f.population:.1f} %)" for k, f in enumerate(fams)))
        head = f"  {'pair':<14} {'equation':<9}" + "".join(f"{'F' + str(k + 1):>7}" for k in range(len(fams))) + f"{'<J>':>8}"
        if len(fams) > 1:
            head += f"  {'d<J>/dG(F2) Hz per kJ/mol':>27}"
        lines.append(head)
        for p in pairs:
            if shown >= max_pairs:
                break
            row = f"  {p.name:<14} {p.equation:<9}" + "".join(f"{p.family_limits.get(f.key, float('nan')):7.2f}" for f in fams)
            row += f"{p.average:8.2f}"
            if len(fams) > 1:
                row += f"  {p.sensitivity.get(fams[1].key, float('nan')):+27.3f}"
            lines.append(row)
            shown += 1
    if len(table.pairs) > shown:
        lines.append(f"... {len(table.pairs) - shown} more pair(s) in the JSON and CSV outputs")
    lines += [f"note: {n}" for n in table.notes]
    return "\n".join(lines)


def couplings_csv_text(ens) -> str:
    """Long-format CSV of every pair and family (module doc)."""
    table = _table(ens)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([
        "pair", "proton_a", "proton_b", "hydrogens_a", "hydrogens_b", "carbons", "equation", "ring_index", "average_Hz",
        "family_key", "family_label", "family_population", "limit_Hz", "sensitivity_Hz_per_kJ",
    ])
    for p in table.pairs:
        base = [
            p.name, p.protons[0], p.protons[1], " ".join(map(str, p.hydrogens[0])), " ".join(map(str, p.hydrogens[1])),
            " ".join(map(str, p.carbons)), p.equation, "" if p.ring_index is None else p.ring_index, f"{p.average:.3f}",
        ]
        fams = sorted_families(ens, p.ring_index)
        if not fams:
            w.writerow(base + ["", "", "", "", ""])
        for f in fams:
            w.writerow(base + [
                f.key, f.label, f"{f.population:.6f}", f"{p.family_limits.get(f.key, float('nan')):.3f}",
                f"{p.sensitivity.get(f.key, float('nan')):.4f}",
            ])
    return buf.getvalue()


def couplings_html(ens, max_pairs: int = 60) -> str:
    """Report section body: coupling table per ring and the <J>-against-temperature plot."""
    from chairbuild.plots import coupling_temperature_figure
    from chairbuild.report import _e, _num, _png_tag

    table = getattr(ens, "couplings", None)
    if table is None or not table.pairs or not ens.conformers:
        return "<p>No vicinal H–C–C–H coupling computed.</p>"
    out = []
    for r in sorted({p.ring_index for p in table.pairs}, key=lambda r: -1 if r is None else r):
        fams = sorted_families(ens, r)
        pairs = [p for p in table.pairs if p.ring_index == r][:max_pairs]
        head = "".join(f"<th>{_e(f.label)}<br><small>{100 * f.population:.1f} %</small></th>" for f in fams)
        sens_head = f"<th>d⟨J⟩/dG({_e(fams[1].label)})<br><small>Hz per kJ/mol</small></th>" if len(fams) > 1 else ""
        rows = []
        for p in pairs:
            cells = "".join(_num(p.family_limits.get(f.key)) for f in fams)
            sens = _num(p.sensitivity.get(fams[1].key), "+.3f") if len(fams) > 1 else ""
            rows.append(f"<tr><td>{_e(p.name)}</td><td>{_e(p.equation)}</td>{cells}{_num(p.average)}{sens}</tr>")
        title = f"Ring {r}: limiting couplings per family (Hz)" if r is not None else "Couplings (Hz)"
        out.append(
            f"<h3>{_e(title)}</h3><table><tr><th>pair</th><th>equation</th>{head}<th>⟨J⟩</th>{sens_head}</tr>"
            + "".join(rows) + "</table>"
        )
    notes = "".join(f"<li>{_e(n)}</li>" for n in table.notes)
    out.append(
        _png_tag(coupling_temperature_figure(ens), "population-weighted couplings against temperature")
        + "<p><small>3J(H,H) from the Haasnoot–de Leeuw–Altona equation (Tetrahedron 1980, 36, 2783; allylic pairs: "
        "Garbisch, JACS 1964, 86, 5561) on each conformer's geometry; ⟨J⟩ weighted by the populations above. "
        "Labels: H&lt;carbon index&gt;, ax/eq in the dominant chair, R/S pro-chirality, methyl groups averaged. "
        "A model estimate: compare with the spectrum, or fit populations to measured couplings "
        "(<code>--fit-couplings</code>).</small></p>"
        + (f"<ul>{notes}</ul>" if notes else "")
    )
    return "".join(out)
