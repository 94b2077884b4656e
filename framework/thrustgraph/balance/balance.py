"""The momentum balance of the vehicle as an accelerating control volume, written once for floats and arrays.

The vehicle is the control volume; its frame translates with acceleration ``a`` without rotating. With
uniform exit conditions at each opening the balance reads::

    M a = sum(F_surface) + sum(F_body)                     drag, weight, guide/stand reaction, friction
          + sum_k [ mdot_k v_e,k + (p_e,k - p_a) A_e,k ] t_k   thrust of each opening, t_k = -jet_k
          + sum_sources mdot v_in                           momentum of fluid entering (ram drag, hose inflow)
          - d/dt (integral of v_rel rho dV)                 internal momentum (when a vessel turns it on)

Liquid leaving a vessel is pushed by its ullage pressure and by the liquid head in the accelerating frame,
``p_out = p + rho h (f . d)`` with the apparent acceleration ``f = g - a`` and ``d`` the direction from the
liquid toward the outlet. The thrust depends on ``a`` through that head and ``a`` on the thrust, so the two
are solved together on every evaluation: a Newton iteration on ``a`` whose Jacobian
``M I + sum c_k t_k (rho h d_k)^T`` comes from each flow element's ``dthrust/dp`` (exact in one step when the
thrust is affine in the outlet pressure, as for a quasi-steady Bernoulli jet). On a guide or track the
acceleration is along the guide, with Coulomb friction ``mu |N|`` against the motion and the hold at the
guide's foot; on a stand it is zero and the stand's reaction closes the balance.

:class:`Balance` evaluates this for one design with Python floats (single flights) and for N designs with
numpy arrays (ensembles): the same code, through the namespace of :mod:`thrustgraph.base.xp`. The discrete phase
(each component's mode, the kinematic constraint) is set with :meth:`Balance.set_phase`; for an ensemble a
mode or the constraint may be an array over designs, and the kinematics of every constraint present is
solved and chosen per design. Closure audits integrate, alongside the states, the mass and ground-frame
momentum that left through the control surface and the impulse of the external forces.

This module may import the plan, the component records, :mod:`thrustgraph.base.xp`, :mod:`thrustgraph.balance.vectors`
and the errors; it knows no device.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.flight.assembly import assemble
>>> bal = Balance(assemble(load_model(default_model_path())))
>>> snap = bal.evaluate(0.0, bal.system.y0)
>>> snap["thrust"] > 0
True
"""

from __future__ import annotations

from typing import Any, NamedTuple, Sequence

import numpy as np

from ..kinds.component import Flow, Outlet
from ..base.errors import IntegrationError
from .plan import ACCUMULATORS, LinePlan, Plan, build_plan
from ..base.roots import illinois
from .straightline import TraceError, array_trace_ops, compile_function, trace_ops
from .vectors import frame_of, solve_rank_one, to_world
from ..base.xp import array_ops, scalar_ops

__all__ = ["Balance", "Kinematics", "LineFlow", "ACCUMULATORS", "SINGULAR", "STRAIGHT_AFTER", "SAMPLES_AFTER",
           "array_line"]

#: Evaluations of one phase by the general evaluator before its straight-line function is traced and compiled
#: (:mod:`thrustgraph.balance.straightline`); tracing and compiling one phase costs about as much as this many
#: general evaluations (measured: benchmarks/single_flight.py). 0 turns straight lines off.
STRAIGHT_AFTER = 24
#: a phase's straight line over arrays of output samples (:meth:`Balance.sample_line`) is traced when the phase is
#: sampled for the 8th time: tracing costs about what 20 samplings save (the bottle rocket's five phases: 28 ms
#: to trace, ~1.2 ms a flight saved), so a system flown once or twice keeps the general evaluator
SAMPLES_AFTER = 8

SINGULAR = ("the liquid head makes the acceleration undetermined (the nozzle is too large for the vessel's "
            "bore under the quasi-steady model). Fix: use a vessel bore larger than about 1.5 times the "
            "nozzle diameter")


class Kinematics:
    """How the vehicle may move in the current phase: held, on the guide, free, or on an endless track."""

    HELD, GUIDE, FREE, TRACK = 0, 1, 2, 3
    BY_MOUNT = {"held": HELD, "guide": GUIDE, "free": FREE, "track": TRACK}
    NAMES = {HELD: "stand", GUIDE: "guide", TRACK: "track"}


class LineFlow(NamedTuple):
    """What one discharge line passes at the current acceleration (SI, floats or arrays).

    ``p_start`` is the pressure at the start of the line (a vessel's outlet with its liquid head), ``p_in``
    the pressure at the terminal element's inlet, ``v_int`` and ``moving`` the vessel contents' speed toward
    the outlet and the mass moving at it (internal momentum), ``v_in`` the entering fluid's velocity (a
    source's line, else None), ``rises`` the pressure change across each element in series.
    """

    mdot: Any
    v_e: Any
    p_e: Any
    A_e: Any
    slope: Any
    p_start: Any
    p_in: Any
    v_int: Any
    moving: Any
    v_in: Any
    rises: tuple


class _Sums(NamedTuple):
    """The lines' flows and their sums: thrust T, its pressure part Q, internal-momentum term I, inflow N."""

    flows: list
    T: tuple
    Q: tuple
    I: tuple
    N: tuple


_Z3 = (0.0, 0.0, 0.0)
#: the break-away margin and the pull along a guide or track of a vehicle on none (free or on a stand)
_NO_PULL = (0.0, 0.0)
_FREE_ONLY = {Kinematics.FREE}
#: the sums of a phase whose lines are all idle, by number of lines (never mutated)
_NO_FLOW = {n: _Sums([None] * n, _Z3, _Z3, _Z3, _Z3) for n in range(1, 5)}


def _dot(a: Sequence[Any], b: Sequence[Any]) -> Any:
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _is_zero(x: Any) -> bool:
    """True when ``x`` is a float zero shared by every design (not an array)."""
    return type(x) is float and x == 0.0


