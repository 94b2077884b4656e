"""The launch guide, the track and the ground against closed forms: speed at guide exit with and without friction and
with the mass change accounted, a vehicle too heavy to lift off, a cart coasting to rest on a track, a powered cart,
the ground-impact speed of a drag-free fall; and the bad-input message for a guide elevation outside 0-90 degrees.

Sources are named beside each check. The vehicles fly in vacuum, so only thrust, weight, friction and the guide or
ground reactions act.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from thrustgraph import integrate
from thrustgraph.base.errors import ModelError
from thrustgraph.flight.arraysystem import unsupported
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model
from conftest import HEADER, model_from_toml

G0 = 9.80665  # standard gravity, exact (3rd CGPM 1901)


def jet_on_guide(*, elevation, length=2.0, mu=0.0, m_dry=1.0, m_prop=1e-5, mdot=1e-6, ve=3e7, azimuth=0.0,
                 mount="guide", speed=0.0, end=30.0, programme=None, attitude="follow-wind"):
    """A body with a constant-flow prescribed jet (thrust mdot ve) on a guide or track, in vacuum."""
    jet = programme or f"""programme = "constant-flow"
        propellant_mass = "{m_prop!r} kg"
        mass_flow = "{mdot!r} kg/s"
        exhaust_velocity = "{ve!r} m/s\""""
    return model_from_toml(f"""
        flow_paths = ["motor -> outside"]
        [launch]
        mount = "{mount}"
        guide_length = "{length} m"
        elevation = "{elevation} deg"
        azimuth = "{azimuth} deg"
        friction = {mu}
        speed = "{speed} m/s"
        attitude = "{attitude}"
        [run]
        end_time = "{end} s"
        [environment.medium]
        kind = "vacuum"
        [components.body]
        kind = "airframe"
        dry_mass = "{m_dry} kg"
        [components.motor]
        kind = "prescribed-jet"
        {jet}
        [components.outside]
        kind = "surroundings"
    """)


def event(r, name):
    return next(e for e in r.events if e.name == name)


# ---------------------------------------------------------------------------
# Speed at guide exit
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("elevation", [90.0, 60.0, 30.0, 5.0])
@pytest.mark.parametrize("mu", [0.0, 0.3])
def test_guide_exit_speed_with_constant_thrust(elevation, mu):
    # Constant thrust T along a straight guide inclined at theta, Coulomb friction mu N with N = m g cos(theta):
    # a = T/m - g (sin(theta) + mu cos(theta)) and v^2 = 2 L a at the guide's end (Newton's second law with
    # constant acceleration and sliding friction; e.g. Halliday, Resnick & Walker, Fundamentals of Physics, ch. 2
    # and ch. 6, "Friction", block on an incline; from memory). Mass change made negligible: T = 30 N from
    # mdot = 1e-6 kg/s at ve = 3e7 m/s, so the 1 kg vehicle loses < 1e-6 kg (1e-6 relative) before it exits.
    L, T, m = 2.0, 30.0, 1.0 + 1e-5
    th = math.radians(elevation)
    r = integrate(jet_on_guide(elevation=elevation, length=L, mu=mu))
    a = T / m - G0 * (math.sin(th) + mu * math.cos(th))
    v_exit = math.sqrt(2 * L * a)
    assert r.summary["guide_exit_speed"] == pytest.approx(v_exit, rel=2e-6)
    e = event(r, "guide exit")
    assert e.t == pytest.approx(v_exit / a, rel=2e-6)
    assert e.detail == f"speed {v_exit:.4g} m/s"
    # on the guide the vehicle moves along it only, and the friction term is in the ledger with -mu N along it
    on = r.t < e.t
    u = np.array([math.cos(th), 0.0, math.sin(th)])
    pos = r.signals["position"][on]
    assert np.allclose(pos - np.outer(pos @ u, u), 0.0, atol=1e-12)
    if mu > 0:
        fr = r.ledger[("vehicle", "friction")][on]
        assert fr[1:] == pytest.approx(np.outer(np.full(on.sum() - 1, -mu * G0 * math.cos(th)) *
                                                r.signals["mass"][on][1:], u), rel=1e-12, abs=1e-12)


