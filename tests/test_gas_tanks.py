"""Gas tanks and the self-pressurising tank against CoolProp, published property values and closed forms.

Sources beside each check; CoolProp 8 evaluates the reference equations of state (references.md section 8).
"""

from __future__ import annotations

import dataclasses
import math
import os
import subprocess
import sys

import CoolProp
import numpy as np
import pytest
from scipy.integrate import trapezoid
from scipy.optimize import minimize_scalar

from thrustgraph import integrate
from thrustgraph.base.errors import ModelError
from thrustgraph.models.model import parse_model
from tg_gasdynamics.isentropic import mass_flux_factor
from tg_gastanks.fluids import expansion_exponent, new_state
from tg_gastanks.gases import IDEAL_GASES
from conftest import model_from_toml

N2 = "Nitrogen"


def gas_tank_model(*, eos="ideal", gauge="199 bar", T="300 K", volume="1 L", process="adiabatic", d="1 mm",
                   medium='kind = "vacuum"', mount="held", end="1 s", extra_tank="", outlet=None, interval="0.05 s",
                   gas="nitrogen"):
    outlet = outlet or f"""
        [components.nozzle]
        kind = "convergent-nozzle"
        diameter = "{d}"
        discharge_coefficient = 1.0
    """
    return model_from_toml(f"""
        flow_paths = ["tank -> nozzle -> outside"]
        [launch]
        mount = "{mount}"
        [run]
        end_time = "{end}"
        output_interval = "{interval}"
        rtol = 1e-10
        atol = 1e-12
        [environment.medium]
        {medium}
        [components.stand]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.tank]
        kind = "gas-tank"
        {f'gas = "{gas}"' if gas else ""}
        equation_of_state = "{eos}"
        volume = "{volume}"
        gauge_pressure = "{gauge}"
        temperature = "{T}"
        process = "{process}"
        {extra_tank}
        {outlet}
        [components.outside]
        kind = "surroundings"
    """)


@pytest.mark.parametrize("name", sorted(IDEAL_GASES))
def test_ideal_gas_table_against_coolprop(name):
    # The table's molar masses (IUPAC atomic weights, from memory; air: US Standard Atmosphere 1976) and its
    # ideal-gas gamma near 300 K (handbook values from memory) against CoolProp's molar mass and ideal-gas
    # cp0/cv0 at 300 K, 1 atm.
    g = IDEAL_GASES[name]
    st = CoolProp.AbstractState("HEOS", g.coolprop)
    st.update(CoolProp.PT_INPUTS, 101325.0, 300.0)
    assert g.molar_mass == pytest.approx(st.molar_mass(), rel=1e-4)
    cp0 = st.cp0mass()
    gamma0 = cp0 / (cp0 - 8.314462618 / st.molar_mass())
    assert g.gamma == pytest.approx(gamma0, rel=5e-3)


def test_nitrogen_compressibility_at_200_bar_against_coolprop_and_nist():
    # N2 at 200 bar, 300 K: Z = 1.05683, rho = 212.54 kg/m^3 (CoolProp HEOS, Span et al. 2000); the NIST
    # Chemistry WebBook gives rho ~ 212.5 kg/m^3 (references.md section 8; the NIST value from memory).
    m = gas_tank_model(eos="coolprop", gauge=f"{200e5 - 0.0} Pa", medium='kind = "vacuum"', end="0.01 s")
    r = integrate(m)
    assert r.signals["tank.pressure"][0] == pytest.approx(200e5, rel=1e-9)
    assert r.signals["tank.compressibility_factor"][0] == pytest.approx(1.05683, abs=2e-5)
    assert r.signals["tank.density"][0] == pytest.approx(212.54, abs=0.01)
    assert r.signals["tank.density"][0] == pytest.approx(212.5, rel=1e-3)       # NIST (memory)
    # rho a^2 / p = 1.928 (references.md section 8: CoolProp), not the ideal 1.4
    assert r.signals["tank.isentropic_exponent"][0] == pytest.approx(1.928, abs=1e-3)


