"""The ``standard-atmosphere-1976`` medium: the 1976 standard to 86 km, with an optional power-law wind.

The model's altitude z is measured from the launch datum; the medium adds
``datum_altitude`` (the datum's height above sea level) and reads the
standard at ``datum_altitude + z`` on the scale chosen by ``altitude_type``:

``geometric``
    z and the datum are geometric heights (what a tape measure or GPS gives);
    H = r0 Z / (r0 + Z) is applied.
``geopotential``
    z and the datum are geopotential heights, used as H directly (what most
    printed layer tables list).

At 11 km the two choices differ by 0.30 % in pressure (22 699.9 Pa against
22 632.1 Pa). See :mod:`tg_atmosphere.standard1976` for the equations,
sources and the behaviour outside 0..86 km (a stated extrapolation during
flight; a launch point outside the range is refused at model-check time).

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(StandardAtmosphere1976.parameters, {"datum_altitude": "1 km"}, where="environment.medium")
>>> air = StandardAtmosphere1976.build(p, scalar_ops)
>>> rho, pa, T, wx, wy, wz = air(4000.0, 0.0)       # 4 km above a datum at 1 km: geometric 5 km
>>> round(pa, 2), round(rho, 6)
(54048.29, 0.736428)
"""

from __future__ import annotations

from thrustgraph.kinds.component import EnvironmentKind
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Number, Quantity

from .standard1976 import R0, Z_TOP, atmosphere_1976, geometric_altitude, geopotential_altitude
from .wind import power_law_wind

__all__ = ["StandardAtmosphere1976", "site_range"]


def site_range(altitude_type: str) -> tuple[float, float]:
    """Lowest and highest launch-point altitude above sea level (m) on the given scale.

    >>> site_range("geometric"), round(site_range("geopotential")[1], 2)
    ((0.0, 86000.0), 84852.05)
    """
    if altitude_type == "geopotential":
        return 0.0, geopotential_altitude(Z_TOP)
    return 0.0, Z_TOP


class StandardAtmosphere1976(EnvironmentKind):
    """US Standard Atmosphere 1976 (0 to 86 km) with an optional steady power-law wind.

    Equations, assumptions, limits and sources: :mod:`tg_atmosphere.standard1976`
    (the atmosphere) and :mod:`tg_atmosphere.wind` (the wind profile).
    """

    kind = "standard-atmosphere-1976"
    slot = "medium"
    summary = "US Standard Atmosphere 1976 to 86 km (geometric or geopotential altitude) with a power-law wind"
    parameters = (
        Choice("altitude_type", options=("geometric", "geopotential"), default="geometric",
               doc="scale of z and datum_altitude: geometric (tape-measure) or geopotential height"),
        Quantity("datum_altitude", "m", default="0 m",
                 doc="height of the launch datum (z = 0) above sea level, on the altitude_type scale"),
        Quantity("wind_speed", "m/s", default="0 m/s", low=0.0, high=200.0,
                 doc="wind speed at wind_reference_height above the datum"),
        Quantity("wind_azimuth", "deg", default="0 deg", low=-360.0, high=360.0,
                 doc="direction the wind blows toward, from +x toward +y (like launch.azimuth)"),
        Quantity("wind_reference_height", "m", default="10 m", low=0.01, high=1e5,
                 doc="height above the datum where wind_speed is given (10 m: common anemometer height)"),
        Number("wind_exponent", default=1.0 / 7.0, low=0.0, high=1.0,
               doc="power-law exponent alpha of w(z) = w_ref (z / z_ref)^alpha; 1/7 common practice, 0 constant"),
        Quantity("wind_ceiling", "m", default="100 km", low=0.01, high=1e6,
                 doc="height above the datum above which the wind speed stays constant"),
    )

    @classmethod
    def check(cls, p, where):
        lo, hi = site_range(p.altitude_type)
        if not lo <= p.datum_altitude <= hi:
            raise ModelError(f"{where}.datum_altitude",
                             f"{p.datum_altitude:g} m ({p.altitude_type}) is outside the 1976 standard atmosphere, "
                             f"which holds from {lo:g} m to {hi:.7g} m above sea level",
                             f"give the launch site's height above sea level between {lo:g} m and {hi:.7g} m")
        if p.wind_speed > 0.0 and p.wind_exponent > 0.0 and p.wind_ceiling < p.wind_reference_height:
            raise ModelError(f"{where}.wind_ceiling",
                             f"{p.wind_ceiling:g} m is below wind_reference_height ({p.wind_reference_height:g} m), "
                             "so the wind never reaches wind_speed",
                             "raise wind_ceiling above the reference height or lower the reference height")

    vectorised = True

    @classmethod
    def build(cls, p, ops):
        """``medium(z, t) -> (rho, p, T, wind_x, wind_y, wind_z)`` in SI; one definition for floats and arrays."""
        datum = p.datum_altitude
        wind = power_law_wind(speed=p.wind_speed, azimuth_rad=p.wind_azimuth,   # parsed to radians (SI)
                              reference_height=p.wind_reference_height, exponent=p.wind_exponent,
                              ceiling=p.wind_ceiling, ops=ops)
        if p.altitude_type == "geopotential":
            def medium(z, t):
                T, pa, rho = atmosphere_1976(datum + z, ops)
                wx, wy, wz = wind(z)
                return (rho, pa, T, wx, wy, wz)
        else:
            def medium(z, t):
                Z = datum + z
                T, pa, rho = atmosphere_1976(R0 * Z / (R0 + Z), ops)
                wx, wy, wz = wind(z)
                return (rho, pa, T, wx, wy, wz)
        return medium

    @classmethod
    def datum_geometric(cls, p) -> float:
        """The datum's geometric height above sea level, m."""
        if p.altitude_type == "geopotential":
            return geometric_altitude(p.datum_altitude)
        return p.datum_altitude
