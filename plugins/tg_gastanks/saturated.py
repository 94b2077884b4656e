"""The self-pressurising tank: a liquefied gas (CO2 in a cartridge) over its own vapour, in phase equilibrium.

Model
-----
States: the total mass m of the fluid (liquid and vapour) and its temperature
T; the tank volume V is fixed, so the mean specific volume is v = V/m. While
the contents are two-phase they are at saturation (CoolProp's two-phase
equilibrium of the fluid's reference equation of state; Span & Wagner 1996
for CO2, from memory)::

    p = p_sat(T),   x = (v - v_l(T)) / (v_v(T) - v_l(T)),   u = u_l + x (u_v - u_l)

and single-phase vapour (superheated, after the liquid is gone) follows the
equation of state at (rho, T). Energy, with the outflow mdot leaving at the
specific enthalpy h_out of what is drawn and a wall heat flow Qdot::

    d(m u)/dt = -mdot h_out + Qdot,   dm/dt = -mdot
    =>  m (du/dT)_v dT/dt = -mdot (h_out - u + v (du/dv)_T) + Qdot

In the two-phase region (du/dv)_T = (u_v - u_l)/(v_v - v_l) and (du/dT)_v
comes from the saturation-line derivatives of u_l, u_v, v_l, v_v
(CoolProp ``first_saturation_deriv``); in single phase (du/dT)_v = c_v and
(du/dv)_T = -rho^2 (du/drho)_T. **The tank cools as it boils**: liquid
that evaporates to fill the space the outflow leaves takes its latent heat
from the contents, and p = p_sat(T) falls with T.

What flows out (``outlet``):

``liquid-first`` (the outlet under the liquid: a cartridge pointing down, a
dip tube)
    saturated liquid (h_out = h_l, density rho_l) until the liquid is gone,
    then vapour; the nozzle passes the liquid by Bernoulli (the liquid is
    assumed to flash outside the nozzle, the frozen-flow limit of a short
    orifice; a homogeneous-equilibrium flashing flow would pass less: from
    memory, e.g. Fauske's work on flashing discharges).
``vapour`` (the outlet above the liquid)
    saturated vapour (h_out = h_v, density rho_v) throughout, the liquid
    boiling away in the tank.

The vapour reaches the nozzle with the expansion exponent of its isentrope
to the throat (:func:`~tg_gastanks.fluids.expansion_exponent`, as for the
real-gas tank; an equilibrium expansion, which for saturated CO2 vapour
condenses some of it: the exponent is held at 1.05 or more, which leaves the
choked flux within about 2 % of CoolProp's equilibrium value) and
R_eff = p/(rho T). Condensate that forms in the vapour during the late
blowdown stays in the tank (only vapour is drawn).

Modes: ``liquid`` (liquid thrust) -> ``vapour`` (gas thrust) when the last
liquid evaporates (rho falls to rho_v(T)); either -> ``sealed`` when the
pressure can no longer push anything out, or when the contents reach the
triple point (solid would form: dry ice for CO2, which this model does not
follow); the flight stops if the contents reach the critical temperature.

Assumptions and limits: equilibrium between the phases at one uniform
temperature (no superheated liquid, no stratification), a rigid tank, no
liquid head, quasi-steady outflow; wall heat transfer through a constant
film coefficient. CoolProp is required: there is no ideal-gas substitute.

Examples
--------
>>> from thrustgraph.kinds.component import Ambient
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(SelfPressurisingTank.parameters, {"volume": "12 mL", "propellant_mass": "8 g"},
...                  where="components.c", params_class=SelfPressurisingTank.params_class())
>>> SelfPressurisingTank.initial_state(p, Ambient(101325.0, 293.15, 1.2))
(0.008, 293.15)
"""

from __future__ import annotations

from typing import Any

import numpy as np

from thrustgraph.kinds.component import ComponentKind, EventSpec, Mode, StateVar, VolumeFns
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Quantity

from tg_vessels import PRESSURE_CAUTIONS

