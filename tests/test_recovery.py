"""The recovery device (tg_recovery) against closed forms: descent at the terminal speed, deployment at apogee, after a
delay and at an altitude at the right time and height, the opening law, drift with the wind, the deployment speed and
peak opening load after a run; the demo model on the command line; and its bad-input messages.

Sources are named beside each check. Before deployment the vehicles here have no drag (airframe C_D = 0, a packed
device adds none), so their motion is the drag-free projectile's until the device deploys.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from thrustgraph import integrate, load_model, parse_model
from thrustgraph.base.errors import ModelError
from tg_recovery import recovery_summary
from conftest import model_from_toml

G0 = 9.80665          # standard gravity, exact (3rd CGPM 1901)
RHO = 101325.0 / (8314.32 / 28.9644 * 288.15)  # still-air default: ideal gas at the 1976 sea-level p and T (1.2250)
ROOT = Path(__file__).resolve().parents[1]

FLIGHT = """
    [launch]
    mount = "free"
    elevation = "{el} deg"
    speed = "{v0} m/s"
    altitude = "{alt} m"
    [run]
    end_time = "{end} s"
    [environment.medium]
    kind = "still-air"
    wind_x = "{wind} m/s"
    [components.body]
    kind = "airframe"
    dry_mass = "{m_body} kg"
    [components.chute]
    kind = "recovery-device"
    mass = "{m_chute} kg"
    {drag}
    {deploy}
    opening_time = "{t_open} s"
    {extra}
