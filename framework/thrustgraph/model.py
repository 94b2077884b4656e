"""A model: named components with their parameters, and the graph of flow paths.

:class:`Model` keeps exactly what the user wrote (so a saved file reads back
identically); :func:`parse_model` checks it against the installed component
kinds and returns a :class:`ParsedModel` with SI values and a
``networkx.DiGraph`` whose edges are fluid connections, upstream to downstream.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> m = load_model(default_model_path())
>>> parsed = parse_model(m)
>>> sorted(parsed.graph.successors("bottle"))
['neck']
"""

from __future__ import annotations

import copy
import difflib
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import pluggy

from .component import Ambient, ComponentKind, EnvironmentKind
from .xp import scalar_ops
from .errors import ModelError, shorten
from .parameters import Choice, Flag, Number, Quantity, parse_params

__all__ = ["Model", "ParsedModel", "parse_model", "LAUNCH_SPECS", "RUN_SPECS", "parse_paths"]

# Core settings: how the vehicle starts and how the run is integrated.
LAUNCH_SPECS = (
    Choice("mount", options=("guide", "held", "free", "track"), default="guide",
           doc="guide: slides along a launch guide, then flies; held: fixed on a test stand; free: free from "
               "t = 0; track: stays on an endless straight track or water lane (carts, boats)"),
    Quantity("guide_length", "m", default="0 m", low=0.0, high=10_000.0,
             doc="length the vehicle travels along the guide"),
    Number("friction", default=0.0, low=0.0, high=2.0,
           doc="friction (or rolling-resistance) coefficient on the guide or track, times the normal force"),
    Quantity("elevation", "deg", default="90 deg", low=0.0, high=90.0, doc="guide (and initial axis) angle above the horizon"),
    Quantity("azimuth", "deg", default="0 deg", low=-360.0, high=360.0, doc="direction of the guide, from +x toward +y"),
    Choice("attitude", options=("follow-wind", "fixed"), default="follow-wind",
           doc="after the guide, the body axis follows the relative wind or stays fixed"),
    Quantity("min_follow_speed", "m/s", default="1 m/s", low=0.0, high=1000.0,
             doc="with attitude follow-wind: below this airspeed the axis keeps the launch direction"),
    Quantity("altitude", "m", default="0 m", low=-11_000.0, high=1_000_000.0,
             doc="height of the launch point above the ground datum"),
    Quantity("speed", "m/s", default="0 m/s", low=-10_000.0, high=10_000.0, doc="initial speed along the initial axis"),
)

RUN_SPECS = (
    Quantity("end_time", "s", default="120 s", low=0.0, low_open=True, high=1e6, doc="longest simulated time"),
    Number("rtol", default=1e-9, low=1e-13, high=1e-2, doc="relative tolerance of the integrator"),
    Number("atol", default=1e-9, low=1e-15, high=1.0, doc="absolute tolerance of the integrator (SI units)"),
    Choice("method", options=("DOP853", "RK45", "Radau", "LSODA"), default="DOP853", doc="solve_ivp method"),
    Quantity("output_interval", "s", default="0.01 s", low=0.0, low_open=True, high=1e6,
             doc="spacing of the evenly sampled output added to the solver's own steps"),
    Flag("stop_at_apogee", default=False, doc="end the flight at apogee"),
)

_TOP_KEYS = ("format", "version", "name", "description", "components", "flow_paths", "environment", "launch", "run")


def parse_paths(paths: list[Any], where: str = "flow_paths") -> list[tuple[str, str]]:
    """Turn ``["a -> b -> c"]`` into edges ``[("a", "b"), ("b", "c")]``.

    >>> parse_paths(["bottle -> neck -> outside"])
    [('bottle', 'neck'), ('neck', 'outside')]
    """
    if not isinstance(paths, list):
        raise ModelError(where, f"expected a list of paths like \"tank -> nozzle -> outside\", got {shorten(paths)}",
                         "write flow_paths = [\"tank -> nozzle -> outside\"]")
    edges = []
    for k, path in enumerate(paths):
        if not isinstance(path, str) or "->" not in path:
            raise ModelError(f"{where}[{k}]", f"expected a path like \"tank -> nozzle -> outside\", got {shorten(path)}",
                             "join component names with ->")
        names = [n.strip() for n in path.split("->")]
        if any(not n for n in names):
            raise ModelError(f"{where}[{k}]", f"path {shorten(path)} has an empty name", "remove the stray ->")
        edges.extend(zip(names[:-1], names[1:]))
    return edges


