"""Open the HTML report in headless Chromium: the 3D canvas is drawn and the tables are in the DOM.

Needs ``chromium`` on the PATH (skipped otherwise) and the 3Dmol.js asset
(``python -m chairbuild.assets fetch``; skipped otherwise, since the report would then
need the network). Chromium renders WebGL with SwiftShader; ``--disable-gpu`` would
leave the canvas blank.
"""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

TBU_METHYL = "CC(C)(C)[C@H]1CC[C@@H](C)CC1"
WINDOW = (1200, 1600)


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


def _run_chromium(exe: str, url: str, profile: Path, *extra: str) -> subprocess.CompletedProcess:
    args = [
        exe,
        "--headless",
        "--no-sandbox",
        "--enable-unsafe-swiftshader",
        "--use-angle=swiftshader",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--hide-scrollbars",
        f"--user-data-dir={profile}",
        f"--window-size={WINDOW[0]},{WINDOW[1]}",
        "--virtual-time-budget=8000",
        *extra,
        url,
    ]
    return subprocess.run(args, capture_output=True, text=True, timeout=180, check=False)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    from chairbuild.assets import js_path
    from chairbuild.pipeline import analyze
    from chairbuild.report import write_report

    exe = _chromium()
    if exe is None:
        pytest.skip("chromium is not installed")
    if js_path() is None:
        pytest.skip("3Dmol.js asset missing; run 'python -m chairbuild.assets fetch'")
    work = tmp_path_factory.mktemp("browser")
    ens = analyze(TBU_METHYL, name="tBu-locked methylcyclohexane")
    report = write_report(ens, work / "report.html")
    url = report.resolve().as_uri()
    dom = _run_chromium(exe, url, work / "profile-dom", "--dump-dom")
    assert dom.returncode == 0, dom.stderr[-2000:]
    shot = work / "shot.png"
    run = _run_chromium(exe, url, work / "profile-shot", f"--screenshot={shot}")
    assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
    return ens, dom.stdout, shot, report


def test_buttons_step_through_conformers_and_overlay_them(rendered, tmp_path):
    """Click next twice, previous once, then overlay: the status line follows (packed data unpacked in the page)."""
    from chairbuild.viewer import overlay_title, title_text

    ens, _, _, report = rendered
    assert len(ens.conformers) >= 3
    clicks = (
        "<script>(function () { var log = [];"
        " function st() { return document.getElementById('cb-status-0').textContent; }"
        " document.getElementById('cb-next-0').click(); document.getElementById('cb-next-0').click(); log.push(st());"
        " document.getElementById('cb-prev-0').click(); log.push(st());"
        " var o = document.getElementById('cb-overlay-0'); o.checked = true; o.dispatchEvent(new Event('change')); log.push(st());"
        " var pre = document.createElement('pre'); pre.id = 'cb-clicks'; pre.textContent = JSON.stringify(log);"
        " document.body.appendChild(pre); })();</script></body>"
    )
    page = tmp_path / "clicked.html"
    page.write_text(report.read_text(encoding="utf-8").replace("</body>", clicks), encoding="utf-8")
    dom = _run_chromium(_chromium(), page.resolve().as_uri(), tmp_path / "profile", "--dump-dom")
    assert dom.returncode == 0, dom.stderr[-2000:]
    found = re.search(r'<pre id="cb-clicks">(.*?)</pre>', dom.stdout, re.S)
    assert found is not None, "click script did not run"
    assert json.loads(html.unescape(found.group(1))) == [title_text(ens, 2), title_text(ens, 1), overlay_title(ens, 1)]


def test_tables_and_viewer_state_are_in_the_dom(rendered):
    from chairbuild.output import format_table
    from chairbuild.viewer import title_text

    ens, dom, _, _ = rendered
    for line in format_table(ens).splitlines()[:6]:
        assert html.escape(line, quote=False) in dom
    assert 'id="cb-caveat"' in dom and "model estimates" in dom
    # the viewer's script ran: status line set and canvas created
    assert f'id="cb-status-0">{html.escape(title_text(ens, 0), quote=False)}<' in dom
    viewer = re.search(r'<div class="viewer" id="cb-viewer-0"[^>]*data-rect="\d+,\d+,\d+,\d+"[^>]*>(.{0,300})', dom, re.S)
    assert viewer is not None
    assert "<canvas" in viewer.group(1)


def test_canvas_shows_a_molecule(rendered):
    from matplotlib.image import imread

    _, dom, shot, _ = rendered
    x, y, w, h = map(int, re.search(r'id="cb-viewer-0"[^>]*data-rect="(\d+),(\d+),(\d+),(\d+)"', dom).groups())
    assert y + h <= WINDOW[1], "viewer below the screenshot"
    img = imread(str(shot))[..., :3]
    # centre of the canvas: the molecule (title and legend labels sit at the edges)
    centre = img[y + h // 4 : y + 3 * h // 4, x + w // 4 : x + 3 * w // 4]
    grey = centre.mean(axis=2)
    assert grey.std() > 0.05
    assert (grey < 0.8).mean() > 0.01  # sticks drawn, not a blank white canvas
    # the syn-axial hydrogens are drawn pink (#db2777) somewhere on the canvas
    canvas = img[y : y + h, x : x + w]
    pink = (canvas[..., 0] > 0.6) & (canvas[..., 1] < 0.35) & (canvas[..., 2] > 0.3) & (canvas[..., 2] < 0.65)
    assert pink.sum() > 30


def test_notebook_view_draws_offline_from_the_bundled_script(tmp_path):
    """The HTML of a py3Dmol view, opened as a page: it names no network URL and still draws."""
    from matplotlib.image import imread

    from chairbuild.assets import js_path
    from chairbuild.pipeline import analyze
    from chairbuild.viewer import view

    exe = _chromium()
    if exe is None:
        pytest.skip("chromium is not installed")
    if js_path() is None:
        pytest.skip("3Dmol.js asset missing; reinstall chairbuild with npm on the PATH")
    html_text = view(analyze(TBU_METHYL), 0, width=600, height=400).write_html()
    assert not re.search(r"https?://", html_text)
    page = tmp_path / "view.html"
    page.write_text(f"<!DOCTYPE html><html><body style='margin:0'>{html_text}</body></html>", encoding="utf-8")
    shot = tmp_path / "view.png"
    run = _run_chromium(exe, page.resolve().as_uri(), tmp_path / "profile", f"--screenshot={shot}")
    assert run.returncode == 0 and shot.is_file(), run.stderr[-2000:]
    img = imread(str(shot))[:400, :600, :3]
    grey = img[100:300, 150:450].mean(axis=2)
    assert (grey < 0.8).mean() > 0.01  # sticks drawn, not a blank canvas or the load-failure text
    pink = (img[..., 0] > 0.6) & (img[..., 1] < 0.35) & (img[..., 2] > 0.3) & (img[..., 2] < 0.65)
    assert pink.sum() > 30  # the syn-axial hydrogens of the locked chair
