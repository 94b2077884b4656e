"""A model: named components with their parameters, and the graph of flow paths.

:class:`Model` keeps exactly what the user wrote (so a saved file reads back
identically); :func:`parse_model` checks it against the installed component
kinds and returns a :class:`ParsedModel` with SI values and a
``networkx.DiGraph`` whose edges are fluid connections, upstream to downstream.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> m = load_model(default_model_path())
>>> parsed = parse_model(m)
>>> sorted(parsed.graph.successors("bottle"))
['neck']
"""

from __future__ import annotations

import difflib
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
import pluggy

from ..kinds.component import Ambient, ComponentKind, EnvironmentKind
from .plugins import component_kinds, environment_kinds, get_plugin_manager
from .staging import check_stages, parse_stages, parse_triggers
from ..base.xp import scalar_ops
from ..base.errors import ModelError, shorten
from ..kinds.parameters import MODEL_FOLDER, parse_params

__all__ = ["Model", "ParsedModel", "parse_model", "LAUNCH_SPECS", "RUN_SPECS", "parse_paths"]

from ..kinds.modeldata import LAUNCH_SPECS, RUN_SPECS, _TOP_KEYS, Model, ParsedModel, parse_paths  # noqa: F401


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

    folder = Path(model.source).parent if model.source and not model.source.startswith("<") else None
    token = MODEL_FOLDER.set(folder)        # relative file paths in the model are read from its folder
    try:
        return _parse_model(model, plugin_manager)
    finally:
        MODEL_FOLDER.reset(token)


def _parse_model(model: Model, plugin_manager: pluggy.PluginManager | None) -> ParsedModel:
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
    check_static_friction(launch.friction, launch.static_friction)
    run = parse_params(RUN_SPECS, model.run, where="run")

    graph = _check_graph(model, kinds)

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


def check_static_friction(friction: Any, static: Any) -> None:
    """Refuse a static friction coefficient below the sliding one (``static`` None: the same): a vehicle at rest is
    held at least as firmly as a sliding one is braked (dry friction: the static coefficient is the larger;
    e.g. Meriam & Kraige, Engineering Mechanics: Statics, ch. 6; from memory).

    >>> check_static_friction(0.3, 0.5)
    >>> check_static_friction(0.3, 0.2)
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: launch.static_friction: 0.2 is below friction 0.3. Fix: give a static friction coefficient of at least 0.3, or leave static_friction out (then it equals friction).
    """
    if static is None:
        return
    low = np.asarray(static, dtype=float) < np.asarray(friction, dtype=float)
    if np.any(low):
        s, f = (float(np.broadcast_to(v, low.shape)[low][0]) if np.ndim(low) else float(v) for v in (static, friction))
        raise ModelError("launch.static_friction", f"{s:g} is below friction {f:g}",
                         f"give a static friction coefficient of at least {f:g}, or leave static_friction out (then "
                         "it equals friction)")


def _check_graph(model: Model, kinds: dict[str, type[ComponentKind]]) -> nx.DiGraph:
    """Topology checks: names exist, roles connect sensibly, every path reaches the outside."""
    g = _flow_graph(model, kinds)
    role = {n: kinds[n].role for n in kinds}
    # flow elements first: a dangling nozzle is the more useful message
    for n in sorted(kinds, key=lambda m: role[m] != "flow"):
        check = _ROLE_CHECKS.get(role[n])
        if check is not None:
            check(n, kinds[n].kind, list(g.predecessors(n)), list(g.successors(n)), role)
    _check_reach(g, role)
    return g