@dataclass
class Model:
    """What the user wrote: raw values (strings with units), component tables and paths.

    Parameters are changed with :meth:`set`; :func:`parse_model` turns the model
    into SI values and a graph. ``source`` is the file it came from, if any.
    """

    name: str = "unnamed"
    description: str = ""
    components: dict[str, dict[str, Any]] = field(default_factory=dict)
    flow_paths: list[str] = field(default_factory=list)
    environment: dict[str, dict[str, Any]] = field(default_factory=dict)
    launch: dict[str, Any] = field(default_factory=dict)
    run: dict[str, Any] = field(default_factory=dict)
    source: str | None = None
    #: The ``[study]`` table as written (parameter ranges for studies); kept and saved unchanged.
    study: dict[str, Any] = field(default_factory=dict)
    #: The ``[calibration]`` table: key path -> where its fitted value came from (written by
    #: :mod:`thrustgraph.calibrate`: records and their hashes, date, tool, interval); kept and saved unchanged.
    calibration: dict[str, Any] = field(default_factory=dict)
    #: ``[stages.NAME]`` tables: the components a separation drops (see thrustgraph.staging).
    stages: dict[str, Any] = field(default_factory=dict)
    #: ``[triggers.NAME]`` tables: a condition on a signal and what it does (see thrustgraph.staging).
    triggers: dict[str, Any] = field(default_factory=dict)

    def copy(self) -> "Model":
        return copy.deepcopy(self)

    @property
    def graph(self) -> nx.DiGraph:
        """The component graph: nodes are component names (with their kind), edges flow paths."""
        g = nx.DiGraph(name=self.name)
        for cname, table in self.components.items():
            g.add_node(cname, kind=table.get("kind"))
        g.add_edges_from(parse_paths(self.flow_paths))
        return g

    def get(self, path: str) -> Any:
        """Read a raw value by key path, e.g. ``components.bottle.fill``."""
        node: Any = self._tables()
        for part in path.split("."):
            if not isinstance(node, dict) or part not in node:
                raise ModelError(path, "no such key", "list the model's keys with 'thrustgraph check'")
            node = node[part]
        return node

    def set(self, path: str, value: Any) -> "Model":
        """Set a raw value by key path (e.g. ``components.bottle.fill``) and return self.

        Only existing sections may be addressed; the value is checked when the
        model is parsed.

        >>> m = Model(components={"tank": {"kind": "pressurised-liquid-tank"}})
        >>> m.set("components.tank.fill", 0.3).components["tank"]["fill"]
        0.3
        """
        parts = path.split(".")
        tables = self._tables()
        if parts[0] not in tables or len(parts) < 2:
            close = difflib.get_close_matches(parts[0], list(tables), n=1)
            hint = f"did you mean {shorten(close[0])}? " if close else ""
            raise ModelError(path, "does not name a parameter",
                             f"{hint}use a path such as components.NAME.PARAMETER, launch.elevation or run.end_time")
        node = tables[parts[0]]
        for k, part in enumerate(parts[1:-1], start=1):
            if part not in node or not isinstance(node[part], dict):
                close = difflib.get_close_matches(part, list(node), n=1)
                hint = f"did you mean {shorten(close[0])}? " if close else ""
                raise ModelError(".".join(parts[:k + 1]), "no such section", f"{hint}check the name")
            node = node[part]
        node[parts[-1]] = value
        return self

    def _tables(self) -> dict[str, Any]:
        return {"components": self.components, "environment": self.environment,
                "launch": self.launch, "run": self.run, "stages": self.stages, "triggers": self.triggers}


@dataclass(frozen=True)
class ParsedModel:
    """A checked model: SI parameters per component, the graph and the kinds."""

    model: Model
    graph: nx.DiGraph
    kinds: dict[str, type[ComponentKind]]
    params: dict[str, Any]
    env_kinds: dict[str, type[EnvironmentKind]]
    env_params: dict[str, Any]
    launch: Any
    run: Any
    ambient: Ambient
    plugin_manager: pluggy.PluginManager
    stages: dict[str, tuple[str, ...]] = field(default_factory=dict)
    triggers: tuple[Any, ...] = ()

    def role_of(self, name: str) -> str:
        return self.kinds[name].role

    def names(self, role: str) -> list[str]:
        """Component names of a role, in file order."""
        return [n for n in self.model.components if self.kinds[n].role == role]

    def cautions(self) -> list[str]:
        """Safety cautions from the component kinds and the cautions hook."""
        out: list[str] = []
        for n in self.model.components:
            for c in self.kinds[n].cautions(self.params[n]):
                if c not in out:
                    out.append(c)
        for group in self.plugin_manager.hook.thrustgraph_cautions(model=self):
            for c in group or ():
                if c not in out:
                    out.append(c)
        return out


