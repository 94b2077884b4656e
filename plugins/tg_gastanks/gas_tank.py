"""The gas tank: a rigid vessel of compressed gas blowing down through its outlets.

Model
-----
States: the gas mass m and its temperature T; the density is rho = m / V.
The outflow mdot (the sum over every outlet) leaves at the tank's state.

Mass::

    dm/dt = -mdot

Temperature, by the chosen ``process``:

``adiabatic`` (the energy equation, optionally with wall heat transfer)
    d(m u)/dt = -mdot h + Qdot with Qdot = h_w A_w (T_w - T). With u(rho, T)
    and rho = m/V this gives::

        m c_v dT/dt = -mdot (h - u - rho (du/drho)_T) + Qdot

    For an ideal gas (du/drho)_T = 0 and h - u = R T, so
    m c_v dT/dt = -mdot R T + Qdot; with Qdot = 0 the gas left in the tank
    expands isentropically (T ~ rho^(g-1)).
``isothermal``
    dT/dt = 0 (a tank whose walls keep the gas at its charge temperature).
``polytropic`` (ideal gas only)
    p ~ rho^n, i.e. dT/dt = -(n - 1) T mdot / m, with 1 <= n <= gamma.

Equation of state (``equation_of_state``):

``ideal``
    p = rho R T with gamma and the molar mass from the table in
    :mod:`tg_gastanks.gases`; c_v = R / (gamma - 1). Or a gas of the user's
    own, given by ``gamma``, ``molar_mass`` and optionally a constant
    ``compressibility_factor`` Z instead of a ``gas`` name: then
    p = Z rho R T with R = R_u / M, i.e. an ideal gas whose gas constant is
    Z R (c_v = Z R / (gamma - 1); the nozzle receives gamma and Z R). A
    constant Z is a crude correction: a real gas's Z changes as the tank
    blows down (nitrogen from 1.057 at 200 bar, 300 K toward 1); use
    ``coolprop`` to follow it.
``coolprop``
    the fluid's reference equation of state through CoolProp, evaluated at
    (rho, T) (explicit in the Helmholtz energy: no iteration): p, h, u, c_v,
    (du/drho)_T and the speed of sound a. Nitrogen at 200 bar and 300 K has
    Z = 1.0568 and kappa = rho a^2 / p = 1.928 (CoolProp; references.md
    section 8): an ideal-gas tank holds 5.7 % more gas and blows down
    differently.

    What the nozzle receives: the **expansion exponent** n, the secant
    exponent of the real isentrope between the tank state and the throat
    pressure (one CoolProp (p, s) flash:
    :func:`~tg_gastanks.fluids.expansion_exponent`), with R_eff = p/(rho T),
    so that the nozzle's perfect-gas formulas pass the choked mass flux
    Gamma(n) sqrt(p rho) of the polytrope through both states. Measured
    against the real-gas maximum of rho sqrt(2 (h0 - h)) along the isentrope
    (nitrogen, 200 bar, 300 K): +0.2 %; handing kappa itself would give
    +2.6 %, the ideal gas -5.1 %. The velocity after a large expansion in a
    converging-diverging nozzle is still the polytrope's: 3.4 % low at
    p_e/p0 = 0.03 from 200 bar (0.9 % from 30 bar). This is an effective-
    exponent approximation of the real-gas nozzle flow, not a real-gas nozzle
    solution.

    ``properties = "table"`` (the default) takes all of these from a table
    built from CoolProp once per fluid and range and kept on disk
    (:mod:`tg_gastanks.gastable`; errors measured and stated there and in
    docs/fluid-devices.md); ``"direct"`` calls CoolProp at every evaluation.

Wall heat transfer: a constant film coefficient h_w over the wall area A_w
to a wall at T_w (default: the charge temperature). Only with ``adiabatic``
(it is the heat term of the energy equation).

Modes: ``gas`` (gas thrust) -> ``sealed`` when the tank pressure falls to
ambient (nothing more flows; no air flows back in). With CoolProp a terminal
event stops the flight when the gas reaches its dew point (or, above the
critical pressure, the critical temperature): condensation is outside this
model. The ideal gas does not know that it condenses: an adiabatic ideal
blowdown to vacuum cools without bound.

Assumptions and limits: uniform contents (no stratification), a rigid
tank, quasi-steady outflow, no flow into the tank; the film coefficient is a
constant the user supplies (natural convection inside a small tank is of
order 5-50 W/(m^2 K): common practice, no source).

Examples
--------
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(GasTank.parameters, {"volume": "1 L", "gauge_pressure": "9 bar"}, where="components.t",
...                  params_class=GasTank.params_class())
>>> m, T = GasTank.initial_state(p, Ambient(1e5, 293.15, 1.2))
>>> round(m * 1e3, 4), T          # 10 bar of nitrogen at 20 C in 1 L
(11.4932, 293.15)
"""

