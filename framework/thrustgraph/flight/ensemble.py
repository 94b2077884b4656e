"""Vectorised ensembles: N designs integrated together as one array computation on one core.

The designs (rows of SI parameter values) are assembled as arrays
(:class:`thrustgraph.flight.arraysystem.ArraySystem`, physics from the plugins'
array builders) and integrated by a vectorised explicit Runge-Kutta method,
Dormand-Prince 5(4) with its 4th-order dense output: the coefficients of
J. R. Dormand and P. J. Prince, "A family of embedded Runge-Kutta formulae",
J. Comput. Appl. Math. 6 (1980) 19-26, and the dense output of L. F. Shampine,
"Some practical Runge-Kutta formulas", Math. Comp. 46 (1986) 135-150, as
scipy's ``RK45`` uses them (copied from scipy.integrate._ivp.rk).

What each design owns (lessons of the prototype in docs/studies.md):

* its own time ``t``, step ``h``, error norm (RMS of the scaled local error
  over its own states, as scipy's solvers), accept/reject decision and step
  control (safety 0.9, factors 0.2-10, as scipy's RK45);
* its own discrete phase: the mode of every moded component, the
  kinematic constraint (held on a stand, guide, free, track), the way it
  slides along its guide or track, plus whether apogee has passed; the
  right-hand side never infers the phase;
* its own events, those of a single flight (:mod:`thrustgraph.flight.integrate`):
  the components' events (liquid exhausted, flow stops...), guide exit,
  back at the guide's foot, at rest on a guide or track (the speed along it
  reaches zero while it slides), break-away from rest (the balance's margin
  rises through zero), apogee and ground impact, each a continuous
  function with a direction, located on the dense output by a vectorised
  Illinois (modified regula falsi) iteration; the step is cut at the
  earliest event and the phase switch (reset map) is applied to that design
  alone. At the start of each of its phases a design is checked as a single
  flight's segment is: propulsion spent on a stand, at rest on a track, no
  lift-off from a guide. Apogee
  switches nothing in the dynamics, so it is recorded where it falls inside
  the step without cutting it (unless ``run.stop_at_apogee`` ends the flight
  there);
* a step budget: a design that needs more than ``max_steps`` steps, or whose
  step collapses, is screened out and reported, not left to stall the batch.

Finished designs are compacted away (the arrays shrink) when fewer than
half of them are still flying. The results are summary rows only
(the registry outcomes in :data:`COMPUTED`, keyed as in
:data:`thrustgraph.balance.outcomes.OUTCOMES`); no trajectory is kept, so memory
does not grow with flight length. Each row depends only on its own design
(every operation is elementwise), so a design gives the same numbers in any
chunk of any size.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.models.model import parse_model
>>> from thrustgraph.models.designs import resolve
>>> parsed = parse_model(load_model(default_model_path()))
>>> res = fly_designs(parsed, [resolve(parsed, "components.bottle.fill")], np.array([[0.33], [0.5]]), ["apogee"])
>>> res.status, [round(float(v), 3) for v in res.values[:, 0]]
(['ok', 'ok'], [54.358, 46.962])
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from ..balance.arrayops import keep_heap
from .arraysystem import FREE, GUIDE, HELD, IMPULSE, TRACK, ArraySystem, PhaseGroups, unsupported
from .assembly import assemble
from ..models.designs import DesignParameter, bounds_text, with_values, within_bounds
from ..base.errors import IntegrationError, ModelError, screened_note
from .integrate import available_signals, check_launch_speed, reached, rest_value
from ..models.model import ParsedModel, check_static_friction
from ..balance.outcomes import OUTCOMES, STATUS_OK, STATUS_SCREENED, check_outputs
from ..kinds.vehicle import vehicle_profile
from ..kinds.component import ComponentKind
from .separation import carry, stage_models
from ..models.staging import Trigger, condition, resolve_thresholds
from ..base.xp import array_ops
from . import stepkernel
from .stepkernel import DOPRI_A, DOPRI_B, DOPRI_C, DOPRI_E, DOPRI_P, illinois as _illinois, rowsum as _rowsum

__all__ = ["fly_designs", "EnsembleResult", "unsupported", "COMPUTED", "DOPRI_C", "DOPRI_A", "DOPRI_B", "DOPRI_E",
           "DOPRI_P"]

#: The registry outcomes the ensemble computes itself (its own running maxima, burn clock and impulse quadrature
#: state, not the registry's functions); a study that asks for another one flies single flights.
#: Outcomes that do not apply to a design's vehicle (:mod:`thrustgraph.kinds.vehicle`) are NaN, as in a single flight.
COMPUTED = ("apogee", "range", "impact_x", "impact_y", "flight_time", "run_time", "max_speed", "peak_acceleration",
            "total_impulse", "burn_time", "propellant_expelled", "launch_mass", "peak_vessel_pressure",
            "guide_exit_speed", "impact_speed", "dropped_mass", "top_speed", "powered_time", "distance")
#: the fate of a design that separated a stage: it flies on as the next vehicle
_SEPARATED = "separated"

_EPS = np.finfo(float).eps


@dataclass
class EnsembleResult:
    """Summary rows of an ensemble: status and note per design, outcome values (SI), steps taken per design,
    right-hand-side evaluations (vectorised calls), wall-clock seconds, and the time each stage separated
    (stage name -> seconds per design, NaN where it did not)."""

    status: list[str]
    notes: list[str]
    values: np.ndarray
    outputs: tuple[str, ...]
    steps: np.ndarray
    rhs_calls: int
    seconds: float
    separations: dict[str, np.ndarray] = field(default_factory=dict)


class _Events:
    """The event functions of the family: the components' events, the model's triggers (a condition met, and
    the action due after its delay), guide exit, back at the guide's foot, at rest on a guide or track, break-away
    from rest, apogee, ground impact (the event set of :func:`thrustgraph.flight.integrate.fly_segments`)."""

    def __init__(self, sysa: ArraySystem, triggers: Sequence[Trigger] = ()) -> None:
        self.slots: list[tuple] = []   # (kind, direction, payload)
        for k, (comp, spec) in enumerate(sysa.events):
            names = [m.name for m in sysa.modes[comp]]
            when = np.zeros(len(names), dtype=bool)
            when[[names.index(w) for w in spec.when]] = True
            to = names.index(spec.to) if spec.to else -1
            self.slots.append(("comp", float(spec.direction), (k, comp, sysa.slot[comp], when, to, spec.name,
                                                               spec.needs_drive)))
        for k, tr in enumerate(triggers):
            self.slots.append(("trigger", tr.direction, (k, tr)))
        for k, tr in enumerate(triggers):
            self.slots.append(("due", 1.0, (k, tr)))
        self.slots.append(("guide", 1.0, None))
        # sliding back down the guide stops at its foot (1 nm below it, so a vehicle resting there does not fire)
        self.slots.append(("foot", -1.0, None))
        # sliding along a guide or track (kinetic friction against the way it slides, fixed for the phase), the
        # phase ends where the speed along it reaches zero: falling through zero sliding forward, rising backward
        self.slots.append(("rest", -1.0, 1.0))
        self.slots.append(("rest", 1.0, -1.0))
        # at rest, held by static friction or the guide's foot (slide 0): the phase ends where the balance's
        # break-away margin rises through zero
        self.slots.append(("breakaway", 1.0, None))
        self.slots.append(("apogee", -1.0, None))
        self.slots.append(("impact", -1.0, None))
        # the events whose value reads the balance (a component's drive, a trigger's snapshot signal)
        self.needs_drive = [(s[0] == "comp" and s[2][6]) or (s[0] == "trigger" and s[2][1].needs_snapshot)
                            or s[0] == "breakaway" for s in self.slots]
        # events evaluated on some designs alone need those designs' own system when they read the balance or
        # the component's parameters differ between designs (a pump's run time)
        varied = set(sysa._comp_changes) if all(p.section == "components" for p in sysa.params) else \
            set(sysa.parsed.kinds)
        self.own_system = [nd or (s[0] == "comp" and s[2][1] in varied) for s, nd in zip(self.slots, self.needs_drive)]

    def active(self, j: int, modes: np.ndarray, kin: np.ndarray, desc: np.ndarray, gpos: np.ndarray,
               armed: np.ndarray, due: np.ndarray, slide: np.ndarray) -> np.ndarray:
        kind, _, pl = self.slots[j]
        if kind == "comp":
            return pl[3][modes[pl[2]]]
        if kind == "trigger":
            return armed[pl[0]].copy()
        if kind == "due":
            return np.isfinite(due[pl[0]])
        if kind == "guide" or kind == "foot":
            return kin == GUIDE
        if kind == "rest":
            return ((kin == GUIDE) | (kin == TRACK)) & (slide == pl)
        if kind == "breakaway":
            return ((kin == GUIDE) | (kin == TRACK)) & (slide == 0.0)
        if kind == "apogee":
            return (kin == FREE) & ~desc & gpos
        return (kin == FREE) & gpos

    def value(self, j: int, sysa: ArraySystem, t: np.ndarray, Y: np.ndarray, aux: dict | None,
              rows: np.ndarray | None = None, due: np.ndarray | None = None) -> np.ndarray:
        """Event ``j`` at states ``Y`` of the designs of ``sysa`` (or of its designs ``rows``); ``aux`` carries
        the drives and the phase of the balance (events that read it), ``due`` when the trigger actions are due."""
        kind, _, pl = self.slots[j]
        r = slice(None) if rows is None else rows
        if kind == "comp":
            k, comp = pl[0], pl[1]
            drive = aux["drive"].get(comp, 0.0) if (pl[6] and aux is not None) else 0.0
            return np.array(np.broadcast_to(np.asarray(sysa.events[k][1].fn(t, list(Y), drive), dtype=float), t.shape))
        if kind == "trigger":
            tr = pl[1]
            x0 = tuple(c[r] for c in sysa.x0)
            phase = aux["phase"] if tr.needs_snapshot else None
            g = condition(tr, t, list(Y), x0, lambda tt, ss: sysa.snapshot(tt, ss, phase), array_ops)
            return np.array(np.broadcast_to(np.asarray(g, dtype=float), t.shape))
        if kind == "due":
            return t - due[pl[0]][r]
        if kind == "breakaway":        # the balance's margin (evaluated here inside a step, where aux has none)
            got = aux["breakaway"] if "breakaway" in aux else sysa.evaluate(t, Y, aux["phase"])[1]["breakaway"]
            return np.array(np.broadcast_to(np.asarray(got, dtype=float), t.shape))
        if kind in ("guide", "foot", "rest"):
            u = [c[r] for c in sysa.u]
            if kind == "rest":          # the speed along the guide or track (the slot watches designs sliding pl)
                return np.array(rest_value(Y[3] * u[0] + Y[4] * u[1] + Y[5] * u[2], pl))
            x0 = [c[r] for c in sysa.x0]
            along = (Y[0] - x0[0]) * u[0] + (Y[1] - x0[1]) * u[1] + (Y[2] - x0[2]) * u[2]
            if kind == "foot":
                return np.array(along + 1e-9)
            # 1 nm beyond the guide's end, so that a zero-length guide (a pad) holds the vehicle until it moves
            return np.array(along - (sysa.guide_length[r] + 1e-9))
        if kind == "apogee":
            return Y[5].copy()
        return Y[2].copy()


def _norm(x: np.ndarray) -> np.ndarray:
    """RMS over the states (first axis), per design."""
    return np.sqrt(_rowsum(x * x) / len(x))


def _dense(Y0: np.ndarray, h: np.ndarray, Q: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """State on the step's dense output at fraction ``theta`` (per design)."""
    th = theta   # Horner's rule: no powers (a float power costs 5-30 times a multiplication here)
    return Y0 + h * (th * (Q[:, 0] + th * (Q[:, 1] + th * (Q[:, 2] + th * Q[:, 3]))))


