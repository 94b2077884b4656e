"""Integrate an assembled vehicle phase by phase with scipy's solve_ivp and terminal events.

Each segment runs with a fixed discrete phase (component modes, kinematic
constraint, before/after apogee). A terminal event ends the segment exactly at
the switch (liquid gone, flow stops, guide exit, apogee, ground impact, a
user trigger, a stage separation), the phase is updated and the next segment
starts from the event state, so no discontinuity is ever stepped over. A
separation replaces the vehicle by its upper stage and flies the dropped
stage on as a vehicle of its own.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> r = integrate(load_model(default_model_path()))
>>> [p.name for p in r.phases][:3]
['liquid thrust', 'gas thrust', 'coast']
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np
from scipy.integrate import solve_ivp

from .assembly import ACCUMULATORS, System, assemble
from .balance import Balance, Kinematics
from .errors import IntegrationError, ModelError, PluginError
from .limits import check_output_samples
from .model import Model, ParsedModel
from .outcomes import OUTCOMES, kind_outcomes, run_summary
from .result import Audit, Event, FlightResult, Phase, signal_unit
from .sampling import SampleTable, join_tables, sample_terms
from .separation import separate
from .signallog import signal_events
from .staging import KINEMATIC_SIGNALS, Trigger, condition, resolve_thresholds
from .vehicle import vehicle_profile
from .stepguard import StepGuard
from .modelfile import default_model_path, dumps_model, load_model
from .version import __version__
from .xp import scalar_ops
from .plugins import plugin_versions

__all__ = ["integrate", "fly", "fly_segments", "provenance", "Segments", "available_signals", "check_launch_speed",
           "rest_value"]

_KIN = {"held": Kinematics.HELD, "guide": Kinematics.GUIDE, "free": Kinematics.FREE, "track": Kinematics.TRACK}
_NOT_PROPULSIVE = ("spent", "on guide", "coast", "descent")


def fly(model: Model | str | None = None, **overrides: Any) -> FlightResult:
    """Load (if a path or None for the bundled default), apply ``key.path=value`` overrides, integrate.

    >>> fly(**{"components.bottle.fill": 0.0}).summary["apogee"] < fly().summary["apogee"]
    True
    """

    if model is None or isinstance(model, str):
        model = load_model(model or default_model_path())
    else:
        model = model.copy()
    for k, v in overrides.items():
        model.set(k, v)
    return integrate(model)


class _Phase:
    """Discrete state between segments."""

    def __init__(self, modes: list[int], kin: int, descending: bool) -> None:
        self.modes, self.kin, self.descending = modes, kin, descending
        self.slide = 0.0   # the way it slides along a guide or track in this segment (Balance.set_phase)

    def copy(self) -> "_Phase":
        c = _Phase(list(self.modes), self.kin, self.descending)
        c.slide = self.slide
        return c


def _set_segment_phase(bal: Balance, ph: _Phase, t: float, y: np.ndarray) -> None:
    """Set the balance to the segment's phase, with the way it slides on a guide or track: the sign of the
    speed along it, or, starting at rest, the way it is about to move (0 if friction holds it)."""
    ph.slide = 0.0
    bal.set_phase(ph.modes, ph.kin, ph.descending)
    if ph.kin in (Kinematics.GUIDE, Kinematics.TRACK):
        u = bal.system.guide_dir
        v = float(y[3] * u[0] + y[4] * u[1] + y[5] * u[2])
        if v == 0.0:
            d = bal.rhs(t, y)
            v = d[3] * u[0] + d[4] * u[1] + d[5] * u[2]
        ph.slide = 1.0 if v > 0.0 else (-1.0 if v < 0.0 else 0.0)
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)


def _label(system: System, ph: _Phase) -> str:
    labels = []
    for k, n in enumerate(system.moded):
        m = system.modes[n][ph.modes[k]]
        if m.propulsive and m.label not in labels:
            labels.append(m.label)
    if labels:
        return " + ".join(labels)
    if ph.kin == Kinematics.HELD:
        return "spent"
    if ph.kin == Kinematics.GUIDE:
        return "on guide"
    if ph.kin == Kinematics.TRACK:
        return "coast"
    return "descent" if ph.descending else "coast"


@dataclass
class Segments:
    """What the phase-by-phase integration produced, before signals and ledger are built.

    segments : list of (phase, OdeResult with dense output, Balance it was integrated with)
    separations : list of (t, stage name, dropped System, its state, its modes, descending)
    """

    balance: Balance
    segments: list[tuple[_Phase, Any, Balance]]
    events: list[Event]
    status: int
    message: str
    nfev: int
    separations: list[tuple] = field(default_factory=list)
    dropped_mass: float = 0.0

    def __iter__(self):  # (balance, segments, events, status, message, nfev), for unpacking
        return iter((self.balance, self.segments, self.events, self.status, self.message, self.nfev))


def integrate(model: Model | ParsedModel | System, *, rtol: float | None = None, atol: Any = None,
              method: str | None = None, end_time: float | None = None,
              progress: Callable[[float, float], None] | None = None) -> FlightResult:
    """Fly a vehicle and return its :class:`~thrustgraph.result.FlightResult`.

    Parameters
    ----------
    model : Model, ParsedModel or System
        What to fly; models are parsed and assembled first.
    rtol, atol, method, end_time : optional
        Override the model's ``[run]`` settings (SI).
    progress : callable(t, t_end), optional
        Called after each segment.
    """
    system = model if isinstance(model, System) else assemble(model)
    segs = fly_segments(system, rtol=rtol, atol=atol, method=method, end_time=end_time, progress=progress)
    result = _build_result(system, segs)
    for t_sep, stage, dsys, dy, dm, desc in segs.separations:
        sub = fly_segments(dsys, rtol=rtol, atol=atol, method=method, end_time=end_time, t0=t_sep, y0=dy,
                           modes0=dm, kin0=Kinematics.FREE, descending=desc)
        result.dropped[stage] = _build_result(dsys, sub)
    return result


def rest_value(v_along: Any, way: Any) -> Any:
    """The value of the event "came to rest" of a vehicle sliding ``way`` (+1, -1) along its guide or track: its
    speed along it, where a speed of exactly zero (a phase that starts at rest) counts as not yet turned round
    (a tiny number of the sign it slides with), so that only a later return to zero ends the phase. Floats or
    arrays (single flights and ensembles alike).

    >>> rest_value(0.0, -1.0) < 0.0 < rest_value(0.0, 1.0), rest_value(-2.5, 1.0)
    (True, -2.5)
    """
    return np.where(v_along != 0.0, v_along, way * 1e-300) if isinstance(v_along, np.ndarray) else \
        (v_along if v_along != 0.0 else way * 1e-300)


def check_launch_speed(launch: Any) -> None:
    """Refuse an initial speed on a test stand (single flights and ensembles alike).

    >>> from types import SimpleNamespace
    >>> check_launch_speed(SimpleNamespace(mount="held", speed=2.0))
    Traceback (most recent call last):
    ...
    thrustgraph.errors.ModelError: launch.speed: a vehicle held on a test stand cannot have an initial speed. Fix: set launch.speed = "0 m/s" or choose mount = "guide" or "free".
    """
    if launch.mount == "held" and launch.speed != 0.0:
        raise ModelError("launch.speed", "a vehicle held on a test stand cannot have an initial speed",
                         "set launch.speed = \"0 m/s\" or choose mount = \"guide\" or \"free\"")


def available_signals(system: System) -> dict[str, str]:
    """Signals a trigger can watch on this vehicle: name -> SI unit."""
    bal = Balance(system)
    snap = bal.evaluate(0.0, np.array(system.y0))
    declared = declared_signal_units(system.parsed)
    out = dict(KINEMATIC_SIGNALS)
    for k, v in snap.items():
        if "." in k and isinstance(v, float) and not k.startswith("audit."):
            out[k] = signal_unit(k, declared) or ""
    return out


def declared_signal_units(parsed: ParsedModel) -> dict[str, str]:
    """``COMPONENT.KEY`` -> SI unit of every signal the model's component kinds declare (``signal_units``)."""
    return {f"{n}.{key}": u for n, cls in parsed.kinds.items() for key, u in cls.signal_units.items()}