from __future__ import annotations

from typing import Any

import numpy as np

from thrustgraph.kinds.component import ComponentKind, EventSpec, Mode, StateVar, VolumeFns
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Number, Quantity
from thrustgraph.base.xp import array_ops, scalar_ops

from tg_vessels import PRESSURE_CAUTIONS

from .cold import COLD_OUTCOMES, cold_cautions, cold_summary
from .fluids import FluidName, expansion_exponent, new_state, require_coolprop, resolve_fluid, wall_heat_specs
from .gases import IDEAL_GASES, UNIVERSAL_GAS_CONSTANT, lookup_gas
from .gastable import GasPropertyTable, gas_table, largest

__all__ = ["GasTank", "GAS_CYLINDER_CAUTIONS"]

GAS_CYLINDER_CAUTIONS = [
    "Compressed-gas cylinders and tanks must be built, certified, filled and periodically inspected to the "
    "gas-cylinder codes that apply where you are (e.g. ISO 9809, US DOT 49 CFR 173/178); feed thrusters "
    "through a regulator and protect the tank with a relief device rated for it.",
    "Expanding gas cools sharply: tanks, valves and nozzles can frost over and cause cold burns; never "
    "point a gas jet at anyone, and keep clear of the exhaust line.",
]


class GasTank(ComponentKind):
    """Rigid tank of compressed gas: ideal or real (CoolProp), adiabatic, isothermal or polytropic."""

    kind = "gas-tank"
    role = "volume"
    signal_units = {"density": "kg/m^3", "isentropic_exponent": "", "expansion_exponent": "",
                    "compressibility_factor": "", "heat_flow": "W"}
    stores_pressure = True
    summary = "rigid tank of compressed gas: ideal-gas table or CoolProp, with optional wall heat transfer"
    parameters = (
        Quantity("volume", "L", low=0.0, low_open=True, high=1e6, doc="internal volume of the tank"),
        FluidName("gas", default="absent",
                  doc=f"the gas: one of {', '.join(IDEAL_GASES)}, or (with CoolProp) any fluid it knows; nitrogen "
                      "when neither gas nor gamma is given"),
        Number("gamma", default="absent", low=1.0, low_open=True, high=1.7,
               doc="ratio of specific heats of a gas of your own (ideal gas; give molar_mass too, and no gas name)"),
        Quantity("molar_mass", "g/mol", default="absent", low=0.0, low_open=True, high=1000.0,
                 doc="molar mass of a gas of your own (with gamma)"),
        Number("compressibility_factor", default="absent", low=0.0, low_open=True, high=10.0,
               doc="constant compressibility factor Z of a gas of your own: p = Z rho R T (default 1)"),
        Choice("equation_of_state", options=("ideal", "coolprop"), default="ideal",
               doc="ideal: perfect gas from the built-in table; coolprop: the fluid's reference equation of state"),
        Choice("properties", options=("table", "direct"), default="table",
               doc="with coolprop: table = properties tabulated from CoolProp once per fluid and range (kept on "
                   "disk; errors measured in docs/fluid-devices.md), direct = CoolProp at every evaluation"),
        Quantity("gauge_pressure", "bar", low=0.0, high=10_000.0, reference="gauge", doc="charge pressure above ambient at launch"),
        Quantity("temperature", "K", default="293.15 K", low=1.0, high=5000.0,
                 doc="gas temperature at launch"),
        Choice("process", options=("adiabatic", "isothermal", "polytropic"), default="adiabatic",
               doc="how the gas left in the tank changes state as it blows down"),
        Number("polytropic_exponent", default=1.2, low=1.0, high=1.7,
               doc="exponent n of p ~ rho^n (process = polytropic, ideal gas only)"),
    ) + wall_heat_specs("the gas", " (process = adiabatic)")
    states = (
        StateVar("gas_mass", "kg", "gas in the tank"),
        StateVar("temperature", "K", "gas temperature"),
    )
    modes = (Mode("gas", "gas thrust"), Mode("sealed", "sealed", propulsive=False, outflow=False))

    # --- validation -----------------------------------------------------------
    @classmethod
    def check(cls, p, where):
        _check_own_gas(p, where)
        if p.equation_of_state == "ideal":
            if p.gamma is None and lookup_gas(_gas_name(p)) is None:
                raise ModelError(f"{where}.gas", f"the built-in ideal-gas table has no gas {p.gas!r}",
                                 f"choose one of {', '.join(IDEAL_GASES)}, or set equation_of_state = "
                                 "\"coolprop\" to use any fluid CoolProp knows")
        else:
            device = f"the real-gas tank {where.rsplit('.', 1)[-1]!r}"
            if p.properties == "table":
                fluid, _R = _fluid_of(p, where, device)
                problem = _table_charge_problem(_property_table(p, where, device, _STANDARD_PRESSURE), fluid,
                                                _STANDARD_PRESSURE + p.gauge_pressure, p.temperature)
            else:
                require_coolprop(f"{where}.equation_of_state", device,
                                 "set equation_of_state = \"ideal\" to use the built-in gas table")
                fluid = resolve_fluid(_gas_name(p), where=f"{where}.gas", device=device)
                problem = _charge_problem(p, fluid, _STANDARD_PRESSURE)
            if problem:
                raise ModelError(f"{where}.gauge_pressure", problem, "use a self-pressurising-tank for a "
                                 "liquefied gas, or raise the temperature or lower the pressure")
            if p.process == "polytropic":
                raise ModelError(f"{where}.process", "a polytropic exponent is an ideal-gas idealisation; the "
                                 "real-gas tank follows its equation of state",
                                 "use process = \"adiabatic\" (with wall heat transfer if you like) or "
                                 "\"isothermal\", or set equation_of_state = \"ideal\"")
        if p.wall_heat_transfer_coefficient > 0.0:
            if p.process != "adiabatic":
                raise ModelError(f"{where}.wall_heat_transfer_coefficient", "wall heat transfer enters the energy "
                                 f"equation, which process = {p.process!r} does not use",
                                 "set process = \"adiabatic\" (the energy equation) or remove the coefficient")
            if p.wall_area <= 0.0:
                raise ModelError(f"{where}.wall_area", "wall heat transfer needs the wall area",
                                 "give the tank's inner wall area, e.g. wall_area = \"0.06 m^2\"")

    outcomes = COLD_OUTCOMES

    @classmethod
    def cautions(cls, p):
        return list(PRESSURE_CAUTIONS) + list(GAS_CYLINDER_CAUTIONS)

    @classmethod
    def summarize(cls, name, p, result):
        return cold_summary(name, p, result)

    @classmethod
    def flight_cautions(cls, name, p, result):
        return cold_cautions(name, p, result, "gas")

    # --- initial state ----------------------------------------------------------
    @classmethod
    def initial_state(cls, p, amb):
        """(gas mass, temperature) at the charge state; floats, or arrays when the parameters or the ambient
        are arrays over designs (a CoolProp charge state is then evaluated design by design)."""
        p0 = amb.pressure + p.gauge_pressure
        T0 = p.temperature
        if p.equation_of_state == "ideal":
            R_eff = _ideal_gas(p)[0]
            return (p0 * p.volume / (R_eff * T0), T0)
        if p.properties == "table":
            table = _property_table(p, "gas-tank", "the real-gas tank", amb.pressure)
            for p_k, T_k in np.broadcast(p0, T0):           # each design's charge
                problem = _table_charge_problem(table, table.fluid, float(p_k), float(T_k))
                if problem:
                    raise ModelError("gas-tank.gauge_pressure", problem, "use a self-pressurising-tank for a "
                                     "liquefied gas, or raise the temperature or lower the pressure")
            return (table.density(p0, T0, _ops_for(p0, T0)) * p.volume, T0)
        fluid = resolve_fluid(_gas_name(p), where="gas", device="the real-gas tank")
        st = new_state(fluid)
        PT = _inputs("PT")

        def density(p_charge, T_charge):
            problem = _charge_problem_at(fluid, p_charge, T_charge)
            if problem:
                raise ModelError("gas-tank.gauge_pressure", problem, "use a self-pressurising-tank for a "
                                 "liquefied gas, or raise the temperature or lower the pressure")
            st.update(PT, p_charge, T_charge)
            return st.rhomass()

        return (_ops_for(p0, T0).each(density, p0, T0) * p.volume, T0)

    @classmethod
    def describe_mass(cls, p, amb):
        return {"gas": cls.initial_state(p, amb)[0]}

    vectorised = True

    # --- assembly ---------------------------------------------------------------
    @classmethod
    def build_volume(cls, p, i, ops, amb):
        """One definition for one design (floats) and for an ensemble (parameters, ``s[k]`` and ``mode`` arrays
        over designs; a mode shared by every design arrives as an ``int``). The real gas's properties come from
        CoolProp at each design's (rho, T), one call per design through ``ops.each``: the same numbers as a
        single flight, at the cost of one property call per design."""
        V = p.volume
        m0, T0 = cls.initial_state(p, amb)
        Tw = ops.where(p.wall_temperature > 0.0, p.wall_temperature, T0)
        hA = p.wall_heat_transfer_coefficient * p.wall_area
        process = p.process
        n = p.polytropic_exponent
        m_floor = 1e-12 * m0

        if p.equation_of_state == "ideal":
            R, g, Z = _ideal_gas(p)          # R is Z R_u / M: p = rho R T
            cv = R / (g - 1.0)

            def state(s):
                m = ops.maximum(s[i], m_floor)
                T = s[i + 1]
                rho = m / V
                return m, T, rho, rho * R * T, g, R

            def temperature_rate(s, mdot):
                m, T, rho, pg, _g, _R = state(s)
                if process == "isothermal":
                    return 0.0 * mdot
                if process == "polytropic":
                    return -(n - 1.0) * T * mdot / m
                return (-mdot * R * T + hA * (Tw - T)) / (m * cv)

            def compressibility(s):
                return Z
            outlet_state = state
            events_extra: tuple[EventSpec, ...] = ()
        elif p.properties == "table":
            table = _property_table(p, "gas-tank", "the real-gas tank", amb.pressure)
            Rs, t_min = table.gas_constant, table.T_floor
            pc, Tc = table.p_critical, table.T_critical

            def gas_point(s):
                m = ops.maximum(s[i], m_floor)
                T = ops.maximum(s[i + 1], t_min)
                return (m, T, m / V) + table.props(m / V, T, ops)

            def state(s):
                m, T, rho, pg, kappa, _n, _w, _cv = gas_point(s)
                return m, T, rho, pg, kappa, pg / (rho * T)

            def outlet_state(s):
                m, T, rho, pg, _kappa, n_exp, _w, _cv = gas_point(s)
                return m, T, rho, pg, n_exp, pg / (rho * T)

            def temperature_rate(s, mdot):
                if process == "isothermal":
                    return 0.0 * mdot
                m, T, rho, _pg, _kappa, _n, work, cv = gas_point(s)
                return (-mdot * work + hA * (Tw - T)) / (m * cv)

            def dew_at(pg):
                return table.dew_temperature(pg, ops)
        else:
            import CoolProp

            fluid = resolve_fluid(_gas_name(p), where="gas", device="the real-gas tank")
            st = new_state(fluid)
            st.specify_phase(CoolProp.iphase_gas)      # evaluate the gas branch at (rho, T): no flash
            DT = CoolProp.DmassT_INPUTS
            iU, iD, iT = CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT
            Rs = UNIVERSAL_GAS_CONSTANT / st.molar_mass()
            t_min = st.Tmin()
            sat = new_state(fluid)
            pc, Tc = sat.p_critical(), sat.T_critical()
            p_triple = sat.trivial_keyed_output(CoolProp.iP_triple)
            PQ = CoolProp.PQ_INPUTS
            expander = new_state(fluid)

            # the property calls, on one design's floats (ops.each applies them design by design)
            def point(rho, T):
                st.update(DT, rho, T)
                pg = st.p()
                return pg, rho * st.speed_sound() ** 2 / pg

            def exponent(rho, T):
                st.update(DT, rho, T)
                pg = st.p()
                return expansion_exponent(expander, pg, rho, st.smass(), rho * st.speed_sound() ** 2 / pg)

            def energy(rho, T):
                st.update(DT, rho, T)
                return st.hmass() - st.umass() - rho * st.first_partial_deriv(iU, iD, iT), st.cvmass()

            def dew_temperature(pg):
                # below the triple-point pressure the gas would deposit as a solid (outside the model, as
                # condensation is): the margin is to the triple-point temperature there, as the table's is
                # (CoolProp refuses a saturation state below it; 6.6.0 raised in a blowdown to 12 kPa)
                sat.update(PQ, max(pg, p_triple), 1.0)
                return sat.T()

            def state(s):
                m = ops.maximum(s[i], m_floor)
                T = ops.maximum(s[i + 1], t_min)
                rho = m / V
                pg, kappa = ops.each(point, rho, T, outputs=2)
                return m, T, rho, pg, kappa, pg / (rho * T)

            def outlet_state(s):
                m, T, rho, pg, kappa, R_eff = state(s)
                return m, T, rho, pg, ops.each(exponent, rho, T), R_eff

            def temperature_rate(s, mdot):
                if process == "isothermal":
                    return 0.0 * mdot
                m, T, rho, pg, _k, _R = state(s)
                work, cv = ops.each(energy, rho, T, outputs=2)
                return (-mdot * work + hA * (Tw - T)) / (m * cv)

            def dew_at(pg):
                return ops.each(dew_temperature, pg)

        if p.equation_of_state != "ideal":          # the real gas, tabulated or direct
            def compressibility(s):
                m, T, rho, pg, _k, _R = state(s)
                return pg / (rho * Rs * T)

            def dew_margin(t, s, drive):
                m, T, rho, pg, _k, _R = state(s)
                above = pg >= pc
                # above the critical pressure the margin is to the critical temperature (no dew line there)
                return ops.where(above, s[i + 1] - Tc, s[i + 1] - dew_at(ops.where(above, 0.5 * pc, pg)))

            events_extra = (EventSpec("dew point reached (condensation: outside the gas-tank model)", dew_margin,
                                      -1.0, ("gas", "sealed"), None, needs_drive=False),)

        def mass(s):
            return s[i]

        def outlet(s, mode):
            m, T, rho, pg, g_eff, R_eff = outlet_state(s)
            phase = (-1.0 if mode == 1 else 0.0) if type(mode) is int else ops.where(mode == 1, -1.0, 0.0)
            return (pg, T, rho, g_eff, R_eff, phase, 0.0)

        def derivs(s, mode, mdot):
            return (-mdot, temperature_rate(s, mdot))

        def signals(s, mode):
            m, T, rho, pg, g_eff, R_eff = state(s)
            n_exp = outlet_state(s)[4]
            return {"pressure": pg, "temperature": s[i + 1], "gas_mass": s[i], "density": rho,
                    "isentropic_exponent": g_eff, "expansion_exponent": n_exp,
                    "compressibility_factor": compressibility(s),
                    "heat_flow": hA * (Tw - s[i + 1])}

        events = (EventSpec("gas exhausted", lambda t, s, drive: drive, -1.0, ("gas",), "sealed"),) + events_extra
        return VolumeFns(mass=mass, outlet=outlet, derivs=derivs, signals=signals, events=events)



