"""Populations fitted to measured couplings: the inverse of the coupling stage.

A measured coupling is modelled as the population-weighted mean of the limiting couplings
of a few states (by default the families of one ring, :mod:`chairbuild.families`):

    J_k(obs) ≈ Σ_s x_s L_{s,k},   x_s ≥ 0,  Σ_s x_s = 1

and the populations x are found by weighted least squares, weights 1/σ_k²:

* the *free* fit keeps only Σ x = 1 (a population may come out slightly negative when the
  limiting couplings and the measurement do not quite agree; it is reported as such);
* the *constrained* fit also keeps 0 ≤ x ≤ 1 (non-negative least squares with the sum
  enforced by a heavily weighted extra row, then normalised).

Uncertainties come from the covariance of the linear problem in the free parameters
x_1 … x_{n−1} (x_n = 1 − Σ), Cov = (AᵀWA)⁻¹, propagated to x and to
ΔG_s = −RT ln(x_s / x_ref) (ref: the most populated fitted state); a state at the bound
0 gets none. They carry the stated measurement uncertainties only, not the error of the
Karplus equation itself; a coupling given without an uncertainty gets
:data:`DEFAULT_UNCERTAINTY_HZ`.

Measured couplings file (CSV, UTF-8, ``#`` starts a comment line), header required::

    proton_a,proton_b,J_Hz,uncertainty_Hz
    H2,H11,7.8,0.2
    H4,H5R,6.1,

``proton_a``/``proton_b``: a proton label of :mod:`chairbuild.couplings.records`
(``H4``, ``H3ax``, ``H5R`` …) or an atom index (0-based, the Ensemble's order); ``J_Hz``:
the coupling in Hz; ``uncertainty_Hz``: optional, > 0. A row that names no vicinal pair of
the molecule is refused with a message naming it.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from chairbuild.constants import rt_kj
from chairbuild.errors import InputError, OptionError

__all__ = [
    "DEFAULT_UNCERTAINTY_HZ",
    "Measurement",
    "FittedCoupling",
    "PopulationFit",
    "parse_measurements",
    "read_measurements",
    "fit_populations",
    "fit_couplings",
]

#: Uncertainty (Hz) given to a measured coupling without one: the order of the scatter of
#: generalised Karplus predictions around measured values (common practice, no source).
DEFAULT_UNCERTAINTY_HZ = 0.5

_COLUMNS = ("proton_a", "proton_b", "j_hz", "uncertainty_hz")


@dataclass(frozen=True)
class Measurement:
    """One measured coupling (Hz) between two protons named by label or atom index."""

    a: str
    b: str
    value: float
    uncertainty: float | None = None
    line: int = 0

    @property
    def name(self) -> str:
        return f"{self.a}–{self.b}"


def parse_measurements(text: str, source: str = "<text>") -> tuple[Measurement, ...]:
    """Measured couplings from CSV text (format in the module doc).

    Raises
    ------
    InputError
        Missing columns, a value that is not a number, a negative coupling or a
        non-positive uncertainty, a pair given twice, or no row at all.
    """
    lines = [(k, ln) for k, ln in enumerate(text.splitlines(), start=1) if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError(f"{source}: no measured coupling (expected a header 'proton_a,proton_b,J_Hz[,uncertainty_Hz]')")
    reader = csv.reader(io.StringIO("\n".join(ln for _, ln in lines)))
    rows = list(reader)
    header = [h.strip().lower() for h in rows[0]]
    missing = [c for c in _COLUMNS[:3] if c not in header]
    if missing:
        raise InputError(f"{source}: header lacks column(s) {', '.join(missing)}; expected proton_a,proton_b,J_Hz[,uncertainty_Hz]")
    unknown = [h for h in header if h not in _COLUMNS]
    if unknown:
        raise InputError(f"{source}: unknown column(s) {', '.join(unknown)}; expected proton_a,proton_b,J_Hz[,uncertainty_Hz]")
    col = {h: i for i, h in enumerate(header)}
    out: list[Measurement] = []
    seen: set[frozenset[str]] = set()
    for (line_no, _), row in zip(lines[1:], rows[1:]):
        cells = [c.strip() for c in row] + [""] * (len(header) - len(row))
        a, b = cells[col["proton_a"]], cells[col["proton_b"]]
        where = f"{source}, line {line_no}"
        if not a or not b:
            raise InputError(f"{where}: both protons must be given")
        try:
            value = float(cells[col["j_hz"]])
        except ValueError:
            raise InputError(f"{where}: J_Hz {cells[col['j_hz']]!r} is not a number") from None
        if not np.isfinite(value) or value < 0.0:
            raise InputError(f"{where}: J_Hz must be a finite number ≥ 0 (vicinal H,H couplings are positive), got {value}")
        sigma = None
        if "uncertainty_hz" in col and cells[col["uncertainty_hz"]]:
            try:
                sigma = float(cells[col["uncertainty_hz"]])
            except ValueError:
                raise InputError(f"{where}: uncertainty_Hz {cells[col['uncertainty_hz']]!r} is not a number") from None
            if not (np.isfinite(sigma) and sigma > 0.0):
                raise InputError(f"{where}: uncertainty_Hz must be > 0, got {sigma}")
        key = frozenset((a.lower(), b.lower()))
        if key in seen:
            raise InputError(f"{where}: the pair {a}–{b} is given twice")
        seen.add(key)
        out.append(Measurement(a, b, value, sigma, line_no))
    if not out:
        raise InputError(f"{source}: a header but no measured coupling")
    return tuple(out)


def read_measurements(path: str | Path) -> tuple[Measurement, ...]:
    """Measured couplings from a CSV file (format in the module doc)."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read measured couplings {str(p)!r}: {exc.strerror or exc}") from None
    except UnicodeDecodeError:
        raise InputError(f"{str(p)!r} is not UTF-8 text") from None
    return parse_measurements(text, source=str(p))


