"""Simple environments: vacuum and uniform gravity. (``still-air`` lives with the other air in tg_atmosphere.)

``vacuum`` has no pressure, density or temperature. ``uniform-gravity`` pulls
along -z with a constant g (0 for free space).

Both are ``vectorised``: their callables return the parameter values, so
with parameters that are numpy arrays (one value per design, as the ensemble
assembles them) they return arrays unchanged.

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> g = UniformGravity.build(UniformGravity.params_class()(g=9.81), scalar_ops)
>>> g(100.0)
9.81
"""

from __future__ import annotations

from thrustgraph import hookimpl
from thrustgraph.kinds.component import EnvironmentKind
from thrustgraph.kinds.parameters import Quantity

__all__ = ["Vacuum", "UniformGravity"]


class Vacuum(EnvironmentKind):
    kind = "vacuum"
    slot = "medium"
    summary = "free space: no pressure, no density, no drag"
    vectorised = True
    parameters = ()

    @classmethod
    def build(cls, p, ops):
        out = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0)

        def medium(z, t):
            return out
        medium.uniform = out
        return medium


class UniformGravity(EnvironmentKind):
    kind = "uniform-gravity"
    slot = "gravity"
    summary = "constant gravity along -z"
    vectorised = True
    parameters = (
        # Standard acceleration of gravity, exact by definition (3rd CGPM, 1901).
        Quantity("g", "m/s^2", default="9.80665 m/s^2", low=0.0, high=1000.0, doc="acceleration of gravity"),
    )

    @classmethod
    def build(cls, p, ops):
        g = p.g

        def gravity(z):
            return g
        gravity.uniform = g
        return gravity


@hookimpl
def thrustgraph_environment_kinds():
    return [Vacuum, UniformGravity]
