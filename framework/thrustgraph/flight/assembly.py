"""Assembly: turn a parsed model into a :class:`System`: the state layout, initial state and the balance plan.

This is where hooks end. Every component kind builds its callables here, once (through
:func:`thrustgraph.balance.plan.build_plan`); the integrator's right-hand side only calls what assembly collected.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> system = assemble(load_model(default_model_path()))
>>> system.state_names[:3]
('position.x', 'position.y', 'position.z')
>>> [(line.start, line.terminal) for line in system.plan.lines]
[('bottle', 'neck')]
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pluggy

from ..kinds.component import EventSpec, Mode
from ..kinds.contract import check_system
from ..base.errors import ModelError
from ..models.model import Model, ParsedModel, parse_model
from ..balance.plan import ACCUMULATORS, KINEMATIC, Constraint, Plan, build_plan, holding_friction
from ..balance.vectors import Vec, unit_from_angles
from ..base.xp import scalar_ops

__all__ = ["System", "assemble", "ACCUMULATORS", "KINEMATIC", "constraint_of"]


class LineCache(dict):
    """What is derived once for a system: the straight lines the balance compiles by phase (see
    :mod:`thrustgraph.balance.straightline`), what the balance derives for each phase, and the provenance of its
    results; pickled empty (compiled code does not travel between processes: each traces its own)."""

    def __reduce__(self) -> tuple:
        return (LineCache, ())


@dataclass(frozen=True)
class System:
    """A vehicle ready to integrate: SI values, the state layout and the balance plan.

    Fields
    ------
    state_names : names of the entries of the flat state vector, in order
    y0 : initial state (SI)
    slices : component name -> (offset, count) in the state vector
    moded : names of the components with modes, in slot order
    modes : component name -> tuple of its Modes
    mode0 : initial mode index per moded component, in ``moded`` order
    plan : the balance plan (:class:`thrustgraph.balance.plan.Plan`)
    launch, run : parsed core settings (SI)
    guide_dir : unit vector of the launch guide or track (world frame)
    events : (component, EventSpec) of every component event
    straight_lines : the compiled straight-line functions of its phases, shared by every balance of this
        system (filled by :class:`thrustgraph.balance.balance.Balance`; see :mod:`thrustgraph.balance.straightline`)
    """

    parsed: ParsedModel
    state_names: tuple[str, ...]
    y0: tuple[float, ...]
    slices: dict[str, tuple[int, int]]
    moded: tuple[str, ...]
    modes: dict[str, tuple[Mode, ...]]
    mode0: tuple[int, ...]
    plan: Plan
    launch: Any
    run: Any
    guide_dir: Vec
    events: tuple[tuple[str, EventSpec], ...] = field(default=())
    straight_lines: LineCache = field(default_factory=LineCache, compare=False, repr=False)

    @property
    def n_states(self) -> int:
        return len(self.y0)

    @property
    def fixed_mass(self) -> float:
        return self.plan.fixed_mass

    @property
    def medium(self) -> Any:
        return self.plan.medium

    @property
    def gravity(self) -> Any:
        return self.plan.gravity

    @property
    def volumes(self) -> tuple:
        """(name, VolumeFns) of the vessels."""
        return tuple((v.name, v.fns) for v in self.plan.vessels)

    @property
    def jets(self) -> tuple:
        """(name, JetFns) of the prescribed jets."""
        return tuple((j.name, j.fns) for j in self.plan.jets)

    def index(self, name: str) -> int:
        """Position of a named state entry (``component.state`` or a kinematic name)."""
        return self.state_names.index(name)


def constraint_of(launch: Any, u: tuple, x0: tuple) -> Constraint:
    """The mount's kinematic constraint from the parsed launch settings (floats or arrays over designs)."""
    return Constraint(mount=launch.mount, u=tuple(u), x0=tuple(x0), friction=launch.friction,
                      guide_length=launch.guide_length, follow_wind=launch.attitude == "follow-wind",
                      min_follow_speed=launch.min_follow_speed, azimuth=launch.azimuth,
                      static_friction=holding_friction(launch))


def assemble(model: Model | ParsedModel, *, plugin_manager: pluggy.PluginManager | None = None) -> System:
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

    # State layout and modes, in file order, fixed here.
    for n in parsed.model.components:
        cls, p = parsed.kinds[n], parsed.params[n]
        if cls.states:
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

    constraint = constraint_of(launch, u, (y0[0], y0[1], y0[2]))
    plan = build_plan(parsed, parsed.params, parsed.env_params, scalar_ops, amb, slices, moded, constraint)

    events = list(plan.events)
    for n, e in events:
        valid = [m.name for m in modes.get(n, ())]
        for m in e.when + ((e.to,) if e.to else ()):
            if m not in valid:
                raise ModelError(f"components.{n}", f"event {e.name!r} names mode {m!r}, which kind "
                                 f"{parsed.kinds[n].kind!r} does not declare",
                                 "this is a plugin bug; report it to its author")

    names.extend(ACCUMULATORS)
    y0.extend([0.0] * len(ACCUMULATORS))
    system = System(parsed=parsed, state_names=tuple(names), y0=tuple(y0), slices=slices, moded=tuple(moded),
                    modes=modes, mode0=tuple(mode0), plan=plan, launch=launch, run=parsed.run, guide_dir=u,
                    events=tuple(events))
    return check_system(system)  # the plugin contract, once per callable (thrustgraph.kinds.contract)
