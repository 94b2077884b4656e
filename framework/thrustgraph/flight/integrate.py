"""Integrate an assembled vehicle phase by phase with scipy's solve_ivp and terminal events.

Each segment runs with a fixed discrete phase (component modes, kinematic
constraint, before/after apogee). A terminal event ends the segment exactly at
the switch (liquid gone, flow stops, a vehicle at rest breaking away, guide
exit, apogee, ground impact, a user trigger, a stage separation), the phase is updated and the next segment
starts from the event state, so no discontinuity is ever stepped over. A
separation replaces the vehicle by its upper stage and flies the dropped
stage on as a vehicle of its own.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
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
from ..balance.balance import Balance, Kinematics
from ..base.errors import IntegrationError, ModelError, PluginError
from ..base.limits import check_output_samples
from ..models.model import Model, ParsedModel
from .denseoutput import Dop853Direct, dense_evaluations
from ..balance.outcomes import NODE_TERMS, OUTCOMES, STEP_TERMS, kind_outcomes, quadrature_nodes, run_summary
from .result import Audit, Event, FlightResult, Phase, signal_unit
from ..balance.sampling import RawSamples, SampleTable, dense_states, join_tables, sample_snapshot, sample_terms, take_samples
from .separation import separate
from .signallog import signal_events
from ..models.staging import KINEMATIC_SIGNALS, Trigger, condition, resolve_thresholds
from ..kinds.vehicle import vehicle_profile
from .stepguard import StepGuard
from ..models.modelfile import default_model_path, dumps_model, load_model
from ..base.version import __version__
from ..base.xp import scalar_ops
from ..models.plugins import plugin_versions

__all__ = ["integrate", "fly", "fly_segments", "provenance", "Segments", "available_signals", "check_launch_speed",
           "rest_value"]

_KIN = {"held": Kinematics.HELD, "guide": Kinematics.GUIDE, "free": Kinematics.FREE, "track": Kinematics.TRACK}


def fly(model: Model | str | None = None, **overrides: Any) -> FlightResult:
    """Load (a path, a bundled scenario's name such as ``"water-jet-boat"``, or None for the bundled default;
    :func:`~thrustgraph.models.modelfile.model_path`), apply ``key.path=value`` overrides, integrate.

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


def _set_segment_phase(bal: Balance, ph: _Phase, t: float, y: np.ndarray, moving: bool = False) -> None:
    """Set the balance to the segment's phase, with the way it slides on a guide or track: the sign of the
    speed along it, or, starting at rest, the way it is about to move (:func:`_way_from_rest`; 0: held at rest
    until it breaks away; ``moving``: it has just broken away)."""
    ph.slide = 0.0
    bal.set_phase(ph.modes, ph.kin, ph.descending)
    if ph.kin in (Kinematics.GUIDE, Kinematics.TRACK):
        u = bal.system.guide_dir
        v = float(y[3] * u[0] + y[4] * u[1] + y[5] * u[2])
        ph.slide = 1.0 if v > 0.0 else (-1.0 if v < 0.0 else _way_from_rest(bal, ph, t, y, moving))
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)


def _way_from_rest(bal: Balance, ph: _Phase, t: float, y: np.ndarray, moving: bool = False) -> float:
    """The way a vehicle at rest on a guide or track moves (+1, -1), or 0 if it stays: the way the pull along it
    points (the balance's ``pull``), if the pull outgrows what holds it at rest (the balance's break-away margin
    is positive: static friction, the guide's foot; ``moving``: the break-away event has just found it so, at
    the point where that margin crosses zero) and sliding that way the balance accelerates it that way (the pull
    beats kinetic friction). Leaves the balance in the phase at rest."""
    bal.set_phase(ph.modes, ph.kin, ph.descending)
    terms = bal.terms(t, y)
    pull = float(terms["pull"])
    way = 1.0 if pull > 0.0 else (-1.0 if pull < 0.0 else 0.0)
    if way == 0.0 or not (moving or float(terms["breakaway"]) > 0.0):
        return 0.0
    u = bal.system.guide_dir
    bal.set_phase(ph.modes, ph.kin, ph.descending, way)
    d = bal.rhs(t, y)
    bal.set_phase(ph.modes, ph.kin, ph.descending)
    return way if way * (d[3] * u[0] + d[4] * u[1] + d[5] * u[2]) > 0.0 else 0.0