def fit_populations(limits: np.ndarray, measured: np.ndarray, sigma: np.ndarray) -> dict[str, np.ndarray]:
    """Free and constrained populations from limiting couplings (module doc).

    Parameters
    ----------
    limits : numpy.ndarray
        (n_states, n_couplings) limiting couplings L_{s,k}, Hz.
    measured, sigma : numpy.ndarray
        (n_couplings,) measured couplings and their uncertainties, Hz.

    Returns
    -------
    dict
        ``free``, ``constrained`` (populations), ``covariance`` (n_states × n_states, of
        the free fit; NaN when the problem is underdetermined), ``constrained_covariance``
        (on the states off the bound).
    """
    from scipy.optimize import nnls

    L = np.asarray(limits, dtype=float)
    j = np.asarray(measured, dtype=float)
    w = 1.0 / np.asarray(sigma, dtype=float)
    n = L.shape[0]
    if n < 2:
        raise OptionError("a population fit needs at least two states")
    # free fit in x_1..x_{n-1}, x_n = 1 - sum
    a_red = (L[:-1] - L[-1]).T * w[:, None]
    b_red = (j - L[-1]) * w
    y, *_ = np.linalg.lstsq(a_red, b_red, rcond=None)
    free = np.append(y, 1.0 - y.sum())

    def covariance(active: np.ndarray) -> np.ndarray:
        cov = np.full((n, n), np.nan)
        idx = np.flatnonzero(active)
        if len(idx) == 1:
            cov = np.zeros((n, n))
            return cov
        sub = L[idx]
        a = (sub[:-1] - sub[-1]).T * w[:, None]
        ata = a.T @ a
        if np.linalg.matrix_rank(ata) < len(idx) - 1:
            return cov
        cy = np.linalg.inv(ata)
        b = np.vstack([np.eye(len(idx) - 1), -np.ones((1, len(idx) - 1))])
        cx = b @ cy @ b.T
        cov = np.zeros((n, n))
        cov[np.ix_(idx, idx)] = cx
        return cov

    big = 1e3 * max(1.0, float(np.max(np.abs(L * w[None, :]))))
    a_nn = np.vstack([(L * w[None, :]).T, big * np.ones((1, n))])
    b_nn = np.append(j * w, big)
    x, _ = nnls(a_nn, b_nn)
    constrained = x / x.sum()
    active = constrained > 1e-9
    return {
        "free": free,
        "constrained": np.where(active, constrained, 0.0),
        "covariance": covariance(np.ones(n, dtype=bool)),
        "constrained_covariance": covariance(active),
    }