@pytest.mark.parametrize("elevation, mu", [(80.0, 0.0), (45.0, 0.2)])
def test_guide_exit_speed_with_the_mass_change_accounted(elevation, mu):
    # Constant mass flow mdot at exhaust speed ve (thrust mdot ve), constant retarding acceleration
    # g' = g (sin(theta) + mu cos(theta)): v(t) = ve ln(m0 / m) - g' t, x(t) = ve [t + (m / mdot) ln(m / m0)] - g' t^2 / 2,
    # m = m0 - mdot t (the rocket equation with a gravity loss, Sutton & Biblarz, Rocket Propulsion Elements, ch. 4,
    # here along the guide). The exit time solves x(t) = L (brentq).
    L, m_dry, m_prop, mdot, ve = 3.0, 1.0, 0.5, 0.1, 300.0
    m0 = m_dry + m_prop
    th = math.radians(elevation)
    gp = G0 * (math.sin(th) + mu * math.cos(th))

    def v(t):
        return ve * math.log(m0 / (m0 - mdot * t)) - gp * t

    def x(t):
        m = m0 - mdot * t
        return ve * (t + m / mdot * math.log(m / m0)) - 0.5 * gp * t * t

    t_exit = brentq(lambda t: x(t) - L, 1e-6, 4.9, xtol=1e-15, rtol=1e-15)
    r = integrate(jet_on_guide(elevation=elevation, length=L, mu=mu, m_dry=m_dry, m_prop=m_prop, mdot=mdot, ve=ve))
    assert event(r, "guide exit").t == pytest.approx(t_exit, rel=1e-8)
    assert r.summary["guide_exit_speed"] == pytest.approx(v(t_exit), rel=1e-8)
    # and the constant-mass formula would be off by more than this test's tolerance: the check sees the mass change
    v_const = math.sqrt(2 * L * (mdot * ve / m0 - gp))
    assert abs(v_const / v(t_exit) - 1) > 1e-3


# ---------------------------------------------------------------------------
# Too heavy to lift off
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("elevation, mu, T", [
    (90.0, 0.0, 5.0),     # 5 N against a 9.8 N weight, vertical
    (30.0, 0.0, 4.0),     # 4 N against m g sin(30 deg) = 4.9 N along the guide
    (30.0, 0.5, 7.0),     # 7 N > m g sin(theta) = 4.9 N but < m g (sin(theta) + mu cos(theta)) = 9.15 N: friction holds
])
def test_a_vehicle_too_heavy_to_lift_off_says_so_and_stays_on_the_pad(elevation, mu, T):
    # It moves only if T > m g (sin(theta) + mu cos(theta)) (static friction up to mu N; Halliday, Resnick & Walker,
    # ch. 6; from memory). Thrust T = mdot ve with mdot = 0.01 kg/s for 1 s; mass 1 kg + propellant.
    r = integrate(jet_on_guide(elevation=elevation, mu=mu, m_dry=1.0 - 0.01, m_prop=0.01, mdot=0.01, ve=T / 0.01))
    assert not r.success and r.status == 2
    assert r.message.startswith("the vehicle did not leave the launch guide: thrust never exceeded its weight")
    assert [e.name for e in r.events] == ["start", "burnout", "no lift-off"]
    assert np.all(r.signals["position"] == 0.0)     # it does not sink through the ground
    assert np.all(r.signals["velocity"] == 0.0)
    assert "guide_exit_speed" not in r.summary


def test_thrust_just_above_the_friction_limit_does_lift_off():
    # The same vehicle as the friction case above with 9.5 N > 9.15 N: it leaves the guide.
    th = math.radians(30.0)
    m = 1.0
    need = m * G0 * (math.sin(th) + 0.5 * math.cos(th))
    assert need < 9.5
    r = integrate(jet_on_guide(elevation=30.0, mu=0.5, m_dry=0.99, m_prop=0.01, mdot=0.01, ve=950.0, length=0.1))
    assert r.summary["guide_exit_speed"] > 0.0


