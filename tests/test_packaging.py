"""The package build bundles 3Dmol.js (``setup.py`` -> :func:`chairbuild.assets.bundle`).

Internal-consistency checks (common practice, no source): a wheel built from a clean copy
of the source tree holds the pinned build when npm is on the PATH; without npm the build
still succeeds, says so, and the wheel has no asset. The wheel builds are slow-marked:
they need pip's build isolation (setuptools from the package index) and npm's registry
or cache.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

import chairbuild.assets as assets
from chairbuild.errors import ChairbuildError

ROOT = Path(__file__).resolve().parent.parent
FAKE_JS = "/* stand-in for the 3Dmol.js build */"


def _write_fake_asset(folder: Path, version: str = assets.THREEDMOL_VERSION) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / assets.JS_NAME).write_text(FAKE_JS, encoding="utf-8")
    (folder / "3Dmol-version.json").write_text(json.dumps({"version": version}), encoding="utf-8")


def test_bundle_without_npm_gives_the_notice_and_builds_on(tmp_path, monkeypatch, capsys):
    empty = tmp_path / "bin"
    empty.mkdir()
    monkeypatch.setenv("PATH", str(empty))  # no npm anywhere on the PATH
    monkeypatch.delenv(assets.NPM_ENV, raising=False)
    target = tmp_path / "_assets"
    assert assets.bundle(target) is None
    err = capsys.readouterr().err
    assert "NOTICE: npm not found" in err and assets.cdn_url() in err
    assert not target.exists()


def test_bundle_with_empty_npm_variable_skips_npm(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv(assets.NPM_ENV, "")
    assert assets.bundle(tmp_path / "_assets") is None
    assert "NOTICE: npm not found" in capsys.readouterr().err


def test_bundle_keeps_an_asset_of_the_pinned_version(tmp_path, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))
    target = tmp_path / "_assets"
    _write_fake_asset(target)
    assert assets.bundle(target) == target / assets.JS_NAME
    assert (target / assets.JS_NAME).read_text(encoding="utf-8") == FAKE_JS


def test_bundle_stops_when_npm_is_there_but_fails(tmp_path):
    failing = shutil.which("false")
    if failing is None:
        pytest.skip("no 'false' executable")
    target = tmp_path / "_assets"
    _write_fake_asset(target, version="0.0.1")  # stale: must be replaced, so npm is run
    with pytest.raises(ChairbuildError, match=f"failed.*{assets.NPM_ENV}="):
        assets.bundle(target, npm=failing)


def _clean_copy(dest: Path) -> Path:
    """The source tree without build outputs, virtual environments or a fetched asset."""
    ignore = shutil.ignore_patterns(
        ".git", ".venv", "build", "dist", "*.egg-info", "_assets", "__pycache__", ".pytest_cache", "gallery", "out"
    )
    shutil.copytree(ROOT, dest, ignore=ignore)
    return dest


def _build_wheel(src: Path, out: Path, env: dict[str, str]) -> tuple[subprocess.CompletedProcess, Path | None]:
    proc = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-v", "-w", str(out), str(src)],
        capture_output=True,
        text=True,
        env=env,
        timeout=600,
        check=False,
    )
    wheels = sorted(out.glob("chairbuild-*.whl"))
    return proc, (wheels[0] if wheels else None)


@pytest.mark.slow
def test_wheel_from_a_clean_copy_contains_the_asset(tmp_path):
    if shutil.which("npm") is None:
        pytest.skip("npm not installed")
    src = _clean_copy(tmp_path / "src")
    env = {k: v for k, v in os.environ.items() if k != assets.NPM_ENV}
    proc, wheel = _build_wheel(src, tmp_path / "wheels", env)
    assert proc.returncode == 0 and wheel is not None, proc.stdout[-3000:] + proc.stderr[-3000:]
    with zipfile.ZipFile(wheel) as zf:
        names = set(zf.namelist())
        assert "chairbuild/_assets/3Dmol-min.js" in names
        assert "chairbuild/_assets/3Dmol-LICENSE.txt" in names
        stamp = json.loads(zf.read("chairbuild/_assets/3Dmol-version.json"))
        assert stamp["version"] == assets.THREEDMOL_VERSION
        assert len(zf.read("chairbuild/_assets/3Dmol-min.js")) > 100_000
        record = zf.read(next(n for n in names if n.endswith(".dist-info/RECORD"))).decode()
    assert "chairbuild/_assets/3Dmol-min.js," in record
    assert "chairbuild/forcefields/__init__.py," in record


@pytest.mark.slow
def test_wheel_without_npm_builds_with_the_notice(tmp_path):
    src = _clean_copy(tmp_path / "src")
    env = {k: v for k, v in os.environ.items() if k != assets.NPM_ENV}
    empty = tmp_path / "bin"
    empty.mkdir()
    env["PATH"] = str(empty)  # pip is started by its full path; nothing else on the PATH, no npm
    proc, wheel = _build_wheel(src, tmp_path / "wheels", env)
    assert proc.returncode == 0 and wheel is not None, proc.stdout[-3000:] + proc.stderr[-3000:]
    assert "NOTICE: npm not found" in proc.stdout + proc.stderr
    with zipfile.ZipFile(wheel) as zf:
        assert not [n for n in zf.namelist() if "/_assets/" in n]
        assert "chairbuild/assets.py" in zf.namelist()
