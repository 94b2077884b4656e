"""Air as an ideal gas: density from pressure and temperature, dry or humid.

Model
-----
Dry air is an ideal gas with the specific gas constant of the US Standard
Atmosphere 1976 (NOAA/NASA/USAF, 1976; R* = 8314.32 J/(kmol K),
M0 = 28.9644 kg/kmol)::

    rho = p / (R_d T),        R_d = R* / M0 = 287.0531 J/(kg K)

so the 1976 sea-level values 101325 Pa and 288.15 K give its 1.2250 kg/m^3.

Humid air is treated as an ideal mixture of dry air and water vapour
(Dalton's law of partial pressures)::

    e   = RH e_s(t)                         partial pressure of the vapour
    rho = (p - e) / (R_d T) + e / (R_v T),  R_v = R / M_w = 461.52 J/(kg K)

with R = 8.314462618 J/(mol K) (CODATA 2018) and M_w = 18.01528 g/mol, and
the saturation vapour pressure over liquid water by the Buck equation::

    e_s(t) = 611.21 Pa exp((18.678 - t / 234.5) t / (257.14 + t)),   t in degC

(A. L. Buck, "New equations for computing vapor pressure and enhancement
factor", J. Appl. Meteorol. 20, 1527-1532, 1981, with the coefficients of
his 1996 revision, Buck Research CR-1A user's manual, appendix 1; the
revision's coefficients are from a stored copy of the equation, the accuracy
figures from memory: within about 0.05 % of the reference vapour pressure
from -40 to +50 degC.) The enhancement factor (about 1.004 near sea level)
and the compressibility of moist air (Z about 0.9996) are left out: together
they move the density by less than 0.1 % (the tests compare with CoolProp's
humid-air properties, ASHRAE RP-1485).

Humid air is lighter than dry air at the same pressure and temperature: at
35 degC and 101325 Pa, 1.1455 kg/m^3 dry and 1.1214 kg/m^3 saturated (2.1 %
less).

Validity: ``relative_humidity`` > 0 only from -40 to +50 degC (the range of
the Buck fit over water) and where the vapour pressure is below the pressure;
:func:`check_humid_air` refuses anything else. Relative humidity is taken
over liquid water also below 0 degC (the meteorological convention).

The functions take ``ops`` (:mod:`thrustgraph.base.xp`): one definition for floats
and for numpy arrays of designs.

Examples
--------
>>> round(air_density(101325.0, 288.15), 5)                   # the 1976 standard's sea level
1.225
>>> round(air_density(101325.0, 308.15), 4), round(air_density(101325.0, 308.15, 1.0), 4)   # 35 degC
(1.1455, 1.1214)
>>> round(saturation_vapour_pressure(293.15), 1)              # 20 degC
2338.3
"""

from __future__ import annotations

from typing import Any

from thrustgraph.base.errors import ModelError
from thrustgraph.base.xp import scalar_ops

from .standard1976 import R_AIR

__all__ = ["R_DRY", "R_VAPOUR", "T_HUMID_LOW", "T_HUMID_HIGH", "saturation_vapour_pressure", "air_density",
           "check_humid_air", "DENSITY_TOLERANCE", "check_air_density"]

#: Specific gas constant of dry air, J/(kg K): the 1976 standard's R* / M0.
R_DRY = R_AIR
#: Specific gas constant of water vapour, J/(kg K): R / M_w with R = 8.314462618 J/(mol K) (CODATA 2018) and
#: M_w = 18.01528 g/mol (the molar mass of water, from memory).
R_VAPOUR = 8.314462618 / 0.01801528
#: Temperatures (K) between which the Buck fit over water is used (-40 .. +50 degC).
T_HUMID_LOW, T_HUMID_HIGH = 233.15, 323.15
#: Largest relative difference between a density given with pressure and temperature and the one they give.
DENSITY_TOLERANCE = 0.01