# ---------------------------------------------------------------------------
# Lift-off from a pad (a guide of length 0)
# ---------------------------------------------------------------------------

def _falling_thrust(t0_thrust: float) -> str:
    # thrust falling from T0 to a third of it in 1 s; mass change negligible (ve = 3e7 m/s: < 1e-6 kg lost)
    return f"""programme = "thrust-table"
        exhaust_velocity = "3e7 m/s"
        thrust_curve = {{ units = ["s", "N"], rows = [[0, {t0_thrust!r}], [1, {t0_thrust / 3!r}]] }}"""


@pytest.mark.parametrize("elevation, mu", [(90.0, 0.0), (60.0, 0.0), (30.0, 0.5)])
@pytest.mark.parametrize("above", [1.001, 3.0])
def test_a_pad_lifted_at_the_start_logs_its_lift_off_at_the_start_at_zero_speed(elevation, mu, above):
    # On a pad the vehicle leaves as soon as it moves: it moves at t0 if T(t0) > m g (sin(theta) + mu cos(theta))
    # (static friction up to mu N with N = m g cos(theta); Halliday, Resnick & Walker, Fundamentals of Physics,
    # ch. 6, block on an incline; from memory). Here T(t0) is 0.1 % or 3 times that: lift-off at t0 = 0 at 0 m/s
    # (it was logged a first step later, ~2 us, at ~1e-3 m/s).
    th = math.radians(elevation)
    m = 1.0
    T0 = above * m * G0 * (math.sin(th) + mu * math.cos(th))
    model = jet_on_guide(elevation=elevation, length=0.0, mu=mu, m_dry=m, end=2.0, attitude="fixed",
                         programme=_falling_thrust(T0))
    r = integrate(model)
    assert [(e.name, e.t, e.detail) for e in r.events[:2]] == [("start", 0.0, "mount guide"),
                                                              ("lift-off", 0.0, "speed 0 m/s")]
    assert "guide_exit_speed" not in r.summary and r.phases[0].t_start == 0.0
    if above < 2.0:
        return
    # From t0 on the vehicle is free: with its axis held (attitude fixed) along the pad, u, its acceleration at
    # t0 is T/m u - g z, of magnitude sqrt((T/m)^2 - 2 (T/m) g sin(theta) + g^2) (vector sum; Newton's second
    # law), not T/m - g (sin(theta) + mu cos(theta)) along the pad; T/m falls from there (well above g sin(theta)),
    # so that is the peak acceleration, on a single flight and on an ensemble alike.
    m0 = m + (T0 + T0 / 3.0) / 2.0 / 3e7          # the dry mass and the propellant of the table, impulse / ve
    assert r.summary["launch_mass"] == pytest.approx(m0, rel=1e-14)
    a0 = T0 / m0
    peak = math.sqrt(a0 * a0 - 2.0 * a0 * G0 * math.sin(th) + G0 * G0)
    assert r.summary["peak_acceleration"] == pytest.approx(peak, rel=1e-9)
    parsed = parse_model(model)
    assert unsupported(parsed) is None
    p = resolve(parsed, "components.body.dry_mass")
    res = fly_designs(parsed, [p], np.array([[m]]), ["peak_acceleration", "max_speed"])
    assert res.status == ["ok"]
    assert res.values[0, 0] == pytest.approx(peak, rel=1e-9)
    assert res.values[0, 1] == pytest.approx(r.summary["max_speed"], rel=1e-6)


