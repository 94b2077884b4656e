"""Triggers and staging: conditions on signals that switch modes, separate stages or stop the run.

A model may hold ``[stages.NAME]`` tables naming the components a separation
drops, and ``[triggers.NAME]`` tables::

    [stages.booster]
    components = ["booster_frame", "booster_motor"]

    [triggers.separate]
    when = "booster_motor.propellant_mass < 0.001 kg"   # SIGNAL < VALUE or SIGNAL > VALUE
    then = "separate"                                  # separate | switch | stop
    stage = "booster"
    after = "0.2 s"                                    # optional delay

    [triggers.ignite]
    when = "time > 0.5 s"
    then = "switch"
    component = "sustainer"
    mode = "burning"

A condition fires once, when the signal crosses the value in the direction the
comparison names ("<": falling through it, ">": rising through it); if it is
already true when the run starts, it fires at once. Signals are ``time``,
``altitude``, ``speed``, ``vertical_speed``, ``distance`` (from the launch
point), ``mass`` and every named signal of the vehicle's components (e.g.
``bottle.pressure``); ``thrustgraph check`` lists them.

A stage must be closed under the flow paths: a separation may not split a
vessel from the nozzle it feeds. The dropped stage keeps flying as its own
vehicle (free, from the separation state); the upper stage's mass and momentum
audits count the dropped mass and its momentum as leaving the control volume.

Examples
--------
>>> parse_condition("altitude < 150 m", "triggers.deploy.when")
('altitude', -1.0, '150 m')
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import re
from dataclasses import dataclass
from typing import Any, Callable

from ..base.errors import ModelError, shorten
from ..kinds.parameters import Quantity
from ..kinds.signalunits import SIGNAL_UNITS
from ..base.units import to_si

__all__ = ["Trigger", "parse_condition", "parse_stages", "parse_triggers", "check_stages", "KINEMATIC_SIGNALS",
           "STATE_SIGNALS", "signal", "condition", "resolve_thresholds"]

#: Signals every vehicle has, with their SI units (from the one table of core signals).
KINEMATIC_SIGNALS = {k: SIGNAL_UNITS[k] for k in ("time", "altitude", "speed", "vertical_speed", "distance", "mass")}
#: The signals read from the state vector alone (the others are read from the balance's snapshot).
STATE_SIGNALS = ("time", "altitude", "speed", "vertical_speed", "distance")
_COND = re.compile(r"^\s*([A-Za-z_][\w.\-]*)\s*([<>])\s*(.+?)\s*$")
_ACTIONS = ("separate", "switch", "stop")
_DELAY = Quantity("after", "s", low=0.0, high=1e6, doc="the delay between the condition and the action")


@dataclass(frozen=True)
class Trigger:
    """A parsed trigger: fires once when ``signal`` crosses ``threshold`` (SI) in ``direction``."""

    name: str
    signal: str
    direction: float
    threshold: float
    action: str
    stage: str = ""
    component: str = ""
    mode: str = ""
    delay: float = 0.0

    @property
    def needs_snapshot(self) -> bool:
        """Whether its signal is read from the balance's snapshot (a component's signal, the mass)."""
        return self.signal not in STATE_SIGNALS


def signal(name: str, t: Any, s: Any, x0: Any, snapshot: Callable[[Any, Any], dict], ops: Any) -> Any:
    """The value of a signal at time ``t`` and state ``s``, one definition for one design (floats, ``ops`` the
    scalar namespace of :mod:`thrustgraph.base.xp`) and for an ensemble (arrays over designs).

    The kinematic signals come from the state (``distance`` from the launch point ``x0``); every other one is
    read from ``snapshot(t, s)``, the balance's record of every term and signal (NaN when the vehicle does not
    have it, e.g. a component a separation dropped).

    >>> from thrustgraph.base.xp import scalar_ops
    >>> signal("distance", 0.0, [3.0, 4.0, 0.0], (0.0, 0.0, 0.0), dict, scalar_ops)
    5.0
    >>> signal("bottle.pressure", 0.0, [0.0] * 6, (0.0, 0.0, 0.0), lambda t, s: {}, scalar_ops)
    nan
    """
    if name == "time":
        return t
    if name == "altitude":
        return s[2]
    if name == "speed":
        return ops.sqrt(s[3] * s[3] + s[4] * s[4] + s[5] * s[5])
    if name == "vertical_speed":
        return s[5]
    if name == "distance":
        dx, dy, dz = s[0] - x0[0], s[1] - x0[1], s[2] - x0[2]
        return ops.sqrt(dx * dx + dy * dy + dz * dz)
    return snapshot(t, s).get(name, math.nan)


def condition(tr: Trigger, t: Any, s: Any, x0: Any, snapshot: Callable[[Any, Any], dict], ops: Any) -> Any:
    """A trigger's condition as a continuous function: its signal less its threshold (SI).

    The trigger fires where this crosses zero in ``tr.direction`` (rising for ">", falling for "<"), and at
    once where ``tr.direction * condition > 0`` as a phase starts (already true). Its action comes ``tr.delay``
    seconds after the condition is met.
    """
    return signal(tr.signal, t, s, x0, snapshot, ops) - tr.threshold


def parse_condition(text: Any, where: str) -> tuple[str, float, str]:
    """Split ``"SIGNAL < VALUE"`` into (signal, direction, value text)."""
    m = _COND.match(text) if isinstance(text, str) else None
    if not m:
        raise ModelError(where, f"expected a condition like \"altitude < 150 m\", got {shorten(text)}",
                         "write SIGNAL < VALUE or SIGNAL > VALUE, the value with its unit")
    return m.group(1), (-1.0 if m.group(2) == "<" else 1.0), m.group(3)


def parse_stages(model, kinds: dict[str, Any]) -> dict[str, tuple[str, ...]]:
    """Check ``[stages]``: each a table with a list of existing component names."""
    out: dict[str, tuple[str, ...]] = {}
    for name, table in model.stages.items():
        where = f"stages.{name}"
        if not isinstance(table, dict) or set(table) != {"components"}:
            raise ModelError(where, f"expected a table with the key 'components' only, got {shorten(table)}",
                             f"write [stages.{name}] components = [\"...\"]")
        comps = table["components"]
        if not isinstance(comps, list) or not comps or not all(isinstance(c, str) for c in comps):
            raise ModelError(f"{where}.components", f"expected a list of component names, got {shorten(comps)}",
                             "name the components the separation drops")
        for c in comps:
            if c not in kinds:
                close = difflib.get_close_matches(c, list(kinds), n=1)
                raise ModelError(f"{where}.components", f"names {shorten(c)}, which is not a component",
                                 f"did you mean {shorten(close[0])}?" if close else "check the name")
            if kinds[c].role == "boundary":
                raise ModelError(f"{where}.components", f"{shorten(c)} is the surroundings and cannot be dropped",
                                 "leave the surroundings out of the stage")
        out[name] = tuple(comps)
    return out


def check_stages(stages: dict[str, tuple[str, ...]], graph, kinds) -> None:
    """A stage may not split a flow path: every edge between two non-boundary components stays on one side."""
    for name, comps in stages.items():
        inside = set(comps)
        for a, b in graph.edges:
            if kinds[a].role == "boundary" or kinds[b].role == "boundary":
                continue
            if (a in inside) != (b in inside):
                dropped, kept = (a, b) if a in inside else (b, a)
                raise ModelError(f"stages.{name}.components", f"separating it would split {shorten(dropped)} from "
                                 f"{shorten(kept)}, which it is connected to by a flow path",
                                 f"drop both {shorten(a)} and {shorten(b)} in the same stage, or neither")
        rest = [n for n in kinds if n not in inside and kinds[n].role != "boundary"]
        if not any(kinds[n].role in ("body", "volume", "jet") for n in rest):
            raise ModelError(f"stages.{name}.components", "the separation would leave nothing with mass",
                             "keep the upper stage's airframe out of the stage")


def parse_triggers(model, kinds: dict[str, Any], stages: dict[str, tuple[str, ...]]) -> tuple[Trigger, ...]:
    """Check ``[triggers]``; the signal name is checked against the vehicle when it is assembled."""
    out = []
    keys = {"when", "then", "stage", "component", "mode", "after"}
    for name, table in model.triggers.items():
        where = f"triggers.{name}"
        if not isinstance(table, dict):
            raise ModelError(where, f"expected a table, got {shorten(table)}", f"write [triggers.{name}] when = ... then = ...")
        for k in table:
            if k not in keys:
                close = difflib.get_close_matches(k, sorted(keys), n=1)
                raise ModelError(f"{where}.{k}", "unknown key",
                                 f"did you mean {shorten(close[0])}?" if close else f"valid keys: {', '.join(sorted(keys))}")
        if "when" not in table or "then" not in table:
            raise ModelError(where, "needs both 'when' and 'then'", 'write when = "altitude < 150 m", then = "stop"')
        signal, direction, value = parse_condition(table["when"], f"{where}.when")
        action = table["then"]
        if action not in _ACTIONS:
            close = difflib.get_close_matches(str(action), _ACTIONS, n=1)
            raise ModelError(f"{where}.then", f"expected one of {', '.join(_ACTIONS)}, got {shorten(action)}",
                             f"did you mean {shorten(close[0])}?" if close else "choose one of the listed words")
        for key in ("stage", "component", "mode"):
            if key in table and not isinstance(table[key], str):
                raise ModelError(f"{where}.{key}", f"expected one {key} name as text, got {shorten(table[key])}",
                                 f'write {key} = "NAME" (one name, in quotes, not a list)')
        if not isinstance(action, str):
            raise ModelError(f"{where}.then", f"expected one of {', '.join(_ACTIONS)}, got {shorten(action)}",
                             'write then = "separate", "switch" or "stop"')
        stage = component = mode = ""
        if action == "separate":
            stage = table.get("stage", "")
            if stage not in stages:
                raise ModelError(f"{where}.stage", f"names stage {shorten(stage)}, which the model does not define",
                                 f"add [stages.{stage or 'NAME'}] components = [...] or use one of {sorted(stages)}")
        if action == "switch":
            component, mode = table.get("component", ""), table.get("mode", "")
            if component not in kinds:
                raise ModelError(f"{where}.component", f"names {shorten(component)}, which is not a component",
                                 "name the component whose mode the trigger switches")
            names = [m.name for m in kinds[component].modes]
            if mode not in names:
                raise ModelError(f"{where}.mode", f"{shorten(component)} ({kinds[component].kind}) has no mode {shorten(mode)}",
                                 f"choose one of {names}" if names else "this component has no modes")
        delay = _DELAY.parse(table["after"], where=f"{where}.after") if "after" in table else 0.0
        out.append(Trigger(name=name, signal=signal, direction=direction, threshold=value, action=action,
                           stage=stage, component=component, mode=mode, delay=delay))
    return tuple(out)


def resolve_thresholds(triggers, available: dict[str, str]) -> tuple[Trigger, ...]:
    """Check each trigger's signal exists and turn its value text into SI (``available``: name -> SI unit)."""
    out = []
    for tr in triggers:
        where = f"triggers.{tr.name}.when"
        if tr.signal not in available:
            close = difflib.get_close_matches(tr.signal, sorted(available), n=3)
            hint = f"did you mean {', '.join(repr(c) for c in close)}?" if close else \
                f"signals: {', '.join(sorted(available))}"
            raise ModelError(where, f"no signal {shorten(tr.signal)} on this vehicle", hint)
        unit = available[tr.signal]
        value = to_si(tr.threshold, unit, where=where) if unit else to_si(
            float(tr.threshold) if _is_number(tr.threshold) else tr.threshold, "", where=where)
        out.append(dataclasses.replace(tr, threshold=value))
    return tuple(out)


def _is_number(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return False