def _propulsive(system: System, ph: _Phase) -> bool:
    """True when a component's current mode pushes the vehicle (a jet burning, a vessel discharging)."""
    return any(system.modes[n][ph.modes[k]].propulsive for k, n in enumerate(system.moded))


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
    """Fly a vehicle and return its :class:`~thrustgraph.flight.result.FlightResult`.

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
    thrustgraph.base.errors.ModelError: launch.speed: a vehicle held on a test stand cannot have an initial speed. Fix: set launch.speed = "0 m/s" or choose mount = "guide" or "free".
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
    """The SI unit of every signal named, from :func:`~thrustgraph.flight.result.signal_unit`; a signal with none is
    refused, naming the component's kind and what to declare.

    >>> from thrustgraph.models.modelfile import load_model, default_model_path
    >>> from thrustgraph.models.model import parse_model
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
                              "standard key (thrustgraph.flight.result.STANDARD_KEY_UNITS)")
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
    flight = _Flight(system, rtol=run.rtol if rtol is None else rtol, atol=run.atol if atol is None else atol,
                     method=run.method if method is None else method,
                     t_end=run.end_time if end_time is None else end_time, progress=progress, dense=dense,
                     audit=audit)
    flight.start(t0, y0, modes0, kin0, descending)
    return flight.fly()


@dataclass(frozen=True)
class _Action:
    """What a terminal event does when it fires.

    kind : ``mode`` (a component switches to mode ``target``), ``stop`` (a component ends the run), ``trigger``
        (the trigger ``target`` acts), ``guide`` (guide exit), ``foot`` (back at the guide's foot), ``rest``
        (came to rest on a guide or track), ``breakaway`` (a vehicle at rest starts to move), ``apogee``,
        ``impact``
    name, component : what the event log says
    """

    kind: str
    name: str
    component: str
    target: Any = None


@dataclass(frozen=True)
class _Instant:
    """The solution of a run that ended before its first segment: the starting instant alone."""

    t: np.ndarray
    y: np.ndarray
    sol: None = None