def test_a_pad_not_lifted_at_the_start_lifts_off_later():
    # T(t0) 0.1 % below m g (sin(theta) + mu cos(theta)), rising: no lift-off at the start. The thrust reaches the
    # limit where T(t) = m(t) g' (the launch mass m0 = m + the table's propellant, impulse / v_e, less what the jet
    # has burnt, the impulse so far over v_e); the pad holds the vehicle until then and it lifts off at that instant
    # at zero speed (its break-away is an event: it was logged once the pad's 1 nm was covered, up to
    # (6e-9 m / j)^(1/3) later for a jerk j = (dT/dt)/m).
    th = math.radians(30.0)
    m, mu = 1.0, 0.5
    need = m * G0 * (math.sin(th) + mu * math.cos(th))
    T0, T1 = 0.999 * need, 2.0 * need
    model = jet_on_guide(elevation=30.0, length=0.0, mu=mu, m_dry=m, end=0.05, programme=f"""programme = "thrust-table"
        exhaust_velocity = "3e7 m/s"
        thrust_curve = {{ units = ["s", "N"], rows = [[0, {T0!r}], [1, {T1!r}]] }}""")
    r = integrate(model)
    lift = event(r, "lift-off")
    ve, k = 3e7, T1 - T0
    m0 = m + (T0 + T1) / 2.0 / ve
    t_star = brentq(lambda t: T0 + k * t - (m0 - (T0 * t + k * t * t / 2.0) / ve) * need / m, 0.0, 1.0, xtol=1e-15)
    assert lift.t == pytest.approx(t_star, abs=1e-9) and lift.detail == "speed 0 m/s"
    assert [e.name for e in r.events].count("lift-off") == 1


def test_a_vehicle_that_slides_back_down_the_guide_stops_at_its_foot():
    # 20 N for 0.5 s lifts a 1 kg vehicle partway up a 100 m guide at 60 degrees; it then slides back to the foot
    # and must stop there (it cannot go below the launch point).
    r = integrate(jet_on_guide(elevation=60.0, length=100.0, m_dry=1.0, end=10.0, programme="""programme = "thrust-table"
        exhaust_velocity = "1e6 m/s"
        thrust_curve = { units = ["s", "N"], rows = [[0, 20], [0.5, 20], [0.51, 0]] }"""))
    assert r.signals["altitude"].min() >= -1e-9


# ---------------------------------------------------------------------------
# Track: rolling resistance and powered carts
# ---------------------------------------------------------------------------

def cart(*, v0, mu, elevation=0.0, azimuth=30.0):
    return model_from_toml(f"""
        [launch]
        mount = "track"
        elevation = "{elevation} deg"
        azimuth = "{azimuth} deg"
        friction = {mu}
        speed = "{v0} m/s"
        [run]
        end_time = "100 s"
        [environment.medium]
        kind = "vacuum"
        [components.body]
        kind = "airframe"
        dry_mass = "3 kg"
    """)


@pytest.mark.parametrize("v0, mu", [(5.0, 0.05), (2.0, 0.01), (12.0, 0.3)])
def test_coasting_cart_comes_to_rest_at_the_closed_form_distance(v0, mu):
    # Rolling resistance mu m g on a level track: constant deceleration mu g, distance v0^2 / (2 mu g), time
    # v0 / (mu g) (constant-acceleration kinematics; e.g. Halliday, Resnick & Walker, Fundamentals of Physics, ch. 2;
    # rolling resistance as a coefficient times the normal force: common practice).
    r = integrate(cart(v0=v0, mu=mu))
    d, t = v0 ** 2 / (2 * mu * G0), v0 / (mu * G0)
    assert r.message == "came to rest on the track" and r.success
    e = event(r, "came to rest")
    assert e.t == pytest.approx(t, rel=1e-8)
    assert e.detail == f"distance {d:.4g} m"
    x = r.signals["position"][-1]
    assert np.hypot(x[0], x[1]) == pytest.approx(d, rel=1e-8)
    assert math.atan2(x[1], x[0]) == pytest.approx(math.radians(30.0), abs=1e-12)
    assert np.all(r.signals["position"][:, 2] == 0.0)         # stays on the track
    assert np.all(np.abs(r.signals["velocity"][-1]) < 1e-12)
    # the speed falls linearly: v = v0 - mu g t
    assert r.signals["speed"][:-1] == pytest.approx(v0 - mu * G0 * r.t[:-1], rel=1e-8, abs=1e-8)


