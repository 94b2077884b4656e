"""The ``still-air`` medium: air of constant pressure and temperature everywhere, its density derived from them.

Model
-----
::

    rho = p / (R_d T)                                   dry (relative_humidity = 0, the default)
    rho = (p - e) / (R_d T) + e / (R_v T),  e = RH e_s(T)   humid

(:mod:`tg_atmosphere.air`: ideal gas with the 1976 standard's R_d = 287.0531 J/(kg K); humid air as an ideal
mixture with the Buck saturation vapour pressure.) The defaults are the 1976 standard's sea level, 101325 Pa and
288.15 K, which give its 1.2250 kg/m^3. Setting the temperature or the pressure changes the density: 35 degC
gives 1.1455 kg/m^3.

``density`` may still be written (a measured value, or a round number): it is then used as given, but only if
it lies within 1 % of the density the pressure, temperature and humidity give (given or default); otherwise the
model is refused with both numbers (:func:`tg_atmosphere.air.check_air_density`). Write it to pin the density
exactly; leave it out to let the air follow its temperature and pressure (in a study too).

The properties do not change with height: for a vehicle that climbs more than a few hundred metres use
``standard-atmosphere-1976``. An optional steady horizontal wind blows everywhere alike.

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(StillAir.parameters, {"temperature": "35 degC"}, where="environment.medium",
...                  params_class=StillAir.params_class())
>>> rho, pa, T, *wind = StillAir.build(p, scalar_ops)(100.0, 0.0)
>>> round(rho, 4), pa, round(T, 2)
(1.1455, 101325.0, 308.15)
"""

from __future__ import annotations

from thrustgraph.kinds.component import EnvironmentKind
from thrustgraph.kinds.parameters import Number, Quantity

from .air import air_density, check_air_density, check_humid_air

__all__ = ["StillAir"]


class StillAir(EnvironmentKind):
    """Air of constant pressure and temperature; density from the ideal gas (or given, checked)."""

    kind = "still-air"
    slot = "medium"
    summary = "air of constant pressure and temperature (density from the ideal gas), with an optional steady wind"
    vectorised = True
    parameters = (
        # 1976 US Standard Atmosphere sea-level values (NOAA/NASA/USAF, 1976, Table I).
        Quantity("pressure", "Pa", default="101325 Pa", low=0.0, high=1e8, reference="absolute",
                 doc="air pressure"),
        Quantity("temperature", "K", default="288.15 K", low=1.0, high=5000.0, doc="air temperature"),
        Number("relative_humidity", default=0.0, low=0.0, high=1.0,
               doc="relative humidity over water, 0 (dry) to 1 (saturated); used from -40 to +50 degC"),
        Quantity("density", "kg/m^3", default="absent", low=0.0, high=2000.0,
                 doc="air density; left out: derived from pressure, temperature and humidity (ideal gas); given: "
                     "must lie within 1 % of that"),
        Quantity("wind_x", "m/s", default="0 m/s", low=-200.0, high=200.0, doc="wind velocity along +x (downrange)"),
        Quantity("wind_y", "m/s", default="0 m/s", low=-200.0, high=200.0, doc="wind velocity along +y"),
    )

    @classmethod
    def check(cls, p, where):
        check_humid_air(p.pressure, p.temperature, p.relative_humidity, where)
        if p.density is not None:
            check_air_density(p.density, p.pressure, p.temperature, p.relative_humidity, where)

    @classmethod
    def build(cls, p, ops):
        """``medium(z, t) -> (rho, p, T, wind_x, wind_y, 0)``, the same everywhere; one definition for floats and
        arrays (the density is derived per design when it is left out)."""
        rho = air_density(p.pressure, p.temperature, p.relative_humidity, ops) if p.density is None else p.density
        out = (rho, p.pressure, p.temperature, p.wind_x, p.wind_y, 0.0)

        def medium(z, t):
            return out
        medium.uniform = out  # the same everywhere, always: the core may use the tuple itself
        return medium
