"""The fluid-device demo vehicles in models/: audits, cautions, and their steady states against algebraic balances.

Each vehicle is flown once per module (fixture); the checks compare with algebraic solutions built here from the
same published relations (Bernoulli jets, the ram-drag thrust equation, the hydrostatic head, Darcy-Weisbach).
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import trapezoid
from scipy.optimize import brentq

from thrustgraph import assemble, integrate, load_model
from thrustgraph.balance.balance import Balance
from tg_feeds import froude_efficiency
from tg_vessels import PRESSURE_CAUTIONS

MODELS = Path(__file__).resolve().parents[1] / "models"
FLUID_MODELS = ["cold-gas-track", "cold-gas-free-floater", "water-jet-boat", "hose-fed-hover", "gas-cartridge-cart",
                "twin-nozzle-bottle-rocket"]
STORED_PRESSURE = ["cold-gas-track", "cold-gas-free-floater", "hose-fed-hover", "gas-cartridge-cart",
                   "twin-nozzle-bottle-rocket"]
RHO_W, PA, G0 = 998.2, 101325.0, 9.80665


@pytest.fixture(scope="module")
def flights():
    return {name: integrate(load_model(str(MODELS / f"{name}.toml"))) for name in FLUID_MODELS}


@pytest.mark.parametrize("name", FLUID_MODELS)
def test_every_fluid_vehicle_closes_its_audits(flights, name):
    r = flights[name]
    assert r.success
    assert abs(r.audit.mass_relative) < 1e-9
    assert r.audit.momentum_relative < 1e-8
    assert r.audit.internal_defect < 1e-9


@pytest.mark.parametrize("name", STORED_PRESSURE)
def test_stored_pressure_vehicles_show_the_pressure_vessel_cautions(flights, name):
    cautions = flights[name].cautions
    for c in PRESSURE_CAUTIONS:
        assert c in cautions
    assert any("never a safe working pressure" in c for c in cautions)


def test_cli_runs_a_fluid_model():
    p = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "run", str(MODELS / "twin-nozzle-bottle-rocket.toml")],
                       capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    assert "Closure audits" in p.stdout and "Cautions" in p.stdout and "liquid exhausted" in p.stdout


def _table(v, rows):
    xs, ys = zip(*rows)
    return float(np.interp(v, xs, ys))


def test_water_jet_boat_top_speed_matches_the_algebraic_balance(flights):
    # Steady running: net thrust mdot (v_j - V) (gross jet thrust less the ram drag of the captured water) equals
    # the hull resistance R(V). The jet: 1/2 rho v_j^2 = (1 - K) 1/2 rho V^2 + eta P / Q with Q = Cd A v_j
    # (Bernoulli nozzle, constant-power pump above its shut-off flow), all from the model file.
    K, eta, P, Cd, d = 0.2, 0.6, 1500.0, 0.98, 0.030
    rows = [(0, 0), (1, 4), (2, 14), (3, 30), (4, 52), (5, 80), (6, 120), (8, 230)]
    CdA = Cd * math.pi * d * d / 4

    def jet_speed(V):
        return brentq(lambda vj: 0.5 * RHO_W * vj ** 2 - (1 - K) * 0.5 * RHO_W * V ** 2 - eta * P / (CdA * vj),
                      0.1, 100.0, xtol=1e-14)

    def net(V):
        vj = jet_speed(V)
        return RHO_W * CdA * vj * (vj - V) - _table(V, rows)
    V = brentq(net, 0.5, 7.9, xtol=1e-13)
    r = flights["water-jet-boat"]
    k = np.searchsorted(r.t, 19.9)
    v_sim = r.signals["speed"][k]
    assert v_sim == pytest.approx(V, rel=1e-6)
    assert r.summary["top_speed"] == pytest.approx(V, rel=1e-6)
    # the same state from the ledger: gross thrust less ram drag equals the resistance
    mdot, vj = r.signals["jet.mass_flow"][k], r.signals["jet.exit_velocity"][k]
    assert vj == pytest.approx(jet_speed(V), rel=1e-6)
    ram = r.ledger[("intake", "inflow momentum")][k, 0]
    assert ram == pytest.approx(-mdot * v_sim, rel=1e-9)
    # Froude propulsive efficiency: useful power over the kinetic energy added per second (references.md s. 7)
    useful = (mdot * vj + ram) * v_sim
    added = 0.5 * mdot * (vj ** 2 - v_sim ** 2)
    assert useful / added == pytest.approx(froude_efficiency(vj, v_sim), rel=1e-9)
    assert 0.5 < useful / added < 0.7


def _hover_height():
    # Hover: mdot (v_e + u_h) = M g (jet thrust plus the momentum of the water rising into the platform), with
    # p_v - p_a = p_s - rho g z - K_tot rho u_h^2 / 2 (hydrostatic lift and Darcy-Weisbach hose loss),
    # v_e = sqrt(2 (p_v - p_a) / rho), mdot = rho Cd A v_e, u_h = mdot / (rho A_h). Model-file values.
    M, ps, Cd, d, dh, K = 30.0, 1.8e5, 0.98, 0.040, 0.080, 1.5 + 0.02 * 20.0 / 0.080
    CdA, Ah = Cd * math.pi * d * d / 4, math.pi * dh * dh / 4

    def ve_at(z):
        return brentq(lambda ve: 0.5 * RHO_W * ve ** 2 - (ps - RHO_W * G0 * z
                                                          - K * 0.5 * RHO_W * (CdA * ve / Ah) ** 2), 0.0, 100.0,
                      xtol=1e-14)

    def excess(z):
        ve = ve_at(z)
        mdot = RHO_W * CdA * ve
        return mdot * (ve + mdot / (RHO_W * Ah)) - M * G0
    return brentq(excess, 0.0, 15.0, xtol=1e-12)


def test_hose_fed_platform_hovers_at_the_algebraic_height(flights):
    z_eq = _hover_height()
    # 1. held at z_eq at rest after the station's ramp, the platform does not accelerate
    system = assemble(load_model(str(MODELS / "hose-fed-hover.toml")))
    bal = Balance(system)
    from thrustgraph.balance.balance import Kinematics
    bal.set_phase(list(system.mode0), Kinematics.FREE, False)
    y = np.array(system.y0)
    y[2] = z_eq
    snap = bal.evaluate(200.0, y)
    assert abs(snap["acceleration"][2]) < 1e-9 * G0
    # 2. the flight rises to it and oscillates about it (no damping but air drag): its mean over the last 40 s
    r = flights["hose-fed-hover"]
    sel = r.t >= r.t[-1] - 40.0
    t, z = r.t[sel], r.signals["altitude"][sel]
    mean = trapezoid(z, t) / (t[-1] - t[0])
    assert mean == pytest.approx(z_eq, abs=0.02)
    assert z.min() < z_eq < z.max() and z.max() - z.min() < 0.5
    # 3. the summary says so: its mean height (over the last quarter of the run, HOVER_WINDOW) is the algebraic
    # height, its oscillation half the swing of the height there, its highest point the top of the climb; a hover
    # rig has no apogee event (it used to log 1.195 m while the summary said 4.94 m)
    s = r.summary
    assert s["mean_height"] == pytest.approx(z_eq, abs=0.02)
    win = r.t >= r.t[-1] - 0.25 * (r.t[-1] - r.t[0])
    zw = r.signals["altitude"][win]
    assert s["height_oscillation"] == pytest.approx(0.5 * (zw.max() - zw.min()), rel=1e-3)
    assert 0.05 < s["height_oscillation"] < 0.5
    assert s["max_height"] >= r.signals["altitude"].max() - 1e-12 and s["max_height"] > s["mean_height"]
    assert "apogee" not in [e.name for e in r.events] and "apogee" not in s


def test_free_floater_thrust_is_the_vector_sum_of_its_nozzles(flights):
    r = flights["cold-gas-free-floater"]
    dirs = {"main": (-1.0, 0.0, 0.0), "left": (-math.cos(math.pi / 6), -0.5, 0.0),
            "right": (-math.cos(math.pi / 6), 0.5, 0.0)}
    total = sum(np.outer(r.signals[f"{n}.thrust"], -np.array(d)) for n, d in dirs.items())
    assert np.allclose(r.signals["thrust_vector"], total, rtol=1e-12, atol=1e-12)
    # the larger left nozzle pushes toward +y: the platform drifts to +y while it moves along +x
    v = r.signals["velocity"][-1]
    assert v[0] > 0.0 and v[1] > 0.0 and abs(v[2]) < 1e-12
    # momentum of the vehicle from the integrated thrust (no other force acts): M v = impulse - exhaust momentum
    assert r.audit.momentum_relative < 1e-8


def test_twin_nozzle_rocket_side_thrusts_cancel(flights):
    r = flights["twin-nozzle-bottle-rocket"]
    for n in ("port", "starboard"):
        assert np.allclose(r.signals[f"{n}.thrust"], r.signals["port"+".thrust"], rtol=1e-12)
    burn = r.signals["port.thrust"] > 0
    axial = r.signals["thrust"][burn]
    assert np.allclose(axial, 2 * math.cos(math.radians(15)) * r.signals["port.thrust"][burn], rtol=1e-9)
    # no side thrust: the flight stays in the launch plane (x-z)
    assert np.max(np.abs(r.signals["position"][:, 1])) < 1e-9


def test_cart_coasts_down_under_rolling_resistance_and_drag(flights):
    # After the cartridge is spent: M a = -mu M g - 1/2 rho Cd A V^2 on a level track (Coulomb rolling
    # resistance with the normal force M g, quadratic drag); 60 g cart, mu = 0.02, Cd 0.6, d = 50 mm.
    r = flights["gas-cartridge-cart"]
    t_off = next(e.t for e in r.events if e.component == "cartridge" and "sealed" in e.detail)
    sel = (r.t > t_off + 0.5) & (r.signals["speed"] > 0.5)
    M = r.signals["mass"][sel]
    V = r.signals["speed"][sel]
    a = r.signals["acceleration"][sel, 0]
    rho = 101325.0 / (8314.32 / 28.9644 * 293.15)    # the model's still air at 20 degC: ideal gas, 1976 R* / M0
    drag = 0.5 * rho * 0.6 * math.pi * 0.05 ** 2 / 4 * V ** 2
    assert np.allclose(a, -(0.02 * G0 + drag / M), rtol=1e-9)
    assert [e.name for e in r.events][-1] == "came to rest"
    # the cartridge cools while it boils, and the pressure it pushes with falls with it
    T = r.signals["cartridge.temperature"]
    assert T[r.t <= t_off].min() < 230.0


def test_cold_gas_track_passes_through_every_nozzle_regime(flights):
    r = flights["cold-gas-track"]
    regimes = set(np.unique(r.signals["thruster.regime"]).astype(int))
    assert {1, 2, 3, 4} <= regimes
    assert r.signals["thruster.separation"].max() == 1.0
    # the real gas: Z at 200 bar and 300 K (CoolProp 1.05683, references.md section 8)
    assert r.signals["bottle.compressibility_factor"][0] == pytest.approx(1.0568, abs=1e-4)
    # frictionless track: the speed never falls while the gas pushes, and drag alone slows the coast
    assert r.summary["top_speed"] > 10.0