"""


def flight(*, v0=40.0, el=90.0, alt=0.0, end=200.0, wind=0.0, m_body=0.4, m_chute=0.1, drag='drag_area = "0.3 m^2"',
           deploy='deploy = "apogee"', t_open=0.0, extra=""):
    return integrate(model_from_toml(FLIGHT.format(v0=v0, el=el, alt=alt, end=end, wind=wind, m_body=m_body,
                                                   m_chute=m_chute, drag=drag, deploy=deploy, t_open=t_open,
                                                   extra=extra)))


def event(r, name):
    return next(e for e in r.events if e.name == name)


def state_at(r, t):
    """The state right after time t (a phase boundary appears twice; the later copy is the new phase's start)."""
    k = int(np.searchsorted(r.t, t, side="right")) - 1
    return r.y[:, k]


def descent_speed_closed_form(t, t1, v1, vt, g=G0):
    """Downward speed under quadratic drag from v1 at t1: m dv/dt = m g - c v^2, v_t = sqrt(m g / c).

    v = v_t tanh(g (t - t1) / v_t + artanh(v1 / v_t)) for v1 < v_t, and v = v_t coth(g (t - t1) / v_t + artanh(v_t / v1))
    for v1 > v_t (slowing down to v_t from above); from rest v_t tanh(g t / v_t) (e.g. J. R. Taylor, Classical
    Mechanics, 2005, section 2.4, eq. 2.57 and problem 2.35; from memory; both satisfy dv/dt = g (1 - v^2 / v_t^2))."""
    x = g * (t - t1) / vt
    if v1 <= vt:
        return vt * np.tanh(x + np.arctanh(v1 / vt))
    return vt / np.tanh(x + np.arctanh(vt / v1))


# ---------------------------------------------------------------------------
# Descent speed
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("drag, cda", [
    ('drag_area = "0.3 m^2"', 0.3),
    ('drag_coefficient = 0.8\n    diameter = "0.5 m"', 0.8 * math.pi * 0.25 / 4),
], ids=["drag-area", "cd-and-diameter"])
def test_descent_under_an_open_parachute_reaches_the_terminal_speed(drag, cda):
    # Terminal speed v_t = sqrt(2 m g / (rho C_D A)) (quadratic drag; D. Halliday, R. Resnick, J. Walker, Fundamentals
    # of Physics, ch. 6, "The drag force and terminal speed", eq. 6-16; from memory), m = body + device.
    r = flight(drag=drag, t_open=0.0)
    m = 0.4 + 0.1
    vt = math.sqrt(2 * m * G0 / (RHO * cda))
    t1 = event(r, "deploy at apogee").t
    after = r.t >= t1
    down = -r.signals["velocity"][after, 2]
    # rtol = 1e-9 per step; the global error of the long, flat tanh tail stays below 1e-6 relative
    assert down == pytest.approx(descent_speed_closed_form(r.t[after], t1, 0.0, vt), rel=1e-6, abs=1e-8)
    assert r.message == "ground impact"
    assert r.summary["impact_speed"] == pytest.approx(vt, rel=1e-6)   # the descent lasts ~50 time constants
    assert r.summary["launch_mass"] == pytest.approx(m, rel=1e-15)    # the device's own mass flies with it


@pytest.mark.parametrize("t_open, faster", [(0.3, False), (1.0, True)])
def test_descent_speed_from_the_state_at_full_opening(t_open, faster):
    # After a linear opening from apogee the vehicle falls at v1: below v_t after 0.3 s, above it after 1 s (the
    # partly open device lets it overshoot); from there the closed forms above hold.
    r = flight(t_open=t_open)
    vt = math.sqrt(2 * 0.5 * G0 / (RHO * 0.3))
    t1 = event(r, "fully open").t
    v1 = -state_at(r, t1)[5]
    assert (v1 > vt) == faster and 0.3 * vt < v1 < 1.2 * vt
    after = r.t >= t1
    assert -r.signals["velocity"][after, 2] == pytest.approx(descent_speed_closed_form(r.t[after], t1, v1, vt),
                                                             rel=1e-6)


def test_drift_under_wind_at_the_wind_speed_and_terminal_sink_rate():
    # Drag acts on the velocity through the air: in steady descent the vehicle moves with the wind horizontally and
    # sinks at v_t relative to the air (the drag equation on the relative velocity; NASA Glenn, Beginner's Guide to
    # Aeronautics, "The Drag Equation").
    r = flight(v0=30.0, wind=6.0, alt=300.0, end=300.0)
    vt = math.sqrt(2 * 0.5 * G0 / (RHO * 0.3))
    v = r.signals["velocity"][-1]
    assert r.message == "ground impact"
    assert v[0] == pytest.approx(6.0, rel=1e-6)
    assert -v[2] == pytest.approx(vt, rel=1e-6)
    assert r.signals["position"][-1, 0] > 100.0                  # it drifted downwind


# ---------------------------------------------------------------------------
# When and where it deploys
# ---------------------------------------------------------------------------

def test_deploys_at_apogee():
    # Drag-free vertical ascent: apogee at t = v0 / g, h = v0^2 / (2 g) (projectile motion; e.g. Halliday, Resnick &
    # Walker, Fundamentals of Physics, ch. 2, free fall; from memory).
    v0, alt = 40.0, 12.0
    r = flight(v0=v0, alt=alt, t_open=0.5)
    e = event(r, "deploy at apogee")
    assert e.component == "chute" and e.detail == "mode -> opening"
    assert e.t == pytest.approx(v0 / G0, rel=1e-9)
    assert state_at(r, e.t)[2] == pytest.approx(alt + v0 ** 2 / (2 * G0), rel=1e-9)
    assert event(r, "fully open").t == pytest.approx(v0 / G0 + 0.5, rel=1e-9)
    dep = r.signals["chute.deployed"]
    assert np.all(dep[r.t < e.t] == 0.0) and np.all(dep[r.t > e.t] == 1.0)


@pytest.mark.parametrize("delay", [0.5, 2.0, 3.5])
def test_deploys_after_a_delay_from_apogee(delay):
    # Before deployment the fall is drag-free: t = v0/g + delay, z = h_max - g delay^2 / 2, speed g delay (free fall).
    v0 = 40.0
    r = flight(v0=v0, deploy=f'deploy = "delay-after-apogee"\n    delay = "{delay} s"', t_open=0.0)
    armed = event(r, "armed at apogee")
    assert armed.t == pytest.approx(v0 / G0, rel=1e-9)
    e = event(r, "deploy after delay")
    assert e.t == pytest.approx(v0 / G0 + delay, rel=1e-9)
    y = state_at(r, e.t)
    assert y[2] == pytest.approx(v0 ** 2 / (2 * G0) - 0.5 * G0 * delay ** 2, rel=1e-9)
    assert -y[5] == pytest.approx(G0 * delay, rel=1e-8)
    assert r.state("chute.delay_timer")[-1] == pytest.approx(delay, rel=1e-9)   # the timer stops at deployment


def test_deploys_at_an_altitude_on_the_way_down_with_its_speed_and_opening_load():
    # Deployment when the drag-free fall passes h_d: t = v0/g + sqrt(2 (h_max - h_d) / g), v_d = sqrt(2 g (h_max - h_d))
    # (free fall). Opening at once, the load is largest at that instant: 1/2 rho C_D A v_d^2 (drag equation), and falls
    # from there as the vehicle slows.
    v0, hd = 50.0, 60.0
    hmax = v0 ** 2 / (2 * G0)
    r = flight(v0=v0, deploy=f'deploy = "altitude"\n    deploy_altitude = "{hd} m"', t_open=0.0)
    e = event(r, "deploy at altitude")
    assert e.detail == "mode -> open"
    assert e.t == pytest.approx(v0 / G0 + math.sqrt(2 * (hmax - hd) / G0), rel=1e-9)
    assert state_at(r, e.t)[2] == pytest.approx(hd, abs=1e-9)
    vd = math.sqrt(2 * G0 * (hmax - hd))
    s = recovery_summary(r)["chute"]
    assert s["deployment_time"] == e.t
    assert s["deployment_altitude"] == pytest.approx(hd, abs=1e-9)
    assert s["deployment_speed"] == pytest.approx(vd, rel=1e-9)
    assert s["deployment_airspeed"] == pytest.approx(vd, rel=1e-9)   # still air
    assert s["peak_opening_load"] == pytest.approx(0.5 * RHO * 0.3 * vd ** 2, rel=1e-9)
    assert s["peak_opening_load_time"] == e.t


def test_apogee_below_the_deployment_altitude_deploys_at_apogee():
    # h_max = 20^2 / (2 g) = 20.4 m < 100 m: the device is past its altitude when it is armed and deploys at once.
    r = flight(v0=20.0, deploy='deploy = "altitude"\n    deploy_altitude = "100 m"')
    e = event(r, "deploy at altitude")
    assert e.t == pytest.approx(20.0 / G0, rel=1e-9)
    assert e.detail == "mode -> open (at once)"


def test_drop_from_altitude_deploys_at_its_altitude():
    # Dropped from rest at 500 m (its apogee is the start), deploying at 300 m: t = sqrt(2 * 200 m / g).
    r = flight(v0=0.0, alt=500.0, deploy='deploy = "altitude"\n    deploy_altitude = "300 m"')
    assert event(r, "armed at apogee").t == pytest.approx(0.0, abs=1e-9)   # at -1e-9 m/s: 1e-10 s after the start
    assert event(r, "deploy at altitude").t == pytest.approx(math.sqrt(2 * 200.0 / G0), rel=1e-9)


def test_a_delay_longer_than_the_fall_lands_it_ballistically():
    # A late deployment: falling 78.4 m from rest takes sqrt(2 h / g) = 4.0 s, so a 6 s delay never deploys and the
    # vehicle lands at the drag-free speed sqrt(2 g h) (energy conservation).
    r = flight(v0=0.0, alt=78.4, deploy='deploy = "delay-after-apogee"\n    delay = "6 s"')
    assert r.message == "ground impact"
    assert not any(e.name == "deploy after delay" for e in r.events)
    assert r.summary["impact_speed"] == pytest.approx(math.sqrt(2 * G0 * 78.4), rel=1e-9)
    assert recovery_summary(r) == {"chute": {"deployed": 0.0}}


def test_deploys_when_a_trigger_switches_it():
    # deploy = "on-trigger": a [triggers] entry on the vertical speed deploys it when the drag-free flight falls
    # through -15 m/s, at t = (v0 + 15 m/s) / g (free fall), 15 m/s being also its deployment speed.
    v0 = 40.0
    r = flight(v0=v0, deploy='deploy = "on-trigger"', t_open=0.5, extra="""
    [triggers.deploy]
    when = "vertical_speed < -15 m/s"
    then = "switch"
    component = "chute"
    mode = "opening"
    """)
    td = (v0 + 15.0) / G0
    e = next(e for e in r.events if e.name == "deploy" and e.component == "chute")
    assert e.t == pytest.approx(td, rel=1e-9) and e.detail == "mode -> opening"
    assert not any(e.name == "deploy at apogee" for e in r.events)    # on-trigger: not at apogee by itself
    s = recovery_summary(r)["chute"]
    assert s["deployment_time"] == pytest.approx(td, rel=1e-9)
    assert s["deployment_speed"] == pytest.approx(15.0, rel=1e-8)
    assert s["fully_open_time"] == pytest.approx(td + 0.5, rel=1e-9)


def test_a_device_on_a_dropped_stage_deploys_on_the_stage_own_flight():
    # The booster of the bundled two-stage demo carries its own device; after separation the dropped stage is
    # flown on by itself (the core's staging), reaches its apogee and deploys there: the upper stage does not list
    # it, the dropped stage's result does, at that stage's apogee.
    from thrustgraph.models.modelfile import bundled_models, loads_model

    text = bundled_models()["two-stage-demo"].read_text().replace(
        'components = ["booster_frame", "booster_motor"]',
        'components = ["booster_frame", "booster_motor", "booster_chute"]') + """
[components.booster_chute]
kind = "recovery-device"
mass = "20 g"
drag_area = "0.05 m^2"
opening_time = "0.2 s"
"""
    r = integrate(loads_model(text))
    assert any(e.name == "separation" and "booster_chute" in e.detail for e in r.events)
    assert recovery_summary(r) == {}
    booster = r.dropped["booster"]
    apogee = event(booster, "apogee")
    s = recovery_summary(booster)["booster_chute"]
    assert s["deployment_time"] == pytest.approx(apogee.t, abs=1e-9)
    assert s["deployment_altitude"] == pytest.approx(booster.summary["apogee"], rel=1e-9)
    assert booster.message == "ground impact"
    # under its device the booster lands near its own terminal speed sqrt(2 m g / (rho CdA)), m = its final mass
    vt = math.sqrt(2 * booster.summary["final_mass"] * G0 / (RHO * 0.05))
    assert booster.summary["impact_speed"] < 1.05 * vt


# ---------------------------------------------------------------------------
# The opening law
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("n", [1.0, 2.0, 0.5])
def test_drag_area_grows_as_the_opening_law_and_the_drag_follows_it(n):
    # (C_D A)(t) = (C_D A)_open ((t - t_d) / t_open)^n (the opening law of tg_recovery.device; common practice) and
    # D = -1/2 rho (C_D A)(t) |v| v (drag equation).
    t_open = 1.5
    r = flight(t_open=t_open, extra=f"opening_exponent = {n}")
    td = event(r, "deploy at apogee").t
    assert event(r, "fully open").t == pytest.approx(td + t_open, rel=1e-9)
    s = r.signals
    during = (r.t > td) & (r.t < td + t_open)
    assert during.sum() > 50
    tau = (r.t[during] - td) / t_open
    assert s["chute.drag_area"][during] == pytest.approx(0.3 * tau ** n, rel=1e-8)
    assert s["chute.drag_area_ratio"][during] == pytest.approx(tau ** n, rel=1e-8)
    v = s["velocity"][during]
    expected = -0.5 * RHO * (0.3 * tau ** n)[:, None] * np.linalg.norm(v, axis=1)[:, None] * v
    assert s["chute.drag"][during] == pytest.approx(expected, rel=1e-8, abs=1e-12)
    assert np.all(s["chute.drag_area"][r.t > td + t_open] == 0.3)
    assert np.all(s["chute.drag"][r.t < td] == 0.0)
    # the drag is a term of the balance ledger
    assert np.array_equal(r.ledger[("chute", "drag")], s["chute.drag"])


def test_peak_opening_load_is_the_largest_sampled_drag_and_grows_with_deployment_speed():
    late = flight(v0=40.0, deploy='deploy = "delay-after-apogee"\n    delay = "3 s"', t_open=0.4)
    early = flight(v0=40.0, deploy='deploy = "apogee"', t_open=0.4)
    s_late, s_early = recovery_summary(late)["chute"], recovery_summary(early)["chute"]
    drag = np.linalg.norm(late.signals["chute.drag"], axis=1)
    assert s_late["peak_opening_load"] == pytest.approx(drag.max(), rel=1e-15)
    weight = 0.5 * G0
    # Deployed at apogee, the vehicle speeds up from rest toward v_t, where the drag equals the weight
    # (1/2 rho CdA v_t^2 = m g), so the drag never exceeds the weight ...
    assert s_early["deployment_speed"] < 1e-8
    assert s_early["peak_opening_load"] <= weight * (1 + 1e-6)
    assert s_early["peak_opening_load"] == pytest.approx(weight, rel=1e-4)
    # ... while deploying 3 s into the fall (29.4 m/s, far above v_t = 5.2 m/s) loads it several times its weight
    assert s_late["deployment_speed"] == pytest.approx(3 * G0, rel=1e-8)
    assert s_late["peak_opening_load"] > 5 * weight
    assert s_late["deployment_time"] < s_late["peak_opening_load_time"] <= s_late["fully_open_time"] + 0.05


# ---------------------------------------------------------------------------
# Model file, cautions and the command line
# ---------------------------------------------------------------------------

def test_cautions_name_late_deployment_and_the_range():
    parsed = parse_model(model_from_toml(FLIGHT.format(v0=10, el=90, alt=0, end=10, wind=0, m_body=1, m_chute=0.1,
                                                       drag='drag_area = "0.3 m^2"', t_open=0.2, extra="",
                                                       deploy='deploy = "delay-after-apogee"\n    delay = "1 s"')))
    text = " ".join(parsed.cautions())
    assert "late deployment" in text and "not a safe landing speed" in text
    assert "NFPA 1122" in text and "clear range" in text and "eye protection" in text
    assert "ejection delay is timed from burnout" in text


def test_demo_model_runs_from_the_command_line(tmp_path):
    path = ROOT / "models" / "rocket-with-parachute.toml"
    proc = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "run", str(path), "--json", "out.json"],
                          cwd=tmp_path, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "deploy at apogee" in out and "deploy at altitude" in out and "fully open" in out
    assert "Outcome: ground impact" in out and "late deployment" in out
    r = integrate(load_model(path))                                  # the same model, in this process
    s = recovery_summary(r)
    assert set(s) == {"drogue", "main"}
    # the main opens at 150 m on the way down, under the drogue, and the vehicle lands slower than the drogue alone
    assert s["main"]["deployment_altitude"] == pytest.approx(150.0, abs=1e-6)
    assert s["drogue"]["deployment_time"] < s["main"]["deployment_time"]
    assert r.summary["impact_speed"] < s["main"]["deployment_speed"]


