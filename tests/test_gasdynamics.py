"""Isentropic relations, normal shock, thrust coefficient, cold-gas specific impulse and the converging-diverging
nozzle, against published tables and closed forms (source beside each check)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from thrustgraph import integrate
from thrustgraph.kinds.component import scalar_ops
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import parse_params
from tg_gasdynamics import ConvergingDivergingNozzle
from tg_gasdynamics.isentropic import (area_ratio, density_ratio, mach_from_area_ratio, mass_flux_factor,
                                       normal_shock, pressure_ratio, temperature_ratio)
from tg_gasdynamics.performance import divergence_factor, ideal_specific_impulse, thrust_coefficient
from conftest import model_from_toml

R_N2 = 8314.462618 / 28.0134   # J/(kg K): CODATA 2018 R and the IUPAC molar mass of N2 (from memory)


# NACA Report 1135 (1953), Table I, gamma = 1.4: (M, p/p0, T/T0, rho/rho0, A/A*) as listed in
# /work/shared/references.md section 1a (5 figures; rows 0.1, 0.5, 0.9, 1.0 confirmed there in a Munson-type
# appendix table and Matthews, Aeronautical Engineer's Data Book, Tables A4.1-A4.2; rows 2.0 and 3.0 from NACA 1135
# via a secondary note; the rest computed from the formula).
NACA_1135_TABLE_I = [
    (0.1, 0.99303, 0.99800, 0.99502, 5.8218),
    (0.3, 0.93947, 0.98232, 0.95638, 2.0351),
    (0.5, 0.84302, 0.95238, 0.88517, 1.3398),
    (0.9, 0.59126, 0.86059, 0.68704, 1.0089),
    (1.0, 0.52828, 0.83333, 0.63394, 1.0000),
    (1.5, 0.27240, 0.68966, 0.39498, 1.1762),
    (2.0, 0.12780, 0.55556, 0.23005, 1.6875),
    (3.0, 0.027224, 0.35714, 0.076226, 4.2346),
    (5.0, 0.0018900, 0.16667, 0.011340, 25.000),
]


@pytest.mark.parametrize("M, p, T, rho, A", NACA_1135_TABLE_I)
def test_isentropic_ratios_match_naca_1135_table(M, p, T, rho, A):
    assert pressure_ratio(M, 1.4) == pytest.approx(p, rel=1e-4)
    assert temperature_ratio(M, 1.4) == pytest.approx(T, rel=1e-4)
    assert density_ratio(M, 1.4) == pytest.approx(rho, rel=1e-4)
    assert area_ratio(M, 1.4) == pytest.approx(A, rel=1e-4)


# Both roots of the area relation for gamma = 1.4 (references.md section 1b: brentq, and for A/A* = 2 the
# secondary note quoting NACA 1135: 0.3059 / 2.1972).
@pytest.mark.parametrize("ratio, sub, sup", [(1.5, 0.430262, 1.854124), (2.0, 0.305904, 2.197198),
                                             (4.0, 0.146548, 2.940179), (10.0, 0.057987, 3.922552),
                                             (25.0, 0.023156, 5.000000)])
def test_both_roots_of_the_area_relation(ratio, sub, sup):
    ms = mach_from_area_ratio(ratio, 1.4, "subsonic")
    mp = mach_from_area_ratio(ratio, 1.4, "supersonic")
    assert ms == pytest.approx(sub, abs=2e-6) and ms < 1.0
    assert mp == pytest.approx(sup, abs=2e-6) and mp > 1.0
    assert area_ratio(ms, 1.4) == pytest.approx(ratio, rel=1e-13)
    assert area_ratio(mp, 1.4) == pytest.approx(ratio, rel=1e-13)
    with pytest.raises(ValueError, match="below 1"):
        mach_from_area_ratio(0.9, 1.4)


@pytest.mark.parametrize("M1, M2, p21, p0ratio", [(1.5, 0.7011, 2.4583, 0.9298), (2.0, 0.5774, 4.5000, 0.7209),
                                                  (3.0, 0.4752, 10.333, 0.3283)])
def test_normal_shock_matches_naca_1135_table_ii(M1, M2, p21, p0ratio):
    # NACA Report 1135 (1953), Table II (normal shock, gamma = 1.4); 4-5 printed figures (values from memory,
    # reproduced by the relations of the same report).
    m2, r, p0 = normal_shock(M1, 1.4)
    assert m2 == pytest.approx(M2, abs=1e-4)
    assert r == pytest.approx(p21, rel=1e-4)
    assert p0 == pytest.approx(p0ratio, abs=1e-4)


# Vacuum thrust coefficients of ideal nozzles: Sutton & Biblarz, Rocket Propulsion Elements, ch. 3, the C_F
# equation (Eq. 3-30 of the 7th/8th ed.), values from references.md section 3 (4 figures).
@pytest.mark.parametrize("gamma, eps, cf", [(1.4, 1.0, 1.2679), (1.4, 2.0, 1.4576), (1.4, 5.0, 1.5861),
                                            (1.4, 10.0, 1.6469), (1.4, 25.0, 1.7010), (1.4, 50.0, 1.7292),
                                            (1.4, 100.0, 1.7498), (1.3, 10.0, 1.6891), (1.3, 50.0, 1.8036),
                                            (1.2, 25.0, 1.8424)])
def test_vacuum_thrust_coefficient(gamma, eps, cf):
    assert thrust_coefficient(gamma, eps, 0.0) == pytest.approx(cf, abs=6e-5)


def test_thrust_coefficient_tends_to_its_vacuum_limit():
    # Sutton's C_F charts tend to 1.8116 for gamma = 1.4 as the area ratio grows (references.md section 3, M + C):
    # the momentum term alone at p2 -> 0.
    g = 1.4
    limit = math.sqrt(2 * g * g / (g - 1) * (2 / (g + 1)) ** ((g + 1) / (g - 1)))
    assert limit == pytest.approx(1.8116, abs=1e-4)
    cf = [thrust_coefficient(g, e, 0.0) for e in (10.0, 100.0, 1e4)]
    assert cf[0] < cf[1] < cf[2] < limit and limit - cf[2] < 0.01


def test_divergence_factor_of_a_15_degree_cone():
    # lambda = (1 + cos alpha)/2 (Malina 1940, as given in Sutton & Biblarz ch. 3; from memory): 0.9830 at 15 deg.
    assert divergence_factor(math.radians(15.0)) == pytest.approx(0.98296, abs=1e-5)


def test_cold_gas_nitrogen_specific_impulse():
    # Sutton & Biblarz 7th ed. Table 7-3 conditions: vacuum, area ratio 50, 20 C (references.md section 4). The
    # ideal values computed at those conditions are 76.0 s (area ratio 50) and 79.6 s (infinite expansion); the
    # recalled published theoretical values are 76 (Sutton) and 80 (Nguyen et al., IAC-02-S.2.07) (memory).
    isp50 = ideal_specific_impulse(1.4, R_N2, 293.15, 50.0)
    assert isp50 == pytest.approx(76.0, abs=0.05)
    isp_inf = math.sqrt(2 * 1.4 * R_N2 * 293.15 / 0.4) / 9.80665
    assert isp_inf == pytest.approx(79.6, abs=0.05)
    # the nozzle kind gives the same thrust per mass flow in vacuum
    f = nozzle(throat=0.001, eps=50.0, half_angle=0.0, cd=1.0)
    up = (20e5, 293.15, 20e5 / (R_N2 * 293.15), 1.4, R_N2, 0.0, 0.0)
    mdot, ve, pe, Ae, _c = f.flow(up, 0.0, 0)
    assert (mdot * ve + pe * Ae) / mdot / 9.80665 == pytest.approx(isp50, rel=1e-12)
    # and the choked flux is the NACA 1135 one
    assert mdot == pytest.approx(math.pi * 0.001 ** 2 / 4 * 20e5 * mass_flux_factor(1.4) / math.sqrt(R_N2 * 293.15),
                                 rel=1e-14)


def nozzle(*, throat=0.002, eps=4.0, half_angle=15.0, cd=1.0, psi=0.4):
    p = parse_params(ConvergingDivergingNozzle.parameters,
                     {"throat_diameter": f"{throat} m", "area_ratio": eps, "half_angle": f"{half_angle} deg",
                      "discharge_coefficient": cd, "separation_pressure_ratio": psi},
                     where="components.n", params_class=ConvergingDivergingNozzle.params_class())
    ConvergingDivergingNozzle.check(p, "components.n")
    return ConvergingDivergingNozzle.build_flow(p, scalar_ops)


def test_cd_nozzle_regimes_follow_the_back_pressure():
    # Regime boundaries from the area relation and the normal-shock relations (NACA 1135), area ratio 4, gamma 1.4:
    # pr1 = p/p0 at the subsonic root (0.985111), pr3 at the supersonic root (0.029787, references.md section 1b),
    # pr2 = pr3 * (p2/p1 at M = 2.940179).
    f = nozzle(eps=4.0, half_angle=0.0)
    R, T0, p0 = 287.05, 300.0, 10e5
    up = (p0, T0, p0 / (R * T0), 1.4, R, 0.0, 0.0)
    pr1, pr3 = 0.985111, 0.029787
    pr2 = pr3 * normal_shock(2.940179, 1.4)[1]
    At = math.pi * 0.002 ** 2 / 4
    choked = At * p0 * mass_flux_factor(1.4) / math.sqrt(R * T0)

    def regime(pa):
        return f.signals(up, pa, 0)["regime"]
    assert regime(0.0) == 4 and regime(0.5 * pr3 * p0) == 4          # underexpanded
    assert regime(2.0 * pr3 * p0) == 3                                  # overexpanded, full-flowing
    assert regime(0.5 * (pr2 + pr1) * p0) == 2                          # normal shock inside
    assert regime(0.995 * p0) == 1 and regime(p0) == 0                  # subsonic; no flow
    # flow is choked in regimes 2-4 and falls below choking only above pr1
    for pa in (0.0, 2.0 * pr3 * p0, 0.5 * (pr2 + pr1) * p0, 0.98 * p0):
        assert f.flow(up, pa, 0)[0] == pytest.approx(choked, rel=1e-12)
    assert f.flow(up, 0.99 * p0, 0)[0] < choked
    # continuous through pr1 (subsonic <-> shock at the throat) and, with no divergence loss, through pr2
    # (momentum is conserved across the normal shock standing at the exit)
    for boundary in (pr1 * p0, pr2 * p0):
        lo, hi = f.flow(up, boundary * (1 - 1e-9), 0), f.flow(up, boundary * (1 + 1e-9), 0)
        thrust = [m * v + (pe - boundary) * A for m, v, pe, A, _ in (lo, hi)]
        assert thrust[0] == pytest.approx(thrust[1], rel=1e-6)
        assert lo[0] == pytest.approx(hi[0], rel=1e-6)


def test_cd_nozzle_shock_position_and_separation_flag():
    # With the shock inside, the exit is subsonic at ambient pressure; the shock stands where its total-pressure
    # loss matches the exit (NACA 1135 normal-shock relations). Check by recomputing the exit from the shock
    # position found: isentropic to A_s, normal shock, isentropic to A_e with the new A* = A_t p01/p02.
    f = nozzle(eps=4.0, half_angle=0.0)
    R, T0, p0 = 287.05, 300.0, 10e5
    up = (p0, T0, p0 / (R * T0), 1.4, R, 0.0, 0.0)
    pa = 0.5 * p0
    sig = f.signals(up, pa, 0)
    As = sig["shock_area_ratio"]
    assert 1.0 < As < 4.0
    M1 = mach_from_area_ratio(As, 1.4, "supersonic")
    M2, _, p0r = normal_shock(M1, 1.4)
    Me = mach_from_area_ratio(4.0 * p0r, 1.4, "subsonic")      # A_e / A*_2 = 4 p02/p01
    assert Me == pytest.approx(sig["exit_mach"], rel=1e-9)
    assert p0 * p0r * pressure_ratio(Me, 1.4) == pytest.approx(pa, rel=1e-9)
    # Summerfield-type criterion (p_e/p_a < 0.4, common practice, from memory): flagged when overexpanded far enough
    pe_full = 0.029787 * p0
    assert f.signals(up, 2.0 * pe_full, 0)["separation"] == 0.0      # p_e/p_a = 0.5
    assert f.signals(up, 3.0 * pe_full, 0)["separation"] == 1.0      # p_e/p_a = 0.33
    assert f.signals(up, 0.5 * pe_full, 0)["separation"] == 0.0      # underexpanded


def test_cd_nozzle_divergence_loss_and_pressure_thrust():
    # F = lambda mdot v_e + (p_e - p_a) A_e (Sutton & Biblarz ch. 3) with lambda = (1 + cos 15 deg)/2
    R, T0, p0 = 287.05, 300.0, 20e5
    up = (p0, T0, p0 / (R * T0), 1.4, R, 0.0, 0.0)
    ideal, cone = nozzle(eps=4.0, half_angle=0.0), nozzle(eps=4.0, half_angle=15.0)
    pa = 101325.0
    mi, vi, pei, Ai, _ = ideal.flow(up, pa, 0)
    mc, vc, pec, Ac, _ = cone.flow(up, pa, 0)
    assert mc == pytest.approx(mi, rel=1e-14) and pec == pytest.approx(pei, rel=1e-14)
    assert vc == pytest.approx(divergence_factor(math.radians(15)) * vi, rel=1e-14)
    cf = (mi * vi + (pei - pa) * Ai) / (p0 * math.pi * 0.002 ** 2 / 4)
    assert cf == pytest.approx(thrust_coefficient(1.4, 4.0, pa / p0), rel=1e-12)


def test_area_ratio_below_one_is_refused():
    with pytest.raises(ModelError) as err:
        nozzle(eps=0.8)
    msg = str(err.value)
    assert "components.n.area_ratio" in msg and "narrower than the throat" in msg and "Fix:" in msg


def test_cd_nozzle_on_a_held_tank_matches_its_flow_function():
    # Flying the nozzle on a stand: the thrust printed is the flow function's, summed with the ledger.
    m = model_from_toml("""
        flow_paths = ["tank -> nozzle -> outside"]
        [launch]
        mount = "held"
        [run]
        end_time = "0.5 s"
        output_interval = "0.1 s"
        [environment.medium]
        kind = "still-air"
        [components.stand]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.tank]
        kind = "gas-tank"
        gas = "air"
        volume = "1 L"
        gauge_pressure = "20 bar"
        temperature = "300 K"
        [components.nozzle]
        kind = "converging-diverging-nozzle"
        throat_diameter = "2 mm"
        area_ratio = 4
        half_angle = "0 deg"
        discharge_coefficient = 1.0
        [components.outside]
        kind = "surroundings"
    """)
    r = integrate(m)
    p0, pa = r.signals["tank.pressure"][0], 101325.0
    cf = thrust_coefficient(1.4, 4.0, pa / p0)
    assert r.signals["nozzle.thrust"][0] == pytest.approx(cf * p0 * math.pi * 0.002 ** 2 / 4, rel=1e-9)
    assert np.all(r.signals["nozzle.regime"] >= 3)
    assert abs(r.audit.mass_relative) < 1e-12 and r.audit.momentum_relative < 1e-9


def test_cd_nozzle_throat_state_is_the_sonic_state_when_choked():
    # Choked: p*/p0 = (2/(g+1))^(g/(g-1)), T*/T0 = 2/(g+1), v* = sqrt(g R T*) (Anderson, Modern Compressible
    # Flow, 3rd ed., 2003, eqs. 3.35-3.36 for the sonic reference state; equation numbers from memory), checked
    # against fluids' P_critical_flow and T_critical_flow (Bell et al., fluids 1.x, compressible module) and the
    # nozzle's own mass flow: mdot = rho* v* A_t with rho* = p*/(R T*) (Cd = 1).
    from fluids import P_critical_flow, T_critical_flow

    for g, R in ((1.4, R_N2), (5.0 / 3.0, 8314.462618 / 39.948), (1.289, 8314.462618 / 44.0095)):
        f = nozzle(eps=4.0, half_angle=15.0)
        T0, p0 = 300.0, 10e5
        up = (p0, T0, p0 / (R * T0), g, R, 0.0, 0.0)
        for pa in (0.0, 0.2e5, 0.7 * p0):           # underexpanded, overexpanded, shock inside: all choked
            sig = f.signals(up, pa, 0)
            assert sig["regime"] >= 2
            assert sig["throat_pressure"] == pytest.approx(P_critical_flow(p0, g), rel=1e-12)
            assert sig["throat_temperature"] == pytest.approx(T_critical_flow(T0, g), rel=1e-12)
            assert sig["throat_temperature"] == pytest.approx(T0 * 2.0 / (g + 1.0), rel=1e-12)
            assert sig["throat_velocity"] == pytest.approx(math.sqrt(g * R * sig["throat_temperature"]), rel=1e-12)
            rho_t = sig["throat_pressure"] / (R * sig["throat_temperature"])
            mdot = f.flow(up, pa, 0).mdot
            assert rho_t * sig["throat_velocity"] * math.pi * 0.002 ** 2 / 4 == pytest.approx(mdot, rel=1e-12)


def test_cd_nozzle_throat_state_of_an_unchoked_nozzle_and_of_a_liquid():
    # Unchoked (a venturi): the throat Mach number satisfies A_e/A_t = A/A*(M_e) / A/A*(M_t) on the subsonic branch
    # (NACA Report 1135, 1953, area relation), p_t and T_t are isentropic at M_t, and the mass flow through the
    # throat equals the exit's (continuity).
    g, R, T0, p0 = 1.4, R_N2, 293.15, 10e5
    f = nozzle(eps=4.0, half_angle=0.0)
    up = (p0, T0, p0 / (R * T0), g, R, 0.0, 0.0)
    sig = f.signals(up, 0.99 * p0, 0)
    assert sig["regime"] == 1.0
    Mt = math.sqrt(2.0 / (g - 1.0) * ((T0 / sig["throat_temperature"]) - 1.0))
    assert 0.0 < Mt < 1.0 and Mt > sig["exit_mach"]
    assert area_ratio(sig["exit_mach"], g) / area_ratio(Mt, g) == pytest.approx(4.0, rel=1e-9)
    assert sig["throat_pressure"] == pytest.approx(p0 * pressure_ratio(Mt, g), rel=1e-12)
    rho_t = sig["throat_pressure"] / (R * sig["throat_temperature"])
    assert rho_t * sig["throat_velocity"] * math.pi * 0.002 ** 2 / 4 == pytest.approx(f.flow(up, 0.99 * p0, 0).mdot,
                                                                                      rel=1e-9)
    # no flow: the upstream state at rest
    rest = f.signals(up, p0, 0)
    assert (rest["throat_pressure"], rest["throat_temperature"], rest["throat_velocity"]) == (p0, T0, 0.0)
    # a liquid: continuity v_t = eps v_e, Bernoulli p_t = p0 - rho v_t^2 / 2 (incompressible, no loss)
    liq = f.signals((3e5, T0, 1000.0, g, R, 1.0, 0.0), 1e5, 0)
    v_e = math.sqrt(2.0 * 2e5 / 1000.0)
    assert liq["throat_velocity"] == pytest.approx(4.0 * v_e, rel=1e-12)
    assert liq["throat_pressure"] == pytest.approx(3e5 - 0.5 * 1000.0 * (4.0 * v_e) ** 2, rel=1e-12)


def test_cd_nozzle_throat_signals_over_arrays_equal_single_designs():
    # One definition: the throat signals of designs in different regimes and phases, flown as one array, equal
    # those of each design alone.
    from thrustgraph.base.xp import array_ops

    p = parse_params(ConvergingDivergingNozzle.parameters, {"throat_diameter": "2 mm", "area_ratio": 4},
                     where="components.n", params_class=ConvergingDivergingNozzle.params_class())
    fa = ConvergingDivergingNozzle.build_flow(p, array_ops)
    f1 = ConvergingDivergingNozzle.build_flow(p, scalar_ops)
    T0, p0 = 300.0, 10e5
    rho = np.array([p0 / (R_N2 * T0)] * 4 + [1000.0])
    phase = np.array([0.0, 0.0, 0.0, -1.0, 1.0])
    pa = np.array([1e5, 0.99 * p0, 0.7 * p0, 1e5, 1e5])
    sig = fa.signals((np.full(5, p0), T0, rho, 1.4, R_N2, phase, 0.0), pa, 0)
    for k in range(5):
        one = f1.signals((p0, T0, float(rho[k]), 1.4, R_N2, float(phase[k]), 0.0), float(pa[k]), 0)
        for key in ("throat_pressure", "throat_temperature", "throat_velocity", "exit_mach"):
            assert sig[key][k] == pytest.approx(one[key], rel=1e-12, abs=1e-12)
