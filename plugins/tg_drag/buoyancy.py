"""Buoyancy of a fully immersed volume, as a body force: F = rho g V upward.

Model
-----
::

    F = (0, 0, rho g V)

rho is the density of the medium at the vehicle (from the environment), V
the volume the vehicle displaces, g a parameter of this kind. Archimedes'
principle for a body wholly immersed in a fluid at rest (any fluid mechanics
text, e.g. Munson, Young & Okiishi, *Fundamentals of Fluid Mechanics*, ch. 2,
"buoyancy"; from memory).

Why g is a parameter: a body force receives the medium's density, pressure,
temperature and the velocity through the medium, but not gravity, so this kind
cannot read the model's gravity field. Set ``g`` equal to it (for
``inverse-square-gravity`` the difference at 1 km is 0.03 %).

Assumptions and limits (read them before you use it):

* the volume is **fully immersed** and constant: there is no free surface, no
  partial immersion, no waterline, so it cannot float a boat at the surface
  (that needs the core's water-surface contact);
* the medium is at rest apart from a uniform current; in the ``still-water``
  medium the density stays the water's even above its surface, so a body that
  leaves the water keeps its buoyancy: keep it submerged;
* no added mass (a body accelerating in water drags some water with it, for a
  sphere half its displaced mass; from memory): for dense bodies this is
  small, for bodies near neutral buoyancy it is not;
* in air, the buoyancy of a small rocket is tiny (rho_air / rho_vehicle) and
  is usually left out; it is correct to include it.

The kind is ``vectorised``: its one definition (a product of parameters and the medium's density) runs
on floats and on numpy arrays of designs (:mod:`thrustgraph.base.xp`).

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(Buoyancy.parameters, {"displaced_volume": "2 L"}, where="components.float")
>>> round(Buoyancy.build_body(p, scalar_ops).force((998.2, 1e5, 293.0, 0.0, 0.0, 0.0, 0.0))[2], 6)
19.577996
"""

from __future__ import annotations

from thrustgraph.kinds.component import BodyFns, ComponentKind
from thrustgraph.kinds.parameters import Quantity

__all__ = ["Buoyancy"]


class Buoyancy(ComponentKind):
    """Buoyancy of a fully immersed, constant volume (see the module docstring); it carries no mass."""

    kind = "buoyancy"
    role = "body"
    summary = "upward force rho g V of a fully immersed constant volume (no mass of its own)"
    parameters = (
        Quantity("displaced_volume", "m^3", low=1e-9, high=1e6, doc="volume of medium the vehicle displaces"),
        # Standard acceleration of gravity, exact by definition (3rd CGPM, 1901).
        Quantity("g", "m/s^2", default="9.80665 m/s^2", low=0.0, high=1000.0,
                 doc="gravity for the buoyancy (set it equal to the model's gravity field)"),
    )

    vectorised = True

    @classmethod
    def build_body(cls, p, ops):
        """One definition for floats and arrays: ``p`` fields and ``air`` may be arrays over designs."""
        k = p.g * p.displaced_volume

        def force(air):
            return (0.0, 0.0, k * air[0])
        return BodyFns(mass=0.0, force=force, force_name="buoyancy")
