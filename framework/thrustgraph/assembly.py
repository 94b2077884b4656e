"""Assembly: turn a parsed model into a flat :class:`System` of SI floats and plain callables.

This is where hooks end. Every component kind builds its callables here, once;
the integrator's right-hand side only calls what assembly collected.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> system = assemble(load_model(default_model_path()))
>>> system.state_names[:3]
('position.x', 'position.y', 'position.z')
>>> [(line.start, line.terminal) for line in system.lines]
[('bottle', 'neck')]
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pluggy

from .component import BodyFns, EventSpec, FlowFns, JetFns, Mode, SourceFns, VolumeFns, scalar_ops
from .contract import check_system
from .errors import ModelError
from .model import Model, ParsedModel, parse_model
from .vectors import Vec, unit_from_angles

__all__ = ["System", "Line", "assemble", "ACCUMULATORS", "KINEMATIC"]

KINEMATIC = ("position.x", "position.y", "position.z", "velocity.x", "velocity.y", "velocity.z")
ACCUMULATORS = ("audit.mass_out", "audit.exhaust_momentum.x", "audit.exhaust_momentum.y",
                "audit.exhaust_momentum.z", "audit.impulse.x", "audit.impulse.y", "audit.impulse.z",
                "audit.internal_momentum_change.x", "audit.internal_momentum_change.y",
                "audit.internal_momentum_change.z")


@dataclass(frozen=True)
class Line:
    """One discharge path: a vessel (or a source) -> flow elements in series -> a terminal element -> outside.

    ``start_kind`` is "volume" or "source"; ``series`` holds ``(name, FlowFns)``
    of the elements between the start and the terminal element, in flow order.
    """

    start: str
    start_kind: str
    terminal: str
    fl: FlowFns
    series: tuple[tuple[str, FlowFns], ...] = ()
    vol: VolumeFns | None = None
    src: SourceFns | None = None

    @property
    def volume(self) -> str:  # name kept for readers of older code: the start component
        return self.start

    @property
    def flow(self) -> str:
        return self.terminal


@dataclass(frozen=True)
class System:
    """A vehicle ready to integrate: SI values, the state layout and the collected callables.

    Fields
    ------
    state_names : names of the entries of the flat state vector, in order
    y0 : initial state (SI)
    slices : component name -> (offset, count) in the state vector
    owners : (role, name) of the components with states, in state order
    moded : names of the components with modes, in order
    modes : component name -> tuple of its Modes
    mode0 : initial mode index per moded component, in ``moded`` order
    fixed_mass : mass of the bodies (kg)
    bodies, volumes, lines, jets, sources : the collected callables
    medium, gravity : environment callables
    launch, run : parsed core settings (SI)
    guide_dir : unit vector of the launch guide or track (world frame)
    events : (component, EventSpec) of every component event
    """

    parsed: ParsedModel
    state_names: tuple[str, ...]
    y0: tuple[float, ...]
    slices: dict[str, tuple[int, int]]
    owners: tuple[tuple[str, str], ...]
    moded: tuple[str, ...]
    modes: dict[str, tuple[Mode, ...]]
    mode0: tuple[int, ...]
    fixed_mass: float
    bodies: tuple[tuple[str, BodyFns], ...]
    volumes: tuple[tuple[str, VolumeFns], ...]
    lines: tuple[Line, ...]
    jets: tuple[tuple[str, JetFns], ...]
    sources: tuple[tuple[str, SourceFns], ...]
    medium: Any
    gravity: Any
    launch: Any
    run: Any
    guide_dir: Vec
    events: tuple[tuple[str, EventSpec], ...] = field(default=())

    @property
    def n_states(self) -> int:
        return len(self.y0)

    @property
    def streams(self) -> tuple[Line, ...]:
        """The discharge lines (alias)."""
        return self.lines

    def index(self, name: str) -> int:
        """Position of a named state entry (``component.state`` or a kinematic name)."""
        return self.state_names.index(name)


def assemble(model: Model | ParsedModel, *, plugin_manager: pluggy.PluginManager | None = None,
             ops: Any = scalar_ops) -> System:
    """Check a model (if not yet parsed) and assemble it into a :class:`System`."""
    parsed = model if isinstance(model, ParsedModel) else parse_model(model, plugin_manager=plugin_manager)
    amb = parsed.ambient
    launch = parsed.launch
    u = unit_from_angles(launch.elevation, launch.azimuth)
    graph = parsed.graph

    names: list[str] = list(KINEMATIC)
    y0: list[float] = [0.0, 0.0, launch.altitude, launch.speed * u[0], launch.speed * u[1], launch.speed * u[2]]
    slices: dict[str, tuple[int, int]] = {}
    owners: list[tuple[str, str]] = []
    moded: list[str] = []
    modes: dict[str, tuple[Mode, ...]] = {}
    mode0: list[int] = []
    order = list(parsed.model.components)

    # State layout and modes, in file order, fixed here.
    for n in order:
        cls, p = parsed.kinds[n], parsed.params[n]
        if cls.states:
            init = tuple(float(v) for v in cls.initial_state(p, amb))
            if len(init) != len(cls.states):
                raise ModelError(f"components.{n}", f"kind {cls.kind!r} returned {len(init)} initial values for "
                                 f"{len(cls.states)} states", "this is a plugin bug; report it to its author")
            slices[n] = (len(y0), len(init))
            owners.append((cls.role, n))
            names.extend(f"{n}.{sv.name}" for sv in cls.states)
            y0.extend(init)
        if cls.modes:
            moded.append(n)
            modes[n] = cls.modes
            start = cls.initial_mode(p, amb)
            mode0.append([m.name for m in cls.modes].index(start))

    bodies: list[tuple[str, BodyFns]] = []
    volumes: list[tuple[str, VolumeFns]] = []
    jets: list[tuple[str, JetFns]] = []
    sources: list[tuple[str, SourceFns]] = []
    flows: dict[str, FlowFns] = {}
    events: list[tuple[str, EventSpec]] = []
    by_role = {"body": bodies, "volume": volumes, "jet": jets, "source": sources}
    for n in order:
        cls, p = parsed.kinds[n], parsed.params[n]
        i = slices.get(n, (-1, 0))[0]
        role = cls.role
        if role == "boundary":
            continue
        if role == "body":
            fns = cls.build_body(p, ops, i, amb) if cls.states else cls.build_body(p, ops)
        elif role == "flow":
            fns = cls.build_flow(p, ops)
        else:
            fns = getattr(cls, f"build_{role}")(p, i, ops, amb)
        if role == "flow":
            flows[n] = fns
        else:
            by_role[role].append((n, fns))
        events.extend((n, e) for e in fns.events)
    fixed_mass = sum(b.mass for _, b in bodies)

    # Discharge lines: walk each path from its start to the element that reaches the outside.
    vol_fns, src_fns = dict(volumes), dict(sources)
    lines: list[Line] = []
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
            series = tuple((m, flows[m]) for m in chain[:-1])
            src = src_fns.get(n)
            if src is not None and src.rise is not None:
                # a source with its own loss (a hose) is the first element in series, in its own modes
                series = ((n, FlowFns(rise=src.rise)),) + series
            lines.append(Line(start=n, start_kind=role, terminal=terminal, fl=flows[terminal],
                              series=series, vol=vol_fns.get(n), src=src))

    for n, e in events:
        valid = [m.name for m in modes.get(n, ())]
        for m in e.when + ((e.to,) if e.to else ()):
            if m not in valid:
                raise ModelError(f"components.{n}", f"event {e.name!r} names mode {m!r}, which kind "
                                 f"{parsed.kinds[n].kind!r} does not declare",
                                 "this is a plugin bug; report it to its author")

    names.extend(ACCUMULATORS)
    y0.extend([0.0] * len(ACCUMULATORS))

    medium = parsed.env_kinds["medium"].build(parsed.env_params["medium"], ops)
    gravity = parsed.env_kinds["gravity"].build(parsed.env_params["gravity"], ops)
    system = System(parsed=parsed, state_names=tuple(names), y0=tuple(y0), slices=slices, owners=tuple(owners),
                  moded=tuple(moded), modes=modes, mode0=tuple(mode0), fixed_mass=fixed_mass, bodies=tuple(bodies),
                  volumes=tuple(volumes), lines=tuple(lines), jets=tuple(jets), sources=tuple(sources),
                  medium=medium, gravity=gravity, launch=launch, run=parsed.run, guide_dir=u, events=tuple(events))
    return check_system(system, ops)  # the plugin contract, once per callable (thrustgraph.contract)