def signal_units(parsed: ParsedModel, names: Any) -> dict[str, str]:
    """The SI unit of every signal named, from :func:`~thrustgraph.result.signal_unit`; a signal with none is
    refused, naming the component's kind and what to declare.

    >>> from thrustgraph.modelfile import load_model, default_model_path
    >>> from thrustgraph.model import parse_model
    >>> signal_units(parse_model(load_model(default_model_path())), ["gravity", "bottle.pressure"])
    {'gravity': 'm/s^2', 'bottle.pressure': 'Pa'}
    """
    declared = declared_signal_units(parsed)
    out = {}
    for name in names:
        unit = signal_unit(name, declared)
        if unit is None:
            comp, _, key = name.rpartition(".")
            cls = parsed.kinds.get(comp)
            who = f"kind {cls.kind!r} (component {comp!r})" if cls is not None else "the core"
            raise PluginError(f"signal {name!r}: {who} reports it but declares no unit for it. Fix: add "
                              f"{key!r}: \"UNIT\" to the kind's signal_units (\"\" for a pure number), or use a "
                              "standard key (thrustgraph.result.STANDARD_KEY_UNITS)")
        out[name] = unit
    return out


def fly_segments(system: System, *, rtol: float | None = None, atol: Any = None,
                 method: str | None = None, end_time: float | None = None,
                 progress: Callable[[float, float], None] | None = None, t0: float = 0.0,
                 y0: Any = None, modes0: list[int] | None = None, kin0: int | None = None,
                 descending: bool = False, dense: bool = True, audit: bool = True) -> Segments:
    """The phase-by-phase integration alone, without building the result's signals and ledger.

    ``t0``, ``y0``, ``modes0``, ``kin0`` start the run from a given state (a dropped stage). Studies and
    benchmarks that only need end states use this directly, with ``dense=False`` (no dense output: DOP853
    then spends no extra evaluations per step on interpolants; results cannot be built from such segments).

    ``audit=False`` leaves the closure-audit accumulators out of the integrated state (the segments' ``y``
    then holds the physical states only, and the accumulators of the state between segments are NaN). They
    never feed back into the motion and are left out of the error control anyway; so that the error norm (an
    RMS over the state) and hence every step stay those of the audited run, rtol and atol are scaled by
    sqrt(n_states / n_physical). Results cannot be built from such segments either.
    """
    run = system.run
    rtol = run.rtol if rtol is None else rtol
    atol = run.atol if atol is None else atol
    method = run.method if method is None else method
    t_end = run.end_time if end_time is None else end_time
    launch = system.launch
    check_launch_speed(launch)
    triggers = list(resolve_thresholds(system.parsed.triggers, available_signals(system))) \
        if system.parsed.triggers else []
    pending: list[tuple[float, Trigger]] = []
    state = _State(system, atol)
    ph = _Phase(list(system.mode0 if modes0 is None else modes0), _KIN[launch.mount] if kin0 is None else kin0,
                descending)
    t = float(t0)
    y = np.array(system.y0 if y0 is None else y0, dtype=float)
    x0 = np.array(y[:3])
    segs = Segments(balance=state.bal, segments=[], events=[Event(t, "start", "vehicle", f"mount {launch.mount}"
                                                                  if kin0 is None else "flying on")],
                    status=0, message="end time reached", nfev=0)
    events = segs.events
    zero_len = 0
    guard = StepGuard.for_system(system, t_end=t_end, rtol=rtol, atol=atol)  # bounded work, failures in model terms

    def apply_trigger(tr: Trigger, t: float, y: np.ndarray):
        """Carry out a trigger's action; returns (stop, y)."""
        if tr.action == "stop":
            events.append(Event(t, tr.name, "trigger", "run stopped"))
            segs.message = f"stopped by trigger {tr.name!r}"
            return True, y
        if tr.action == "switch":
            sysm = state.system
            if tr.component not in sysm.moded:
                events.append(Event(t, tr.name, tr.component, "component no longer on the vehicle: ignored"))
                return False, y
            ph.modes[sysm.moded.index(tr.component)] = [m.name for m in sysm.modes[tr.component]].index(tr.mode)
            events.append(Event(t, tr.name, tr.component, f"mode -> {tr.mode}"))
            return False, y
        stage = system.parsed.stages[tr.stage]     # the model's stages (a stage flying on has none of its own)
        upper, uy, um, dsys, dy, dm, m_drop = separate(state.system, y, ph.modes, stage)
        segs.separations.append((t, tr.stage, dsys, dy, dm, ph.descending))
        segs.dropped_mass += m_drop
        events.append(Event(t, "separation", tr.stage, f"dropped {m_drop:.4g} kg: {', '.join(stage)}"))
        state.replace(upper, atol)
        ph.modes = um
        return False, uy
    apply_trigger.events = events

    while t < t_end:
        sysm = state.system
        bal = state.bal
        _set_segment_phase(bal, ph, t, y)
        bal._y_start = y
        fns, actions = _events(sysm, bal, ph, x0, triggers, pending, t)
        # Component events and triggers already past their zero when a segment starts fire at once.
        stop = False
        for _ in range(50):
            past = [k for k, (kind, *_r) in enumerate(actions) if kind in ("mode", "stop", "trigger")
                    and fns[k].direction * fns[k](t, y) > 0.0]
            if not past:
                break
            kind, name, comp, target = actions[past[0]]
            if kind == "stop":
                break
            if kind == "trigger":
                stop, y = _fire(target, t, y, triggers, pending, apply_trigger)
                if stop:
                    break
            else:
                ph.modes[sysm.moded.index(comp)] = [m.name for m in sysm.modes[comp]].index(target)
                events.append(Event(t, name, comp, f"mode -> {target} (at once)"))
            sysm, bal = state.system, state.bal
            _set_segment_phase(bal, ph, t, y)
            bal._y_start = y
            fns, actions = _events(sysm, bal, ph, x0, triggers, pending, t)
        if stop:
            break
        propulsive = _label(sysm, ph) not in _NOT_PROPULSIVE
        u = np.array(sysm.guide_dir)
        if not propulsive and ph.kin == Kinematics.HELD and not pending:
            events.append(Event(t, "propulsion spent", "vehicle", "nothing left to push the stand"))
            segs.message = "propulsion spent on the stand"
            break
        if not propulsive and ph.kin == Kinematics.TRACK and float(np.dot(y[3:6], u)) == 0.0 and not pending \
                and not any(bal.rhs(t, y)[3:6]):
            events.append(Event(t, "at rest", "vehicle", "nothing pushes and the vehicle is not moving"))
            segs.message = "at rest on the track"
            break
        if not propulsive and ph.kin == Kinematics.GUIDE and float(np.dot(y[3:6], u)) <= 0.0 and \
                float(np.dot(y[:3] - x0, u)) <= 1e-12 and not pending and not triggers:
            events.append(Event(t, "no lift-off", "vehicle",
                                "the thrust never exceeded the weight component (and friction) along the guide"))
            segs.status, segs.message = 2, ("the vehicle did not leave the launch guide: thrust never exceeded its "
                                            "weight and the guide friction")
            break
        try:
            if audit:
                sol = solve_ivp(guard.watch(bal.rhs, _label(sysm, ph), sysm), (t, t_end), y, method=method,
                                rtol=rtol, atol=state.atol, events=fns, dense_output=dense)
            else:
                n_phys = sysm.n_states - len(ACCUMULATORS)
                k = math.sqrt(sysm.n_states / n_phys)
                sol = solve_ivp(guard.watch(bal.core, _label(sysm, ph), sysm), (t, t_end), y[:n_phys],
                                method=method, rtol=rtol * k, atol=state.atol[:n_phys] * k, events=fns,
                                dense_output=dense)
        except (ValueError, ZeroDivisionError, OverflowError) as exc:
            raise IntegrationError(f"integration failed at t = {t:.6g} s in phase {_label(sysm, ph)!r}: {exc}") from None
        segs.nfev += sol.nfev
        segs.segments.append((ph.copy(), sol, bal))
        if progress is not None:
            progress(float(sol.t[-1]), t_end)
        if sol.status == -1:
            raise IntegrationError(guard.explain(f"solve_ivp failed at t = {sol.t[-1]:.6g} s in phase "
                                                 f"{_label(sysm, ph)!r}: {sol.message}"))
        t = float(sol.t[-1])
        y = sol.y[:, -1].copy() if audit else np.concatenate([sol.y[:, -1], np.full(len(ACCUMULATORS), np.nan)])
        if sol.status == 0:
            events.append(Event(t, "end time", "vehicle", "the run reached run.end_time"))
            segs.status, segs.message = 0, "end time reached"
            break
        fired = [k for k, te in enumerate(sol.t_events) if len(te)]
        if sol.t[-1] - sol.t[0] <= 1e-12 * max(1.0, abs(t)):
            zero_len += 1
            if zero_len > 20:
                raise IntegrationError(f"events keep firing at t = {t:.6g} s without progress: "
                                       f"{[actions[k][1] for k in fired]}")
        else:
            zero_len = 0
        for k in fired:
            kind, name, comp, target = actions[k]
            if kind == "mode":
                ph.modes[sysm.moded.index(comp)] = [m.name for m in sysm.modes[comp]].index(target)
                events.append(Event(t, name, comp, f"mode -> {target}"))
            elif kind == "trigger":
                stop, y = _fire(target, t, y, triggers, pending, apply_trigger)
                if state.system is not sysm:
                    break  # the vehicle changed: the other events of this step belong to the old one
            elif kind == "guide":
                ph.kin = Kinematics.FREE
                events.append(Event(t, actions[k][1], "vehicle", f"speed {float(np.linalg.norm(y[3:6])):.4g} m/s"))
            elif kind == "apogee":
                ph.descending = True
                events.append(Event(t, "apogee", "vehicle", f"altitude {y[2]:.4g} m"))
                if run.stop_at_apogee:
                    stop = True
                    segs.message = "stopped at apogee"
            elif kind == "rest":
                events.append(Event(t, "came to rest", "vehicle", f"distance {float(np.dot(y[:3] - x0, u)):.4g} m"))
                y[3:6] = 0.0
                # it stays at rest only if friction holds it and nothing pushes
                bal.set_phase(ph.modes, ph.kin, ph.descending)
                d = bal.rhs(t, y)
                held = d[3] == 0.0 and d[4] == 0.0 and d[5] == 0.0
                if held and _label(sysm, ph) in _NOT_PROPULSIVE and not pending and not triggers:
                    stop = True
                    segs.message = "came to rest on the track" if ph.kin == Kinematics.TRACK else \
                        "came to rest on the launch guide"
            elif kind == "foot":
                events.append(Event(t, "back at the guide foot", "vehicle", "slid back down the guide"))
                y[:3] = x0
                y[3:6] = 0.0
            elif kind == "impact":
                events.append(Event(t, "ground impact", "vehicle", f"speed {float(np.linalg.norm(y[3:6])):.4g} m/s"))
                stop = True
                segs.message = "ground impact"
            elif kind == "stop":
                events.append(Event(t, name, comp, "run stopped"))
                stop = True
                segs.message = name
        if stop:
            break
    else:
        events.append(Event(t, "end time", "vehicle", "the run reached run.end_time"))
    if not segs.segments:  # ended before the first segment: the result is the starting instant
        from types import SimpleNamespace
        segs.segments.append((ph.copy(), SimpleNamespace(t=np.array([t]), y=y[:, None].copy(), sol=None), state.bal))
    segs.balance = state.bal
    return segs


