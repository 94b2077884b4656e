"""Ideal rocket-nozzle performance: thrust coefficient, characteristic velocity, specific impulse.

Thrust coefficient of an ideal nozzle (Sutton & Biblarz, *Rocket Propulsion
Elements*, ch. 3, the C_F equation, "Eq. 3-30" in the 7th/8th editions; the
equation number is from memory)::

    C_F = lambda sqrt( 2 g^2/(g - 1) (2/(g + 1))^((g + 1)/(g - 1)) [1 - (p2/p1)^((g - 1)/g)] )
          + (p2 - p3)/p1 * A2/At

with p1 the chamber (tank) pressure, p2 the exit pressure from the supersonic
root of the area relation, p3 the ambient pressure and lambda the divergence
factor of the exit flow. F = C_F p1 At. The characteristic velocity is
c* = p1 At / mdot = sqrt(R T1) / Gamma(g) and the specific impulse
Isp = C_F c* / g0.

Conical divergence loss: lambda = (1 + cos alpha)/2 for a cone of half angle
alpha (Malina, 1940, as given in Sutton & Biblarz ch. 3; from memory): 0.9830 at
15 degrees.

Examples
--------
>>> round(thrust_coefficient(1.4, 50.0, 0.0), 4)      # vacuum, area ratio 50 (references.md section 3)
1.7292
>>> round(divergence_factor(math.radians(15.0)), 4)
0.983
"""

from __future__ import annotations

import math
from typing import Any

from thrustgraph.base.xp import scalar_ops

from .isentropic import mach_from_area_ratio, mass_flux_factor, pressure_ratio

__all__ = ["thrust_coefficient", "characteristic_velocity", "ideal_specific_impulse", "divergence_factor",
           "STANDARD_GRAVITY"]

#: Standard acceleration of gravity, exact by definition (3rd CGPM, 1901); the g0 of specific impulse.
STANDARD_GRAVITY = 9.80665


def divergence_factor(half_angle: Any, ops: Any = scalar_ops) -> Any:
    """lambda = (1 + cos alpha)/2 of a conical exit of half angle ``half_angle`` (radians; an array of designs
    with ``ops`` the array namespace of :mod:`thrustgraph.base.xp`).

    >>> divergence_factor(0.0)
    1.0
    """
    return 0.5 * (1.0 + ops.cos(half_angle))


def thrust_coefficient(gamma: float, area_ratio: float, ambient_ratio: float = 0.0, *,
                       divergence: float = 1.0) -> float:
    """C_F of a full-flowing ideal nozzle of exit-to-throat ``area_ratio`` at p3/p1 = ``ambient_ratio``.

    >>> round(thrust_coefficient(1.4, 1.0, 0.0), 4)      # sonic exit in vacuum
    1.2679
    """
    g = gamma
    pe = pressure_ratio(mach_from_area_ratio(area_ratio, g, "supersonic"), g)
    mom = math.sqrt(2.0 * g * g / (g - 1.0) * (2.0 / (g + 1.0)) ** ((g + 1.0) / (g - 1.0))
                    * (1.0 - pe ** ((g - 1.0) / g)))
    return divergence * mom + (pe - ambient_ratio) * area_ratio


def characteristic_velocity(gamma: float, gas_constant: float, temperature: float) -> float:
    """c* = sqrt(R T0) / Gamma(g), m/s.

    >>> round(characteristic_velocity(1.4, 8314.462618 / 28.0134, 293.15), 2)
    430.78
    """
    return math.sqrt(gas_constant * temperature) / mass_flux_factor(gamma)


def ideal_specific_impulse(gamma: float, gas_constant: float, temperature: float, area_ratio: float,
                           ambient_ratio: float = 0.0, *, divergence: float = 1.0) -> float:
    """Isp = C_F c* / g0 of an ideal full-flowing nozzle, s.

    >>> round(ideal_specific_impulse(1.4, 8314.462618 / 28.0134, 293.15, 50.0), 1)   # cold nitrogen
    76.0
    """
    cf = thrust_coefficient(gamma, area_ratio, ambient_ratio, divergence=divergence)
    return cf * characteristic_velocity(gamma, gas_constant, temperature) / STANDARD_GRAVITY
