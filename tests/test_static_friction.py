"""Static and kinetic friction on a guide or track: a vehicle at rest is held by the static coefficient
(``launch.static_friction``) and, once it moves, braked by the kinetic one (``launch.friction``), on single flights
and ensembles alike, checked against closed forms.

Closed form (dry friction with two coefficients, mu_s >= mu_k: J. L. Meriam and L. G. Kraige, Engineering
Mechanics: Statics, ch. 6 "Friction", the block on a rough incline; from memory; common practice): a body of mass m
at rest on a straight guide or track inclined at theta, pushed along it by a thrust T(t) = K t, starts where
T = m g (sin(theta) + mu_s cos(theta)) (the root t* of tests/test_breakaway.py's quadratic with mu_s); after that,
m dv/dt = T - m g (sin(theta) + mu_k cos(theta)), so that with the jet's mass loss (thrust v_e dm/dt)
v(t) = v_e ln(m(t*) / m(t)) - g (sin(theta) + mu_k cos(theta)) (t - t*). At the start the acceleration jumps from
0 to g (mu_s - mu_k) cos(theta).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from thrustgraph import integrate
from thrustgraph.base.errors import ModelError
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.models.designs import apply, resolve
from thrustgraph.models.model import parse_model
from test_breakaway import G0, K, _jet_speed, _mass, _rising_thrust, _t_star

CASES = [
    # mount, elevation (deg), kinetic, static, guide length (m)
    ("track", 0.0, 0.2, 0.6, 0.0),      # a cart on a level track
    ("track", 20.0, 0.3, 0.5, 0.0),     # an inclined track: static friction holds it against the slope first
    ("guide", 60.0, 0.2, 0.45, 2.0),    # up a 2 m launch guide
]


def _speed(t1: float, t_star: float, elevation: float, mu_k: float) -> float:
    """The closed form of the module docstring: the speed at t1 after starting at t_star."""
    th = math.radians(elevation)
    return _jet_speed(t_star, t1) - G0 * (math.sin(th) + mu_k * math.cos(th)) * (t1 - t_star)


@pytest.mark.parametrize("mount, elevation, mu_k, mu_s, length", CASES)
def test_static_friction_holds_and_kinetic_friction_brakes_as_the_closed_form(mount, elevation, mu_k, mu_s, length):
    t_star = _t_star(elevation, mu_s)          # the start with the static coefficient
    end = t_star + 0.2
    r = integrate(_rising_thrust(mount, elevation, mu_k, length, end, static=mu_s))
    moved = [e for e in r.events if e.name == "break-away"]
    assert len(moved) == 1 and moved[0].t == pytest.approx(t_star, abs=1e-9)
    # not with the kinetic coefficient: that instant is 0.09-0.4 s earlier in these cases
    assert _t_star(elevation, mu_k) < t_star - 0.05
    before = r.t <= moved[0].t
    assert np.all(r.signals["speed"][before] == 0.0)
    # after it, kinetic friction: the closed-form speed at the end, and the jump of the acceleration
    assert r.t[-1] == pytest.approx(end, abs=1e-12)
    assert r.signals["speed"][-1] == pytest.approx(_speed(end, t_star, elevation, mu_k), abs=1e-9)
    after = np.flatnonzero(r.t > moved[0].t)[0]
    th = math.radians(elevation)
    # a(t) = K t / m(t) - g (sin + mu_k cos): at t* it has jumped from 0 to g (mu_s - mu_k) cos(theta)
    ta = r.t[after]
    assert r.signals["acceleration_magnitude"][after] == pytest.approx(
        K * ta / _mass(ta) - G0 * (math.sin(th) + mu_k * math.cos(th)), rel=1e-9)
    assert K * t_star / _mass(t_star) - G0 * (math.sin(th) + mu_k * math.cos(th)) == pytest.approx(
        G0 * (mu_s - mu_k) * math.cos(th), rel=1e-9)


def test_an_absent_static_friction_is_the_friction():
    mount, elevation, mu, length = CASES[1][:3] + (0.0,)
    end = _t_star(elevation, mu) + 0.2
    one = integrate(_rising_thrust(mount, elevation, mu, length, end))
    both = integrate(_rising_thrust(mount, elevation, mu, length, end, static=mu))
    assert np.array_equal(one.y, both.y) and np.array_equal(one.t, both.t)


def test_the_ensemble_starts_each_design_with_its_own_static_friction():
    mount, elevation, mu_k, _, length = CASES[1]
    statics = np.array([0.4, 0.5, 0.6, 0.7])           # all above tan(20 deg): held at first
    end = _t_star(elevation, float(statics.max())) + 0.2
    parsed = parse_model(_rising_thrust(mount, elevation, mu_k, length, end, static=0.5))
    p = resolve(parsed, "launch.static_friction")
    res = fly_designs(parsed, [p], statics[:, None], ["top_speed", "run_time"])
    assert res.status == ["ok"] * len(statics)
    for k, mu_s in enumerate(statics):
        want = _speed(end, _t_star(elevation, float(mu_s)), elevation, mu_k)
        assert res.values[k, 0] == pytest.approx(want, abs=1e-8), mu_s
        # the same design as a single flight
        single = integrate(apply(parsed, [p], [float(mu_s)]))
        assert single.signals["speed"][-1] == pytest.approx(res.values[k, 0], abs=1e-8)


def test_a_static_friction_below_the_kinetic_one_is_refused():
    with pytest.raises(ModelError, match=r"launch\.static_friction: 0\.2 is below friction 0\.3"):
        parse_model(_rising_thrust("track", 0.0, 0.3, 0.0, 1.0, static=0.2))
    parsed = parse_model(_rising_thrust("track", 0.0, 0.3, 0.0, 1.0, static=0.5))
    p = resolve(parsed, "launch.static_friction")
    with pytest.raises(ModelError, match="is below friction"):
        apply(parsed, [p], [0.1])
    # in an ensemble the design is screened with the same message, the others fly
    res = fly_designs(parsed, [p], np.array([[0.1], [0.4]]), ["top_speed"])
    assert res.status == ["screened", "ok"]
    assert "static_friction: 0.1 is below friction 0.3" in res.notes[0]