class Balance:
    """Right-hand side, event drives and snapshot (every term) of a vehicle's balance.

    ``system`` is an assembled :class:`~thrustgraph.flight.assembly.System` (a single design, floats) or anything
    with a ``plan`` attribute and the ``ops`` it was built with (the ensemble's array system).
    """

    max_newton = 8

    def __init__(self, system: Any, *, ops: Any = scalar_ops) -> None:
        self.system = system
        self.plan: Plan = system.plan
        self.ops = ops
        plan = self.plan
        c = plan.constraint
        self._u = c.u
        self._mu, self._mu_static = c.friction, c.static_friction
        self._friction = bool(ops.any((ops.abs(c.friction) > 0.0) | (ops.abs(c.static_friction) > 0.0))) \
            if ops.arrays else (c.friction > 0.0 or c.static_friction > 0.0)
        self._follow = c.follow_wind
        self._vmin = ops.maximum(c.min_follow_speed, 1e-9)
        self._need_frame = any(not ln.outlet_aft or not ln.jet_aft for ln in plan.lines) or \
            any(not j.aft for j in plan.jets)
        self._forces = plan.forces
        self._masses = [v.fns.mass for v in plan.vessels] + [j.fns.mass for j in plan.jets]
        # straight-line functions per phase (single flights of one-definition kinds only)
        parsed = getattr(system, "parsed", None)
        # a single flight of one-definition kinds: its samples are evaluated over arrays (sampling_balance)
        self._vectorised = (ops is scalar_ops and parsed is not None and hasattr(system, "slices")
                            and all(getattr(k, "vectorised", False) for k in parsed.kinds.values())
                            and all(getattr(k, "vectorised", False) for k in parsed.env_kinds.values()))
        # ... and traced (a line with elements in series too: its root search stops the flight with ops.refuse_any)
        self._traceable = self._vectorised
        made = getattr(system, "straight_lines", None)
        self._lines_made: dict[tuple, Any] = made if isinstance(made, dict) else {}
        self._tracer: Balance | None = None
        self._sampler: Balance | None = None
        #: why tracing failed, per phase and request (for tests and diagnosis)
        self.untraced: dict[tuple, str] = {}
        # what each phase derives from the plan, shared by every balance of this system over the same ops (a
        # flight builds its balance anew; its phases are those of the flights before)
        self._phases: dict[tuple, dict] = self._lines_made.setdefault(("phases", id(self.plan), id(ops)), {})
        self._phase_key: tuple | None = None
        self.set_phase([0] * len(plan.moded) if not hasattr(system, "mode0") else list(system.mode0),
                       Kinematics.BY_MOUNT[c.mount], False)

    # ------------------------------------------------------------------
    def set_phase(self, modes: Sequence[Any], kinematics: Any, descending: bool, slide: Any = 0.0) -> None:
        """Fix the discrete phase for the next integration segment (or the next ensemble step).

        ``modes`` holds each moded component's mode index (an int, or an int array over designs);
        ``kinematics`` a :class:`Kinematics` value (or an array). ``slide`` is the way a vehicle slides along
        a guide or track for the whole segment (+1, -1): kinetic friction opposes it and the integrator ends
        the segment when the vehicle comes to rest; 0 lets the friction follow the current speed, except at rest:
        a vehicle at rest is held there for the whole segment (static friction or the guide's foot), however
        hard it is pulled, and the integrator ends the segment where it breaks away (``breakaway`` of
        :meth:`terms`). For an ensemble ``slide`` may be an array over designs (each design's own way).
        """
        # one phase for every design (a single flight, or a segment's samples): a phase seen before is restored
        # whole (outcomes set each segment's phase many times); the phase already set costs a comparison
        key = _phase_key(modes, kinematics, descending, slide)
        if key is not None and key == self._phase_key:
            return
        if key is not None:
            known = self._phases.get(key)
            if known is not None:
                self.__dict__.update(known)
                return
        self.modes = list(modes)
        self.kinematics = kinematics
        self.descending = descending
        self._phase_modes()
        self._phase_constraints(kinematics, slide)
        self._phase_lines()
        self._phase_key = key if self._traceable else None
        # this phase's straight lines by (request, number of states given): a solver without audits passes
        # the physical states alone, one with audits the accumulators too
        self._lines_now = self._lines_made.setdefault(("lines", self._phase_key), {})
        if key is not None:
            self._phases[key] = {k: self.__dict__[k] for k in _PHASE_ATTRIBUTES}

    def _phase_modes(self) -> None:
        """Each plan entry's mode in this phase (0 for a component without modes)."""
        plan, m = self.plan, self.modes

        def mode_of(k: int) -> Any:
            return m[k] if k >= 0 else 0
        self._bmode = [mode_of(b.slot) for b in plan.bodies]
        self._force_fns = [(b, b.force, b.stateful, mode_of(b.slot)) for b in self._forces]
        self._vmode = [mode_of(v.slot) for v in plan.vessels]
        self._smode = [mode_of(s.slot) for s in plan.sources]
        self._jmode = [mode_of(j.slot) for j in plan.jets]
        self._tmode = [mode_of(ln.terminal_slot) for ln in plan.lines]
        self._emode = [tuple(mode_of(e.slot) for e in ln.series) for ln in plan.lines]

    def _phase_constraints(self, kinematics: Any, slide: Any) -> None:
        """The kinematic constraints present (one for a single design; the distinct ones of an ensemble's
        designs) and the way the vehicle slides along a guide or track."""
        ops = self.ops
        if ops.arrays and not isinstance(kinematics, int):
            present = {int(k) for k in np.unique(kinematics)}
            if len(present) == 1:
                kinematics = present.pop()
                present = {kinematics}
        else:
            present = {int(kinematics)}
        self._kin = kinematics
        self._present = present
        self._held_only = present == {Kinematics.HELD}
        if ops.arrays and not isinstance(slide, (int, float)):
            # per design: only the designs on a guide or track read it (see _guided)
            self.slide = slide if present & {Kinematics.GUIDE, Kinematics.TRACK} else 0.0
        else:
            self.slide = float(slide) if present <= {Kinematics.GUIDE, Kinematics.TRACK} else 0.0
        self._only = next(iter(present)) if len(present) == 1 else None

    def _phase_lines(self) -> None:
        """Which lines are evaluated in this phase: a line is idle when a component on it is, in every design, in
        a mode that promises no outflow; for the snapshot an idle line is still evaluated where an event of a
        component on it reads its drive in the current mode. And the vessels whose outlets each request reads."""
        plan = self.plan
        idle = []
        for j, ln in enumerate(plan.lines):
            quiet = False
            for name, md in zip(ln.members, (self._start_mode(ln), self._tmode[j]) + self._emode[j]):
                if name in plan.modes and isinstance(md, int) and not plan.modes[name][md].outflow:
                    quiet = True
            idle.append(quiet)
        self._idle = idle
        self._live = [not q for q in idle]
        self._live_all = [True] * len(idle)
        watch: dict[str, list] = {}
        for n, e in plan.events:
            if e.needs_drive:
                watch.setdefault(n, []).append(e)
        live_terms = []
        for j, ln in enumerate(plan.lines):
            seen = not idle[j]
            for name, md in zip(ln.members, (self._start_mode(ln), self._tmode[j]) + self._emode[j]):
                for e in watch.get(name, ()):
                    names = [mm.name for mm in plan.modes.get(name, ())]
                    if not isinstance(md, int) or (names and names[md] in e.when):
                        seen = True
            live_terms.append(seen)
        self._live_terms = live_terms
        self._vessel_lines = [(j, ln.start_index) for j, ln in enumerate(plan.lines) if ln.from_vessel]
        self._outlets = sorted({k for j, k in self._vessel_lines if self._live[j]})
        self._outlets_all = sorted({k for j, k in self._vessel_lines})
        self._outlets_terms = sorted({k for j, k in self._vessel_lines if self._live_terms[j]})

    def _start_mode(self, ln: LinePlan) -> Any:
        return self._vmode[ln.start_index] if ln.from_vessel else self._smode[ln.start_index]

    # ------------------------------------------------------------------
    def rhs(self, t: float, y: Any) -> list[float]:
        """Time derivative of the flat state vector (SI): kinematics, component states, audit accumulators."""
        f = self._lines_now.get(("rhs", len(y)))
        if f is not None:
            return f(t, y)
        return self._general(t, y, "rhs")

    def core(self, t: float, y: Any) -> list[float]:
        """The derivatives of the physical states alone (no audit accumulators), for runs without audits."""
        f = self._lines_now.get(("core", len(y)))
        if f is not None:
            return f(t, y)
        return self._general(t, y, "core")

    def _general(self, t: float, y: Any, want: str) -> list[float]:
        """The general evaluator; after :data:`STRAIGHT_AFTER` calls in one phase, the phase's straight line."""
        s = _as_list(y)
        if self._phase_key is not None:
            # counted per phase across this system's flights (short bursts, such as the refinement of a peak,
            # add up over a study's repeated flights)
            key = ("count", self._phase_key, want, len(s))
            n = self._lines_made[key] = self._lines_made.get(key, 0) + 1
            if n == STRAIGHT_AFTER:
                self.straight_line(want, len(s))
        return self._solve(t, s, want)

    def straight_line(self, want: str, n_states: int) -> Any:
        """The current phase's straight-line function for ``want`` ("rhs", "core", "terms" or "drives"), traced
        and compiled once
        per phase (:mod:`thrustgraph.balance.straightline`); None when this vehicle or phase cannot be traced (the
        reason is kept in :attr:`untraced`). From then on :meth:`rhs` / :meth:`core` call it."""
        key = (self._phase_key, want, n_states)
        fn = self._lines_made.get(key)
        if fn is None and self._phase_key is not None:
            try:
                tb = self._tracing_balance()
                tb.set_phase(self.modes, self.kinematics, self.descending, self.slide)
                fn = compile_function(lambda t, s: tb._solve(t, s, want), n_states, name=want)
            except (TraceError, TypeError, AttributeError, ValueError, IndexError) as exc:
                self.untraced[key] = f"{type(exc).__name__}: {exc}"
                fn = False
            self._lines_made[key] = fn
        if fn:
            self._lines_made.setdefault(("lines", self._phase_key), {})[(want, n_states)] = fn
        return fn or None

    def sampling_balance(self) -> "Balance | None":
        """This vehicle's balance over numpy arrays of samples (its plan rebuilt over
        :data:`~thrustgraph.base.xp.array_ops`, parameters kept as floats), for a whole segment's output samples at
        once (:mod:`thrustgraph.balance.sampling`); None when a kind is not written to the one-definition convention.
        A line with elements in series is solved over the arrays by the same root search, each sample iterating
        on its own (:mod:`thrustgraph.base.roots`)."""
        if not self._vectorised:
            return None
        if self._sampler is None:
            self._sampler = self._lines_made.get(("sampler",))
        if self._sampler is None:
            sy = self.system
            parsed = sy.parsed
            plan = build_plan(parsed, parsed.params, parsed.env_params, array_ops, parsed.ambient, sy.slices,
                              sy.moded, self.plan.constraint)
            self._sampler = self._lines_made[("sampler",)] = Balance(_Traced(plan, getattr(sy, "mode0", ())),
                                                                     ops=array_ops)
        return self._sampler

    def sample_line(self, want: str, n_states: int) -> Any:
        """The current phase's straight line over arrays of samples (``f(t, y, ())``, ``y`` the state rows):
        the one balance's ``want`` traced over :data:`~thrustgraph.balance.straightline.array_trace_ops` with
        the parameters as numbers (:func:`array_line`); it gives the general evaluator's numbers exactly
        (tests/test_straightline.py). None until the phase has been sampled :data:`SAMPLES_AFTER` times, and for
        a vehicle or phase that cannot be traced (the general evaluator serves then)."""
        if not self._traceable or self._phase_key is None:
            return None
        key = ("sample line", self._phase_key, want, n_states)
        made = self._lines_made.get(key)
        if made is not None:
            return made or None
        count = ("sample count",) + key[1:]
        seen = self._lines_made[count] = self._lines_made.get(count, 0) + 1
        if seen < SAMPLES_AFTER:
            return None
        sy = self.system
        try:
            plan = self._lines_made.get(("array trace plan",))
            if plan is None:
                parsed = sy.parsed
                plan = self._lines_made[("array trace plan",)] = build_plan(
                    parsed, parsed.params, parsed.env_params, array_trace_ops, parsed.ambient, sy.slices, sy.moded,
                    self.plan.constraint)
            modes, kin, descending, slide = self._phase_key
            fn = array_line(plan, tuple(getattr(sy, "mode0", ())), (list(modes), kin, descending, slide), want,
                            n_states, -1)
        except Exception as exc:     # noqa: BLE001 (any failure to trace keeps the general evaluator)
            self.untraced[key] = f"{type(exc).__name__}: {exc}"
            self._lines_made[key] = False
            return None
        self._lines_made[key] = fn
        return fn

    def _tracing_balance(self) -> "Balance":
        """This vehicle's balance over :data:`~thrustgraph.balance.straightline.trace_ops` (its plan rebuilt with it)."""
        if self._tracer is None:
            sy = self.system
            parsed = sy.parsed
            plan = build_plan(parsed, parsed.params, parsed.env_params, trace_ops, parsed.ambient, sy.slices,
                              sy.moded, self.plan.constraint)
            self._tracer = Balance(_Traced(plan, getattr(sy, "mode0", ())), ops=trace_ops)
        return self._tracer

    def drives(self, t: float, y: Any) -> dict[str, Any]:
        """Drive pressure (Pa) per vessel and per discharging element, for events.

        A vessel's drive is its outlet pressure with the liquid head minus ambient; an element's is the
        pressure at its inlet minus ambient.
        """
        f = self._lines_now.get(("drives", len(y)))
        if f is not None:
            return f(t, y)
        return self._general(t, y, "drives")

    def evaluate(self, t: float, y: Any) -> dict[str, Any]:
        """Every term of the balance at one instant, as a flat dict of SI values.

        Vectors are 3-tuples. Keys include ``acceleration``, ``mass``, ``thrust`` (along the body axis),
        ``thrust_vector``, per component ``NAME.mass_flow``, ``NAME.exit_velocity``, ``NAME.drag`` and the
        vessel signals, ``derivatives``, and the ``ledger``: a list of ``(component, term, vector)`` whose sum
        is M a.
        """
        return self._solve(t, _as_list(y), "ledger")

    def terms(self, t: Any, s: Sequence[Any]) -> dict[str, Any]:
        """The snapshot without the ledger: ``derivs`` (per state, in layout order, without accumulators),
        ``accel`` (3-vector), ``thrust`` (thrust vector), ``thrust_axial`` (its component along the body axis, the
        ``thrust`` of :meth:`evaluate`), ``mass``, ``drive`` (name -> Pa), ``singular`` (designs whose head
        coupling has no solution), ``inflow`` (the momentum of the fluid entering through sources, the sum of the
        ledger's ``inflow momentum`` terms), ``axis`` (the body axis), ``pull`` (N: the pull along a guide or
        track at zero acceleration, friction left out) and ``breakaway`` (N: how far that pull exceeds what holds
        the vehicle at rest there, static friction or the guide's foot; it rises through zero where a vehicle at
        rest starts to move, the way ``pull`` points: :meth:`_guided`); both 0 in free flight and on a stand."""
        f = self._lines_now.get(("terms", len(s)))
        if f is not None:
            return f(t, s)
        return self._general(t, s, "terms")

    def mass(self, s: Sequence[Any]) -> Any:
        """The vehicle's mass (kg): the bodies' fixed mass and what its vessels and jets hold (needs no phase)."""
        M = self.plan.fixed_mass
        for fn in self._masses:
            M = M + fn(s)
        return M

    # ------------------------------------------------------------------
    def _solve(self, t: Any, s: Sequence[Any], want: str) -> Any:
        ops = self.ops
        plan = self.plan
        full = want == "drives" or want == "ledger" or want == "samples"
        vx, vy, vz = s[3], s[4], s[5]
        rho, pa, Ta, wx, wy, wz = plan.medium(s[2], t)
        g = plan.gravity(s[2])
        vr = (vx - wx, vy - wy, vz - wz)
        sp = ops.sqrt(vr[0] * vr[0] + vr[1] * vr[1] + vr[2] * vr[2])
        e = self._axis(vr, sp)
        frame = frame_of(e, plan.constraint.azimuth, ops) if self._need_frame else None
        aft = (-e[0], -e[1], -e[2])

        # 1. Mass and the forces that do not depend on the acceleration.
        M = self.mass(s)
        air = (rho, pa, Ta, vr[0], vr[1], vr[2], sp)
        drags = []
        Dx = Dy = Dz = 0.0
        for b, fn, stateful, md in self._force_fns:
            f = fn(t, s, md, air) if stateful else fn(air)
            Dx = Dx + f[0]; Dy = Dy + f[1]; Dz = Dz + f[2]
            drags.append((b, f))
        W = -M * g
        Fx, Fy, Fz = Dx, Dy, Dz + W
        Px = Py = Pz = 0.0           # the jets' pressure thrust (a surface force: enters the impulse audit)
        jets = []
        for j, md in zip(plan.jets, self._jmode):
            mdot, ve, pe, Ae = j.fns.jet(t, s, md, pa)
            jd = aft if j.aft else to_world(j.fns.jet_dir, frame)
            pth = (pe - pa) * Ae
            T = mdot * ve + pth
            Fx = Fx - T * jd[0]; Fy = Fy - T * jd[1]; Fz = Fz - T * jd[2]
            Px = Px - pth * jd[0]; Py = Py - pth * jd[1]; Pz = Pz - pth * jd[2]
            jets.append((mdot, ve, pe, Ae, jd, T))
        F = (Fx, Fy, Fz)

        # 2. The start of every line: vessel outlets (without head) and source supplies, and directions.
        live = self._live_all if full else (self._live_terms if want == "terms" else self._live)
        outs: list[Any] = [None] * len(plan.vessels)
        for k in (self._outlets_all if full else (self._outlets_terms if want == "terms" else self._outlets)):
            o = plan.vessels[k].fns.outlet(s, self._vmode[k])
            outs[k] = o if type(o) is Outlet else Outlet(*o)
        supplies = [src.fns.supply(t, s, md, air) for src, md in zip(plan.sources, self._smode)] \
            if plan.sources else ()
        if self._need_frame:
            dirs = [(aft if ln.outlet_aft else to_world(ln.outlet_dir, frame),
                     aft if ln.jet_aft else to_world(ln.jet_dir, frame)) for ln in plan.lines]
        else:
            dirs = [(aft, aft)] * len(plan.lines)
        coupled = False
        for j, k in self._vessel_lines:
            if live[j] and not _is_zero(outs[k].head):
                coupled = True

        # 3. The acceleration, solved with the flows it drives.
        ctx = (t, s, pa, g, outs, supplies, dirs, live)
        a, sums, C, singular, rest = self._accelerate(ctx, M, F, coupled)
        T, I, N = sums.T, sums.I, sums.N
        if self._present == _FREE_ONLY:
            R = _Z3
        else:
            R = (M * a[0] - (Fx + T[0] + I[0] + N[0]) - C[0], M * a[1] - (Fy + T[1] + I[1] + N[1]) - C[1],
                 M * a[2] - (Fz + T[2] + I[2] + N[2]) - C[2])
            if Kinematics.FREE in self._present:
                free = self._kin == Kinematics.FREE
                R = (ops.where(free, 0.0, R[0]), ops.where(free, 0.0, R[1]), ops.where(free, 0.0, R[2]))

        if want == "drives":
            return self._drives(sums.flows, pa)
        derivs = self._derivatives(t, s, air, a, sums.flows, jets)
        if want == "core":
            return derivs
        if want == "terms":
            return self._terms(derivs, a, T, jets, e, M, sums, pa, singular, N, rest)
        # "samples": the ledger with the snapshot outcomes read (a result's samples: one pass gives both)
        terms = self._terms(list(derivs), a, T, jets, e, M, sums, pa, singular, N, rest) \
            if want == "samples" else None
        derivs.extend(self._accumulators(s, sums, jets, dirs, (Dx, Dy, Dz), W, (Px, Py, Pz), R, C))
        if want == "rhs":
            return derivs
        rec: dict[str, Any] = {"derivatives": derivs}
        if terms is not None:
            rec["terms"] = terms
        self._record(rec, t, s, M, e, a, drags, (0.0, 0.0, W), R, C, outs, sums, jets, supplies, dirs,
                     rho, pa, Ta, (wx, wy, wz), sp, g)
        return rec

    def _terms(self, derivs: list, a: tuple, T: tuple, jets: list, e: tuple, M: Any, sums: Any, pa: Any,
               singular: Any, N: tuple, rest: tuple) -> dict[str, Any]:
        """The snapshot outcomes read (:meth:`terms`): derivatives, acceleration, the gross thrust (every
        opening's momentum flux and pressure thrust) as a vector and along the body axis, mass, drives, inflow,
        and the break-away margin of a vehicle at rest on a guide or track (:meth:`_guided`)."""
        tx, ty, tz = T
        for mdot, ve, pe, Ae, jd, Tj in jets:
            tx = tx - Tj * jd[0]; ty = ty - Tj * jd[1]; tz = tz - Tj * jd[2]
        return {"derivs": derivs, "accel": a, "thrust": (tx, ty, tz), "thrust_axial": _dot((tx, ty, tz), e), "mass": M,
                "drive": self._drives(sums.flows, pa), "singular": singular, "inflow": N, "axis": e,
                "breakaway": rest[0], "pull": rest[1]}

    def _axis(self, vr: tuple, sp: Any) -> tuple:
        """The body axis (world frame): the guide direction, or into the relative wind in free flight."""
        u = self._u
        if not self._follow or Kinematics.FREE not in self._present:
            return u
        ops = self.ops
        use = sp > self._vmin
        if len(self._present) > 1:
            use = use & (self._kin == Kinematics.FREE)
        if not ops.arrays:
            return ops.branch(use, lambda: (vr[0] / sp, vr[1] / sp, vr[2] / sp), lambda: u)

        def some():             # designs that differ: the guide direction below the speed (no division by 0)
            d = ops.where(use, sp, 1.0)
            return tuple(ops.where(use, vr[k] / d, u[k]) for k in range(3))
        return ops.branch(use, lambda: (vr[0] / sp, vr[1] / sp, vr[2] / sp), some)

    # ------------------------------------------------------------------
    def _accelerate(self, ctx: tuple, M: Any, F: tuple, coupled: bool):
        """The acceleration of every constraint present, chosen per design; the flows at it; friction."""
        ops = self.ops
        g = ctx[3]
        first = self._lines_at(ctx, (0.0, 0.0, -g))          # flows at a = 0
        only = self._only
        if only == Kinematics.FREE:
            return self._free(ctx, M, F, first, coupled)
        if only == Kinematics.GUIDE or only == Kinematics.TRACK:
            return self._guided(ctx, M, F, first, coupled, only)
        results = {}
        for kin in self._present:
            if kin == Kinematics.HELD:
                results[kin] = (_Z3, first, _Z3, False, _NO_PULL)
            elif kin == Kinematics.FREE:
                results[kin] = self._free(ctx, M, F, first, coupled)
            else:
                results[kin] = self._guided(ctx, M, F, first, coupled, kin)
        if len(results) == 1:
            return next(iter(results.values()))
        # an ensemble with designs under several constraints: each design takes its own
        kin = self._kin
        a, C = [0.0, 0.0, 0.0], [0.0, 0.0, 0.0]
        singular = False
        rest = [0.0, 0.0]
        for k, (ak, _, Ck, sk, bk) in results.items():
            sel = kin == k
            a = [ops.where(sel, ak[i], a[i]) for i in range(3)]
            C = [ops.where(sel, Ck[i], C[i]) for i in range(3)]
            singular = singular | (sel & sk)
            rest = [ops.where(sel, bk[i], rest[i]) for i in range(2)]
        sums = self._lines_at(ctx, (-a[0], -a[1], -g - a[2])) if coupled else first
        return tuple(a), sums, tuple(C), singular, tuple(rest)

    @staticmethod
    def _pull(F: tuple, sums: _Sums) -> tuple:
        """The forces that do not depend on the acceleration plus the lines' thrust, internal and inflow terms."""
        T, I, N = sums.T, sums.I, sums.N
        return F[0] + T[0] + I[0] + N[0], F[1] + T[1] + I[1] + N[1], F[2] + T[2] + I[2] + N[2]

    def _free(self, ctx: tuple, M: Any, F: tuple, first: _Sums, coupled: bool):
        """Free flight: Newton on M a - G(a) = 0 (one evaluation without a liquid head)."""
        ops = self.ops
        g = ctx[3]
        G = self._pull(F, first)
        if not coupled:
            return (G[0] / M, G[1] / M, G[2] / M), first, _Z3, False, _NO_PULL
        outs, dirs, live = ctx[4], ctx[6], ctx[7]

        def test(c):
            a, sums, G, singular = c
            r = (M * a[0] - G[0], M * a[1] - G[1], M * a[2] - G[2])
            stop = ops.abs(r[0]) + ops.abs(r[1]) + ops.abs(r[2]) <= \
                1e-12 * (ops.abs(G[0]) + ops.abs(G[1]) + ops.abs(G[2]) + M * g)
            return stop, r

        def step(c, r):
            a, sums, G, singular = c
            pairs = []
            for j, k in self._vessel_lines:
                if live[j] and not _is_zero(outs[k].head):
                    head = outs[k].head
                    cf = sums.flows[j].slope
                    dw, jd = dirs[j]
                    pairs.append(((-cf * jd[0], -cf * jd[1], -cf * jd[2]),
                                  (head * dw[0], head * dw[1], head * dw[2])))
            d, sing = solve_rank_one(M, pairs, r, ops)
            ops.refuse(sing, IntegrationError, SINGULAR)
            a = (a[0] - d[0], a[1] - d[1], a[2] - d[2])
            sums = self._lines_at(ctx, (-a[0], -a[1], -g - a[2]))
            return a, sums, self._pull(F, sums), singular | sing

        (a, sums, _G, singular), _r = ops.iterate((_Z3, first, G, False), test, step, self.max_newton)
        return a, sums, _Z3, singular, _NO_PULL

    def _along(self, G: tuple) -> tuple:
        """The pull ``G`` along the guide or track, and the largest friction its normal part allows (Coulomb,
        ``mu |N|``; 0 without friction): sliding (kinetic, ``friction``) and at rest (static,
        ``static_friction``)."""
        u0, u1, u2 = self._u
        Gx, Gy, Gz = G
        Gu = Gx * u0 + Gy * u1 + Gz * u2
        if not self._friction:
            return Gu, 0.0, 0.0
        nx, ny, nz = Gx - Gu * u0, Gy - Gu * u1, Gz - Gu * u2
        normal = self.ops.sqrt(nx * nx + ny * ny + nz * nz)
        return Gu, self._mu * normal, self._mu_static * normal

    def _guided(self, ctx: tuple, M: Any, F: tuple, first: _Sums, coupled: bool, kin: int):
        """On a guide or track: a = alpha u, with kinetic friction mu |N| against the motion, static friction up to
        mu_s |N| at rest (``static_friction``), held at the guide's foot.

        Also the break-away margin: how far the pull along the guide or track at zero acceleration exceeds what
        holds a vehicle at rest (static friction ``mu_s |N|`` either way; at the guide's foot, the foot holds it
        back), less the tolerance the acceleration is solved to (``1e-12 (|pull| + M g)``, so that where it is
        positive the acceleration at rest is not zero). A vehicle at rest starts to move where it rises through
        zero (the statics of a block on a rough incline, common practice, no source).
        """
        ops = self.ops
        t, s, pa, g, outs, _supplies, dirs, live = ctx
        u0, u1, u2 = self._u
        v_along = s[3] * u0 + s[4] * u1 + s[5] * u2
        at_foot: Any = False
        if kin == Kinematics.GUIDE:
            x0 = self.plan.constraint.x0
            below = (s[0] - x0[0]) * u0 + (s[1] - x0[1]) * u1 + (s[2] - x0[2]) * u2 <= 0.0
            at_foot = (v_along <= 0.0) & below
        slide = self.slide
        # a phase that starts at rest, held there (slide 0), stays held until its break-away event ends it: the
        # acceleration is zero even where the pull has outgrown the hold, so that the motion has no kink inside
        # the phase (a solver's stages past the break-away instant do not move the vehicle)
        if type(slide) is float:
            way = slide if slide != 0.0 else v_along
            resting: Any = (v_along == 0.0) if slide == 0.0 else False
        else:       # an ensemble's designs, each its own way
            way = ops.where(slide != 0.0, slide, v_along)
            resting = (slide == 0.0) & (v_along == 0.0)

        def test(c):
            alpha, sums, held, singular = c
            Gu, fmax, fhold = self._along(self._pull(F, sums))
            fr: Any = 0.0
            if self._friction:
                # kinetic friction against the motion; at rest, static friction holds up to fhold
                fr = ops.where(way > 0.0, -fmax, ops.where(way < 0.0, fmax, ops.clip(-Gu, -fhold, fhold)))
            r = M * alpha - Gu - fr
            return held | (ops.abs(r) <= 1e-12 * (ops.abs(Gu) + M * g + 1e-30)), (r, fr)

        def step(c, aux):
            alpha, sums, held, singular = c
            r = aux[0]
            J = M
            for j, k in self._vessel_lines:
                if live[j] and not _is_zero(outs[k].head):
                    head = outs[k].head
                    dw, jd = dirs[j]
                    J = J - sums.flows[j].slope * (jd[0] * u0 + jd[1] * u1 + jd[2] * u2) * head * (
                        dw[0] * u0 + dw[1] * u1 + dw[2] * u2)
            bad = J <= 0.0
            ops.refuse(bad, IntegrationError, SINGULAR)
            alpha = alpha - r / ops.where(bad, 1.0, J)
            # held at the guide's foot: a vehicle that cannot yet climb stays where it is
            held = held | ((alpha < 0.0) & at_foot)
            alpha = ops.where(held, 0.0, alpha)
            if coupled:
                sums = self._lines_at(ctx, (-alpha * u0, -alpha * u1, -g - alpha * u2))
            return alpha, sums, held, singular | bad

        (alpha, sums, _held, singular), (_r, fr) = ops.iterate(
            (0.0, first, resting, False), test, step, self.max_newton if coupled else 1)
        if kin == Kinematics.GUIDE:
            fr = ops.where((alpha == 0.0) & at_foot, 0.0, fr)
        pull, _, hold = self._along(self._pull(F, first))
        ahead = ops.abs(pull) if kin == Kinematics.TRACK else ops.where(at_foot, pull, ops.abs(pull))
        breakaway = ahead - hold - 1e-12 * (ops.abs(pull) + M * g + 1e-30)
        return (alpha * u0, alpha * u1, alpha * u2), sums, (fr * u0, fr * u1, fr * u2), singular, (breakaway, pull)

    # ------------------------------------------------------------------
    def _lines_at(self, ctx: tuple, f: tuple) -> _Sums:
        """Flows of every line at the apparent acceleration ``f = g - a`` and their sums."""
        t, s, pa, g, outs, supplies, dirs, live = ctx
        if not any(live):
            return _NO_FLOW[len(live)] if len(live) in _NO_FLOW else \
                _Sums([None] * len(live), _Z3, _Z3, _Z3, _Z3)
        flows = []
        Tx = Ty = Tz = 0.0
        Qx = Qy = Qz = 0.0
        Ix = Iy = Iz = 0.0
        Nx = Ny = Nz = 0.0
        fx, fy, fz = f
        for j, ln in enumerate(self.plan.lines):
            if not live[j]:
                flows.append(None)
                continue
            dw, jd = dirs[j]
            mfix: Any = -1.0
            v_in = None
            if ln.from_vessel:
                o = outs[ln.start_index]
                head = o.head
                up = o if _is_zero(head) else \
                    Outlet(o.p + head * (fx * dw[0] + fy * dw[1] + fz * dw[2]), o.T, o.rho, o.gamma, o.R, o.phase, head)
            else:
                sup = supplies[ln.start_index]
                up = sup[0] if type(sup[0]) is Outlet else Outlet(*sup[0])
                mfix, v_in = sup[1], (sup[2], sup[3], sup[4])
            tmode = self._tmode[j]
            if not ln.series and (ln.from_vessel or (type(mfix) is float and mfix < 0.0)):
                fl = ln.terminal_fns.flow(up, pa, tmode)
                p_in, rises = up.p, ()
            else:
                fl, p_in, rises = _solve_line(ln, up, pa, tmode, self._emode[j], mfix, self.ops)
            mdot, ve, pe, Ae, slope = fl
            if ln.inflow is not None:
                v_in = ln.inflow(mdot, up)
            pth = (pe - pa) * Ae
            thrust = mdot * ve + pth
            Tx = Tx - thrust * jd[0]; Ty = Ty - thrust * jd[1]; Tz = Tz - thrust * jd[2]
            Qx = Qx - pth * jd[0]; Qy = Qy - pth * jd[1]; Qz = Qz - pth * jd[2]
            v_int: Any = 0.0
            moving: Any = 0.0
            if ln.internal is not None:
                # d/dt of the contents' momentum toward the outlet is -mdot v_int (quasi-steady); it enters
                # the balance with a minus sign
                v_int, moving = ln.internal(s, self._vmode[ln.start_index], mdot)
                mv = mdot * v_int
                Ix = Ix + mv * dw[0]; Iy = Iy + mv * dw[1]; Iz = Iz + mv * dw[2]
            if v_in is not None:
                Nx = Nx + mdot * v_in[0]; Ny = Ny + mdot * v_in[1]; Nz = Nz + mdot * v_in[2]
            flows.append(LineFlow(mdot, ve, pe, Ae, slope, up.p, p_in, v_int, moving, v_in, rises))
        return _Sums(flows, (Tx, Ty, Tz), (Qx, Qy, Qz), (Ix, Iy, Iz), (Nx, Ny, Nz))

    # ------------------------------------------------------------------
    def _derivatives(self, t: Any, s: Sequence[Any], air: tuple, a: tuple, flows: list, jets: list) -> list:
        """Kinematics, then every owner's state derivatives in layout order."""
        plan = self.plan
        if self._held_only:
            out: list = [0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
        else:
            out = [s[3], s[4], s[5], a[0], a[1], a[2]]
            if Kinematics.HELD in self._present:
                moving = self._kin != Kinematics.HELD
                out = [self.ops.where(moving, x, 0.0) for x in out]
        if not plan.owners:
            return out
        vol_out: list[Any] = [0.0] * len(plan.vessels)
        for ln, fl in zip(plan.lines, flows):
            if ln.from_vessel and fl is not None:
                vol_out[ln.start_index] = vol_out[ln.start_index] + fl.mdot
        for ow in plan.owners:
            if ow.role == "volume":
                d = plan.vessels[ow.index].fns.derivs(s, self._vmode[ow.index], vol_out[ow.index])
            elif ow.role == "jet":
                d = plan.jets[ow.index].fns.derivs(t, s, self._jmode[ow.index], jets[ow.index][0])
            else:
                d = plan.bodies[ow.index].fns.derivs(t, s, self._bmode[ow.index], air)
            out.extend(d)
        return out

    def _accumulators(self, s, sums: _Sums, jets, dirs, D, W, P, R, C) -> list:
        """Derivatives of the closure-audit accumulators: mass out, exhaust momentum, external impulse, internal
        momentum change."""
        vx, vy, vz = s[3], s[4], s[5]
        mout = 0.0
        Ex = Ey = Ez = 0.0
        for mdot, ve, pe, Ae, jd, T in jets:
            mout = mout + mdot
            Ex = Ex + mdot * (vx + ve * jd[0]); Ey = Ey + mdot * (vy + ve * jd[1]); Ez = Ez + mdot * (vz + ve * jd[2])
        for ln, fl, (_dw, jd) in zip(self.plan.lines, sums.flows, dirs):
            if fl is None:
                continue
            mdot, ve = fl.mdot, fl.v_e
            Ex = Ex + mdot * (vx + ve * jd[0]); Ey = Ey + mdot * (vy + ve * jd[1]); Ez = Ez + mdot * (vz + ve * jd[2])
            if ln.from_vessel:
                mout = mout + mdot
            else:
                vin = fl.v_in
                Ex = Ex - mdot * (vx + vin[0]); Ey = Ey - mdot * (vy + vin[1]); Ez = Ez - mdot * (vz + vin[2])
        Q, I = sums.Q, sums.I
        return [mout, Ex, Ey, Ez, D[0] + P[0] + Q[0] + R[0] + C[0], D[1] + P[1] + Q[1] + R[1] + C[1],
                D[2] + W + P[2] + Q[2] + R[2] + C[2], -I[0], -I[1], -I[2]]

    def _drives(self, flows: list, pa: Any) -> dict[str, Any]:
        rec: dict[str, Any] = {}
        for ln, fl in zip(self.plan.lines, flows):
            if fl is None:
                continue
            rec.setdefault(ln.start, fl.p_start - pa)
            rec[ln.terminal] = fl.p_in - pa
        return rec

    # ------------------------------------------------------------------
    def _record(self, rec, t, s, M, e, a, drags, weight, reaction, friction, outs, sums, jets, supplies, dirs,
                rho, pa, Ta, wind, sp, g):
        """The snapshot of one evaluation: the motion and the surroundings, every term of the ledger (by
        component), every signal the components report, and the totals (thrust, mass flow, inertia)."""
        plan = self.plan
        rec.update(time=t, mass=M, axis=e, acceleration=a, weight=weight, reaction=reaction,
                   position=(s[0], s[1], s[2]), velocity=(s[3], s[4], s[5]), airspeed=sp,
                   ambient_pressure=pa, ambient_density=rho, ambient_temperature=Ta, wind=wind, gravity=g)
        ledger: list[tuple[str, str, tuple]] = []
        for b, f in drags:
            rec[f"{b.name}.{b.fns.force_name}"] = tuple(f)
            ledger.append((b.name, b.fns.force_name, tuple(f)))
        for b, md in zip(plan.bodies, self._bmode):
            if b.fns.signals is not None:
                for key, val in b.fns.signals(t, s, md).items():
                    rec[f"{b.name}.{key}"] = val
        ledger.append(("vehicle", "weight", weight))
        self._record_constraints(ledger, reaction, friction)
        tv = [0.0, 0.0, 0.0]
        mass_flow = 0.0
        seen: set[str] = set()
        for j, (ln, fl) in enumerate(zip(plan.lines, sums.flows)):
            mdot, mf, pf = self._record_line(rec, ledger, j, ln, fl, dirs[j], outs, supplies, t, s, pa, seen)
            tv = [tv[k] + mf[k] + pf[k] for k in range(3)]
            mass_flow = mass_flow + mdot
        for j, jet in zip(plan.jets, jets):
            mdot, mf, pf = self._record_jet(rec, ledger, j, jet, t, s, pa)
            tv = [tv[k] + mf[k] + pf[k] for k in range(3)]
            mass_flow = mass_flow + mdot
        rec["thrust_vector"] = tuple(tv)
        rec["thrust"] = _dot(tv, e)
        rec["mass_flow"] = mass_flow
        rec["ledger"] = ledger
        rec["inertia"] = (M * a[0], M * a[1], M * a[2])

    def _record_constraints(self, ledger: list, reaction: tuple, friction: tuple) -> None:
        """The reaction of each constraint present (an ensemble's designs may be under several: each design's
        reaction is its own constraint's, zero in free flight), and the friction of a guide or track."""
        constrained = sorted(self._present - {Kinematics.FREE})
        for k in constrained:
            share = reaction if len(constrained) == 1 else \
                tuple(self.ops.where(self._kin == k, c, 0.0) for c in reaction)
            ledger.append(("vehicle", f"{Kinematics.NAMES[k]} reaction", share))
        if self._friction and any(k != Kinematics.HELD for k in constrained):
            ledger.append(("vehicle", "friction", friction))

    def _record_line(self, rec: dict, ledger: list, j: int, ln: LinePlan, fl: LineFlow, dirs: tuple, outs: list,
                     supplies: Any, t: Any, s: Any, pa: Any, seen: set) -> tuple[Any, tuple, tuple]:
        """One discharge line's terms and signals (its start's only once: ``seen``); returns its mass flow, its
        momentum flux and its pressure thrust (vectors)."""
        dw, jd = dirs
        mdot, ve = fl.mdot, fl.v_e
        mf = (-mdot * ve * jd[0], -mdot * ve * jd[1], -mdot * ve * jd[2])
        pth = (fl.p_e - pa) * fl.A_e
        pf = (-pth * jd[0], -pth * jd[1], -pth * jd[2])
        ledger.append((ln.terminal, "momentum flux", mf))
        ledger.append((ln.terminal, "pressure thrust", pf))
        if ln.internal is not None:
            ledger.append((ln.start, "internal momentum rate",
                           (mdot * fl.v_int * dw[0], mdot * fl.v_int * dw[1], mdot * fl.v_int * dw[2])))
            prev = rec.get(f"{ln.start}.internal_momentum", _Z3)
            rec[f"{ln.start}.internal_momentum"] = tuple(prev[k] + fl.moving * fl.v_int * dw[k] for k in range(3))
        if fl.v_in is not None:
            ledger.append((ln.start, "inflow momentum", tuple(mdot * fl.v_in[k] for k in range(3))))
            rec[f"{ln.start}.mass_flow"] = mdot
        rec[f"{ln.terminal}.mass_flow"] = mdot
        rec[f"{ln.terminal}.exit_velocity"] = ve
        rec[f"{ln.terminal}.exit_pressure"] = fl.p_e
        rec[f"{ln.terminal}.thrust"] = mdot * ve + pth
        rec[f"{ln.terminal}.inlet_pressure"] = fl.p_in
        rec[f"{ln.terminal}.drive"] = fl.p_in - pa
        o = outs[ln.start_index] if ln.from_vessel else Outlet(*supplies[ln.start_index][0])
        up = o._replace(p=fl.p_start)
        for el, rise, md in zip(ln.series, fl.rises, self._emode[j]):
            rec[f"{el.name}.pressure_rise"] = rise
            rec[f"{el.name}.mass_flow"] = mdot
            if el.signals is not None:
                for key, val in el.signals(up, pa, md).items():
                    rec[f"{el.name}.{key}"] = val
            up = up._replace(p=up.p + rise)
        if ln.terminal_fns.signals is not None:
            for key, val in ln.terminal_fns.signals(o._replace(p=fl.p_in), pa, self._tmode[j]).items():
                rec[f"{ln.terminal}.{key}"] = val
        if ln.start not in seen:
            seen.add(ln.start)
            self._record_start(rec, ln, fl, o, t, s, pa)
        return mdot, mf, pf

    def _record_start(self, rec: dict, ln: LinePlan, fl: LineFlow, o: Outlet, t: Any, s: Any, pa: Any) -> None:
        """The signals of where a line starts: a vessel's head, outlet pressure and drive, or a source's own."""
        if ln.from_vessel:
            rec[f"{ln.start}.head_pressure"] = fl.p_start - o.p
            rec[f"{ln.start}.outlet_pressure"] = fl.p_start
            rec[f"{ln.start}.drive"] = fl.p_start - pa
            for key, val in self.plan.vessels[ln.start_index].fns.signals(s, self._vmode[ln.start_index]).items():
                rec[f"{ln.start}.{key}"] = val
        else:
            src = self.plan.sources[ln.start_index]
            if src.fns.signals is not None:
                for key, val in src.fns.signals(t, s, self._smode[ln.start_index]).items():
                    rec[f"{ln.start}.{key}"] = val

    def _record_jet(self, rec: dict, ledger: list, j: Any, jet: tuple, t: Any, s: Any,
                    pa: Any) -> tuple[Any, tuple, tuple]:
        """A prescribed jet's terms and signals; returns its mass flow, momentum flux and pressure thrust."""
        mdot, ve, pe, Ae, jd, T = jet
        mf = (-mdot * ve * jd[0], -mdot * ve * jd[1], -mdot * ve * jd[2])
        pth = (pe - pa) * Ae
        pf = (-pth * jd[0], -pth * jd[1], -pth * jd[2])
        ledger.append((j.name, "momentum flux", mf))
        ledger.append((j.name, "pressure thrust", pf))
        rec[f"{j.name}.mass_flow"] = mdot
        rec[f"{j.name}.exit_velocity"] = ve
        rec[f"{j.name}.thrust"] = T
        for key, val in j.fns.signals(t, s, self._jmode[self.plan.jets.index(j)]).items():
            rec[f"{j.name}.{key}"] = val
        return mdot, mf, pf


#: what :meth:`Balance.set_phase` derives from the phase (restored whole when a phase comes back)
def _phase_key(modes: Sequence[Any], kinematics: Any, descending: bool, slide: Any) -> tuple | None:
    """The key of a phase shared by every design (plain numbers), or None (a phase per design: an ensemble's)."""
    ms = tuple(modes)
    for m in ms:
        if type(m) is not int and not isinstance(m, (int, np.integer)):
            return None
    if not isinstance(kinematics, (int, np.integer)) or not isinstance(slide, (int, float)):
        return None
    return (tuple(int(m) for m in ms) if any(type(m) is not int for m in ms) else ms, int(kinematics),
            bool(descending), float(slide))


_PHASE_ATTRIBUTES = ("modes", "kinematics", "descending", "_bmode", "_force_fns", "_vmode", "_smode", "_jmode",
                     "_tmode", "_emode", "_kin", "_present", "_held_only", "slide", "_idle", "_live", "_live_all",
                     "_live_terms", "_only", "_vessel_lines", "_outlets", "_outlets_all", "_outlets_terms",
                     "_phase_key", "_lines_now")


class _Traced(NamedTuple):
    """What :class:`Balance` needs of a system to trace: the plan built over trace_ops, the initial modes."""

    plan: Plan
    mode0: tuple


def array_line(plan: Plan, mode0: Any, phase: tuple, want: str, n_states: int, designs: int) -> Any:
    """The straight line of one phase of an ensemble's balance: ``want`` ("terms", "drives", ...) traced over
    :data:`~thrustgraph.balance.straightline.array_trace_ops` and compiled for arrays of ``designs`` designs
    (:func:`~thrustgraph.balance.straightline.compile_function`). ``plan`` is the designs' plan built over
    ``array_trace_ops`` (parameters as arrays over the designs), ``phase`` the arguments of
    :meth:`Balance.set_phase` (every mode an ``int``, the constraint an ``int``, ``slide`` a float). Raises
    :class:`~thrustgraph.balance.straightline.TraceError` (or the error the code raised) when it cannot be
    traced; the caller keeps the general evaluator then."""
    bal = Balance(_Traced(plan, mode0), ops=array_trace_ops)
    bal.set_phase(*phase)
    return compile_function(lambda t, s: bal._solve(t, s, want), n_states, name=want, designs=designs)


def _as_list(y: Any) -> list:
    if type(y) is list:
        return y
    return y.tolist() if hasattr(y, "tolist") else list(y)


def _solve_line(ln: LinePlan, up: Outlet, pa: Any, tmode: Any, smodes: tuple, mfix: Any, ops: Any):
    """Mass flow through elements in series: the flow the terminal element passes at the pressure the series
    elements deliver at that same flow. A source that fixes the flow (``mfix`` > 0) sets it instead, and the
    pressure at the terminal element is whatever passes that flow; ``mfix`` = 0 passes nothing.

    One definition for one design (floats) and for an ensemble (arrays over designs, ``mfix`` and the modes
    per design): the roots come from :func:`thrustgraph.base.roots.illinois`, whose iterates for a design are those
    it gets alone, bracketed by doubling the upper end (per design) until the bracket holds the root. Returns
    ``(Flow, pressure at the terminal element's inlet, the rise across each element in series)``."""
    flow = ln.terminal_fns.flow

    def after(mdot):
        cur = up
        rises = []
        for el, md in zip(ln.series, smodes):
            r = el.rise(cur, mdot, md)
            rises.append(r)
            cur = cur._replace(p=cur.p + r)
        return cur, tuple(rises)

    def through(cur, p):
        fl = flow(cur._replace(p=p), pa, tmode)
        return fl if type(fl) is Flow else Flow(*fl)

    def packed(fl, p_in, rises):        # flat, so that ops.branch can choose per design
        return tuple(fl) + (p_in,) + rises

    def fixed(m_fix):
        """The supply delivers m_fix > 0: the terminal inlet pressure that passes it."""
        m_fix = ops.maximum(m_fix, 1e-12)   # designs that fix no flow (only evaluated over arrays): kept finite
        cur, rises = after(m_fix)
        lo, hi = pa + 0.0 * m_fix, ops.maximum(pa * 2.0, 1e5) + pa + 0.0 * m_fix
        too_much = f"components.{ln.terminal}: cannot pass the flow its supply fixes" + \
            (f" ({m_fix:.4g} kg/s)" if type(m_fix) is float else "")

        def grow(c, _):
            hi, f_hi = c
            short = f_hi < 0.0
            hi = ops.where(short, 2.0 * hi, hi)
            _refuse(ops, short & (hi > 1e12), too_much)
            return hi, ops.where(short, through(cur, hi).mdot - m_fix, f_hi)

        (hi, f_hi), _ = ops.iterate((hi, through(cur, hi).mdot - m_fix), lambda c: (c[1] >= 0.0, None), grow, 64)
        p = illinois(lambda q: through(cur, q).mdot - m_fix, lo, hi, 0.0 * m_fix - m_fix, f_hi, ops,
                     xtol=1e-12, rtol=1e-13)
        # what enters leaves: the line passes exactly the flow its supply fixes (not the root's last digit)
        return packed(through(cur, p)._replace(mdot=m_fix), p, rises)

    def none(m_fix):
        cur, rises = after(0.0 * m_fix)
        z = 0.0 * m_fix
        return packed(Flow(z, z, z, z, z), cur.p, rises)

    def free(m_fix):
        """The elements set the flow: the root of gap(mdot) = (what the terminal passes after the series
        elements at mdot) - mdot, which falls as mdot rises."""
        if not ln.series:
            return packed(through(up, up.p), up.p, ())

        def gap(mdot):
            cur, _ = after(mdot)
            return through(cur, cur.p).mdot - mdot

        z = 0.0 * m_fix
        g0 = gap(z)
        flowing = g0 > 0.0
        endless = f"components.{ln.terminal}: the line's mass flow has no finite solution"

        def grow(c, _):
            hi, g_hi = c
            more = flowing & (g_hi > 0.0)
            hi = ops.where(more, 2.0 * hi, hi)
            _refuse(ops, more & (hi > 1e9), endless)
            return hi, ops.where(more, gap(hi), g_hi)

        hi = ops.maximum(g0, 1e-6)
        (hi, g_hi), _ = ops.iterate((hi, gap(hi)), lambda c: ((g0 <= 0.0) | (c[1] <= 0.0), None), grow, 80)
        mdot = illinois(gap, z, hi, g0, g_hi, ops, xtol=1e-14, rtol=1e-13, done=ops.where(flowing, False, True))
        mdot = ops.where(flowing, mdot, z)
        cur, rises = after(mdot)
        fl = through(cur, cur.p)
        return packed(fl._replace(mdot=ops.where(flowing, mdot, fl.mdot)), cur.p, rises)

    if type(mfix) is float:             # every design alike (always so for one design)
        out = fixed(mfix) if mfix > 0.0 else (none(mfix) if mfix == 0.0 else free(mfix))
    else:
        out = ops.branch(mfix > 0.0, fixed, lambda m: ops.branch(m == 0.0, none, free, m), mfix)
    return Flow(*out[:5]), out[5], tuple(out[6:])


def _refuse(ops: Any, cond: Any, message: str) -> None:
    """Stop the flight with ``message`` when ``cond`` holds: for one design, and for an ensemble when it holds
    for any design (a line without a solution ends the whole batch, as it ends each of its single flights)."""
    ops.refuse_any(cond, IntegrationError, message)
