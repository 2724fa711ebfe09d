"""Levels after the build: the chain of stages, its runner, the results cache, bring-your-own energies.

:mod:`~chairbuild.levels.chain` (stages, syntax, shorthands, the ranking formula),
:mod:`~chairbuild.levels.apply` (running the chain), :mod:`~chairbuild.levels.runner`
(tasks over worker processes), :mod:`~chairbuild.levels.cache` (results cache),
:mod:`~chairbuild.levels.external` (re-weighting with energies computed elsewhere).
Nothing is imported here, so ``import chairbuild`` does no work.
"""
