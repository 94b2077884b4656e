"""Airframes whose drag coefficient comes from a table: against Mach number, or against speed.

Model
-----
Both kinds carry the vehicle's dry mass and a quadratic drag on the velocity
through the medium (the vehicle's velocity minus the wind or current)::

    D = -1/2 rho C_D A |v| v,      A = pi d^2 / 4

``mach-table-airframe``
    C_D = C_D(M) with M = |v| / a, a = sqrt(gamma R T) the speed of sound of
    the medium gas at the local temperature T. gamma and R are parameters
    (defaults 1.4 and R*/M0 = 287.053 J/(kg K), the values of the US Standard
    Atmosphere 1976, whose speed of sound is defined this way).
``speed-table-airframe``
    C_D = C_D(|v|), for a drag coefficient measured or estimated against speed
    (e.g. to carry a Reynolds-number effect at one size and one medium).

The table is interpolated linearly between rows and **clamped at its ends**:
below the first row the first C_D applies, above the last row the last C_D
(so the drag keeps growing with |v|^2 beyond the table). The drag equation is
the definition of the drag coefficient (NASA Glenn Research Center, Beginner's
Guide to Aeronautics, "The Drag Equation"; Hoerner, *Fluid-Dynamic Drag*,
1965, ch. 1); what the table contains is the user's data.

Assumptions and limits:

* the axis follows the relative wind (no angle of attack, no lift, no
  side force, no moments): C_D is the zero-angle-of-attack coefficient;
* C_D is whole-vehicle drag on the reference area A; base drag changes while
  a jet is running ("power-on" against "power-off" drag) are not modelled
  unless the table already averages them;
* a Mach table is only as good as its coverage: the transonic rise near
  M = 1 is steep, so give rows close together there; beyond its last row the
  clamp keeps C_D constant, which is rarely right far outside the data;
* in a medium with T = 0 (``vacuum``) the Mach number is taken as infinite and
  the density 0 makes the drag 0.

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(MachTableAirframe.parameters, {
...     "dry_mass": "1 kg", "reference_diameter": "100 mm",
...     "drag_table": {"units": ["", ""], "rows": [[0.0, 0.5], [2.0, 0.5]]}}, where="components.body")
>>> body = MachTableAirframe.build_body(p, scalar_ops)
>>> round(body.force((1.2, 1e5, 288.0, 0.0, 0.0, 10.0, 10.0))[2], 6)     # -1/2 rho Cd A v^2
-0.235619
"""

from __future__ import annotations

import math

from thrustgraph.kinds.component import BodyFns, ComponentKind
from thrustgraph.kinds.parameters import Number, Quantity, Table

from .tables import check_column, clamped_interpolator

__all__ = ["MachTableAirframe", "SpeedTableAirframe", "HIGH_FLIGHT_CAUTION"]

# The 1976 standard's gas constant for air, R*/M0 = 8314.32 / 28.9644 J/(kg K)
# (S: crnslab.org; /work/shared/references.md section 5).
_R_1976 = 8314.32 / 28.9644

HIGH_FLIGHT_CAUTION = (
    "A vehicle fast or high-flying enough to need a Mach-number drag table falls under rocketry codes "
    "(in the US NFPA 1122 model rocketry, NFPA 1127 high-power rocketry) and airspace rules (in the US "
    "FAA 14 CFR Part 101): fly it only where and as they allow, with the clearances, waivers and "
    "notifications they require; a predicted apogee or range is not a safety distance.")

_CD_FIX = "a drag coefficient lies between 0 and 5 on a frontal reference area; check the column order " \
          "(the first column is the {x}, the second the drag coefficient)"


def _check_cd_table(table, where: str, xname: str, xunit: str) -> None:
    check_column(table, 0, where=where, name=xname, unit=xunit, low=0.0,
                 fix=f"the {xname} column starts at 0 or above; a table usually starts with a row at 0")
    check_column(table, 1, where=where, name="drag_coefficient", unit="", low=0.0, high=5.0,
                 fix=_CD_FIX.format(x=xname))


