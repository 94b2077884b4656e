"""The hose (tether) feed: fluid supplied to the vehicle from a fixed station through a hose.

Model
-----
``supply = "pressure"``: the station holds its outlet at a gauge pressure
p_s. At the vehicle, after lifting the fluid to the vehicle's height z and
the hose losses::

    p = p_a + p_s - rho g (z - z_s) - (K + f L / D) rho u^2 / 2,   u = mdot / (rho A_h)

(the hydrostatic term for a liquid only; K the sum of the minor-loss
coefficients, f the Darcy friction factor of a hose of length L and bore D:
the Darcy-Weisbach equation, e.g. White, *Fluid Mechanics*, ch. 6; from
memory). The flow follows from the elements downstream (the line solve).

With ``ramp_time`` the station brings its pressure (or its flow) up from
zero along a half cosine, ``k(t) = (1 - cos(pi t / t_r)) / 2`` (a pump
spinning up; smooth, so a hovering vehicle rises to its height without a
large overshoot).

``supply = "flow"``: the station delivers a fixed mass flow whatever pressure
that takes (a positive-displacement pump); the pressure at the vehicle is
what the downstream elements need to pass it.

Momentum: the fluid enters the vehicle at ``u`` along ``inflow_direction``
(a **world-frame** direction: the hose hangs from a fixed station), so the
inflow term ``mdot u d`` enters the balance (a hose rising into the
underside of a platform pushes it up by mdot u).

Assumptions and limits: a light, slack hose: its weight, stiffness and
tension, and the pressure force on the hose cross-section (taken to be
carried by the hose wall), are not modelled; quasi-steady (no water-hammer,
no inertia of the fluid column); incompressible losses (for a gas, keep the
loss small against the pressure); the station's ambient equals the
vehicle's.

Examples
--------
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(HoseFeed.parameters, {"supply_pressure": "2 bar", "hose_diameter": "20 mm",
...                  "loss_coefficient": 1.0}, where="components.hose", params_class=HoseFeed.params_class())
>>> src = HoseFeed.build_source(p, -1, scalar_ops, Ambient(101325.0, 293.15, 1.2))
>>> up, mfix, *_ = src.supply(0.0, [0.0, 0.0, 5.0], 0, (1.2, 101325.0, 293.15, 0.0, 0.0, 0.0, 0.0))
>>> round(up[0] - 101325.0, 2)           # 2 bar less the lift of 5 m of water
151055.01
>>> round(src.rise(up, 1.0, 0), 3), [round(c, 4) for c in src.inflow(1.0, up)]   # 1 kg/s
(-5075.195, [0.0, 0.0, 3.1888])
"""

from __future__ import annotations

import math

from thrustgraph.kinds.component import ComponentKind, EventSpec, Mode, SourceFns
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Number, Quantity, Vector

from tg_vessels import PRESSURE_CAUTIONS

__all__ = ["HoseFeed", "HOSE_CAUTIONS"]

HOSE_CAUTIONS = [
    "A pressurised hose that parts or pulls free whips violently, and a high-pressure liquid jet can cut "
    "skin and inject fluid under it: secure every hose end, keep people clear of the hose run and the "
    "jets, and shut the supply before you approach.",
]