def test_real_gas_blowdown_differs_from_ideal_gas():
    # Same tank, same charge: the equation of state holds 5.4 % less nitrogen than pV = mRT (Z = 1.0568) and a
    # blowdown through the same orifice follows another pressure history. Ideal: gamma 1.4 from the table.
    kw = dict(gauge="200 bar", medium='kind = "vacuum"', end="4 s", interval="0.5 s")
    ideal, real = integrate(gas_tank_model(eos="ideal", **kw)), integrate(gas_tank_model(eos="coolprop", **kw))
    m_i, m_r = ideal.signals["tank.gas_mass"], real.signals["tank.gas_mass"]
    assert m_i[0] / m_r[0] == pytest.approx(1.0568, abs=2e-4)
    p_i, p_r = ideal.signals["tank.pressure"], real.signals["tank.pressure"]
    assert p_i[0] == pytest.approx(p_r[0], rel=1e-9)
    k = np.searchsorted(ideal.t, 2.0)
    assert abs(p_i[k] / p_r[k] - 1.0) > 0.02          # the histories part by more than 2 % within 2 s
    for r in (ideal, real):
        assert abs(r.audit.mass_relative) < 1e-12


def test_real_gas_adiabatic_blowdown_is_isentropic():
    # The gas left in an adiabatic tank expands isentropically (its entropy per unit mass is constant): a
    # consequence of d(mu) = h dm with no heat. Checked with CoolProp's entropy at each output state.
    r = integrate(gas_tank_model(eos="coolprop", gauge="150 bar", medium='kind = "vacuum"', end="3 s",
                                 interval="0.25 s", d="2 mm"))
    st = CoolProp.AbstractState("HEOS", N2)
    s = []
    for rho, T in zip(r.signals["tank.density"], r.signals["tank.temperature"]):
        st.update(CoolProp.DmassT_INPUTS, rho, T)
        s.append(st.smass())
    s = np.array(s)
    assert r.signals["tank.pressure"][-1] < 0.3 * r.signals["tank.pressure"][0]
    assert np.max(np.abs(s - s[0])) / abs(s[0]) < 1e-7


def test_expansion_exponent_gives_the_real_gas_choked_flux():
    # The real-gas choked mass flux: the maximum of rho sqrt(2 (h0 - h)) along the isentrope through the
    # stagnation state (quasi-one-dimensional isentropic flow; computed here with CoolProp). N2, 200 bar, 300 K.
    st = CoolProp.AbstractState("HEOS", N2)
    p0, T0 = 200e5, 300.0
    st.update(CoolProp.PT_INPUTS, p0, T0)
    s0, h0, r0, a0 = st.smass(), st.hmass(), st.rhomass(), st.speed_sound()
    kappa = r0 * a0 * a0 / p0

    def flux(p):
        st.update(CoolProp.PSmass_INPUTS, p, s0)
        return st.rhomass() * math.sqrt(2.0 * (h0 - st.hmass()))
    best = minimize_scalar(lambda p: -flux(p), bounds=(0.2 * p0, 0.9 * p0), method="bounded",
                           options={"xatol": 1e-7 * p0})
    G_real = -best.fun
    n = expansion_exponent(new_state(N2), p0, r0, s0, kappa)
    G_n = mass_flux_factor(n) * math.sqrt(p0 * r0)
    G_kappa = mass_flux_factor(kappa) * math.sqrt(p0 * r0)
    G_ideal = p0 * mass_flux_factor(1.4) / math.sqrt(IDEAL_GASES["nitrogen"].gas_constant * T0)
    assert abs(G_n / G_real - 1) < 3e-3            # what the tank hands the nozzle
    assert G_kappa / G_real - 1 == pytest.approx(0.026, abs=0.003)
    assert G_ideal / G_real - 1 == pytest.approx(-0.051, abs=0.003)


def test_isothermal_ideal_blowdown_is_exponential():
    # Isothermal tank, choked orifice in vacuum: dm/dt = -Cd A p Gamma / sqrt(R T) with p = m R T / V, so
    # p = p0 exp(-t / tau), tau = V / (Cd A Gamma sqrt(R T)) (closed form from the mass balance).
    R, T = IDEAL_GASES["nitrogen"].gas_constant, 300.0
    A = math.pi * 0.001 ** 2 / 4
    tau = 0.001 / (A * mass_flux_factor(1.4) * math.sqrt(R * T))
    r = integrate(gas_tank_model(gauge="10 bar", process="isothermal", end="2 s", interval="0.1 s"))
    assert np.max(np.abs(r.signals["tank.pressure"] / (10e5 * np.exp(-r.t / tau)) - 1)) < 1e-7


