"""N designs of one model assembled as arrays, flown by the one balance of :mod:`thrustgraph.balance.balance`.

:class:`ArraySystem` is the array twin of :class:`thrustgraph.flight.assembly.System`: the same balance plan
(:func:`thrustgraph.balance.plan.build_plan`), built with :data:`thrustgraph.base.xp.array_ops` so that every number that
differs between designs is a numpy array of shape ``(N,)``, and evaluated by the same
:class:`~thrustgraph.balance.balance.Balance` as a single flight (the physics still comes from the plugins; this
module knows no device and restates no term of the balance). The discrete phase is explicit per design: the
mode of every moded component (integer arrays), the kinematic constraint (held on a stand, on a guide, free,
on a track) and the way a design slides along its guide or track (kinetic friction opposes it).

Examples
--------
>>> import numpy as np
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.models.model import parse_model
>>> from thrustgraph.models.designs import resolve
>>> parsed = parse_model(load_model(default_model_path()))
>>> fill = resolve(parsed, "components.bottle.fill")
>>> sysa = ArraySystem(parsed, [fill], np.array([[0.2], [0.33]]))
>>> sysa.n, sysa.state_names[6:8]
(2, ('bottle.liquid_mass', 'bottle.gas_mass'))
>>> d, aux = sysa.rhs(np.zeros(2), sysa.y0, sysa.mode0, sysa.kin0)
>>> bool(np.all(d[3] == 0)), bool(np.all(aux["breakaway"] > 0))    # held at rest, but the thrust outgrows the hold
(True, True)
>>> d, aux = sysa.rhs(np.zeros(2), sysa.y0, sysa.mode0, sysa.kin0, slide=np.ones(2))
>>> bool(np.all(d[3] > 0))                   # sliding up the guide, both accelerate at launch
True
"""

from __future__ import annotations

import dataclasses
from typing import Any, Sequence

import numpy as np

from ..balance.arrayops import vectorised
from ..balance.balance import Balance, Kinematics, array_line
from ..balance.plan import KINEMATIC, Constraint, build_plan, holding_friction
from ..balance.straightline import array_trace_ops
from ..base.errors import PluginError
from ..base.xp import array_ops
from ..kinds.component import Ambient
from ..models.designs import DesignParameter, with_values
from ..models.model import ParsedModel
from .stepkernel import phase_code

__all__ = ["ArraySystem", "Phase", "PhaseGroups", "unsupported", "IMPULSE", "HELD", "GUIDE", "FREE", "TRACK"]

HELD, GUIDE, FREE, TRACK = Kinematics.HELD, Kinematics.GUIDE, Kinematics.FREE, Kinematics.TRACK
#: Name of the quadrature state the ensemble adds: the time integral of the thrust magnitude.
IMPULSE = "ensemble.impulse"
#: Evaluations of one phase (every design in it) by the general evaluator before its straight line over arrays
#: is traced (:func:`thrustgraph.balance.balance.array_line`); 0 turns the straight lines off.
LINES_AFTER = 4


def unsupported(parsed: ParsedModel) -> str | None:
    """Why the vectorised ensemble cannot fly a model, or None when it can (every mount: held, guide, free,
    track)."""
    if parsed.launch.mount not in Kinematics.BY_MOUNT:
        return f"launch.mount {parsed.launch.mount!r}"
    for slot, cls in parsed.env_kinds.items():
        if not vectorised(cls):
            return f"environment.{slot} kind {cls.kind!r} builds no array callables"
    for n, cls in parsed.kinds.items():
        if not vectorised(cls):
            return f"components.{n} kind {cls.kind!r} builds no array callables"
    return None


def _vary(p: Any, changes: dict[str, np.ndarray]) -> Any:
    return dataclasses.replace(p, **changes) if changes else p