def _flow_graph(model: Model, kinds: dict[str, type[ComponentKind]]) -> nx.DiGraph:
    """The components as nodes and the flow paths as edges; unknown names, self-loops and cycles refused."""
    g = nx.DiGraph(name=model.name)
    for n, cls in kinds.items():
        g.add_node(n, kind=cls.kind, role=cls.role)
    names = list(kinds)
    for a, b in parse_paths(model.flow_paths):
        for n in (a, b):
            if n not in kinds:
                raise ModelError("flow_paths", f"names {shorten(n)}, which is not a component", _suggest(n, names))
        if a == b:
            raise ModelError("flow_paths", f"connects {shorten(a)} to itself", "remove the loop")
        g.add_edge(a, b)
    if not nx.is_directed_acyclic_graph(g):
        cycle = " -> ".join(a for a, _ in nx.find_cycle(g))
        raise ModelError("flow_paths", f"the paths form a loop ({cycle})", "flow paths must run from a vessel or "
                         "source to the surroundings without returning")
    return g


def _check_body(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    if ins or outs:
        raise ModelError(f"components.{n}", f"is a body ({kind}) and carries no flow, but flow_paths connect it",
                         "remove it from flow_paths")


def _check_boundary(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    if outs:
        raise ModelError(f"components.{n}", "is the surroundings; a flow path cannot leave it (use an inlet to take "
                         "in the surrounding fluid)", "write paths that end at the surroundings")


def _check_flow(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    where = f"components.{n}"
    if len(ins) != 1 or role[ins[0]] not in ("volume", "source", "flow"):
        found = ", ".join(ins) if ins else "nothing"
        raise ModelError(where, f"({kind}) needs exactly one upstream vessel, source or element, found "
                         f"{found}", f"add a path such as \"TANK -> {n} -> OUTSIDE\"")
    if len(outs) != 1 or role[outs[0]] not in ("flow", "boundary"):
        found = ", ".join(outs) if outs else "nothing"
        raise ModelError(where, f"({kind}) must lead to another element or to the surroundings (flow "
                         f"into a vessel is not supported yet), found {found}",
                         f"continue the path: \"{n} -> OUTSIDE\"")


def _check_volume(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    where = f"components.{n}"
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


def _check_source(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    where = f"components.{n}"
    if ins:
        raise ModelError(where, f"({kind}) takes fluid from outside the vehicle and cannot be fed by {shorten(ins[0])}",
                         f"start the path at {shorten(n)}")
    if len(outs) != 1 or role[outs[0]] != "flow":
        raise ModelError(where, f"({kind}) must feed exactly one flow element (a pump or a nozzle)",
                         f"write a path such as \"{n} -> PUMP -> NOZZLE -> OUTSIDE\"")


def _check_jet(n: str, kind: str, ins: list[str], outs: list[str], role: dict[str, str]) -> None:
    if ins or len(outs) != 1 or role[outs[0]] != "boundary":
        raise ModelError(f"components.{n}", "a prescribed jet must exhaust straight to the surroundings",
                         f"write the path \"{n} -> OUTSIDE\"")


#: How a component of each role must be connected: (name, kind, upstream, downstream, roles) -> None or raise.
_ROLE_CHECKS = {"body": _check_body, "boundary": _check_boundary, "flow": _check_flow, "volume": _check_volume,
                "source": _check_source, "jet": _check_jet}


def _check_reach(g: nx.DiGraph, role: dict[str, str]) -> None:
    """Everything that holds or makes flow reaches the surroundings, and something has mass."""
    names = list(role)
    boundaries = [n for n in names if role[n] == "boundary"]
    for n in names:
        if role[n] in ("volume", "jet", "source"):
            if not any(nx.has_path(g, n, b) for b in boundaries):
                raise ModelError(f"components.{n}", "has no path to the outside, so nothing it holds can push the vehicle",
                                 "add a surroundings component and a path from this vessel through a nozzle to it")
    if any(role[n] in ("volume", "jet", "source") for n in names) and not boundaries:
        raise ModelError("components", "no surroundings component", 'add [components.outside] kind = "surroundings"')
    if not any(role[n] in ("body", "volume", "jet") for n in names):
        raise ModelError("components", "nothing in the model has mass", "add an airframe with its dry mass")