def _suggest(name: str, options: list[str]) -> str:
    close = difflib.get_close_matches(name, options, n=1)
    return f"did you mean {shorten(close[0])}?" if close else f"installed kinds: {', '.join(sorted(options))}"


def parse_model(model: Model, *, plugin_manager: pluggy.PluginManager | None = None) -> ParsedModel:
    """Check a model against the installed kinds and return SI values and the graph.

    Raises
    ------
    ModelError
        With the key path, what is wrong and how to fix it, for the first
        problem found.
    """
    from .plugins import component_kinds, environment_kinds, get_plugin_manager

    pm = plugin_manager or get_plugin_manager()
    all_kinds = component_kinds(pm)
    all_env = environment_kinds(pm)

    if not model.components:
        raise ModelError("components", "the model has no components",
                         "add at least a body, a vessel, a nozzle and the surroundings")
    kinds: dict[str, type[ComponentKind]] = {}
    params: dict[str, Any] = {}
    for cname, table in model.components.items():
        where = f"components.{cname}"
        if not isinstance(table, dict):
            raise ModelError(where, f"expected a table of parameters, got {shorten(table)}", f"write [components.{cname}]")
        kind = table.get("kind")
        if kind is None:
            raise ModelError(f"{where}.kind", "is missing", f"add kind = \"...\"; {_suggest('', list(all_kinds))}")
        if kind not in all_kinds:
            raise ModelError(f"{where}.kind", f"unknown component kind {shorten(kind)}", _suggest(str(kind), list(all_kinds)))
        cls = all_kinds[kind]
        raw = {k: v for k, v in table.items() if k != "kind"}
        p = parse_params(cls.parameters, raw, where=where, params_class=cls.params_class())
        cls.check(p, where)
        kinds[cname] = cls
        params[cname] = p

    # Environment: a medium and a gravity field, each a kind with parameters.
    env_params: dict[str, Any] = {}
    env_kinds: dict[str, type[EnvironmentKind]] = {}
    defaults = {"medium": {"kind": "still-air"}, "gravity": {"kind": "uniform-gravity"}}
    for slot in model.environment:
        if slot not in defaults:
            raise ModelError(f"environment.{slot}", "unknown environment section",
                             f"{_suggest(slot, list(defaults))} (sections: medium, gravity)")
    for slot, default in defaults.items():
        table = model.environment.get(slot, default)
        where = f"environment.{slot}"
        if not isinstance(table, dict) or "kind" not in table:
            raise ModelError(f"{where}.kind", "is missing", "add kind = \"...\"")
        kind = table["kind"]
        options = [k for k, c in all_env.items() if c.slot == slot]
        if kind not in options:
            raise ModelError(f"{where}.kind", f"unknown {slot} kind {shorten(kind)}", _suggest(str(kind), options))
        cls = all_env[kind]
        p = parse_params(cls.parameters, {k: v for k, v in table.items() if k != "kind"}, where=where,
                         params_class=cls.params_class())
        cls.check(p, where)
        env_kinds[slot] = cls
        env_params[slot] = p

    launch = parse_params(LAUNCH_SPECS, model.launch, where="launch")
    run = parse_params(RUN_SPECS, model.run, where="run")

    graph = _check_graph(model, kinds)
    from .staging import check_stages, parse_stages, parse_triggers

    stages = parse_stages(model, kinds)
    check_stages(stages, graph, kinds)
    triggers = parse_triggers(model, kinds, stages)
    medium = env_kinds["medium"].build(env_params["medium"], scalar_ops)
    rho, pa, Ta, *_ = medium(launch.altitude, 0.0)
    ambient = Ambient(pressure=pa, temperature=Ta, density=rho)

    parsed = ParsedModel(model=model, graph=graph, kinds=kinds, params=params, env_kinds=env_kinds,
                         env_params=env_params, launch=launch, run=run, ambient=ambient, plugin_manager=pm,
                         stages=stages, triggers=triggers)
    problems = [msg for group in pm.hook.thrustgraph_check_model(model=parsed) for msg in (group or ())]
    if problems:
        raise ModelError("model", problems[0], "see the message above")
    return parsed