def test_a_gas_of_your_own_equal_to_nitrogen_flies_as_nitrogen():
    # gamma and molar mass of the table's nitrogen row, given by hand: every signal of the flight is the same.
    n2 = IDEAL_GASES["nitrogen"]
    own = f'gamma = {n2.gamma!r}\nmolar_mass = "{n2.molar_mass * 1e3!r} g/mol"'
    kw = dict(gauge="10 bar", end="1 s", interval="0.05 s", medium='kind = "still-air"')
    named, mine = integrate(gas_tank_model(**kw)), integrate(gas_tank_model(gas=None, extra_tank=own, **kw))
    assert set(named.signals) == set(mine.signals)
    for key, values in named.signals.items():
        np.testing.assert_array_equal(values, mine.signals[key], err_msg=key)
    # leaving both out is nitrogen too
    default = integrate(gas_tank_model(gas=None, **kw))
    np.testing.assert_array_equal(default.signals["tank.pressure"], named.signals["tank.pressure"])


def test_a_gas_of_your_own_blows_down_adiabatically_as_the_closed_form():
    # Adiabatic (isentropic) ideal-gas tank, choked orifice in vacuum. The choked mass flow
    # mdot = Cd A p Gamma(g) / sqrt(R T) (Anderson, Modern Compressible Flow, 3rd ed., 2003, eq. 5.21; equation
    # number from memory) with p ~ rho^g and T ~ rho^(g-1) integrates in closed form (derived here):
    #   rho/rho0 = (1 + (g-1)/2 k t)^(-2/(g-1)),  p/p0 = (rho/rho0)^g,  k = Cd A Gamma sqrt(R T0) / V.
    # A gas that is in no table (gamma 1.3, 20 g/mol), Z = 1.
    g, M, T0, V, p0 = 1.3, 20e-3, 300.0, 1e-3, 10e5
    R = 8.314462618 / M
    A = math.pi * 0.001 ** 2 / 4
    k = A * mass_flux_factor(g) * math.sqrt(R * T0) / V
    r = integrate(gas_tank_model(gas=None, gauge="10 bar", end="10 s", interval="0.5 s",
                                 extra_tank=f'gamma = {g}\nmolar_mass = "{M * 1e3} g/mol"\ncompressibility_factor = 1'))
    x = (1.0 + 0.5 * (g - 1.0) * k * r.t) ** (-2.0 / (g - 1.0))
    assert np.max(np.abs(r.signals["tank.pressure"] / (p0 * x ** g) - 1)) < 1e-7
    assert np.max(np.abs(r.signals["tank.temperature"] / (T0 * x ** (g - 1.0)) - 1)) < 1e-7
    assert r.signals["tank.pressure"][-1] < 0.2 * p0                # a real blowdown, not a few per cent of one


def test_a_gas_of_your_own_with_a_compressibility_factor_blows_down_isothermally_as_the_closed_form():
    # p = Z rho R T with constant Z: an ideal gas of gas constant Z R. Isothermal, choked in vacuum:
    # dm/dt = -Cd A p Gamma / sqrt(Z R T), p = m Z R T / V, so p = p0 exp(-t/tau), tau = V / (Cd A Gamma sqrt(Z R T))
    # (closed form from the mass balance and the choked mass flow, Anderson 2003 eq. 5.21 as above).
    g, M, T, Z = 1.4, 28.0134e-3, 300.0, 1.05
    R = 8.314462618 / M
    A = math.pi * 0.001 ** 2 / 4
    tau = 0.001 / (A * mass_flux_factor(g) * math.sqrt(Z * R * T))
    own = f'gamma = {g}\nmolar_mass = "{M * 1e3} g/mol"\ncompressibility_factor = {Z}'
    r = integrate(gas_tank_model(gas=None, gauge="10 bar", process="isothermal", end="2 s", interval="0.1 s",
                                 extra_tank=own))
    assert np.max(np.abs(r.signals["tank.pressure"] / (10e5 * np.exp(-r.t / tau)) - 1)) < 1e-7
    # the charge: Z times less gas than the ideal gas at the same p and T
    assert r.signals["tank.gas_mass"][0] == pytest.approx(10e5 * 1e-3 / (Z * R * T), rel=1e-12)
    assert np.all(r.signals["tank.compressibility_factor"] == Z)


