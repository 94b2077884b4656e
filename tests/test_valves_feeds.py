"""Vents, relief valves, inlets, pumps and hose feeds: behaviour, closed forms and bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import trapezoid

from thrustgraph import assemble, integrate
from thrustgraph.balance.balance import Balance
from thrustgraph.kinds.component import scalar_ops
from thrustgraph.base.errors import ModelError
from thrustgraph.models.model import parse_model
from thrustgraph.kinds.parameters import parse_params
from tg_feeds import Pump, froude_efficiency
from conftest import model_from_toml


def tank_with(outlet: str, *, mount="held", medium='kind = "still-air"', gravity="9.80665", gauge="10 bar",
              end="2 s", paths='["tank -> valve -> outside"]'):
    return model_from_toml(f"""
        flow_paths = {paths}
        [launch]
        mount = "{mount}"
        elevation = "0 deg"
        attitude = "fixed"
        [run]
        end_time = "{end}"
        output_interval = "0.05 s"
        rtol = 1e-10
        atol = 1e-12
        [environment.medium]
        {medium}
        [environment.gravity]
        kind = "uniform-gravity"
        g = "{gravity} m/s^2"
        [components.frame]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.tank]
        kind = "gas-tank"
        gas = "air"
        volume = "1 L"
        gauge_pressure = "{gauge}"
        temperature = "300 K"
        process = "isothermal"
        {outlet}
        [components.outside]
        kind = "surroundings"
    """)


RELIEF = """
    [components.valve]
    kind = "relief-valve"
    cracking_pressure = "8 bar"
    reseat_pressure = "6 bar"
    flow_area = "2 mm^2"
    discharge_coefficient = 0.7