@dataclass(frozen=True)
class FittedCoupling:
    """One measured coupling beside its back-calculated and computed values (Hz)."""

    pair: str
    measured: float
    uncertainty: float
    fitted: float
    residual: float
    computed: float
    limits: tuple[float, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "pair": self.pair,
            "measured_Hz": self.measured,
            "uncertainty_Hz": self.uncertainty,
            "fitted_Hz": round(self.fitted, 3),
            "residual_Hz": round(self.residual, 3),
            "computed_Hz": round(self.computed, 3),
            "limits_Hz": [round(v, 3) for v in self.limits],
        }


@dataclass(frozen=True)
class PopulationFit:
    """Populations of a few states fitted to measured couplings (see :func:`fit_couplings`).

    Attributes
    ----------
    model : str
        ``"two-state"`` or ``"multi-state"``.
    states, labels : tuple of str
        State keys (family keys or the names given) and readable labels.
    populations, uncertainties : tuple of float
        Constrained fit (0 ≤ x ≤ 1, Σ x = 1) and 1σ uncertainties (NaN: not determined).
    free_populations, free_uncertainties : tuple of float
        Fit with Σ x = 1 only.
    delta_g, delta_g_uncertainties : tuple of float
        −RT ln(x_s / x_ref) from the constrained populations (kJ/mol; inf for x = 0).
    computed_populations : tuple of float
        The ensemble's populations of the same states, renormalised over them.
    couplings : tuple of FittedCoupling
    chi2 : float
        Weighted sum of squared residuals of the constrained fit.
    dof : int
        Couplings minus free parameters (n_states − 1).
    temperature : float
        K.
    notes : tuple of str
    """

    model: str
    states: tuple[str, ...]
    labels: tuple[str, ...]
    populations: tuple[float, ...]
    uncertainties: tuple[float, ...]
    free_populations: tuple[float, ...]
    free_uncertainties: tuple[float, ...]
    delta_g: tuple[float, ...]
    delta_g_uncertainties: tuple[float, ...]
    computed_populations: tuple[float, ...]
    couplings: tuple[FittedCoupling, ...]
    chi2: float
    dof: int
    temperature: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    def population(self, state: str) -> float:
        """Constrained population of ``state`` (key or label)."""
        for k, (key, label) in enumerate(zip(self.states, self.labels)):
            if state in (key, label):
                return self.populations[k]
        raise KeyError(state)

    def to_dict(self) -> dict[str, Any]:
        def num(v: float, nd: int = 4) -> float | None:
            return round(float(v), nd) if np.isfinite(v) else None

        return {
            "model": self.model,
            "temperature_K": self.temperature,
            "states": [
                {
                    "key": k,
                    "label": lab,
                    "population": num(p),
                    "uncertainty": num(u),
                    "free_population": num(fp),
                    "free_uncertainty": num(fu),
                    "delta_g_kJ": num(g, 3),
                    "delta_g_uncertainty_kJ": num(gu, 3),
                    "computed_population": num(cp),
                }
                for k, lab, p, u, fp, fu, g, gu, cp in zip(
                    self.states, self.labels, self.populations, self.uncertainties, self.free_populations,
                    self.free_uncertainties, self.delta_g, self.delta_g_uncertainties, self.computed_populations,
                )
            ],
            "couplings": [c.to_dict() for c in self.couplings],
            "chi2": num(self.chi2),
            "dof": self.dof,
            "notes": list(self.notes),
        }

    def format(self) -> str:
        """Plain-text tables: states (fitted beside computed) and couplings with residuals."""

        def pct(v: float) -> str:
            return f"{100 * v:7.1f}" if np.isfinite(v) else f"{'–':>7}"

        def pm(v: float, u: float, scale: float = 100.0, fmt: str = "5.1f") -> str:
            if not np.isfinite(v):
                return f"{'–':>13}"
            err = f"± {scale * u:{fmt}}" if np.isfinite(u) else "       "
            return f"{scale * v:6.1f} {err}"

        lines = [
            f"{self.model} fit of {len(self.couplings)} measured coupling(s), T = {self.temperature:.2f} K "
            f"(chi2 {self.chi2:.2f}, dof {self.dof})",
            f"  {'fitted %':>13} {'free fit %':>13} {'computed %':>10} {'dG kJ/mol':>14}  state",
        ]
        for k in range(len(self.states)):
            g = self.delta_g[k]
            gu = self.delta_g_uncertainties[k]
            gtext = f"{'inf':>14}" if not np.isfinite(g) else (f"{g:6.2f} ± {gu:5.2f}" if np.isfinite(gu) else f"{g:6.2f}        ")
            lines.append(
                f"  {pm(self.populations[k], self.uncertainties[k])} {pm(self.free_populations[k], self.free_uncertainties[k])} "
                f"{pct(self.computed_populations[k]):>10} {gtext:>14}  {self.labels[k]}"
            )
        lines.append(f"  {'pair':<14} {'measured':>9} {'fitted':>7} {'resid.':>7} {'computed':>9}  limits per state (Hz)")
        for c in self.couplings:
            lines.append(
                f"  {c.pair:<14} {c.measured:6.2f}±{c.uncertainty:<4.2g} {c.fitted:7.2f} {c.residual:+7.2f} {c.computed:9.2f}  "
                + " ".join(f"{v:5.2f}" for v in c.limits)
            )
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)