class _State:
    """The vehicle being integrated (it changes at a separation) and its tolerances."""

    def __init__(self, system: System, atol: Any) -> None:
        self.replace(system, atol)

    def replace(self, system: System, atol: Any) -> None:
        self.system = system
        self.bal = Balance(system)
        # The audit accumulators are quadratures of the fluxes: they never feed back into the dynamics, so they
        # are left out of the step-size control (computed at the same stages they stay as accurate as the states).
        if np.ndim(atol) == 0:
            vec = np.full(system.n_states, float(atol))
        else:
            vec = np.array(atol, dtype=float)
            if len(vec) != system.n_states:
                vec = np.full(system.n_states, float(np.min(vec)))
        vec[-len(ACCUMULATORS):] = 1e30
        self.atol = vec


def _fire(tr: Trigger, t: float, y: np.ndarray, triggers: list, pending: list, apply):
    """A trigger's condition was met (or its delay ran out): act now or schedule it."""
    if tr in triggers:
        triggers.remove(tr)
        if tr.delay > 0.0:
            pending.append((t + tr.delay, tr))
            apply.events.append(Event(t, tr.name, "trigger", f"condition met; acts after {tr.delay:.4g} s"))
            return False, y
    else:
        pending[:] = [(td, p) for td, p in pending if p is not tr]
    return apply(tr, t, y)


