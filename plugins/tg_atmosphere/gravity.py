"""The ``inverse-square-gravity`` field: g falls off with the square of the distance from the earth's centre.

Model
-----
::

    g(z) = g0 (r0 / (r0 + z_datum + z))^2

z is the model's height above the launch datum, z_datum the datum's
geometric height above the reference sphere (sea level). The default
r0 = 6 356 766 m is the effective earth radius of the US Standard Atmosphere
1976, which uses exactly this law for g(Z) (with g0 = 9.80665 m/s^2) and
defines the geopotential altitude from it (S: crnslab.org, scipp.ucsc.edu;
/work/shared/references.md section 5). With these defaults the field is the
one the standard atmosphere's hydrostatic equation was integrated with, so
dp/dz = -rho g holds exactly between ``standard-atmosphere-1976`` and this
field (a test checks it).

Assumptions and limits: a spherical, non-rotating earth; no latitude
dependence, no centrifugal term, no oblateness (J2), no local anomalies. The
real surface gravity varies from about 9.780 (equator) to 9.832 m/s^2 (poles)
(from memory); set g0 for your site if that matters. Gravity acts along -z of
the flat-earth frame the core integrates in, so over long ranges the
direction of "down" is not turned with the earth's curvature.

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(InverseSquareGravity.parameters, {}, where="environment.gravity")
>>> g = InverseSquareGravity.build(p, scalar_ops)
>>> g(0.0), g(6356766.0) == 9.80665 / 4
(9.80665, True)
"""

from __future__ import annotations

from thrustgraph.kinds.component import EnvironmentKind
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Quantity

__all__ = ["InverseSquareGravity"]


class InverseSquareGravity(EnvironmentKind):
    """Gravity that falls off as (r0 / (r0 + altitude))^2."""

    kind = "inverse-square-gravity"
    slot = "gravity"
    summary = "g0 (r0 / (r0 + h))^2 with h the height above sea level; r0 the 1976 standard's earth radius"
    parameters = (
        # Standard acceleration of gravity, exact by definition (3rd CGPM, 1901).
        Quantity("g0", "m/s^2", default="9.80665 m/s^2", low=0.0, high=1000.0, doc="gravity at sea level (the reference sphere)"),
        # Effective earth radius of the US Standard Atmosphere 1976 (S: crnslab.org; references.md section 5).
        Quantity("radius", "m", default="6356766 m", low=1.0, high=1e10,
                 doc="radius of the reference sphere (6356766 m: the 1976 standard's effective earth radius)"),
        Quantity("datum_altitude", "m", default="0 m", low=-1e5, high=1e10,
                 doc="geometric height of the launch datum (z = 0) above the reference sphere"),
    )

    @classmethod
    def check(cls, p, where):
        if p.radius + p.datum_altitude <= 0.0:
            raise ModelError(f"{where}.datum_altitude",
                             f"{p.datum_altitude:g} m puts the launch datum at or below the earth's centre "
                             f"(radius {p.radius:g} m)",
                             "give the launch site's height above sea level, e.g. \"1400 m\"")

    vectorised = True

    @classmethod
    def build(cls, p, ops):
        """``gravity(z) -> g`` (m/s^2, acting along -z); one definition for floats and arrays."""
        g0, r0, base = p.g0, p.radius, p.radius + p.datum_altitude

        def gravity(z):
            f = r0 / (base + z)
            return g0 * f * f
        return gravity
