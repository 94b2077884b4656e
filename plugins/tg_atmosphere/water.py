"""The ``still-water`` medium: water of constant density with hydrostatic pressure below its surface.

Model
-----
::

    depth = max(z_s - z, 0)
    p     = p_s + rho g depth
    rho   = constant,  T = constant,  current = (c_x, c_y, 0) constant

z_s is the height of the free surface in model coordinates (z measured from
the launch datum), p_s the pressure on the surface (the air pressure above
it), g the gravity used for the head. This is the hydrostatic equation
dp/dz = -rho g integrated for an incompressible liquid at rest (any fluid
mechanics text, e.g. Munson, Young & Okiishi, *Fundamentals of Fluid
Mechanics*, ch. 2, p = gamma h + p0; from memory).

Assumptions and limits:

* water is incompressible (its density rises about 0.05 % per 10 bar, so the
  head is exact to that order down to ~100 m), isothermal and at rest apart
  from a uniform horizontal current;
* the default density 998.2 kg/m^3 is fresh water at 20 C (CoolProp IAPWS-95
  gives 998.207 kg/m^3; /work/shared/references.md section 8). Sea water is
  about 1025 kg/m^3 (from memory): set ``density``;
* ``g`` here is only the head's gravity; set it equal to the model's gravity
  field (the medium cannot see that field through the current contract);
* **above the surface this medium is still water**: density, temperature and
  current stay the water's and the pressure stays p_s. It models a vehicle
  that is in the water (a hull, a submerged body); it does not model the air
  above, waves, or the crossing of the surface (surface contact belongs to the
  core's ground/water-surface events).

The kind is ``vectorised``: its one definition is written against the namespace of :mod:`thrustgraph.base.xp`
and runs on floats (a single flight) and on numpy arrays of designs and heights (an ensemble).

Examples
--------
>>> import numpy as np
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.base.xp import array_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(StillWater.parameters, {}, where="environment.medium")
>>> water = StillWater.build(p, scalar_ops)
>>> rho, pa, T, cx, cy, cz = water(-10.0, 0.0)      # 10 m below the surface at z = 0
>>> rho, round(pa, 3)
(998.2, 199214.98)
>>> StillWater.build(p, array_ops)(np.array([-10.0, 0.0, 3.0]), np.zeros(3))[1].round(3).tolist()
[199214.98, 101325.0, 101325.0]
"""

from __future__ import annotations

from thrustgraph.kinds.component import EnvironmentKind
from thrustgraph.kinds.parameters import Quantity

__all__ = ["StillWater"]


class StillWater(EnvironmentKind):
    """Water at rest (or in a uniform current) with hydrostatic pressure below its surface."""

    kind = "still-water"
    slot = "medium"
    summary = "water of constant density; hydrostatic pressure below the surface, surface pressure above it"
    parameters = (
        # Fresh water at 20 C: CoolProp IAPWS-95 998.207 kg/m^3 (/work/shared/references.md section 8).
        Quantity("density", "kg/m^3", default="998.2 kg/m^3", low=100.0, high=25_000.0, doc="water density"),
        Quantity("surface_altitude", "m", default="0 m", low=-11_000.0, high=10_000.0, doc="height of the free surface above the launch datum"),
        # 1976 standard sea-level pressure.
        Quantity("surface_pressure", "Pa", default="101325 Pa", low=0.0, high=1e8, reference="absolute", doc="pressure on the free surface"),
        Quantity("temperature", "K", default="20 degC", low=1.0, high=1000.0, doc="water temperature"),
        Quantity("g", "m/s^2", default="9.80665 m/s^2", low=0.0, high=1000.0,
                 doc="gravity for the hydrostatic head (set it equal to the model's gravity)"),
        Quantity("current_x", "m/s", default="0 m/s", low=-100.0, high=100.0, doc="velocity of the water along +x"),
        Quantity("current_y", "m/s", default="0 m/s", low=-100.0, high=100.0, doc="velocity of the water along +y"),
    )

    vectorised = True

    @classmethod
    def build(cls, p, ops):
        """``medium(z, t) -> (rho, p, T, current_x, current_y, 0)`` in SI; one definition for floats and arrays
        (``z`` and the parameters may be arrays over designs)."""
        rho, zs, ps, T, cx, cy = p.density, p.surface_altitude, p.surface_pressure, p.temperature, \
            p.current_x, p.current_y
        k = p.density * p.g

        def medium(z, t):
            depth = ops.maximum(zs - z, 0.0)
            return (rho, ps + k * depth, T, cx, cy, 0.0)
        return medium
