"""Simple environments: still air of constant properties, vacuum, uniform gravity.

``still-air`` has constant density, pressure and temperature at every
altitude, with an optional steady horizontal wind. ``vacuum`` has none of
them. ``uniform-gravity`` pulls along -z with a constant g (0 for free space).

All three are ``vectorised``: their callables return the parameter values, so
with parameters that are numpy arrays (one value per design, as the ensemble
assembles them) they return arrays unchanged.

Examples
--------
>>> from thrustgraph.component import scalar_ops
>>> air = StillAir.build(StillAir.params_class()(density=1.2, pressure=1e5, temperature=288.0,
...                      wind_x=0.0, wind_y=0.0), scalar_ops)
>>> air(100.0, 0.0)[:3]
(1.2, 100000.0, 288.0)
"""

from __future__ import annotations

from thrustgraph import hookimpl
from thrustgraph.component import EnvironmentKind
from thrustgraph.parameters import Quantity

__all__ = ["StillAir", "Vacuum", "UniformGravity"]


class StillAir(EnvironmentKind):
    kind = "still-air"
    slot = "medium"
    summary = "air of constant density, pressure and temperature, with an optional steady wind"
    vectorised = True
    parameters = (
        # 1976 US Standard Atmosphere sea-level values (NOAA/NASA/USAF, 1976, Table I).
        Quantity("density", "kg/m^3", default="1.225 kg/m^3", low=0.0, high=2000.0, doc="air density"),
        Quantity("pressure", "Pa", default="101325 Pa", low=0.0, high=1e8, doc="air pressure"),
        Quantity("temperature", "K", default="288.15 K", low=1.0, high=5000.0, doc="air temperature"),
        Quantity("wind_x", "m/s", default="0 m/s", low=-200.0, high=200.0, doc="wind velocity along +x (downrange)"),
        Quantity("wind_y", "m/s", default="0 m/s", low=-200.0, high=200.0, doc="wind velocity along +y"),
    )

    @classmethod
    def build(cls, p, ops):
        out = (p.density, p.pressure, p.temperature, p.wind_x, p.wind_y, 0.0)

        def medium(z, t):
            return out
        medium.uniform = out  # the same everywhere, always: the core may use the tuple itself
        return medium


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
    return [StillAir, Vacuum, UniformGravity]
