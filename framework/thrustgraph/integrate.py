"""Integrate an assembled vehicle phase by phase with scipy's solve_ivp and terminal events.

Each segment runs with a fixed discrete phase (component modes, kinematic
constraint, before/after apogee). A terminal event ends the segment exactly at
the switch (liquid gone, flow stops, guide exit, apogee, ground impact), the
phase is updated and the next segment starts from the event state, so no
discontinuity is ever stepped over.

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
from typing import Any, Callable

import numpy as np
from scipy.integrate import solve_ivp

from .assembly import ACCUMULATORS, System, assemble
from .balance import Balance, Kinematics
from .errors import IntegrationError, ModelError
from .model import Model, ParsedModel
from .result import Audit, Event, FlightResult, Phase

__all__ = ["integrate", "fly", "fly_segments", "provenance"]

_KIN = {"held": Kinematics.HELD, "guide": Kinematics.GUIDE, "free": Kinematics.FREE, "track": Kinematics.TRACK}


def fly(model: Model | str | None = None, **overrides: Any) -> FlightResult:
    """Load (if a path or None for the bundled default), apply ``key.path=value`` overrides, integrate.

    >>> fly(**{"components.bottle.fill": 0.0}).summary["apogee"] < fly().summary["apogee"]
    True
    """
    from .modelfile import default_model_path, load_model

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


def integrate(model: Model | ParsedModel | System, *, rtol: float | None = None, atol: float | None = None,
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
    bal, segments, events, status, message, nfev = fly_segments(
        system, rtol=rtol, atol=atol, method=method, end_time=end_time, progress=progress)
    return _build_result(system, bal, segments, events, status, message, nfev)


def fly_segments(system: System, *, rtol: float | None = None, atol: float | None = None,
                 method: str | None = None, end_time: float | None = None,
                 progress: Callable[[float, float], None] | None = None):
    """The phase-by-phase integration alone, without building the result's signals and ledger.

    Returns ``(balance, segments, events, status, message, nfev)``; ``segments`` is a list of
    ``(phase, OdeResult)`` with dense output. Studies and benchmarks that only need end states use it.
    """
    run = system.run
    rtol = run.rtol if rtol is None else rtol
    atol = run.atol if atol is None else atol
    method = run.method if method is None else method
    t_end = run.end_time if end_time is None else end_time
    launch = system.launch
    if launch.mount == "held" and launch.speed != 0.0:
        raise ModelError("launch.speed", "a vehicle held on a test stand cannot have an initial speed",
                         "set launch.speed = \"0 m/s\" or choose mount = \"guide\" or \"free\"")
    bal = Balance(system)
    g0 = system.gravity(launch.altitude)
    # The audit accumulators are quadratures of the fluxes: they never feed back into the dynamics, so they are
    # left out of the step-size control (computed at the same stages, they stay as accurate as the states).
    atol_vec = np.full(system.n_states, float(atol)) if np.ndim(atol) == 0 else np.array(atol, dtype=float)
    atol_vec[-len(ACCUMULATORS):] = 1e30
    ph = _Phase(list(system.mode0), _KIN[launch.mount], False)
    if ph.kin == Kinematics.GUIDE and launch.guide_length == 0.0:
        ph.kin = Kinematics.GUIDE  # rests on the pad until the net force lifts it; exits at once

    t = 0.0
    y = np.array(system.y0, dtype=float)
    segments: list[tuple[_Phase, Any]] = []
    events: list[Event] = [Event(0.0, "start", "vehicle", f"mount {launch.mount}")]
    nfev = 0
    status, message = 0, "end time reached"
    zero_len = 0
    x0 = np.array(system.y0[:3])
    u = np.array(system.guide_dir)
    idx_z = 2

    while t < t_end:
        bal.set_phase(ph.modes, ph.kin, ph.descending)
        fns, actions = _events(system, bal, ph, g0, x0, u)
        # A component event already past its zero when its mode starts fires at once.
        for _ in range(20):
            past = [k for k, (kind, *_r) in enumerate(actions) if kind in ("mode", "stop")
                    and fns[k].direction * fns[k](t, y) > 0.0]
            if not past:
                break
            kind, name, comp, target = actions[past[0]]
            if kind == "stop":
                break
            ph.modes[system.moded.index(comp)] = [m.name for m in system.modes[comp]].index(target)
            events.append(Event(t, name, comp, f"mode -> {target} (at once)"))
            bal.set_phase(ph.modes, ph.kin, ph.descending)
            fns, actions = _events(system, bal, ph, g0, x0, u)
        propulsive = _label(system, ph) not in ("spent", "on guide", "coast", "descent")
        if not propulsive and ph.kin == Kinematics.HELD:
            events.append(Event(t, "propulsion spent", "vehicle", "nothing left to push the stand"))
            message = "propulsion spent on the stand"
            break
        if not propulsive and ph.kin == Kinematics.TRACK and float(np.dot(y[3:6], u)) == 0.0:
            events.append(Event(t, "at rest", "vehicle", "nothing pushes and the vehicle is not moving"))
            message = "at rest on the track"
            break
        if not propulsive and ph.kin == Kinematics.GUIDE and float(np.dot(y[3:6], u)) <= 0.0 and \
                float(np.dot(y[:3] - x0, u)) <= 1e-12:
            events.append(Event(t, "no lift-off", "vehicle",
                                "the thrust never exceeded the weight component along the guide"))
            status, message = 2, "the vehicle did not leave the launch guide: thrust never exceeded its weight"
            break
        try:
            sol = solve_ivp(bal.rhs, (t, t_end), y, method=method, rtol=rtol, atol=atol_vec, events=fns,
                            dense_output=True)
        except (ValueError, ZeroDivisionError, OverflowError) as exc:
            raise IntegrationError(f"integration failed at t = {t:.6g} s in phase {_label(system, ph)!r}: {exc}") from None
        nfev += sol.nfev
        segments.append((_Phase(list(ph.modes), ph.kin, ph.descending), sol))
        if progress is not None:
            progress(float(sol.t[-1]), t_end)
        if sol.status == -1:
            raise IntegrationError(f"solve_ivp failed at t = {sol.t[-1]:.6g} s in phase "
                                   f"{_label(system, ph)!r}: {sol.message}")
        t = float(sol.t[-1])
        y = sol.y[:, -1].copy()
        if sol.status == 0:
            events.append(Event(t, "end time", "vehicle", "the run reached run.end_time"))
            status, message = 0, "end time reached"
            break
        fired = [k for k, te in enumerate(sol.t_events) if len(te)]
        if sol.t[-1] - sol.t[0] <= 1e-12 * max(1.0, abs(t)):
            zero_len += 1
            if zero_len > 20:
                raise IntegrationError(f"events keep firing at t = {t:.6g} s without progress: "
                                       f"{[actions[k][1] for k in fired]}")
        else:
            zero_len = 0
        stop = False
        for k in fired:
            kind, name, comp, target = actions[k]
            if kind == "mode":
                i = system.moded.index(comp)
                ph.modes[i] = [m.name for m in system.modes[comp]].index(target)
                events.append(Event(t, name, comp, f"mode -> {target}"))
            elif kind == "guide":
                ph.kin = Kinematics.FREE
                v = float(np.linalg.norm(y[3:6]))
                events.append(Event(t, "guide exit", "vehicle", f"speed {v:.4g} m/s"))
            elif kind == "apogee":
                ph.descending = True
                events.append(Event(t, "apogee", "vehicle", f"altitude {y[idx_z]:.4g} m"))
                if run.stop_at_apogee:
                    stop = True
                    message = "stopped at apogee"
            elif kind == "rest":
                events.append(Event(t, "came to rest", "vehicle", f"distance {float(np.dot(y[:3] - x0, u)):.4g} m"))
                y[3:6] = 0.0
                stop = True
                message = "came to rest on the track"
            elif kind == "impact":
                v = float(np.linalg.norm(y[3:6]))
                events.append(Event(t, "ground impact", "vehicle", f"speed {v:.4g} m/s"))
                stop = True
                message = "ground impact"
            elif kind == "stop":
                events.append(Event(t, name, comp, "run stopped"))
                stop = True
                message = name
        if stop:
            break
    else:
        events.append(Event(t, "end time", "vehicle", "the run reached run.end_time"))
    return bal, segments, events, status, message, nfev


def _events(system: System, bal: Balance, ph: _Phase, g0: float, x0: np.ndarray, u: np.ndarray):
    """Active event functions for a phase, with what each one does."""
    fns: list[Callable] = []
    actions: list[tuple[str, str, str, str | None]] = []
    cache: dict = {}

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

    if ph.kin == Kinematics.GUIDE:
        # 1 nm beyond the guide's end, so that a zero-length guide (a pad) holds the vehicle until it moves
        L = system.launch.guide_length + 1e-9

        def guide(t, y):
            return (y[0] - x0[0]) * u[0] + (y[1] - x0[1]) * u[1] + (y[2] - x0[2]) * u[2] - L
        guide.terminal = True
        guide.direction = 1.0
        fns.append(guide)
        actions.append(("guide", "guide exit", "vehicle", None))
    if ph.kin == Kinematics.TRACK:
        def rest(t, y):
            return y[3] * u[0] + y[4] * u[1] + y[5] * u[2]
        rest.terminal = True
        rest.direction = -1.0
        fns.append(rest)
        actions.append(("rest", "came to rest", "vehicle", None))
    if ph.kin == Kinematics.FREE and g0 > 0.0:
        if not ph.descending:
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


def _build_result(system: System, bal: Balance, segments, events, status, message, nfev) -> FlightResult:
    run = system.run
    ts: list[np.ndarray] = []
    ys: list[np.ndarray] = []
    snaps: list[dict] = []
    phases: list[Phase] = []
    for ph, sol in segments:
        t0, t1 = float(sol.t[0]), float(sol.t[-1])
        name = _label(system, ph)
        if phases and phases[-1].name == name:
            phases[-1] = Phase(name, phases[-1].t_start, t1)
        else:
            phases.append(Phase(name, t0, t1))
        grid = np.arange(t0, t1, run.output_interval)[1:] if t1 > t0 else np.empty(0)
        tt = np.union1d(sol.t, grid)
        yy = sol.sol(tt) if len(tt) > len(sol.t) else sol.y.copy()
        # keep the solver's own points exact
        pos = np.searchsorted(tt, sol.t)
        yy[:, pos] = sol.y
        bal.set_phase(ph.modes, ph.kin, ph.descending)
        for k in range(len(tt)):
            snaps.append(bal.evaluate(float(tt[k]), yy[:, k]))
        ts.append(tt)
        ys.append(yy)
    t = np.concatenate(ts)
    y = np.concatenate(ys, axis=1)

    signals: dict[str, np.ndarray] = {}
    keys = [k for k in snaps[0] if k not in ("ledger", "derivatives", "time")]
    for s in snaps[1:]:
        for k in s:
            if k not in ("ledger", "derivatives", "time") and k not in keys:
                keys.append(k)
    for k in keys:
        sample = next(s[k] for s in snaps if k in s)
        if isinstance(sample, tuple):
            signals[k] = np.array([s.get(k, (np.nan,) * 3) for s in snaps], dtype=float)
        else:
            signals[k] = np.array([s.get(k, np.nan) for s in snaps], dtype=float)
    ledger_keys: list[tuple[str, str]] = []
    for s in snaps:
        for comp, term, _ in s["ledger"]:
            if (comp, term) not in ledger_keys:
                ledger_keys.append((comp, term))
    ledger = {key: np.zeros((len(snaps), 3)) for key in ledger_keys}
    for i, s in enumerate(snaps):
        for comp, term, vec in s["ledger"]:
            ledger[(comp, term)][i] = vec
    acc = signals["acceleration"]
    signals["acceleration_magnitude"] = np.linalg.norm(acc, axis=1)
    signals["speed"] = np.linalg.norm(signals["velocity"], axis=1)
    signals["altitude"] = signals["position"][:, 2]
    signals["range"] = np.hypot(signals["position"][:, 0], signals["position"][:, 1])
    vel = signals["velocity"]
    signals["flight_path_angle"] = np.arctan2(vel[:, 2], np.hypot(vel[:, 0], vel[:, 1]))

    # Audits from the accumulators integrated with the states.
    n_acc = len(ACCUMULATORS)
    m0, mf = float(signals["mass"][0]), float(signals["mass"][-1])
    m_out = float(y[-n_acc, -1])
    mass_res = m0 - mf - m_out
    v0, vf = signals["velocity"][0], signals["velocity"][-1]
    p_exh = y[-n_acc + 1:-n_acc + 4, -1]
    imp = y[-n_acc + 4:-n_acc + 7, -1]
    dpint = y[-n_acc + 7:, -1]
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

    res = FlightResult(t=t, y=y, state_names=system.state_names, signals=signals, ledger=ledger, phases=phases,
                       events=events, audit=audit, success=status == 0, status=status, message=message, nfev=nfev)
    res.summary = _summary(res, system)
    res.cautions = system.parsed.cautions()
    res.provenance = provenance(system.parsed)
    return res


def _summary(r: FlightResult, system: System) -> dict[str, float]:
    s = r.signals
    t = r.t
    thrust = s["thrust"]
    out: dict[str, float] = {
        "flight_time": float(t[-1] - t[0]),
        "launch_mass": float(s["mass"][0]),
        "final_mass": float(s["mass"][-1]),
        "propellant_expelled": float(r.y[-len(ACCUMULATORS), -1]),
        "peak_thrust": float(np.max(thrust)),
        "peak_acceleration": float(np.max(s["acceleration_magnitude"])),
        "max_speed": float(np.max(s["speed"])),
        "apogee": float(np.max(s["altitude"]) + 0.0),
        "range": float(s["range"][-1]),
        "total_impulse": float(np.trapezoid(np.linalg.norm(s["thrust_vector"], axis=1), t)),
        "burn_time": float(sum(p.duration for p in r.phases if p.name not in ("coast", "descent", "on guide", "spent"))),
    }
    if out["propellant_expelled"] > 0:
        out["specific_impulse"] = out["total_impulse"] / out["propellant_expelled"] / 9.80665
    for e in r.events:
        if e.name == "guide exit":
            out["guide_exit_speed"] = float(np.linalg.norm(r.y[3:6, np.searchsorted(r.t, e.t, side="right") - 1]))
        if e.name == "ground impact":
            out["impact_speed"] = float(s["speed"][-1])
    press = [k for k in s if k.endswith(".pressure")]
    if press:
        out["peak_vessel_pressure"] = float(max(np.nanmax(s[k]) for k in press))
    if system.launch.mount == "held":
        for k in ("max_speed", "apogee", "range"):
            out.pop(k, None)
    return out


def provenance(parsed: ParsedModel) -> dict[str, Any]:
    """Tool version, plugin versions and the hash of the model text."""
    from . import __version__
    from .modelfile import dumps_model
    from .plugins import plugin_versions

    text = dumps_model(parsed.model)
    return {"thrustgraph": __version__, "plugins": plugin_versions(parsed.plugin_manager),
            "model_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(), "model_name": parsed.model.name}