def _fluid_of(p: Any, where: str, device: str) -> tuple[str, float]:
    """(CoolProp name, specific gas constant) of a real-gas tank's fluid: from the built-in table for its gases
    (no CoolProp needed), else from CoolProp."""
    row = lookup_gas(_gas_name(p))
    if row is not None:
        return row.coolprop, row.gas_constant
    require_coolprop(f"{where}.equation_of_state", device,
                     "set equation_of_state = \"ideal\" to use the built-in gas table")
    fluid = resolve_fluid(_gas_name(p), where=f"{where}.gas", device=device)
    return fluid, UNIVERSAL_GAS_CONSTANT / new_state(fluid).molar_mass()


def _property_table(p: Any, where: str, device: str, p_amb: Any) -> GasPropertyTable:
    """The property table covering every design's charge: density up to the largest charge density (found on
    the table itself; a larger table is taken when the first guess, the ideal gas's density, falls short),
    temperature up to the largest of the charge and wall temperatures."""
    fluid, R = _fluid_of(p, where, device)
    p0 = largest(p_amb + p.gauge_pressure)
    T_hi = max(largest(p.temperature), largest(p.wall_temperature))
    T0 = float(np.min(p.temperature))

    def missing() -> None:
        require_coolprop(f"{where}.equation_of_state", device, "set equation_of_state = \"ideal\" to use the "
                         "built-in gas table, or run once where CoolProp is installed to store the table")

    rho = p0 / (R * T0)
    for _ in range(4):
        table = gas_table(fluid, rho, T_hi, before_build=missing)
        if _table_charge_problem(table, fluid, p0, T0):
            return table                    # the caller reports the charge problem
        rho = float(table.density(p0, T0, scalar_ops))
        if rho * 1.05 <= table.rho_hi:
            return table
    return table


