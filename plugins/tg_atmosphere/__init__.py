"""Environment models: still air, the US Standard Atmosphere 1976 with wind, still water, inverse-square gravity.

Kinds
-----
``still-air`` (medium)
    :class:`~tg_atmosphere.still_air.StillAir`: constant pressure and
    temperature, density from the ideal gas (dry, or humid with the Buck
    vapour pressure: :mod:`tg_atmosphere.air`), or given and checked against
    them; an optional steady wind.
``standard-atmosphere-1976`` (medium)
    :class:`~tg_atmosphere.atmosphere.StandardAtmosphere1976`: the seven
    layers to 86 km from the standard's defining constants, on a geometric or
    geopotential altitude scale, above a launch datum at ``datum_altitude``;
    an optional steady wind with a power-law profile.
``still-water`` (medium)
    :class:`~tg_atmosphere.water.StillWater`: constant density, hydrostatic
    pressure below the free surface.
``inverse-square-gravity`` (gravity)
    :class:`~tg_atmosphere.gravity.InverseSquareGravity`: g0 (r0 / (r0 + h))^2.

Model checks (:func:`thrustgraph_check_model`): a launch point outside the
standard atmosphere's 0..86 km is refused, and so is a gravity datum that
contradicts the atmosphere's datum. The equations, limits and sources are in
each module and in docs/environment.md.

Examples
--------
>>> sorted(k.kind for k in thrustgraph_environment_kinds())
['inverse-square-gravity', 'standard-atmosphere-1976', 'still-air', 'still-water']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .air import air_density, saturation_vapour_pressure
from .atmosphere import StandardAtmosphere1976, site_range
from .gravity import InverseSquareGravity
from .standard1976 import atmosphere_1976, geometric_altitude, geopotential_altitude
from .still_air import StillAir
from .water import StillWater
from .wind import power_law_wind

__all__ = ["StillAir", "air_density", "saturation_vapour_pressure", "StandardAtmosphere1976", "StillWater", "InverseSquareGravity", "atmosphere_1976",
           "geopotential_altitude", "geometric_altitude", "power_law_wind", "thrustgraph_environment_kinds",
           "thrustgraph_check_model"]


@hookimpl
def thrustgraph_environment_kinds():
    return [StillAir, StandardAtmosphere1976, StillWater, InverseSquareGravity]


@hookimpl
def thrustgraph_check_model(model):
    """Refuse a launch point outside 0..86 km and a gravity datum that contradicts the atmosphere's."""
    medium = model.env_kinds.get("medium")
    if medium is None or not issubclass(medium, StandardAtmosphere1976):
        return []
    p = model.env_params["medium"]
    problems = []
    site = p.datum_altitude + model.launch.altitude
    lo, hi = site_range(p.altitude_type)
    if not lo <= site <= hi:
        problems.append(
            f"launch.altitude: the launch point is {site:g} m above sea level ({p.altitude_type}: "
            f"environment.medium.datum_altitude = {p.datum_altitude:g} m plus launch.altitude = "
            f"{model.launch.altitude:g} m), outside the 1976 standard atmosphere, which holds from {lo:g} m to "
            f"{hi:.7g} m; to fix it, change launch.altitude or environment.medium.datum_altitude so that their "
            f"sum lies in that range")
    gravity = model.env_kinds.get("gravity")
    if gravity is not None and issubclass(gravity, InverseSquareGravity):
        g = model.env_params["gravity"]
        datum = StandardAtmosphere1976.datum_geometric(p)
        if abs(g.datum_altitude - datum) > 1e-6 * max(1.0, abs(datum)):
            problems.append(
                f"environment.gravity.datum_altitude: {g.datum_altitude:g} m differs from the atmosphere's launch "
                f"datum (environment.medium.datum_altitude = {p.datum_altitude:g} m {p.altitude_type}, "
                f"{datum:.7g} m geometric); both describe the same launch site, so to fix it give "
                f"environment.gravity.datum_altitude = \"{datum:.7g} m\"")
    return problems
