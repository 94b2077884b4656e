"""Airframe: the vehicle's dry structure, with quadratic aerodynamic (or hydrodynamic) drag.

Drag acts against the velocity through the medium: ``D = -1/2 rho Cd A |v| v``,
with A the reference (frontal) area of the given diameter. The drag
coefficient is constant here; tables against Mach number or speed belong to
a later family.

A flying vehicle (mount ``guide`` or ``free``) in a medium with density whose
airframe has no drag data (drag_coefficient or reference_diameter left at 0)
gets a warning from ``check`` and ``run`` (:func:`thrustgraph_model_warnings`):
it would fly with no drag at all, and climb about twice as high as with a
typical Cd of 0.4.

The kind is ``vectorised``: its one definition is written against the namespace of :mod:`thrustgraph.base.xp`
and runs on floats (a single flight) and on numpy arrays of designs (an ensemble).

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> P = Airframe.params_class()
>>> b = Airframe.build_body(P(dry_mass=0.1, reference_diameter=0.1, drag_coefficient=0.5), scalar_ops)
>>> round(b.force((1.2, 1e5, 288.0, 0.0, 0.0, 10.0, 10.0))[2], 6)
-0.235619
"""

from __future__ import annotations

import math

from thrustgraph import hookimpl
from thrustgraph.kinds.component import BodyFns, ComponentKind
from thrustgraph.kinds.parameters import Number, Quantity

__all__ = ["Airframe"]


class Airframe(ComponentKind):
    kind = "airframe"
    role = "body"
    summary = "dry structure: mass, reference diameter and a constant drag coefficient"
    parameters = (
        Quantity("dry_mass", "kg", low=1e-6, high=1e6, doc="mass of the empty vehicle"),
        Quantity("reference_diameter", "m", default="0 m", low=0.0, high=100.0, doc="diameter of the frontal reference area"),
        Number("drag_coefficient", default=0.0, low=0.0, high=5.0, doc="drag coefficient on the reference area"),
    )

    @classmethod
    def describe_mass(cls, p, amb):
        return {"dry structure": p.dry_mass}

    vectorised = True

    @classmethod
    def build_body(cls, p, ops):
        """One definition for one design (floats) and for an ensemble (``p`` fields and ``air`` arrays)."""
        k = 0.5 * p.drag_coefficient * math.pi * p.reference_diameter ** 2 / 4.0
        if ops.all(k == 0.0):
            return BodyFns(mass=p.dry_mass, force=None)

        def drag(air):
            c = -k * air[0] * air[6]
            return (c * air[3], c * air[4], c * air[5])
        return BodyFns(mass=p.dry_mass, force=drag, force_name="drag")


@hookimpl
def thrustgraph_component_kinds():
    return [Airframe]


@hookimpl
def thrustgraph_model_warnings(model):
    """Warn when a flying vehicle's airframe has no drag data (no drag coefficient or no reference area)."""
    if model.launch.mount not in ("guide", "free") or not model.ambient.density > 0.0:
        return []
    out = []
    for name in model.model.components:
        if model.kinds[name] is not Airframe:
            continue
        p = model.params[name]
        if p.drag_coefficient > 0.0 and p.reference_diameter > 0.0:
            continue
        missing = " and ".join(w for w, v in (("drag_coefficient", p.drag_coefficient),
                                               ("reference_diameter", p.reference_diameter)) if not v > 0.0)
        out.append(f"components.{name}: the airframe has no drag data ({missing} left at 0), so the vehicle flies "
                   f"with no air drag at all; to fix it, give drag_coefficient and reference_diameter (e.g. "
                   f"drag_coefficient = 0.4, reference_diameter = \"100 mm\" for a bottle rocket), or fly in "
                   f"vacuum if that is meant")
    return out
