"""The chain of levels: stages, their text syntax, the shorthands and the ranking formula.

An analysis always starts with the build level (MMFF94 or MMFF94s: build and minimise).
After it comes an ordered chain of :class:`Stage` objects. Each stage is an energy engine
(``mmff94``, ``gfn2``, ``dft``) with one or more operations:

* ``single-point`` — the energy at the current geometries, recorded as
  ``"<level>//<geometry level>"``;
* ``optimise`` — re-optimise at this level (stereochemistry is checked again, duplicates
  removed again); the energy is recorded as ``"<level>"``;
* ``frequencies`` — harmonic frequencies at this level (the geometry must be a minimum of
  the same level), giving the qRRHO correction G_RRHO = G − E.

and a ``window`` (kJ/mol): after the stage, only conformers within the window of the lowest
(at the stage's ranking quantity) go on to the next stage. The window of the build level is
:attr:`Chain.build_window`. Every record keeps the energy of every stage it reached.

Text syntax (``--stage``, repeatable, in order)::

    ENGINE:OPERATION[+OPERATION...][,key=value...]

    gfn2:optimise+frequencies,window=15
    dft:single-point,window=8,functional=r2scan,basis=def2-svp,solvent=water

keys: ``window`` (kJ/mol), ``solvent``, ``solvation`` (``alpb``/``gbsa`` for gfn2,
``cpcm``/``iefpcm``/``smd`` for dft), ``functional``, ``basis``, ``dispersion``. A first stage
``mmff94,window=W`` (no operation) sets the build level's window instead.

Ranking formula (:func:`ranking_formula`): the ranking quantity of every conformer is

    G = E[last energy] + G_RRHO[last frequencies]

where *last energy* is the energy of the last stage that computed one (a single point or an
optimisation; the build level when none did) and *last frequencies* the correction of the
last frequency stage still valid for the final geometries (an optimisation after it
invalidates it). Without a valid frequency stage the ranking is by E alone. The formula and
its terms are stored on the result (``Ensemble.ranking_formula``, ``Ensemble.ranking_terms``).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from chairbuild.choices import Choice
from chairbuild.errors import OptionError

__all__ = [
    "Engine",
    "Operation",
    "Stage",
    "Chain",
    "parse_stage",
    "shorthand_chain",
    "REOPTIMISE_MARGIN_KJ",
    "RRHO_KEY",
    "DEFAULT_DFT_FUNCTIONAL",
    "DEFAULT_DFT_BASIS",
    "DEFAULT_DFT_DISPERSION",
    "DEFAULT_DFT_SOLVATION",
]

#: Default extra window (kJ/mol) over the final window for the conformers passed on to a later stage.
REOPTIMISE_MARGIN_KJ = 10.0
#: Key of ``ConformerRecord.thermo`` holding G − E of the frequency stage.
RRHO_KEY = "rrho_correction"
#: Default DFT level of dft stages, chosen by measurement (README, "Chains of levels and DFT").
DEFAULT_DFT_FUNCTIONAL = "b3lyp"
DEFAULT_DFT_BASIS = "def2-svp"
DEFAULT_DFT_DISPERSION = "d3bj"
#: Default implicit-solvent model of dft stages (used when a solvent is given).
DEFAULT_DFT_SOLVATION = "cpcm"


class Engine(Choice):
    """Energy engine of a stage."""

    MMFF94 = "mmff94"
    GFN2 = "gfn2"
    DFT = "dft"

    @classmethod
    def describe(cls) -> str:
        return "level"

    @classmethod
    def aliases(cls):
        return {"gfn2-xtb": cls.GFN2, "xtb": cls.GFN2, "mmff": cls.MMFF94, "mmff94s": cls.MMFF94}


class Operation(Choice):
    """What a stage does with each conformer."""

    SINGLE_POINT = "single-point"
    OPTIMISE = "optimise"
    FREQUENCIES = "frequencies"

    @classmethod
    def describe(cls) -> str:
        return "stage operation"

    @classmethod
    def aliases(cls):
        return {"sp": cls.SINGLE_POINT, "opt": cls.OPTIMISE, "optimize": cls.OPTIMISE, "freq": cls.FREQUENCIES}


#: Order in which a stage's operations run.
_OPERATION_ORDER = (Operation.OPTIMISE, Operation.SINGLE_POINT, Operation.FREQUENCIES)
_STAGE_KEYS = ("window", "solvent", "solvation", "functional", "basis", "dispersion")


@dataclass(frozen=True)
class Stage:
    """One stage of the chain.

    Attributes
    ----------
    engine : Engine
    operations : tuple of Operation
        Run in the order optimise, single-point, frequencies.
    window : float or None
        kJ/mol; conformers above it (after this stage) do not go on. None: the default
        (final window + :data:`REOPTIMISE_MARGIN_KJ` before a later stage, none after the last).
    solvent, solvation : str or None
        Implicit solvent and its model for this stage (None: the analysis-wide setting).
    functional, basis, dispersion : str or None
        DFT settings (None: the analysis-wide setting).
    """

    engine: Engine
    operations: tuple[Operation, ...]
    window: float | None = None
    solvent: str | None = None
    solvation: str | None = None
    functional: str | None = None
    basis: str | None = None
    dispersion: str | None = None

    def spec(self) -> str:
        """The stage in the ``--stage`` text syntax."""
        text = self.engine.value
        if self.operations:
            text += ":" + "+".join(o.value for o in self.operations)
        for key in _STAGE_KEYS:
            value = getattr(self, key)
            if value is not None:
                text += f",{key}={value:g}" if key == "window" else f",{key}={value}"
        return text


def parse_stage(text: "str | Stage") -> Stage:
    """Parse ``ENGINE:OPERATION[+OPERATION][,key=value...]``; raise OptionError naming the problem."""
    if isinstance(text, Stage):
        return text
    raw = str(text).strip()
    head, *pairs = [p.strip() for p in raw.split(",")]
    engine_text, _, ops_text = head.partition(":")
    engine = Engine.parse(engine_text)
    operations = []
    for word in filter(None, (w.strip() for w in ops_text.split("+"))):
        op = Operation.parse(word)
        if op in operations:
            raise OptionError(f"stage {raw!r}: operation {op.value!r} given twice")
        operations.append(op)
    values: dict = {}
    for pair in pairs:
        key, sep, value = pair.partition("=")
        key = key.strip().lower()
        if not sep or key not in _STAGE_KEYS:
            raise OptionError(f"stage {raw!r}: expected key=value with a key from {', '.join(_STAGE_KEYS)}, got {pair!r}")
        if key == "window":
            try:
                number = float(value)
            except ValueError:
                raise OptionError(f"stage {raw!r}: window must be a number of kJ/mol, got {value!r}") from None
            if not number > 0:
                raise OptionError(f"stage {raw!r}: window must be positive, got {value!r}")
            values[key] = number
        else:
            values[key] = value.strip()
    if engine is not Engine.DFT:
        wrong = [k for k in ("functional", "basis", "dispersion") if k in values]
        if wrong:
            raise OptionError(f"stage {raw!r}: {', '.join(wrong)} apply to dft stages only")
    ordered = tuple(o for o in _OPERATION_ORDER if o in operations)
    return Stage(engine=engine, operations=ordered, **values)


@dataclass(frozen=True)
class Chain:
    """The build level's window and the stages after it, checked.

    Attributes
    ----------
    stages : tuple of Stage
    build_window : float or None
        Window (kJ/mol) applied to the build level's energies before the first stage.
    """

    stages: tuple[Stage, ...] = ()
    build_window: float | None = None
    notes: tuple[str, ...] = field(default=())

    def windows(self, final_window: float) -> tuple[float | None, list[float | None]]:
        """Build window and each stage's window, defaults filled in (None: no narrowing there)."""
        margin = final_window + REOPTIMISE_MARGIN_KJ
        build = self.build_window if self.build_window is not None else (margin if self.stages else None)
        out = []
        for k, stage in enumerate(self.stages):
            last = k == len(self.stages) - 1
            out.append(stage.window if stage.window is not None else (None if last else margin))
        return build, out

    def ranking_engine(self) -> Engine:
        """The engine whose energy enters the ranking formula."""
        for stage in reversed(self.stages):
            if Operation.SINGLE_POINT in stage.operations or Operation.OPTIMISE in stage.operations:
                return stage.engine
        return Engine.MMFF94

    def has_frequencies(self) -> bool:
        """True when a frequency stage is valid for the final geometries (the ranking is then by G)."""
        for stage in reversed(self.stages):
            if Operation.FREQUENCIES in stage.operations:
                return True
            if Operation.OPTIMISE in stage.operations:
                return False
        return False