class _TableAirframe(ComponentKind):
    """Shared parts: dry mass, reference area and the drag force of a table coefficient."""

    role = "body"
    vectorised = True   # one definition for floats and arrays (thrustgraph.base.xp)

    @classmethod
    def describe_mass(cls, p, amb):
        return {"dry structure": p.dry_mass}

    @classmethod
    def _area(cls, p) -> float:
        return math.pi * p.reference_diameter ** 2 / 4.0


#: The parameters every table airframe has.
_STRUCTURE = (
    Quantity("dry_mass", "kg", low=1e-6, high=1e6, doc="mass of the empty vehicle"),
    Quantity("reference_diameter", "m", low=0.0, low_open=True, high=100.0, doc="diameter of the frontal reference area"),
)


class MachTableAirframe(_TableAirframe):
    """Dry structure with a drag coefficient tabulated against Mach number (see the module docstring)."""

    kind = "mach-table-airframe"
    summary = "dry structure: mass, reference diameter and a drag coefficient table against Mach number"
    parameters = _STRUCTURE + (
        Table("drag_table", columns=(("mach", ""), ("drag_coefficient", "")), bounds=((None, 50.0), (None, None)),
              doc="drag coefficient against Mach number (write units = [\"\", \"\"])"),
        Number("gas_gamma", default=1.4, low=1.0, low_open=True, high=1.7,
               doc="ratio of specific heats of the medium gas, for the speed of sound"),
        Quantity("gas_constant", "J/(kg*K)", default=f"{_R_1976!r} J/(kg*K)", low=10.0, high=10_000.0,
                 doc="specific gas constant of the medium gas (287.053 J/(kg K): the 1976 standard's air)"),
    )

    @classmethod
    def check(cls, p, where):
        _check_cd_table(p.drag_table, f"{where}.drag_table", "mach", "")

    @classmethod
    def cautions(cls, p):
        return [HIGH_FLIGHT_CAUTION]

    @classmethod
    def build_body(cls, p, ops):
        cd = clamped_interpolator(p.drag_table[:, 0], p.drag_table[:, 1], ops)
        k = 0.5 * cls._area(p)
        gr = p.gas_gamma * p.gas_constant
        cd_top = float(p.drag_table[-1, 1])

        def drag(air):
            rho, T, sp = air[0], air[2], air[6]
            # no temperature (vacuum): the Mach number is infinite and the last row applies
            warm = T > 0.0
            c = ops.where(warm, cd(sp / ops.sqrt(gr * ops.where(warm, T, 1.0))), cd_top)
            f = -k * rho * c * sp
            return (f * air[3], f * air[4], f * air[5])
        return BodyFns(mass=p.dry_mass, force=drag, force_name="drag")


class SpeedTableAirframe(_TableAirframe):
    """Dry structure with a drag coefficient tabulated against speed (see the module docstring)."""

    kind = "speed-table-airframe"
    summary = "dry structure: mass, reference diameter and a drag coefficient table against speed"
    parameters = _STRUCTURE + (
        Table("drag_table", columns=(("speed", "m/s"), ("drag_coefficient", "")), bounds=((None, 20_000.0), (None, None)),
              doc="drag coefficient against speed through the medium (write units = [\"m/s\", \"\"])"),
    )

    @classmethod
    def check(cls, p, where):
        _check_cd_table(p.drag_table, f"{where}.drag_table", "speed", "m/s")

    @classmethod
    def build_body(cls, p, ops):
        cd = clamped_interpolator(p.drag_table[:, 0], p.drag_table[:, 1], ops)
        k = 0.5 * cls._area(p)

        def drag(air):
            sp = air[6]
            f = -k * air[0] * cd(sp) * sp
            return (f * air[3], f * air[4], f * air[5])
        return BodyFns(mass=p.dry_mass, force=drag, force_name="drag")