def _screen_designs(parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, status: list[str],
                    notes: list[str]) -> np.ndarray:
    """Designs outside their bounds, or combinations a component kind refuses, are screened out here."""
    N = len(x)
    good = np.ones(N, dtype=bool)
    for j, p in enumerate(params):
        ok = within_bounds(p, x[:, j])
        for i in np.flatnonzero(good & ~ok):
            status[i] = STATUS_SCREENED
            notes[i] = f"{p.path} = {p.text(x[i, j])} is outside its bounds ({bounds_text(p)})"
        good &= ok

    # the component kinds' checks and the environment kinds' (still air refuses a density its temperature
    # contradicts), as a single flight's apply() runs them
    owners = [("components", o) for o in sorted({p.owner for p in params if p.section == "components"})]
    owners += [("environment", o) for o in sorted({p.owner for p in params if p.section == "environment"})]
    for section, owner in owners:
        cls = parsed.kinds[owner] if section == "components" else parsed.env_kinds[owner]
        if getattr(cls.check, "__func__", None) is getattr(ComponentKind.check, "__func__", None):
            continue   # the kind checks nothing
        cols = [(p.name, j) for j, p in enumerate(params) if p.section == section and p.owner == owner]
        base = parsed.params[owner] if section == "components" else parsed.env_params[owner]
        live = np.flatnonzero(good)
        # one check per distinct row of the owner's values (a grid repeats them)
        uniq, inverse = np.unique(x[np.ix_(live, [j for _, j in cols])], axis=0, return_inverse=True)
        for u, row in enumerate(uniq):
            try:
                cls.check(with_values(base, {nm: float(v) for (nm, _), v in zip(cols, row)}), f"{section}.{owner}")
            except ModelError as exc:
                for i in live[inverse.reshape(-1) == u]:
                    status[i], notes[i] = STATUS_SCREENED, screened_note(exc)
                    good[i] = False
    # the launch's static friction against its sliding friction, as apply() checks it
    col = {p.name: j for j, p in enumerate(params) if p.section == "launch"}
    if "friction" in col or "static_friction" in col:
        L = parsed.launch
        fr = x[:, col["friction"]] if "friction" in col else np.full(N, L.friction)
        st = x[:, col["static_friction"]] if "static_friction" in col else \
            (fr if L.static_friction is None else np.full(N, L.static_friction))
        for i in np.flatnonzero(good & (st < fr)):
            try:
                check_static_friction(fr[i], st[i])
            except ModelError as exc:
                status[i], notes[i] = STATUS_SCREENED, screened_note(exc)
                good[i] = False
    return good


def _screen_launch_speed(parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, good: np.ndarray,
                         status: list[str], notes: list[str]) -> None:
    """Designs a single flight refuses at its start for their launch speed (one on a test stand) are screened."""
    if parsed.launch.mount != "held":
        return
    col = [j for j, p in enumerate(params) if p.path == "launch.speed"]
    speeds = x[:, col[0]] if col else np.full(len(x), float(parsed.launch.speed))
    for i in np.flatnonzero(good & (speeds != 0.0)):
        try:
            check_launch_speed(dataclasses.replace(parsed.launch, speed=float(speeds[i])))
        except ModelError as exc:
            status[i], notes[i] = STATUS_SCREENED, screened_note(exc)
            good[i] = False


class _Buffers:
    """Preallocated stage arrays, so the stage combinations make no temporaries."""

    def __init__(self, ns: int, n: int, nctrl: int) -> None:
        self.K = np.empty((7, ns, n))
        self.Ys = np.empty((ns, n))
        self.Yn = np.empty((ns, n))
        # the numpy kernel's scratch arrays for the error norm (every row controls the step)
        assert nctrl == ns
        self.err = np.empty((nctrl, n))
        self.tmp = np.empty((nctrl, n))
        self.tmp2 = np.empty((nctrl, n))


