"""Calibration: fit uncertain model parameters to measured records, with confidence intervals.

Choose parameters by key path (``components.neck.discharge_coefficient``)
with bounds written like the model file writes values (``0.5 .. 1.0``,
``4 bar .. 6 bar``); :func:`calibrate` flies the model for every record at
once and lets :func:`scipy.optimize.least_squares` move the parameters.

The residual
    For every record and every mapped signal, each sample contributes
    ``weight * (predicted - measured) / range``, where ``range`` is the
    measured signal's peak-to-peak value over the window and ``weight`` the
    signal's weight (default 1). Dividing by the range makes thrust in newtons
    and pressure in pascals comparable: a 1 % miss counts the same in both.
    The parameters are scaled to their bounds, ``z = (x - low) / (high - low)``,
    so the solver works on numbers between 0 and 1.

The intervals (linear approximation at the optimum)
    With J the Jacobian of the scaled residual with respect to z (central
    differences at the solution), m residuals and p parameters::

        s^2 = sum(r^2) / (m - p),   cov_z = s^2 (J^T J)^-1,   cov_x = D cov_z D,  D = diag(high - low)
        interval = x +- t(1 - alpha/2; m - p) sqrt(diag(cov_x))

    (D. M. Bates and D. G. Watts, *Nonlinear Regression Analysis and Its
    Applications*, Wiley 1988, ch. 2, the linear-approximation inference
    regions; the chapter was seen, the section and equation numbers are from
    memory.) The intervals assume independent residuals of one common spread
    after scaling: serially correlated errors (model-form error, filtered
    records) make them too narrow. A parameter that ends at a bound is
    flagged; its interval means little.

Examples
--------
>>> FitParameter.parse("components.neck.discharge_coefficient=0.5..1.0")
FitParameter(path='components.neck.discharge_coefficient', low='0.5', high='1.0')
>>> FitParameter.parse("components.bottle.gauge_pressure=4 bar .. 6 bar").high
'6 bar'
"""

from __future__ import annotations

import datetime as _dt
import difflib
import json
import math
import sys
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence, TextIO

import numpy as np
from scipy.optimize import least_squares
from scipy.stats import t as student_t

from ..base.progress import is_terminal, line
from ..base.errors import IntegrationError, ModelError
from ..models.model import LAUNCH_SPECS, Model, parse_model
from ..base.outputfiles import atomic_write
from ..kinds.parameters import Quantity
from .records import ColumnMap, Record
from ..base.units import Q_, parse_quantity, si_unit, to_si
from ..flight.result import FlightResult
from .records import shift, trim
from .compare import _edges, compare, interval_means, match, model_for_records
from ..models.plugins import get_plugin_manager
from ..flight.assembly import assemble
from ..flight.integrate import integrate
from ..base.version import __version__
from ..models.modelfile import dumps_model

__all__ = ["FitParameter", "MeasuredRun", "FittedValue", "Calibration", "ProgressLine", "calibrate",
           "write_calibrated_model", "compare_runs"]


@dataclass(frozen=True)
class FitParameter:
    """A parameter to fit: its key path and its bounds (text with units, or numbers for plain numbers)."""

    path: str
    low: Any = None
    high: Any = None

    @classmethod
    def parse(cls, text: str) -> "FitParameter":
        """Read ``PATH=LOW..HIGH``."""
        if "=" not in text:
            raise ModelError(f"fit {text!r}", "has no bounds",
                             "write the bounds after the path, e.g. components.neck.discharge_coefficient=0.5..1.0 "
                             "or \"components.bottle.gauge_pressure=4 bar..6 bar\"")
        path, rng = (s.strip() for s in text.split("=", 1))
        if ".." not in rng:
            raise ModelError(f"fit {path}", f"bounds {rng!r} are not LOW..HIGH",
                             "write e.g. 0.5..1.0 or \"4 bar..6 bar\"")
        low, high = (s.strip() for s in rng.split("..", 1))
        if not low or not high:
            raise ModelError(f"fit {path}", f"bounds {rng!r} miss a side", "give both, e.g. 0.5..1.0")
        return cls(path, low, high)


@dataclass(frozen=True)
class MeasuredRun:
    """One measured record to fit: the record (aligned to the model's clock), its mapping and conditions.

    ``settings`` are model settings that hold for this run only (the test's
    fill or charge pressure), as key path -> raw value; ``start``/``end`` the
    window in model time (default from t = 0 to the end of the record).
    """

    record: Record
    mapping: tuple[ColumnMap, ...]
    settings: dict[str, Any] = field(default_factory=dict)
    start: Any = None
    end: Any = None


def _text(x: float, si: str, unit: str) -> str:
    if not unit:
        return f"{x:.6g}"
    return f"{Q_(x, si).to(unit).magnitude:.6g} {unit}"