"""


def test_relief_valve_opens_above_cracking_and_reseats_at_its_reseat_pressure():
    r = integrate(tank_with(RELIEF))
    opened = [e for e in r.events if e.name == "relief valve opens"]
    reseated = [e for e in r.events if e.name == "relief valve reseats"]
    assert opened and opened[0].t == 0.0 and "at once" in opened[0].detail   # charged above cracking
    assert len(reseated) == 1
    k = np.searchsorted(r.t, reseated[0].t)
    p_tank = r.signals["tank.pressure"]
    assert p_tank[k] == pytest.approx(101325.0 + 6e5, rel=1e-7)
    after = r.t > reseated[0].t
    assert np.all(r.signals["valve.mass_flow"][after] == 0.0)
    assert np.allclose(p_tank[after], p_tank[k], rtol=1e-12)        # sealed again: the pressure holds
    assert "relief venting" in [p.name for p in r.phases][0]


def test_relief_valve_reseat_above_cracking_is_refused():
    bad = RELIEF.replace('reseat_pressure = "6 bar"', 'reseat_pressure = "9 bar"')
    with pytest.raises(ModelError) as err:
        parse_model(tank_with(bad))
    msg = str(err.value)
    assert "components.valve.reseat_pressure" in msg and "reseats below its cracking pressure" in msg
    assert "9 bar" in msg and "8 bar" in msg and "Fix:" in msg


def vent(arrangement: str, direction="[0, 1, 0]") -> str:
    return f"""
        [components.valve]
        kind = "vent"
        flow_area = "3 mm^2"
        arrangement = "{arrangement}"
        direction = {direction}
    """


def test_symmetric_vent_makes_no_net_thrust_and_a_one_sided_vent_does():
    kw = dict(mount="free", medium='kind = "vacuum"', gravity="0", end="1 s")
    sym = integrate(tank_with(vent("symmetric"), **kw))
    one = integrate(tank_with(vent("one-sided"), **kw))
    assert sym.summary["propellant_expelled"] == pytest.approx(one.summary["propellant_expelled"], rel=1e-12)
    assert np.max(np.abs(sym.signals["velocity"])) == 0.0
    assert np.max(np.abs(sym.signals["thrust_vector"])) == 0.0
    v = one.signals["velocity"][-1]
    assert v[1] < -0.1 and abs(v[0]) < 1e-12 and abs(v[2]) < 1e-12     # pushed against its +y jet
    assert np.all(sym.signals["valve.jet_speed"][:-1] > 300.0)         # the ports still jet at sonic speed
    for r in (sym, one):
        assert abs(r.audit.mass_relative) < 1e-12 and r.audit.momentum_relative < 1e-9


def test_two_opposed_one_sided_vents_cancel_like_a_symmetric_one():
    # Net thrust is the vector sum of the openings' thrusts (each along its own axis).
    out = vent("one-sided", "[0, 1, 0]") + vent("one-sided", "[0, -1, 0]").replace("components.valve",
                                                                                    "components.valve2")
    m = tank_with(out, mount="free", medium='kind = "vacuum"', gravity="0", end="0.5 s",
                  paths='["tank -> valve -> outside", "tank -> valve2 -> outside"]')
    r = integrate(m)
    assert np.max(np.abs(r.signals["thrust_vector"])) < 1e-12 * np.max(r.signals["valve.thrust"])
    assert np.max(np.abs(r.signals["velocity"])) < 1e-12


def pump(**raw):
    p = parse_params(Pump.parameters, raw, where="components.pump", params_class=Pump.params_class())
    Pump.check(p, "components.pump")
    return Pump.build_flow(p, scalar_ops)


def test_pump_power_law_and_finite_shut_off():
    f = pump(shaft_power="2 kW", efficiency=0.5, shutoff_pressure="4 bar")
    up = (101325.0, 293.15, 998.2, 1.4, 287.05, 1.0, 0.0)
    assert f.rise(up, 0.0, 0) == 4e5                        # finite at zero flow: the shut-off pressure
    for q in (0.005, 0.01, 0.02):                            # m^3/s above Q_k = 1000 W / 4 bar = 2.5 L/s
        assert f.rise(up, q * 998.2, 0) * q == pytest.approx(1000.0, rel=1e-12)   # hydraulic power eta P
    assert f.rise(up, 10.0, 1) == 0.0                        # stopped: an open passage


def test_pump_head_curve():
    # dp = rho g0 H(Q) (head defined with standard gravity); linear between rows, linear extrapolation outside.
    f = pump(programme="head-curve", head_curve={"units": ["L/s", "m"], "rows": [[0, 20], [5, 18], [10, 10]]})
    up = (101325.0, 293.15, 1000.0, 1.4, 287.05, 1.0, 0.0)
    g0 = 9.80665
    assert f.rise(up, 0.0, 0) == pytest.approx(1000.0 * g0 * 20, rel=1e-12)
    assert f.rise(up, 7.5, 0) == pytest.approx(1000.0 * g0 * 14, rel=1e-12)       # 7.5 L/s
    assert f.rise(up, 12.0, 0) == pytest.approx(1000.0 * g0 * 6.8, rel=1e-12)     # past the last row


BOAT = """
    flow_paths = ["{start} -> pump -> jet -> outside"]
    [launch]
    mount = "track"
    elevation = "0 deg"
    attitude = "fixed"
    speed = "{speed} m/s"
    [run]
    end_time = "1 s"
    [environment.medium]
    kind = "{medium}"
    [components.hull]
    kind = "boat-hull"
    dry_mass = "20 kg"
    resistance_table = {{ units = ["m/s", "N"], rows = [[0, 0], [2, 10], [6, 90]] }}
    {source}
    [components.pump]
    kind = "pump"
    shaft_power = "1 kW"
    efficiency = 0.6
    shutoff_pressure = "1 bar"
    [components.jet]
    kind = "convergent-nozzle"
    diameter = "25 mm"
    [components.outside]
    kind = "surroundings"
"""
INLET = """
    [components.intake]
    kind = "inlet"
    fluid = "{fluid}"
    loss_coefficient = 0.25