def fly_designs(parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray,
                outputs: Sequence[str] | None = None, *, rtol: float | None = None, atol: float | None = None,
                max_steps: int = 20000, compact: float = 0.5, progress=None) -> EnsembleResult:
    """Fly N designs as one vectorised ensemble and return their summary rows.

    Parameters
    ----------
    parsed : the base model (its family must be supported: :func:`unsupported` returns None)
    params : the varied parameters; ``x`` their SI values, shape (N, parameters)
    outputs : registry outcome keys (default: :data:`COMPUTED`, ``dropped_mass`` only for a model with stages;
        any other is NaN)
    rtol, atol : tolerances (default: the model's ``[run]`` values; the same meaning as for solve_ivp)
    max_steps : step budget per design (attempted steps); a design that exceeds it is screened out
    compact : shrink the arrays when fewer than this fraction of the designs are still flying
    progress : called now and then with the number of designs finished (flown or screened)

    A design whose flight fails on the way (a line that can no longer pass its flow: the balance raises
    :class:`~thrustgraph.base.errors.IntegrationError` for the whole batch) is screened with the message its single
    flight gives (:func:`thrustgraph.studies.studyflight.fly_design`); the batch is flown again in halves until
    the failing designs are alone, and every other design's numbers are those of any batch (each design's steps
    depend on its own rows only).
    """
    t_start = time.perf_counter()
    stepkernel.ready()
    why = unsupported(parsed)
    if why:
        raise ModelError("ensemble", f"the vectorised ensemble cannot fly this model: {why}",
                         "fly it with single flights (--flights single)")
    keep_heap()
    if outputs is None:
        outputs = [k for k in COMPUTED if k != "dropped_mass" or parsed.stages]
    outputs = tuple(check_outputs(outputs))
    x = np.asarray(x, dtype=float).reshape(-1, len(params))
    shown = [0]

    def told(k: int) -> None:             # designs finished, never fewer than already shown (a batch flown again)
        if k > shown[0]:
            shown[0] = k
            progress(k)

    res = _fly_halving(parsed, params, x, outputs, rtol, atol, max_steps, compact,
                       None if progress is None else told, 0)
    return dataclasses.replace(res, seconds=time.perf_counter() - t_start)


def _fly_halving(parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, outputs: tuple[str, ...],
                 rtol: float | None, atol: float | None, max_steps: int, compact: float, progress, before: int
                 ) -> EnsembleResult:
    """:func:`_fly_batch`; a batch that a design's failure stops is flown again in halves (``before``: the
    designs of the whole ensemble ahead of this batch, for ``progress``)."""
    try:
        return _fly_batch(parsed, params, x, outputs, rtol, atol, max_steps, compact,
                          None if progress is None else (lambda k: progress(before + k)))
    except IntegrationError as exc:
        if len(x) == 1:
            out = np.full((1, len(outputs)), np.nan)
            return EnsembleResult([STATUS_SCREENED], [screened_note(exc)], out, outputs,
                                  np.zeros(1, dtype=np.int64), 0, 0.0, {st: np.full(1, np.nan) for st in parsed.stages})
    half = len(x) // 2
    a = _fly_halving(parsed, params, x[:half], outputs, rtol, atol, max_steps, compact, progress, before)
    b = _fly_halving(parsed, params, x[half:], outputs, rtol, atol, max_steps, compact, progress, before + half)
    return EnsembleResult(a.status + b.status, a.notes + b.notes, np.concatenate([a.values, b.values]), outputs,
                          np.concatenate([a.steps, b.steps]), a.rhs_calls + b.rhs_calls, 0.0,
                          {st: np.concatenate([a.separations[st], b.separations[st]]) for st in a.separations})


def _fly_batch(parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, outputs: tuple[str, ...],
               rtol: float | None, atol: float | None, max_steps: int, compact: float, progress) -> EnsembleResult:
    """One vectorised batch of :func:`fly_designs` (its arguments, checked)."""
    t_start = time.perf_counter()
    N = len(x)
    rtol = float(parsed.run.rtol if rtol is None else rtol)
    atol = float(parsed.run.atol if atol is None else atol)
    t_end = float(parsed.run.end_time)
    stop_at_apogee = bool(parsed.run.stop_at_apogee)
    status = [STATUS_OK] * N
    notes = [""] * N
    out = {k: np.full(N, np.nan) for k in OUTCOMES}
    steps_taken = np.zeros(N, dtype=np.int64)
    good = _screen_designs(parsed, params, x, status, notes)
    _screen_launch_speed(parsed, params, x, good, status, notes)
    gid = np.flatnonzero(good)
    seps = {st: np.full(N, np.nan) for st in parsed.stages}
    if len(gid) == 0:
        return EnsembleResult(status, notes, _table(out, outputs), outputs, steps_taken, 0,
                              time.perf_counter() - t_start, seps)
    triggers = _resolved_triggers(parsed)
    calls = 0
    finished = N - len(gid)
    with np.errstate(all="ignore"):
        # the designs fly vehicle by vehicle: first the whole vehicle, then, for each set of dropped stages,
        # every design that reached it (from its own separation time and state). A design only ever drops
        # more stages, so each set is flown once, after every set it can come from; each design's numbers
        # depend only on its own rows, so flying it in one batch or the next changes nothing.
        models = {frozenset(): parsed}
        waiting: dict[frozenset, list[dict]] = {frozenset(): []}
        while waiting:
            key = min(waiting, key=len)
            arrivals = waiting.pop(key)
            pc = models[key]
            cols = [j for j, p in enumerate(params) if p.section != "components" or p.owner in pc.params]
            run = _Run(pc, [params[j] for j in cols], x[:, cols], gid if not key else None, rtol, atol, t_end,
                       stop_at_apogee, max_steps, compact, out, steps_taken, triggers=triggers,
                       staged=bool(parsed.stages), seps=seps, arrivals=arrivals or None)
            run.fly(None if progress is None else (lambda k, f=finished: progress(f + k)))
            calls += run.calls
            finished += len(run.done_gid)
            for i, g in enumerate(run.done_gid):
                status[g], notes[g] = run.done_status[i], run.done_note[i]
            for stage, data in run.handoffs:
                nxt = key | {stage}
                if nxt not in models:
                    models[nxt] = stage_models(pc, parsed.stages[stage])[0]
                waiting.setdefault(nxt, []).append(data)
    for i in range(N):
        if status[i] != STATUS_OK:
            for k in out:
                out[k][i] = np.nan
            for v in seps.values():
                v[i] = np.nan
    # an outcome that does not apply to the vehicle (no apogee on a track, no speed on a stand) is NaN, as in
    # a single flight: the registry's own predicate, asked of each design's vehicle profile
    _mask_by_vehicle(out, parsed, params, x)
    return EnsembleResult(status, notes, _table(out, outputs), outputs, steps_taken, calls,
                          time.perf_counter() - t_start, seps)


def _resolved_triggers(parsed: ParsedModel) -> tuple[Trigger, ...]:
    """The model's triggers with their thresholds in SI, resolved against the whole vehicle's signals (as a
    single flight resolves them when it starts)."""
    if not parsed.triggers:
        return ()
    return resolve_thresholds(parsed.triggers, available_signals(assemble(parsed)))


def _mask_by_vehicle(out: dict[str, np.ndarray], parsed: ParsedModel, params: Sequence[DesignParameter],
                     x: np.ndarray) -> None:
    """NaN for every outcome that does not apply to a design's vehicle (the registry's ``applies``, read from the
    :class:`~thrustgraph.kinds.vehicle.VehicleProfile` of the design: a varied guide length or gravity may change it)."""
    shaping = [j for j, p in enumerate(params) if p.section == "launch" or
               (p.section == "environment" and p.owner == "gravity")]
    if not shaping:
        groups = {vehicle_profile(parsed): np.arange(len(x))}
    else:
        groups = {}
        for i in range(len(x)):
            launch = {params[j].name: float(x[i, j]) for j in shaping if params[j].section == "launch"}
            grav = {params[j].name: float(x[i, j]) for j in shaping if params[j].section == "environment"}
            view = with_values(parsed, {
                "launch": with_values(parsed.launch, launch) if launch else parsed.launch,
                "env_params": {**parsed.env_params, "gravity": with_values(parsed.env_params["gravity"], grav)}
                if grav else parsed.env_params})
            groups.setdefault(vehicle_profile(view), []).append(i)
    for profile, rows in groups.items():
        for k, spec in OUTCOMES.items():
            if not spec.applies(profile):
                out[k][np.asarray(rows, dtype=int)] = np.nan