# ---------------------------------------------------------------------------
# Bad input: one clear message each (key path, what, fix)
# ---------------------------------------------------------------------------

def parse_device(lines: str, medium: str = "still-air"):
    return parse_model(model_from_toml(f"""
        [environment.medium]
        kind = "{medium}"
        [components.body]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.chute]
        kind = "recovery-device"
        mass = "50 g"
        opening_time = "0.3 s"
        {lines}
    """))


AREA = 'drag_area = "0.2 m^2"\n'
BAD = [
    ("negative-area", 'drag_area = "-0.2 m^2"', "components.chute.drag_area", "must be at least 0 m^2, got '-0.2 m^2'",
     "Fix: drag coefficient times reference area"),
    ("negative-diameter", 'drag_coefficient = 0.8\n diameter = "-0.5 m"', "components.chute.diameter",
     "must be at least 0 m", "Fix: nominal diameter"),
    ("negative-cd", 'drag_coefficient = -0.8\n diameter = "0.5 m"', "components.chute.drag_coefficient",
     "must be at least 0", "Fix: drag coefficient of the open parachute"),
    ("no-area", "", "components.chute.drag_area", "the device has no drag area", "Fix: give drag_area"),
    ("both-areas", AREA + 'drag_coefficient = 0.8\n diameter = "0.5 m"', "components.chute.drag_area",
     "is given together with drag_coefficient or diameter", "not both"),
    ("cd-without-diameter", "drag_coefficient = 0.8", "components.chute.diameter",
     "drag_coefficient is given without the canopy diameter", "Fix: add diameter"),
    ("diameter-without-cd", 'diameter = "0.5 m"', "components.chute.drag_coefficient",
     "diameter is given without a drag coefficient", "Fix: add drag_coefficient"),
    ("streamer-diameter", 'device = "streamer"\n drag_coefficient = 0.2\n diameter = "0.5 m"',
     "components.chute.diameter", "a streamer has no canopy diameter", "length times its width"),
    ("delay-without-its-mode", AREA + 'delay = "2 s"', "components.chute.delay",
     "a delay is given but deploy = 'apogee'", 'Fix: set deploy = "delay-after-apogee"'),
    ("delay-mode-without-delay", AREA + 'deploy = "delay-after-apogee"', "components.chute.delay",
     "needs a delay greater than 0 s", 'or set deploy = "apogee"'),
    ("negative-delay", AREA + 'deploy = "delay-after-apogee"\n delay = "-1 s"', "components.chute.delay",
     "must be at least 0 s", "Fix: time from apogee"),
    ("altitude-without-its-mode", AREA + 'deploy = "delay-after-apogee"\n delay = "1 s"\n deploy_altitude = "100 m"',
     "components.chute.deploy_altitude", "a deployment altitude is given but deploy = 'delay-after-apogee'",
     'Fix: set deploy = "altitude"'),
    ("altitude-mode-without-altitude", AREA + 'deploy = "altitude"', "components.chute.deploy_altitude",
     "needs a deployment altitude above the ground datum", "Fix: give deploy_altitude"),
    ("trigger-mode-with-delay", AREA + 'deploy = "on-trigger"\n delay = "1 s"', "components.chute.delay",
     "a delay is given but deploy = 'on-trigger'", "or remove delay"),
    ("misspelt-mode", AREA + 'deploy = "apogée"', "components.chute.deploy", "expected one of 'apogee'",
     "did you mean 'apogee'?"),
    ("exponent-zero", AREA + "opening_exponent = 0", "components.chute.opening_exponent", "must be greater than 0",
     "Fix: n in"),
]