def test_coasting_up_an_inclined_track():
    # Up a slope theta: deceleration g (sin(theta) + mu cos(theta)), distance v0^2 / (2 g (sin(theta) + mu cos(theta)))
    # (same sources). mu = 0.2 > tan(10 deg) = 0.176, so static friction then holds it at the top.
    v0, mu, th = 5.0, 0.2, math.radians(10.0)
    r = integrate(cart(v0=v0, mu=mu, elevation=10.0))
    d = v0 ** 2 / (2 * G0 * (math.sin(th) + mu * math.cos(th)))
    assert np.linalg.norm(r.signals["position"][-1]) == pytest.approx(d, rel=1e-8)
    assert r.signals["position"][-1, 2] == pytest.approx(d * math.sin(th), rel=1e-8)


def test_powered_cart_accelerates_then_coasts_to_rest():
    # Constant thrust T for t_b on a level track with rolling resistance mu m g: v_b = (T/m - mu g) t_b, then it
    # coasts v_b^2 / (2 mu g) further; total x_b + that, with x_b = (T/m - mu g) t_b^2 / 2 (constant acceleration;
    # mass change negligible: 1e-5 kg of 2 kg).
    T, m, mu, tb = 30.0, 2.0, 0.1, 1e-5 / 1e-6
    r = integrate(jet_on_guide(elevation=0.0, mount="track", mu=mu, m_dry=2.0 - 1e-5, end=200.0))
    a = T / m - mu * G0
    vb, xb = a * tb, 0.5 * a * tb ** 2
    assert event(r, "burnout").t == pytest.approx(tb, rel=1e-9)
    k = np.searchsorted(r.t, tb)
    assert r.signals["speed"][k] == pytest.approx(vb, rel=1e-5)
    assert r.signals["position"][-1, 0] == pytest.approx(xb + vb ** 2 / (2 * mu * G0), rel=1e-5)
    assert r.message == "came to rest on the track"


@pytest.mark.parametrize("mount, message", [("track", "at rest on the track"),
                                            ("guide", "the vehicle did not leave the launch guide")])
def test_vehicle_with_nothing_to_push_it_ends_at_once(mount, message):
    r = integrate(model_from_toml(f"""
        [launch]
        mount = "{mount}"
        elevation = "{0 if mount == 'track' else 90} deg"
        [components.body]
        kind = "airframe"
        dry_mass = "1 kg"
    """))
    assert r.message.startswith(message)
    assert np.all(r.signals["position"] == 0.0)


# ---------------------------------------------------------------------------
# Ground impact
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("v0, elevation, h", [(0.0, 90.0, 50.0), (10.0, 0.0, 20.0), (15.0, 45.0, 30.0),
                                              (25.0, 80.0, 5.0)])
def test_ground_impact_speed_of_a_drag_free_fall(v0, elevation, h):
    # Energy conservation: v_impact = sqrt(v0^2 + 2 g h); the impact time solves h + v0 sin(theta) t - g t^2 / 2 = 0
    # (projectile motion without drag; e.g. Halliday, Resnick & Walker, Fundamentals of Physics, ch. 4 and ch. 8;
    # from memory).
    r = integrate(model_from_toml(f"""
        [launch]
        mount = "free"
        altitude = "{h} m"
        speed = "{v0} m/s"
        elevation = "{elevation} deg"
        [run]
        end_time = "60 s"
        [environment.medium]
        kind = "vacuum"
        [components.body]
        kind = "airframe"
        dry_mass = "0.2 kg"
    """))
    vz = v0 * math.sin(math.radians(elevation))
    t_hit = (vz + math.sqrt(vz ** 2 + 2 * G0 * h)) / G0
    v_hit = math.sqrt(v0 ** 2 + 2 * G0 * h)
    assert r.message == "ground impact" and r.success
    e = event(r, "ground impact")
    assert e.t == pytest.approx(t_hit, rel=1e-9)
    assert r.summary["impact_speed"] == pytest.approx(v_hit, rel=1e-9)
    assert e.detail == f"speed {v_hit:.4g} m/s"
    assert r.signals["altitude"][-1] == pytest.approx(0.0, abs=1e-9)
    assert r.signals["altitude"].min() >= -1e-9                # it stops at the ground


