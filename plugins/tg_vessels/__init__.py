"""Vessels: a liquid tank pressurised by a gas ullage (the water-rocket bottle).

Model
-----
The vessel of volume V holds liquid of density rho_l and a gas ullage of
mass m_g in the volume left over, V_g = V - m_l / rho_l. The gas follows a
polytropic law in its density (n = gamma: adiabatic; n = 1: isothermal;
n = 0: constant pressure, e.g. a vented tank)::

    p = p0 (rho_g / rho_g0)^n,   T = T0 (rho_g / rho_g0)^(n - 1),   rho_g = m_g / V_g

The same law holds while liquid is expelled (m_g fixed, V_g grows) and during
the gas blowdown that follows (V_g = V, m_g falls): the gas left in the vessel
expands along one polytrope.

While liquid flows, the outlet pressure includes the liquid head in the
accelerating frame, ``p + rho_l h (f . d)``, with h = V_l / A_bore the height
of a prismatic column over the outlet, f = g - a the apparent acceleration and
d the outlet direction. The balance solves it together with the acceleration.

Modes: ``liquid`` (liquid thrust) -> ``gas`` (gas thrust) when the liquid is
gone; either -> ``sealed`` when the pressure can no longer push anything out.

The kind is ``vectorised``: its one definition is written against the namespace of
:mod:`thrustgraph.base.xp` and runs on floats (a single flight) and on numpy arrays of designs (an ensemble;
modes as arrays of mode indices, choices by ``ops.where``).

Assumptions and limits: quasi-steady outflow (the column's own acceleration is
neglected), a prismatic column of the given bore, no vapour condensation or
heat exchange beyond what the exponent n represents, no air inflow once the
pressure falls below ambient. Gommes (Am. J. Phys. 78, 2010) discusses the
effects this leaves out; Romanelli et al. (Am. J. Phys. 81, 2013) measured an
effective exponent between 1 and 1.4 for a static bottle.

Examples
--------
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> P = LiquidTank.params_class()
>>> p = P(volume=0.002, fill=0.3, gauge_pressure=5e5, liquid_density=998.2, bore=0.1,
...       expansion_exponent=1.4, gas_gamma=1.4, gas_constant=287.05, gas_temperature=288.15,
...       inertial_head=True, internal_momentum=False, outlet_direction=(-1.0, 0.0, 0.0))
>>> m_l, m_g = LiquidTank.initial_state(p, Ambient(101325.0, 288.15, 1.225))
>>> round(m_l, 4), round(m_g, 5)
(0.5989, 0.01018)
"""

from __future__ import annotations

import math

from thrustgraph import hookimpl
from thrustgraph.kinds.component import ComponentKind, EventSpec, Mode, Outlet, StateVar, VolumeFns
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Flag, Number, Quantity, Vector

__all__ = ["LiquidTank", "PRESSURE_CAUTIONS"]

PRESSURE_CAUTIONS = [
    "Stored pressure can burst a vessel violently and throw fragments: a number thrustgraph prints is a "
    "prediction, never a safe working pressure or a rating of your vessel.",
    "Proof-test every vessel before use as local codes and licensed practice require (hydrostatically, "
    "filled with water, behind a shield, remotely pressurised), and retire vessels that are scratched, "
    "creased, heated or old.",
    "Wear eye protection, pressurise and release from a distance, never stand over or in line with a "
    "charged vessel, and never approach one until it has been vented.",
    "Pressure vessels and compressed-gas equipment are regulated (e.g. ASME BPVC Section VIII, the EU "
    "Pressure Equipment Directive, national gas-cylinder rules): follow the codes that apply where you are.",
]


