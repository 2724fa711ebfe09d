"""Browser assets of the HTML report: the 3Dmol.js build, fetched once at set-up.

The HTML report embeds 3Dmol.js inline so that the file opens without a network. The
library is not part of this repository: ``python -m chairbuild.assets fetch`` runs
``npm pack 3dmol@<PINNED_VERSION>`` into a temporary directory, extracts the minified
build into ``chairbuild/_assets/`` (git-ignored) and copies the package's license file
next to it. When the asset is missing (npm was not available at set-up), the report
says so visibly and loads the same pinned version from a CDN instead.

Usage::

    python -m chairbuild.assets fetch      # download and extract (needs npm and a network)
    python -m chairbuild.assets status     # print where the asset is, or that it is missing
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tarfile
import tempfile
from pathlib import Path

from chairbuild.errors import ChairbuildError

__all__ = [
    "THREEDMOL_VERSION",
    "THREEDMOL_LICENSE",
    "ASSET_DIR",
    "JS_NAME",
    "cdn_url",
    "js_path",
    "license_path",
    "read_js",
    "fetch",
    "main",
]

#: Exact npm version of 3Dmol.js (the one py3Dmol 2.5.5 loads in notebooks).
THREEDMOL_VERSION = "2.5.5"
#: SPDX identifier of the 3Dmol.js license, as read from the package's LICENSE file.
THREEDMOL_LICENSE = "BSD-3-Clause"
#: Where the fetched files are kept (git-ignored).
ASSET_DIR = Path(__file__).resolve().parent / "_assets"
#: File name of the minified build inside :data:`ASSET_DIR`.
JS_NAME = "3Dmol-min.js"
_LICENSE_NAME = "3Dmol-LICENSE.txt"
_BANNER_NAME = "3Dmol-min.js.LICENSE.txt"
_STAMP_NAME = "3Dmol-version.json"
_MEMBERS = {
    "package/build/3Dmol-min.js": JS_NAME,
    "package/build/3Dmol-min.js.LICENSE.txt": _BANNER_NAME,
    "package/LICENSE": _LICENSE_NAME,
}


def cdn_url(version: str = THREEDMOL_VERSION) -> str:
    """URL of the pinned minified build on a public CDN (used only when the asset is missing)."""
    return f"https://cdn.jsdelivr.net/npm/3dmol@{version}/build/3Dmol-min.js"


def _asset_dir() -> Path:
    # Read the module attribute at call time so tests can point it elsewhere.
    return Path(sys.modules[__name__].ASSET_DIR)


def js_path() -> Path | None:
    """Path of the fetched 3Dmol.js build of the pinned version, or None when it is missing."""
    folder = _asset_dir()
    js = folder / JS_NAME
    stamp = folder / _STAMP_NAME
    if not js.is_file() or not stamp.is_file():
        return None
    try:
        recorded = json.loads(stamp.read_text(encoding="utf-8")).get("version")
    except (OSError, ValueError):
        return None
    return js if recorded == THREEDMOL_VERSION else None


def license_path() -> Path | None:
    """Path of the 3Dmol.js license file copied from the package, or None when missing."""
    path = _asset_dir() / _LICENSE_NAME
    return path if path.is_file() else None


def read_js() -> str | None:
    """Text of the fetched 3Dmol.js build, or None when it is missing."""
    path = js_path()
    return None if path is None else path.read_text(encoding="utf-8")


def fetch(version: str = THREEDMOL_VERSION, npm: str = "npm", quiet: bool = False) -> Path:
    """Download 3Dmol.js with ``npm pack`` and extract its minified build into :data:`ASSET_DIR`.

    Parameters
    ----------
    version : str
        Exact npm version (default :data:`THREEDMOL_VERSION`).
    npm : str
        The npm executable.
    quiet : bool
        Print nothing on success.

    Returns
    -------
    pathlib.Path
        Path of the extracted ``3Dmol-min.js``.

    Raises
    ------
    ChairbuildError
        npm is not installed, ``npm pack`` fails, or the package lacks an expected file.
    """
    exe = shutil.which(npm)
    if exe is None:
        raise ChairbuildError(
            f"npm not found; install Node.js/npm and run 'python -m chairbuild.assets fetch' "
            f"(reports will load 3Dmol.js {version} from {cdn_url(version)} until then)"
        )
    target = _asset_dir()
    with tempfile.TemporaryDirectory(prefix="chairbuild-assets-") as tmp:
        proc = subprocess.run(
            [exe, "pack", f"3dmol@{version}", "--silent"],
            cwd=tmp,
            capture_output=True,
            text=True,
            check=False,
        )
        if proc.returncode != 0:
            raise ChairbuildError(f"'npm pack 3dmol@{version}' failed: {proc.stderr.strip() or proc.stdout.strip()}")
        tarballs = sorted(Path(tmp).glob("3dmol-*.tgz"))
        if not tarballs:
            raise ChairbuildError(f"'npm pack 3dmol@{version}' wrote no tarball")
        target.mkdir(parents=True, exist_ok=True)
        with tarfile.open(tarballs[0], "r:gz") as tar:
            names = set(tar.getnames())
            for member, out_name in _MEMBERS.items():
                if member not in names:
                    raise ChairbuildError(f"3dmol@{version} has no {member}")
                source = tar.extractfile(member)
                if source is None:
                    raise ChairbuildError(f"3dmol@{version}: {member} is not a regular file")
                tmp_out = target / f".{out_name}.part"
                tmp_out.write_bytes(source.read())
                tmp_out.replace(target / out_name)
    (target / _STAMP_NAME).write_text(
        json.dumps({"package": "3dmol", "version": version, "license": THREEDMOL_LICENSE}, indent=2) + "\n",
        encoding="utf-8",
    )
    js = target / JS_NAME
    if not quiet:
        print(f"3Dmol.js {version} ({THREEDMOL_LICENSE}) extracted to {js}")
    return js


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``fetch`` or ``status``."""
    parser = argparse.ArgumentParser(prog="python -m chairbuild.assets", description=__doc__.split("\n\n")[0])
    parser.add_argument("action", choices=("fetch", "status"))
    parser.add_argument("--npm", default="npm", help="npm executable (default: npm)")
    args = parser.parse_args(argv)
    if args.action == "status":
        path = js_path()
        if path is None:
            print(f"3Dmol.js {THREEDMOL_VERSION} missing; reports will load it from {cdn_url()}")
            return 1
        print(f"3Dmol.js {THREEDMOL_VERSION} at {path}")
        return 0
    try:
        fetch(npm=args.npm)
    except ChairbuildError as exc:
        print(f"chairbuild.assets: {exc}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
