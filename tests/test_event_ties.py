"""Events that reach their zero at the same point fire together, on a single flight and an ensemble alike.

A trigger watching a signal that stops exactly at its threshold (``booster_motor.burn_clock > 1.2 s`` with a
thrust table that ends at 1.2 s: the burn clock stops at the burnout event) reaches its zero at the burnout's own
point. The two roots are equal; which of them a root finder sorts first is rounding. The rule
(:func:`thrustgraph.flight.integrate.reached`): every event that crosses in the step and has reached its zero at
the point of the event that ends the step fires with it. Before it, the single flight on a test stand ended its
run at burnout (solve_ivp reports only the first of equal terminal roots) while the ensemble separated the booster
0.3 s later. The expected times are the model's own numbers (burnout at the table's last row, the trigger's
delay): a closed-form identity, no source needed.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.flight.integrate import fly_segments, reached
from thrustgraph.models.designs import apply, resolve
from thrustgraph.models.model import parse_model

DEMO = Path(tg.default_model_path()).parent / "two-stage-demo.toml"
BURNOUT, DELAY = 1.2, 0.3           # the booster's table ends at 1.2 s; the trigger acts 0.3 s after


def _demo(mount: str, when: str, method: str) -> tg.Model:
    m = tg.load_model(DEMO)
    m.set("launch.mount", mount)
    if mount == "free":
        m.set("launch.speed", "5 m/s")        # launched free, off the pad at 5 m/s
    m.set("triggers.drop_booster.when", when)
    m.set("run.method", method)
    m.set("run.rtol", 1e-9)
    m.set("run.atol", 1e-9)
    return m


def _single(m: tg.Model) -> dict:
    return {stage: t for t, stage, *_ in fly_segments(tg.assemble(m)).separations}


def _ensemble(m: tg.Model) -> dict:
    parsed = parse_model(m)
    params = [resolve(parsed, "components.upper_frame.dry_mass")]
    x = np.array([[0.15], [0.18], [0.25]])
    res = fly_designs(parsed, params, x, ["apogee", "flight_time"])
    singles = [_single(apply(parsed, params, row)) for row in x]
    return res, singles


@pytest.mark.parametrize("mount", ["held", "guide", "free"])
@pytest.mark.parametrize("method", ["RK45", "DOP853"])
def test_a_trigger_at_the_burnout_time_fires_at_burnout_on_every_mount(mount, method):
    # the stand is the case that differed: its run ended at burnout before the trigger could act
    sep = _single(_demo(mount, f"booster_motor.burn_clock > {BURNOUT} s", method))
    assert sep == {"booster": pytest.approx(BURNOUT + DELAY, abs=1e-9)}


@pytest.mark.parametrize("mount", ["held", "guide", "free"])
@pytest.mark.parametrize("when, expect", [
    (f"booster_motor.burn_clock > {BURNOUT} s", BURNOUT + DELAY),        # the tie: reached at burnout
    ("time > 1.2 s", BURNOUT + DELAY),                                   # the time reaches it at burnout too
    ("booster_motor.burn_clock > 1.1 s", 1.1 + DELAY),                   # crossed before burnout
    ("booster_motor.burn_clock > 1.3 s", None),                          # never: the clock stops at 1.2 s
])
def test_ensembles_and_single_flights_separate_at_the_same_time(mount, when, expect):
    res, singles = _ensemble(_demo(mount, when, "RK45"))
    for r, single in enumerate(singles):
        if expect is None:
            assert single == {} and np.isnan(res.separations["booster"][r])
        else:
            assert single["booster"] == pytest.approx(expect, abs=1e-9)
            assert res.separations["booster"][r] == pytest.approx(expect, abs=1e-9)


def test_reached_is_one_rule_for_floats_and_arrays():
    g0 = np.array([-1.0, -1.0, 0.0, 1.0, 1.0])
    g1 = np.array([0.0, -1e-15, 0.0, 0.0, -2.0])
    for direction in (1.0, -1.0, 0.0):
        arr = reached(g0, g1, direction)
        assert arr.tolist() == [bool(reached(float(a), float(b), direction)) for a, b in zip(g0, g1)]
    assert reached(g0, g1, 1.0).tolist() == [True, False, True, False, False]
    assert reached(g0, g1, -1.0).tolist() == [False, False, True, True, True]