def saturation_vapour_pressure(T: Any, ops: Any = scalar_ops) -> Any:
    """Saturation vapour pressure of water over a plane liquid surface, Pa (Buck; see the module docstring).

    The temperature is clipped to -80 .. +60 degC so that values outside the range stay finite (they are refused
    where humidity is used: :func:`check_humid_air`).

    >>> round(saturation_vapour_pressure(273.15), 2)
    611.21
    """
    t = ops.clip(T - 273.15, -80.0, 60.0)
    return 611.21 * ops.exp((18.678 - t / 234.5) * t / (257.14 + t))


def air_density(p: Any, T: Any, relative_humidity: Any = 0.0, ops: Any = scalar_ops) -> Any:
    """Density of air, kg/m^3, from its pressure (Pa), temperature (K) and relative humidity (0 .. 1).

    Dry air when ``relative_humidity`` is 0 (exactly p / (R_d T)); see the module docstring.

    >>> round(air_density(54048.29, 255.676), 5)                  # 1976 standard, geometric 5 km: 0.736428
    0.73643
    """
    e = relative_humidity * saturation_vapour_pressure(T, ops)
    return (p - e) / (R_DRY * T) + e / (R_VAPOUR * T)


def check_humid_air(p: float, T: float, relative_humidity: float, where: str) -> None:
    """Refuse humid air outside the range of the vapour-pressure fit, or with more vapour than pressure.

    >>> check_humid_air(101325.0, 353.15, 0.5, "environment.medium")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: environment.medium.relative_humidity: humid air is computed from -40 degC to +50 degC (the range of the Buck vapour-pressure fit), but the temperature is 80 degC. Fix: give relative_humidity = 0 (dry air) at this temperature, or a temperature in that range.
    """
    if not relative_humidity > 0.0:
        return
    if not T_HUMID_LOW <= T <= T_HUMID_HIGH:
        raise ModelError(f"{where}.relative_humidity",
                         f"humid air is computed from -40 degC to +50 degC (the range of the Buck vapour-pressure "
                         f"fit), but the temperature is {T - 273.15:.4g} degC",
                         "give relative_humidity = 0 (dry air) at this temperature, or a temperature in that range")
    e = relative_humidity * saturation_vapour_pressure(T)
    if not e < p:
        raise ModelError(f"{where}.relative_humidity",
                         f"the water vapour would exert {e:.6g} Pa, more than the air's pressure {p:.6g} Pa",
                         "lower relative_humidity or the temperature, or raise the pressure")


def check_air_density(density: float, p: float, T: float, relative_humidity: float, where: str) -> None:
    """Refuse a density that differs from the one pressure, temperature and humidity give by more than 1 %.

    >>> check_air_density(1.225, 101325.0, 308.15, 0.0, "environment.medium")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: environment.medium.density: 1.225 kg/m^3 does not go with the pressure 101325 Pa, temperature 35 degC and relative humidity 0 (given or default): as an ideal gas that air has 1.1455 kg/m^3, 6.49 % less (more than the 1 % allowed). Fix: leave density out (it is then derived from pressure, temperature and humidity), or give the pressure, temperature and humidity that go with it.
    """
    derived = air_density(p, T, relative_humidity)
    if abs(density - derived) <= DENSITY_TOLERANCE * derived:
        return
    rel = (derived - density) / density
    word = "less" if rel < 0 else "more"
    raise ModelError(f"{where}.density",
                     f"{density:.6g} kg/m^3 does not go with the pressure {p:.6g} Pa, temperature "
                     f"{T - 273.15:.4g} degC and relative humidity {relative_humidity:.3g} (given or default): as an "
                     f"ideal gas that air has {derived:.5g} kg/m^3, {abs(rel) * 100:.3g} % {word} (more than the "
                     f"{DENSITY_TOLERANCE * 100:g} % allowed)",
                     "leave density out (it is then derived from pressure, temperature and humidity), or give the "
                     "pressure, temperature and humidity that go with it")
