"""The generated per-phase right-hand side (thrustgraph.kernel) against the general balance it specialises.

The generated code must compute the same floating-point operations in the same order, so the check is exact
equality (==, which treats -0.0 and 0.0 alike), not a tolerance: at every solver point of every segment of every
bundled model, of vehicles on a track with friction sliding both ways, and for the drive pressures the events read.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph import kernel
from thrustgraph.assembly import ACCUMULATORS
from thrustgraph.balance import Balance, Kinematics
from thrustgraph.integrate import fly_segments
from conftest import model_from_toml

MODELS = sorted((Path(tg.default_model_path()).parent).glob("*.toml"))


def _assert_same_on_segments(system) -> int:
    checked = 0
    for ph, sol, bal in fly_segments(system, dense=False).segments:
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
        for k in range(sol.y.shape[1]):
            t, y = float(sol.t[k]), sol.y[:, k]
            fast, ref = bal.phase_rhs(t, y), bal.reference_rhs(t, y)
            assert fast == ref, (ph.modes, ph.kin, t)
            n = len(ref) - len(ACCUMULATORS)
            assert bal.phase_core(t, y[:n]) == ref[:n]    # without the audit accumulators (and idle lines)
            assert bal.drives(t, y) == bal._reference_drives(t, y)
            checked += 1
    return checked


@pytest.mark.parametrize("path", MODELS, ids=[p.stem for p in MODELS])
def test_generated_rhs_equals_the_general_balance_on_every_bundled_model(path):
    assert _assert_same_on_segments(tg.assemble(tg.load_model(path))) > 5


@pytest.mark.parametrize("v0, elevation", [(4.0, 0.0), (3.0, 10.0), (-2.0, 5.0)])
def test_generated_rhs_equals_the_general_balance_on_a_sliding_cart(v0, elevation):
    # sliding up a slope, stopping and sliding back down: friction both ways and the at-rest branch
    m = model_from_toml(f"""
        [launch]
        mount = "track"
        elevation = "{elevation} deg"
        friction = 0.05
        speed = "{v0} m/s"
        [run]
        end_time = "20 s"
        [environment.medium]
        kind = "vacuum"
        [components.body]
        kind = "airframe"
        dry_mass = "2 kg"
    """)
    assert _assert_same_on_segments(tg.assemble(m)) > 3


def test_each_phase_and_sliding_direction_gets_its_own_function_and_code_is_shared_by_structure():
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    bal = Balance(system)
    bal.set_phase([0], Kinematics.GUIDE, False, 1.0)
    up = bal.phase_rhs
    bal.set_phase([0], Kinematics.FREE, False)
    free = bal.phase_rhs
    assert up is not free
    bal.set_phase([0], Kinematics.GUIDE, False, 1.0)
    assert bal.phase_rhs is up                      # cached per phase on the balance
    # a second vehicle of the same structure (other values) reuses the compiled code, binding its own values
    model = tg.load_model(tg.default_model_path())
    model.set("components.bottle.fill", 0.2)
    bal2 = Balance(tg.assemble(model))
    bal2.set_phase([0], Kinematics.GUIDE, False, 1.0)
    assert bal2.phase_rhs.__code__ is up.__code__
    y2 = np.array(bal2.system.y0)
    assert bal2.phase_rhs(0.0, y2) == bal2.reference_rhs(0.0, y2)
    assert bal2.phase_rhs(0.0, y2) != bal.phase_rhs(0.0, np.array(bal.system.y0))


def test_uniform_environment_values_are_used_as_given():
    # still air and uniform gravity declare their constant values; the generated code reads them directly
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    assert system.medium.uniform == system.medium(0.0, 0.0)
    assert system.gravity.uniform == system.gravity(0.0)
    src = kernel.phase_source(Balance(system))
    assert "MEDIUM_U" in src and "medium(" not in src
    # a medium that varies is called
    std = tg.load_model(Path(tg.default_model_path()).parent / "small-rocket-standard-atmosphere.toml")
    assert "medium(s[2], t)" in kernel.phase_source(Balance(tg.assemble(std)))


def test_the_general_balance_flies_the_same_flight(monkeypatch):
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    fast = fly_segments(system, dense=False)
    monkeypatch.setattr(Balance, "generate", False)
    slow = fly_segments(system, dense=False)
    assert slow.balance.phase_rhs == slow.balance.reference_rhs     # it really flew the general balance
    assert [dataclasses.astuple(e) for e in fast.events] == [dataclasses.astuple(e) for e in slow.events]
    assert fast.nfev == slow.nfev


@pytest.mark.parametrize("path", MODELS, ids=[p.stem for p in MODELS])
def test_a_run_without_audit_accumulators_takes_the_same_path(path):
    # tolerances scaled by sqrt(n_states / n_physical) keep the RMS error norm, so the same events come out; the
    # times agree to far below the tolerance except where an event is reached tangentially (a tank's pressure
    # approaching ambient), whose time is only as precise as the square root of the tolerance
    system = tg.assemble(tg.load_model(path))
    full, bare = fly_segments(system, dense=False), fly_segments(system, dense=False, audit=False)
    # events the model makes simultaneous (a separation 0.3 s after a 1.2 s burn and a trigger at 1.5 s) come
    # in either order when the two runs round the shared instant differently: compare them instant by instant
    def by_instant(events):
        ev = list(events)
        for _ in ev:                       # put the events of one instant (within 1e-9 s) in name order
            for j in range(len(ev) - 1):
                if abs(ev[j].t - ev[j + 1].t) < 1e-9 and (ev[j].name, ev[j].component) > (ev[j + 1].name,
                                                                                          ev[j + 1].component):
                    ev[j], ev[j + 1] = ev[j + 1], ev[j]
        return [(e.name, e.component) for e in ev]
    assert by_instant(full.events) == by_instant(bare.events)
    n = bare.segments[-1][2].system.n_states - len(ACCUMULATORS)   # the last stage flown
    assert bare.segments[-1][1].y.shape[0] == n
    y_full, y_bare = full.segments[-1][1].y[:n, -1], bare.segments[-1][1].y[:, -1]
    assert np.allclose(y_full, y_bare, rtol=1e-4, atol=1e-4)
    assert abs(bare.nfev - full.nfev) <= 0.3 * full.nfev
