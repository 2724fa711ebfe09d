"""Tests of chairbuild.report and chairbuild.assets.

Checks are internal-consistency checks (common practice, no source): the report must be
one file that loads nothing from the network when the 3Dmol.js asset is present, must
carry the table, the SDF and the caveat, and must say so plainly when it falls back to
the CDN. The JavaScript twin of ``viewer.compose`` is run with Node.js when available.
"""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

import chairbuild.assets as assets
from chairbuild.errors import InputError, OptionError
from chairbuild.report import NETWORK_NOTICE, _JS, caveat_text, check_report_path, report_html, write_report
from chairbuild.report_pack import PACK_JS, pack_sdf, unpack_record

TBU_METHYL = "CC(C)(C)[C@H]1CC[C@@H](C)CC1"
METHYLDECALIN = "C[C@H]1CC[C@H]2CCCC[C@@H]2C1"
FAKE_JS = "/* stand-in for the 3Dmol.js build */ var $3Dmol = undefined;"


@pytest.fixture(scope="module")
def locked():
    from chairbuild.pipeline import analyze

    return analyze(TBU_METHYL, name="tBu-locked <methyl> cyclohexane")


@pytest.fixture(scope="module")
def fused():
    from chairbuild.pipeline import analyze

    return analyze(METHYLDECALIN, name="2-methyldecalin")


@pytest.fixture
def fake_asset(tmp_path, monkeypatch):
    folder = tmp_path / "assets"
    folder.mkdir()
    (folder / assets.JS_NAME).write_text(FAKE_JS, encoding="utf-8")
    (folder / "3Dmol-version.json").write_text(json.dumps({"version": assets.THREEDMOL_VERSION}), encoding="utf-8")
    monkeypatch.setattr(assets, "ASSET_DIR", folder)
    return folder


@pytest.fixture
def no_asset(tmp_path, monkeypatch):
    monkeypatch.setattr(assets, "ASSET_DIR", tmp_path / "missing")


def _data_block(text: str, idx: int) -> dict:
    m = re.search(rf'<script type="application/json" id="cb-data-{idx}">(.*?)</script>', text, re.S)
    assert m is not None
    return json.loads(m.group(1))


def test_report_is_self_contained_with_the_asset(locked, fake_asset):
    path = write_report(locked, "report.html")
    text = Path(path).read_text(encoding="utf-8")
    assert FAKE_JS in text
    assert not re.search(r"""<script[^>]*\bsrc\s*=\s*["']?https?:""", text, re.I)
    assert not re.search(r"""<(link|img|iframe)[^>]*\b(src|href)\s*=\s*["']?https?:""", text, re.I)
    assert NETWORK_NOTICE not in text
    assert assets.cdn_url() not in text


def test_report_contains_table_sdf_caveat_and_families(locked, fake_asset):
    from chairbuild.output import format_table, sdf_text
    from chairbuild.viewer import aligned_ensemble

    text = report_html(locked)
    assert html.escape(format_table(locked)) in text
    assert html.escape(caveat_text([locked])) in text
    assert "model estimates" in text.lower() and "higher-level calculation" in text
    data = _data_block(text, 0)
    # the viewer's SDF is the exporter's, packed: one template, coordinates per conformer
    assert "records" not in data["sdf"] and len(data["sdf"]["xyz"]) == len(locked.conformers) == data["n"]
    rebuilt = "".join(unpack_record(data["sdf"], k) for k in range(data["n"]))
    assert rebuilt == sdf_text(aligned_ensemble(locked))
    assert len(data["single"]) == len(data["overlay"]["titles"]) == len(locked.conformers)
    flagged = [f for f in locked.families if f.disagreement]
    assert text.count('<span class="flag">disagrees</span>') == len(flagged)
    for fam in locked.families:
        for term in fam.additive_terms:
            assert html.escape(term.source) in text
    # energy/population, family populations vs temperature, additive comparison, <J> vs temperature
    assert text.count("data:image/png;base64,") == 4
    assert "&lt;methyl&gt;" in text and "<methyl>" not in text  # names are escaped


def test_missing_asset_falls_back_to_the_pinned_cdn_and_says_so(locked, no_asset):
    assert assets.js_path() is None
    text = report_html(locked)
    assert NETWORK_NOTICE in text
    assert "python -m chairbuild.assets fetch" in text
    srcs = re.findall(r"""<script[^>]*\bsrc\s*=\s*["']([^"']+)""", text)
    assert srcs == [assets.cdn_url()]
    assert f"3dmol@{assets.THREEDMOL_VERSION}/" in srcs[0]