class _Flight:
    """One phase-by-phase integration in progress: the vehicle (it changes at a separation), its discrete
    phase, the time and state between segments, the event log, and the triggers still waiting."""

    def __init__(self, system: System, *, rtol: float, atol: Any, method: str, t_end: float,
                 progress: Callable[[float, float], None] | None, dense: bool, audit: bool) -> None:
        check_launch_speed(system.launch)
        self.run = system.run
        self.stages = system.parsed.stages   # the model's stages (a stage flying on has none of its own)
        self.rtol, self.atol, self.method, self.t_end = rtol, atol, method, t_end
        self.progress, self.dense, self.audit = progress, dense, audit
        self.triggers: list[Trigger] = list(resolve_thresholds(system.parsed.triggers, available_signals(system))) \
            if system.parsed.triggers else []
        self.pending: list[tuple[float, Trigger]] = []
        self.state = _State(system, atol)
        self.guard = StepGuard.for_system(system, t_end=t_end, rtol=rtol, atol=atol)  # bounded work, model terms
        self.zero_len = 0
        self.broke_away = False    # the break-away event has just ended a segment: the next one slides

    def start(self, t0: float, y0: Any, modes0: list[int] | None, kin0: int | None, descending: bool) -> None:
        system = self.state.system
        mount = system.launch.mount
        self.ph = _Phase(list(system.mode0 if modes0 is None else modes0), _KIN[mount] if kin0 is None else kin0,
                         descending)
        self.t = float(t0)
        self.y = np.array(system.y0 if y0 is None else y0, dtype=float)
        self.x0 = np.array(self.y[:3])
        self.segs = Segments(balance=self.state.bal, segments=[],
                             events=[Event(self.t, "start", "vehicle", f"mount {mount}" if kin0 is None
                                           else "flying on")], status=0, message="end time reached", nfev=0)
        self.events = self.segs.events

    # -- the loop ------------------------------------------------------------------------------------------
    def fly(self) -> Segments:
        """Segment after segment until an event ends the run or the end time is reached."""
        while self.t < self.t_end:
            actions = self._begin_segment()
            if actions is None or self._nothing_to_fly():
                break
            sol = self._integrate(actions)
            if self._end_segment(sol, actions):
                break
        else:
            self.events.append(Event(self.t, "end time", "vehicle", "the run reached run.end_time"))
        if not self.segs.segments:  # ended before the first segment: the result is the starting instant
            self.segs.segments.append((self.ph.copy(), _Instant(np.array([self.t]), self.y[:, None].copy()),
                                       self.state.bal))
        self.segs.balance = self.state.bal
        return self.segs

    def _set_up(self) -> tuple[list[Callable], list[_Action]]:
        _set_segment_phase(self.state.bal, self.ph, self.t, self.y, self.broke_away)
        return _events(self.state.system, self.state.bal, self.ph, self.x0, self.triggers, self.pending)

    def _begin_segment(self) -> list[tuple[Callable, _Action]] | None:
        """Set the balance to this segment's phase and gather its events. Component events and triggers
        already past their zero when a segment starts fire at once, and then a lift-off from a pad that the
        balance already lifts (:meth:`_lifts_off_pad`); None when one of them stops the run."""
        fns, actions = self._set_up()
        for _ in range(50):
            past = [k for k, a in enumerate(actions) if a.kind in ("mode", "stop", "trigger")
                    and fns[k].direction * fns[k](self.t, self.y) > 0.0]
            if not past:
                if not self._lifts_off_pad():
                    break
                self._on_guide_exit(next(a for a in actions if a.kind == "guide"))
                fns, actions = self._set_up()
                continue
            a = actions[past[0]]
            if a.kind == "stop":
                break
            if a.kind == "trigger":
                if self._fire(a.target):
                    return None
            else:
                self._switch(a.component, a.target)
                self.events.append(Event(self.t, a.name, a.component, f"mode -> {a.target} (at once)"))
            fns, actions = self._set_up()
        self.broke_away = False
        return list(zip(fns, actions))

    def _lifts_off_pad(self) -> bool:
        """True on a pad (a guide of length 0) at rest when the balance moves the vehicle forward at the start of
        the segment (the thrust along the pad already exceeds the weight component and friction: the way it
        slides, :func:`_set_segment_phase`, is forward): it lifts off at that instant, at zero speed, not when
        the first step has carried it the pad's 1 nm."""
        sysm, ph, y = self.state.system, self.ph, self.y
        if ph.kin != Kinematics.GUIDE or sysm.launch.guide_length != 0.0 or ph.slide <= 0.0:
            return False
        u = sysm.guide_dir
        return float(y[3] * u[0] + y[4] * u[1] + y[5] * u[2]) == 0.0

    def _nothing_to_fly(self) -> bool:
        """End the run (True) when nothing pushes: spent on the stand, at rest on a track, or no lift-off."""
        sysm, bal, ph, t, y = self.state.system, self.state.bal, self.ph, self.t, self.y
        if _propulsive(sysm, ph) or self.pending:
            return False
        u = np.array(sysm.guide_dir)
        if ph.kin == Kinematics.HELD:
            self.events.append(Event(t, "propulsion spent", "vehicle", "nothing left to push the stand"))
            self.segs.message = "propulsion spent on the stand"
            return True
        if ph.kin == Kinematics.TRACK and float(np.dot(y[3:6], u)) == 0.0 and not any(bal.rhs(t, y)[3:6]):
            self.events.append(Event(t, "at rest", "vehicle", "nothing pushes and the vehicle is not moving"))
            self.segs.message = "at rest on the track"
            return True
        if ph.kin == Kinematics.GUIDE and float(np.dot(y[3:6], u)) <= 0.0 and \
                float(np.dot(y[:3] - self.x0, u)) <= 1e-12 and not self.triggers:
            self.events.append(Event(t, "no lift-off", "vehicle", "the thrust never exceeded the weight component "
                                     "(and friction) along the guide"))
            self.segs.status, self.segs.message = 2, ("the vehicle did not leave the launch guide: thrust never "
                                                      "exceeded its weight and the guide friction")
            return True
        return False

    def _integrate(self, actions: list[tuple[Callable, _Action]]) -> Any:
        """One segment with solve_ivp, up to its first terminal event (or the end time)."""
        sysm, bal, t, y = self.state.system, self.state.bal, self.t, self.y
        label = _label(sysm, self.ph)
        fns = [fn for fn, _ in actions]
        fun = bal.rhs if self.audit else bal.core
        # DOP853's dense output (every step's, for the result's samples) calls the right-hand side directly:
        # inside a step the guard has watched already (flight.denseoutput)
        direct = self.dense and self.method == "DOP853"
        how = dict(method=Dop853Direct, direct=fun) if direct else dict(method=self.method)
        try:
            if self.audit:
                sol = solve_ivp(self.guard.watch(fun, label, sysm), (t, self.t_end), y, rtol=self.rtol,
                                atol=self.state.atol, events=fns, dense_output=self.dense, **how)
            else:
                n_phys = sysm.n_states - len(ACCUMULATORS)
                k = math.sqrt(sysm.n_states / n_phys)
                sol = solve_ivp(self.guard.watch(fun, label, sysm), (t, self.t_end), y[:n_phys],
                                rtol=self.rtol * k, atol=self.state.atol[:n_phys] * k, events=fns,
                                dense_output=self.dense, **how)
        except (ValueError, ZeroDivisionError, OverflowError) as exc:
            raise IntegrationError(f"integration failed at t = {t:.6g} s in phase {label!r}: {exc}") from None
        self.segs.nfev += sol.nfev + (dense_evaluations(sol) if direct else 0)
        self.segs.segments.append((self.ph.copy(), sol, bal))
        if self.progress is not None:
            self.progress(float(sol.t[-1]), self.t_end)
        if sol.status == -1:
            raise IntegrationError(self.guard.explain(f"solve_ivp failed at t = {sol.t[-1]:.6g} s in phase "
                                                      f"{label!r}: {sol.message}"))
        self.t = float(sol.t[-1])
        self.y = sol.y[:, -1].copy() if self.audit else \
            np.concatenate([sol.y[:, -1], np.full(len(ACCUMULATORS), np.nan)])
        return sol

    def _end_segment(self, sol: Any, actions: list[tuple[Callable, _Action]]) -> bool:
        """Carry out the events that ended the segment; True when the run ends."""
        if sol.status == 0:
            self.events.append(Event(self.t, "end time", "vehicle", "the run reached run.end_time"))
            self.segs.status, self.segs.message = 0, "end time reached"
            return True
        first = [k for k, te in enumerate(sol.t_events) if len(te)]
        fired = [actions[k][1] for k in first + self._reached_together(sol, actions, first)]
        if sol.t[-1] - sol.t[0] <= 1e-12 * max(1.0, abs(self.t)):
            self.zero_len += 1
            if self.zero_len > 20:
                raise IntegrationError(f"events keep firing at t = {self.t:.6g} s without progress: "
                                       f"{[a.name for a in fired]}")
        else:
            self.zero_len = 0
        sysm = self.state.system
        stop = False
        for a in fired:
            if a.kind == "trigger":
                stop = self._fire(a.target)
                if self.state.system is not sysm:
                    break  # the vehicle changed: the other events of this step belong to the old one
            else:
                stop = _ON_EVENT[a.kind](self, a) or stop
        return stop

    @staticmethod
    def _reached_together(sol: Any, actions: list[tuple[Callable, _Action]], first: list[int]) -> list[int]:
        """The other events that cross in the segment's last step and have reached their zero at the point of
        the event that ended it (:func:`reached`): they fire with it."""
        if len(sol.t) < 2:
            return []
        t0, y0, t1, y1 = sol.t[-2], sol.y[:, -2], sol.t[-1], sol.y[:, -1]
        return [k for k, (fn, _) in enumerate(actions)
                if k not in first and reached(fn(t0, y0), fn(t1, y1), fn.direction)]

    # -- what the events do --------------------------------------------------------------------------------
    def _switch(self, component: str, mode: str) -> None:
        sysm = self.state.system
        self.ph.modes[sysm.moded.index(component)] = [m.name for m in sysm.modes[component]].index(mode)

    def _on_mode(self, a: _Action) -> bool:
        self._switch(a.component, a.target)
        self.events.append(Event(self.t, a.name, a.component, f"mode -> {a.target}"))
        return False

    def _on_guide_exit(self, a: _Action) -> bool:
        self.ph.kin = Kinematics.FREE
        self.events.append(Event(self.t, a.name, "vehicle", f"speed {float(np.linalg.norm(self.y[3:6])):.4g} m/s"))
        return False

    def _on_apogee(self, a: _Action) -> bool:
        self.ph.descending = True
        self.events.append(Event(self.t, "apogee", "vehicle", f"altitude {self.y[2]:.4g} m"))
        if self.run.stop_at_apogee:
            self.segs.message = "stopped at apogee"
            return True
        return False

    def _on_rest(self, a: _Action) -> bool:
        sysm, bal, ph, t, y = self.state.system, self.state.bal, self.ph, self.t, self.y
        u = np.array(sysm.guide_dir)
        self.events.append(Event(t, "came to rest", "vehicle", f"distance {float(np.dot(y[:3] - self.x0, u)):.4g} m"))
        y[3:6] = 0.0
        # it stays at rest only if friction holds it (it does not move off at once) and nothing pushes
        held = _way_from_rest(bal, ph, t, y) == 0.0
        if held and not _propulsive(sysm, ph) and not self.pending and not self.triggers:
            self.segs.message = "came to rest on the track" if ph.kin == Kinematics.TRACK else \
                "came to rest on the launch guide"
            return True
        return False

    def _on_breakaway(self, a: _Action) -> bool:
        """The pull along the guide or track has outgrown the hold: the next segment starts sliding (the way it
        slides: :func:`_set_segment_phase`). On a pad that is the lift-off, logged as the next segment starts
        (:meth:`_lifts_off_pad`), not a second event."""
        sysm = self.state.system
        self.broke_away = True
        if self.ph.kin == Kinematics.GUIDE and sysm.launch.guide_length == 0.0:
            return False
        where = "guide" if self.ph.kin == Kinematics.GUIDE else "track"
        way = "forward" if self.state.bal.terms(self.t, self.y)["pull"] > 0.0 else "backward"
        self.events.append(Event(self.t, "break-away", "vehicle",
                                 f"moves off {way}: the pull along the {where} outgrows what held it at rest"))
        return False

    def _on_foot(self, a: _Action) -> bool:
        self.events.append(Event(self.t, "back at the guide foot", "vehicle", "slid back down the guide"))
        self.y[:3] = self.x0
        self.y[3:6] = 0.0
        return False

    def _on_impact(self, a: _Action) -> bool:
        self.events.append(Event(self.t, "ground impact", "vehicle",
                                 f"speed {float(np.linalg.norm(self.y[3:6])):.4g} m/s"))
        self.segs.message = "ground impact"
        return True

    def _on_stop(self, a: _Action) -> bool:
        self.events.append(Event(self.t, a.name, a.component, "run stopped"))
        self.segs.message = a.name
        return True

    # -- triggers ------------------------------------------------------------------------------------------
    def _fire(self, tr: Trigger) -> bool:
        """A trigger's condition was met (or its delay ran out): act now or schedule it; True to stop the run."""
        if tr in self.triggers:
            self.triggers.remove(tr)
            if tr.delay > 0.0:
                self.pending.append((self.t + tr.delay, tr))
                self.events.append(Event(self.t, tr.name, "trigger", f"condition met; acts after {tr.delay:.4g} s"))
                return False
        else:
            self.pending[:] = [(td, p) for td, p in self.pending if p is not tr]
        return self._act(tr)

    def _act(self, tr: Trigger) -> bool:
        """Carry out a trigger's action: stop the run (True), switch a component's mode, or separate a stage."""
        t = self.t
        if tr.action == "stop":
            self.events.append(Event(t, tr.name, "trigger", "run stopped"))
            self.segs.message = f"stopped by trigger {tr.name!r}"
            return True
        if tr.action == "switch":
            if tr.component not in self.state.system.moded:
                self.events.append(Event(t, tr.name, tr.component, "component no longer on the vehicle: ignored"))
                return False
            self._switch(tr.component, tr.mode)
            self.events.append(Event(t, tr.name, tr.component, f"mode -> {tr.mode}"))
            return False
        stage = self.stages[tr.stage]
        upper, uy, um, dsys, dy, dm, m_drop = separate(self.state.system, self.y, self.ph.modes, stage)
        self.segs.separations.append((t, tr.stage, dsys, dy, dm, self.ph.descending))
        self.segs.dropped_mass += m_drop
        self.events.append(Event(t, "separation", tr.stage, f"dropped {m_drop:.4g} kg: {', '.join(stage)}"))
        self.state.replace(upper, self.atol)
        self.ph.modes = um
        self.y = uy
        return False


