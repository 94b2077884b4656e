"""The vectorised dense output (thrustgraph.balance.sampling.dense_states) gives scipy's own numbers.

A result's samples, a peak's refinement and the impulse's quadrature nodes read the solver's dense output between
steps. :func:`dense_states` evaluates DOP853's step polynomials for many times in one pass; it must choose the same
step for each time as scipy's ``OdeSolution`` (a step's end belongs to the step it ends) and do the same arithmetic
in the same order, so the states are equal (``==``), not merely close, at random times, at every step boundary, at
the segment's ends, for every segment of every bundled model. Other methods fall back to ``sol.sol``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import thrustgraph as tg
from thrustgraph.balance.sampling import dense_states
from thrustgraph.flight.integrate import fly_segments
from thrustgraph.models.modelfile import bundled_models


@pytest.mark.parametrize("path", sorted(bundled_models().values()), ids=lambda p: p.stem)
def test_equal_to_scipy_on_every_segment_of_every_bundled_model(path):
    system = tg.assemble(tg.load_model(path))
    segs = fly_segments(system)
    rng = np.random.default_rng(7)
    for _ph, sol, _bal in segs.segments:
        t = np.asarray(sol.t, dtype=float)
        if len(t) < 2 or t[-1] <= t[0]:
            continue
        times = np.concatenate([t, rng.uniform(t[0], t[-1], 64), 0.5 * (t[:-1] + t[1:])])
        assert np.array_equal(dense_states(sol, times), sol.sol(times))
        for s in (t[0], t[len(t) // 2], t[-1], float(rng.uniform(t[0], t[-1]))):
            assert np.array_equal(dense_states(sol, s), sol.sol(s))


@pytest.mark.parametrize("method", ["RK45", "Radau", "LSODA"])
def test_other_methods_go_through_scipy(method):
    sol = solve_ivp(lambda t, y: [y[1], -y[0]], (0.0, 2.0), [1.0, 0.0], method=method, dense_output=True)
    t = np.linspace(0.0, 2.0, 9)
    assert np.array_equal(dense_states(sol, t), sol.sol(t))


def test_a_harmonic_oscillator_against_its_closed_form():
    # y'' = -y from y = 0, y' = 1: y = sin t (closed form); DOP853's dense output at rtol 1e-11
    sol = solve_ivp(lambda t, y: [y[1], -y[0]], (0.0, 6.0), [0.0, 1.0], method="DOP853", dense_output=True,
                    rtol=1e-11, atol=1e-12)
    t = np.linspace(0.0, 6.0, 101)
    assert np.max(np.abs(dense_states(sol, t)[0] - np.sin(t))) < 1e-9
