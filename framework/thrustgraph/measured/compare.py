"""Prediction against measurement: matching record columns to result signals, metrics and plots.

Each mapped column (:class:`~thrustgraph.measured.records.ColumnMap`) is compared with
one signal of a :class:`~thrustgraph.flight.result.FlightResult` over a window of
model time, by default from the release (t = 0) to the end of the record.

How a sample is compared
    A logger's sample stands for its own sampling interval, so each measured
    sample is compared with the prediction *averaged over that interval* (the
    interval runs half-way to the neighbouring samples). This keeps the
    comparison continuous when a phase change (liquid gone, burnout) makes the
    predicted signal jump, which a calibration needs; for a smooth signal it
    differs from point sampling by about dt^2 y''/24. After the prediction ends
    (propulsion spent, ground impact) each signal keeps its final value.

Gauge pressure
    A column mapped with ``pressure="gauge"`` is turned into absolute
    pressure by adding the model's ambient pressure (the ``ambient_pressure``
    signal, at each sample time) before it is compared with the vessel's
    absolute pressure. A trigger level on a gauge column is a gauge level.

Metrics per signal (prediction minus measurement, SI units)
    RMS error and mean error over the samples of the window; peak error (the
    prediction's maximum in the window minus the measured maximum) and
    time-to-peak error; for a force (thrust) the impulse error (integral over
    the window: exact for the prediction, trapezoidal for the samples); for an
    altitude the apogee error. Peaks of a noisy record are biased upward:
    filter it first (:func:`thrustgraph.measured.records.lowpass`).

Examples
--------
>>> import thrustgraph as tg
>>> from thrustgraph.measured.records import ColumnMap, loads_record
>>> m = tg.load_model(tg.default_model_path()).set("launch.mount", "held")
>>> r = tg.integrate(m)
>>> times = np.arange(0.0, 0.2, 0.001)
>>> thrust = np.interp(times, r.t, r.signal("thrust"))
>>> text = "time [s],load [N]\\n" + "\\n".join(f"{a:.6f},{b:.6f}" for a, b in zip(times, thrust))
>>> c = compare(r, loads_record(text, source="stand.csv"), [ColumnMap("load", "thrust")])
>>> s = c.signals[0]
>>> s.rms_error < 0.02 * s.peak_measured, abs(s.impulse_error) < 0.05
(True, True)
"""

from __future__ import annotations

import difflib
import json
import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Sequence

import numpy as np
from scipy.integrate import trapezoid

from ..base.errors import ModelError, ThrustgraphError
from ..models.model import RUN_SPECS, Model
from ..base.outputfiles import atomic_write
from .records import ColumnMap, Record, Trigger, align, crossing_time, lowpass, resample
from ..flight.result import FlightResult
from ..base.units import Q_, to_si

__all__ = ["SignalComparison", "Comparison", "Matched", "compare", "match", "signal_series", "interval_means",
           "align_to_prediction", "prepare_record", "model_for_records", "plot_comparison", "render_comparison",
           "plot_format"]


# -- signals of a result --------------------------------------------------------

def signal_series(result: FlightResult, name: str) -> np.ndarray:
    """A scalar signal of a result: a named signal, or ``NAME.x``/``.y``/``.z`` of a vector one."""
    if name in result.signals and result.signals[name].ndim == 1:
        return result.signals[name]
    base, _, comp = name.rpartition(".")
    if base in result.signals and result.signals[base].ndim == 2 and comp in ("x", "y", "z"):
        return result.signals[base][:, "xyz".index(comp)]
    if name in result.signals:
        raise ModelError(f"signal {name!r}", "is a vector", f"name one component: {name}.x, {name}.y or {name}.z")
    names = sorted(result.signals)
    close = difflib.get_close_matches(name, names, n=2)
    hint = f"did you mean {' or '.join(map(repr, close))}?" if close else f"signals: {', '.join(names)}"
    raise ModelError(f"signal {name!r}", "the model's result has no such signal", hint)


def signal_unit(result: FlightResult, name: str) -> str:
    """SI unit of a (possibly component) signal name, as the result declares it."""
    return result.unit(name)