def _condition_fn(bal: Balance, tr: Trigger, x0: np.ndarray, cache: dict):
    """A trigger's condition at (t, y) (:func:`thrustgraph.staging.condition`), the balance's snapshot
    evaluated once per state."""
    x = (float(x0[0]), float(x0[1]), float(x0[2]))

    def snapshot(t, y):
        key = (t, y.tobytes())
        if cache.get("key") != key:
            cache["key"] = key
            cache["snap"] = bal.evaluate(t, y)
        return cache["snap"]
    return lambda t, y: condition(tr, t, y, x, snapshot, scalar_ops)


def _events(system: System, bal: Balance, ph: _Phase, x0: np.ndarray, triggers: list, pending: list, t_now: float):
    """Active event functions for a phase, with what each one does."""
    fns: list[Callable] = []
    actions: list[tuple[str, str, str, Any]] = []
    cache: dict = {}
    snap_cache: dict = {}
    u = system.guide_dir

    def drive_of(t: float, y: np.ndarray, comp: str) -> float:
        key = (t, y.tobytes())
        if cache.get("key") != key:
            cache["key"] = key
            cache["drives"] = bal.drives(t, y)
        return cache["drives"].get(comp, 0.0)

    current_modes = {n: system.modes[n][ph.modes[k]].name for k, n in enumerate(system.moded)}

    for comp, spec in system.events:
        if current_modes[comp] not in spec.when:
            continue

        if spec.needs_drive:
            def fn(t, y, spec=spec, comp=comp):
                return spec.fn(t, y.tolist(), drive_of(t, y, comp))
        else:
            def fn(t, y, spec=spec):
                return spec.fn(t, y.tolist(), 0.0)
        fn.terminal = True
        fn.direction = spec.direction
        fns.append(fn)
        actions.append(("mode" if spec.to else "stop", spec.name, comp, spec.to))

    for tr in triggers:
        tfn = _condition_fn(bal, tr, x0, snap_cache)
        tfn.terminal = True
        tfn.direction = tr.direction
        fns.append(tfn)
        actions.append(("trigger", tr.name, "trigger", tr))
    for t_due, tr in pending:
        def due(t, y, t_due=t_due):
            return t - t_due
        due.terminal = True
        due.direction = 1.0
        fns.append(due)
        actions.append(("trigger", tr.name, "trigger", tr))

    profile = vehicle_profile(system.parsed)
    if ph.kin == Kinematics.GUIDE:
        # 1 nm beyond the guide's end, so that a zero-length guide (a pad) holds the vehicle until it moves; leaving
        # a pad is a lift-off, not the exit of a guide (whose speed would be that of the first nanometre)
        L = system.launch.guide_length + 1e-9

        def guide(t, y):
            return (y[0] - x0[0]) * u[0] + (y[1] - x0[1]) * u[1] + (y[2] - x0[2]) * u[2] - L
        guide.terminal = True
        guide.direction = 1.0
        fns.append(guide)
        actions.append(("guide", "guide exit" if profile.guided else "lift-off", "vehicle", None))
    if ph.kin == Kinematics.GUIDE:
        # sliding back down the guide stops at its foot (1 nm below it, so a vehicle resting there does not fire)
        def foot(t, y):
            return (y[0] - x0[0]) * u[0] + (y[1] - x0[1]) * u[1] + (y[2] - x0[2]) * u[2] + 1e-9
        foot.terminal = True
        foot.direction = -1.0
        fns.append(foot)
        actions.append(("foot", "back at the guide foot", "vehicle", None))
    if ph.kin in (Kinematics.TRACK, Kinematics.GUIDE) and ph.slide != 0.0:
        # sliding: the segment ends where the speed along the guide or track reaches zero (kinetic friction
        # opposes the sliding direction, fixed for the segment, so the turn-round is a segment boundary)
        def rest(t, y, way=ph.slide):
            return rest_value(y[3] * u[0] + y[4] * u[1] + y[5] * u[2], way)
        rest.terminal = True
        rest.direction = -ph.slide
        fns.append(rest)
        actions.append(("rest", "came to rest", "vehicle", None))
    if ph.kin == Kinematics.FREE and system.gravity(float(x0[2])) > 0.0:
        # a hover rig settles and bobs on its feed: it has a highest point (an outcome), no apogee to mark
        if not ph.descending and profile.kind != "hovering":
            def apogee(t, y):
                return y[5]
            apogee.terminal = True
            apogee.direction = -1.0
            fns.append(apogee)
            actions.append(("apogee", "apogee", "vehicle", None))

        def impact(t, y):
            return y[2]
        impact.terminal = True
        impact.direction = -1.0
        fns.append(impact)
        actions.append(("impact", "ground impact", "vehicle", None))
    return fns, actions