def _check_graph(model: Model, kinds: dict[str, type[ComponentKind]]) -> nx.DiGraph:
    """Topology checks: names exist, roles connect sensibly, every path reaches the outside."""
    edges = parse_paths(model.flow_paths)
    g = nx.DiGraph(name=model.name)
    for n, cls in kinds.items():
        g.add_node(n, kind=cls.kind, role=cls.role)
    names = list(kinds)
    for a, b in edges:
        for n in (a, b):
            if n not in kinds:
                raise ModelError("flow_paths", f"names {shorten(n)}, which is not a component", _suggest(n, names))
        if a == b:
            raise ModelError("flow_paths", f"connects {shorten(a)} to itself", "remove the loop")
        g.add_edge(a, b)
    role = {n: kinds[n].role for n in kinds}
    boundaries = [n for n in names if role[n] == "boundary"]
    if not nx.is_directed_acyclic_graph(g):
        cycle = " -> ".join(a for a, _ in nx.find_cycle(g))
        raise ModelError("flow_paths", f"the paths form a loop ({cycle})", "flow paths must run from a vessel or "
                         "source to the surroundings without returning")
    # flow elements first: a dangling nozzle is the more useful message
    for n in sorted(names, key=lambda m: role[m] != "flow"):
        r = role[n]
        ins, outs = list(g.predecessors(n)), list(g.successors(n))
        where = f"components.{n}"
        kind = kinds[n].kind
        if r == "body" and (ins or outs):
            raise ModelError(where, f"is a body ({kind}) and carries no flow, but flow_paths connect it",
                             "remove it from flow_paths")
        if r == "boundary" and outs:
            raise ModelError(where, "is the surroundings; a flow path cannot leave it (use an inlet to take in "
                             "the surrounding fluid)", "write paths that end at the surroundings")
        if r == "flow":
            if len(ins) != 1 or role[ins[0]] not in ("volume", "source", "flow"):
                found = ", ".join(ins) if ins else "nothing"
                raise ModelError(where, f"({kind}) needs exactly one upstream vessel, source or element, found "
                                 f"{found}", f"add a path such as \"TANK -> {n} -> OUTSIDE\"")
            if len(outs) != 1 or role[outs[0]] not in ("flow", "boundary"):
                found = ", ".join(outs) if outs else "nothing"
                raise ModelError(where, f"({kind}) must lead to another element or to the surroundings (flow "
                                 f"into a vessel is not supported yet), found {found}",
                                 f"continue the path: \"{n} -> OUTSIDE\"")
        if r == "volume":
            if ins:
                raise ModelError(where, f"is fed by {shorten(ins[0])}; flow into a vessel is not supported yet",
                                 "feed the nozzle directly from the source instead")
            if any(role[m] != "flow" for m in outs):
                bad = [m for m in outs if role[m] != "flow"][0]
                raise ModelError(where, f"connects directly to {shorten(bad)}; vessels connect through a flow element",
                                 f"put a nozzle or orifice between {shorten(n)} and {shorten(bad)}")
            if not outs:
                raise ModelError(where, "has no outlet, so it can never empty",
                                 f"add a path such as \"{n} -> NOZZLE -> OUTSIDE\"")
        if r == "source":
            if ins:
                raise ModelError(where, f"({kind}) takes fluid from outside the vehicle and cannot be fed by {shorten(ins[0])}",
                                 f"start the path at {shorten(n)}")
            if len(outs) != 1 or role[outs[0]] != "flow":
                raise ModelError(where, f"({kind}) must feed exactly one flow element (a pump or a nozzle)",
                                 f"write a path such as \"{n} -> PUMP -> NOZZLE -> OUTSIDE\"")
        if r == "jet":
            if ins or len(outs) != 1 or role[outs[0]] != "boundary":
                raise ModelError(where, "a prescribed jet must exhaust straight to the surroundings",
                                 f"write the path \"{n} -> OUTSIDE\"")
    for n in names:
        if role[n] in ("volume", "jet", "source"):
            if not any(nx.has_path(g, n, b) for b in boundaries):
                raise ModelError(f"components.{n}", "has no path to the outside, so nothing it holds can push the vehicle",
                                 "add a surroundings component and a path from this vessel through a nozzle to it")
    if any(role[n] in ("volume", "jet", "source") for n in names) and not boundaries:
        raise ModelError("components", "no surroundings component", 'add [components.outside] kind = "surroundings"')
    if not any(role[n] in ("body", "volume", "jet") for n in names):
        raise ModelError("components", "nothing in the model has mass", "add an airframe with its dry mass")
    return g
