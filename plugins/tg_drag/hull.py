"""A boat hull: dry mass plus a resistance table (force against speed through the water).

Model
-----
::

    F = -R(|v|) v / |v|

with v the hull's velocity through the water (its velocity minus the
current) and R the tabulated total resistance (N) at speed |v|. By default
only the horizontal part of v counts (``acts = "horizontal"``): a resistance
curve is measured for a hull running level at the surface (a towing-tank or
towed-trial curve). ``acts = "along-motion"`` uses the full 3-D velocity
(a submerged body).

Between rows R is interpolated linearly. At the ends:

* below the first row, R falls linearly to 0 at zero speed (a row at speed 0
  must have R = 0, so a hull at rest feels no force);
* above the last row, R grows with the square of the speed from the last row,
  R = R_n (|v| / v_n)^2 (the resistance coefficient of the last row is held:
  the analogue of clamping a drag coefficient). Outside the measured range
  this is an extrapolation; planing hulls in particular do not follow it.

Assumptions and limits: the table is the hull's resistance in the water it
was measured in, at the displacement and trim it was measured at; it is not
rescaled for density, loading or speed-dependent trim. The hull is assumed
to be held at the surface by the core's water-surface contact (buoyancy and
sinkage are not computed here), and there is no added mass, no wave or wind
loading, no side force or turning. Resistance curves come from model tests
scaled by Froude's method, or from trials (a standard text: Harvald,
*Resistance and Propulsion of Ships*, 1983; from memory); this kind uses a
curve, it does not predict one.

The kind is ``vectorised``: its one definition is written against the namespace of :mod:`thrustgraph.base.xp`
and runs on floats (a single flight) and on numpy arrays of designs (an ensemble).

Examples
--------
>>> import numpy as np
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.base.xp import array_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(BoatHull.parameters, {"dry_mass": "5 kg",
...     "resistance_table": {"units": ["m/s", "N"], "rows": [[0, 0], [1, 2], [2, 10]]}}, where="components.hull")
>>> hull = BoatHull.build_body(p, scalar_ops)
>>> round(hull.force((998.2, 1e5, 293.0, 1.5, 0.0, 0.0, 1.5))[0], 9)    # R(1.5 m/s) = 6 N, against +x
-6.0
>>> air = tuple(np.array(v) for v in (998.2, 1e5, 293.0)) + (np.array([0.0, 1.5, 3.0]), np.zeros(3), np.zeros(3),
...                                                          np.array([0.0, 1.5, 3.0]))
>>> BoatHull.build_body(p, array_ops).force(air)[0].tolist()      # at rest, in the table, above its last row
[-0.0, -6.0, -22.5]
"""

from __future__ import annotations

from thrustgraph.kinds.component import BodyFns, ComponentKind
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Quantity, Table

from .tables import check_column, clamped_interpolator

__all__ = ["BoatHull", "WATER_CAUTION"]

WATER_CAUTION = (
    "A propelled boat or underwater vehicle can strike swimmers and people at the water's edge: run it only "
    "on water cleared of people, with a way to stop and recover it (a tether, a recovery boat), wear a "
    "buoyancy aid when you work on or at the water, and follow the rules of the water you use.")


class BoatHull(ComponentKind):
    """Dry mass and a tabulated resistance against speed through the water (see the module docstring)."""

    kind = "boat-hull"
    role = "body"
    summary = "boat hull: dry mass and a resistance table (force against speed through the water)"
    parameters = (
        Quantity("dry_mass", "kg", low=1e-6, high=1e7, doc="mass of the empty boat"),
        Table("resistance_table", columns=(("speed", "m/s"), ("resistance", "N")), bounds=((None, 1000.0), (-1e9, 1e9)),
              doc="total resistance against speed through the water (write units = [\"m/s\", \"N\"])"),
        Choice("acts", options=("horizontal", "along-motion"), default="horizontal",
               doc="horizontal: resistance from the horizontal speed only (a surface hull); along-motion: 3-D"),
    )

    @classmethod
    def check(cls, p, where):
        w = f"{where}.resistance_table"
        t = p.resistance_table
        check_column(t, 0, where=w, name="speed", unit="m/s", low=0.0,
                     fix="speeds through the water are 0 or more; start the table at 0 m/s")
        check_column(t, 1, where=w, name="resistance", unit="N", low=0.0,
                     fix="resistance is the size of the force opposing motion: give it as a positive number")
        if t[0, 0] == 0.0 and t[0, 1] != 0.0:
            raise ModelError(f"{w}.rows[0]", f"a resistance of {t[0, 1]:g} N at 0 m/s would push a boat at rest",
                             "give 0 N at 0 m/s (the resistance of a hull at rest is zero)")

    @classmethod
    def describe_mass(cls, p, amb):
        return {"hull": p.dry_mass}

    @classmethod
    def cautions(cls, p):
        return [WATER_CAUTION]

    vectorised = True

    @classmethod
    def build_body(cls, p, ops):
        """One definition for one design (floats) and for an ensemble (``p.dry_mass`` and ``air`` arrays; the
        table is shared by every design)."""
        t = p.resistance_table
        xs, ys = [float(v) for v in t[:, 0]], [float(v) for v in t[:, 1]]
        if xs[0] > 0.0:
            xs.insert(0, 0.0)
            ys.insert(0, 0.0)
        resistance = clamped_interpolator(xs, ys, ops)
        slope0 = (ys[1] - ys[0]) / (xs[1] - xs[0])      # R/|v| as |v| -> 0
        vn, rn = xs[-1], ys[-1]
        cn = rn / (vn * vn)                             # R/|v|^2 held above the last row
        horizontal = p.acts == "horizontal"

        def force(air):
            vx, vy = air[3], air[4]
            vz = 0.0 * vx if horizontal else air[5]
            s = ops.sqrt(vx * vx + vy * vy + vz * vz)
            moving = s > 0.0
            # R/|v|: the table between its rows (the speed clipped away from 0 where the hull is at rest, so the
            # unused choice stays finite), the slope of its first row at rest, R_n/v_n^2 |v| above its last row
            c = ops.where(s >= vn, cn * s, ops.where(moving, resistance(s) / ops.where(moving, s, 1.0), slope0))
            return (-c * vx, -c * vy, -c * vz)
        return BodyFns(mass=p.dry_mass, force=force, force_name="resistance")
