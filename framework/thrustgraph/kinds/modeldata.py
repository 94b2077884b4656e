"""The model and the checked model, as data: what the user wrote and what :func:`thrustgraph.models.model.parse_model`
made of it.

:class:`Model` keeps exactly what the user wrote (so a saved file reads back identically); :class:`ParsedModel`
holds the SI values, the kinds and the graph. This module defines data only: it imports no plugin manager and
no parser, so the hook specifications (:mod:`thrustgraph.kinds.hookspecs`) can name these types without a cycle.

Examples
--------
>>> parse_paths(["tank -> nozzle -> outside"])
[('tank', 'nozzle'), ('nozzle', 'outside')]
"""

from __future__ import annotations

import copy
import difflib
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import pluggy

from .component import Ambient, ComponentKind, EnvironmentKind
from ..base.errors import ModelError, shorten
from .displayunits import UnitsSpec
from .parameters import Choice, Flag, Number, Quantity

__all__ = ["Model", "ParsedModel", "LAUNCH_SPECS", "RUN_SPECS", "parse_paths"]

# Core settings: how the vehicle starts and how the run is integrated.
LAUNCH_SPECS = (
    Choice("mount", options=("guide", "held", "free", "track"), default="guide",
           doc="guide: slides along a launch guide, then flies; held: fixed on a test stand; free: free from "
               "t = 0; track: stays on an endless straight track or water lane (carts, boats)"),
    Quantity("guide_length", "m", default="0 m", low=0.0, high=10_000.0,
             doc="length the vehicle travels along the guide"),
    Number("friction", default=0.0, low=0.0, high=2.0,
           doc="friction (or rolling-resistance) coefficient on the guide or track while the vehicle slides, times "
               "the normal force"),
    Number("static_friction", default="absent", low=0.0, high=2.0,
           doc="coefficient of the static friction that holds a vehicle at rest on the guide or track, times the "
               "normal force (at least friction; absent: the same as friction)"),
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
    UnitsSpec("units", doc="the units the results are shown in (terminal, report, plots, exports); the command "
                           "line's --units overrides it"),
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
    #: :mod:`thrustgraph.measured.calibrate`: records and their hashes, date, tool, interval); kept and saved unchanged.
    calibration: dict[str, Any] = field(default_factory=dict)
    #: ``[stages.NAME]`` tables: the components a separation drops (see thrustgraph.models.staging).
    stages: dict[str, Any] = field(default_factory=dict)
    #: ``[triggers.NAME]`` tables: a condition on a signal and what it does (see thrustgraph.models.staging).
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

    def warnings(self) -> list[str]:
        """What the model probably did not mean: the core's own (a guide left at its default length of 0 m) and
        the plugins' (:func:`~thrustgraph.kinds.hookspecs.thrustgraph_model_warnings`), one line each."""
        out: list[str] = []
        if self.launch.mount == "guide" and "guide_length" not in self.model.launch:
            out.append("launch.guide_length: not given, so the launch guide is 0 m long and the vehicle leaves it "
                       "at once, in whatever direction the thrust and gravity push it; to fix it, give the guide's "
                       "length, e.g. guide_length = \"1 m\" (or write mount = \"free\" if no guide is meant)")
        for group in self.plugin_manager.hook.thrustgraph_model_warnings(model=self):
            for w in group or ():
                if w not in out:
                    out.append(w)
        return out

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


