"""A design's ensemble outcomes do not depend on the designs that share its chunk.

Every operation of the ensemble on a design's numbers is elementwise or a sum over that design's own states in a
fixed order, and every iteration (the head coupling's Newton solve, a line's root search, an event's location, a
peak's refinement) stops each design where its own test does. So a design flown alone, in a chunk of others, in a
shuffled chunk, beside very different designs, or in a chunk large enough to be compacted as designs finish, gives
the same row, bit for bit: the identity of two evaluations of one definition (no published source needed).

Drawn by hypothesis (derandomized) over the bundled models the ensemble flies, the physics options of their kinds,
and random designs inside the declared bounds (the draws of tests/test_one_balance.py).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg
from thrustgraph.flight.ensemble import COMPUTED, fly_designs
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model

from test_one_balance import FLYABLE, _designs, _model, options_st

#: looser than the one-balance property's 1e-9 (fewer steps, more rejected ones): the identity holds at any tolerance
TOL = {"rtol": 1e-7, "atol": 1e-7}


def _same(a, b, what: str) -> None:
    assert a.status == b.status, what
    np.testing.assert_array_equal(a.values, b.values, err_msg=what)        # NaN where NaN
    np.testing.assert_array_equal(a.steps, b.steps, err_msg=what)
    assert set(a.separations) == set(b.separations)
    for stage in a.separations:
        np.testing.assert_array_equal(a.separations[stage], b.separations[stage], err_msg=f"{what}: {stage}")


def _rows(res, idx):
    """The rows ``idx`` of an ensemble result, as a result of their own."""
    idx = np.asarray(idx)
    return type(res)([res.status[i] for i in idx], [res.notes[i] for i in idx], res.values[idx], res.outputs,
                     res.steps[idx], 0, 0.0, {k: v[idx] for k, v in res.separations.items()})


@settings(max_examples=14, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(model=st.sampled_from(FLYABLE), options=options_st, seed=st.integers(0, 2**32 - 1))
def test_a_designs_outcomes_do_not_depend_on_its_chunk(model, options, seed):
    """Each design's row (status, outcomes, steps, separation times) flown in a chunk, in the chunk shuffled, alone,
    and beside other designs drawn afresh: equal bit for bit."""
    rng = np.random.default_rng(seed)
    parsed = parse_model(_model(model, options))
    params, x = _designs(parsed, 5, rng)
    _, other = _designs(parsed, 5, rng)
    outs = list(COMPUTED)
    chunk = fly_designs(parsed, params, x, outs, **TOL)
    perm = rng.permutation(len(x))
    _same(fly_designs(parsed, params, x[perm], outs, **TOL), _rows(chunk, perm), "shuffled")
    for i in rng.choice(len(x), 2, replace=False):
        _same(fly_designs(parsed, params, x[i:i + 1], outs, **TOL), _rows(chunk, [i]), f"design {i} alone")
    mixed = fly_designs(parsed, params, np.concatenate([other, x[1::2]]), outs, **TOL)
    _same(_rows(mixed, np.arange(len(other), len(other) + len(x[1::2]))), _rows(chunk, np.arange(1, len(x), 2)),
          "beside other designs")


@pytest.mark.parametrize("n", [1, 2, 17, 33])
def test_compaction_keeps_each_designs_numbers(n):
    """Bottle rockets filled up to 0.8 (high fills end their burn tangentially after thousands of steps) finish at
    different times, and a chunk of more than 16 shrinks its arrays when fewer than half fly on: each design's row
    equals its row alone, whatever the chunk's size. (Once a fill-0.72 design of a dispersion had its burn time
    7.5e-4 apart between chunks of 37 and 120 designs, 3.1e-3 alone: a Newton solve stepped on for every design
    until all had converged.)"""
    parsed = parse_model(tg.load_model(tg.default_model_path()))
    params = [resolve(parsed, "components.bottle.fill"), resolve(parsed, "components.bottle.gauge_pressure")]
    rng = np.random.default_rng(n)
    x = np.column_stack([rng.uniform(0.05, 0.8, n), rng.uniform(1.5e5, 7e5, n)])
    chunk = fly_designs(parsed, params, x)
    for i in range(0, n, max(1, n // 3)):
        _same(fly_designs(parsed, params, x[i:i + 1]), _rows(chunk, [i]), f"design {i} of {n}")
