"""Thrust-curve files (tg_jets.curvefile): read, checked on total impulse and burn time, flown in a prescribed jet.

The checks are closed forms of our own definitions (the trapezoid impulse of a piecewise-linear table; the
rocket equation, Tsiolkovsky, as in Sutton & Biblarz, Rocket Propulsion Elements, ch. 4, for the mass flow
F / v_e that consumes exactly the propellant) and the demo file's invented numbers.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import trapezoid

from thrustgraph import ModelError, integrate, parse_model
from thrustgraph.models.modelfile import loads_model

from tg_jets import PrescribedJet, loads_thrust_curve, read_thrust_curve

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "models" / "demo-motor-curve.csv"
G0 = 9.80665

HEAD = 'propellant_mass = "10 g"\ntotal_mass = "30 g"\n'
TABLE = "time [s],thrust [N]\n0,0\n0.1,20\n1.0,0\n"


def test_the_demo_curve_reads_and_its_stated_figures_check_out():
    c = read_thrust_curve(DEMO)
    assert c.name == "demo motor (invented)"
    assert c.propellant_mass == pytest.approx(0.024) and c.total_mass == pytest.approx(0.062)
    assert c.total_impulse == pytest.approx(float(trapezoid(c.thrust, c.time)), rel=1e-15)
    assert c.total_impulse == pytest.approx(37.03, rel=1e-12)       # the trapezoid of the ten rows, by hand
    assert c.burn_time == 1.65 and c.casing_mass == pytest.approx(0.038)
    assert c.exhaust_velocity == pytest.approx(37.03 / 0.024, rel=1e-12)


@pytest.mark.parametrize("header", ["time [ms],thrust [lbf]", "Time (ms),Thrust (lbf)"])
def test_units_in_the_headers_are_converted(header):
    c = loads_thrust_curve(HEAD + header + "\n0,0\n100,20\n1000,0\n", source="c.csv")
    assert c.time.tolist() == pytest.approx([0.0, 0.1, 1.0])
    assert c.thrust[1] == pytest.approx(20 * 4.4482216152605, rel=1e-14)   # NIST SP 811: 1 lbf


@pytest.mark.parametrize("text, parts", [
    (TABLE, ["c.csv", "has no propellant_mass"]),
    ('propellant_mass = "10 g"\n' + TABLE, ["has no total_mass"]),
    ('propellant_mass = "40 g"\ntotal_mass = "30 g"\n' + TABLE, ["propellant_mass", "below the total mass"]),
    (HEAD + "time [s],thrust [N]\n0.1,0\n0.2,20\n1.0,0\n", ["first row", "not at ignition"]),
    (HEAD + "time [s],thrust [N]\n0,0\n0.1,20\n1.0,5\n", ["last row", "not at zero thrust"]),
    (HEAD + "time [s],thrust [N]\n0,0\n0.1,-20\n1.0,0\n", ["row 2", "negative thrust"]),
    (HEAD + "time [s],thrust [kN]\n0,0\n0.1,20\n1.0,0\n", ["effective exhaust velocity of 1e+06 m/s",
                                                         "check the units"]),
    (HEAD + 'total_impulse = "12 N*s"\n' + TABLE, ["total_impulse", "states 12 N s", "the table gives 10 N s",
                                                   "more than 2 %"]),
    (HEAD + 'burn_time = "0.5 s"\n' + TABLE, ["burn_time", "states 0.5 s", "1 s from ignition to burnout"]),
    (HEAD + 'thrust = "5 N"\n' + TABLE, ["line 3, thrust", "is not a setting"]),
    (HEAD + "time [s],thrust [N],mass [g]\n0,0,30\n0.1,20,25\n1.0,0,20\n", ["one column besides the time"]),
])
def test_bad_curve_files_are_refused_with_one_message(text, parts):
    with pytest.raises(ModelError) as err:
        loads_thrust_curve(text, source="c.csv")
    for part in parts:
        assert part in str(err.value), str(err.value)


def test_stated_figures_within_their_tolerances_pass():
    # 10 N s stated 10.1 (1 %); the burn time by the 5 %-of-peak convention: 0.005 .. 0.955 s = 0.95 s
    loads_thrust_curve(HEAD + 'total_impulse = "10.1 N*s"\nburn_time = "0.95 s"\n' + TABLE, source="c.csv")


MODEL = """format = "thrustgraph-model"
version = 1
name = "curve-file demo"
flow_paths = ["motor -> outside"]
[launch]
mount = "free"
speed = "0.001 m/s"
[run]
end_time = "2 s"
[environment.medium]
kind = "vacuum"
[environment.gravity]
kind = "uniform-gravity"
g = "0 m/s^2"
[components.body]
kind = "airframe"
dry_mass = "100 g"
[components.motor]
kind = "prescribed-jet"
programme = "thrust-table"
thrust_curve_file = "{path}"
[components.outside]
kind = "surroundings"
"""


def test_a_prescribed_jet_flies_the_curve_file(tmp_path):
    # In free space the rocket equation holds exactly for any thrust history with mdot = F / v_e:
    # dv = v_e ln(m0 / m1) (Tsiolkovsky; Sutton & Biblarz, ch. 4), with m0 - m1 the propellant, and the
    # casing stays: m1 = dry mass + casing.
    (tmp_path / "motors").mkdir()
    (tmp_path / "motors" / "demo.csv").write_text(DEMO.read_text())
    (tmp_path / "rocket.toml").write_text(MODEL.format(path="motors/demo.csv"))   # relative to the model file
    from thrustgraph.models.modelfile import load_model
    m = load_model(tmp_path / "rocket.toml")
    parsed = parse_model(m)
    c = read_thrust_curve(DEMO)
    masses = parsed.kinds["motor"].describe_mass(parsed.params["motor"], parsed.ambient)
    assert masses == {"propellant": pytest.approx(0.024, rel=1e-12), "casing": pytest.approx(0.038, rel=1e-12)}
    r = integrate(m)
    m0, m1 = 0.100 + 0.062, 0.100 + 0.038
    assert r.signals["mass"][0] == pytest.approx(m0, rel=1e-12)
    assert r.signals["mass"][-1] == pytest.approx(m1, rel=1e-8)      # the integrator's atol, 1e-9 kg
    assert r.signals["speed"][-1] - 0.001 == pytest.approx(c.exhaust_velocity * math.log(m0 / m1), rel=1e-7)
    assert r.summary["total_impulse"] == pytest.approx(37.03, rel=1e-6)
    burnout = next(e for e in r.events if e.name == "burnout")
    assert burnout.t == pytest.approx(1.65, rel=1e-9)


@pytest.mark.parametrize("extra, parts", [
    ('exhaust_velocity = "1500 m/s"', ["components.motor.exhaust_velocity", "already fix it"]),
    ('thrust_curve = { units = ["s", "N"], rows = [[0, 0], [1, 0]] }', ["given together with thrust_curve"]),
])
def test_a_curve_file_with_contradicting_settings_is_refused(tmp_path, extra, parts):
    text = MODEL.format(path=str(DEMO)).replace('programme = "thrust-table"', 'programme = "thrust-table"\n' + extra)
    with pytest.raises(ModelError) as err:
        parse_model(loads_model(text, source=str(tmp_path / "m.toml")))
    for part in parts:
        assert part in str(err.value), str(err.value)


def test_a_missing_curve_file_names_where_it_looked(tmp_path):
    text = MODEL.format(path="nowhere.csv")
    with pytest.raises(ModelError, match=r"components.motor.thrust_curve_file: no such file 'nowhere.csv' \(looked "
                                         r"for .*nowhere.csv'\)"):
        parse_model(loads_model(text, source=str(tmp_path / "m.toml")))
    bad = tmp_path / "bad.csv"
    bad.write_text(HEAD + "time [s],thrust [N]\n0,0\n0.1,20\n1.0,3\n")
    with pytest.raises(ModelError, match=r"components.motor.thrust_curve_file: .*bad.csv: last row: ends at 3 N"):
        parse_model(loads_model(MODEL.format(path="bad.csv"), source=str(tmp_path / "m.toml")))