def test_stale_asset_version_counts_as_missing(fake_asset):
    (fake_asset / "3Dmol-version.json").write_text(json.dumps({"version": "0.0.1"}), encoding="utf-8")
    assert assets.js_path() is None
    assert assets.read_js() is None


def test_several_ensembles_in_one_file(locked, fused, fake_asset):
    path = write_report([locked, fused], Path("out") / "both.html", title="two scaffolds")
    text = path.read_text(encoding="utf-8")
    assert text.count("<section id=") == 2
    assert _data_block(text, 1)["n"] == len(fused.conformers)
    assert "<title>two scaffolds</title>" in text
    assert text.count('class="caveat"') == 1  # the caveat box once, each section links to it
    assert text.count('href="#cb-caveat"') == 2
    assert text.count(html.escape(caveat_text([locked, fused]))) == 1


def test_bad_arguments_raise_typed_errors(locked):
    with pytest.raises(OptionError):
        write_report(locked, "report.txt")
    with pytest.raises(OptionError):
        check_report_path("report.json")
    Path("a_folder.html").mkdir()
    with pytest.raises(OptionError):
        check_report_path("a_folder.html")
    assert check_report_path("out/x.HTML") == Path("out/x.HTML")
    with pytest.raises(InputError):
        write_report([], "report.html")
    with pytest.raises(InputError):
        write_report(["not an ensemble"], "report.html")
    assert not Path("report.html").exists()


@pytest.mark.skipif(shutil.which("node") is None, reason="Node.js not installed")
def test_javascript_compose_matches_python(fused):
    from chairbuild.viewer import HydrogenMode, compose, compose_config, scene_layers

    layers = scene_layers(fused, 1)
    cfg = compose_config()
    cases = [(m.value, t) for m in HydrogenMode for t in (False, True)]
    script = _JS + "\nconst L = " + json.dumps(layers) + ";\nconst cfg = " + json.dumps(cfg) + ";\n"
    script += "const cases = " + json.dumps(cases) + ";\n"
    script += "console.log(JSON.stringify(cases.map(c => cbCompose(L, c[0], c[1], 460, cfg, false))));\n"
    Path("compose.js").write_text(script, encoding="utf-8")
    out = subprocess.run(["node", "compose.js"], capture_output=True, text=True, check=True, timeout=60)
    got = json.loads(out.stdout)
    want = [json.loads(json.dumps(compose(layers, m, t, legend=True, height=460))) for m, t in cases]
    assert got == want


def test_assets_fetch_without_npm_raises(tmp_path, monkeypatch):
    from chairbuild.errors import ChairbuildError

    monkeypatch.setattr(assets, "ASSET_DIR", tmp_path / "a")
    with pytest.raises(ChairbuildError, match="npm not found"):
        assets.fetch(npm="npm-that-does-not-exist-here")
    assert assets.main(["status"]) == 1


@pytest.mark.skipif(shutil.which("node") is None, reason="Node.js not installed")
def test_javascript_unpacking_gives_the_exported_sdf_and_every_layer(fused):
    """cbSdf/cbRecord, cbLayer and cbOverlay rebuild exactly what the Python side computes."""
    from chairbuild.output import sdf_text
    from chairbuild.report_pack import viewer_data
    from chairbuild.viewer import aligned_ensemble, scene_layers

    data = viewer_data(fused, 460, "x.sdf")
    n = data["n"]
    script = PACK_JS + "\nconst D = " + json.dumps(data) + ";\n"
    script += (
        "const out = {sdf: cbSdf(D.sdf), records: [], single: [], overlay: []};\n"
        "for (let k = 0; k < D.n; k++) {\n"
        "  out.records.push(cbRecord(D.sdf, k));\n"
        "  const L = cbLayer(D.single[k], D.pool);\n"
        "  out.single.push(L);\n"
        "  out.overlay.push(cbOverlay(cbLayer(D.single[k], D.pool), k, D.n, D.overlay));\n"
        "}\n"
        "console.log(JSON.stringify(out));\n"
    )
    Path("unpack.js").write_text(script, encoding="utf-8")
    got = json.loads(subprocess.run(["node", "unpack.js"], capture_output=True, text=True, check=True, timeout=60).stdout)
    aligned = aligned_ensemble(fused)
    assert got["sdf"] == sdf_text(aligned)
    assert got["records"] == [unpack_record(data["sdf"], k) for k in range(n)]
    for k in range(n):
        for overlay, key in ((False, "single"), (True, "overlay")):
            want = json.loads(json.dumps(scene_layers(fused, k, overlay=overlay, aligned=aligned)))
            assert got[key][k] == want, (key, k)