def make_chain(stages, build_window: float | None = None) -> Chain:
    """Check a sequence of stages (text or Stage) and return the :class:`Chain`.

    Raises
    ------
    OptionError
        An mmff94 stage that optimises, frequencies at a geometry of another level, or an
        empty stage.
    """
    parsed = [parse_stage(s) for s in stages]
    if parsed and parsed[0].engine is Engine.MMFF94 and not parsed[0].operations:
        first = parsed.pop(0)
        if any(getattr(first, k) is not None for k in _STAGE_KEYS if k != "window"):
            raise OptionError("the build stage 'mmff94' takes only window=")
        build_window = first.window if first.window is not None else build_window
    geometry = Engine.MMFF94
    for stage in parsed:
        if not stage.operations:
            raise OptionError(
                f"stage {stage.spec()!r} has no operation; add :single-point, :optimise or :frequencies"
            )
        if stage.engine is Engine.MMFF94:
            if Operation.OPTIMISE in stage.operations:
                raise OptionError("mmff94 is the build level; a later mmff94 stage may compute single points or frequencies only")
            if stage.solvent is not None:
                raise OptionError("mmff94 has no implicit solvent")
        if Operation.OPTIMISE in stage.operations:
            geometry = stage.engine
        if Operation.FREQUENCIES in stage.operations and geometry is not stage.engine:
            raise OptionError(
                f"stage {stage.spec()!r}: frequencies need geometries optimised at the same level "
                f"(they are {geometry.value} minima); add 'optimise' to the stage or compute frequencies at {geometry.value}"
            )
    return Chain(stages=tuple(parsed), build_window=build_window)