#: What each kind of event (other than a trigger's) does to the flight; True ends the run.
_ON_EVENT: dict[str, Callable[[_Flight, _Action], bool]] = {
    "mode": _Flight._on_mode, "guide": _Flight._on_guide_exit, "apogee": _Flight._on_apogee,
    "rest": _Flight._on_rest, "breakaway": _Flight._on_breakaway, "foot": _Flight._on_foot, "impact": _Flight._on_impact, "stop": _Flight._on_stop,
}


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


# --- event functions ------------------------------------------------------------------------------------------

class _LastCall:
    """``f(t, y)`` kept for the last (t, y) asked: the event functions of one solver step share one evaluation."""

    def __init__(self, f: Callable[[float, np.ndarray], Any]) -> None:
        self.f = f
        self.key: tuple[float, bytes] | None = None
        self.value: Any = None

    def __call__(self, t: float, y: np.ndarray) -> Any:
        key = (t, y.tobytes())
        if self.key != key:
            self.key = key
            self.value = self.f(t, y)
        return self.value


def reached(g_start: Any, g_point: Any, direction: float) -> Any:
    """Whether an event function that was at ``g_start`` where a step began has reached its zero at a later
    point, where it is ``g_point``, crossing in ``direction`` (floats or arrays over designs): solve_ivp's test
    for an event inside a step, and the ensemble's (at the step's end).

    At an event's point it also says which other events fire with it: events located in the same step at the
    same point fire together. A signal that stops exactly at a trigger's threshold (a burn clock stopping at the
    burnout time the trigger names) reaches it at the burnout event's point, whichever of the two equal roots the
    locator sorts first. One rule for a single flight (solve_ivp reports only the first of equal terminal roots)
    and an ensemble.

    >>> reached(-1.0, 0.0, 1.0), reached(-1.0, -1e-12, 1.0), reached(2.0, 0.0, -1.0)
    (True, False, True)
    """
    if direction > 0:
        return (g_start <= 0.0) & (g_point >= 0.0)
    if direction < 0:
        return (g_start >= 0.0) & (g_point <= 0.0)
    return ((g_start <= 0.0) & (g_point >= 0.0)) | ((g_start >= 0.0) & (g_point <= 0.0))


