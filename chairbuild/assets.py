"""Browser assets of the HTML report and the notebook viewer: the 3Dmol.js build.

The HTML report embeds 3Dmol.js inline so that the file opens without a network, and the
notebook viewer inlines it into each view. The library is not part of this repository:
it is bundled into the package when the package is built. ``setup.py`` (run by every
``pip install .``, ``pip install -e .`` and wheel build) calls :func:`bundle`, which runs
``npm pack 3dmol@<PINNED_VERSION>`` into a temporary directory, extracts the minified
build into ``chairbuild/_assets/`` of the package being built (git-ignored in the source
tree) and copies the package's license file next to it. Without npm the build still
succeeds, without the asset; the report then says so visibly and loads the same pinned
version from a CDN, and the notebook viewer warns once and does the same.

Usage::

    python -m chairbuild.assets fetch      # download and extract (needs npm and a network)
    python -m chairbuild.assets status     # print where the asset is, or that it is missing
"""

from __future__ import annotations

import argparse
import base64
import gzip
import json
import os
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
    "data_url",
    "inline_loader_js",
    "fetch",
    "bundle",
    "NPM_ENV",
    "main",
]

#: Exact npm version of 3Dmol.js (the one py3Dmol 2.5.5 loads in notebooks).
THREEDMOL_VERSION = "2.5.5"
#: SPDX identifier of the 3Dmol.js license, as read from the package's LICENSE file.
THREEDMOL_LICENSE = "BSD-3-Clause"
#: Environment variable naming the npm executable the build uses; set it to an empty
#: string to build without the asset (for example on a machine with npm but no network).
NPM_ENV = "CHAIRBUILD_NPM"
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


def js_path(folder: str | os.PathLike | None = None) -> Path | None:
    """Path of the fetched 3Dmol.js build of the pinned version, or None when it is missing.

    Parameters
    ----------
    folder : path-like, optional
        Folder to look in (default :data:`ASSET_DIR`).
    """
    folder = _asset_dir() if folder is None else Path(folder)
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


def _compressed_base64(path: Path) -> str:
    stat = path.stat()
    key = (str(path), stat.st_mtime_ns, stat.st_size)
    if _COMPRESSED.get("key") != key:
        packed = gzip.compress(path.read_bytes(), compresslevel=9, mtime=0)
        _COMPRESSED.update(key=key, text=base64.b64encode(packed).decode("ascii"))
    return _COMPRESSED["text"]


_COMPRESSED: dict[str, object] = {}


def data_url() -> str | None:
    """The bundled build as a ``data:`` URL (the whole script, base64), or None when missing."""
    path = js_path()
    if path is None:
        return None
    return "data:text/javascript;base64," + base64.b64encode(path.read_bytes()).decode("ascii")


def inline_loader_js(load_script: str) -> str | None:
    """A JavaScript expression that loads the bundled build from a compressed copy inlined in it.

    The expression evaluates to a Promise: it decodes the gzip-compressed, base64-encoded
    build (about 0.21 MB of text for the 0.54 MB script) with the browser's
    ``DecompressionStream`` and passes a ``blob:`` URL of the script to ``load_script``,
    the name of a page function that takes a script URL and returns a Promise (the
    loader of a py3Dmol view). Nothing is fetched from the network.

    Returns
    -------
    str or None
        None when the asset is missing.
    """
    path = js_path()
    if path is None:
        return None
    payload = _compressed_base64(path)
    return (
        '(function () { var s = atob("' + payload + '"), b = new Uint8Array(s.length);'
        " for (var i = 0; i < s.length; i++) b[i] = s.charCodeAt(i);"
        ' return new Response(new Blob([b]).stream().pipeThrough(new DecompressionStream("gzip"))).blob()'
        ".then(function (t) { return " + load_script
        + '(URL.createObjectURL(new Blob([t], {type: "text/javascript"}))); }); })()'
    )


def fetch(
    version: str = THREEDMOL_VERSION,
    npm: str = "npm",
    quiet: bool = False,
    target: str | os.PathLike | None = None,
) -> Path:
    """Download 3Dmol.js with ``npm pack`` and extract its minified build into :data:`ASSET_DIR`.

    Parameters
    ----------
    version : str
        Exact npm version (default :data:`THREEDMOL_VERSION`).
    npm : str
        The npm executable.
    quiet : bool
        Print nothing on success.
    target : path-like, optional
        Folder to extract into (default :data:`ASSET_DIR`); the package build passes the
        package's folder in the build tree.

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
    target = _asset_dir() if target is None else Path(target)
    with tempfile.TemporaryDirectory(prefix="chairbuild-assets-") as tmp:
        proc = subprocess.run(
            [exe, "pack", f"3dmol@{version}", "--silent"],
            cwd=tmp,
            capture_output=True,
            text=True,
            check=False,
        )
        if proc.returncode != 0:
            raise ChairbuildError(
                f"'npm pack 3dmol@{version}' failed (exit {proc.returncode}): "
                f"{proc.stderr.strip() or proc.stdout.strip() or 'no output'}"
            )
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


def bundle(target: str | os.PathLike, npm: str | None = None) -> Path | None:
    """Build step: put the pinned 3Dmol.js build into ``target`` (called by ``setup.py``).

    Keeps an asset of the pinned version already in ``target`` (copied from the source
    tree, or fetched by an earlier editable install); otherwise runs :func:`fetch` into
    ``target``. When npm is not found, prints a notice on stderr and returns None: the
    package then builds without the asset and the report falls back to the CDN, saying so.

    Parameters
    ----------
    target : path-like
        The ``chairbuild/_assets`` folder of the package being built.
    npm : str, optional
        npm executable; default: the environment variable :data:`NPM_ENV`, else ``npm``.
        An empty string means "build without npm".

    Returns
    -------
    pathlib.Path or None
        Path of the bundled ``3Dmol-min.js``, or None when npm is missing.

    Raises
    ------
    ChairbuildError
        npm is there but ``npm pack`` fails (no network, unknown version): the build stops
        rather than silently producing a package whose reports need the network.
    """
    target = Path(target)
    present = js_path(target)
    if present is not None:
        print(f"chairbuild build: 3Dmol.js {THREEDMOL_VERSION} already in {target}", file=sys.stderr)
        return present
    exe = os.environ.get(NPM_ENV, "npm") if npm is None else npm
    if not exe or shutil.which(exe) is None:
        print(
            f"chairbuild build: NOTICE: npm not found ({NPM_ENV}={exe!r}); 3Dmol.js {THREEDMOL_VERSION} is not "
            f"bundled, so HTML reports and notebook views will load it from {cdn_url()} and say so. "
            "Install Node.js/npm and reinstall chairbuild to bundle it.",
            file=sys.stderr,
        )
        return None
    try:
        js = fetch(npm=exe, quiet=True, target=target)
    except ChairbuildError as exc:
        raise ChairbuildError(
            f"{exc}; to build without the bundled 3D viewer, set {NPM_ENV}= (empty) in the environment"
        ) from exc
    print(f"chairbuild build: 3Dmol.js {THREEDMOL_VERSION} ({THREEDMOL_LICENSE}) bundled into {target}", file=sys.stderr)
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