def shorthand_chain(method: str, rerank: str | None, free_energy: bool) -> Chain:
    """The chain the older options ``method``, ``rerank`` and ``free_energy`` stand for.

    ``method="gfn2"`` → ``gfn2:optimise`` (``+frequencies`` with ``free_energy``);
    ``rerank="gfn2"`` → ``gfn2:single-point`` (then ``mmff94:frequencies`` with
    ``free_energy``: the thermal correction at the MMFF minimum); ``free_energy`` alone →
    ``mmff94:frequencies``.
    """
    method_engine = Engine.parse(method)
    if method_engine is Engine.DFT:
        raise OptionError("method accepts mmff94 or gfn2; for DFT use stages, e.g. stages=['gfn2:optimise', 'dft:single-point']")
    stages: list[Stage] = []
    if rerank is not None:
        if Engine.parse(rerank) is not Engine.GFN2:
            raise OptionError("rerank accepts only 'gfn2'")
        if method_engine is Engine.GFN2:
            raise OptionError("rerank=gfn2 re-scores MMFF geometries; it cannot be combined with method=gfn2")
        stages.append(Stage(Engine.GFN2, (Operation.SINGLE_POINT,)))
        if free_energy:
            stages.append(Stage(Engine.MMFF94, (Operation.FREQUENCIES,)))
    elif method_engine is Engine.GFN2:
        ops = (Operation.OPTIMISE, Operation.FREQUENCIES) if free_energy else (Operation.OPTIMISE,)
        stages.append(Stage(Engine.GFN2, ops))
    elif free_energy:
        stages.append(Stage(Engine.MMFF94, (Operation.FREQUENCIES,)))
    return make_chain(stages)


def with_defaults(stage: Stage, solvent: str | None, solvation_model: str, dft_defaults: dict) -> Stage:
    """Fill the analysis-wide solvent and DFT settings into a stage that leaves them open."""
    if stage.engine is Engine.MMFF94:
        return stage
    updates: dict = {}
    if stage.solvent is None and solvent is not None:
        updates["solvent"] = solvent
    if stage.solvation is None and (stage.solvent or solvent) is not None:
        updates["solvation"] = solvation_model if stage.engine is Engine.GFN2 else dft_defaults["solvation"]
    if stage.engine is Engine.DFT:
        for key in ("functional", "basis", "dispersion"):
            if getattr(stage, key) is None:
                updates[key] = dft_defaults[key]
    return replace(stage, **updates)