class _Run:
    """The integration of one ensemble: per-design arrays, stepping, events, trackers, compaction."""

    def __init__(self, parsed, params, x, gid, rtol, atol, t_end, stop_at_apogee, max_steps, compact, out,
                 steps_taken, *, triggers=(), staged=False, seps=None, arrivals=None) -> None:
        self.parsed, self.params, self.x = parsed, params, x
        self.rtol, self.atol, self.t_end = rtol, atol, t_end
        self.stop_at_apogee, self.max_steps, self.compact_at = stop_at_apogee, max_steps, compact
        self.out, self.steps_taken = out, steps_taken
        self.triggers, self.staged, self.seps = tuple(triggers), staged, seps
        self.calls = 0
        self.done_gid: list[int] = []
        self.done_status: list[str] = []
        self.done_note: list[str] = []
        self.handoffs: list[tuple[str, dict]] = []   # (stage, the designs that separated it, as they were)
        self.leaving: list[tuple[np.ndarray, str]] = []
        if arrivals:
            gid = np.concatenate([a["gid"] for a in arrivals])
        sysa = self.sysa = ArraySystem(parsed, params, x[gid])
        n = self.n = sysa.n
        self.gid = gid.copy()
        self.ns = ns = len(sysa.state_names)
        # the kernel's event arrays of a step that no event cuts
        self._no_event = (np.empty((ns, 0)), np.empty((ns, 0)), np.empty(0), np.empty((ns, 4, 0)))
        # every row controls the step, the impulse quadrature (last row) too: where the thrust changes with time
        # at constant states (a hose feed's pressure ramp on a platform at rest) the states alone let the steps
        # grow to tens of seconds and the impulse was 8e-4 short (a hover rig through a 126 s ramp)
        self.nctrl = ns
        assert sysa.index(IMPULSE) == ns - 1
        self.ev = _Events(sysa, self.triggers)
        self.nev = len(self.ev.slots)
        self.j_apogee = [k for k, sl in enumerate(self.ev.slots) if sl[0] == "apogee"][0]
        nt = len(self.triggers)
        if arrivals:
            self._arrive(arrivals)
        else:
            self.Y = sysa.y0.copy()
            self.t = np.zeros(n)
            self.modes = sysa.mode0.copy()
            self.kin = sysa.kin0.copy()
            self.desc = np.zeros(n, dtype=bool)
            self.armed = np.ones((nt, n), dtype=bool)       # every trigger watches its condition from launch
            self.due = np.full((nt, n), np.nan)             # when a met trigger's delayed action is due
            self.dropped = np.zeros(n)
            self.t_first = np.zeros(n)
            self.x_first = np.array([np.broadcast_to(c, (n,)) for c in sysa.x0], dtype=float)
        self.gpos = np.broadcast_to(np.asarray(sysa.gravity(sysa.x0[2]), dtype=float) > 0.0, (n,)).copy()
        self.slide = np.zeros(n)
        self.moving = np.zeros(n, dtype=bool)    # the break-away event has just found the design moving off
        self.set_slide(np.arange(n))
        self.F, aux = sysa.rhs(self.t, self.Y, self.modes, self.kin, slide=self.slide)
        self.calls += 1
        p0 = sysa.pressures(self.Y, self.modes)
        self.has_p = p0 is not None
        p0 = np.full(n, np.nan) if p0 is None else np.broadcast_to(p0, (n,)).copy()
        speed = np.sqrt(self.Y[3] ** 2 + self.Y[4] ** 2 + self.Y[5] ** 2)
        accel = np.broadcast_to(np.asarray(aux["accel"], dtype=float), (n,)).copy()
        if arrivals:
            # the running maxima carry on over the separation (the new vehicle's first state counts too)
            self.dropped += self.m_before - sysa.masses(self.Y)
            self.peak_p = np.fmax(self.peak_p, p0)
            self.zmax = np.maximum(self.zmax, self.Y[2])
            self.vmax = np.maximum(self.vmax, speed)
            self.amax = np.maximum(self.amax, accel)
        else:
            out["launch_mass"][gid] = np.broadcast_to(aux["mass"], (n,))
            self.peak_p = p0
            self.zmax = self.Y[2].copy()
            self.vmax = speed
            self.amax = accel
            self.burn = np.zeros(n)
            self.apogee = np.full(n, np.nan)
            self.exit_speed = np.full(n, np.nan)
            self.impact_speed = np.full(n, np.nan)
        self.live = np.ones(n, dtype=bool)
        self.fate = [""] * n
        self.fate_status = [STATUS_OK] * n
        self.gold = self.g_all(sysa, self.t, self.Y, aux)
        self.rejected = np.zeros(n, dtype=bool)
        self.buf = _Buffers(ns, n, self.nctrl)
        self.groups = PhaseGroups()
        everyone = np.arange(n)
        self.fire_at_once(everyone, fresh=not arrivals)
        self.phase_checks(everyone)
        self.h = self.initial_step()

    # --- helpers ------------------------------------------------------------------------------------------
    _PER_DESIGN = ("gid", "t", "h", "kin", "desc", "gpos", "slide", "moving", "zmax", "vmax", "amax", "burn",
                   "apogee", "exit_speed", "impact_speed", "peak_p", "live", "rejected", "dropped", "t_first")
    #: per-design arrays carried over a separation (the designs' columns; the way a design slides is found anew
    #: when the next vehicle starts, as a single flight's segment starts)
    _CARRIED = ("t", "kin", "desc", "zmax", "vmax", "amax", "burn", "apogee", "exit_speed", "impact_speed", "peak_p",
                "dropped", "t_first")
    #: per-design arrays with a row per trigger or per coordinate (columns are designs)
    _PER_DESIGN_2D = ("armed", "due", "x_first")

    def g_all(self, sys_, tt, YY, aux, idx=None):
        due = self.due if idx is None else self.due[:, idx]
        return [self.ev.value(j, sys_, tt, YY, aux, due=due) for j in range(self.nev)]

    def _arrive(self, arrivals: list[dict]) -> None:
        """Start from the designs that separated a stage of the vehicle before: their states and modes carried
        over by name (:func:`thrustgraph.flight.separation.carry`, as a single flight's separation), trackers and
        trigger states as they were."""
        sysa = self.sysa
        Ys, ms = [], []
        c0 = 0
        for a in arrivals:
            cols = slice(c0, c0 + len(a["gid"]))
            c0 += len(a["gid"])
            y, md = carry(a["names"], a["moded"], a["Y"], list(a["modes"]), sysa.state_names, sysa.moded,
                          list(sysa.mode0[:, cols]))
            Ys.append(y)
            ms.append(np.array(md, dtype=np.int8).reshape(len(sysa.moded), -1))
        self.Y = np.ascontiguousarray(np.concatenate(Ys, axis=1))
        self.modes = np.concatenate(ms, axis=1)
        for name in self._CARRIED + self._PER_DESIGN_2D + ("m_before",):
            setattr(self, name, np.concatenate([a[name] for a in arrivals], axis=-1))

    def capture(self) -> None:
        """The designs that separated a stage in this step leave this vehicle: keep what the next one needs."""
        for rows, stage in self.leaving:
            data = {name: getattr(self, name)[..., rows].copy() for name in self._CARRIED + self._PER_DESIGN_2D}
            data.update(gid=self.gid[rows].copy(), Y=self.Y[:, rows].copy(), modes=self.modes[:, rows].copy(),
                        names=self.sysa.state_names, moded=tuple(self.sysa.moded),
                        m_before=self.sysa.masses(self.Y)[rows])
            self.seps[stage][self.gid[rows]] = self.t[rows]
            self.handoffs.append((stage, data))
        self.leaving = []

    def trigger_met(self, rows: np.ndarray, k: int) -> None:
        """Trigger ``k``'s condition is met for designs ``rows``: it acts now, or after its delay."""
        tr = self.triggers[k]
        self.armed[k, rows] = False
        if tr.delay > 0.0:
            self.due[k, rows] = self.t[rows] + tr.delay
        else:
            self.act(rows, k)

    def act(self, rows: np.ndarray, k: int) -> None:
        """Trigger ``k`` acts for designs ``rows`` (the actions of a single flight's triggers)."""
        tr = self.triggers[k]
        self.due[k, rows] = np.nan
        if tr.action == "stop":
            self.finish(rows, STATUS_OK, f"stopped by trigger {tr.name!r}")
        elif tr.action == "switch":
            if tr.component in self.sysa.slot:      # else the component left with a dropped stage: ignored
                names = [m.name for m in self.sysa.modes[tr.component]]
                self.modes[self.sysa.slot[tr.component], rows] = names.index(tr.mode)
        else:
            rows = rows[self.live[rows]]
            self.finish(rows, _SEPARATED, tr.stage)
            self.leaving.append((rows, tr.stage))

    def finish(self, idx, st: str, note: str) -> None:
        for i in np.atleast_1d(idx):
            if self.live[i]:
                self.live[i] = False
                self.fate_status[i], self.fate[i] = st, note

    def fire_at_once(self, idx: np.ndarray, fresh: bool = False) -> None:
        """Events already past their zero at a phase start fire at once (as in a single flight), then a lift-off
        from a pad that the balance already lifts (:meth:`lifts_off_pad`). ``fresh``: the
        start of the flight, whose first phase lasts no time where an event fires at once: a single flight's
        first segment starts in the phase after it, so that phase's acceleration does not count toward the peak."""
        ev = self.ev
        changed = np.zeros(len(idx), dtype=bool)
        for _ in range(50):
            fired = False
            now = np.zeros(len(idx), dtype=bool)
            for j, (kind, direction, pl) in enumerate(ev.slots):
                if kind not in ("comp", "trigger", "due"):
                    continue
                act = ev.active(j, self.modes[:, idx], self.kin[idx], self.desc[idx], self.gpos[idx],
                                self.armed[:, idx], self.due[:, idx], self.slide[idx]) & self.live[idx]
                past = act & (direction * self.gold[j][idx] > 0.0)
                if np.any(past):
                    sel = idx[past]
                    changed |= past
                    now |= past
                    if kind == "trigger":
                        self.trigger_met(sel, pl[0])
                    elif kind == "due":
                        self.act(sel, pl[0])
                    elif pl[4] >= 0:
                        self.modes[pl[2], sel] = pl[4]
                    else:
                        self.finish(sel, STATUS_OK, pl[5])
                    fired = True
            lift = self.lifts_off_pad(idx) & ~now     # once nothing else fires at once (a single flight's order)
            if np.any(lift):
                sel = idx[lift]
                self.kin[sel] = FREE
                self.exit_speed[sel] = np.sqrt(_rowsum(self.Y[3:6, sel] ** 2))
                changed |= lift
                fired = True
            self.capture()
            if not fired:
                return
            self.set_slide(idx)      # a new phase: the way it slides anew (at rest it depends on the modes)
            sub = self.sysa.subset(idx)
            Fi, ai = sub.rhs(self.t[idx], self.Y[:, idx], self.modes[:, idx], self.kin[idx], slide=self.slide[idx])
            self.calls += 1
            self.F[:, idx] = Fi
            # the new phase's first acceleration counts toward the peak (a valve open from the start)
            a_new = np.broadcast_to(np.asarray(ai["accel"], dtype=float), (len(idx),))
            self.amax[idx] = np.where(changed, a_new, np.maximum(self.amax[idx], a_new)) if fresh else \
                np.maximum(self.amax[idx], a_new)
            gi = self.g_all(sub, self.t[idx], self.Y[:, idx], ai, idx)
            for j in range(self.nev):
                self.gold[j][idx] = gi[j]

    def lifts_off_pad(self, idx: np.ndarray) -> np.ndarray:
        """Per design of ``idx``: on a pad (a guide of length 0), at rest, and the balance moves it forward (the
        way it slides, :meth:`set_slide`): it lifts off now, at zero speed, as a single flight's segment start
        finds (:meth:`thrustgraph.flight.integrate._Flight._lifts_off_pad`)."""
        v_al, _ = self.along(idx)
        return (self.live[idx] & (self.kin[idx] == GUIDE) & (self.sysa.guide_length[idx] == 0.0)
                & (self.slide[idx] > 0.0) & (v_al == 0.0))

    def along(self, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Speed along the guide or track and distance along it from the launch point, of designs ``idx``."""
        Y, u, x0 = self.Y, self.sysa.u, self.sysa.x0
        v_al = Y[3, idx] * u[0][idx] + Y[4, idx] * u[1][idx] + Y[5, idx] * u[2][idx]
        s_al = ((Y[0, idx] - x0[0][idx]) * u[0][idx] + (Y[1, idx] - x0[1][idx]) * u[1][idx]
                + (Y[2, idx] - x0[2][idx]) * u[2][idx])
        return v_al, s_al

    def accel_along(self, idx: np.ndarray, slide: np.ndarray) -> np.ndarray:
        """The acceleration along the guide or track of designs ``idx`` in their current phase, sliding ``slide``
        (one evaluation of the balance)."""
        sub = self.sysa if len(idx) == self.n else self.sysa.subset(idx)
        d, _ = sub.rhs(self.t[idx], self.Y[:, idx], self.modes[:, idx], self.kin[idx], slide=slide, aux=False)
        self.calls += 1
        u = self.sysa.u
        return d[3] * u[0][idx] + d[4] * u[1][idx] + d[5] * u[2][idx]

    def set_slide(self, idx: np.ndarray) -> None:
        """The way designs ``idx`` slide along their guide or track in the phase they start (as a single flight's
        segment starts): the sign of the speed along it, or at rest the way the balance (friction following
        the speed, static at rest) is about to move it (0 if friction holds it)."""
        if len(idx) == 0:
            return
        kin = self.kin[idx]
        on = (kin == GUIDE) | (kin == TRACK)
        way = np.zeros(len(idx))
        if on.any():
            v, _ = self.along(idx)
            rest = np.flatnonzero(on & (v == 0.0))
            if len(rest):
                v = v.copy()
                v[rest] = self.way_from_rest(idx[rest])
            way = np.where(on, np.sign(v), 0.0)
        self.slide[idx] = way

    def way_from_rest(self, idx: np.ndarray) -> np.ndarray:
        """The way designs ``idx``, at rest on a guide or track, move (+1, -1), or 0 where they stay: the way the
        pull along it points, if the pull outgrows what holds them at rest (the break-away margin is positive, or
        the break-away event has just found so: ``moving``) and sliding that way the balance accelerates them that
        way (as a single flight's
        :func:`thrustgraph.flight.integrate._way_from_rest`)."""
        sub = self.sysa if len(idx) == self.n else self.sysa.subset(idx)
        _, aux = sub.rhs(self.t[idx], self.Y[:, idx], self.modes[:, idx], self.kin[idx], slide=np.zeros(len(idx)))
        self.calls += 1
        m = len(idx)
        way = np.sign(np.broadcast_to(np.asarray(aux["pull"], dtype=float), (m,)))
        held = ~(np.broadcast_to(np.asarray(aux["breakaway"], dtype=float), (m,)) > 0.0) & ~self.moving[idx]
        way = np.where(held, 0.0, way)
        return np.where(way * self.accel_along(idx, way) > 0.0, way, 0.0)

    def waiting(self, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per design of ``idx``: a trigger's delayed action is due later (pending), and that or a trigger still
        watching its condition (waits)."""
        pending = np.any(np.isfinite(self.due[:, idx]), axis=0)
        return pending, pending | np.any(self.armed[:, idx], axis=0)

    def phase_checks(self, idx: np.ndarray) -> None:
        """What a single flight checks before each segment: a stand whose propulsion is spent ends the run, and
        so does a vehicle at rest on a track with nothing to push it (unless a trigger's action is pending); one
        that never left its guide is screened (unless a trigger still watches or waits)."""
        idx = idx[self.live[idx]]
        if len(idx) == 0:
            return
        prop = self.sysa.propulsive(self.modes[:, idx])
        kin = self.kin[idx]
        v_al, s_al = self.along(idx)
        pending, waits = self.waiting(idx)
        self.finish(idx[(kin == HELD) & ~prop & ~pending], STATUS_OK, "propulsion spent on the stand")
        still = np.flatnonzero((kin == TRACK) & ~prop & (v_al == 0.0) & ~pending)
        if len(still):
            F = self.F[3:6, idx[still]]
            self.finish(idx[still][np.all(F == 0.0, axis=0)], STATUS_OK, "at rest on the track")
        stuck = (kin == GUIDE) & ~prop & (v_al <= 0.0) & (s_al <= 1e-12) & ~waits
        self.finish(idx[stuck], STATUS_SCREENED, "no lift-off: the thrust never exceeded the weight along the guide")

    def initial_step(self, idx: np.ndarray | None = None, sub: ArraySystem | None = None) -> np.ndarray:
        """Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4 (as scipy's select_initial_step), per design: for
        every design at the start, and for designs ``idx`` (``sub`` their system) after a phase switch, where a
        single flight starts a new segment with a step of its own."""
        if idx is None:
            idx, sub = np.arange(self.n), self.sysa
        Y, F, t, c = self.Y[:, idx], self.F[:, idx], self.t[idx], self.nctrl
        left = np.maximum(self.t_end - t, 0.0)
        sc = self.atol + np.abs(Y) * self.rtol
        d0 = _norm((Y / sc)[:c])
        d1 = _norm((F / sc)[:c])
        h0 = np.where((d0 < 1e-5) | (d1 < 1e-5), 1e-6, 0.01 * d0 / np.where(d1 > 0, d1, 1.0))
        h0 = np.minimum(h0, left)
        F1, _ = sub.rhs(t + h0, Y + h0 * F, self.modes[:, idx], self.kin[idx], slide=self.slide[idx])
        self.calls += 1
        d2 = _norm(((F1 - F) / sc)[:c]) / np.where(h0 > 0.0, h0, 1.0)
        h1 = np.where((d1 <= 1e-15) & (d2 <= 1e-15), np.maximum(1e-6, h0 * 1e-3),
                      (0.01 / np.maximum(np.maximum(d1, d2), 1e-300)) ** (1.0 / 5.0))
        return np.minimum(np.minimum(100 * h0, h1), left)

    def compact(self) -> None:
        """Drop the finished designs from every array."""
        keep = np.flatnonzero(self.live)
        self.done(np.flatnonzero(~self.live))
        self.sysa = self.sysa.subset(keep)
        for name in self._PER_DESIGN:
            setattr(self, name, getattr(self, name)[keep])
        for name in self._PER_DESIGN_2D:
            setattr(self, name, getattr(self, name)[:, keep])
        # row-major copies: the state array and the step's buffers trade places (see step)
        self.Y, self.F = np.ascontiguousarray(self.Y[:, keep]), np.ascontiguousarray(self.F[:, keep])
        self.modes = self.modes[:, keep]
        self.gold = [g[keep] for g in self.gold]
        self.fate = [self.fate[i] for i in keep]
        self.fate_status = [self.fate_status[i] for i in keep]
        self.n = len(keep)
        self.buf = _Buffers(self.ns, self.n, self.nctrl)

    def done(self, idx: np.ndarray) -> None:
        """Designs ``idx`` (current slots) have finished: their outcomes, status and note (those that separated a
        stage fly on as the next vehicle: not done)."""
        idx = np.array([i for i in idx if self.fate_status[i] != _SEPARATED], dtype=np.intp)
        self.store(idx)
        for i in idx:
            self.done_gid.append(int(self.gid[i]))
            self.done_status.append(self.fate_status[i])
            self.done_note.append(self.fate[i])

    def store(self, idx: np.ndarray) -> None:
        """Write the outcomes of designs ``idx`` (current slots) into the global rows."""
        if len(idx) == 0:
            return
        out, sysa, Y = self.out, self.sysa, self.Y
        g = self.gid[idx]
        out["flight_time"][g] = self.t[idx] - self.t_first[idx]
        out["run_time"][g] = self.t[idx] - self.t_first[idx]
        out["impact_x"][g] = Y[0, idx] - self.x_first[0, idx]
        out["impact_y"][g] = Y[1, idx] - self.x_first[1, idx]
        out["range"][g] = np.hypot(out["impact_x"][g], out["impact_y"][g])
        ap = self.apogee[idx]
        # an apogee is an outcome of flights under gravity (the registry's applies): NaN without it
        out["apogee"][g] = np.where(self.gpos[idx], np.where(np.isfinite(ap), np.maximum(ap, self.zmax[idx]),
                                                             self.zmax[idx]), np.nan)
        out["max_speed"][g] = self.vmax[idx]
        out["top_speed"][g] = self.vmax[idx]            # the largest speed, of a vehicle on a track
        d = [Y[c, idx] - self.x_first[c, idx] for c in range(3)]
        out["distance"][g] = d[0] * sysa.u[0][idx] + d[1] * sysa.u[1][idx] + d[2] * sysa.u[2][idx]
        out["peak_acceleration"][g] = self.amax[idx]
        out["total_impulse"][g] = Y[-1, idx]
        out["burn_time"][g] = self.burn[idx]
        out["powered_time"][g] = self.burn[idx]         # the same time, of a vehicle fed from outside
        M = np.broadcast_to(sysa.masses(Y), (self.n,))
        out["propellant_expelled"][g] = out["launch_mass"][g] - M[idx] - self.dropped[idx]
        out["dropped_mass"][g] = self.dropped[idx] if self.staged else np.nan
        out["peak_vessel_pressure"][g] = self.peak_p[idx]
        out["guide_exit_speed"][g] = self.exit_speed[idx]
        out["impact_speed"][g] = self.impact_speed[idx]

    # --- the loop -----------------------------------------------------------------------------------------
    def fly(self, progress=None, screened_before: int = 0) -> None:
        it = 0
        while np.any(self.live):
            if self.live.sum() < self.compact_at * self.n and self.n > 16:
                self.compact()
            self.step()
            it += 1
            if progress is not None and it % 8 == 0:
                ended = sum(1 for i in np.flatnonzero(~self.live) if self.fate_status[i] != _SEPARATED)
                progress(len(self.done_gid) + ended + screened_before)
        self.done(np.arange(self.n))

    def step(self) -> None:
        sysa, buf, ev, nev = self.sysa, self.buf, self.ev, self.nev
        Y, F, t, modes, kin, live = self.Y, self.F, self.t, self.modes, self.kin, self.live
        n = self.n
        K = buf.K
        hh = np.where(live, np.minimum(self.h, self.t_end - t), 0.0)
        # one attempted step for every design, each with its own h
        K[0] = F
        ph = sysa.phase(modes, kin, self.slide)          # the stages share the phase
        groups = self.groups        # designs in different phases: evaluated phase by phase
        split = groups.split(sysa, modes, kin, self.slide)      # once: the stages share the phases
        for st in range(1, 6):
            Ys = stepkernel.combine(DOPRI_A[st], st, hh, Y, K, buf.Ys)
            groups.rhs(sysa, t + DOPRI_C[st] * hh, Ys, modes, kin, self.slide, out=K[st], aux=False, phase=ph,
                       groups=split)
        Yn = stepkernel.combine(DOPRI_B, 6, hh, Y, K, buf.Yn)
        _, aux_n = groups.rhs(sysa, t + hh, Yn, modes, kin, self.slide, out=K[6], phase=ph, drives=False,
                              groups=split)
        self.calls += 6
        # the error norm over the step-control rows (every row), the steps accepted or rejected, the next steps
        en = stepkernel.error_norm(K, hh, Y, Yn, self.rtol, self.atol, buf.err, buf.tmp, buf.tmp2)
        self.steps_taken[self.gid[live]] += 1
        acc, rej, h_next, self.rejected = stepkernel.step_control(en, hh, self.h, live, self.rejected)
        # screening: step budget, collapsed steps, singular head coupling
        budget = live & (self.steps_taken[self.gid] > self.max_steps)
        self.finish(np.flatnonzero(budget), STATUS_SCREENED,
                    f"step budget exhausted ({self.max_steps} steps): the design stalls")
        for i in np.flatnonzero(rej & (h_next < 10 * _EPS * np.maximum(np.abs(t), 1e-30))):
            self.finish(np.array([i]), STATUS_SCREENED,
                        f"integration failed: the step size collapsed at t = {t[i]:.6g} s")
        sing = acc & np.asarray(aux_n["singular"], dtype=bool)
        self.finish(np.flatnonzero(sing), STATUS_SCREENED,
                    "integration failed: the liquid head makes the acceleration undetermined (nozzle too large "
                    "for the vessel's bore)")
        acc &= live
        # events on the accepted steps. An event that no design watches now (a vessel's events once every
        # design has sealed it, guide exit once all are free) keeps its old values: a design starts watching
        # an event only at a phase switch, where all its event values are evaluated afresh
        acts = [acc & ev.active(j, modes, kin, self.desc, self.gpos, self.armed, self.due, self.slide)
                for j in range(nev)]
        gnew = [ev.value(j, sysa, t + hh, Yn, aux_n, due=self.due) if act.any() else self.gold[j]
                for j, act in enumerate(acts)]
        hit = []
        cross_any = np.zeros(n, dtype=bool)
        for j, (kind, direction, pl) in enumerate(ev.slots):
            act = acts[j]
            if gnew[j] is self.gold[j]:
                hit.append(act)
                continue
            cr = act & reached(self.gold[j], gnew[j], direction)     # crossed its zero in the step
            hit.append(cr)
            cross_any |= cr
        evi = np.flatnonzero(cross_any)
        theta_ev = np.full(n, np.inf)
        if len(evi):
            # dense-output coefficients (ns, 4, m): one 2-D pass over the gathered stages (a 3-D einsum was 3x slower)
            Ke = K[:, :, evi]
            Q = np.einsum("sp,sk->pk", DOPRI_P, Ke.reshape(7, -1)).reshape(4, self.ns, -1).transpose(1, 0, 2)
            need = any(ev.own_system[j] and np.any(hit[j][evi]) for j in range(nev))
            sub_e = sysa.subset(evi) if need else None
            thetas = np.full((nev, len(evi)), np.inf)
            for j in range(nev):
                sel = np.flatnonzero(hit[j][evi])
                if len(sel):
                    rows = evi[sel]
                    thetas[j, sel] = _locate(ev, j, sysa, sub_e, sel, rows, t, hh, Y, Q[:, :, sel],
                                             modes, kin, self.slide, self.gold[j][rows], gnew[j][rows], self.due)
            if not self.stop_at_apogee:
                # apogee switches nothing in the dynamics: it is recorded where it falls inside the step (on the
                # dense output, before any other event of the design in this step) and does not cut the step
                ja = self.j_apogee
                ta = thetas[ja].copy()
                thetas[ja] = np.inf
                passed = np.isfinite(ta) & (ta <= np.min(thetas, axis=0))
                if passed.any():
                    pr = evi[passed]
                    self.desc[pr] = True
                    self.apogee[pr] = _dense(Y[2:3, pr], hh[pr], Q[2:3, :, passed], ta[passed])[0]
                keep = np.isfinite(np.min(thetas, axis=0))
                if not keep.all():
                    evi, thetas, Q = evi[keep], thetas[:, keep], Q[:, :, keep]
                    if sub_e is not None:
                        sub_e = sub_e.subset(np.flatnonzero(keep))
        if len(evi):
            if sub_e is None:
                sub_e = sysa.subset(evi)
            th_min = np.min(thetas, axis=0)
            which = thetas == th_min[None, :]
            theta_ev[evi] = th_min
            Ye = _dense(Y[:, evi], hh[evi], Q, th_min)
            te = t[evi] + th_min * hh[evi]
            Fe, aux_e = sub_e.rhs(te, Ye, modes[:, evi], kin[evi], slide=self.slide[evi])  # the old phase there
            self.calls += 1
            # events that cross in this step and have reached their zero at the event point fire with it (a
            # signal that stops exactly at a trigger's threshold: integrate.reached, on both paths)
            for j, (_, direction, _) in enumerate(ev.slots):
                cand = hit[j][evi] & np.isfinite(thetas[j]) & ~which[j]
                if np.any(cand):
                    ge = ev.value(j, sub_e, te, Ye, aux_e, due=self.due[:, evi])
                    which[j] |= cand & reached(self.gold[j][evi], ge, direction)
        cut = np.isfinite(theta_ev)
        th_end = np.where(cut, theta_ev, 1.0)
        if np.any(acc):
            self.track(acc, th_end, Y, F, K, Yn, aux_n, hh, evi if len(evi) else None,
                       (Ye, Fe, aux_e, Q) if len(evi) else None, sub_e if len(evi) else None)
        # advance the accepted designs without an event: the new states become the state array (the old
        # one is the next step's buffer) and the few other designs' columns are copied back
        plain = acc & ~cut
        stay = np.flatnonzero(~plain)
        Yn[:, stay] = Y[:, stay]
        K[6][:, stay] = F[:, stay]
        self.Y, buf.Yn = Yn, Y
        Y = Yn
        np.copyto(F, K[6])
        t += hh * plain
        for j in range(nev):
            if gnew[j] is not self.gold[j]:
                gnew[j][stay] = self.gold[j][stay]
        self.gold = gnew
        # designs cut at an event: move to the event point and switch their phase
        if len(evi):
            t[evi] = te
            Y[:, evi] = Ye
            for j, (kind, direction, pl) in enumerate(ev.slots):
                sel = which[j]
                if not np.any(sel):
                    continue
                rows = evi[sel]
                if kind == "comp":
                    if pl[4] >= 0:
                        modes[pl[2], rows] = pl[4]
                    else:
                        self.finish(rows, STATUS_OK, pl[5])
                elif kind == "trigger":
                    self.trigger_met(rows, pl[0])
                elif kind == "due":
                    self.act(rows, pl[0])
                elif kind == "guide":
                    kin[rows] = FREE
                    self.exit_speed[rows] = np.sqrt(_rowsum(Y[3:6, rows] ** 2))
                elif kind == "foot":           # slid back down the guide: at rest at its foot
                    for c in range(3):
                        Y[c, rows] = sysa.x0[c][rows]
                    Y[3:6, rows] = 0.0
                elif kind == "rest":
                    Y[3:6, rows] = 0.0
                    # it stays at rest only if friction holds it (it does not move off at once), nothing pushes and
                    # no trigger still watches or waits
                    held = (self.way_from_rest(rows) == 0.0) & ~sysa.propulsive(modes[:, rows]) & \
                        ~self.waiting(rows)[1]
                    self.finish(rows[held], STATUS_OK, "came to rest on the track" if self.parsed.launch.mount ==
                                "track" else "came to rest on the launch guide")
                elif kind == "breakaway":
                    # it moves off: the way it slides is found as its next phase starts (set_slide), where the
                    # margin is ~0 (the event point), so the hold is known outgrown
                    self.moving[rows] = True
                elif kind == "apogee":
                    self.desc[rows] = True
                    self.apogee[rows] = Y[2, rows]
                    if self.stop_at_apogee:
                        self.finish(rows, STATUS_OK, "stopped at apogee")
                else:
                    self.impact_speed[rows] = np.sqrt(_rowsum(Y[3:6, rows] ** 2))
                    self.finish(rows, STATUS_OK, "")
            self.capture()
            keep_e = live[evi]
            cont = evi[keep_e]
            if len(cont):
                self.set_slide(cont)
                sub = sub_e if np.all(keep_e) else sub_e.subset(np.flatnonzero(keep_e))
                Fi, ai = sub.rhs(t[cont], Y[:, cont], modes[:, cont], kin[cont], slide=self.slide[cont])
                self.calls += 1
                F[:, cont] = Fi
                # the acceleration jumps at a phase switch (off the guide, a vessel sealed): the new phase's
                # first value counts toward the peak, as a single flight's segment start does
                self.amax[cont] = np.maximum(self.amax[cont], np.broadcast_to(np.asarray(ai["accel"], dtype=float),
                                                                              (len(cont),)))
                gi = self.g_all(sub, t[cont], Y[:, cont], ai, cont)
                for j in range(nev):
                    self.gold[j][cont] = gi[j]
                self.fire_at_once(cont)
                self.phase_checks(cont)
            self.moving[evi] = False
        over = live & (t >= self.t_end * (1 - 4 * _EPS))
        self.finish(np.flatnonzero(over), STATUS_OK, "end time reached")
        bad = live & ~np.all(np.isfinite(Y), axis=0)
        self.finish(np.flatnonzero(bad), STATUS_SCREENED, "integration failed: the state is not finite")
        self.h = np.where(acc | rej, h_next, self.h)
        if len(evi) and len(cont):
            # a phase switch starts the design afresh, as a single flight starts a new segment
            self.h[cont] = self.initial_step(cont, sub)
            self.rejected[cont] = False

    def track(self, acc, th_end, Y, F, K, Yn, aux_n, hh, evi, event, sub_e) -> None:
        """Running maxima (speed, acceleration, altitude, vessel pressure) and burn time over accepted steps.

        The kernel (:func:`thrustgraph.flight.stepkernel.maxima`) updates the maxima at the steps' ends and finds
        the steps with a maximum inside; those few are located here on the dense output.
        """
        sysa, n = self.sysa, self.n
        an = np.ascontiguousarray(np.broadcast_to(np.asarray(aux_n["accel"], dtype=float), (n,)))
        ev_pos = np.full(n, -1, dtype=np.intp)
        if evi is not None:
            Ye, Fe, aux_e, Qe = event
            ev_pos[evi] = np.arange(len(evi))
            ane = np.ascontiguousarray(np.broadcast_to(np.asarray(aux_e["accel"], dtype=float), (len(evi),)))
            Ye, Fe, Qe = np.ascontiguousarray(Ye), np.ascontiguousarray(Fe), np.ascontiguousarray(Qe)
        else:
            Ye, Fe, ane, Qe = self._no_event
        prop = sysa.propulsive(self.modes)
        zin, inner, ainner = stepkernel.maxima(acc, Y, F, K, Yn, an, ev_pos, Ye, Fe, ane, Qe, th_end, hh, prop,
                                               self.vmax, self.amax, self.zmax, self.burn)
        te = th_end
        # a height maximum inside the step (a hovering rig's bobbing after the first apogee): v_z goes from + to
        # -; located on the dense output as the apogee event is
        if np.any(zin):
            rows = np.flatnonzero(zin)
            q = np.einsum("sp,snm->pnm", DOPRI_P, K[:, 2:6:3, rows]).transpose(1, 0, 2)     # (z, v_z), 4, m
            te_r, h_r, Y0 = th_end[rows], hh[rows], Y[2:6:3, rows]
            v1z = Yn[5, rows]
            at_ev = ev_pos[rows] >= 0
            v1z[at_ev] = Ye[5, ev_pos[rows][at_ev]]
            phi = stepkernel.illinois_row(Y0[1], h_r, np.ascontiguousarray(q[1]), te_r, Y[5, rows], v1z,
                                          self.t[rows])
            self.zmax[rows] = np.maximum(self.zmax[rows], _dense(Y0[0:1], h_r, q[0:1], phi * te_r)[0])
        if np.any(inner) or np.any(ainner):
            rows = np.flatnonzero(inner | ainner)
            q = np.einsum("sp,snm->pnm", DOPRI_P[:, 1:4], K[:, 3:6, rows])
            Qv = np.empty((3, 4, len(rows)))
            Qv[:, 0] = F[3:6, rows]
            for c in range(3):
                Qv[:, c + 1] = q[c]
            if np.any(inner):
                sel = np.flatnonzero(inner[rows])          # positions in rows (both sorted)
                Qs, hv = Qv[:, :, sel], hh[rows[sel]]
                # v(theta) = v0 + h (q0 theta + q1 theta^2 + q2 theta^3 + q3 theta^4)
                C = np.concatenate([Y[3:6, rows[sel]][:, None, :], hv * Qs], axis=1)
                best = stepkernel.norm_max(C, te[rows[sel]])
                self.vmax[rows[sel]] = np.maximum(self.vmax[rows[sel]], best)
            if np.any(ainner):
                sel = np.flatnonzero(ainner[rows])
                # a(theta) = dv/dt = q0 + 2 q1 theta + 3 q2 theta^2 + 4 q3 theta^3
                C = Qv[:, :, sel] * np.array([1.0, 2.0, 3.0, 4.0])[None, :, None]
                best = stepkernel.norm_max(C, te[rows[sel]])
                self.amax[rows[sel]] = np.maximum(self.amax[rows[sel]], best)
        if self.has_p and not sysa.frozen(self.modes):   # frozen vessels keep their pressure
            pn = np.broadcast_to(sysa.pressures(Yn, self.modes), (n,)).copy()
            if evi is not None:
                pn[evi] = np.broadcast_to(sub_e.pressures(event[0], self.modes[:, evi]), (len(evi),))
            np.maximum(self.peak_p, pn, out=self.peak_p, where=acc)


def _table(out: dict[str, np.ndarray], outputs: Sequence[str]) -> np.ndarray:
    return np.column_stack([out[k] for k in outputs]) if outputs else np.zeros((len(next(iter(out.values()))), 0))


def _locate(ev: _Events, j: int, sysa: ArraySystem, sub: ArraySystem | None, sel: np.ndarray, rows: np.ndarray,
            t: np.ndarray, h: np.ndarray, Y: np.ndarray, Q: np.ndarray, modes: np.ndarray, kin: np.ndarray,
            slide: np.ndarray, ga: np.ndarray, gb: np.ndarray, due: np.ndarray) -> np.ndarray:
    """Fraction of the step at which event ``j`` crosses zero, per design (vectorised Illinois iteration)."""
    Y0, hh, t0 = Y[:, rows], h[rows], t[rows]
    need = ev.needs_drive[j]
    own = ev.own_system[j]
    if own:
        local = sub.subset(sel) if sub is not None and len(sel) != sub.n else sub
        m_loc, k_loc = modes[:, rows], kin[rows]
        ph_loc = local.phase(m_loc, k_loc, slide[rows])

    kind = ev.slots[j][0]
    if kind in ("guide", "foot", "rest") and not own:     # three rows of the dense output, no balance
        pl = ev.slots[j][2]
        r0 = 3 if kind == "rest" else 0
        u = np.array([np.broadcast_to(c, (sysa.n,))[rows] for c in sysa.u])
        x0 = np.array([np.broadcast_to(c, (sysa.n,))[rows] for c in sysa.x0])
        off = sysa.guide_length[rows] + 1e-9 if kind == "guide" else np.full(len(rows), -1e-9)
        return stepkernel.illinois_along(Y0[r0:r0 + 3], hh, Q[r0:r0 + 3], x0, u, off,
                                         pl if kind == "rest" else 0.0, kind == "rest", ga, gb, t0)
    if kind in ("apogee", "impact"):      # one state: only its row of the dense output
        r = 5 if kind == "apogee" else 2
        return stepkernel.illinois_row(Y0[r], hh, np.ascontiguousarray(Q[r]), np.ones(len(rows)),
                                       np.ascontiguousarray(ga, dtype=float), np.ascontiguousarray(gb, dtype=float),
                                       t0)

    def g(theta):
        yy = _dense(Y0, hh, Q, theta)
        tt = t0 + theta * hh
        if need:
            drive = local.drives(tt, yy, ph_loc) if kind == "comp" else {}
            return ev.value(j, local, tt, yy, {"drive": drive, "phase": ph_loc})
        if own:
            return ev.value(j, local, tt, yy, None)
        return ev.value(j, sysa, tt, yy, None, rows, due)

    return _illinois(g, ga, gb, t0, hh)
