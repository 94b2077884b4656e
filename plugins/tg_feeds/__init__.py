"""Feeds: the ram inlet, the hose (tether) feed and the pump that move fluid into and through the vehicle.

Kinds
-----
``inlet`` (source)
    :class:`~tg_feeds.inlet.Inlet`: captures the surrounding water or air at
    the vehicle's speed; ram pressure with a loss coefficient; ram drag.
``hose-feed`` (source)
    :class:`~tg_feeds.hose.HoseFeed`: fluid from a fixed station at a given
    pressure (with the lift head and hose losses) or a given flow; its inflow
    momentum along a world-frame direction.
``pump`` (flow element in series)
    :class:`~tg_feeds.pump.Pump`: shaft power and efficiency capped at a
    shut-off pressure, or a head-flow curve.

A model check refuses a pump fed with gas and an inlet whose fluid does not
match the medium around the vehicle (a pump with nothing upstream is already
refused by the core's graph check). Equations, assumptions and sources: each
module and docs/fluid-devices.md.

Examples
--------
>>> sorted(k.kind for k in thrustgraph_component_kinds())
['hose-feed', 'inlet', 'pump']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .hose import HoseFeed
from .inlet import Inlet
from .propulsive import froude_efficiency
from .pump import Pump

__all__ = ["Inlet", "HoseFeed", "Pump", "froude_efficiency", "thrustgraph_component_kinds",
           "thrustgraph_check_model", "WATER_MEDIA", "NO_MEDIA"]

#: Media kinds around which an inlet captures a liquid; every other known medium is a gas, except:
WATER_MEDIA = ("still-water",)
#: Media with nothing to capture.
NO_MEDIA = ("vacuum",)


@hookimpl
def thrustgraph_component_kinds():
    return [Inlet, HoseFeed, Pump]


def _line_start(model, name: str) -> str:
    node = name
    while True:
        ups = list(model.graph.predecessors(node))
        if not ups:
            return node
        node = ups[0]
        if model.kinds[node].role != "flow":
            return node


@hookimpl
def thrustgraph_check_model(model):
    """A pump fed with gas, an inlet whose fluid does not match the medium, an inlet in a vacuum."""
    problems = []
    medium = model.env_kinds["medium"].kind
    for n in model.model.components:
        cls, p = model.kinds[n], model.params[n]
        if cls is Pump:
            start = _line_start(model, n)
            scls, sp = model.kinds[start], model.params[start]
            gas_fed = scls.kind == "gas-tank" or getattr(sp, "fluid", None) == "gas"
            if gas_fed:
                problems.append(f"components.{n}: the pump is a liquid pump, but {start!r} ({scls.kind}) feeds it "
                                f"with gas; to fix it, feed the pump from a liquid tank, a liquid inlet or a "
                                f"liquid hose, or remove the pump")
        if cls is Inlet:
            if medium in NO_MEDIA:
                problems.append(f"components.{n}: an inlet in a {medium} has nothing to capture; to fix it, put "
                                "the vehicle in air or water (environment.medium) or remove the inlet")
            elif (p.fluid == "liquid") != (medium in WATER_MEDIA):
                want = "liquid" if medium in WATER_MEDIA else "gas"
                problems.append(f"components.{n}.fluid: the inlet takes in {p.fluid} but the medium is {medium}; "
                                f"to fix it, set fluid = \"{want}\"")
    return problems
