"""Triggers (a condition on a signal does something) and staging (a separation drops part of the graph)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from thrustgraph import ModelError, fly, integrate
from conftest import model_from_toml

TWO_STAGE = """
flow_paths = ["booster_motor -> outside", "sustainer -> outside"]
[launch]
mount = "free"
[run]
end_time = "40 s"
[environment.medium]
kind = "vacuum"
[environment.gravity]
kind = "uniform-gravity"
g = "0 m/s^2"
[components.payload]
kind = "airframe"
dry_mass = "1 kg"
[components.sustainer]
kind = "prescribed-jet"
propellant_mass = "1 kg"
mass_flow = "0.2 kg/s"
exhaust_velocity = "1500 m/s"
ignition = "on-trigger"
[components.booster_frame]
kind = "airframe"
dry_mass = "2 kg"
[components.booster_motor]
kind = "prescribed-jet"
propellant_mass = "4 kg"
mass_flow = "0.4 kg/s"
exhaust_velocity = "1000 m/s"
[components.outside]
kind = "surroundings"
[stages.booster]
components = ["booster_frame", "booster_motor"]
[triggers.drop_booster]
when = "time > 11 s"
then = "separate"
stage = "booster"
[triggers.light_sustainer]
when = "time > 11 s"
then = "switch"
component = "sustainer"
mode = "burning"
after = "1 s"
"""


def test_two_stage_rocket_equation_and_closed_bookkeeping():
    # Multistage rocket equation (Sutton & Biblarz, Rocket Propulsion Elements, ch. 4, "multistage vehicles"):
    # dv = sum over stages of ve_i ln(m0_i / mf_i), each stage's initial mass counting everything above it.
    r = integrate(model_from_toml(TWO_STAGE))
    m0_1, mf_1 = 1 + 1 + 2 + 4, 1 + 1 + 2
    m0_2, mf_2 = 1 + 1, 1
    dv = 1000 * math.log(m0_1 / mf_1) + 1500 * math.log(m0_2 / mf_2)
    assert r.signals["speed"][-1] == pytest.approx(dv, rel=1e-6)
    names = [e.name for e in r.events]
    assert names.index("burnout") < names.index("separation") < len(names) - 1 - names[::-1].index("light_sustainer")
    sep = next(e for e in r.events if e.name == "separation")
    assert sep.t == pytest.approx(11.0, abs=1e-9) and "dropped 2 kg" in sep.detail
    met = next(e for e in r.events if e.name == "light_sustainer")
    assert met.t == pytest.approx(11.0, abs=1e-9) and "acts after 1 s" in met.detail
    ign = next(e for e in r.events if e.name == "light_sustainer" and e.component == "sustainer")
    assert ign.t == pytest.approx(12.0, abs=1e-9) and ign.detail == "mode -> burning"
    # staging mass bookkeeping is exact; momentum closes within the integration tolerance
    assert abs(r.audit.mass_relative) <= 1e-12
    assert r.audit.momentum_relative <= 1e-8
    assert r.summary["dropped_mass"] == pytest.approx(2.0, rel=1e-12)
    assert r.summary["propellant_expelled"] == pytest.approx(5.0, rel=1e-9)
    # the dropped stage flies on as its own vehicle, coasting at the separation speed in free space
    booster = r.dropped["booster"]
    v_sep = 1000 * math.log(m0_1 / mf_1)
    assert booster.t[0] == pytest.approx(11.0, abs=1e-9)
    assert np.allclose(booster.signals["speed"], v_sep, rtol=1e-6)
    assert booster.signals["mass"][-1] == pytest.approx(2.0, rel=1e-12)
    # after separation the booster's states are absent from the upper stage (NaN), present before
    k = r.state_names.index("booster_motor.propellant_mass")
    assert np.isnan(r.y[k, -1]) and r.y[k, 0] == pytest.approx(4.0)


def test_trigger_stops_at_an_altitude():
    r = fly()  # the bundled model has no triggers
    assert not any(e.component == "trigger" for e in r.events)
    from thrustgraph import load_model, default_model_path
    m = load_model(default_model_path())
    m.triggers = {"high_enough": {"when": "altitude > 20 m", "then": "stop"}}
    r = integrate(m)
    assert r.message == "stopped by trigger 'high_enough'"
    assert r.signals["altitude"][-1] == pytest.approx(20.0, abs=1e-9)


def test_trigger_on_a_component_signal_with_units():
    from thrustgraph import load_model, default_model_path
    m = load_model(default_model_path())
    m.triggers = {"low_pressure": {"when": "bottle.pressure < 2 bar", "then": "stop"}}
    r = integrate(m)
    assert r.signals["bottle.pressure"][-1] == pytest.approx(2e5, rel=1e-9)


@pytest.mark.parametrize("edit, words", [
    (lambda m: m.stages.update({"bad": {"components": ["bottle"]}}),
     ["stages.bad.components", "split 'bottle' from 'neck'", "same stage"]),
    (lambda m: m.triggers.update({"t": {"when": "altitud > 3 m", "then": "stop"}}),
     ["triggers.t.when", "no signal 'altitud'", "did you mean 'altitude'"]),
    (lambda m: m.triggers.update({"t": {"when": "altitude > 3 kg", "then": "stop"}}),
     ["triggers.t.when", "expected a length"]),
    (lambda m: m.triggers.update({"t": {"when": "altitude = 3 m", "then": "stop"}}),
     ["triggers.t.when", "SIGNAL < VALUE"]),
    (lambda m: m.triggers.update({"t": {"when": "altitude > 3 m", "then": "explode"}}),
     ["triggers.t.then", "separate, switch, stop"]),
    (lambda m: m.triggers.update({"t": {"when": "time > 1 s", "then": "separate", "stage": "nope"}}),
     ["triggers.t.stage", "does not define"]),
    (lambda m: m.triggers.update({"t": {"when": "time > 1 s", "then": "switch", "component": "bottle",
                                        "mode": "open"}}),
     ["triggers.t.mode", "has no mode 'open'", "liquid"]),
])
def test_bad_triggers_and_stages(edit, words):
    from thrustgraph import load_model, default_model_path
    m = load_model(default_model_path())
    edit(m)
    with pytest.raises(ModelError) as exc:
        integrate(m)
    for w in words:
        assert w in str(exc.value), str(exc.value)


def test_triggers_and_stages_round_trip_through_the_file():
    from thrustgraph import dumps_model, loads_model
    m = model_from_toml(TWO_STAGE)
    again = loads_model(dumps_model(m))
    assert again.stages == m.stages and again.triggers == m.triggers