@pytest.mark.parametrize("extra, gas, eos, where, what", [
    ("gamma = 1.0\nmolar_mass = \"28 g/mol\"", None, "ideal", "components.tank.gamma", "greater than 1"),
    ("gamma = 0.9\nmolar_mass = \"28 g/mol\"", None, "ideal", "components.tank.gamma", "greater than 1"),
    ("gamma = 1.4\nmolar_mass = \"0 g/mol\"", None, "ideal", "components.tank.molar_mass", "greater than 0"),
    ("gamma = 1.4\nmolar_mass = \"-4 g/mol\"", None, "ideal", "components.tank.molar_mass", "greater than 0"),
    ("gamma = 1.4\nmolar_mass = \"28 g/mol\"", "nitrogen", "ideal", "components.tank.gas", "one gas only"),
    ("gamma = 1.4", None, "ideal", "components.tank.molar_mass", "needs molar_mass too"),
    ("molar_mass = \"28 g/mol\"", None, "ideal", "components.tank.gamma", "needs gamma too"),
    ("compressibility_factor = 1.1", None, "ideal", "components.tank.gamma", "needs gamma too"),
    ("gamma = 1.4\nmolar_mass = \"28 g/mol\"\ncompressibility_factor = 0", None, "ideal",
     "components.tank.compressibility_factor", "greater than 0"),
    ("gamma = 1.4\nmolar_mass = \"28 g/mol\"", None, "coolprop", "components.tank.equation_of_state",
     "is an ideal gas"),
])
def test_a_gas_of_your_own_bad_input(extra, gas, eos, where, what):
    with pytest.raises(ModelError) as err:
        parse_model(gas_tank_model(gas=gas, eos=eos, extra_tank=extra))
    msg = str(err.value)
    assert msg.startswith(where + ":") and what in msg and "Fix:" in msg


def test_wall_heat_transfer_relaxes_a_closed_tank_exponentially():
    # No outflow (relief valve never cracks): m c_v dT/dt = h A (T_w - T), so T = T_w + (T0 - T_w) exp(-t/tau),
    # tau = m c_v / (h A) (Newton's law of cooling; closed form).
    outlet = """
        [components.nozzle]
        kind = "relief-valve"
        cracking_pressure = "100 bar"
        reseat_pressure = "90 bar"
        flow_area = "1 mm^2"
    """
    extra = 'wall_heat_transfer_coefficient = "50 W/m^2/K"\nwall_area = "0.05 m^2"\nwall_temperature = "350 K"'
    r = integrate(gas_tank_model(gauge="9 bar", T="280 K", end="60 s", interval="5 s", outlet=outlet,
                                 medium='kind = "still-air"', extra_tank=extra))
    g = IDEAL_GASES["nitrogen"]
    m = r.signals["tank.gas_mass"][0]
    tau = m * g.gas_constant / (g.gamma - 1) / (50 * 0.05)
    T_exact = 350.0 + (280.0 - 350.0) * np.exp(-r.t / tau)
    assert np.max(np.abs(r.signals["tank.temperature"] - T_exact)) < 1e-6
    assert r.signals["nozzle.open"].max() == 0.0


def test_gas_tank_bad_input():
    with pytest.raises(ModelError, match=r"components.tank.gas: CoolProp does not know the fluid 'nitrogenn'.*"
                                         r"did you mean 'nitrogen'"):
        parse_model(gas_tank_model(eos="coolprop", gas="nitrogenn"))
    with pytest.raises(ModelError, match=r"components.tank.gas: the built-in ideal-gas table has no gas 'xenon'"):
        parse_model(gas_tank_model(gas="xenon"))
    with pytest.raises(ModelError, match=r"components.tank.process: a polytropic exponent is an ideal-gas"):
        parse_model(gas_tank_model(eos="coolprop", process="polytropic"))
    with pytest.raises(ModelError, match=r"components.tank.gauge_pressure: .*CarbonDioxide is at or above its "
                                         r"saturation pressure"):
        parse_model(gas_tank_model(eos="coolprop", gas="CO2", gauge="50 bar", T="280 K"))
    with pytest.raises(ModelError, match=r"wall_area: wall heat transfer needs the wall area"):
        parse_model(gas_tank_model(extra_tank='wall_heat_transfer_coefficient = "10 W/m^2/K"'))