def _terminal(fn: Callable, direction: float) -> Callable:
    """Mark an event function as terminal, crossing zero in ``direction`` (solve_ivp reads the attributes)."""
    fn.terminal = True
    fn.direction = direction
    return fn


def _condition_fn(tr: Trigger, x0: np.ndarray, snapshot: _LastCall) -> Callable:
    """A trigger's condition at (t, y) (:func:`thrustgraph.models.staging.condition`), the balance's snapshot
    evaluated once per state."""
    x = (float(x0[0]), float(x0[1]), float(x0[2]))
    return lambda t, y: condition(tr, t, y, x, snapshot, scalar_ops)


def _events(system: System, bal: Balance, ph: _Phase, x0: np.ndarray, triggers: list, pending: list
            ) -> tuple[list[Callable], list[_Action]]:
    """Active event functions for a phase, with what each one does: the components' events, the triggers and
    the ones whose delay runs, then those of the mount and of the flight (break-away, guide exit, rest, apogee,
    impact)."""
    pairs = _component_events(system, bal, ph) + _trigger_events(bal, x0, triggers, pending) + \
        _kinematic_events(system, bal, ph, x0)
    return [fn for fn, _ in pairs], [a for _, a in pairs]


def _component_events(system: System, bal: Balance, ph: _Phase) -> list[tuple[Callable, _Action]]:
    drives = _LastCall(bal.drives)
    current_modes = {n: system.modes[n][ph.modes[k]].name for k, n in enumerate(system.moded)}
    out = []
    for comp, spec in system.events:
        if current_modes[comp] not in spec.when:
            continue
        if spec.needs_drive:
            def fn(t, y, spec=spec, comp=comp):
                return spec.fn(t, y.tolist(), drives(t, y).get(comp, 0.0))
        else:
            def fn(t, y, spec=spec):
                return spec.fn(t, y.tolist(), 0.0)
        out.append((_terminal(fn, spec.direction), _Action("mode" if spec.to else "stop", spec.name, comp, spec.to)))
    return out


