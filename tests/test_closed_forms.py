"""Flights against closed-form solutions and published formulas (agreement <= 1e-6 relative).

Sources named beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from thrustgraph import ModelError, integrate
from conftest import model_from_toml

G0 = 9.80665  # standard gravity, exact (3rd CGPM 1901)


def jet_vehicle(*, g: float, mount: str, m_dry=1.0, m_prop=1.0, mdot=0.1, ve=1000.0, end="20 s", extra=""):
    return model_from_toml(f"""
        flow_paths = ["motor -> outside"]
        [launch]
        mount = "{mount}"
        elevation = "90 deg"
        [run]
        end_time = "{end}"
        [environment.medium]
        kind = "vacuum"
        [environment.gravity]
        kind = "uniform-gravity"
        g = "{g} m/s^2"
        [components.body]
        kind = "airframe"
        dry_mass = "{m_dry} kg"
        [components.motor]
        kind = "prescribed-jet"
        programme = "constant-flow"
        propellant_mass = "{m_prop} kg"
        mass_flow = "{mdot} kg/s"
        exhaust_velocity = "{ve} m/s"
        [components.outside]
        kind = "surroundings"
        {extra}
    """)


def test_rocket_equation_free_space():
    # Tsiolkovsky: dv = ve ln(m0/mf); ve = 1000 m/s, m0/mf = 2 -> 693.147 m/s
    # (Sutton & Biblarz, Rocket Propulsion Elements, ch. 4; /work/shared/references.md section 3).
    r = integrate(jet_vehicle(g=0.0, mount="free"))
    dv = 1000.0 * math.log(2.0)
    assert r.summary["max_speed"] == pytest.approx(dv, rel=1e-6)
    assert abs(r.signals["speed"][-1] - 693.147) < 1e-3
    burn = [p for p in r.phases if p.name == "jet thrust"][0]
    assert burn.duration == pytest.approx(10.0, rel=1e-9)
    assert abs(r.audit.mass_relative) <= 1e-9
    assert r.audit.momentum_relative <= 1e-7


def test_constant_thrust_vertical_ascent_in_uniform_gravity():
    # Vertical flight without drag at constant thrust and mass flow (Sutton & Biblarz, Rocket Propulsion
    # Elements, ch. 4, "gravity-free/with gravity" burnout velocity and height; equation numbers from memory):
    #   v_b = ve ln(m0/mf) - g t_b
    #   h_b = ve [t_b + (mf/mdot) ln(mf/m0)] - g t_b^2 / 2,   apogee = h_b + v_b^2 / (2 g)
    m0, mf, mdot, ve = 2.0, 1.0, 0.1, 1000.0
    tb = (m0 - mf) / mdot
    vb = ve * math.log(m0 / mf) - G0 * tb
    hb = ve * (tb + (mf / mdot) * math.log(mf / m0)) - 0.5 * G0 * tb ** 2
    r = integrate(jet_vehicle(g=G0, mount="guide", end="200 s"))
    t_burn = next(e.t for e in r.events if e.name == "burnout")
    assert t_burn == pytest.approx(tb, rel=1e-9)
    k = np.searchsorted(r.t, t_burn)  # first sample at burnout
    assert r.signals["speed"][k] == pytest.approx(vb, rel=1e-6)
    assert r.signals["altitude"][k] == pytest.approx(hb, rel=1e-6)
    assert r.summary["apogee"] == pytest.approx(hb + vb ** 2 / (2 * G0), rel=1e-6)
    # drag-free fall back to the ground: impact speed from energy, sqrt(2 g h_max)
    assert r.summary["impact_speed"] == pytest.approx(math.sqrt(2 * G0 * r.summary["apogee"]), rel=1e-6)


def test_too_heavy_to_lift_off_says_so():
    # thrust 100 N against a weight of at least 20 kg * g = 196 N: it never leaves the guide
    r = integrate(jet_vehicle(g=G0, mount="guide", m_dry=20.0, end="30 s"))
    assert not r.success
    assert "did not leave the launch guide" in r.message
    assert np.all(r.signals["altitude"] == 0.0)


def drain_tank(cd: float):
    return model_from_toml(f"""
        flow_paths = ["tank -> orifice -> outside"]
        [launch]
        mount = "held"
        [run]
        end_time = "1000 s"
        output_interval = "1 s"
        [components.stand]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.tank]
        kind = "pressurised-liquid-tank"
        volume = "{math.pi / 4 * 2.5} m^3"
        fill = 0.8
        gauge_pressure = "0 bar"
        expansion_exponent = 0
        bore = "1 m"
        [components.orifice]
        kind = "convergent-nozzle"
        diameter = "5 cm"
        discharge_coefficient = {cd}
        # Torricelli's law is the large-tank limit (the water at rest in the tank): no velocity of approach
        approach_velocity = false
        [components.outside]
        kind = "surroundings"
    """)


@pytest.mark.parametrize("cd, expected", [(1.0, 255.46), (0.61, 418.79)])
def test_torricelli_draining_time(cd, expected):
    # Draining time of a cylindrical tank through a bottom orifice, t = (A_t / (Cd A_o)) sqrt(2 h0 / g),
    # Torricelli's law v = sqrt(2 g h) (any fluid-mechanics text, e.g. White, Fluid Mechanics, draining-tank
    # example; values computed in /work/shared/references.md section 7: D = 1 m, d = 5 cm, h0 = 2 m).
    r = integrate(drain_tank(cd))
    t_closed = (1.0 / 0.05) ** 2 / cd * math.sqrt(2 * 2.0 / G0)
    assert t_closed == pytest.approx(expected, abs=0.01)
    # the level follows h(t) = (sqrt(h0) - (Cd Ao/At) sqrt(g/2) t)^2 (integrated Torricelli law)
    k = cd * (0.05 / 1.0) ** 2 * math.sqrt(G0 / 2)
    sel = r.t < 0.95 * t_closed
    h_closed = (math.sqrt(2.0) - k * r.t[sel]) ** 2
    assert np.max(np.abs(r.signals["tank.liquid_height"][sel] / h_closed - 1)) < 1e-6
    # The level reaches zero tangentially (h ~ (t_e - t)^2), so the end time is only as precise as
    # sqrt(atol / C): about 1e-6 relative at the default atol, far better with a tighter one.
    t_sim = next(e.t for e in r.events if e.component == "tank")
    assert t_sim == pytest.approx(t_closed, rel=3e-6)
    r_tight = integrate(drain_tank(cd), atol=1e-14)
    t_tight = next(e.t for e in r_tight.events if e.component == "tank")
    assert t_tight == pytest.approx(t_closed, rel=1e-7)
    # Torricelli exit speed at the start: sqrt(2 g h0) = 6.2631 m/s (references.md section 7)
    assert r.signals["orifice.exit_velocity"][0] == pytest.approx(math.sqrt(2 * G0 * 2.0), rel=1e-9)
    assert abs(r.audit.mass_relative) <= 1e-9


def static_bottle(gauge: str, fill=0.3, d="22 mm", cd=1.0, head="false", medium='kind = "still-air"',
                  approach="false", bore="100 mm"):
    # approach = false: the published jet formulas below are the limit of a nozzle much narrower than the
    # vessel (the liquid at rest in the bore); the velocity of approach is checked on its own further down
    return model_from_toml(f"""
        flow_paths = ["bottle -> neck -> outside"]
        [launch]
        mount = "held"
        [run]
        end_time = "2 s"
        output_interval = "1 ms"
        [environment.medium]
        {medium}
        [components.stand]
        kind = "airframe"
        dry_mass = "0.1 kg"
        [components.bottle]
        kind = "pressurised-liquid-tank"
        volume = "2 L"
        fill = {fill}
        gauge_pressure = "{gauge}"
        liquid_density = "998.2 kg/m^3"
        inertial_head = {head}
        bore = "{bore}"
        [components.neck]
        kind = "convergent-nozzle"
        diameter = "{d}"
        discharge_coefficient = {cd}
        approach_velocity = {approach}
        [components.outside]
        kind = "surroundings"
    """)


@pytest.mark.parametrize("bar, v, thrust", [(1, 14.155, 76.0), (4, 28.310, 304.1), (6, 34.672, 456.2)])
def test_bernoulli_exit_velocity_and_ideal_water_jet_thrust(bar, v, thrust):
    # v = sqrt(2 dp / rho) and F = 2 A dp for Cd = 1 (Bernoulli; WJTA Water Jet Conference proceedings p.181,
    # T = (pi/2) D^2 P; values in /work/shared/references.md section 7 for d = 22 mm, rho = 998.2).
    r = integrate(static_bottle(f"{bar} bar"))
    assert r.signals["neck.exit_velocity"][0] == pytest.approx(math.sqrt(2 * bar * 1e5 / 998.2), rel=1e-12)
    assert r.signals["neck.exit_velocity"][0] == pytest.approx(v, abs=5e-4)
    assert r.signals["thrust"][0] == pytest.approx(thrust, abs=0.05)
    assert r.signals["thrust"][0] == pytest.approx(2 * math.pi / 4 * 0.022 ** 2 * bar * 1e5, rel=1e-12)


@pytest.mark.parametrize("bore, d, cd", [(0.100, 0.022, 1.0), (0.040, 0.022, 1.0), (0.030, 0.018, 0.9)])
def test_velocity_of_approach_from_the_bore(bore, d, cd):
    # Bernoulli from the bore (area A_b, speed v_b) to the jet (area Cd A, speed v) with continuity
    # v_b A_b = v Cd A: v = sqrt(2 dp / (rho (1 - beta^2))), beta = Cd A / A_b (F. M. White, Fluid Mechanics,
    # the Bernoulli obstruction-meter theory, V2 = sqrt(2 dp / (rho (1 - beta^4))) with beta the diameter ratio;
    # closed form). The thrust is then rho Cd A v^2 = 2 Cd A dp / (1 - beta^2); off, the narrow-nozzle limit.
    dp, rho = 4e5, 998.2
    beta = cd * (d / bore) ** 2
    on = integrate(static_bottle("4 bar", d=f"{d * 1e3} mm", cd=cd, approach="true", bore=f"{bore * 1e3} mm"))
    off = integrate(static_bottle("4 bar", d=f"{d * 1e3} mm", cd=cd, approach="false", bore=f"{bore * 1e3} mm"))
    v = math.sqrt(2 * dp / (rho * (1 - beta ** 2)))
    assert on.signals["neck.exit_velocity"][0] == pytest.approx(v, rel=1e-12)
    assert on.signals["thrust"][0] == pytest.approx(2 * cd * math.pi / 4 * d * d * dp / (1 - beta ** 2), rel=1e-12)
    assert off.signals["neck.exit_velocity"][0] == pytest.approx(math.sqrt(2 * dp / rho), rel=1e-12)
    # the water runs out sooner with the factor: the flow is larger by 1 / sqrt(1 - beta^2) at every pressure
    t_on = next(e.t for e in on.events if e.name == "liquid exhausted")
    t_off = next(e.t for e in off.events if e.name == "liquid exhausted")
    assert t_on == pytest.approx(t_off * math.sqrt(1 - beta ** 2), rel=1e-6)


def test_a_nozzle_as_wide_as_the_bore_is_refused():
    from thrustgraph.models.model import parse_model
    with pytest.raises(ModelError, match=r"components.neck: its jet area .* is 0.9 of the bore of 'bottle'.*"
                                         r"approach_velocity = false"):
        parse_model(static_bottle("4 bar", d="30 mm", cd=0.9, approach="true", bore="30 mm"))
    parse_model(static_bottle("4 bar", d="30 mm", cd=0.9, approach="false", bore="30 mm"))   # off: accepted


def test_static_water_impulse_matches_quasi_steady_quadrature():
    # Held bottle, no head: the water phase has the exact quasi-steady solution (references.md section 6):
    # I = integral sqrt(2 rho (p - pa)) * sqrt(2 (p - pa)/rho) ... per unit volume: dI = rho v^2 A dt, dV = A v dt
    # -> I = integral_{Va0}^{V} rho v dV = integral sqrt(2 rho (p(V) - pa)) dV,  p = p0 (Va0/Va)^n
    # duration t = integral dV / (A sqrt(2 (p - pa) / rho)).
    gauge, pa, rho, n = 5e5, 101325.0, 998.2, 1.4
    V, fill, d = 0.002, 0.3, 0.022
    A = math.pi * d * d / 4
    p0, va0 = pa + gauge, V * (1 - fill)
    p = lambda va: p0 * (va0 / va) ** n
    I_exact = quad(lambda va: math.sqrt(2 * rho * (p(va) - pa)), va0, V, epsabs=0, epsrel=1e-13)[0]
    t_exact = quad(lambda va: 1 / (A * math.sqrt(2 * (p(va) - pa) / rho)), va0, V, epsabs=0, epsrel=1e-13)[0]
    r = integrate(static_bottle("5 bar", fill=fill, d="22 mm"))
    t_liq = next(e.t for e in r.events if e.name == "liquid exhausted")
    assert t_liq == pytest.approx(t_exact, rel=1e-6)
    # impulse from the stand reaction; integrate the dense samples with Simpson's rule over the liquid phase, up
    # to the sample at t_liq taken before the jump (the output repeats that time with the gas phase's thrust)
    from scipy.integrate import simpson
    end = int(np.searchsorted(r.t, t_liq, side="left")) + 1
    I_sim = simpson(r.signals["thrust"][:end], x=r.t[:end])
    assert I_sim == pytest.approx(I_exact, rel=1e-5)


def gas_vessel(medium: str, gauge: str, d: float, T="300 K", end="0.5 s"):
    return model_from_toml(f"""
        flow_paths = ["vessel -> throat -> outside"]
        [launch]
        mount = "held"
        [run]
        end_time = "{end}"
        [environment.medium]
        {medium}
        [components.stand]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.vessel]
        kind = "pressurised-liquid-tank"
        volume = "1 L"
        fill = 0
        gauge_pressure = "{gauge}"
        expansion_exponent = 1.4
        gas_gamma = 1.4
        gas_constant = "287.05 J/kg/K"
        gas_temperature = "{T}"
        [components.throat]
        kind = "convergent-nozzle"
        diameter = "{d} m"
        discharge_coefficient = 1.0
        [components.outside]
        kind = "surroundings"
    """)


def test_choked_mass_flow_and_critical_pressure_ratio():
    # p*/p0 = 0.528282 for gamma = 1.4 (NACA Report 1135, 1953, Table I, M = 1), and the choked mass flow
    # mdot = A* p0 / sqrt(T0) sqrt(gamma/R) (2/(gamma+1))^((gamma+1)/(2(gamma-1))): worked example A of
    # /work/shared/references.md section 2 (air, A* = 1 cm^2, p0 = 1.000 MPa, T0 = 300 K) gives 0.233336 kg/s.
    d = math.sqrt(4e-4 / math.pi)
    r = integrate(gas_vessel('kind = "vacuum"', "1 MPa", d, end="0.01 s"))
    assert r.signals["throat.mass_flow"][0] == pytest.approx(0.233336, abs=5e-7)  # 6 printed figures
    exact = 1e-4 * 1e6 / math.sqrt(300.0) * math.sqrt(1.4 / 287.05) * (2 / 2.4) ** (2.4 / 0.8)
    assert r.signals["throat.mass_flow"][0] == pytest.approx(exact, rel=1e-12)
    assert r.signals["throat.exit_pressure"][0] / r.signals["vessel.pressure"][0] == pytest.approx(0.528282, rel=1e-6)


def test_adiabatic_blowdown_closed_form():
    # Adiabatic vessel emptying through a choked orifice (references.md section 2, derived from the mass balance
    # and the isentropic vessel): p/p0 = (1 + (g-1) t / (2 tau))^(-2g/(g-1)),
    # tau = V / (Cd A* sqrt(g R T0) (2/(g+1))^((g+1)/(2(g-1)))).  In vacuum the flow stays choked.
    gam, R, T0, V = 1.4, 287.05, 300.0, 0.001
    d = 0.002
    A = math.pi * d * d / 4
    tau = V / (A * math.sqrt(gam * R * T0) * (2 / (gam + 1)) ** ((gam + 1) / (2 * (gam - 1))))
    r = integrate(gas_vessel('kind = "vacuum"', "10 bar", d, end="2 s"))
    t = r.t
    p_closed = 1e6 * (1 + (gam - 1) * t / (2 * tau)) ** (-2 * gam / (gam - 1))
    assert np.max(np.abs(r.signals["vessel.pressure"] / p_closed - 1)) < 1e-6
    T_closed = T0 * (p_closed / 1e6) ** ((gam - 1) / gam)
    assert np.max(np.abs(r.signals["vessel.temperature"] / T_closed - 1)) < 1e-6


def test_unchoked_blowdown_ends_at_ambient():
    # Into still air the flow unchokes below p0/pa = 1/0.528282 and stops at ambient pressure (NACA 1135).
    r = integrate(gas_vessel('kind = "still-air"', "3 bar", 0.004, end="5 s"))
    names = [e.name for e in r.events]
    assert "gas exhausted" in names
    assert r.signals["vessel.pressure"][-1] == pytest.approx(101325.0, rel=1e-6)
    pe = r.signals["throat.exit_pressure"]
    pv = r.signals["vessel.pressure"]
    choked = pv * 0.528282 > 101325.0 * (1 + 1e-9)
    assert np.allclose(pe[choked] / pv[choked], 0.528282, rtol=1e-5)
    assert np.allclose(pe[~choked & (pv > 101325.0)], 101325.0, rtol=1e-12)