def _state_matrix(ens, records, states: Mapping[str, Sequence[int]]):
    """Limiting couplings (n_states, n_records) and computed populations of custom states."""
    index_of = {c.id: k for k, c in enumerate(ens.conformers)}
    pops = np.array([c.population for c in ens.conformers])
    rel = np.array([c.relative_energy for c in ens.conformers])
    limits = np.zeros((len(states), len(records)))
    computed = np.zeros(len(states))
    for s, (name, ids) in enumerate(states.items()):
        idx = [index_of[i] for i in ids if i in index_of]
        if not idx:
            raise OptionError(f"state {name!r} names no conformer of this ensemble")
        w = pops[idx]
        computed[s] = w.sum()
        for k, rec in enumerate(records):
            v = np.asarray(rec.values)[idx]
            limits[s, k] = float(np.dot(w, v) / w.sum()) if w.sum() > 0 else float(v[int(np.argmin(rel[idx]))])
    return limits, computed


def fit_couplings(
    ens,
    measurements: Sequence[Measurement] | str | Path,
    *,
    model: str = "multi-state",
    ring: int | None = None,
    states: Mapping[str, Sequence[int]] | None = None,
) -> PopulationFit:
    """Fit state populations of ``ens`` to measured couplings (module doc).

    Parameters
    ----------
    ens : chairbuild.result.Ensemble
        An analysis with couplings.
    measurements : sequence of Measurement, or the path of a CSV file
    model : {"multi-state", "two-state"}
        Two-state keeps the two states of highest computed population.
    ring : int, optional
        Ring whose families are the states (default: the ring of the first coupling).
    states : mapping, optional
        Custom states instead of families: name → conformer ids (e.g. rotamers of a
        side chain); their limiting couplings are population-weighted over the members.

    Returns
    -------
    PopulationFit

    Raises
    ------
    InputError
        A measured coupling matches no vicinal pair (named in the message), or the
        ensemble has no couplings.
    OptionError
        Unknown model, a ring without two families, or bad states.
    """
    if model not in ("multi-state", "two-state"):
        raise OptionError(f"unknown fit model {model!r}; choose from: multi-state, two-state")
    if isinstance(measurements, (str, Path)):
        measurements = read_measurements(measurements)
    table = getattr(ens, "couplings", None)
    if table is None or not table.pairs:
        raise InputError(f"{ens.name!r} has no computed couplings to fit against")
    records = []
    for m in measurements:
        try:
            records.append(table.find(m.a, m.b))
        except InputError as exc:
            where = f" (line {m.line})" if m.line else ""
            raise InputError(f"measured coupling {m.name}{where} does not match a proton pair: {exc}") from None
    notes: list[str] = []
    if states is not None:
        names = list(states)
        labels = list(names)
        limits, computed = _state_matrix(ens, records, states)
    else:
        r = records[0].ring_index if ring is None else ring
        fams = [f for f in ens.families if f.ring_index == r]
        if len(fams) < 2:
            raise OptionError(f"ring {r} has {len(fams)} family(ies); a population fit needs at least two states")
        names = [f.key for f in fams]
        labels = [f.label for f in fams]
        computed = np.array([f.population for f in fams])
        limits = np.array([[rec.family_limits.get(k, np.nan) for rec in records] for k in names])
        if np.isnan(limits).any():
            raise InputError("a measured coupling has no limiting value for every family of the ring; give ring= explicitly")
    order = np.argsort(-computed, kind="stable")
    if model == "two-state":
        if len(order) < 2:
            raise OptionError("a two-state fit needs two states")
        if len(order) > 2:
            notes.append("two-state: kept the two states of highest computed population; left out: " + ", ".join(labels[i] for i in order[2:]))
        order = order[:2]
    names = [names[i] for i in order]
    labels = [labels[i] for i in order]
    limits = limits[order]
    computed = computed[order]
    computed = computed / computed.sum() if computed.sum() > 0 else computed
    measured = np.array([m.value for m in measurements])
    sigma = np.array([m.uncertainty if m.uncertainty is not None else DEFAULT_UNCERTAINTY_HZ for m in measurements])
    if any(m.uncertainty is None for m in measurements):
        notes.append(f"couplings without an uncertainty were given ±{DEFAULT_UNCERTAINTY_HZ:g} Hz")
    n_states = len(names)
    if len(measurements) < n_states - 1:
        notes.append(f"underdetermined: {n_states} states from {len(measurements)} coupling(s); populations not unique")
    res = fit_populations(limits, measured, sigma)
    x = res["constrained"]
    cov = res["constrained_covariance"]
    unc = np.sqrt(np.clip(np.diag(cov), 0.0, None)) if np.isfinite(cov).all() else np.full(n_states, np.nan)
    unc = np.where(x > 0, unc, np.nan)
    free_cov = res["covariance"]
    free_unc = np.sqrt(np.clip(np.diag(free_cov), 0.0, None)) if np.isfinite(free_cov).all() else np.full(n_states, np.nan)
    rt = rt_kj(ens.temperature)
    ref = int(np.argmax(x))
    dg = np.array([-rt * np.log(x[s] / x[ref]) + 0.0 if x[s] > 0 else np.inf for s in range(n_states)])
    dgu = np.full(n_states, np.nan)
    for s in range(n_states):
        if s == ref:
            dgu[s] = 0.0
        elif x[s] > 0 and np.isfinite(cov).all():
            var = cov[s, s] / x[s] ** 2 + cov[ref, ref] / x[ref] ** 2 - 2 * cov[s, ref] / (x[s] * x[ref])
            dgu[s] = rt * np.sqrt(max(var, 0.0))
    fitted = x @ limits
    chi2 = float(np.sum(((measured - fitted) / sigma) ** 2))
    couplings = tuple(
        FittedCoupling(
            pair=f"{rec.protons[0]}–{rec.protons[1]}",
            measured=float(m.value),
            uncertainty=float(s),
            fitted=float(f),
            residual=float(m.value - f),
            computed=float(rec.average),
            limits=tuple(float(v) for v in limits[:, k]),
        )
        for k, (m, rec, s, f) in enumerate(zip(measurements, records, sigma, fitted))
    )
    if (res["free"] < 0).any():
        notes.append("the free fit gives a negative population: limiting couplings and measurements do not fully agree")
    return PopulationFit(
        model=model,
        states=tuple(names),
        labels=tuple(labels),
        populations=tuple(float(v) for v in x),
        uncertainties=tuple(float(v) for v in unc),
        free_populations=tuple(float(v) for v in res["free"]),
        free_uncertainties=tuple(float(v) for v in free_unc),
        delta_g=tuple(float(v) for v in dg),
        delta_g_uncertainties=tuple(float(v) for v in dgu),
        computed_populations=tuple(float(v) for v in computed),
        couplings=couplings,
        chi2=chi2,
        dof=len(measurements) - (n_states - 1),
        temperature=float(ens.temperature),
        notes=tuple(notes),
    )