from .cold import COLD_OUTCOMES, cold_cautions, cold_summary
from .fluids import FluidName, expansion_exponent, new_state, require_coolprop, resolve_fluid, wall_heat_specs
from .gases import lookup_gas
from .gastable import gas_table, largest
from .saturationtable import SaturationTable, saturation_table


__all__ = ["SelfPressurisingTank", "CARTRIDGE_CAUTIONS"]

CARTRIDGE_CAUTIONS = [
    "A liquefied-gas cartridge holds its saturation pressure (CO2: about 57 bar at 20 C, 72 bar at 30 C), "
    "which rises steeply as it warms: never heat, refill or puncture one outside the device made for it, "
    "keep it out of the sun, and use only cartridges made to their code (e.g. ISO 11118).",
    "Boiling liquefied gas is very cold: the cartridge, nozzle and jet can cause cold burns; wear gloves "
    "and eye protection and keep clear of the exhaust line.",
]

_NO_COOLPROP_FIX = "there is no ideal-gas substitute for a liquefied gas"


class SelfPressurisingTank(ComponentKind):
    """Saturated liquid under its own vapour (two-phase equilibrium through CoolProp); see the module docstring."""

    kind = "self-pressurising-tank"
    role = "volume"
    signal_units = {"vapour_quality": "", "internal_energy": "J", "outflow_enthalpy": "J/kg", "heat_flow": "W"}
    stores_pressure = True
    summary = "liquefied gas over its own vapour (e.g. a CO2 cartridge): liquid then vapour outflow, boil-off cooling"
    parameters = (
        Quantity("volume", "L", low=0.0, low_open=True, high=1e6, doc="internal volume of the tank or cartridge"),
        FluidName("fluid", default="CarbonDioxide", doc="the liquefied gas (a fluid CoolProp knows)"),
        Quantity("propellant_mass", "g", low=1e-3, high=1e9, doc="mass of fluid in the tank at launch"),
        Quantity("temperature", "K", default="293.15 K", low=1.0, high=5000.0,
                 doc="temperature of the contents at launch"),
        Choice("outlet", options=("liquid-first", "vapour"), default="liquid-first",
               doc="liquid-first: the outlet is under the liquid; vapour: it is above the liquid"),
        Choice("properties", options=("table", "direct"), default="table",
               doc="table = properties tabulated from CoolProp once per fluid and range (kept on disk; errors "
                   "measured in docs/fluid-devices.md), direct = CoolProp at every evaluation"),
    ) + wall_heat_specs("the contents")
    states = (
        StateVar("propellant_mass", "kg", "liquid and vapour in the tank"),
        StateVar("temperature", "K", "temperature of the contents"),
    )
    modes = (Mode("liquid", "liquid thrust"), Mode("vapour", "gas thrust"), Mode("sealed", "sealed", propulsive=False, outflow=False))

    @classmethod
    def check(cls, p, where):
        name = where.rsplit(".", 1)[-1]
        device = f"the self-pressurising tank {name!r}"
        if p.properties == "table":
            fluid = _fluid_name(p, where, device)
            sat = _saturation(p, fluid, where, device)
            t_tp, t_c = sat.T_triple, sat.T_critical
        else:
            require_coolprop(f"{where}.fluid", device, _NO_COOLPROP_FIX)
            fluid = resolve_fluid(p.fluid, where=f"{where}.fluid", device=device, fix=_NO_COOLPROP_FIX)
            st = new_state(fluid)
            t_tp, t_c = st.Ttriple(), st.T_critical()
        if not t_tp + 0.5 < p.temperature < t_c - 0.5:
            raise ModelError(f"{where}.temperature", f"{fluid} is a saturated liquid with its vapour only between "
                             f"its triple point ({t_tp:.5g} K) and its critical point ({t_c:.5g} K); got "
                             f"{p.temperature:.5g} K", "give a temperature in that range, or use a gas-tank with "
                             "equation_of_state = \"coolprop\" above the critical temperature")
        if p.properties == "table":
            rho_l = sat.rho_l(p.temperature)
        else:
            import CoolProp

            st.update(CoolProp.QT_INPUTS, 0.0, p.temperature)
            rho_l = st.rhomass()
        if p.propellant_mass / p.volume >= rho_l:
            raise ModelError(f"{where}.propellant_mass", f"{p.propellant_mass * 1e3:.4g} g of {fluid} would fill "
                             f"the {p.volume * 1e6:.4g} mL tank with liquid at {p.temperature:.5g} K (saturated "
                             f"liquid density {rho_l:.4g} kg/m^3): a liquid-full vessel's pressure rises without "
                             "limit as it warms", f"give less than {rho_l * p.volume * 1e3:.4g} g (filling "
                             "codes keep well below that)")
        if p.wall_heat_transfer_coefficient > 0.0 and p.wall_area <= 0.0:
            raise ModelError(f"{where}.wall_area", "wall heat transfer needs the wall area",
                             "give the tank's inner wall area, e.g. wall_area = \"30 cm^2\"")

    outcomes = COLD_OUTCOMES

    @classmethod
    def cautions(cls, p):
        return list(PRESSURE_CAUTIONS) + list(CARTRIDGE_CAUTIONS)

    @classmethod
    def summarize(cls, name, p, result):
        return cold_summary(name, p, result)

    @classmethod
    def flight_cautions(cls, name, p, result):
        return cold_cautions(name, p, result, "contents")

    @classmethod
    def initial_state(cls, p, amb):
        return (p.propellant_mass, p.temperature)

    @classmethod
    def initial_mode(cls, p, amb):
        if p.properties == "table":
            device = "the self-pressurising tank"
            rho_v = _saturation(p, _fluid_name(p, "fluid", device), "fluid", device).rho_v(p.temperature)
        else:
            import CoolProp

            st = new_state(resolve_fluid(p.fluid, where="fluid", device="the self-pressurising tank"))
            st.update(CoolProp.QT_INPUTS, 1.0, p.temperature)
            rho_v = st.rhomass()
        two_phase = p.propellant_mass / p.volume > rho_v
        return "liquid" if (p.outlet == "liquid-first" and two_phase) else "vapour"

    @classmethod
    def describe_mass(cls, p, amb):
        return {"propellant": p.propellant_mass}

    vectorised = True

    @classmethod
    def build_volume(cls, p, i, ops, amb):
        """One definition for one design and for an ensemble: every property comes from CoolProp's two-phase
        equilibrium (tabulated, :mod:`tg_gastanks.saturationtable` and :mod:`tg_gastanks.gastable`, or called
        directly), so each callable is a function of one design's floats (state, mode and parameters) that
        ``ops.each`` applies design by design (for one design, a plain call): the same numbers as a single
        flight, at the cost of the property look-ups or calls of each design."""
        V = p.volume
        m0, T0 = p.propellant_mass, p.temperature
        Tw = ops.where(p.wall_temperature > 0.0, p.wall_temperature, T0)
        hA = p.wall_heat_transfer_coefficient * p.wall_area
        m_floor = 1e-12 * m0
        if p.properties == "table":
            device = "the self-pressurising tank"
            fluid = _fluid_name(p, "fluid", device)
            sat = _saturation(p, fluid, "fluid", device)
            t_tp, t_c = sat.T_triple, sat.T_critical
            t_lo, t_hi = t_tp + 0.01, t_c - 0.01
            vapour = gas_table(fluid, sat.rho_v(min(max(largest(T0), largest(p.wall_temperature)), t_hi)),
                               max(largest(T0), largest(p.wall_temperature))).vapour

            def saturated(T):
                return sat.at(T)

            def single(rho, T):
                return vapour(rho, T)

            def rho_vapour(T):
                return sat.rho_v(T)
        else:
            import CoolProp

            fluid = resolve_fluid(p.fluid, where="fluid", device="the self-pressurising tank")
            mix, liq, vap, expander = new_state(fluid), new_state(fluid), new_state(fluid), new_state(fluid)
            DT, QT = CoolProp.DmassT_INPUTS, CoolProp.QT_INPUTS
            iU, iD, iT = CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT
            t_tp, t_c = mix.Ttriple(), mix.T_critical()
            t_lo, t_hi = t_tp + 0.01, t_c - 0.01

            def saturated(T):
                """The saturation quantities at T in the order of tg_gastanks.saturationtable.QUANTITIES (p_sat
                for ln p_sat; n of the vapour None: a flash, made only where it is used)."""
                liq.update(QT, 0.0, T)
                vap.update(QT, 1.0, T)
                rl, rv = liq.rhomass(), vap.rhomass()
                pr = vap.p()
                return (pr, rl, rv, liq.umass(), vap.umass(), liq.hmass(), vap.hmass(),
                        -liq.first_saturation_deriv(iD, iT) / (rl * rl), -vap.first_saturation_deriv(iD, iT) / (rv * rv),
                        liq.first_saturation_deriv(iU, iT), vap.first_saturation_deriv(iU, iT),
                        rv * vap.speed_sound() ** 2 / pr, None)

            def single(rho, T):
                """(p, rho a^2/p, n (None: made where used), h - u - rho (du/drho)_T, c_v, u) of the vapour."""
                mix.update(DT, rho, T)
                pr, h, u = mix.p(), mix.hmass(), mix.umass()
                return (pr, rho * mix.speed_sound() ** 2 / pr, None, h - u - rho * mix.first_partial_deriv(iU, iD, iT),
                        mix.cvmass(), u)

            def rho_vapour(T):
                vap.update(QT, 1.0, T)
                return vap.rhomass()

        def exponent(pr, rho, T, two_phase, kappa):
            """The expansion exponent of the vapour drawn (direct path: one flash)."""
            if two_phase:
                vap.update(QT, 1.0, T)
                s_v = vap.smass()
            else:
                mix.update(DT, rho, T)
                s_v = mix.smass()
            return expansion_exponent(expander, pr, rho, s_v, kappa)

        def props(m, T, mode, V):
            """(p, x, u, du/dT_v, du/dv_T, h_l or h, h_v or h, rho_l, rho_v, kappa_v, two_phase, n of the vapour or
            None) at one design's state (floats; ``m`` already floored).

            In the liquid mode the saturated-mixture formulas are used on both sides of the point where the
            last liquid evaporates (x a little above 1 in the trial stages of a step that crosses it), so the
            right-hand side stays smooth up to the event that switches to the vapour mode. Otherwise the contents
            are two-phase where their density lies between the saturated vapour's and liquid's.
            """
            T = t_lo if T < t_lo else (t_hi if T > t_hi else T)
            rho = m / V
            sq = saturated(T)
            if mode == 0 or sq[2] < rho < sq[1]:
                pr, rl, rv, ul, uv, hl, hv, dvl, dvv, dul, duv, kv, nv = sq
                vl, vv = 1.0 / rl, 1.0 / rv
                x = (1.0 / rho - vl) / (vv - vl)
                dxdT = (-dvl - x * (dvv - dvl)) / (vv - vl)
                dudT = dul + x * (duv - dul) + dxdT * (uv - ul)
                dudv = (uv - ul) / (vv - vl)
                return pr, x, ul + x * (uv - ul), dudT, dudv, hl, hv, rl, rv, kv, True, nv
            pr, k, n, work, cv, u = single(rho, T)
            h = u + pr / rho
            # (du/dv)_T = -rho^2 (du/drho)_T, and rho (du/drho)_T = h - u - work = p/rho - work
            return pr, 1.0, u, cv, -(pr - rho * work), h, h, rho, rho, k, False, n

        def h_out(pp, mode):
            return pp[5] if mode == 0 else pp[6]

        def floor(m, m_floor):
            return m if m > m_floor else m_floor

        # one design's callables (floats; the mode as a float from ops.each)
        def outlet1(m, T, mode, V, m_floor):
            mode = int(mode)
            pp = props(floor(m, m_floor), T, mode, V)
            if mode == 0:
                return (pp[0], T, pp[7], pp[9], pp[0] / (pp[8] * T), 1.0, 0.0)
            rv = pp[8]
            if mode == 2:
                return (pp[0], T, rv, pp[9], pp[0] / (rv * T), -1.0, 0.0)
            n = pp[11] if pp[11] is not None else exponent(pp[0], rv, t_lo if T < t_lo else (t_hi if T > t_hi else T),
                                                           pp[10], pp[9])
            return (pp[0], T, rv, n, pp[0] / (rv * T), 0.0, 0.0)

        def temperature_rate1(m, T, mode, mdot, V, m_floor, hA, Tw):
            mode = int(mode)
            m = floor(m, m_floor)
            pp = props(m, T, mode, V)
            q = hA * (Tw - T)
            return (-mdot * (h_out(pp, mode) - pp[2] + (V / m) * pp[4]) + q) / (m * pp[3])

        def signals1(m, T, mode, V, m_floor):
            mode = int(mode)
            pp = props(floor(m, m_floor), T, mode, V)
            x = pp[1]
            return (pp[0], x, m * (1.0 - x) if pp[10] and x < 1.0 else 0.0, m * pp[2], h_out(pp, mode))

        def liquid_left1(m, T, V):
            return m / (V * rho_vapour(t_lo if T < t_lo else (t_hi if T > t_hi else T))) - 1.0

        def mass(s):
            return ops.maximum(s[i], 0.0)

        def outlet(s, mode):
            return ops.each(outlet1, s[i], s[i + 1], mode, V, m_floor, outputs=7)

        def derivs(s, mode, mdot):
            return (-mdot, ops.each(temperature_rate1, s[i], s[i + 1], mode, mdot, V, m_floor, hA, Tw))

        def signals(s, mode):
            pr, x, liquid, energy, h = ops.each(signals1, s[i], s[i + 1], mode, V, m_floor, outputs=5)
            return {"pressure": pr, "temperature": s[i + 1], "propellant_mass": s[i],
                    "vapour_quality": x, "liquid_mass": liquid, "internal_energy": energy, "outflow_enthalpy": h,
                    "heat_flow": hA * (Tw - s[i + 1])}

        def liquid_left(t, s, drive):
            return ops.each(liquid_left1, s[i], s[i + 1], V)

        events = (
            EventSpec("liquid exhausted", liquid_left, -1.0, ("liquid",), "vapour", needs_drive=False),
            EventSpec("liquid flow stops", lambda t, s, drive: drive, -1.0, ("liquid",), "sealed"),
            EventSpec("gas exhausted", lambda t, s, drive: drive, -1.0, ("vapour",), "sealed"),
            EventSpec("triple point reached (solid would form: outside this model)",
                      lambda t, s, drive: s[i + 1] - (t_tp + 0.2), -1.0, ("liquid", "vapour"), "sealed",
                      needs_drive=False),
            EventSpec("critical temperature reached (outside this model)",
                      lambda t, s, drive: s[i + 1] - (t_c - 0.2), 1.0, ("liquid", "vapour", "sealed"), None,
                      needs_drive=False),
        )
        return VolumeFns(mass=mass, outlet=outlet, derivs=derivs, signals=signals, events=events)


def _fluid_name(p: Any, where: str, device: str) -> str:
    """The CoolProp name of the tank's fluid: from the built-in gas table for its gases (no CoolProp needed),
    else from CoolProp."""
    row = lookup_gas(p.fluid)
    if row is not None:
        return row.coolprop
    require_coolprop(f"{where}.fluid", device, _NO_COOLPROP_FIX)
    return resolve_fluid(p.fluid, where=f"{where}.fluid", device=device, fix=_NO_COOLPROP_FIX)


def _saturation(p: Any, fluid: str, where: str, device: str) -> SaturationTable:
    """The saturation table up to the largest charge or wall temperature of every design."""
    T_hi = max(float(np.max(p.temperature)), float(np.max(p.wall_temperature)))
    return saturation_table(fluid, T_hi, before_build=lambda: require_coolprop(
        f"{where}.fluid", device, _NO_COOLPROP_FIX + ", or run once where CoolProp is installed to store the "
        "property tables"))