def _check_map(record: Record, result: FlightResult, cmap: ColumnMap) -> None:
    cmap.check(record)
    signal_series(result, cmap.signal)
    su = signal_unit(result, cmap.signal)
    cu = record.units[cmap.column]
    if su and Q_(1.0, su).dimensionality != Q_(1.0, cu or "").dimensionality:
        raise ModelError(f"{record.source}: column {cmap.column!r}",
                         f"holds a {record.dimension(cmap.column)} [{cu or '1'}] but signal {cmap.signal!r} is in {su}",
                         "map the column to a signal of the same kind (thrust to thrust, pressure to a vessel "
                         "pressure)")


def _ambient(result: FlightResult, times: np.ndarray) -> np.ndarray:
    return _hold_interp(times, result.t, result.signal("ambient_pressure"))


def _hold_interp(x: np.ndarray, xp: np.ndarray, fp: np.ndarray) -> np.ndarray:
    return np.interp(x, xp, fp, left=fp[0], right=fp[-1])


def measured_values(record: Record, cmap: ColumnMap, result: FlightResult) -> np.ndarray:
    """SI values of a column, with the ambient pressure added to a gauge column."""
    x = record.column(cmap.column)
    if cmap.pressure == "gauge":
        x = x + _ambient(result, record.time)
    return x


# -- preparing a record -----------------------------------------------------------

def align_to_prediction(record: Record, result: FlightResult, mapping: Sequence[ColumnMap], *,
                        start_at: Any = None, trigger: Trigger | None = None) -> Record:
    """Shift a record onto the model's clock.

    With ``start_at`` the given record time becomes t = 0. With a ``trigger``
    on a mapped column, the record's first crossing of the level is put where
    the prediction of that signal first crosses the same level; on a column
    that is not mapped, it is put at t = 0 (the release).
    """
    if trigger is None:
        return align(record, start_at=start_at, trigger=None)
    if start_at is not None:
        return align(record, start_at=start_at, trigger=trigger)  # refuses both
    cmap = next((c for c in mapping if c.column == trigger.column), None)
    t_model = 0.0
    if cmap is not None:
        _check_map(record, result, cmap)
        level = _level_si(record, trigger)
        y = signal_series(result, cmap.signal)
        if cmap.pressure == "gauge":
            y = y - result.signal("ambient_pressure")
        tp = crossing_time(result.t, y, level, trigger.direction)
        if tp is None:
            word = "above" if trigger.direction == "rising" else "below"
            raise ModelError(f"{record.source}: column {trigger.column!r}",
                             f"the prediction of {cmap.signal!r} never goes {word} the trigger level {trigger.level}, "
                             "so the record cannot be aligned on it", "choose another level, or give the start time")
        t_model = tp
    return align(record, trigger=trigger, trigger_model_time=t_model)


def _level_si(record: Record, trigger: Trigger) -> float:
    lv = trigger.level
    if isinstance(lv, (int, float)) and not isinstance(lv, bool):
        return float(lv)
    record.column(trigger.column)
    return to_si(lv, record.units[trigger.column], where=f"{record.source}: column {trigger.column!r} (trigger level)")


def prepare_record(record: Record, result: FlightResult, mapping: Sequence[ColumnMap], *,
                   resample_every: Any = None, lowpass_cutoff: Any = None, filter_order: int = 4,
                   start_at: Any = None, trigger: Trigger | None = None) -> Record:
    """Resample, filter and align a record, in that order.

    Filtering comes before alignment so the trigger sees a clean signal; the
    zero-phase filter moves nothing in time. A record that is not evenly
    sampled must be resampled before it is filtered.
    """
    for cmap in mapping:
        _check_map(record, result, cmap)
    if resample_every is not None:
        record = resample(record, resample_every)
    if lowpass_cutoff is not None:
        record = lowpass(record, lowpass_cutoff, order=filter_order)
    if start_at is not None or trigger is not None:
        record = align_to_prediction(record, result, mapping, start_at=start_at, trigger=trigger)
    return record