def _text_delta(dx: float, si: str, unit: str) -> str:
    if not unit:
        return f"{dx:.3g}"
    k = Q_(1.0, si).to(unit).magnitude - Q_(0.0, si).to(unit).magnitude
    return f"{dx * k:.3g} {unit}"


@dataclass(frozen=True)
class _Param:
    path: str
    spec: Quantity
    si: str            # SI unit string ('' for a plain number)
    display: str       # unit the value is written in ('' for a plain number)
    low: float
    high: float
    initial: float
    shift_of: int | None = None   # a start-time correction of run number shift_of, not a model parameter

    def raw(self, x: float) -> Any:
        """The value as it goes into the model file."""
        if not self.display:
            return float(f"{x:.10g}")
        return f"{Q_(x, self.si).to(self.display).magnitude:.10g} {self.display}"

    def show(self, x: float) -> str:
        return _text(x, self.si, self.display)


def _resolve(model: Model, fp: FitParameter, parsed: Any = None) -> _Param:
    """Check a fit parameter against the model's kinds and return its spec, unit and bounds."""
    parsed = parse_model(model) if parsed is None else parsed
    path = fp.path
    parts = path.split(".")
    spec = None
    if parts[0] == "components" and len(parts) == 3:
        name, pname = parts[1], parts[2]
        if name not in parsed.kinds:
            close = difflib.get_close_matches(name, list(parsed.kinds), n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"components: {', '.join(parsed.kinds)}"
            raise ModelError(f"fit {path}", f"the model has no component {name!r}", hint)
        specs = parsed.kinds[name].parameters
        value_of = lambda: getattr(parsed.params[name], pname)  # noqa: E731
        owner = f"component {name!r} ({parsed.kinds[name].kind})"
    elif parts[0] == "environment" and len(parts) == 3:
        slot, pname = parts[1], parts[2]
        if slot not in parsed.env_kinds:
            raise ModelError(f"fit {path}", f"no environment section {slot!r}", "use environment.medium or "
                             "environment.gravity")
        specs = parsed.env_kinds[slot].parameters
        value_of = lambda: getattr(parsed.env_params[slot], pname)  # noqa: E731
        owner = f"environment {slot!r} ({parsed.env_kinds[slot].kind})"
    elif parts[0] == "launch" and len(parts) == 2:
        pname = parts[1]
        specs = LAUNCH_SPECS
        value_of = lambda: getattr(parsed.launch, pname)  # noqa: E731
        owner = "the launch settings"
    else:
        raise ModelError(f"fit {path}", "does not name a model parameter",
                         "use components.NAME.PARAMETER, environment.SECTION.PARAMETER or launch.PARAMETER")
    names = [s.name for s in specs]
    if pname not in names:
        close = difflib.get_close_matches(pname, names, n=1)
        hint = f"did you mean {close[0]!r}?" if close else f"its parameters: {', '.join(names)}"
        raise ModelError(f"fit {path}", f"{owner} has no parameter {pname!r}", hint)
    spec = specs[names.index(pname)]
    if not isinstance(spec, Quantity):
        raise ModelError(f"fit {path}", f"is a {type(spec).__name__.lower()}, not a number, so it cannot be fitted",
                         "fit quantities and plain numbers only")
    if fp.low is None or fp.high is None:
        raise ModelError(f"fit {path}", "has no bounds", "give both bounds, e.g. 0.5..1.0 or \"4 bar..6 bar\"")
    low = spec.parse(fp.low, where=f"fit {path} (lower bound)")
    high = spec.parse(fp.high, where=f"fit {path} (upper bound)")
    if not low < high:
        raise ModelError(f"fit {path}", f"the lower bound {fp.low!r} is not below the upper bound {fp.high!r}",
                         "give LOW..HIGH with LOW < HIGH")
    if value_of() is None:
        raise ModelError(f"fit {path}", f"is left out of the model, so {owner} derives it ({spec.doc})",
                         f"fit what it is derived from, or give {pname} in the model (--set) to fit it")
    x0 = float(value_of())
    display = spec.unit
    try:
        raw = model.get(path)
        if isinstance(raw, str):
            q = parse_quantity(raw)
            if hasattr(q, "units") and str(q.units) != "dimensionless":
                display = format(q.units, "~")
    except ModelError:
        pass
    p = _Param(path=path, spec=spec, si=si_unit(spec.unit) if spec.unit else "", display=display, low=low,
               high=high, initial=x0)
    if not low <= x0 <= high:
        raise ModelError(f"fit {path}", f"the model's value {p.show(x0)} lies outside the bounds "
                         f"{fp.low}..{fp.high}", "widen the bounds or set a starting value inside them (--set)")
    return p


@dataclass(frozen=True)
class FittedValue:
    """One fitted parameter: SI values, and the unit the model file writes it in.

    ``raw`` is the fitted value as written into the calibrated model.
    """

    path: str
    si_unit: str
    unit: str
    initial: float
    value: float
    standard_error: float
    interval: tuple[float, float]
    low: float
    high: float
    at_bound: bool
    raw: Any
    start_time_of: str | None = None   # set for a start-time correction of that record (not a model parameter)

    def text(self, x: float) -> str:
        """A value of this parameter in its unit, e.g. ``'4.52 bar'``."""
        return _text(x, self.si_unit, self.unit)

    def text_delta(self, dx: float) -> str:
        """A difference (e.g. the standard error) in its unit."""
        return _text_delta(dx, self.si_unit, self.unit)


class ProgressLine:
    """A one-line progress display on stderr, rewritten in place; silent unless stderr is a terminal.

    Calibration has no known total, so it shows counts and the residual; the last line stays on screen.
    The drawing is tqdm's, as for every indicator (:mod:`thrustgraph.base.progress`).

    >>> import io
    >>> p = ProgressLine(io.StringIO())   # not a terminal: prints nothing
    >>> p(3, 6, 0.125); p.close(); p.stream.getvalue()
    ''
    """

    def __init__(self, stream: TextIO | None = None, *, enabled: bool | None = None) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = is_terminal(self.stream) if enabled is None else enabled
        self.now: dict[str, Any] = {}
        self.bar: Any = None

    def __call__(self, evaluations: int, runs: int, cost: float) -> None:
        if not self.enabled:
            return
        self.now = {"evaluations": evaluations, "runs": runs, "cost": cost}
        if self.bar is None:   # drawn at once, as every evaluation after it
            self.bar = line(self.stream, lambda d: self.now, total=None, leave=True, mininterval=0.0,
                            bar_format="calibrating: evaluation {evaluations}, {runs} model runs, residual {cost:.6g}")
        else:
            self.bar.refresh()

    def close(self) -> None:
        """End the line (it stays on screen)."""
        if self.bar is not None:
            self.bar.close()
            self.bar = None


@dataclass(frozen=True)
class Calibration:
    """What a calibration found.

    Fields
    ------
    model : the model the fit started from (without the per-run settings)
    values : the fitted parameters, in the order given
    covariance : (p, p) covariance of the fitted values, SI
    correlation : (p, p) correlation matrix
    confidence : level of the intervals (e.g. 0.95)
    s : standard deviation of the scaled residual, sqrt(sum r^2 / (m - p))
    n_residuals, dof : m and m - p
    signal_rms : (record, signal) -> (RMS error before, RMS error after), SI
    runs : the measured runs fitted
    evaluations, model_runs : residual evaluations of the solver; flights flown in all
    message : the solver's closing message
    date, tool : when and with what it was fitted
    """

    model: Model
    values: tuple[FittedValue, ...]
    covariance: np.ndarray
    correlation: np.ndarray
    confidence: float
    s: float
    n_residuals: int
    dof: int
    signal_rms: dict[tuple[str, str], tuple[float, float]]
    runs: tuple[MeasuredRun, ...]
    evaluations: int
    model_runs: int
    message: str
    date: str
    tool: str
    #: record -> (start-time shift delta the residuals point to, its standard error), s, for the records whose
    #: start time was not fitted; a shift of the record's samples by +delta on the model's clock (see
    #: :func:`time_offset_score`)
    time_offsets: dict[str, tuple[float, float]] = field(default_factory=dict)

    def offset_notes(self) -> list[str]:
        """One line per record whose residuals show a time offset: beyond 3 standard errors and a tenth of a
        sample."""
        out = []
        for run in self.runs:
            src = run.record.source
            if src not in self.time_offsets:
                continue
            d, se = self.time_offsets[src]
            if abs(d) > 3.0 * se and abs(d) > 0.1 * run.record.interval:
                out.append(f"Time offset: the residuals of {src} follow the slope of the prediction: they show its "
                           f"samples {d * 1e3:+.3g} ms (standard error {se * 1e3:.2g} ms) off the model's clock. The "
                           f"fitted values and their intervals are then biased; align the record better, or fit "
                           f"the start time with it (--fit-start-time \"{max(2.0 * abs(d) * 1e3, 1.0):.2g} ms\")")
        return out

    def value(self, path: str) -> FittedValue:
        for v in self.values:
            if v.path == path:
                return v
        raise KeyError(path)

    def calibrated_model(self) -> Model:
        """The starting model with the fitted values and a ``[calibration]`` entry for each."""
        m = self.model.copy()
        shifts = {v.start_time_of: v for v in self.values if v.start_time_of is not None}
        records = []
        for r in self.runs:
            entry: dict[str, Any] = {"file": r.record.source, "sha256": r.record.sha256,
                                     "signals": [c.signal for c in r.mapping], "offset_s": float(r.record.offset)}
            if r.record.source in shifts:
                sv = shifts[r.record.source]
                entry["start_time_correction_s"] = sv.value
                entry["start_time_correction_standard_error_s"] = sv.standard_error
            if r.settings:
                entry["settings"] = dict(r.settings)
            records.append(entry)
        fitted = [v for v in self.values if v.start_time_of is None]
        paths = [v.path for v in fitted]
        for v in fitted:
            m.set(v.path, v.raw)
            lo, hi = v.interval
            entry = {
                "value": v.raw, "initial": v.text(v.initial), "standard_error": v.text_delta(v.standard_error),
                "interval": [v.text(lo), v.text(hi)],
                "confidence": self.confidence, "bounds": [v.text(v.low), v.text(v.high)],
                "at_bound": v.at_bound, "fitted_with": [p for p in paths if p != v.path],
                "records": records, "scaled_residual_sd": self.s, "residuals": self.n_residuals,
                "method": "scipy.optimize.least_squares (trf); interval from s^2 (J^T J)^-1 and Student t",
                "date": self.date, "tool": self.tool,
            }
            m.calibration[v.path] = entry
        return m

    def report(self) -> str:
        """Plain-text summary: fitted values, intervals, correlation, residual."""
        pct = f"{100 * self.confidence:g} %"
        files = ", ".join(f"{r.record.source} (sha256 {r.record.sha256[:12]}...)" for r in self.runs)
        lines = [f"Calibration against {len(self.runs)} record(s): {files}", ""]
        w = max(len(v.path) for v in self.values)
        lines.append(f"  {'parameter':<{w}}  {'initial':>14}  {'fitted':>14}  {'std. error':>12}  {pct} interval")
        for v in self.values:
            lo, hi = v.interval
            flag = "   AT A BOUND: the interval means little; widen the bounds" if v.at_bound else ""
            lines.append(f"  {v.path:<{w}}  {v.text(v.initial):>14}  {v.text(v.value):>14}  "
                         f"{v.text_delta(v.standard_error):>12}  {v.text(lo)} .. {v.text(hi)}{flag}")
        if len(self.values) > 1:
            lines.append("")
            lines.append("Correlation of the fitted values")
            for i, v in enumerate(self.values):
                row = " ".join(f"{c:+.3f}" for c in self.correlation[i])
                lines.append(f"  [{i + 1}] {row}   {v.path}")
        lines.append("")
        lines.append(f"Residual: {self.n_residuals} samples, {self.dof} degrees of freedom, scaled residual "
                     f"s = {self.s:.4g} (each signal divided by its measured range, times its weight)")
        for (src, sig), (before, after) in self.signal_rms.items():
            unit = _unit_guess(sig)
            lines.append(f"  {src}: {sig}: RMS error {before:.5g} -> {after:.5g} {unit}".rstrip())
        lines.append(f"Solver: {self.evaluations} evaluations, {self.model_runs} model runs; {self.message}")
        notes = self.offset_notes()
        if notes:
            lines.append("")
            lines.extend(notes)
        lines.append("The intervals assume independent errors of one spread; model-form error and filtering make "
                     "them too narrow.")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """The fit as plain data (SI values)."""
        return {
            "parameters": [{"path": v.path, "initial": v.initial, "value": v.value, "standard_error": v.standard_error,
                            "interval": list(v.interval), "bounds": [v.low, v.high], "at_bound": v.at_bound,
                            "model_value": v.raw, "start_time_of": v.start_time_of} for v in self.values],
            "confidence": self.confidence, "correlation": self.correlation.tolist(),
            "covariance": self.covariance.tolist(), "scaled_residual_sd": self.s, "residuals": self.n_residuals,
            "dof": self.dof, "signal_rms": [{"record": k[0], "signal": k[1], "before": b, "after": a}
                                            for k, (b, a) in self.signal_rms.items()],
            "records": [{"file": r.record.source, "sha256": r.record.sha256, "settings": dict(r.settings)}
                        for r in self.runs],
            "evaluations": self.evaluations, "model_runs": self.model_runs, "message": self.message,
            "date": self.date, "tool": self.tool,
            "time_offsets": [{"record": k, "shift_s": d, "standard_error_s": se}
                             for k, (d, se) in self.time_offsets.items()],
        }

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2)


