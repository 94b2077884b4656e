"""The balance plan: one vehicle, assembled into named records that every evaluator reads.

Assembly (:mod:`thrustgraph.flight.assembly` for one design, :mod:`thrustgraph.flight.arraysystem` for many) asks each
component kind to build its callables once, and :func:`build_plan` arranges them into a :class:`Plan`:
the bodies, the vessels, the sources, the prescribed jets, the discharge lines (a vessel or a source, the
elements in series, the terminal element that reaches the outside), the environment and the kinematic
constraint of the mount. The plan holds values and callables only; the arithmetic of the momentum balance
lives in :mod:`thrustgraph.balance.balance`, which reads the plan's fields by name, the same way for one design
(floats) and for an ensemble (numpy arrays of designs).

This module may import :mod:`thrustgraph.kinds.component`, :mod:`thrustgraph.base.errors` and
:mod:`thrustgraph.balance.vectors`; it knows no device.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.flight.assembly import assemble
>>> plan = assemble(load_model(default_model_path())).plan
>>> [(ln.start, ln.terminal, ln.outlet_aft) for ln in plan.lines]
[('bottle', 'neck', True)]
>>> plan.constraint.mount, [v.name for v in plan.vessels]
('guide', ['bottle'])
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Mapping, Sequence

from ..kinds.component import BodyFns, EventSpec, FlowFns, JetFns, Mode, SourceFns, VolumeFns
from ..base.errors import ModelError

__all__ = ["KINEMATIC", "ACCUMULATORS", "AFT", "BodyPlan", "VesselPlan", "SourcePlan", "JetPlan", "Element", "LinePlan", "Constraint",
           "Owner", "Plan", "build_plan"]

#: The kinematic states that lead every state vector.
KINEMATIC = ("position.x", "position.y", "position.z", "velocity.x", "velocity.y", "velocity.z")
#: The closure-audit accumulators that end a single flight's state vector.
ACCUMULATORS = ("audit.mass_out", "audit.exhaust_momentum.x", "audit.exhaust_momentum.y",
                "audit.exhaust_momentum.z", "audit.impulse.x", "audit.impulse.y", "audit.impulse.z",
                "audit.internal_momentum_change.x", "audit.internal_momentum_change.y",
                "audit.internal_momentum_change.z")

#: The body-frame direction straight aft (opposite the body axis).
AFT = (-1.0, 0.0, 0.0)


@dataclass(frozen=True)
class BodyPlan:
    """A body: fixed mass and an optional force (``force(air)``, or ``force_state(t, s, mode, air)`` when it has
    states or modes). ``slot`` is its index among the moded components (-1 without modes)."""

    name: str
    fns: BodyFns
    slot: int

    @property
    def force(self) -> Callable | None:
        return self.fns.force_state or self.fns.force

    @property
    def stateful(self) -> bool:
        return self.fns.force_state is not None


@dataclass(frozen=True)
class VesselPlan:
    """A volume that discharges: its callables, mode slot, and outlet direction (body frame)."""

    name: str
    fns: VolumeFns
    slot: int

    @property
    def outlet_dir(self) -> tuple[float, float, float]:
        return tuple(self.fns.outlet_dir)  # type: ignore[return-value]


@dataclass(frozen=True)
class SourcePlan:
    """Fluid entering the vehicle from outside (an inlet, a supply hose)."""

    name: str
    fns: SourceFns
    slot: int


@dataclass(frozen=True)
class JetPlan:
    """A prescribed jet: its callables, mode slot and exhaust direction (body frame)."""

    name: str
    fns: JetFns
    slot: int

    @property
    def aft(self) -> bool:
        return tuple(self.fns.jet_dir) == AFT


@dataclass(frozen=True)
class Element:
    """A flow element in series on a line (a pump, a valve, a hose's loss): ``rise(up, mdot, mode)``."""

    name: str
    rise: Callable
    signals: Callable | None
    slot: int


@dataclass(frozen=True)
class LinePlan:
    """One discharge path: a vessel or a source -> elements in series -> the terminal element -> outside.

    ``start_index`` indexes :attr:`Plan.vessels` when ``from_vessel``, else :attr:`Plan.sources`;
    ``terminal`` is the element that reaches the surroundings, with ``flow(up, p_down, mode)``.
    ``outlet_dir`` (the direction from the vessel's contents toward its outlet) and ``jet_dir`` are body-frame
    directions; ``outlet_aft`` and ``jet_aft`` say whether they are straight aft (no frame needed).
    ``internal`` is the vessel's internal-momentum callable, ``inflow`` the source's entering-velocity callable
    (each None when absent). ``members`` names every component on the line.
    """

    start: str
    from_vessel: bool
    start_index: int
    terminal: str
    terminal_fns: FlowFns
    terminal_slot: int
    series: tuple[Element, ...]
    outlet_dir: tuple[float, float, float]
    jet_dir: tuple[float, float, float]
    internal: Callable | None
    inflow: Callable | None

    @property
    def outlet_aft(self) -> bool:
        return self.outlet_dir == AFT

    @property
    def jet_aft(self) -> bool:
        return self.jet_dir == AFT

    @property
    def members(self) -> tuple[str, ...]:
        return (self.start, self.terminal) + tuple(e.name for e in self.series)


@dataclass(frozen=True)
class Constraint:
    """The mount's kinematic constraint and the attitude rule (SI; arrays over designs in an ensemble).

    ``mount`` is "held", "guide", "free" or "track"; ``u`` the guide or track direction (world frame, unit);
    ``x0`` the launch point; ``friction`` the coefficient along the guide or track while the vehicle slides,
    ``static_friction`` the one that holds it at rest (:func:`holding_friction`); ``follow_wind`` whether the
    body axis turns into the relative wind in free flight above ``min_follow_speed``; ``azimuth`` fixes the
    body's lateral axes when the axis is vertical.
    """

    mount: str
    u: tuple[Any, Any, Any]
    x0: tuple[Any, Any, Any]
    friction: Any
    guide_length: Any
    follow_wind: bool
    min_follow_speed: Any
    azimuth: Any
    static_friction: Any


def holding_friction(launch: Any) -> Any:
    """The static friction coefficient of the parsed launch settings (floats or arrays over designs): its own
    ``static_friction``, or where that is absent the sliding ``friction`` (one coefficient for both).

    >>> from types import SimpleNamespace
    >>> holding_friction(SimpleNamespace(friction=0.3, static_friction=None))
    0.3
    >>> holding_friction(SimpleNamespace(friction=0.3, static_friction=0.5))
    0.5
    """
    return launch.friction if launch.static_friction is None else launch.static_friction


@dataclass(frozen=True)
class Owner:
    """A component that carries states, in state-layout order: ``role`` and index into its plan list."""

    role: str
    index: int
    name: str


@dataclass(frozen=True)
class Plan:
    """Everything the balance reads: named records, no positional payloads.

    ``moded`` names the components with modes in slot order and ``modes`` their declared modes; ``owners``
    the components with states in layout order; ``fixed_mass`` the bodies' mass (kg, a float or an array).
    """

    bodies: tuple[BodyPlan, ...]
    vessels: tuple[VesselPlan, ...]
    sources: tuple[SourcePlan, ...]
    jets: tuple[JetPlan, ...]
    lines: tuple[LinePlan, ...]
    owners: tuple[Owner, ...]
    fixed_mass: Any
    medium: Callable
    gravity: Callable
    constraint: Constraint
    moded: tuple[str, ...]
    modes: Mapping[str, tuple[Mode, ...]]
    events: tuple[tuple[str, EventSpec], ...] = ()

    @property
    def forces(self) -> tuple[BodyPlan, ...]:
        """The bodies that apply a force."""
        return tuple(b for b in self.bodies if b.force is not None)


def build_plan(parsed: Any, params: Mapping[str, Any], env_params: Mapping[str, Any], ops: Any, amb: Any,
               slices: Mapping[str, tuple[int, int]], moded: Sequence[str], constraint: Constraint) -> Plan:
    """Ask every component kind to build its callables and arrange them into a :class:`Plan`.

    ``params`` maps each component to its parameter dataclass (fields may be arrays over designs when ``ops``
    is the array namespace), ``slices`` gives each state-carrying component its (offset, count) in the state
    vector, ``moded`` the components with modes in slot order.
    """
    order = list(parsed.model.components)
    slot = {n: k for k, n in enumerate(moded)}
    bodies: list[BodyPlan] = []
    vessels: list[VesselPlan] = []
    sources: list[SourcePlan] = []
    jets: list[JetPlan] = []
    flows: dict[str, FlowFns] = {}
    events: list[tuple[str, EventSpec]] = []
    for n in order:
        cls, p = parsed.kinds[n], params[n]
        i = slices.get(n, (-1, 0))[0]
        role = cls.role
        s = slot.get(n, -1)
        if role == "body":
            fns = cls.build_body(p, ops, i, amb) if cls.states else cls.build_body(p, ops)
            bodies.append(BodyPlan(n, fns, s))
        elif role == "volume":
            vessels.append(VesselPlan(n, cls.build_volume(p, i, ops, amb), s))
        elif role == "jet":
            jets.append(JetPlan(n, cls.build_jet(p, i, ops, amb), s))
        elif role == "source":
            sources.append(SourcePlan(n, cls.build_source(p, i, ops, amb), s))
        elif role == "flow":
            if cls.takes_approach_area:
                up = list(parsed.graph.predecessors(n))
                # only a volume's single outlet: with several, the contents approach all of them at once
                sole = len(up) == 1 and parsed.kinds[up[0]].role == "volume" and parsed.graph.out_degree(up[0]) == 1
                area = parsed.kinds[up[0]].approach_area(params[up[0]]) if sole else None
                flows[n] = cls.build_flow(p, ops, approach_area=area)
            else:
                flows[n] = cls.build_flow(p, ops)
        built = {"body": bodies, "volume": vessels, "jet": jets, "source": sources}.get(role)
        fns = flows.get(n) if role == "flow" else (built[-1].fns if built else None)
        if fns is not None:
            events.extend((n, e) for e in fns.events)
    fixed_mass: Any = 0.0
    for b in bodies:
        fixed_mass = fixed_mass + b.fns.mass

    lines = tuple(_lines(parsed, order, flows, slot, vessels, sources))
    owners = []
    index = {("body", b.name): k for k, b in enumerate(bodies)}
    index.update({("volume", v.name): k for k, v in enumerate(vessels)})
    index.update({("jet", j.name): k for k, j in enumerate(jets)})
    for n in sorted(slices, key=lambda m: slices[m][0]):
        role = parsed.kinds[n].role
        if (role, n) not in index:
            raise ModelError(f"components.{n}", f"a {role} cannot carry states in this release",
                             "this is a plugin bug; report it to its author")
        owners.append(Owner(role, index[(role, n)], n))
    medium = parsed.env_kinds["medium"].build(env_params["medium"], ops)
    gravity = parsed.env_kinds["gravity"].build(env_params["gravity"], ops)
    return Plan(bodies=tuple(bodies), vessels=tuple(vessels), sources=tuple(sources), jets=tuple(jets),
                lines=lines, owners=tuple(owners), fixed_mass=fixed_mass, medium=medium, gravity=gravity,
                constraint=constraint, moded=tuple(moded),
                modes={n: parsed.kinds[n].modes for n in moded}, events=tuple(events))


def _lines(parsed: Any, order: Sequence[str], flows: Mapping[str, FlowFns], slot: Mapping[str, int],
           vessels: Sequence[VesselPlan], sources: Sequence[SourcePlan]):
    """Walk each path from a vessel or source to the element that reaches the outside."""
    graph = parsed.graph
    vindex = {v.name: k for k, v in enumerate(vessels)}
    sindex = {s.name: k for k, s in enumerate(sources)}
    for n in order:
        role = parsed.kinds[n].role
        if role not in ("volume", "source"):
            continue
        for first in graph.successors(n):
            chain = [first]
            while parsed.kinds[chain[-1]].role == "flow":
                nxt = list(graph.successors(chain[-1]))
                if parsed.kinds[nxt[0]].role != "flow":
                    break
                chain.append(nxt[0])
            terminal = chain[-1]
            if flows[terminal].flow is None:
                raise ModelError(f"components.{terminal}", f"({parsed.kinds[terminal].kind}) cannot discharge to the "
                                 "surroundings", f"put a nozzle after {terminal!r}")
            for m in chain[:-1]:
                if flows[m].rise is None:
                    raise ModelError(f"components.{m}", f"({parsed.kinds[m].kind}) cannot sit in series before "
                                     f"{chain[chain.index(m) + 1]!r}", "make it the last element before the outside")
            series = tuple(Element(m, flows[m].rise, flows[m].signals, slot.get(m, -1)) for m in chain[:-1])
            if role == "volume":
                v = vessels[vindex[n]]
                yield LinePlan(n, True, vindex[n], terminal, flows[terminal], slot.get(terminal, -1), series,
                               tuple(v.fns.outlet_dir), tuple(flows[terminal].jet_dir), v.fns.internal, None)
            else:
                src = sources[sindex[n]]
                if src.fns.rise is not None:
                    # a source with its own loss (a hose) is the first element in series, in its own modes
                    series = (Element(n, src.fns.rise, None, slot.get(n, -1)),) + series
                yield LinePlan(n, False, sindex[n], terminal, flows[terminal], slot.get(terminal, -1), series,
                               AFT, tuple(flows[terminal].jet_dir), None, src.fns.inflow)