def model_for_records(model: Model, records: Sequence[Record], *, per_sample: int = 4,
                      max_points: int = 20000, max_flight_points: int = 2_000_000) -> Model:
    """A copy of ``model`` whose output is fine enough to average over the records' samples.

    The output interval becomes a ``per_sample``-th of the finest record's
    sample spacing (never coarser than the model's own, never more than
    ``max_points`` over the longest record, and never more than
    ``max_flight_points`` up to the model's end time, which bounds the memory
    a short, finely sampled record can ask for).
    """
    out = model.copy()
    spec = next(s for s in RUN_SPECS if s.name == "output_interval")
    end_spec = next(s for s in RUN_SPECS if s.name == "end_time")
    current = spec.parse(out.run.get("output_interval", spec.default), where="run.output_interval")
    end = end_spec.parse(out.run.get("end_time", end_spec.default), where="run.end_time")
    dt = min(r.interval for r in records) / per_sample
    span = max(float(r.time[-1] - min(r.time[0], 0.0)) for r in records)
    dt = max(dt, span / max_points, end / max_flight_points)
    if dt < current:
        out.set("run.output_interval", f"{dt:.6g} s")
    return out


# -- matching ---------------------------------------------------------------------

def interval_means(t: np.ndarray, y: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Mean of the piecewise-linear signal (t, y) over each interval [edges[k], edges[k+1]].

    ``t`` may repeat a time (a jump: left value, then right value). Before
    ``t[0]`` the intervals are cut at ``t[0]``; after ``t[-1]`` the signal keeps
    its final value.

    >>> interval_means(np.array([0.0, 1.0, 1.0, 2.0]), np.array([0.0, 0.0, 1.0, 1.0]), np.array([0.5, 1.5, 2.5]))
    array([0.5, 1. ])
    """
    steps = np.diff(t) * 0.5 * (y[1:] + y[:-1])
    cum = np.concatenate(([0.0], np.cumsum(steps)))
    e = np.maximum(edges, t[0])
    c = np.interp(e, t, cum)
    after = e > t[-1]
    c[after] = cum[-1] + y[-1] * (e[after] - t[-1])
    width = np.diff(e)
    return np.diff(c) / np.where(width > 0.0, width, np.nan)


def _edges(ts: np.ndarray) -> np.ndarray:
    mid = 0.5 * (ts[1:] + ts[:-1])
    return np.concatenate(([ts[0] - (mid[0] - ts[0])], mid, [ts[-1] + (ts[-1] - mid[-1])]))


@dataclass(frozen=True)
class Matched:
    """One column of a record matched with its signal over the window (SI arrays).

    ``predicted`` is the prediction averaged over each sample's interval;
    ``t_model``/``y_model`` the whole predicted signal; ``start``/``end`` the window.
    """

    cmap: ColumnMap
    unit: str
    t: np.ndarray
    measured: np.ndarray
    predicted: np.ndarray
    t_model: np.ndarray
    y_model: np.ndarray
    start: float
    end: float

    def in_window(self) -> tuple[np.ndarray, np.ndarray]:
        """The predicted signal inside the window, closed by its value at the window's end."""
        k = (self.t_model >= self.start) & (self.t_model <= self.end)
        tm, ym = self.t_model[k], self.y_model[k]
        if self.end > self.t_model[-1]:
            tm, ym = np.append(tm, self.end), np.append(ym, self.y_model[-1])
        return tm, ym


def window(record: Record, result: FlightResult, start: Any = None, end: Any = None,
           mapping: Sequence[ColumnMap] = ()) -> tuple[float, float]:
    """The comparison window in model time, checked against the record and the prediction.

    By default it runs from the prediction's start (t = 0) to the end of the
    record, which must then last at least as long as the prediction.
    """
    # half a sample, and a hair more: a window placed half a sample before a (shifted) record's first sample must
    # not be refused for the rounding of that subtraction
    tol = 0.5 * record.interval * (1.0 + 1e-9)
    t_first, t_last = float(result.t[0]), float(result.t[-1])
    col = mapping[0].column if mapping else next(iter(record.columns))
    sig = mapping[0].signal if mapping else "prediction"
    where = f"{record.source}: column {col!r}"
    lo = t_first if start is None else _time(start, f"{record.source}: comparison start")
    if lo < t_first - 1e-12:
        raise ModelError(f"{record.source}: comparison start", f"{lo:.6g} s is before the prediction starts "
                         f"({t_first:.6g} s)", "start the comparison at or after the release, t = 0")
    if record.time[0] > lo + tol:
        raise ModelError(where, f"the record starts at model time {record.time[0]:.6g} s, after the start of the "
                         f"comparison ({lo:.6g} s)", "log from before the release, or start the comparison later")
    if end is None:
        hi = float(record.time[-1])
        if hi < t_last - tol:
            raise ModelError(where, f"the record is shorter than the signal it is matched to: it ends at model time "
                             f"{hi:.6g} s but the predicted {sig!r} goes on to {t_last:.6g} s",
                             "log for longer, or compare only the first part with an end time (--until)")
    else:
        hi = _time(end, f"{record.source}: comparison end")
        if hi > record.time[-1] + tol:
            raise ModelError(where, f"the record is shorter than the comparison: it ends at model time "
                             f"{record.time[-1]:.6g} s, before the requested end {hi:.6g} s",
                             "choose an earlier end time")
    if hi <= lo:
        raise ModelError(f"{record.source}: comparison window", f"ends ({hi:.6g} s) before it starts ({lo:.6g} s)",
                         "give an end time after the start time")
    return lo, hi


def _time(value: Any, where: str) -> float:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    return to_si(value, "s", where=where)


def match(result: FlightResult, record: Record, mapping: Sequence[ColumnMap], *,
          start: Any = None, end: Any = None) -> list[Matched]:
    """Pair each mapped column with its prediction over the window (see :func:`window`)."""
    if not mapping:
        raise ModelError(record.source, "no column is mapped to a signal", "map at least one, e.g. thrust=thrust")
    for cmap in mapping:
        _check_map(record, result, cmap)
    lo, hi = window(record, result, start, end, mapping)
    eps = 1e-9 * max(1.0, abs(hi))
    keep = (record.time >= lo - eps) & (record.time <= hi + eps)
    # a saved prediction repeats a time at a phase boundary: its value after the boundary stands for the sample
    keep &= np.append(np.diff(record.time) > 0.0, True)
    out = []
    for cmap in mapping:
        here = keep & ~np.isnan(record.column(cmap.column))   # a saved prediction's nan: no value there
        if here.sum() < 2:
            raise ModelError(f"{record.source}: comparison window", f"fewer than two samples of column "
                             f"{cmap.column!r} between {lo:.6g} s and {hi:.6g} s", "widen the window or log faster")
        ts = record.time[here]
        edges = _edges(ts)
        edges[0] = max(edges[0], lo)
        y = signal_series(result, cmap.signal)
        ybad = ~np.isfinite(y)
        if np.any(ybad & (result.t <= hi)):
            k = int(np.argmax(ybad))
            raise ModelError(f"signal {cmap.signal!r}", f"has no value at t = {result.t[k]:.6g} s "
                             f"(phase {result.phase_at(float(result.t[k]))!r})",
                             "compare a signal the model defines over the whole window, or shorten the window")
        meas = measured_values(record, cmap, result)[here]
        pred = interval_means(result.t, y, edges)
        out.append(Matched(cmap=cmap, unit=signal_unit(result, cmap.signal), t=ts, measured=meas, predicted=pred,
                           t_model=result.t, y_model=y, start=lo, end=hi))
    return out


# -- metrics -------------------------------------------------------------------------

@dataclass(frozen=True)
class SignalComparison:
    """Prediction against measurement for one signal; errors are prediction minus measurement (SI).

    ``impulse_*`` are set for a force, ``apogee_*`` for an altitude, else None.
    """

    column: str
    signal: str
    unit: str
    pressure: str | None
    n: int
    rms_error: float
    mean_error: float
    max_abs_error: float
    peak_measured: float
    peak_predicted: float
    peak_error: float
    peak_time_measured: float
    peak_time_predicted: float
    peak_time_error: float
    impulse_measured: float | None
    impulse_predicted: float | None
    impulse_error: float | None
    apogee_measured: float | None
    apogee_predicted: float | None
    apogee_error: float | None
    t: np.ndarray = field(repr=False)
    measured: np.ndarray = field(repr=False)
    predicted: np.ndarray = field(repr=False)
    t_model: np.ndarray = field(repr=False)
    y_model: np.ndarray = field(repr=False)
    #: the unit of the record's column: the report and plots show the values in it (SI when it has an offset)
    record_unit: str = ""

    @property
    def residual(self) -> np.ndarray:
        """Prediction minus measurement at each sample."""
        return self.predicted - self.measured

    def metrics(self) -> dict[str, Any]:
        """The scalar metrics as a plain dict (SI)."""
        keys = ("column", "signal", "unit", "pressure", "n", "rms_error", "mean_error", "max_abs_error",
                "peak_measured", "peak_predicted", "peak_error", "peak_time_measured", "peak_time_predicted",
                "peak_time_error", "impulse_measured", "impulse_predicted", "impulse_error", "apogee_measured",
                "apogee_predicted", "apogee_error")
        return {k: getattr(self, k) for k in keys}


def _rms_and_mean(res: np.ndarray) -> tuple[float, float]:
    """RMS and mean of the errors, scaled by the largest so that squares of large values do not overflow.

    >>> rms, mean = _rms_and_mean(np.array([3e200, -4e200, 0.0, 0.0]))
    >>> f"{rms:.6g} {mean:.6g}"
    '2.5e+200 -2.5e+199'
    """
    big = float(np.max(np.abs(res))) if res.size else 0.0
    if not big > 0.0 or not math.isfinite(big):
        return (big if res.size else 0.0), (float(np.mean(res)) if res.size else 0.0)
    u = res / big
    return big * float(np.sqrt(np.mean(u * u))), big * float(np.mean(u))


def _finite_metrics(c: SignalComparison, source: str) -> SignalComparison:
    """Refuse a comparison whose numbers overflowed (values near the largest float): never print inf or nan."""
    names = ("rms_error", "mean_error", "max_abs_error", "peak_measured", "peak_error", "impulse_measured",
             "impulse_error", "apogee_error")
    bad = [n for n in names if getattr(c, n) is not None and not math.isfinite(getattr(c, n))]
    if bad:
        what = bad[0].replace("_", " ")
        raise ModelError(f"{source}: column {c.column!r}", f"its values are too large to compare ({what} overflows; "
                         f"the largest value is {float(np.max(np.abs(c.measured))):.3g} {c.unit})",
                         "check the values and the unit in the header")
    return c


def _metrics(mt: Matched) -> SignalComparison:
    with np.errstate(over="ignore", invalid="ignore"):
        return _metrics_of(mt)


def _metrics_of(mt: Matched) -> SignalComparison:
    res = mt.predicted - mt.measured
    rms, mean = _rms_and_mean(res)
    km = int(np.argmax(mt.measured))
    tm, ym = mt.in_window()
    kp = int(np.argmax(ym))
    peak_p, t_peak_p = float(ym[kp]), float(tm[kp])
    peak_m, t_peak_m = float(mt.measured[km]), float(mt.t[km])
    dim = Q_(1.0, mt.unit).dimensionality if mt.unit else None
    imp_m = imp_p = imp_e = None
    if dim == Q_(1.0, "N").dimensionality:
        a, b = float(mt.t[0]), float(mt.t[-1])
        imp_m = float(trapezoid(mt.measured, mt.t))
        imp_p = float(interval_means(mt.t_model, mt.y_model, np.array([a, b]))[0] * (b - a))
        imp_e = imp_p - imp_m
    ap_m = ap_p = ap_e = None
    if "altitude" in mt.cmap.signal and dim == Q_(1.0, "m").dimensionality:
        ap_m, ap_p = peak_m, peak_p
        ap_e = ap_p - ap_m
    return SignalComparison(
        column=mt.cmap.column, signal=mt.cmap.signal, unit=mt.unit, pressure=mt.cmap.pressure, n=int(mt.t.size),
        rms_error=rms, mean_error=mean,
        max_abs_error=float(np.max(np.abs(res))), peak_measured=peak_m, peak_predicted=peak_p,
        peak_error=peak_p - peak_m, peak_time_measured=t_peak_m, peak_time_predicted=t_peak_p,
        peak_time_error=t_peak_p - t_peak_m, impulse_measured=imp_m, impulse_predicted=imp_p, impulse_error=imp_e,
        apogee_measured=ap_m, apogee_predicted=ap_p, apogee_error=ap_e, t=mt.t, measured=mt.measured,
        predicted=mt.predicted, t_model=tm, y_model=ym)


_DISPLAY = {"Pa": ("kPa", 1e-3), "m^3": ("L", 1e3)}


def _unit_of(s: "SignalComparison") -> tuple[str, float]:
    """(unit, factor from SI) a comparison is shown in: the record column's own unit (lbf, psi, ft), so that a
    record is read back in the units it was logged in; SI (kPa for a pressure) for a plain or offset unit."""
    u = s.record_unit
    if u and Q_(0.0, u).to_base_units().magnitude == 0.0:       # no offset (degC is shown in K)
        try:
            return u, float(Q_(1.0, s.unit).to(u).magnitude)
        except Exception:  # noqa: BLE001 - pint raises several types; a mismatch was refused earlier
            pass
    name, k = _DISPLAY.get(s.unit, (s.unit, 1.0))
    return name, k


def _show(value: float | None, unit: str | "SignalComparison", signed: bool = False) -> str:
    """A value (SI) as the report shows it: in the record's unit for a :class:`SignalComparison`, else SI."""
    if value is None:
        return "-"
    name, k = _unit_of(unit) if isinstance(unit, SignalComparison) else _DISPLAY.get(unit, (unit, 1.0))
    return f"{value * k:{'+' if signed else ''}.5g} {name}".rstrip()


@dataclass(frozen=True)
class Comparison:
    """A record compared with a prediction: where the record came from, the window, one entry per signal."""

    source: str
    sha256: str
    offset: float
    history: tuple[str, ...]
    start: float
    end: float
    signals: tuple[SignalComparison, ...]

    def signal(self, name: str) -> SignalComparison:
        """The comparison of one signal (by signal or column name)."""
        for s in self.signals:
            if name in (s.signal, s.column):
                return s
        raise KeyError(f"no compared signal {name!r}; compared: {', '.join(s.signal for s in self.signals)}")

    def report(self) -> str:
        """Plain-text table of the metrics, for people."""
        lines = [f"Record {self.source}  (sha256 {self.sha256[:16]}...)"]
        for h in self.history:
            lines.append(f"  {h}")
        lines.append(f"  window {self.start:.6g} s .. {self.end:.6g} s of model time")
        for s in self.signals:
            ref = f", {s.pressure}" if s.pressure else ""
            lines.append("")
            lines.append(f"{s.signal}  <-  column {s.column!r}{ref}  ({s.n} samples)")
            rel = f"   ({100 * s.rms_error / abs(s.peak_measured):.3g} % of the measured peak)" \
                if s.peak_measured else ""
            lines.append(f"  RMS error         {_show(s.rms_error, s)}{rel}")
            lines.append(f"  mean error        {_show(s.mean_error, s, True)}")
            lines.append(f"  largest error     {_show(s.max_abs_error, s)}")
            lines.append(f"  peak              measured {_show(s.peak_measured, s)} at "
                         f"{s.peak_time_measured:.5g} s,"
                         f" predicted {_show(s.peak_predicted, s)} at {s.peak_time_predicted:.5g} s")
            lines.append(f"  peak error        {_show(s.peak_error, s, True)};"
                         f" time-to-peak error {s.peak_time_error:+.5g} s")
            if s.impulse_error is not None:
                rel = f" ({100 * s.impulse_error / s.impulse_measured:+.3g} %)" if s.impulse_measured else ""
                u, k = _unit_of(s)
                lines.append(f"  impulse           measured {s.impulse_measured * k:.5g} {u}*s, predicted "
                             f"{s.impulse_predicted * k:.5g} {u}*s: error {s.impulse_error * k:+.5g} {u}*s{rel}")
            if s.apogee_error is not None:
                lines.append(f"  apogee            measured {_show(s.apogee_measured, s)}, predicted "
                             f"{_show(s.apogee_predicted, s)}: error {_show(s.apogee_error, s, True)}")
        lines.append("")
        lines.append("Errors are prediction minus measurement, in the units of the record's columns. A gauge column "
                     "is compared as absolute pressure (the model's ambient pressure added).")
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """Metrics and provenance as plain data (SI units; no time series)."""
        def clean(v: Any) -> Any:
            return None if isinstance(v, float) and not math.isfinite(v) else v
        return {"record": self.source, "sha256": self.sha256, "offset_s": self.offset, "history": list(self.history),
                "window_s": [self.start, self.end],
                "signals": [{k: clean(v) for k, v in s.metrics().items()} for s in self.signals]}

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2)