def _trigger_events(bal: Balance, x0: np.ndarray, triggers: list, pending: list) -> list[tuple[Callable, _Action]]:
    snapshot = _LastCall(bal.evaluate)
    out = []
    for tr in triggers:
        out.append((_terminal(_condition_fn(tr, x0, snapshot), tr.direction), _Action("trigger", tr.name, "trigger", tr)))
    for t_due, tr in pending:
        def due(t, y, t_due=t_due):
            return t - t_due
        out.append((_terminal(due, 1.0), _Action("trigger", tr.name, "trigger", tr)))
    return out


def _kinematic_events(system: System, bal: Balance, ph: _Phase, x0: np.ndarray) -> list[tuple[Callable, _Action]]:
    u = system.guide_dir
    out = []
    profile = vehicle_profile(system.parsed)
    if ph.kin in (Kinematics.TRACK, Kinematics.GUIDE) and ph.slide == 0.0:
        # at rest, held by static friction or the guide's foot: the segment ends where the pull along the guide or
        # track outgrows the hold (the balance's break-away margin rises through zero), so that the next segment
        # starts sliding and the start of the motion is no kink inside a step
        terms = _LastCall(bal.terms)

        def breakaway(t, y):
            return float(terms(t, y)["breakaway"])
        out.append((_terminal(breakaway, 1.0), _Action("breakaway", "break-away", "vehicle")))
    if ph.kin == Kinematics.GUIDE:
        # 1 nm beyond the guide's end, so that a zero-length guide (a pad) holds the vehicle until it moves; leaving
        # a pad is a lift-off, not the exit of a guide (whose speed would be that of the first nanometre)
        L = system.launch.guide_length + 1e-9

        def guide(t, y):
            return (y[0] - x0[0]) * u[0] + (y[1] - x0[1]) * u[1] + (y[2] - x0[2]) * u[2] - L

        # sliding back down the guide stops at its foot (1 nm below it, so a vehicle resting there does not fire)
        def foot(t, y):
            return (y[0] - x0[0]) * u[0] + (y[1] - x0[1]) * u[1] + (y[2] - x0[2]) * u[2] + 1e-9
        out.append((_terminal(guide, 1.0), _Action("guide", "guide exit" if profile.guided else "lift-off", "vehicle")))
        out.append((_terminal(foot, -1.0), _Action("foot", "back at the guide foot", "vehicle")))
    if ph.kin in (Kinematics.TRACK, Kinematics.GUIDE) and ph.slide != 0.0:
        # sliding: the segment ends where the speed along the guide or track reaches zero (kinetic friction
        # opposes the sliding direction, fixed for the segment, so the turn-round is a segment boundary)
        def rest(t, y, way=ph.slide):
            return rest_value(y[3] * u[0] + y[4] * u[1] + y[5] * u[2], way)
        out.append((_terminal(rest, -ph.slide), _Action("rest", "came to rest", "vehicle")))
    if ph.kin == Kinematics.FREE and system.gravity(float(x0[2])) > 0.0:
        # a hover rig settles and bobs on its feed: it has a highest point (an outcome), no apogee to mark
        if not ph.descending and profile.kind != "hovering":
            def apogee(t, y):
                return y[5]
            out.append((_terminal(apogee, -1.0), _Action("apogee", "apogee", "vehicle")))

        def impact(t, y):
            return y[2]
        out.append((_terminal(impact, -1.0), _Action("impact", "ground impact", "vehicle")))
    return out