def test_pack_sdf_keeps_records_that_do_not_share_a_template():
    text = "a\n  x\n\nnot a counts line\nM  END\n$$$$\nb\n$$$$\n"
    packed = pack_sdf(text)
    assert packed == {"records": ["a\n  x\n\nnot a counts line\nM  END\n$$$$\n", "b\n$$$$\n"]}
    assert unpack_record(packed, 1) == "b\n$$$$\n"


def test_report_grows_with_conformers_by_their_coordinates_only(fake_asset):
    """Bytes per extra conformer stay constant and near the size of its SDF coordinates and properties.

    Before the data were packed, the overlay layers named every other conformer for each
    conformer, so a 119-conformer report was 9.1 MB and each extra conformer cost more: for
    this molecule 26 kB per conformer between 4 and 32 conformers, 53 kB between 32 and 65
    (31 atoms). Packed: 4.1 kB, then 2.9 kB.
    """
    from dataclasses import replace

    from chairbuild.pipeline import analyze

    ens = analyze("CCCC[C@H]1CC[C@H](O)CC1", name="trans-4-butylcyclohexanol")
    n = len(ens.conformers)
    assert n >= 40  # enough for a slope (65 at the time of writing)
    # couplings are left out: their per-conformer table belongs to the full ensemble
    sizes = {
        m: len(report_html(replace(ens, conformers=ens.conformers[:m], couplings=None)).encode("utf-8")) for m in (4, n // 2, n)
    }
    low = (sizes[n // 2] - sizes[4]) / (n // 2 - 4)
    high = (sizes[n] - sizes[n // 2]) / (n - n // 2)
    assert high < 1.25 * low  # linear, no term that grows with the square of the count
    # per conformer: 3 coordinates of 10 characters per atom would be the SDF text itself;
    # the packed coordinates, the property block, the table rows and the packed scene stay below it
    assert high < 30 * len(ens.symbols) + 3000


def test_additive_breakdown_shows_specific_increments_sources_fallbacks_and_unknowns(fake_asset):
    """The family table's breakdown: every term with its increment key, numbered source and conditions,
    generic fallbacks named, families lacking a term say so instead of a number (internal consistency,
    common practice, no source)."""
    from chairbuild.families import DISAGREEMENT_KJ
    from chairbuild.pipeline import analyze
    from chairbuild.result import AdditiveStatus

    piperidine = analyze("c1ccc(cc1)C1CCNCC1", name="4-phenylpiperidine", threads=1)  # PIP-N1-H row; C6H5 falls back
    aminol = analyze("N[C@@H]1CCCC[C@@H]1O", name="cis-2-aminocyclohexanol", threads=1)  # NH2/OH gauche pair unknown
    texts = {}
    for ens in (piperidine, aminol):
        text = texts[ens.name] = report_html(ens)
        section = text[text.index("Ring-state families"):text.index("Vicinal couplings")]
        terms = [t for f in ens.families for t in f.additive_terms]
        assert terms
        refs = {f"{t.increment}: {t.source}" + (f"; {t.conditions}" if t.conditions else "") for t in terms}
        for ref in refs:
            assert html.escape(ref) in section  # listed once under the table, numbered
        for t in terms:
            assert html.escape(t.applies_to) in section
        assert section.count('<ol class="sources">') == 1 and section.count('<li id="cb-src-ring0-') == len(refs)
        fallbacks = [t for t in terms if t.fallback]
        assert section.count("generic fallback: ") == len(fallbacks)
        for f in ens.families:
            if f.additive_status in (AdditiveStatus.UNKNOWN, AdditiveStatus.NO_INCREMENTS):
                assert not f.disagreement
                for note in f.additive_notes:
                    assert html.escape(note.split(": ", 1)[-1]) in section
            if f.disagreement:
                assert f"(threshold {DISAGREEMENT_KJ:.1f} + uncertainty {f.additive_uncertainty:.1f})" in section
    # the specific piperidine N-H row is used (no fallback), the phenyl one falls back to cyclohexane's
    keys = {t.increment: t for f in piperidine.families for t in f.additive_terms}
    assert keys["PIP-N1-H"].fallback == "" and keys["C6H5"].fallback
    aminol_text = texts[aminol.name]
    unknown = [f for f in aminol.families if f.additive_status is AdditiveStatus.UNKNOWN]
    assert unknown and aminol_text.count("<b>increment unknown</b>") == len(unknown)