def _unit_guess(signal: str) -> str:

    base = signal.rsplit(".", 1)[0] if signal.endswith((".x", ".y", ".z")) else signal
    return FlightResult.unit_of(base)


# -- the fit ---------------------------------------------------------------------------

def _room_to_shift(run: MeasuredRun, bound: float) -> Record:
    """The run's record without the samples a start-time shift of up to +-bound could push out of the window."""

    rec = run.record
    gap = rec.interval
    lo = 0.0 if run.start is None else _seconds(run.start)
    hi = None if run.end is None else _seconds(run.end) - bound - gap
    return trim(rec, lo + bound + gap, hi)


def _seconds(value: Any, where: str = "time") -> float:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    return to_si(value, "s", where=where)


class _Problem:
    """Residual of all runs as a function of the scaled parameters z."""

    def __init__(self, model: Model, runs: Sequence[MeasuredRun], params: Sequence[_Param],
                 progress: Callable[[int, int, float], None] | None) -> None:

        self.params = list(params)
        self.runs = list(runs)
        self.pm = get_plugin_manager()
        self.bases: list[Model] = []
        self.shift_at: dict[int, int] = {p.shift_of: j for j, p in enumerate(params) if p.shift_of is not None}
        self.shifted: dict[int, Record] = {}
        for k, p in enumerate(params):
            if p.shift_of is not None:
                self.shifted[p.shift_of] = _room_to_shift(self.runs[p.shift_of], p.high)
        for run in self.runs:
            m = model_for_records(model, [run.record])
            for key, value in run.settings.items():
                if key in [p.path for p in params]:
                    raise ModelError(f"{run.record.source}: setting {key}", "is also a fitted parameter",
                                     "either fit it or fix it for this record, not both")
                m.set(key, value)
            self.bases.append(m)
        self.windows: list[tuple[Any, Any]] = [(r.start, r.end) for r in self.runs]
        self.scales: list[list[float]] = []
        self.progress = progress
        self.evaluations = 0
        self.model_runs = 0
        self.matched: list[list] = [[] for _ in self.runs]   # the last evaluation's matched signals, per run
        self._cache: tuple[bytes, np.ndarray, list] | None = None

    def x_of(self, z: np.ndarray) -> np.ndarray:
        return np.array([p.low + zi * (p.high - p.low) for p, zi in zip(self.params, z)])

    def values_text(self, z: np.ndarray) -> str:
        return ", ".join(f"{p.path} = {p.show(x)}" for p, x in zip(self.params, self.x_of(z)))

    def evaluate(self, z: np.ndarray, *, count: bool = True) -> tuple[np.ndarray, list]:
        """Scaled residual vector and the per-signal RMS errors at z."""

        key = np.asarray(z, dtype=float).tobytes()
        if self._cache is not None and self._cache[0] == key:
            return self._cache[1], self._cache[2]
        x = self.x_of(z)
        parts: list[np.ndarray] = []
        rms: list = []
        first = not self.scales
        for k, (run, base) in enumerate(zip(self.runs, self.bases)):
            m = base.copy()
            for p, xi in zip(self.params, x):
                if p.shift_of is None:
                    m.set(p.path, p.raw(float(xi)))
            try:
                result = integrate(assemble(m, plugin_manager=self.pm))
            except (IntegrationError, ModelError) as exc:
                raise ModelError(f"calibration ({run.record.source})", f"the model could not be flown at "
                                 f"{self.values_text(z)}: {exc}", "narrow the bounds to values the model accepts"
                                 ) from None
            self.model_runs += 1
            start, end = self.windows[k]
            if k in self.shift_at:
                if first:   # check the record against the prediction once, as it was aligned
                    match(result, run.record, run.mapping, start=start, end=end)
                rec = self.shifted[k]
                dlt = float(x[self.shift_at[k]])
                rec = replace(rec, time=rec.time + dlt)
                half = 0.5 * float(rec.time[1] - rec.time[0])
                matched = match(result, rec, run.mapping, start=float(rec.time[0]) - half, end=float(rec.time[-1]))
            else:
                matched = match(result, run.record, run.mapping, start=start, end=end)
            if first:
                # Fix the window and the scales at the starting point, so the residual keeps its length.
                if k not in self.shift_at:
                    self.windows[k] = (matched[0].start, matched[0].end)
                scales = []
                for mt in matched:
                    rng = float(np.ptp(mt.measured))
                    if not rng > 0.0:
                        raise ModelError(f"{run.record.source}: column {mt.cmap.column!r}",
                                         "does not change over the comparison window, so it cannot scale the residual",
                                         "remove it from the mapping or widen the window")
                    scales.append(rng)
                self.scales.append(scales)
            self.matched[k] = matched
            for mt, sc in zip(matched, self.scales[k]):
                res = mt.predicted - mt.measured
                parts.append(mt.cmap.weight * res / sc)
                rms.append(((run.record.source, mt.cmap.signal), float(np.sqrt(np.mean(res ** 2)))))
        r = np.concatenate(parts)
        if not np.all(np.isfinite(r)):
            raise ModelError("calibration", f"the residual is not finite at {self.values_text(z)}",
                             "check that every compared signal is defined over the window")
        if count:
            self.evaluations += 1
            if self.progress is not None:
                self.progress(self.evaluations, self.model_runs, 0.5 * float(r @ r))
        self._cache = (key, r, rms)
        return r, rms

    def slope_columns(self) -> np.ndarray:
        """d(scaled residual)/d(start-time shift) of each run without a fitted shift, as columns over the whole
        residual vector (zeros outside the run), from the last evaluation: shifting a record by delta moves each
        sample's averaging interval by delta, so the derivative is that of the interval means (central
        differences of a tenth of a sample)."""
        cols, offset = [], 0
        for k, matched in enumerate(self.matched):
            for mt, sc in zip(matched, self.scales[k]):
                n = len(mt.t)
                if k not in self.shift_at:
                    edges = _edges(mt.t)
                    edges[0] = max(edges[0], mt.start)
                    h = 0.05 * float(np.median(np.diff(mt.t)))
                    d = (interval_means(mt.t_model, mt.y_model, edges + h)
                         - interval_means(mt.t_model, mt.y_model, edges - h)) / (2.0 * h)
                    cols.append((k, offset, mt.cmap.weight * d / sc))
                offset += n
        out = np.zeros((offset, len(self.runs)))
        for k, start, g in cols:
            out[start:start + len(g), k] = np.nan_to_num(g)
        return out

    def jacobian(self, z: np.ndarray, h: float) -> np.ndarray:
        """Central differences in z (one-sided at a bound)."""
        cols = []
        for j in range(len(z)):
            lo_z, hi_z = z.copy(), z.copy()
            up = min(h, 1.0 - z[j])
            dn = min(h, z[j])
            if up <= 0.0 and dn <= 0.0:
                raise ModelError("calibration", "a parameter has equal bounds", "give LOW < HIGH")
            hi_z[j] += up
            lo_z[j] -= dn
            r_hi, _ = self.evaluate(hi_z, count=False)
            r_lo, _ = self.evaluate(lo_z, count=False)
            cols.append((r_hi - r_lo) / (up + dn))
        return np.column_stack(cols)