"""


def boat(*, speed=3.0, medium="still-water", fluid="liquid", start="intake", source=None):
    src = source if source is not None else INLET.format(fluid=fluid)
    return model_from_toml(BOAT.format(start=start, speed=speed, medium=medium, source=src))


def test_inlet_ram_pressure_and_ram_drag():
    # Captured water arrives at -V: the inflow term is the ram drag mdot V against the motion (general thrust
    # equation F = mdot_e V_e - mdot_0 V_0 + (p_e - p_a) A_e: Sutton & Biblarz ch. 2); the pump sees
    # p_a + (1 - K) rho V^2 / 2 at its inlet.
    system = assemble(boat(speed=3.0))
    snap = Balance(system).evaluate(0.0, system.y0)
    mdot = snap["jet.mass_flow"]
    drag = dict(((c, t), v) for c, t, v in snap["ledger"])[("intake", "inflow momentum")]
    assert drag[0] == pytest.approx(-mdot * 3.0, rel=1e-12) and drag[1] == drag[2] == 0.0
    rise = snap["pump.pressure_rise"]
    assert snap["jet.inlet_pressure"] - rise == pytest.approx(101325.0 + 0.75 * 0.5 * 998.2 * 9.0, rel=1e-12)
    # the line balance: the nozzle passes what the pump delivers (Bernoulli, Cd 0.98)
    v = math.sqrt(2 * (snap["jet.inlet_pressure"] - 101325.0) / 998.2)
    assert mdot == pytest.approx(998.2 * 0.98 * math.pi * 0.025 ** 2 / 4 * v, rel=1e-10)
    assert rise * mdot / 998.2 == pytest.approx(600.0, rel=1e-9)


def test_feed_bad_input():
    # a pump with no inlet: the core's graph check names the pump and the fix
    m = boat().copy()
    m.flow_paths = ["pump -> jet -> outside"]
    del m.components["intake"]
    with pytest.raises(ModelError) as err:
        parse_model(m)
    msg = str(err.value)
    assert "components.pump" in msg and "(pump) needs exactly one upstream" in msg and "Fix:" in msg
    # a pump fed with gas
    with pytest.raises(ModelError, match=r"components.pump: the pump is a liquid pump, but 'intake' \(inlet\) "
                                         r"feeds it with gas"):
        parse_model(boat(fluid="gas", medium="still-air"))
    # an inlet that takes in a fluid the medium does not hold
    with pytest.raises(ModelError, match=r"components.intake.fluid: the inlet takes in liquid but the medium is "
                                         r"still-air; to fix it, set fluid = \"gas\""):
        parse_model(boat(fluid="liquid", medium="still-air"))
    with pytest.raises(ModelError, match=r"components.pump.shutoff_pressure: a power pump needs its shut-off"):
        pump(shaft_power="1 kW")


HOSE_FLOW = """
    [components.hose]
    kind = "hose-feed"
    supply = "flow"
    mass_flow = "4 kg/s"
    hose_diameter = "40 mm"
    inflow_direction = [-1, 0, 0]