def _build_result(system: System, segs: Segments) -> FlightResult:
    run = system.run
    ts: list[np.ndarray] = []
    rows: list[tuple[np.ndarray, tuple[str, ...]]] = []
    tables: list[SampleTable] = []
    pieces: list[tuple] = []
    phases: list[Phase] = []
    names: list[str] = []
    check_output_samples(float(segs.segments[-1][1].t[-1] - segs.segments[0][1].t[0]), run.output_interval)
    for ph, sol, bal in segs.segments:
        t0, t1 = float(sol.t[0]), float(sol.t[-1])
        name = _label(bal.system, ph)
        if phases and phases[-1].name == name:
            phases[-1] = Phase(name, phases[-1].t_start, t1)
        else:
            phases.append(Phase(name, t0, t1))
        grid = np.arange(t0, t1, run.output_interval)[1:] if t1 > t0 else np.empty(0)
        grid = grid[grid < t1]   # arange's rounding can put its last point past the end (times would go back)
        tt = np.union1d(sol.t, grid)
        uniq_t, first = np.unique(sol.t, return_index=True)
        yy = sol.sol(tt) if len(tt) > len(uniq_t) else sol.y[:, first].copy()
        yy[:, np.searchsorted(tt, uniq_t)] = sol.y[:, first]   # keep the solver's own points exact
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
        tables.append(sample_terms(bal, tt, yy))
        pieces.append((ph, sol, bal, tt, tables[-1].values))
        ts.append(tt)
        rows.append((yy, bal.system.state_names))
        for n in bal.system.state_names:
            if n not in names:
                names.append(n)
    # one row per state name across every stage of the vehicle (NaN where a stage does not have it)
    acc = [n for n in names if n.startswith("audit.")]
    names = [n for n in names if not n.startswith("audit.")] + acc
    index = {n: k for k, n in enumerate(names)}
    t = np.concatenate(ts)
    y = np.full((len(names), len(t)), np.nan)
    col = 0
    for yy, snames in rows:
        for k, n in enumerate(snames):
            y[index[n], col:col + yy.shape[1]] = yy[k]
        col += yy.shape[1]

    table = join_tables(tables)
    signals, ledger = table.values, table.ledger
    signals["acceleration_magnitude"] = np.linalg.norm(signals["acceleration"], axis=1)
    signals["speed"] = np.linalg.norm(signals["velocity"], axis=1)
    signals["altitude"] = signals["position"][:, 2]
    signals["range"] = np.hypot(signals["position"][:, 0] - signals["position"][0, 0],
                                signals["position"][:, 1] - signals["position"][0, 1])
    vel = signals["velocity"]
    signals["flight_path_angle"] = np.arctan2(vel[:, 2], np.hypot(vel[:, 0], vel[:, 1]))
    # along the path: the rate of change of the speed (negative when slowing down); along the body axis at rest
    way = np.where(signals["speed"][:, None] > 0.0, vel / np.maximum(signals["speed"], 1e-300)[:, None],
                   signals["axis"])
    signals["path_acceleration"] = np.einsum("ij,ij->i", signals["acceleration"], way)
    # net thrust: the ledger's thrust terms of every opening (momentum flux, pressure thrust: the gross thrust)
    # with the momentum of the fluid entering through sources (an inlet's ram drag, a hose's inflow)
    inflow = np.zeros_like(signals["thrust_vector"])
    for (comp, term), vec in ledger.items():
        if term == "inflow momentum":
            inflow = inflow + vec
    signals["net_thrust_vector"] = signals["thrust_vector"] + inflow
    signals["net_thrust"] = np.einsum("ij,ij->i", signals["net_thrust_vector"], signals["axis"])

    # Audits from the accumulators integrated with the states.
    last = y[:, -1]
    m0, mf = float(signals["mass"][0]), float(signals["mass"][-1])
    m_out = float(last[index["audit.mass_out"]])
    mass_res = m0 - mf - m_out
    v0, vf = signals["velocity"][0], signals["velocity"][-1]
    vec = lambda stem: np.array([last[index[f"{stem}.{c}"]] for c in "xyz"])  # noqa: E731
    p_exh, imp, dpint = vec("audit.exhaust_momentum"), vec("audit.impulse"), vec("audit.internal_momentum_change")
    pint0 = np.zeros(3)
    pintf = np.zeros(3)
    for k in signals:
        if k.endswith(".internal_momentum"):
            pint0 = pint0 + np.nan_to_num(signals[k][0])
            pintf = pintf + np.nan_to_num(signals[k][-1])
    mom_res = mf * vf + dpint + p_exh - m0 * v0 - imp
    scale = max(float(np.max(signals["mass"] * signals["speed"])), float(np.linalg.norm(p_exh)),
                float(np.linalg.norm(imp)), 1e-30)
    audit = Audit(mass_residual=mass_res, mass_relative=mass_res / m0 if m0 else 0.0,
                  momentum_residual=tuple(float(c) for c in mom_res),
                  momentum_relative=float(np.linalg.norm(mom_res)) / scale,
                  internal_defect=float(np.linalg.norm(pintf - pint0 - dpint)))

    res = FlightResult(t=t, y=y, state_names=tuple(names), signals=signals, ledger=ledger, phases=phases,
                       events=segs.events, audit=audit, success=segs.status == 0, status=segs.status,
                       message=segs.message, nfev=segs.nfev)
    res.units.update(signal_units(system.parsed, signals))
    res.vehicle = vehicle_profile(system.parsed)
    res.summary = run_summary(system, segs)
    res.outcome_specs = {k: OUTCOMES[k] for k in res.summary}
    declared = kind_outcomes(system.parsed.kinds)
    for n, cls in system.parsed.kinds.items():
        for key, value in cls.summarize(n, system.parsed.params[n], res).items():
            spec = declared.get(f"{n}.{key}")
            if spec is None:
                raise PluginError(f"kind {cls.kind!r}: summarize returned {key!r}, which the kind does not declare. "
                                  f"Fix: add OutcomeSpec({key!r}, ...) to {cls.__name__}.outcomes")
            res.summary[spec.key] = float(value)
            res.units[spec.key] = spec.unit
            res.outcome_specs[spec.key] = spec
    logged = signal_events(pieces)
    if logged:       # in time order, after the integrator's events of the same instant
        res.events = sorted(list(segs.events) + logged, key=lambda e: e.t)
    res.cautions = system.parsed.cautions()
    for n, cls in system.parsed.kinds.items():
        for c in cls.flight_cautions(n, system.parsed.params[n], res):
            if c not in res.cautions:
                res.cautions.append(c)
    res.provenance = provenance(system.parsed)
    return res


def provenance(parsed: ParsedModel) -> dict[str, Any]:
    """Tool version, plugin versions and the hash of the model text."""

    text = dumps_model(parsed.model)
    return {"thrustgraph": __version__, "plugins": plugin_versions(parsed.plugin_manager),
            "model_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(), "model_name": parsed.model.name}