def _covariance(J: np.ndarray, s2: float, params: Sequence[_Param]) -> tuple[np.ndarray, np.ndarray]:
    """Covariance s^2 (J^T J)^-1 back in SI, and the correlation; refuses parameters the records cannot fix."""
    p = len(params)
    norms = np.linalg.norm(J, axis=0)
    for j, nrm in enumerate(norms):
        if not nrm > 1e-12 * max(float(norms.max()), 1e-300):
            raise ModelError(f"fit {params[j].path}", "has no effect on the compared signals, so these records "
                             "cannot determine it", "compare a signal it changes, or do not fit it")
    _, sv, Vt = np.linalg.svd(J, full_matrices=False)
    cov_z = s2 * (Vt.T / np.maximum(sv, 1e-300) ** 2) @ Vt
    D = np.diag([q.high - q.low for q in params])
    cov = D @ cov_z @ D
    se = np.sqrt(np.diag(cov))
    corr = cov / np.outer(se, se)
    off = np.abs(corr - np.eye(p))
    if sv[-1] <= 1e-8 * sv[0] or (p > 1 and off.max() > 0.9999):
        i, j = (sorted(np.unravel_index(int(np.argmax(off)), off.shape)) if p > 1 else (0, 0))
        names = f"{params[i].path} and {params[j].path}" if i != j else params[i].path
        raise ModelError("calibration", f"the records cannot tell {names} apart (their effects on the compared "
                         f"signals are the same up to a factor: correlation {corr[i, j]:+.5f})",
                         "fit one of them, or add a record or signal that separates them")
    return cov, corr


