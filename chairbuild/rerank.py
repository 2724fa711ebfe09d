"""Re-ranking after the build level: kept as the stage's module name; the work lives in :mod:`chairbuild.levels`.

``method``/``rerank``/``free_energy`` are shorthands for a chain of stages
(:func:`chairbuild.levels.chain.shorthand_chain`); :func:`chairbuild.levels.apply.run_chain`
runs any chain.
"""

from __future__ import annotations

from chairbuild.levels.apply import ChainOutcome, RankedStructure, run_chain
from chairbuild.levels.chain import REOPTIMISE_MARGIN_KJ, Engine as Level

__all__ = ["Level", "RankedStructure", "ChainOutcome", "run_chain", "REOPTIMISE_MARGIN_KJ"]