# --- the result -----------------------------------------------------------------------------------------------

@dataclass
class _Samples:
    """The flight at its output times, segment after segment: times, states (with their names), the balance's
    signals and ledger at those times, and the phases."""

    ts: list[np.ndarray] = field(default_factory=list)
    rows: list[tuple[np.ndarray, tuple[str, ...]]] = field(default_factory=list)
    tables: list[SampleTable] = field(default_factory=list)
    pieces: list[tuple] = field(default_factory=list)   # (phase, solution, balance, times, signals) per segment
    step_terms: dict[int, Any] = field(default_factory=dict)   # segment -> Balance.terms at its steps
    node_terms: dict[int, Any] = field(default_factory=dict)   # ... and at its impulse quadrature nodes
    phases: list[Phase] = field(default_factory=list)
    names: list[str] = field(default_factory=list)


def _first_samples(table: SampleTable, m: int) -> SampleTable:
    """The table's first m samples (its terms kept whole: the caller takes what it needs of them)."""
    out = SampleTable(m, {k: v[:m] for k, v in table.values.items()}, {k: v[:m] for k, v in table.ledger.items()})
    out.terms = table.terms
    return out


def _build_result(system: System, segs: Segments) -> FlightResult:
    run = system.run
    check_output_samples(float(segs.segments[-1][1].t[-1] - segs.segments[0][1].t[0]), run.output_interval)
    samples = _sample(segs, run.output_interval)
    t, y, names, index = _state_table(samples)
    table = join_tables(samples.tables)
    signals, ledger = _with_motion(table.values), table.ledger
    _with_net_thrust(signals, ledger)
    audit = _audit(signals, y[:, -1], index)
    res = FlightResult(t=t, y=y, state_names=tuple(names), signals=signals, ledger=ledger, phases=samples.phases,
                       events=segs.events, audit=audit, success=segs.status == 0, status=segs.status,
                       message=segs.message, nfev=segs.nfev)
    _summarise(res, system, segs, samples)
    logged = signal_events(samples.pieces)
    if logged:       # in time order, after the integrator's events of the same instant
        res.events = sorted(list(segs.events) + logged, key=lambda e: e.t)
    res.cautions = system.parsed.cautions()
    for n, cls in system.parsed.kinds.items():
        for c in cls.flight_cautions(n, system.parsed.params[n], res):
            if c not in res.cautions:
                res.cautions.append(c)
    res.provenance = _provenance_of(system)
    return res


def _sample(segs: Segments, interval: float) -> _Samples:
    """Every segment at the solver's own points and on the output grid (dense output between them)."""
    out = _Samples()
    for ph, sol, bal in segs.segments:
        t0, t1 = float(sol.t[0]), float(sol.t[-1])
        name = _label(bal.system, ph)
        if out.phases and out.phases[-1].name == name:
            out.phases[-1] = Phase(name, out.phases[-1].t_start, t1)
        else:
            out.phases.append(Phase(name, t0, t1))
        grid = np.arange(t0, t1, interval)[1:] if t1 > t0 else np.empty(0)
        grid = grid[grid < t1]   # arange's rounding can put its last point past the end (times would go back)
        uniq_t, first = np.unique(sol.t, return_index=True)
        tt = np.unique(np.concatenate([uniq_t, grid])) if len(grid) else uniq_t
        m = len(tt)
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
        # the impulse's quadrature nodes are evaluated in the same pass as the samples (their states in the same
        # pass over the dense output); the solver's steps are among the samples: the outcomes read both from it
        quad = quadrature_nodes(ph, sol, bal)
        times = tt if quad is None else np.concatenate([tt, quad[0]])
        yy = dense_states(sol, times) if len(times) > len(uniq_t) else sol.y[:, first].copy()
        yy[:, np.searchsorted(tt, uniq_t)] = sol.y[:, first]   # keep the solver's own points exact
        snap = sample_snapshot(bal, times, yy)
        if snap is not None:
            table = RawSamples(snap, len(times), m)
        else:
            table = sample_terms(bal, times, yy)
            table = _first_samples(table, m) if quad is not None else table
        yy = yy[:, :m]
        out.tables.append(table)
        if table.terms is not None:
            j = len(out.tables) - 1
            whole = m + (len(quad[0]) if quad is not None else 0)
            out.step_terms[j] = take_samples({k: table.terms[k] for k in STEP_TERMS}, np.searchsorted(tt, sol.t),
                                             whole)
            if quad is not None:
                out.node_terms[j] = take_samples({k: table.terms[k] for k in NODE_TERMS}, np.arange(m, whole), whole)
        out.pieces.append((ph, sol, bal, tt, out.tables[-1].values))
        out.ts.append(tt)
        out.rows.append((yy, bal.system.state_names))
        for n in bal.system.state_names:
            if n not in out.names:
                out.names.append(n)
    return out