def calibrate(model: Model, runs: Sequence[MeasuredRun], parameters: Sequence[FitParameter], *,
              confidence: float = 0.95, max_iterations: int = 60, tolerance: float = 1e-8,
              diff_step: float = 1e-3, scale: str = "range", start_time_bound: Any = None,
              progress: Callable[[int, int, float], None] | bool | None = None) -> Calibration:
    """Fit ``parameters`` of ``model`` to the measured ``runs`` (see the module docstring).

    Parameters
    ----------
    model : the model to calibrate; its current values are the starting point
    runs : measured records, aligned to the model's clock, with their mappings
    parameters : what to fit and within which bounds
    confidence : level of the reported intervals
    max_iterations : most residual evaluations the solver may use (finite-
        difference Jacobians come on top); past it the fit is refused
    tolerance : ftol, xtol and gtol of least_squares
    diff_step : finite-difference step in the scaled parameters (bounds span 1)
    scale : ``"range"`` divides each signal's residual by its measured range;
        ``"noise"`` fits once that way, then divides each signal by its own RMS
        residual and fits again, so every signal's scaled residual has unit
        spread (the intervals' assumption of one common spread then holds for
        signals of different noise)
    start_time_bound : also fit a correction of each record's start time
        within +- this (text like ``"2 ms"`` or seconds), for records whose
        alignment is uncertain (a trigger places a step only to within a
        sample). The first samples, up to the bound after the window's start,
        are left out so the shifted record stays inside the prediction.
    progress : a callable(evaluations, model_runs, cost), True for a
        :class:`ProgressLine` on stderr, or None

    Raises
    ------
    ModelError
        A parameter that does not exist, has no bounds or starts outside them;
        a fit that does not converge; parameters the records cannot determine.
    """
    _check_arguments(runs, parameters, scale, max_iterations, confidence)
    params = _fit_parameters(model, runs, parameters, start_time_bound)
    line = ProgressLine() if progress is True else None
    prob = _Problem(model, runs, params, line if line is not None else (progress or None))
    z0 = np.array([(p.initial - p.low) / (p.high - p.low) for p in params])
    try:
        rms0, sol = _fit(prob, z0, scale, diff_step, tolerance, max_iterations)
    finally:
        if line is not None:
            line.close()
    z = np.asarray(sol.x, dtype=float)
    r, rms1 = prob.evaluate(z, count=False)
    m, p = r.size, len(params)
    dof = m - p
    if dof <= 0:
        raise ModelError("calibration", f"{m} samples cannot determine {p} parameters", "give longer records")
    J = prob.jacobian(z, diff_step)
    cov, corr = _covariance(J, float(r @ r) / dof, params)
    prob.evaluate(z, count=False)          # the matched signals at the solution, for the time-offset test
    time_offsets = time_offset_score(r, J, prob.slope_columns(), dof, [run.record.source for run in prob.runs],
                                     set(prob.shift_at))
    x = prob.x_of(z)
    before = dict(rms0)
    return Calibration(model=model.copy(), values=_fitted_values(params, runs, z, x, cov, confidence, dof),
                       covariance=cov, correlation=corr,
                       confidence=confidence, s=math.sqrt(float(r @ r) / dof), n_residuals=m, dof=dof,
                       signal_rms={key: (before[key], after) for key, after in rms1},
                       runs=_aligned_runs(prob, x), evaluations=prob.evaluations, model_runs=prob.model_runs,
                       message=str(sol.message),
                       date=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
                       tool=f"thrustgraph {__version__}", time_offsets=time_offsets)