def _table_charge_problem(table: GasPropertyTable, fluid: str, p0: float, T0: float) -> str:
    """Why ``fluid`` at (p0, T0) is not a gas (empty when it is), from the table's critical point and dew line."""
    if T0 >= table.T_critical:
        return ""
    where = f"at {p0 / 1e5:.4g} bar and {T0:.5g} K {fluid}"
    if p0 >= table.p_critical:
        return f"{where} is a dense liquid-like fluid (below its critical temperature, {table.T_critical:.5g} K)"
    p_sat = table.saturation_pressure(T0)
    if p0 >= p_sat:
        return f"{where} is at or above its saturation pressure ({p_sat / 1e5:.4g} bar): it is a liquid, not a gas"
    return ""


def _gas_name(p: Any) -> str:
    """The named gas of a tank: ``gas``, or nitrogen when neither a name nor gamma is given."""
    return p.gas if p.gas is not None else "nitrogen"


def _ideal_gas(p: Any) -> tuple[Any, Any, Any]:
    """(Z R, gamma, Z) of an ideal-gas tank: from the table row of its named gas (Z = 1), or its own gamma, molar
    mass and compressibility factor (floats, or arrays over designs)."""
    if p.gamma is not None:
        Z = 1.0 if p.compressibility_factor is None else p.compressibility_factor
        return Z * UNIVERSAL_GAS_CONSTANT / p.molar_mass, p.gamma, Z
    row = lookup_gas(_gas_name(p))
    return row.gas_constant, row.gamma, 1.0