@pytest.mark.parametrize("lines, where, what, fix", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_recovery_input_gets_one_clear_message(lines, where, what, fix):
    with pytest.raises(ModelError) as exc:
        parse_device(lines)
    msg = str(exc.value)
    assert msg.startswith(where + ":"), msg
    assert what in msg, msg
    assert fix in msg, msg


def test_missing_opening_time_and_an_exponent_without_an_opening():
    base = """
        [components.body]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.chute]
        kind = "recovery-device"
        mass = "50 g"
        drag_area = "0.2 m^2"
    """
    with pytest.raises(ModelError) as exc:
        parse_model(model_from_toml(base))
    assert str(exc.value).startswith("components.chute.opening_time: is required but missing. Fix: add opening_time")
    with pytest.raises(ModelError) as exc:
        parse_model(model_from_toml(base + '    opening_time = "0 s"\n        opening_exponent = 2\n'))
    msg = str(exc.value)
    assert msg.startswith("components.chute.opening_exponent: has no effect with opening_time = 0 s"), msg
    assert "Fix: give an opening_time greater than 0 s" in msg


def test_a_device_in_vacuum_is_refused():
    with pytest.raises(ModelError) as exc:
        parse_device(AREA, medium="vacuum")
    msg = str(exc.value)
    assert msg.startswith("model: components.chute: "), msg
    assert "a recovery device in a medium without density (vacuum) never makes any drag" in msg, msg
    assert 'kind = "still-air"' in msg