def _check_arguments(runs: Sequence[MeasuredRun], parameters: Sequence[FitParameter], scale: str,
                     max_iterations: int, confidence: float) -> None:
    if not parameters:
        raise ModelError("calibration", "no parameter to fit", "name one, e.g. "
                         "--fit components.neck.discharge_coefficient=0.5..1.0")
    if not runs:
        raise ModelError("calibration", "no measured record", "give at least one record")
    paths = [fp.path for fp in parameters]
    dup = {p for p in paths if paths.count(p) > 1}
    if dup:
        raise ModelError(f"fit {sorted(dup)[0]}", "is named twice", "fit each parameter once")
    if scale not in ("range", "noise"):
        raise ModelError("calibration", f"scale {scale!r} is neither 'range' nor 'noise'", "choose range or noise")
    if isinstance(max_iterations, bool) or not isinstance(max_iterations, int) or max_iterations < 1:
        raise ModelError("--max-iterations", f"must be a whole number of at least 1, got {max_iterations!r}",
                         "allow the solver some evaluations, e.g. --max-iterations 60 (the default)")
    if not (isinstance(confidence, (int, float)) and 0.0 < confidence < 1.0):
        raise ModelError("--confidence", f"must be a level between 0 and 1, got {confidence!r}", "use e.g. 0.95")


