"""Build step of chairbuild: bundle 3Dmol.js into the package (all metadata is in pyproject.toml).

Every build (``pip install .``, ``pip install -e .``, ``pip wheel .``) runs ``build_py``;
this subclass then calls :func:`chairbuild.assets.bundle`, which runs ``npm pack`` for the
pinned 3Dmol.js and extracts its minified build into ``chairbuild/_assets/`` of the build
tree (of the source tree for an editable install). Without npm the build goes on without
the asset and says so; see chairbuild/assets.py.
"""

from __future__ import annotations

import sys
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

HERE = Path(__file__).resolve().parent


def _assets_module():
    """chairbuild.assets of this source tree (it imports nothing outside the standard library)."""
    sys.path.insert(0, str(HERE))
    try:
        import chairbuild.assets as assets
    finally:
        sys.path.remove(str(HERE))
    if Path(assets.__file__).resolve().parent != HERE / "chairbuild":
        raise SystemExit(f"error: chairbuild.assets imported from {assets.__file__}, not from {HERE}")
    return assets


class BuildPyWith3Dmol(build_py):
    """``build_py`` that also bundles the pinned 3Dmol.js build."""

    def run(self) -> None:
        super().run()
        assets = _assets_module()
        if self.editable_mode:
            target = assets.ASSET_DIR  # an editable install reads the package from the source tree
        else:
            target = Path(self.build_lib) / "chairbuild" / assets.ASSET_DIR.name
        try:
            assets.bundle(target)
        except assets.ChairbuildError as exc:
            raise SystemExit(f"error: {exc}") from exc
        self._bundled = sorted(str(p) for p in Path(target).iterdir() if p.is_file()) if Path(target).is_dir() else []

    def get_outputs(self, include_bytecode: bool = True) -> list[str]:
        outputs = super().get_outputs(include_bytecode)
        if self.editable_mode:
            return outputs
        return outputs + [p for p in getattr(self, "_bundled", []) if p not in outputs]


setup(cmdclass={"build_py": BuildPyWith3Dmol})
