"""Assembly: turn a parsed model into a flat :class:`System` of SI floats and plain callables.

This is where hooks end. Every component kind builds its callables here, once;
the integrator's right-hand side only calls what assembly collected.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> system = assemble(load_model(default_model_path()))
>>> system.state_names[:3]
('position.x', 'position.y', 'position.z')
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import pluggy

from .component import BodyFns, EventSpec, FlowFns, JetFns, Mode, VolumeFns, scalar_ops
from .errors import ModelError
from .model import Model, ParsedModel, parse_model
from .vectors import Vec, unit_from_angles

__all__ = ["System", "Stream", "assemble", "ACCUMULATORS"]

KINEMATIC = ("position.x", "position.y", "position.z", "velocity.x", "velocity.y", "velocity.z")
ACCUMULATORS = ("audit.mass_out", "audit.exhaust_momentum.x", "audit.exhaust_momentum.y",
                "audit.exhaust_momentum.z", "audit.impulse.x", "audit.impulse.y", "audit.impulse.z",
                "audit.internal_momentum_change.x", "audit.internal_momentum_change.y",
                "audit.internal_momentum_change.z")


@dataclass(frozen=True)
class Stream:
    """One discharge path: a volume, the flow element on its outlet, to the surroundings."""

    volume: str
    flow: str
    vol: VolumeFns
    fl: FlowFns


@dataclass(frozen=True)
class System:
    """A vehicle ready to integrate: SI values, the state layout and the collected callables.

    Fields
    ------
    state_names : names of the entries of the flat state vector, in order
    y0 : initial state (SI)
    slices : component name -> (offset, count) in the state vector
    modes : component name -> tuple of its Modes (volumes and jets only)
    mode0 : initial mode index per moded component, in ``moded`` order
    moded : names of the components with modes, in order
    fixed_mass : mass of the bodies (kg)
    bodies, streams, jets : the collected callables
    medium, gravity : environment callables
    launch, run : parsed core settings (SI)
    guide_dir : unit vector of the launch guide (world frame)
    """

    parsed: ParsedModel
    state_names: tuple[str, ...]
    y0: tuple[float, ...]
    slices: dict[str, tuple[int, int]]
    moded: tuple[str, ...]
    modes: dict[str, tuple[Mode, ...]]
    mode0: tuple[int, ...]
    fixed_mass: float
    bodies: tuple[tuple[str, BodyFns], ...]
    streams: tuple[Stream, ...]
    jets: tuple[tuple[str, JetFns], ...]
    medium: Any
    gravity: Any
    launch: Any
    run: Any
    guide_dir: Vec
    events: tuple[tuple[str, EventSpec], ...] = field(default=())

    @property
    def n_states(self) -> int:
        return len(self.y0)

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

    names: list[str] = list(KINEMATIC)
    y0: list[float] = [0.0, 0.0, launch.altitude, launch.speed * u[0], launch.speed * u[1], launch.speed * u[2]]
    slices: dict[str, tuple[int, int]] = {}
    moded: list[str] = []
    modes: dict[str, tuple[Mode, ...]] = {}
    mode0: list[int] = []
    bodies: list[tuple[str, BodyFns]] = []
    streams: list[Stream] = []
    jets: list[tuple[str, JetFns]] = []
    events: list[tuple[str, EventSpec]] = []
    fixed_mass = 0.0

    order = list(parsed.model.components)
    # Stateful components first, in file order, so the state layout is fixed here.
    for n in order:
        cls, p = parsed.kinds[n], parsed.params[n]
        if cls.role not in ("volume", "jet"):
            continue
        init = tuple(float(v) for v in cls.initial_state(p, amb))
        if len(init) != len(cls.states):
            raise ModelError(f"components.{n}", f"kind {cls.kind!r} returned {len(init)} initial values for "
                             f"{len(cls.states)} states", "this is a plugin bug; report it to its author")
        slices[n] = (len(y0), len(init))
        names.extend(f"{n}.{sv.name}" for sv in cls.states)
        y0.extend(init)
        if cls.modes:
            moded.append(n)
            modes[n] = cls.modes
            start = cls.initial_mode(p, amb)
            mode0.append([m.name for m in cls.modes].index(start))

    for n in order:
        cls, p = parsed.kinds[n], parsed.params[n]
        where = f"components.{n}"
        if cls.role == "body":
            b = cls.build_body(p, ops)
            fixed_mass += b.mass
            bodies.append((n, b))
        elif cls.role == "volume":
            v = cls.build_volume(p, slices[n][0], ops, amb)
            (fname,) = list(parsed.graph.successors(n))
            f = parsed.kinds[fname].build_flow(parsed.params[fname], ops)
            streams.append(Stream(volume=n, flow=fname, vol=v, fl=f))
            events.extend((n, e) for e in v.events)
        elif cls.role == "jet":
            j = cls.build_jet(p, slices[n][0], ops, amb)
            jets.append((n, j))
            events.extend((n, e) for e in j.events)

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
    return System(parsed=parsed, state_names=tuple(names), y0=tuple(y0), slices=slices, moded=tuple(moded),
                  modes=modes, mode0=tuple(mode0), fixed_mass=fixed_mass, bodies=tuple(bodies),
                  streams=tuple(streams), jets=tuple(jets), medium=medium, gravity=gravity, launch=launch,
                  run=parsed.run, guide_dir=u, events=tuple(events))