def _fit_parameters(model: Model, runs: Sequence[MeasuredRun], parameters: Sequence[FitParameter],
                    start_time_bound: Any) -> list[_Param]:
    """The parameters to fit, resolved against the model, and a start-time correction per record when asked."""
    parsed = parse_model(model)
    params = [_resolve(model, fp, parsed) for fp in parameters]
    if start_time_bound is not None:
        bound = _seconds(start_time_bound, "start-time bound")
        if not bound > 0.0:
            raise ModelError("start-time bound", f"{start_time_bound!r} is not a positive time", 'give e.g. "2 ms"')
        for k, run in enumerate(runs):
            params.append(_Param(path=f"start time of {run.record.source}", spec=Quantity("start_time", "ms"),
                                 si="s", display="ms", low=-bound, high=bound, initial=0.0, shift_of=k))
    return params


def _fit(prob: _Problem, z0: np.ndarray, scale: str, diff_step: float, tolerance: float, max_iterations: int
         ) -> tuple[list, Any]:
    """The residual RMS per signal at the start, and the solution of the fit (refitted with each signal scaled
    by its own spread for ``scale="noise"``)."""
    def solve(start: np.ndarray):
        sol = least_squares(lambda z: prob.evaluate(z)[0], start, jac="2-point", bounds=(0.0, 1.0), method="trf",
                            diff_step=diff_step, x_scale=1.0, ftol=tolerance, xtol=tolerance, gtol=tolerance,
                            max_nfev=max_iterations)
        if sol.status == 0 or not sol.success:
            raise ModelError("calibration", f"the fit did not converge within {max_iterations} evaluations "
                             f"({sol.message}); last values {prob.values_text(sol.x)}",
                             "start closer (set the parameters in the model), narrow the bounds, fit fewer "
                             "parameters or allow more evaluations (--max-iterations)")
        return sol

    r0, rms0 = prob.evaluate(z0)
    # Refuse at once a parameter the records cannot determine (checked again at the optimum).
    _covariance(prob.jacobian(z0, diff_step), max(float(r0 @ r0), 1e-300) / max(r0.size - len(prob.params), 1),
                prob.params)
    sol = solve(z0)
    if scale == "noise":
        _, rms_fit = prob.evaluate(sol.x, count=False)
        spreads = iter([v for _, v in rms_fit])
        prob.scales = [[(next(spreads) or sc) for sc in row] for row in prob.scales]
        prob._cache = None
        sol = solve(sol.x)
    return rms0, sol