class HoseFeed(ComponentKind):
    """Fluid supplied from a fixed station through a hose (see the module docstring)."""

    kind = "hose-feed"
    role = "source"
    signal_units = {"lift_pressure": "Pa"}
    stores_pressure = True
    summary = "hose or tether feed from a fixed station: given supply pressure (with hose losses) or given flow"
    parameters = (
        Choice("supply", options=("pressure", "flow"), default="pressure",
               doc="pressure: the station holds a gauge pressure; flow: it delivers a fixed mass flow"),
        Quantity("supply_pressure", "bar", default="0 bar", low=0.0, high=10_000.0, reference="gauge",
                 doc="station outlet pressure above ambient (supply = pressure)"),
        Quantity("mass_flow", "kg/s", default="0 kg/s", low=0.0, high=1e5, doc="delivered mass flow (supply = flow)"),
        Quantity("station_altitude", "m", default="0 m", low=-10_000.0, high=10_000.0, doc="height of the station's outlet above the launch datum"),
        Quantity("hose_diameter", "mm", low=1e-3, high=10_000.0, doc="inner diameter of the hose"),
        Quantity("hose_length", "m", default="0 m", low=0.0, high=1e5, doc="length of the hose, for the friction loss"),
        Number("friction_factor", default=0.02, low=0.0, high=10.0, doc="Darcy friction factor of the hose"),
        Number("loss_coefficient", default=0.0, low=0.0, high=10_000.0,
               doc="sum of the minor-loss coefficients (fittings, bends), referred to the hose speed"),
        Choice("fluid", options=("liquid", "gas"), default="liquid", doc="what the hose carries"),
        # Fresh water at 20 C: CoolProp IAPWS-95 gives 998.207 kg/m^3 (references.md section 8).
        Quantity("density", "kg/m^3", default="998.2 kg/m^3", low=10.0, high=25_000.0, doc="liquid density"),
        Quantity("temperature", "K", default="293.15 K", low=1.0, high=5000.0, doc="temperature of the fluid"),
        Number("gas_gamma", default=1.4, low=1.0, low_open=True, high=1.7, doc="ratio of specific heats (gas)"),
        Quantity("gas_constant", "J/kg/K", default="287.05 J/kg/K", low=10.0, high=10_000.0,
                 doc="specific gas constant (gas)"),
        # Standard acceleration of gravity, exact by definition (3rd CGPM, 1901).
        Quantity("g", "m/s^2", default="9.80665 m/s^2", low=0.0, high=1000.0,
                 doc="gravity for the lift head (set it equal to the model's gravity field)"),
        Vector("inflow_direction", default=(0.0, 0.0, 1.0),
               doc="WORLD-frame direction the fluid moves in as it enters the vehicle (up from a hose below)"),
        Quantity("ramp_time", "s", default="0 s", low=0.0, high=1e5,
                 doc="the station brings its pressure (or flow) up over this time, along a half cosine"),
        Quantity("run_time", "s", default="0 s", low=0.0, high=1e6, doc="stop the feed after this time; 0 s: never"),
    )
    modes = (Mode("feeding", "hose-fed thrust"), Mode("stopped", "feed stopped", propulsive=False))

    @classmethod
    def check(cls, p, where):
        if p.supply == "pressure" and p.supply_pressure <= 0.0:
            raise ModelError(f"{where}.supply_pressure", "a pressure-fed hose needs a supply pressure above ambient",
                             "give supply_pressure = \"3 bar\" (gauge), or set supply = \"flow\" with a mass_flow")
        if p.supply == "flow" and p.mass_flow <= 0.0:
            raise ModelError(f"{where}.mass_flow", "a flow-fed hose needs a positive mass flow",
                             "give mass_flow = \"2 kg/s\", or set supply = \"pressure\" with a supply_pressure")

    @classmethod
    def cautions(cls, p):
        return list(PRESSURE_CAUTIONS) + list(HOSE_CAUTIONS)

    vectorised = True

    @classmethod
    def build_source(cls, p, i, ops, amb):
        """One definition for one design (floats) and for an ensemble (parameters, ``t``, ``s[k]`` and ``mode``
        arrays over designs; a mode shared by every design arrives as an ``int``)."""
        area = math.pi * p.hose_diameter ** 2 / 4.0
        k_loss = p.loss_coefficient + p.friction_factor * p.hose_length / p.hose_diameter
        liquid = p.fluid == "liquid"
        fixed = p.supply == "flow"
        ps, mflow, zs, rho_l, T, g = p.supply_pressure, p.mass_flow, p.station_altitude, p.density, \
            p.temperature, p.g
        gam, R = p.gas_gamma, p.gas_constant
        d = p.inflow_direction
        ramp = p.ramp_time
        ramping = ramp > 0.0
        ramp_div = ops.where(ramping, ramp, 1.0)
        pi = math.pi

        def supply(t, s, mode, air):
            pa = air[1]
            # the half-cosine spin-up (t < ramp only happens with a ramp)
            k = ops.where(t < ramp, 0.5 * (1.0 - ops.cos(pi * ops.minimum(t, ramp) / ramp_div)), 1.0)
            if liquid:
                up = (pa + k * ps - rho_l * g * (s[2] - zs), T, rho_l, gam, R, 1.0, 0.0)
            else:
                pr = pa + k * ps
                up = (pr, T, pr / (R * T), gam, R, 0.0, 0.0)
            given = k * mflow if fixed else -1.0
            if type(mode) is int:
                mfix = 0.0 if mode == 1 else given
            else:
                mfix = ops.where(mode == 1, 0.0, given)
            return (up, mfix, 0.0, 0.0, 0.0)

        def rise(up, mdot, mode):
            u = mdot / (up[2] * area)
            return -k_loss * 0.5 * up[2] * u * u

        def inflow(mdot, up):
            u = mdot / (up[2] * area)
            return (u * d[0], u * d[1], u * d[2])

        def signals(t, s, mode):
            return {"lift_pressure": rho_l * g * (s[2] - zs) if liquid else 0.0 * s[2]}

        # the event is there whatever the run time (a model's events must not depend on its values: an ensemble
        # evaluates them for any subset of its designs); designs without a run time never stop (their stop time
        # is beyond any flight)
        tr = ops.where(p.run_time > 0.0, p.run_time, 1e300)
        events = (EventSpec("feed stopped", lambda t, s, drive: t - tr, 1.0, ("feeding",), "stopped",
                            needs_drive=False),)
        return SourceFns(supply=supply, signals=signals, events=events, rise=rise, inflow=inflow)