def test_real_gas_tank_without_coolprop_is_refused_clearly(tmp_path):
    # The CLI in a fresh interpreter in which CoolProp cannot be imported (the import itself is blocked).
    (tmp_path / "m.toml").write_text('format = "thrustgraph-model"\nversion = 1\nname = "x"\n' + """
flow_paths = ["tank -> nozzle -> outside"]
[components.frame]
kind = "airframe"
dry_mass = "1 kg"
[components.tank]
kind = "gas-tank"
equation_of_state = "coolprop"
volume = "1 L"
gauge_pressure = "100 bar"
[components.nozzle]
kind = "convergent-nozzle"
diameter = "1 mm"
[components.outside]
kind = "surroundings"
""")
    code = ("import sys; sys.modules['CoolProp'] = None; sys.modules['CoolProp.CoolProp'] = None; "
            "from thrustgraph.cli import main; sys.exit(main(['run', 'm.toml']))")
    # an empty table cache: the tabulated properties would have to be built from CoolProp
    env = dict(os.environ, THRUSTGRAPH_CACHE_DIR=str(tmp_path / "empty-cache"))
    p = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, env=env)
    assert p.returncode == 2
    msg = p.stderr + p.stdout
    assert "components.tank.equation_of_state" in msg and "the real-gas tank 'tank'" in msg
    assert "CoolProp, which is not installed" in msg and "equation_of_state = \"ideal\"" in msg


# --- the self-pressurising tank -------------------------------------------------------------------------

def cartridge_model(*, outlet="liquid-first", mass="8 g", volume="12 mL", T="20 degC", end="2 s", extra="",
                    interval="0.01 s", d="1 mm"):
    return model_from_toml(f"""
        flow_paths = ["cartridge -> orifice -> outside"]
        [launch]
        mount = "held"
        [run]
        end_time = "{end}"
        output_interval = "{interval}"
        rtol = 1e-9
        atol = 1e-12
        [environment.medium]
        kind = "still-air"
        [components.stand]
        kind = "airframe"
        dry_mass = "100 g"
        [components.cartridge]
        kind = "self-pressurising-tank"
        fluid = "CarbonDioxide"
        volume = "{volume}"
        propellant_mass = "{mass}"
        temperature = "{T}"
        outlet = "{outlet}"
        {extra}
        [components.orifice]
        kind = "convergent-nozzle"
        diameter = "{d}"
        discharge_coefficient = 0.8
        [components.outside]
        kind = "surroundings"
    """)


def test_co2_saturation_pressure_at_20_c():
    # CO2 at 20 C: p_sat = 5.7291 MPa (fluidtool.com CO2 chart from CoolProp, 5729.1 kPa; CoolProp 8.0.0 5.72905;
    # NIST WebBook 5.7291 MPa, from memory): references.md section 8.
    r = integrate(cartridge_model(end="0.01 s"))
    assert r.signals["cartridge.pressure"][0] == pytest.approx(5.7291e6, rel=2e-5)
    st = CoolProp.AbstractState("HEOS", "CarbonDioxide")
    st.update(CoolProp.QT_INPUTS, 0.0, 293.15)
    assert r.signals["cartridge.pressure"][0] == pytest.approx(st.p(), rel=1e-9)


def test_cartridge_liquid_then_vapour_cools_as_it_boils_and_conserves_energy():
    r = integrate(cartridge_model(end="1 s", interval="0.002 s"))
    names = [e.name for e in r.events]
    assert names.index("liquid exhausted") < len(names)
    t_dry = next(e.t for e in r.events if e.name == "liquid exhausted")
    phases = [p.name for p in r.phases]
    assert phases[:2] == ["liquid thrust", "gas thrust"]
    T = r.signals["cartridge.temperature"]
    p = r.signals["cartridge.pressure"]
    liquid = r.t < t_dry
    # the contents cool while liquid leaves and boils, and p = p_sat(T) throughout (CoolProp two-phase)
    assert T[liquid][-1] < T[0] - 10.0
    st = CoolProp.AbstractState("HEOS", "CarbonDioxide")
    for k in np.flatnonzero(liquid)[::10]:
        st.update(CoolProp.QT_INPUTS, 0.0, T[k])
        assert p[k] == pytest.approx(st.p(), rel=1e-9)
    # energy: U(t) - U(0) = -integral of mdot h_out dt (adiabatic), over the liquid phase (trapezoid rule)
    U = r.signals["cartridge.internal_energy"]
    flux = r.signals["orifice.mass_flow"] * r.signals["cartridge.outflow_enthalpy"]
    sel = liquid
    lost = trapezoid(flux[sel], r.t[sel])
    assert (U[sel][-1] - U[0]) == pytest.approx(-lost, rel=2e-4)
    assert abs(r.audit.mass_relative) < 1e-12 and r.audit.momentum_relative < 1e-9


