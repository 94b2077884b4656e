"""Vents and relief valves: openings that discharge a vessel's contents to the surroundings.

Flow through the opening (area A, discharge coefficient Cd) is the
convergent-nozzle flow of :mod:`tg_nozzles`: Bernoulli for a liquid,
isentropic choked or unchoked flow for a gas (NACA Report 1135, 1953), with
the effective area Cd A.

Arrangement
-----------
The default is ``symmetric``: an opening vents without pushing unless the
model says which way it points. A one-sided opening points aft by default
(its push is thrust along the axis); pointed sideways, its push is a side
force, which the run's summary shows as ``peak side force``.

``one-sided``
    one jet along ``direction``: thrust ``mdot v_e + (p_e - p_a) Cd A``
    against it, as any nozzle.
``symmetric``
    ports spread evenly around the vessel (opposed pairs, a ring of holes):
    their jets cancel, so the opening removes mass and carries away only the
    vehicle's own momentum (exit velocity relative to the vehicle 0 in the
    balance, no pressure thrust). The signal ``jet_speed`` still gives each
    port's jet speed.

Relief valve
------------
Closed until the drive (pressure at its inlet minus ambient) rises through
the cracking pressure, then fully open (pop action: no lift curve, no
overpressure for full lift) until the drive falls through the reseat
pressure. The reseat pressure must lie below the cracking pressure (the
valve's blowdown; a few to ten per cent of the set pressure is usual for
pop-action gas valves: common practice, no source). Both switches are
events, so the integrator lands on them exactly. Sizing and certifying a
real relief device is for the codes (API Std 520/521, ASME BPVC Section
VIII): a valve modelled here is not a rated safety device.

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> P = Vent.params_class()
>>> up = (6e5, 293.15, 7.0, 1.4, 287.05, 0.0, 0.0)
>>> sym = Vent.build_flow(P(flow_area=1e-5, discharge_coefficient=0.62, arrangement="symmetric",
...                         direction=(0.0, 1.0, 0.0)), scalar_ops)
>>> mdot, ve, pe, Ae, c = sym.flow(up, 101325.0, 0)
>>> round(mdot, 6), ve, Ae           # mass leaves, no net thrust
(0.008781, 0.0, 0.0)
"""

from __future__ import annotations

import math

from thrustgraph.kinds.component import ComponentKind, EventSpec, FlowFns, Mode
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Number, Quantity, Vector

from tg_nozzles import ConvergentNozzle

__all__ = ["Vent", "ReliefValve"]

_COMMON = (
    Quantity("flow_area", "mm^2", low=1e-6, high=1e7, doc="geometric flow area of the opening (all ports)"),
    # A sharp-edged hole passes about 0.61-0.62 of its area (common practice, no source).
    Number("discharge_coefficient", default=0.62, low=0.0, low_open=True, high=1.0,
           doc="ratio of effective to geometric flow area"),
    # The default vents without pushing (ports whose jets cancel): a vent or relief valve that pushes says which
    # way it points. A one-sided opening without a direction points aft, so its push shows as thrust along the
    # axis; pointed sideways, the summary shows it as a side force.
    Choice("arrangement", options=("one-sided", "symmetric"), default="symmetric",
           doc="symmetric: opposed ports whose jets cancel (the default); one-sided: one jet along direction"),
    Vector("direction", default=(-1.0, 0.0, 0.0),
           doc="body-frame direction the jet leaves in (one-sided; default aft, pushing along the axis)"),
)


def _opening(p, ops):
    """The flow function of the opening, and whether its jets cancel."""
    P = ConvergentNozzle.params_class()
    nozzle = ConvergentNozzle.build_flow(P(diameter=ops.sqrt(4.0 * p.flow_area / math.pi),
                                           discharge_coefficient=p.discharge_coefficient,
                                           direction=p.direction, approach_velocity=False), ops)
    return nozzle.flow, p.arrangement == "symmetric"


class Vent(ComponentKind):
    """An always-open vent (see the module docstring)."""

    kind = "vent"
    role = "flow"
    signal_units = {"jet_speed": "m/s"}
    summary = "always-open vent: one-sided (pushes) or symmetric (jets cancel)"
    parameters = _COMMON

    vectorised = True

    @classmethod
    def build_flow(cls, p, ops):
        """One definition for floats and arrays over designs (the convergent nozzle's flow)."""
        orifice, symmetric = _opening(p, ops)

        def flow(up, p_down, mode=0):
            f = orifice(up, p_down)
            if symmetric:
                z = 0.0 * f[0]
                return (f[0], z, p_down + z, z, z)
            return f

        def signals(up, p_down, mode=0):
            return {"jet_speed": orifice(up, p_down)[1]}

        return FlowFns(flow=flow, jet_dir=p.direction, signals=signals)


class ReliefValve(ComponentKind):
    """A relief valve with cracking and reseat pressures (see the module docstring)."""

    kind = "relief-valve"
    role = "flow"
    signal_units = {"open": "", "jet_speed": "m/s"}
    summary = "relief valve: opens at the cracking pressure, reseats at the reseat pressure (gauge)"
    parameters = (
        Quantity("cracking_pressure", "bar", low=1e-6, high=10_000.0, reference="gauge", doc="inlet pressure above ambient at which it opens"),
        Quantity("reseat_pressure", "bar", low=0.0, high=10_000.0, reference="gauge", doc="inlet pressure above ambient at which it closes again"),
    ) + _COMMON
    modes = (Mode("closed", "relief closed", propulsive=False, outflow=False), Mode("open", "relief venting"))

    @classmethod
    def check(cls, p, where):
        if p.reseat_pressure >= p.cracking_pressure:
            raise ModelError(f"{where}.reseat_pressure", f"a relief valve reseats below its cracking pressure, got "
                             f"reseat {p.reseat_pressure / 1e5:g} bar against cracking "
                             f"{p.cracking_pressure / 1e5:g} bar", "give a reseat_pressure below "
                             "cracking_pressure (a few to ten per cent lower is usual)")

    vectorised = True

    @classmethod
    def build_flow(cls, p, ops):
        """One definition for floats and arrays over designs; the mode (0 closed, 1 open) is an ``int`` when
        every design shares it, else an integer array."""
        orifice, symmetric = _opening(p, ops)
        crack, reseat = p.cracking_pressure, p.reseat_pressure

        def venting(up, p_down):
            f = orifice(up, p_down)
            if symmetric:
                z = 0.0 * f[0]
                return (f[0], z, p_down + z, z, z)
            return tuple(f)

        def flow(up, p_down, mode=0):
            if type(mode) is int:
                if mode == 0:
                    return (0.0, 0.0, p_down, 0.0, 0.0)
                return venting(up, p_down)
            f = venting(up, p_down)
            is_open = mode == 1
            return (ops.where(is_open, f[0], 0.0), ops.where(is_open, f[1], 0.0), ops.where(is_open, f[2], p_down),
                    ops.where(is_open, f[3], 0.0), ops.where(is_open, f[4], 0.0))

        def signals(up, p_down, mode=0):
            is_open = mode == 1
            return {"open": ops.where(is_open, 1.0, 0.0), "jet_speed": ops.where(is_open, orifice(up, p_down)[1], 0.0)}

        events = (
            EventSpec("relief valve opens", lambda t, s, drive: drive - crack, 1.0, ("closed",), "open"),
            EventSpec("relief valve reseats", lambda t, s, drive: drive - reseat, -1.0, ("open",), "closed"),
        )
        return FlowFns(flow=flow, jet_dir=p.direction, signals=signals, events=events)