"""


def test_fixed_flow_hose_delivers_its_flow_with_its_inflow_momentum():
    # The station fixes the flow; the fluid enters at u = mdot / (rho A_h) along the (world-frame) inflow
    # direction, adding mdot u to the balance.
    system = assemble(boat(start="hose", source=HOSE_FLOW, speed=0.0))
    snap = Balance(system).evaluate(0.0, system.y0)
    assert snap["jet.mass_flow"] == 4.0 and snap["hose.mass_flow"] == 4.0
    u = 4.0 / (998.2 * math.pi * 0.04 ** 2 / 4)
    inflow = dict(((c, t), v) for c, t, v in snap["ledger"])[("hose", "inflow momentum")]
    assert inflow == pytest.approx((-4.0 * u, 0.0, 0.0), rel=1e-12)
    # the pressure at the nozzle is what passes 4 kg/s (Bernoulli): 2 rho (mdot / (rho Cd A))^2 / 2
    v = 4.0 / (998.2 * 0.98 * math.pi * 0.025 ** 2 / 4)
    assert snap["jet.inlet_pressure"] - 101325.0 == pytest.approx(0.5 * 998.2 * v * v, rel=1e-9)


def test_froude_propulsive_efficiency_values():
    # eta = 2 / (1 + Vj/V0): 0.8000 / 0.6667 / 0.5000 / 0.3333 at Vj/V0 = 1.5 / 2 / 3 / 5 (references.md
    # section 7, formula; S: aerospaceanswers.com, probsee.com).
    for ratio, eta in ((1.5, 0.8000), (2.0, 0.6667), (3.0, 0.5000), (5.0, 0.3333)):
        assert froude_efficiency(ratio * 4.0, 4.0) == pytest.approx(eta, abs=5e-5)


def test_inflow_momentum_is_counted_once_in_the_momentum_audit():
    # Core fix shown here: the momentum of fluid entering through a source (ram drag, hose inflow) is part of the
    # exhaust-momentum accumulator; it used to be counted a second time in the internal-momentum accumulator, which
    # left a momentum residual of -integral(mdot v_in dt) and an internal-momentum defect of the same size.
    m = boat(speed=3.0)
    m.run["end_time"] = "2 s"
    r = integrate(m)
    inflow = trapezoid(np.linalg.norm(r.ledger[("intake", "inflow momentum")], axis=1), r.t)
    assert inflow > 50.0                                   # what a double count would leave, kg m/s
    assert np.linalg.norm(r.audit.momentum_residual) < 1e-9 * inflow
    assert r.audit.internal_defect < 1e-9 * inflow
    assert any("running pump" in c for c in r.cautions)


def test_a_platform_resting_through_its_feed_ramp_integrates_the_whole_impulse():
    """A hose-fed platform too heavy to lift off rests on its guide while its supply pressure ramps up: its states
    do not change, so the solver's steps grow to tens of seconds while the thrust still changes with time (and has
    a kink where the ramp ends). The total impulse (3-point Gauss-Legendre on pieces no longer than the output
    interval) equals a trapezoid of the thrust every 10 ms (closed form of the quadrature's limit; the two agree
    to 1e-9 here), and the ensemble's integrated impulse (step-controlled like every other state) equals it:
    before, the single flight was 5.7e-4 over and the ensemble 8.3e-4 under (measured on a drawn design)."""
    from pathlib import Path
    import thrustgraph as tg
    from thrustgraph.flight.ensemble import fly_designs
    from thrustgraph.flight.integrate import fly_segments
    from thrustgraph.balance.outcomes import Flight
    from thrustgraph.balance.sampling import dense_states
    from thrustgraph.models.designs import resolve
    path = Path(tg.default_model_path()).parent / "hose-fed-hover.toml"
    m = tg.load_model(path).set("launch.mount", "guide").set("components.platform.dry_mass", "100 kg") \
        .set("components.hose.ramp_time", "126 s")
    parsed = parse_model(m)
    system = tg.assemble(parsed)
    segs = fly_segments(system)
    flight = Flight(system, segs)
    ph, sol, bal = segs.segments[0]
    assert len(segs.segments) == 1 and max(np.diff(sol.t)) > 5.0      # long steps: the states stand still
    bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
    tt = np.linspace(float(sol.t[0]), float(sol.t[-1]), 20001)
    ys = dense_states(sol, tt)
    thrust = np.array([math.sqrt(sum(c * c for c in bal.terms(float(tt[k]), ys[:, k].tolist())["thrust"]))
                       for k in range(len(tt))])
    reference = trapezoid(thrust, tt)
    single = flight.impulses[0]
    assert single == pytest.approx(reference, rel=1e-7)
    p = resolve(parsed, "components.platform.dry_mass")
    res = fly_designs(parsed, [p], np.array([[parsed.params["platform"].dry_mass]]), ["total_impulse"])
    assert res.values[0, 0] == pytest.approx(single, rel=1e-6)