def _state_table(samples: _Samples) -> tuple[np.ndarray, np.ndarray, list[str], dict[str, int]]:
    """Times, and one row per state name across every stage of the vehicle (NaN where a stage does not have
    it), the audit accumulators last."""
    acc = [n for n in samples.names if n.startswith("audit.")]
    names = [n for n in samples.names if not n.startswith("audit.")] + acc
    index = {n: k for k, n in enumerate(names)}
    t = np.concatenate(samples.ts)
    y = np.full((len(names), len(t)), np.nan)
    col = 0
    for yy, snames in samples.rows:
        for k, n in enumerate(snames):
            y[index[n], col:col + yy.shape[1]] = yy[k]
        col += yy.shape[1]
    return t, y, names, index


def _with_motion(signals: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The signals, and those derived from the motion: acceleration magnitude, speed, altitude, range,
    flight-path angle."""
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
    return signals


def _with_net_thrust(signals: dict[str, np.ndarray], ledger: dict[tuple[str, str], np.ndarray]) -> None:
    """Net thrust: the ledger's thrust terms of every opening (momentum flux, pressure thrust: the gross thrust)
    with the momentum of the fluid entering through sources (an inlet's ram drag, a hose's inflow)."""
    inflow = np.zeros_like(signals["thrust_vector"])
    for (comp, term), vec in ledger.items():
        if term == "inflow momentum":
            inflow = inflow + vec
    signals["net_thrust_vector"] = signals["thrust_vector"] + inflow
    signals["net_thrust"] = np.einsum("ij,ij->i", signals["net_thrust_vector"], signals["axis"])


def _audit(signals: dict[str, np.ndarray], last: np.ndarray, index: dict[str, int]) -> Audit:
    """The closure audits from the accumulators integrated with the states (``last``: the final state)."""
    m0, mf = float(signals["mass"][0]), float(signals["mass"][-1])
    m_out = float(last[index["audit.mass_out"]])
    mass_res = m0 - mf - m_out
    v0, vf = signals["velocity"][0], signals["velocity"][-1]

    def vec(stem: str) -> np.ndarray:
        return np.array([last[index[f"{stem}.{c}"]] for c in "xyz"])
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
    return Audit(mass_residual=mass_res, mass_relative=mass_res / m0 if m0 else 0.0,
                 momentum_residual=tuple(float(c) for c in mom_res),
                 momentum_relative=float(np.linalg.norm(mom_res)) / scale,
                 internal_defect=float(np.linalg.norm(pintf - pint0 - dpint)))


def _summarise(res: FlightResult, system: System, segs: Segments, samples: _Samples) -> None:
    """The summary from the outcome registry, then the outcomes the component kinds declare, with units."""
    res.units.update(signal_units(system.parsed, res.signals))
    res.vehicle = vehicle_profile(system.parsed)
    res.summary = run_summary(system, segs, samples.step_terms, samples.node_terms)
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


def _provenance_of(system: System) -> dict[str, Any]:
    """:func:`provenance` of the system's model, made once per assembled system and kept with what else is
    derived once for it (``System.straight_lines``): writing the model out to hash it costs ~1 ms a flight."""
    made = system.straight_lines.get(("provenance",))
    if made is None:
        made = system.straight_lines[("provenance",)] = provenance(system.parsed)
    return {k: dict(v) if isinstance(v, dict) else v for k, v in made.items()}


def provenance(parsed: ParsedModel) -> dict[str, Any]:
    """Tool version, plugin versions and the hash of the model text."""

    text = dumps_model(parsed.model)
    return {"thrustgraph": __version__, "plugins": plugin_versions(parsed.plugin_manager),
            "model_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(), "model_name": parsed.model.name}