def _check_own_gas(p: Any, where: str) -> None:
    """A gas of the user's own: gamma and molar mass together, no gas name beside them, ideal gas only."""
    own = {k: getattr(p, k) for k in ("gamma", "molar_mass", "compressibility_factor") if getattr(p, k) is not None}
    if not own:
        return
    given = " and ".join(own)
    if p.gas is not None:
        raise ModelError(f"{where}.gas", f"the tank names the gas {p.gas!r} and also gives {given} of a gas of "
                         "its own: one gas only", f"remove gas = \"{p.gas}\" to use your own gas, or remove "
                         f"{given} to use {p.gas}")
    for k, what in (("gamma", "its ratio of specific heats, e.g. gamma = 1.4"),
                    ("molar_mass", "its molar mass, e.g. molar_mass = \"28.0 g/mol\"")):
        if getattr(p, k) is None:
            raise ModelError(f"{where}.{k}", f"a gas of your own given by {given} needs {k} too",
                             f"give {what}, or name a gas instead (gas = \"nitrogen\")")
    if p.equation_of_state != "ideal":
        raise ModelError(f"{where}.equation_of_state", "a gas given by gamma and molar mass is an ideal gas "
                         f"(p = Z rho R T); equation_of_state = {p.equation_of_state!r} needs a named fluid",
                         "set equation_of_state = \"ideal\", or name the fluid (gas = \"nitrogen\") and remove "
                         f"{', '.join(own)}")