@dataclasses.dataclass(frozen=True)
class Phase:
    """The discrete phase of the designs as the balance takes it: each moded component's mode, the kinematic
    constraint and the way each slides along its guide or track (+1, -1, or 0: friction follows the speed),
    each an ``int`` when every design shares it, else an array; ``powered`` whether a design's thrust counts
    toward its total impulse (a component in a propulsive mode, or a prescribed jet), a bool or a bool array."""

    modes: tuple
    kin: Any
    slide: Any = 0
    powered: Any = True


class ArraySystem:
    """N designs of one parsed model: state layout, initial states and modes, and the vectorised balance.

    Parameters
    ----------
    parsed : the base model
    params : the varied parameters
    x : their SI values, shape (N, parameters)
    initial : also compute the initial states and modes per design (False for the subsets the integrator
        builds: their ``y0`` is None)
    """

    def __init__(self, parsed: ParsedModel, params: Sequence[DesignParameter], x: np.ndarray, *,
                 initial: bool = True) -> None:
        x = np.asarray(x, dtype=float).reshape(-1, len(params))
        self.parsed, self.params, self.x = parsed, tuple(params), x
        n = self.n = len(x)
        comp: dict[str, dict[str, np.ndarray]] = {}
        env: dict[str, dict[str, np.ndarray]] = {}
        launch: dict[str, np.ndarray] = {}
        for j, p in enumerate(params):
            col = x[:, j].copy()
            if p.section == "components":
                comp.setdefault(p.owner, {})[p.name] = col
            elif p.section == "environment":
                env.setdefault(p.owner, {})[p.name] = col
            else:
                launch[p.name] = col
        self._comp_changes, self._env_changes, self._launch_changes = comp, env, launch
        self.kp = {nm: _vary(parsed.params[nm], comp.get(nm, {})) for nm in parsed.model.components}
        self.ep = {slot: _vary(parsed.env_params[slot], env.get(slot, {})) for slot in parsed.env_params}
        L = _vary(parsed.launch, launch)
        self.launch = L
        medium = parsed.env_kinds["medium"].build(self.ep["medium"], array_ops)
        gravity = parsed.env_kinds["gravity"].build(self.ep["gravity"], array_ops)
        self.medium, self.gravity = medium, gravity
        alt = np.broadcast_to(np.asarray(L.altitude, dtype=float), (n,))
        rho, pa, Ta, *_ = medium(alt, np.zeros(n))
        amb = Ambient(pressure=pa, temperature=Ta, density=rho)
        self.amb = amb
        el, az = np.asarray(L.elevation, dtype=float), np.asarray(L.azimuth, dtype=float)
        ce = np.cos(el)
        u = [ce * np.cos(az), ce * np.sin(az), np.sin(el)]
        # cos(pi/2) is 6e-17: keep a vertical guide exactly vertical, as the scalar assembly does
        self.u = tuple(np.broadcast_to(np.where(np.abs(c) < 1e-15, 0.0, c), (n,)).copy() for c in u)
        self.guide_length = np.broadcast_to(np.asarray(L.guide_length, dtype=float), (n,)).copy()
        self.mu = L.friction
        self.follow = L.attitude == "follow-wind"
        self.vmin = np.maximum(np.asarray(L.min_follow_speed, dtype=float), 1e-9)
        self.x0 = (np.zeros(n), np.zeros(n), alt.copy())

        # State layout: kinematics, component states in file order, then the impulse quadrature.
        names = list(KINEMATIC)
        order = list(parsed.model.components)
        slices: dict[str, tuple[int, int]] = {}
        y0 = [np.zeros(n), np.zeros(n), alt.copy()]
        sp = np.broadcast_to(np.asarray(L.speed, dtype=float), (n,))
        y0 += [sp * self.u[0], sp * self.u[1], sp * self.u[2]]
        self.moded: list[str] = []
        self.modes: dict[str, tuple] = {}
        for nm in order:
            cls = parsed.kinds[nm]
            if cls.states:
                slices[nm] = (len(names), len(cls.states))
                names.extend(f"{nm}.{sv.name}" for sv in cls.states)
                if initial:     # the subsets the integrator builds carry no initial state
                    init = cls.initial_state(self.kp[nm], amb)
                    y0.extend(np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy() for v in init)
            if cls.modes:
                self.moded.append(nm)
                self.modes[nm] = cls.modes
        names.append(IMPULSE)
        y0.append(np.zeros(n))
        self.state_names = tuple(names)
        self.slices = slices
        self.y0 = np.array(y0) if initial else None
        self.kin0 = np.full(n, Kinematics.BY_MOUNT[parsed.launch.mount], dtype=np.int8)
        self.mode0 = np.zeros((len(self.moded), n), dtype=np.int8)
        if initial:
            self._initial_modes()
        # the straight lines of the phases are traced once over the designs of the system built from the
        # model (the root), and shared by its subsets, each reading its own rows of the values per design
        self.root: ArraySystem = self
        self.root_rows: np.ndarray | None = None
        self._lines: dict = {}
        #: why a phase's straight line could not be traced (for tests and diagnosis)
        self.untraced: dict = {}
        self._trace_plan = None

        self._build()

    def _build(self, now: bool = True) -> None:
        """The plan from the plugins' callables, built over this system's arrays of designs, and its balance:
        ``now``, or when first needed (a subset whose phase has a straight line may never need them)."""
        self.slot = {nm: k for k, nm in enumerate(self.moded)}
        self._phase_set: "Phase | None" = None   # the phase the balance is set to (see _use)
        self._per_design: dict = {}              # each straight line's values per design, for these rows
        self._made: tuple | None = None          # (plan, balance)
        self._split: PhaseGroups | None = None   # its designs grouped by phase
        if now:
            self._make()
            self.has_jets = bool(self.plan.jets)
            # grouping designs by phase pays where flows are solved (a line's regimes, its head coupling, for
            # every design of a mixed batch); a vehicle driven by prescribed jets alone evaluates a mixed batch
            # for less than the gathering and scattering of groups costs (measured: benchmarks/ensemble_speed.py)
            self.grouped = bool(self.plan.lines)

    def _make(self) -> tuple:
        if self._made is None:
            parsed = self.parsed
            L = self.launch
            constraint = Constraint(mount=parsed.launch.mount, u=self.u, x0=self.x0, friction=L.friction,
                                    guide_length=self.guide_length, follow_wind=self.follow,
                                    min_follow_speed=self.vmin, azimuth=L.azimuth,
                                    static_friction=holding_friction(L))
            plan = build_plan(parsed, self.kp, self.ep, array_ops, self.amb, self.slices, self.moded, constraint)
            self._made = (plan, None)        # the balance reads the plan as it is made
            self._made = (plan, Balance(self, ops=array_ops))
            if self.root is not self:
                self._same_events()
        return self._made

    def _same_events(self) -> None:
        """A subset's plan declares the events of the whole system's (the integrator indexes them)."""
        mine, whole = list(self.plan.events), list(self.root.plan.events)
        if [(c, e.name) for c, e in mine] != [(c, e.name) for c, e in whole]:
            had, has = {(c, e.name) for c, e in whole}, {(c, e.name) for c, e in mine}
            c, name = sorted(had ^ has)[0]
            kind = self.parsed.kinds[c]
            raise PluginError(f"kind {kind.kind!r} (component {c!r}) declares the event {name!r} for some designs "
                              "and not for others: a kind's events may not depend on its parameter values. Fix: "
                              "declare the event always, with an event function that never crosses zero where "
                              "it does not apply (the plugin's author)")

    @property
    def plan(self) -> Any:
        """The designs' balance plan (:func:`thrustgraph.balance.plan.build_plan` over arrays)."""
        return self._make()[0]

    @property
    def balance(self) -> Balance:
        """The one balance over this system's arrays of designs."""
        return self._make()[1]

    @property
    def events(self) -> list:
        """The components' events, ``(component, EventSpec)``, from the plan."""
        return list(self.plan.events)

    @property
    def fixed_mass(self) -> Any:
        return self.plan.fixed_mass

    # ------------------------------------------------------------------
    def _initial_modes(self) -> None:
        """Initial mode of each moded component, per design (kinds decide it from scalar parameters)."""
        parsed = self.parsed
        for k, nm in enumerate(self.moded):
            cls = parsed.kinds[nm]
            names = [m.name for m in cls.modes]
            changes = self._comp_changes.get(nm, {})
            if not changes and not any(p.section != "components" for p in self.params):
                self.mode0[k, :] = names.index(cls.initial_mode(parsed.params[nm], parsed.ambient))
                continue
            base = parsed.params[nm]
            pa, Ta, rho = (np.broadcast_to(np.asarray(v, dtype=float), (self.n,))
                           for v in (self.amb.pressure, self.amb.temperature, self.amb.density))
            fields = list(changes)
            # the kind is asked once per distinct row of (its varied fields, ambient): a grid repeats them
            rows = np.column_stack([changes[f] for f in fields] + [pa, Ta, rho])
            uniq, inverse = np.unique(rows, axis=0, return_inverse=True)
            picked = np.empty(len(uniq), dtype=np.int8)
            for u, row in enumerate(uniq):
                p = with_values(base, {f: float(v) for f, v in zip(fields, row)}) if fields else base
                amb = Ambient(pressure=float(row[-3]), temperature=float(row[-2]), density=float(row[-1]))
                picked[u] = names.index(cls.initial_mode(p, amb))
            self.mode0[k, :] = picked[inverse.reshape(-1)]

    def subset(self, idx: np.ndarray) -> "ArraySystem":
        """The same model for some of the designs (rows ``idx``), for compaction and event location.

        The same system as ``ArraySystem(parsed, params, x[idx], initial=False)`` (no initial states),
        made by taking rows of this one's per-design arrays (every one is computed design by design) and
        building the plugins' callables anew when first needed (the integrator asks for a subset at most steps:
        one per step with events, one per group of designs in one phase).
        """
        idx = np.asarray(idx)
        rows = idx if self.root_rows is None else self.root_rows[idx]
        new = object.__new__(ArraySystem)
        new.__dict__.update(self.__dict__)        # the state layout and modes are shared
        new.x = self.x[idx]
        n = new.n = len(new.x)

        def taken(changes: dict) -> dict:
            return {owner: {f: v[idx] for f, v in ch.items()} for owner, ch in changes.items()}
        new._comp_changes = taken(self._comp_changes)
        new.kp = {nm: _vary(self.parsed.params[nm], new._comp_changes[nm]) if nm in new._comp_changes else p
                  for nm, p in self.kp.items()}
        if self._env_changes:
            new._env_changes = taken(self._env_changes)
            new.ep = {slot: _vary(self.parsed.env_params[slot], new._env_changes.get(slot, {}))
                      for slot in self.parsed.env_params}
            new.medium = self.parsed.env_kinds["medium"].build(new.ep["medium"], array_ops)
            new.gravity = self.parsed.env_kinds["gravity"].build(new.ep["gravity"], array_ops)
        if self._launch_changes:
            new._launch_changes = {f: v[idx] for f, v in self._launch_changes.items()}
            new.launch = _vary(self.parsed.launch, new._launch_changes)
            new.mu = new.launch.friction
            if np.ndim(self.vmin):
                new.vmin = self.vmin[idx]
        a = self.amb
        new.amb = Ambient(*(v[idx] if np.ndim(v) else v for v in (a.pressure, a.temperature, a.density)))
        new.u = tuple(c[idx] for c in self.u)
        new.guide_length = self.guide_length[idx]
        new.x0 = tuple(c[idx] for c in self.x0)
        new.y0 = None
        new.kin0 = np.full(n, Kinematics.BY_MOUNT[self.parsed.launch.mount], dtype=np.int8)
        new.mode0 = np.zeros((len(self.moded), n), dtype=np.int8)
        new.root_rows = rows
        new._build(now=False)       # its plan is built when first needed (and its events checked then)
        return new

    def index(self, name: str) -> int:
        return self.state_names.index(name)

    def propulsive(self, modes: np.ndarray) -> np.ndarray:
        """True per design where some component is in a propulsive mode."""
        out = np.zeros(modes.shape[1], dtype=bool)
        for k, nm in enumerate(self.moded):
            flags = np.array([m.propulsive for m in self.modes[nm]])
            out |= flags[modes[k]]
        return out

    def masses(self, Y: np.ndarray) -> np.ndarray:
        """The vehicle's mass per design (kg), from the balance."""
        return np.broadcast_to(np.asarray(self.balance.mass(list(Y)), dtype=float), (self.n,)).copy()

    def snapshot(self, t: np.ndarray, Y: np.ndarray, phase: "Phase") -> dict:
        """Every term and signal of the balance at states ``Y`` (:meth:`Balance.evaluate` over the designs),
        the balance set to ``phase``; what a trigger watching a component's signal reads."""
        self._use(phase)
        return self.balance.evaluate(t, list(Y))

    def pressures(self, Y: np.ndarray, modes: np.ndarray) -> np.ndarray | None:
        """Largest vessel pressure per design (Pa), or None without vessels."""
        s = list(Y)
        best = None
        for v in self.plan.vessels:
            mode = modes[v.slot] if v.slot >= 0 else 0
            p = v.fns.signals(s, mode).get("pressure")
            if p is not None:
                best = p if best is None else np.maximum(best, p)
        return best

    def phase(self, modes: np.ndarray, kin: np.ndarray, slide: np.ndarray | None = None) -> "Phase":
        """The discrete phase as the balance takes it, worked out once (a step's stages share it): each slot's
        mode as an ``int`` when every design shares it (so a kind can skip its per-design selections), else
        the integer array; the constraint and the way each design slides (``slide``, None: 0 for all) likewise."""
        shared = []
        for k in range(len(self.moded)):
            m = modes[k]
            lo, hi = int(m.min()), int(m.max())
            shared.append(lo if lo == hi else m)
        lo, hi = int(kin.min()), int(kin.max())
        way: Any = 0
        if slide is not None and len(slide):
            s_lo, s_hi = float(slide.min()), float(slide.max())
            way = s_lo if s_lo == s_hi else slide
        powered: Any = True if self.has_jets else self.propulsive(modes)
        if not isinstance(powered, bool) and len(powered):
            powered = bool(powered[0]) if powered.all() or not powered.any() else powered
        return Phase(tuple(shared), lo if lo == hi else kin, way, powered)

    def frozen(self, modes: np.ndarray) -> bool:
        """Whether every vessel is in a mode without outflow in every design: their states are then held, so
        nothing a vessel reports (pressure...) can change."""
        for v in self.plan.vessels:
            if v.slot < 0:
                return False
            m = modes[v.slot]
            if not all(not self.modes[v.name][int(k)].outflow for k in np.unique(m)):
                return False
        return bool(self.plan.vessels)

    def _use(self, phase: "Phase") -> None:
        """Set the balance to ``phase`` unless it already is (a step's stages share one Phase object)."""
        if self._phase_set is not phase:
            self.balance.set_phase(phase.modes, phase.kin, False, phase.slide)
            self._phase_set = phase

    def line(self, phase: "Phase", want: str, n_states: int) -> Any:
        """The straight line of ``want`` for ``phase`` (every design in one mode of every component, one
        constraint, one way of sliding), traced over arrays once the phase has been evaluated
        :data:`LINES_AFTER` times, shared by every subset of the root system; None while the general
        evaluator serves (the phase differs between designs, it is not yet traced, or cannot be)."""
        if not LINES_AFTER or not _uniform(phase):
            return None
        root = self.root
        key = (phase.modes, phase.kin, float(phase.slide), want, n_states)
        fn = root._lines.get(key)
        if fn is None:
            count = root._lines[("count",) + key] = root._lines.get(("count",) + key, 0) + 1
            if count < LINES_AFTER:
                return None
            try:
                if root._trace_plan is None:
                    c = root.plan.constraint
                    root._trace_plan = build_plan(root.parsed, root.kp, root.ep, array_trace_ops, root.amb,
                                                  root.slices, root.moded, c)
                fn = array_line(root._trace_plan, tuple(0 for _ in root.moded),
                                (list(phase.modes), phase.kin, False, float(phase.slide)), want, n_states, root.n)
            except Exception as exc:    # noqa: BLE001 (any failure to trace keeps the general evaluator)
                root.untraced[key] = f"{type(exc).__name__}: {exc}"
                fn = False
            root._lines[key] = fn
        return fn or None

    def per_design(self, line: Any) -> tuple:
        """The values per design a straight line reads, for this system's designs (rows of the root's)."""
        got = self._per_design.get(id(line))
        if got is None:
            rows = self.root_rows
            got = self._per_design[id(line)] = tuple(line.per_design) if rows is None else \
                tuple(a[rows] for a in line.per_design)
        return got

    def drives(self, t: np.ndarray, Y: np.ndarray, phase: "Phase") -> dict | None:
        """The drive pressures (name -> Pa) the events read, from the one balance."""
        line = self.line(phase, "drives", len(Y))
        if line is not None:
            return line(t, list(Y), self.per_design(line))
        self._use(phase)
        return self.balance.drives(t, list(Y))

    # ------------------------------------------------------------------
    def rhs(self, t: np.ndarray, Y: np.ndarray, modes: np.ndarray, kin: np.ndarray,
            out: np.ndarray | None = None, phase: "Phase | None" = None, aux: bool = True,
            slide: np.ndarray | None = None) -> tuple[np.ndarray, dict | None]:
        """Derivatives of the states (shape of ``Y``, written into ``out`` when given) and, in ``aux``:
        ``drive`` (name -> Pa), ``accel`` (acceleration magnitude), ``thrust`` (thrust magnitude), ``mass``,
        ``singular`` (designs whose head coupling has no solution), ``phase`` (the phase it was set to), and
        ``breakaway`` and ``pull`` of a vehicle at rest on a guide or track (:meth:`Balance.terms`);
        ``aux=False`` skips those (None instead), for the inner stages of a step, which use the derivatives
        alone.

        Every term comes from :class:`~thrustgraph.balance.balance.Balance`, the single flight's balance, over arrays;
        the last state is the impulse quadrature (the thrust magnitude in powered phases, as a single flight's
        total impulse counts it). ``phase`` is :meth:`phase` of ``modes``, ``kin`` and ``slide`` (worked out here
        when not given).
        """
        if phase is None:
            phase = self.phase(modes, kin, slide)
        if LINES_AFTER and self.grouped and self.n > 1 and not _uniform(phase):
            # designs in several phases: evaluated phase by phase (each kind runs its own regime alone)
            if self._split is None:
                self._split = PhaseGroups(smallest=1)
            return self._split.rhs(self, t, Y, modes, kin, np.zeros(self.n) if slide is None else slide, out=out,
                                   aux=aux, phase=phase)
        return self.evaluate(t, Y, phase, out, aux)

    def evaluate(self, t: np.ndarray, Y: np.ndarray, phase: "Phase", out: np.ndarray | None = None,
                 aux: bool = True) -> tuple[np.ndarray, dict | None]:
        """:meth:`rhs` in one call of the balance, whatever the designs' phases (the phase's straight line when
        every design shares it and it is traced, else the general evaluator)."""
        line = self.line(phase, "terms", len(Y))
        if line is not None:
            terms = line(t, list(Y), self.per_design(line))
        else:
            self._use(phase)
            terms = self.balance.terms(t, list(Y))
        if out is None:
            out = np.empty_like(Y)
        d = terms["derivs"]
        for k in range(len(d)):
            out[k] = d[k]
        tx, ty, tz = terms["thrust"]
        thrust = np.sqrt(tx * tx + ty * ty + tz * tz)
        powered = phase.powered
        out[-1] = thrust if powered is True else (0.0 if powered is False else np.where(powered, thrust, 0.0))
        if not aux:
            return out, None
        ax, ay, az = terms["accel"]
        accel = np.sqrt(ax * ax + ay * ay + az * az)
        singular = np.broadcast_to(np.asarray(terms["singular"], dtype=bool), (self.n,))
        return out, {"drive": terms["drive"], "accel": accel, "thrust": thrust, "mass": terms["mass"],
                     "singular": singular, "phase": phase, "breakaway": terms["breakaway"], "pull": terms["pull"]}