def test_vapour_outlet_boils_the_liquid_and_cools_faster():
    # With the outlet above the liquid only vapour leaves; the liquid boils to replace it and the contents cool
    # several times faster per gram expelled than when liquid leaves (latent heat of the vapour drawn off).
    liq = integrate(cartridge_model(outlet="liquid-first", end="0.1 s", interval="0.01 s"))
    vap = integrate(cartridge_model(outlet="vapour", end="0.1 s", interval="0.01 s"))
    assert [p.name for p in vap.phases][0] == "gas thrust"

    def cooling_per_gram(r):
        return (r.signals["cartridge.temperature"][0] - r.signals["cartridge.temperature"][-1]) / \
            (r.signals["cartridge.propellant_mass"][0] - r.signals["cartridge.propellant_mass"][-1]) / 1e3
    assert cooling_per_gram(vap) > 3 * cooling_per_gram(liq)
    assert vap.signals["cartridge.liquid_mass"][-1] > 0.0          # still boiling


def test_cartridge_bad_input():
    with pytest.raises(ModelError, match=r"components.cartridge.propellant_mass: 10 g of CarbonDioxide would fill "
                                         r"the 12 mL tank with liquid"):
        parse_model(cartridge_model(mass="10 g"))
    with pytest.raises(ModelError, match=r"components.cartridge.temperature: CarbonDioxide is a saturated liquid"):
        parse_model(cartridge_model(T="40 degC"))
    with pytest.raises(ModelError, match=r"components.cartridge.fluid: CoolProp does not know the fluid"):
        parse_model(cartridge_model().set("components.cartridge.fluid", "Dilithium"))


def test_real_gas_tanks_over_arrays_of_designs_equal_coolprop_called_per_design():
    """The real-gas tank and the self-pressurising tank built over arrays of designs (an ensemble) report, for
    every design, the pressure CoolProp's own PropsSI gives for that design's state alone, and the expansion
    exponent and temperature rate of the same tank built for that one design (floats)."""
    from CoolProp.CoolProp import PropsSI

    from thrustgraph.kinds.component import Ambient
    from thrustgraph.kinds.parameters import parse_params
    from thrustgraph.base.xp import array_ops, scalar_ops
    from tg_gastanks import GasTank, SelfPressurisingTank

    amb = Ambient(101325.0, 293.15, 1.2)
    vol = np.array([0.5e-3, 1e-3, 2e-3, 4e-3])
    gauge = np.array([30e5, 80e5, 150e5, 199e5])
    base = parse_params(GasTank.parameters, {"volume": "1 L", "gauge_pressure": "100 bar", "equation_of_state":
                                             "coolprop", "temperature": "300 K", "properties": "direct"},
                        where="components.t", params_class=GasTank.params_class())
    p = dataclasses.replace(base, volume=vol, gauge_pressure=gauge)
    fns = GasTank.build_volume(p, 0, array_ops, amb)
    m0, T0 = GasTank.initial_state(p, amb)
    s = [m0 * 0.7, np.array([260.0, 280.0, 300.0, 240.0])]
    pg, T, rho, n_exp, R_eff, phase, head = fns.outlet(s, 0)
    dT = fns.derivs(s, 0, np.full(4, 0.01))[1]
    for k in range(4):
        # Lemmon & Span / Span et al. (2000) nitrogen through CoolProp, one call per design
        assert pg[k] == PropsSI("P", "Dmass", s[0][k] / vol[k], "T", s[1][k], N2)
        one = dataclasses.replace(base, volume=float(vol[k]), gauge_pressure=float(gauge[k]))
        f1 = GasTank.build_volume(one, 0, scalar_ops, amb)
        s1 = [float(s[0][k]), float(s[1][k])]
        assert n_exp[k] == f1.outlet(s1, 0)[3]
        assert dT[k] == f1.derivs(s1, 0, 0.01)[1]

    cart = parse_params(SelfPressurisingTank.parameters, {"volume": "12 mL", "propellant_mass": "8 g"},
                        where="components.c", params_class=SelfPressurisingTank.params_class())
    fns = SelfPressurisingTank.build_volume(cart, 0, array_ops, amb)
    s = [np.array([8e-3, 6e-3, 3e-3]), np.array([293.15, 280.0, 270.0])]
    sig = fns.signals(s, np.array([0, 0, 1]))
    for k in range(3):
        # Span & Wagner (1996) CO2 through CoolProp: saturation pressure at the contents' temperature
        assert sig["pressure"][k] == pytest.approx(PropsSI("P", "T", s[1][k], "Q", 1.0, "CarbonDioxide"), rel=1e-12)