class LiquidTank(ComponentKind):
    kind = "pressurised-liquid-tank"
    role = "volume"
    stores_pressure = True
    summary = "liquid pushed out by a polytropic gas ullage, then gas blowdown (water-rocket bottle)"
    parameters = (
        Quantity("volume", "L", low=0.0, low_open=True, high=1e6, doc="internal volume of the vessel"),
        Number("fill", default=0.33, low=0.0, high=1.0, high_open=True,
               doc="fraction of the volume filled with liquid at launch"),
        Quantity("gauge_pressure", "bar", low=0.0, high=10_000.0, reference="gauge", doc="charge pressure above ambient at launch"),
        # Water at 20 degC and 1 atm: IAPWS-95 via CoolProp gives 998.207 kg/m^3.
        Quantity("liquid_density", "kg/m^3", default="998.2 kg/m^3", low=10.0, high=25_000.0,
                 doc="density of the liquid"),
        Quantity("bore", "mm", default="100 mm", low=0.1, high=10_000.0,
                 doc="inner diameter of the liquid column above the outlet"),
        Number("expansion_exponent", default=1.4, low=0.0, high=2.0,
               doc="polytropic exponent n of the ullage gas (1.4 adiabatic air, 1 isothermal, 0 vented)"),
        Number("gas_gamma", default=1.4, low=1.0, low_open=True, high=1.7,
               doc="ratio of specific heats of the gas, for the nozzle flow"),
        # Dry air: R = 8314.32 / 28.9644 J/(kg K) (US Standard Atmosphere 1976).
        Quantity("gas_constant", "J/kg/K", default="287.05 J/kg/K", low=10.0, high=10_000.0,
                 doc="specific gas constant of the gas"),
        Quantity("gas_temperature", "K", default="288.15 K", low=1.0, high=5000.0,
                 doc="temperature of the gas at launch"),
        Flag("inertial_head", default=True,
             doc="include the liquid head rho (g + a) h in the accelerating frame"),
        Flag("internal_momentum", default=False,
             doc="include the rate of change of the liquid column's momentum (quasi-steady)"),
        Vector("outlet_direction", default=(-1.0, 0.0, 0.0),
               doc="body-frame direction from the liquid toward the outlet"),
    )
    states = (
        StateVar("liquid_mass", "kg", "liquid in the vessel"),
        StateVar("gas_mass", "kg", "gas in the vessel"),
    )
    modes = (
        Mode("liquid", "liquid thrust"),
        Mode("gas", "gas thrust"),
        Mode("sealed", "sealed", propulsive=False, outflow=False),
    )

    @classmethod
    def check(cls, p, where):
        height = p.volume * p.fill / (math.pi * p.bore ** 2 / 4.0)
        if p.fill > 0 and height > 50.0:
            raise ModelError(f"{where}.bore", f"a bore of {p.bore * 1e3:g} mm makes the liquid column "
                             f"{height:.3g} m tall", "give the vessel's inner diameter, e.g. \"100 mm\"")

    @classmethod
    def cautions(cls, p):
        return list(PRESSURE_CAUTIONS)

    @classmethod
    def approach_area(cls, p):
        """The bore's cross-section, m^2: the liquid approaches the outlet through it (for the nozzle's
        velocity-of-approach factor)."""
        return math.pi * p.bore ** 2 / 4.0

    @classmethod
    def _gas0(cls, p, amb):
        p0 = amb.pressure + p.gauge_pressure
        vg0 = p.volume * (1.0 - p.fill)
        return p0, vg0, p0 * vg0 / (p.gas_constant * p.gas_temperature)

    @classmethod
    def initial_state(cls, p, amb):
        p0, vg0, mg0 = cls._gas0(p, amb)
        return (p.volume * p.fill * p.liquid_density, mg0)

    @classmethod
    def initial_mode(cls, p, amb):
        return "liquid" if p.fill > 0.0 else "gas"

    @classmethod
    def describe_mass(cls, p, amb):
        m_l, m_g = cls.initial_state(p, amb)
        return {"liquid": m_l, "gas": m_g}

    vectorised = True

    @classmethod
    def build_volume(cls, p, i, ops, amb):
        """One definition for one design (floats) and for an ensemble (``p`` fields, ``s[k]`` and ``mode``
        arrays; a mode shared by every design arrives as an ``int``). Mode indices: 0 liquid, 1 gas, 2 sealed.
        Trial stages of an adaptive step may overshoot past empty: the power law is kept real by a 1e-12 floor
        on the density ratio."""
        p0, vg0, mg0 = cls._gas0(p, amb)
        charged = vg0 > 0.0
        rho0 = ops.where(charged, mg0 / ops.where(charged, vg0, 1.0), 1.0)
        T0, rho_l, V, n, gam, R = (p.gas_temperature, p.liquid_density, p.volume, p.expansion_exponent,
                                   p.gas_gamma, p.gas_constant)
        area = math.pi * p.bore ** 2 / 4.0
        head_on = p.inertial_head

        def gas(s):
            m_l, m_g = s[i], s[i + 1]
            vg = V - m_l / rho_l
            rg = m_g / vg
            r = ops.maximum(rg / rho0, 1e-12)
            rn = r ** n
            return p0 * rn, T0 * rn / r, rg, vg

        def mass(s):
            return s[i] + s[i + 1]

        def outlet(s, mode):
            pg, Tg, rg, vg = gas(s)
            if type(mode) is int:        # every design in the same mode
                if mode == 0:
                    return Outlet(pg, Tg, rho_l, gam, R, 1.0, s[i] / area if head_on else 0.0)
                return Outlet(pg, Tg, rg, gam, R, 0.0 if mode == 1 else -1.0, 0.0)
            liquid = mode == 0
            head = ops.where(liquid, s[i] / area, 0.0) if head_on else 0.0
            phase = ops.where(liquid, 1.0, ops.where(mode == 1, 0.0, -1.0))
            return Outlet(pg, Tg, ops.where(liquid, rho_l, rg), gam, R, phase, head)

        def derivs(s, mode, mdot):
            if type(mode) is int:
                return (-mdot, 0.0) if mode == 0 else (0.0, -mdot) if mode == 1 else (0.0, 0.0)
            return (ops.where(mode == 0, -mdot, 0.0), ops.where(mode == 1, -mdot, 0.0))

        def signals(s, mode):
            pg, Tg, rg, vg = gas(s)
            return {"pressure": pg, "temperature": Tg, "liquid_mass": s[i], "gas_mass": s[i + 1],
                    "liquid_volume": s[i] / rho_l, "liquid_height": s[i] / (rho_l * area)}

        internal = None
        if p.internal_momentum:
            def internal(s, mode, mdot):
                if type(mode) is int:
                    return (mdot / (rho_l * area), s[i]) if mode == 0 else (0.0, 0.0)
                liquid = mode == 0
                return (ops.where(liquid, mdot / (rho_l * area), 0.0), ops.where(liquid, s[i], 0.0))

        events = (
            EventSpec("liquid exhausted", lambda t, s, drive: s[i], -1.0, ("liquid",), "gas", needs_drive=False),
            EventSpec("liquid flow stops", lambda t, s, drive: drive, -1.0, ("liquid",), "sealed"),
            EventSpec("gas exhausted", lambda t, s, drive: drive, -1.0, ("gas",), "sealed"),
        )
        return VolumeFns(mass=mass, outlet=outlet, derivs=derivs, signals=signals,
                         outlet_dir=p.outlet_direction, internal=internal, events=events)


@hookimpl
def thrustgraph_component_kinds():
    return [LiquidTank]