def _ops_for(*values: Any) -> Any:
    """The namespace of :mod:`thrustgraph.base.xp` that fits ``values``: arrays when any of them is one."""
    return array_ops if any(isinstance(v, np.ndarray) for v in values) else scalar_ops


def _inputs(name: str) -> int:
    import CoolProp

    return {"PT": CoolProp.PT_INPUTS}[name]


#: 1 atm, the ambient assumed when parameters are checked before the environment is known.
_STANDARD_PRESSURE = 101325.0


def _charge_problem(p, fluid: str, p_amb: float) -> str:
    """Why the charge state is not a gas (empty when it is): below the dew point, or liquid-like."""
    return _charge_problem_at(fluid, p_amb + p.gauge_pressure, p.temperature)


def _charge_problem_at(fluid: str, p0: float, T0: float) -> str:
    """Why ``fluid`` at (p0, T0) is not a gas (empty when it is)."""
    import CoolProp

    st = new_state(fluid)
    if T0 >= st.T_critical():
        return ""
    where = f"at {p0 / 1e5:.4g} bar and {T0:.5g} K {fluid}"
    if p0 >= st.p_critical():
        return f"{where} is a dense liquid-like fluid (below its critical temperature, {st.T_critical():.5g} K)"
    st.update(CoolProp.QT_INPUTS, 1.0, T0)
    if p0 >= st.p():
        return f"{where} is at or above its saturation pressure ({st.p() / 1e5:.4g} bar): it is a liquid, not a gas"
    return ""