def compare(result: FlightResult, record: Record, mapping: Sequence[ColumnMap], *,
            start: Any = None, end: Any = None) -> Comparison:
    """Compare an aligned record with a prediction over a window of model time (see :func:`window`).

    Parameters
    ----------
    result : the prediction; for a fair average over each sample, fly the
        model from :func:`model_for_records` so its output is fine enough
    record : the measurement, aligned to the model's clock
        (:func:`prepare_record`)
    mapping : which column is compared with which signal
    start, end : the window in model time (text with a unit or seconds);
        default from t = 0 to the end of the record
    """
    matched = match(result, record, mapping, start=start, end=end)
    return Comparison(source=record.source, sha256=record.sha256, offset=record.offset, history=record.history,
                      start=matched[0].start, end=matched[0].end,
                      signals=tuple(replace(_finite_metrics(_metrics(m), record.source),
                                            record_unit=record.units.get(m.cmap.column, "")) for m in matched))


# -- plots -----------------------------------------------------------------------

def render_comparison(comparisons: Comparison | Sequence[Comparison], fmt: str = "png", *,
                      title: str | None = None) -> bytes:
    """Overlay (measured and predicted) and residual plots, one pair per signal, as PNG or SVG bytes.

    The figure is drawn off-screen (matplotlib's Agg canvas, no window, no
    global backend change). Names from the record (columns, the file) are
    shown as written, never read as math notation.
    """
    if fmt not in ("png", "svg"):
        raise ModelError(f"plot format {fmt!r}", "cannot write a plot in this format",
                         "name the plot file .png or .svg")
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure

        from ..outputs.plots import plain, render   # matplotlib is optional: imported only when a plot is drawn
    except ImportError:  # pragma: no cover - matplotlib is in the test extra
        raise ThrustgraphError("plots need matplotlib: pip install 'thrustgraph[plots]'") from None
    comps = [comparisons] if isinstance(comparisons, Comparison) else list(comparisons)
    pairs = [(c, s) for c in comps for s in c.signals]
    if not pairs:
        raise ModelError("plot", "nothing to plot", "compare at least one signal")
    fig = Figure(figsize=(8.0, 3.6 * len(pairs)), layout="constrained")
    FigureCanvasAgg(fig)
    grid = fig.add_gridspec(2 * len(pairs), 1, height_ratios=[3, 1] * len(pairs))
    for k, (c, s) in enumerate(pairs):
        name, scale = _unit_of(s)
        top = fig.add_subplot(grid[2 * k])
        bottom = fig.add_subplot(grid[2 * k + 1], sharex=top)
        top.plot(s.t, s.measured * scale, ".", ms=2.5, color="0.35", label=plain(f"measured ({Path(c.source).name})"))
        top.plot(s.t_model, s.y_model * scale, "-", lw=1.4, color="C0", label="predicted")
        ref = f", {s.pressure} column" if s.pressure else ""
        top.set_ylabel(plain(f"{s.signal} [{name or '1'}]"))
        top.set_title(plain(f"{s.signal}  <-  {s.column}{ref}: RMS error {_show(s.rms_error, s)}"), fontsize=9)
        top.legend(fontsize=8, loc="best")
        top.grid(True, lw=0.3)
        bottom.plot(s.t, s.residual * scale, ".", ms=2.0, color="C3")
        bottom.axhline(0.0, color="0.2", lw=0.6)
        bottom.set_ylabel(plain(f"residual [{name or '1'}]"), fontsize=8)
        bottom.set_xlabel("model time [s]")
        bottom.grid(True, lw=0.3)
    if title:
        fig.suptitle(plain(title), fontsize=10)
    return render(fig, fmt)


def plot_format(path: str | Path) -> str:
    """``png`` or ``svg`` from a plot file's suffix; anything else is refused."""
    p = Path(path)
    fmt = p.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise ModelError(str(p), f"cannot write a plot as {p.suffix or 'a file without a suffix'}",
                         "name the plot file .png or .svg")
    return fmt


def plot_comparison(comparisons: Comparison | Sequence[Comparison], path: str | Path, *,
                    title: str | None = None) -> None:
    """Write :func:`render_comparison` to a PNG or SVG file (the format follows the suffix), atomically."""
    fmt = plot_format(path)
    atomic_write(path, render_comparison(comparisons, fmt, title=title))