def _fitted_values(params: Sequence[_Param], runs: Sequence[MeasuredRun], z: np.ndarray, x: np.ndarray,
                   cov: np.ndarray, confidence: float, dof: int) -> tuple[FittedValue, ...]:
    """Each fitted value with its standard error and Student-t interval."""
    se = np.sqrt(np.diag(cov))
    tq = float(student_t.ppf(0.5 * (1.0 + confidence), dof))
    values = []
    for k, q in enumerate(params):
        at_bound = bool(z[k] <= 1e-4 or z[k] >= 1.0 - 1e-4)
        values.append(FittedValue(path=q.path, si_unit=q.si, unit=q.display, initial=q.initial, value=float(x[k]),
                                  standard_error=float(se[k]),
                                  interval=(float(x[k] - tq * se[k]), float(x[k] + tq * se[k])), low=q.low,
                                  high=q.high, at_bound=at_bound, raw=q.raw(float(x[k])),
                                  start_time_of=None if q.shift_of is None else runs[q.shift_of].record.source))
    return tuple(values)


def _aligned_runs(prob: _Problem, x: np.ndarray) -> tuple[MeasuredRun, ...]:
    """The records as fitted: each window, and each start time corrected where it was fitted."""
    fixed = []
    for k, (run, w) in enumerate(zip(prob.runs, prob.windows)):
        rec = run.record
        if k in prob.shift_at:
            dlt = float(x[prob.shift_at[k]])
            rec = shift(rec, -dlt, f"start time corrected by calibration: {dlt * 1e3:+.4g} ms")
        fixed.append(MeasuredRun(record=rec, mapping=tuple(run.mapping), settings=dict(run.settings),
                                 start=w[0], end=w[1]))
    return tuple(fixed)


def time_offset_score(r: np.ndarray, J: np.ndarray, G: np.ndarray, dof: int, sources: Sequence[str],
                      fitted: set) -> dict[str, tuple[float, float]]:
    """The start-time shift of each record that the residuals at the optimum point to, with its standard error.

    ``r`` is the scaled residual at the optimum, ``J`` its Jacobian in the fitted parameters, ``G[:, k]`` its
    derivative with respect to a shift of record k's samples. A shift the fit did not include would be estimated,
    jointly with the parameters (linearised), by the part of ``G[:, k]`` that the parameters cannot mimic,
    g = (I - J J^+) G[:, k]: delta = -(g . r) / (g . g), standard error s / |g| with s^2 the residual variance
    after it, (r.r - (g.r)^2 / g.g) / (dof - 1) (one added regressor in the linear approximation; Bates & Watts
    1988, ch. 2). Records whose
    shift was fitted (``fitted``: their indices) are left out.

    >>> J = np.array([[1.0], [1.0], [1.0], [1.0]]); G = np.array([[-1.0], [-0.5], [0.5], [1.0]])
    >>> d, se = time_offset_score(np.array([0.2, 0.1, -0.1, -0.2]), J, G, 3, ["a.csv"], set())["a.csv"]
    >>> round(d, 6), se < 1e-6
    (0.2, True)
    """
    out: dict[str, tuple[float, float]] = {}
    if dof < 2:
        return out
    rr = float(r @ r)
    for k, src in enumerate(sources):
        if k in fitted or not np.any(G[:, k]):
            continue
        g = G[:, k] - J @ np.linalg.lstsq(J, G[:, k], rcond=None)[0]
        gg = float(g @ g)
        if not gg > 0.0:
            continue
        gr = float(g @ r)
        s = math.sqrt(max(rr - gr * gr / gg, 0.0) / (dof - 1))
        out[src] = (-gr / gg, s / math.sqrt(gg))
    return out


def write_calibrated_model(calibration: Calibration, path: str) -> None:
    """Write the calibrated model file atomically (all or nothing)."""

    atomic_write(path, dumps_model(calibration.calibrated_model()))


def compare_runs(model: Model, runs: Sequence[MeasuredRun]) -> list:
    """Fly ``model`` for each run (with its settings) and compare it with the run's record."""

    out = []
    for run in runs:
        m = model_for_records(model, [run.record])
        for key, value in run.settings.items():
            m.set(key, value)
        out.append(compare(integrate(m), run.record, run.mapping, start=run.start, end=run.end))
    return out
