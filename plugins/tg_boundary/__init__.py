"""The surroundings: the boundary every discharge path ends at.

A flow path that reaches the surroundings crosses the control surface, so
its mass flow and exit momentum enter the vehicle's balance. The
surroundings have no parameters: their pressure, density and temperature
come from the environment's medium at the vehicle's altitude.

Examples
--------
>>> Surroundings.role
'boundary'
"""

from __future__ import annotations

from thrustgraph import hookimpl
from thrustgraph.kinds.component import ComponentKind

__all__ = ["Surroundings"]


class Surroundings(ComponentKind):
    kind = "surroundings"
    role = "boundary"
    summary = "the medium outside the vehicle; discharge paths end here"
    parameters = ()
    vectorised = True   # builds nothing, so the vectorised ensemble can use it as it is


@hookimpl
def thrustgraph_component_kinds():
    return [Surroundings]


@hookimpl
def thrustgraph_cautions(model):
    """A vehicle that flies gets the range cautions."""
    if model.launch.mount == "held":
        return ["A vehicle on a test stand still carries its full thrust into the stand: anchor the stand "
                "for more than the peak thrust, and keep people out of the exhaust line."]
    if model.launch.mount == "track":
        return ["A vehicle on a track or on the water moves fast and carries its stored energy with it: keep "
                "the track or lane clear and fenced, stand well to the side and behind, stop it at the end with "
                "a run-out or barrier, and follow the rules of the site where you run it."]
    return ["A flying vehicle can injure people and damage property: use a clear range, keep spectators "
            "well back and behind the launcher, never launch toward people, buildings, roads or power lines, "
            "and follow the flying-field rules and aviation regulations that apply where you are."]