def _uniform(phase: Phase) -> bool:
    """Whether every design is in the phase: each mode, the constraint and the way it slides one number."""
    return isinstance(phase.kin, int) and not isinstance(phase.slide, np.ndarray) and \
        all(isinstance(m, int) for m in phase.modes)


class PhaseGroups:
    """The designs of an :class:`ArraySystem` grouped by phase (the mode of every moded component, the
    kinematic constraint and the way a design slides along it), each large group evaluated as a system of its own in which every design shares the
    phase.

    Over designs in several phases the one balance evaluates every regime present for every design and
    chooses per design (``ops.branch``, ``ops.where``): a batch in mixed modes costs about four times a
    uniform one. A group shares its phase, so the kinds take their own regime alone; a design's derivatives
    are those it gets in any batch (the balance's numbers for a design do not depend on the others:
    ``tests/test_ensemble.py``). Groups smaller than ``smallest`` designs are evaluated together, in mixed
    phases (each group costs a call of the balance). The groups, and each group's system
    (:meth:`ArraySystem.subset`), are kept while the designs' phases do not change.

    Examples
    --------
    >>> import numpy as np
    >>> from thrustgraph.models.modelfile import load_model, default_model_path
    >>> from thrustgraph.models.model import parse_model
    >>> from thrustgraph.models.designs import resolve
    >>> parsed = parse_model(load_model(default_model_path()))
    >>> sysa = ArraySystem(parsed, [resolve(parsed, "components.bottle.fill")], np.array([[0.2], [0.3], [0.4]]))
    >>> modes = np.array([[0, 1, 0]], dtype=np.int8)
    >>> groups = PhaseGroups(smallest=1)
    >>> d, aux = groups.rhs(sysa, np.zeros(3), sysa.y0, modes, sysa.kin0, np.zeros(3))
    >>> bool(np.array_equal(d, sysa.rhs(np.zeros(3), sysa.y0, modes, sysa.kin0)[0]))
    True
    """

    def __init__(self, smallest: int = 64) -> None:
        self.smallest = smallest
        self._sysa: ArraySystem | None = None
        self._code: np.ndarray | None = None
        self._groups: list[tuple[np.ndarray, ArraySystem]] = []
        self._keys: list[int] = []
        self._phases: list[Phase] = []

    def split(self, sysa: ArraySystem, modes: np.ndarray, kin: np.ndarray, slide: np.ndarray) -> list | None:
        """The groups ``[(rows, system, phase), ...]`` of the designs of ``sysa`` in phases ``modes``, ``kin``,
        ``slide``, or None when every design shares its phase (one call of the balance covers them)."""
        n = sysa.n
        if n == 0 or not sysa.grouped:
            return None
        code, uniform, same = phase_code(kin, slide, modes, self._code if self._sysa is sysa else None)
        if uniform:
            return None
        if not same:
            old = {} if self._sysa is not sysa else {int(c): (rows, sub) for c, (rows, sub) in
                                                      zip(self._keys, self._groups)}
            order = np.argsort(code, kind="stable")
            sc = code[order]
            cuts = np.flatnonzero(sc[1:] != sc[:-1]) + 1
            starts = np.concatenate([[0], cuts])
            ends = np.concatenate([cuts, [n]])
            big, rest = [], []
            for a, b in zip(starts, ends):
                (big if b - a >= self.smallest else rest).append((int(sc[a]), np.sort(order[a:b])))
            if rest:
                big.append((-1, np.sort(np.concatenate([r for _, r in rest]))))
            if len(big) == 1:
                self._sysa, self._code, self._groups, self._keys, self._phases = sysa, code, [], [], []
                return None
            groups, keys = [], []
            for c, rows in big:
                prev = old.get(c)
                sub = prev[1] if prev is not None and np.array_equal(prev[0], rows) else sysa.subset(rows)
                groups.append((rows, sub))
                keys.append(c)
            self._sysa, self._code, self._groups, self._keys = sysa, code, groups, keys
            # the code holds each design's whole phase: the groups' phases last as long as the groups
            self._phases = [sub.phase(modes[:, rows], kin[rows], slide[rows]) for rows, sub in groups]
        if not self._groups:
            return None
        return [(rows, sub, ph) for (rows, sub), ph in zip(self._groups, self._phases)]

    def rhs(self, sysa: ArraySystem, t: np.ndarray, Y: np.ndarray, modes: np.ndarray, kin: np.ndarray,
            slide: np.ndarray, out: np.ndarray | None = None, aux: bool = True,
            phase: "Phase | None" = None, drives: bool = True, groups: Any = "split") -> tuple[np.ndarray, dict | None]:
        """:meth:`ArraySystem.rhs` of ``sysa``, evaluated group by group when the designs' phases differ; the
        auxiliary outputs are gathered per design (``phase`` the phase of all the designs). A drive some groups
        do not evaluate (their lines pass nothing and no event of theirs reads it) is evaluated for them
        (:meth:`ArraySystem.drives`), as a batch in mixed phases gives it for every design; ``drives=False``
        leaves it 0 there, as the ensemble's events read a drive that is not evaluated (only the designs whose
        events read it need it). ``groups``: what :meth:`split` returned for these phases (the stages of a step
        share them: split once), else they are split here."""
        if isinstance(groups, str):
            groups = self.split(sysa, modes, kin, slide)
        if groups is None:
            return sysa.evaluate(t, Y, sysa.phase(modes, kin, slide) if phase is None else phase, out, aux)
        n = sysa.n
        if out is None:
            out = np.empty_like(Y)
        t = np.broadcast_to(np.asarray(t, dtype=float), (n,))
        auxes = []
        for rows, sub, ph in groups:
            # take and a scatter row by row: 4-7 times faster than Y[:, rows] and out[:, rows] = d (measured)
            d, a = sub.rhs(t[rows], Y.take(rows, axis=1), modes.take(rows, axis=1), kin[rows], phase=ph, aux=aux,
                           slide=slide[rows])
            for k in range(len(out)):
                out[k][rows] = d[k]
            auxes.append(a)
        if not aux:
            return out, None
        merged: dict[str, Any] = {"drive": {}, "phase": phase if phase is not None else
                                  sysa.phase(modes, kin, slide)}
        for key, dtype in (("accel", float), ("thrust", float), ("mass", float), ("singular", bool),
                           ("breakaway", float), ("pull", float)):
            full = np.zeros(n, dtype=dtype)
            for (rows, _, _), a in zip(groups, auxes):
                full[rows] = np.broadcast_to(np.asarray(a[key], dtype=dtype), (len(rows),))
            merged[key] = full
        drive = merged["drive"]
        for (rows, _, _), a in zip(groups, auxes):
            for name, v in a["drive"].items():
                if name not in drive:
                    drive[name] = np.zeros(n)
                drive[name][rows] = np.broadcast_to(np.asarray(v, dtype=float), (len(rows),))
        if drives:
            for (rows, sub, ph), a in zip(groups, auxes):
                if set(drive) - set(a["drive"]):
                    more = sub.drives(t[rows], Y[:, rows], ph) or {}
                    for name in set(drive) - set(a["drive"]):
                        if name in more:
                            drive[name][rows] = np.broadcast_to(np.asarray(more[name], dtype=float), (len(rows),))
        return out, merged
