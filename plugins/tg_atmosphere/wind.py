"""A steady horizontal wind whose speed grows with height by a power law.

Model
-----
::

    w(z) = w_ref (z_c / z_ref)^alpha,     z_c = min(max(z, 0), z_ceiling)
    wind = w(z) (cos(azimuth), sin(azimuth), 0)

z is the height above the launch datum (m). The exponent alpha = 1/7 (the
"one-seventh power law") is common practice for a neutral surface layer over
open, level ground, with z_ref = 10 m the usual anemometer height (common
practice, no single source). alpha = 0 gives a wind constant with height.

The azimuth is the direction the wind blows *toward*, measured from +x toward
+y, the same convention as ``launch.azimuth`` (not the meteorological
convention, which names the direction the wind comes *from*).

Validity: a power law describes the lowest few hundred metres of a neutral
atmosphere, on average; gusts, turbulence, shear layers and turning of the
wind with height are not represented. Above ``z_ceiling`` the speed is held
at its value there (set it to the height where you stop trusting the profile).
Below the datum (z < 0) the speed is 0 unless alpha = 0.

Examples
--------
>>> w = power_law_wind(speed=5.0, azimuth_rad=0.0, reference_height=10.0, exponent=1 / 7, ceiling=1000.0)
>>> [round(c, 4) for c in w(10.0)], round(w(1280.0)[0], 4) == round(w(1000.0)[0], 4)
([5.0, 0.0, 0.0], True)
"""

from __future__ import annotations

from typing import Any, Callable

from thrustgraph.base.xp import scalar_ops

__all__ = ["power_law_wind"]


def power_law_wind(*, speed: Any, azimuth_rad: Any, reference_height: Any, exponent: Any,
                   ceiling: Any, ops: Any = scalar_ops) -> Callable[[Any], tuple[Any, Any, Any]]:
    """Build ``wind(z) -> (wx, wy, wz)`` (m/s) for the power-law profile of the module docstring.

    One definition for floats and for arrays of designs (``ops``: :mod:`thrustgraph.base.xp`; the parameters
    may then be arrays too).

    Parameters
    ----------
    speed : float
        w_ref, the wind speed at the reference height, m/s (>= 0).
    azimuth_rad : float
        Direction the wind blows toward, from +x toward +y, radians.
    reference_height : float
        z_ref, m (> 0).
    exponent : float
        alpha (>= 0); 0 for a wind constant with height.
    ceiling : float
        Height above which the speed stays constant, m (> 0).
    """
    ux, uy = speed * ops.cos(azimuth_rad), speed * ops.sin(azimuth_rad)
    if ops.all(speed == 0.0):
        def calm(z: Any) -> tuple[Any, Any, Any]:
            return (0.0 * z, 0.0 * z, 0.0 * z)
        return calm
    if ops.all(exponent == 0.0):
        def const(z: Any) -> tuple[Any, Any, Any]:
            return (ux + 0.0 * z, uy + 0.0 * z, 0.0 * z)
        return const
    inv = 1.0 / reference_height

    def wind(z: Any) -> tuple[Any, Any, Any]:
        zc = ops.minimum(z, ceiling)
        above = zc > 0.0
        # below the datum the speed is 0 (the power of a clipped height stays finite there)
        f = ops.where(above, (ops.maximum(zc, 1e-300) * inv) ** exponent, 0.0)
        return (ux * f, uy * f, 0.0 * f)
    return wind
