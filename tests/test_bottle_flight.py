"""The bundled bottle rocket flown from first principles: phases, ledger, audits, the head-acceleration coupling.

Sources of the checks: the mass and momentum residuals are closed-form identities of the control-volume balance
(any fluid-mechanics text, e.g. White, Fluid Mechanics, "linear momentum for an accelerating control volume");
the inertial head rho (g + a) h in the bottle frame is Gommes, Am. J. Phys. 78 (2010) 236; the water-jet thrust
2 Cd A dp is the quasi-steady Bernoulli result (WJTA proceedings, references.md section 7). Everything else here is
a consistency check of the model against itself (common practice, no source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from thrustgraph import fly, integrate, load_model, default_model_path

G0 = 9.80665


@pytest.fixture(scope="module")
def flight():
    return fly()


def test_phases_in_order(flight):
    names = [p.name for p in flight.phases]
    assert names == ["liquid thrust", "gas thrust", "coast", "descent"]
    events = [e.name for e in flight.events]
    assert events == ["start", "guide exit", "liquid exhausted", "gas exhausted", "apogee", "ground impact"]
    assert flight.success and flight.message == "ground impact"
    # the phases tile the flight without gaps
    for a, b in zip(flight.phases, flight.phases[1:]):
        assert a.t_end == b.t_start


def test_mass_and_momentum_closure(flight):
    # mass residual <= 1e-9 relative; momentum residual within the integration tolerance (rtol 1e-9)
    assert abs(flight.audit.mass_relative) <= 1e-9
    assert flight.audit.momentum_relative <= 1e-7
    # mass leaves only while something flows: the liquid plus most of the air
    m = flight.signals["mass"]
    assert m[0] - m[-1] == pytest.approx(flight.summary["propellant_expelled"], rel=1e-12)


def test_ledger_terms_sum_to_mass_times_acceleration(flight):
    total = sum(flight.ledger.values())
    inertia = flight.signals["mass"][:, None] * flight.signals["acceleration"]
    scale = np.max(np.abs(inertia)) + 1.0
    assert np.max(np.abs(total - inertia)) / scale < 1e-12
    terms = {k[1] for k in flight.ledger}
    assert {"drag", "weight", "momentum flux", "pressure thrust", "guide reaction"} <= terms


def test_pressure_thrust_only_while_gas_is_choked(flight):
    pth = flight.ledger[("neck", "pressure thrust")]
    liquid = flight.t < flight.phases[0].t_end
    assert np.all(pth[liquid] == 0.0)
    gas = (flight.t > flight.phases[1].t_start) & (flight.t < flight.phases[1].t_end)
    assert np.any(np.linalg.norm(pth[gas], axis=1) > 1.0)


def test_liquid_head_solved_with_the_acceleration_not_lagged(flight):
    # p_out = p_gas + rho h (f . d), f = g - a, d = -axis: the head pressure recorded at each instant must use the
    # acceleration of that same instant (Gommes, Am. J. Phys. 78 (2010): the inertial term in the bottle frame).
    liquid = flight.t < flight.phases[0].t_end
    a = flight.signals["acceleration"][liquid]
    e = flight.signals["axis"][liquid]
    h = flight.signals["bottle.liquid_height"][liquid]
    g = np.array([0.0, 0.0, -G0])
    f_dot_d = -np.einsum("ij,ij->i", g[None, :] - a, e)
    expected = 998.2 * h * f_dot_d
    hp = flight.signals["bottle.head_pressure"][liquid]
    assert np.max(np.abs(hp - expected)) < 1e-9 * np.max(np.abs(expected))
    # and the thrust is 2 k Cd A (p_gas + head - p_a) at every such instant (Bernoulli, Cd A the jet area, k the
    # velocity-of-approach factor 1 / (1 - (Cd A / A_bore)^2) of the 100 mm bore)
    A = 0.98 * math.pi * 0.021 ** 2 / 4
    k = 1.0 / (1.0 - (A / (math.pi * 0.1 ** 2 / 4)) ** 2)
    p = flight.signals["bottle.pressure"][liquid]
    assert np.allclose(flight.signals["neck.thrust"][liquid], 2 * k * A * (p + hp - 101325.0), rtol=1e-12)


def test_inertial_head_raises_thrust_and_apogee():
    # The apparent gravity in the accelerating frame pushes extra water out (Gommes 2010): switching the
    # head term off must lower the peak thrust and the apogee of the same vehicle.
    on = fly()
    off = fly(**{"components.bottle.inertial_head": False})
    assert on.summary["peak_thrust"] > off.summary["peak_thrust"]
    assert on.summary["apogee"] > off.summary["apogee"]


def test_internal_momentum_term_when_switched_on():
    # Quasi-steady column: contents move toward the outlet at v_t = mdot / (rho A_bore); the term
    # -d/dt(m v_t) = mdot v_t acts toward the outlet (aft), lowering the net force.
    r = fly(**{"components.bottle.internal_momentum": True})
    term = r.ledger[("bottle", "internal momentum rate")]
    liquid = r.t < r.phases[0].t_end
    mdot = r.signals["neck.mass_flow"][liquid]
    vt = mdot / (998.2 * math.pi * 0.1 ** 2 / 4)
    axis = r.signals["axis"][liquid]
    along = -np.einsum("ij,ij->i", term[liquid], axis)
    assert np.allclose(along, mdot * vt, rtol=1e-9)
    assert abs(r.audit.mass_relative) <= 1e-9
    assert r.audit.momentum_relative <= 1e-7
    assert r.summary["apogee"] < fly().summary["apogee"]
    # what the quasi-steady rate leaves out (the column's own acceleration) is reported, not hidden
    assert r.audit.internal_defect > 0.0
    assert fly().audit.internal_defect == 0.0


def test_guide_keeps_the_vehicle_on_its_line_until_exit(flight):
    exit_t = next(e.t for e in flight.events if e.name == "guide exit")
    on = flight.t <= exit_t
    pos = flight.signals["position"][on]
    u = np.array([math.cos(math.radians(80)), 0.0, math.sin(math.radians(80))])
    cross = pos - np.outer(pos @ u, u)
    assert np.max(np.abs(cross)) < 1e-9
    k = np.searchsorted(flight.t, exit_t)
    assert float(pos[-1] @ u) == pytest.approx(1.0, abs=1e-6)
    assert flight.summary["guide_exit_speed"] == pytest.approx(np.linalg.norm(flight.signals["velocity"][k]), rel=1e-9)


def test_axis_follows_the_relative_wind_or_stays_fixed():
    free = fly()
    fixed = fly(**{"launch.attitude": "fixed"})
    coast = (free.t > free.phases[2].t_start + 0.1) & (free.t < free.phases[2].t_end - 0.1)
    v = free.signals["velocity"][coast]
    assert np.allclose(free.signals["axis"][coast], v / np.linalg.norm(v, axis=1)[:, None], atol=1e-12)
    u = np.array([math.cos(math.radians(80)), 0.0, math.sin(math.radians(80))])
    assert np.allclose(fixed.signals["axis"], u[None, :], atol=1e-12)
    assert fixed.summary["range"] != pytest.approx(free.summary["range"], rel=1e-3)


def test_more_pressure_flies_higher():
    low = fly(**{"components.bottle.gauge_pressure": "3 bar"})
    high = fly(**{"components.bottle.gauge_pressure": "6 bar"})
    assert high.summary["apogee"] > low.summary["apogee"]
    assert high.summary["peak_thrust"] > low.summary["peak_thrust"]


def test_held_bottle_test_stand_mode():
    r = fly(**{"launch.mount": "held", "launch.guide_length": "0 m", "launch.elevation": "90 deg"})
    assert np.all(r.signals["position"] == 0.0)
    reaction = r.ledger[("vehicle", "stand reaction")]
    # the stand carries thrust + weight exactly
    assert np.allclose(reaction[:, 2], -(r.signals["thrust"] - r.signals["mass"] * G0), rtol=1e-12, atol=1e-12)
    assert "apogee" not in r.summary
    assert r.message == "propulsion spent on the stand"


def test_csv_and_json_exports(flight, tmp_path):
    text = flight.to_csv()
    header = text.splitlines()[0]
    assert header.startswith("time [s],")
    assert "thrust [N]" in header and "ledger.neck.momentum_flux.x [N]" in header
    assert len(text.splitlines()) == len(flight.t) + 1
    import json
    doc = json.loads(flight.to_json())
    assert doc["summary"]["apogee"]["unit"] == "m"
    assert doc["provenance"]["model_sha256"]


def test_trajectory_outputs_downrange_drift_and_flight_path_angle(flight):
    assert flight.summary["drift"] == pytest.approx(0.0, abs=1e-9)
    assert flight.summary["downrange"] == pytest.approx(flight.summary["range"], rel=1e-12)
    windy = fly(**{"environment.medium.wind_y": "3 m/s"})
    assert windy.summary["drift"] > 1.0            # carried along +y by the crosswind
    assert windy.signals["position"].shape[1] == 3
    # flight-path angle: 80 degrees on the guide, zero at apogee (the velocity is horizontal there)
    assert flight.signals["flight_path_angle"][1] == pytest.approx(math.radians(80), abs=1e-9)
    k = np.argmax(flight.signals["altitude"])
    assert abs(flight.signals["flight_path_angle"][k]) < 1e-6