# ---------------------------------------------------------------------------
# Bad input
# ---------------------------------------------------------------------------

GUIDE = """
    [launch]
    mount = "guide"
    elevation = "{el}"
    [components.body]
    kind = "airframe"
    dry_mass = "1 kg"
"""


@pytest.mark.parametrize("el, what", [("-5 deg", "must be at least 0 deg, got '-5 deg'"),
                                      ("95 deg", "must be at most 90 deg, got '95 deg'"),
                                      ("1.6 rad", "must be at most 90 deg, got '1.6 rad'"),
                                      ("3 m", "got '3 m' ([length])")])
def test_guide_elevation_outside_0_to_90_degrees_is_refused(el, what):
    with pytest.raises(ModelError) as exc:
        parse_model(model_from_toml(GUIDE.format(el=el)))
    msg = str(exc.value)
    assert msg.startswith("launch.elevation: "), msg
    assert what in msg, msg
    assert "Fix:" in msg


def test_guide_elevation_error_on_the_command_line_exits_2_and_writes_nothing(tmp_path, capsys):
    from thrustgraph.cli import main

    f = tmp_path / "steep.toml"
    f.write_text(HEADER + 'name = "steep"\n' + GUIDE.format(el="120 deg"))
    old = os.getcwd()
    os.chdir(tmp_path)
    try:
        rc = main(["run", "steep.toml", "--json", "out.json"])
    finally:
        os.chdir(old)
    err = capsys.readouterr().err
    assert rc == 2
    assert "steep.toml" in err and "launch.elevation: must be at most 90 deg, got '120 deg'" in err
    assert "Fix: guide (and initial axis) angle above the horizon; give a value at most 90 deg" in err
    assert sorted(p.name for p in Path(tmp_path).iterdir()) == ["steep.toml"]


def test_cart_on_a_slope_too_steep_for_friction_rolls_back():
    # Up a 20 degree track with mu = 0.1: it decelerates at g (sin + mu cos), stops at v0^2 / (2 g (sin + mu cos)),
    # and since tan 20 deg > mu, friction cannot hold it: it rolls back at g (sin - mu cos)
    # (inclined-plane kinematics with Coulomb friction; Halliday, Resnick & Walker, ch. 6).
    th, mu, v0 = math.radians(20.0), 0.1, 6.0
    m = cart(v0=v0, mu=mu, elevation=20.0, azimuth=0.0)
    m.run["end_time"] = "3 s"
    r = integrate(m)
    up = v0 ** 2 / (2 * G0 * (math.sin(th) + mu * math.cos(th)))
    t_top = v0 / (G0 * (math.sin(th) + mu * math.cos(th)))
    along = r.signals["position"] @ np.array([math.cos(th), 0.0, math.sin(th)])
    assert along.max() == pytest.approx(up, rel=1e-8)
    assert event(r, "came to rest").t == pytest.approx(t_top, rel=1e-8)
    assert r.message == "end time reached"
    v_back = G0 * (math.sin(th) - mu * math.cos(th)) * (3.0 - t_top)
    assert r.signals["speed"][-1] == pytest.approx(v_back, rel=1e-8)


def test_cart_held_by_friction_on_a_gentle_slope_stays():
    # tan 3 deg = 0.052 < mu = 0.1: after stopping, static friction holds it (common practice: Coulomb friction)
    r = integrate(cart(v0=2.0, mu=0.1, elevation=3.0, azimuth=0.0))
    assert r.message == "came to rest on the track"


@pytest.mark.parametrize("value, words", [("1", ["launch.elevation", "angle with its unit", "45 deg"]),
                                          (45, ["launch.elevation", "an angle with a unit", "45 deg"])])
def test_an_angle_needs_its_unit(value, words):
    # pint treats angles as dimensionless; a bare number would silently be radians
    m = cart(v0=1.0, mu=0.1)
    m.launch["elevation"] = value
    with pytest.raises(ModelError) as exc:
        integrate(m)
    for w in words:
        assert w in str(exc.value)
