"""The ensemble's per-design step arithmetic (thrustgraph.flight.stepkernel): the numpy bodies and the loops compiled
by numba give the same numbers, bit for bit.

Each compiled loop adds its terms in the order numpy does (einsum sums its terms one after the other; the row sums
run row after row) and fuses no multiply-add, and the one function numpy computes with its own vector library (the
step factor's power) is numpy's on both paths; so the two kernels agree exactly, on random arrays with zeros,
infinities and NaNs in them, and on every bundled vehicle that flies as an ensemble, with drawn designs and options
(the statuses, notes, steps, right-hand-side calls, outcomes and separation times of every design). The numpy
kernel's outcomes are held against single flights in tests/test_one_balance.py; equal numbers carry that over to
the compiled kernel.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg
from conftest import HANG_GUARD
from test_one_balance import FLYABLE, _designs, _model, options_st
from thrustgraph.flight import stepkernel
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.models.model import parse_model

needs_numba = pytest.mark.skipif(not stepkernel.AVAILABLE, reason="numba (the extra 'fast') is not installed")


def _both(fn):
    """``fn()`` under the numpy kernel and under the compiled one."""
    out = []
    try:
        for kernel in ("numpy", "numba"):
            stepkernel.use(kernel)
            with np.errstate(all="ignore"):        # as the ensemble runs them
                out.append(fn())
    finally:
        stepkernel.use()
    return out


def _same(a, b) -> bool:
    """Equal arrays, bit for bit: NaN where NaN, the sign of every other number (a zero's too); a NaN's sign bit
    means nothing and differs between numpy releases (0 * -inf)."""
    a, b = np.asarray(a), np.asarray(b)
    if a.dtype == bool or b.dtype == bool:
        return a.shape == b.shape and np.array_equal(a, b)
    return a.shape == b.shape and np.array_equal(a, b, equal_nan=True) and \
        np.array_equal(np.signbit(a) & ~np.isnan(a), np.signbit(b) & ~np.isnan(b))


def _values(rng: np.random.Generator, shape, special: float) -> np.ndarray:
    """Normal numbers over many decades, a fraction ``special`` of them 0, -0, inf, -inf or NaN."""
    x = rng.normal(size=shape) * np.exp(rng.normal(size=shape) * 4.0)
    pick = rng.random(shape) < special
    x[pick] = rng.choice([0.0, -0.0, np.inf, -np.inf, np.nan], size=int(pick.sum()))
    return x


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 1100), ns=st.integers(2, 12),
       special=st.sampled_from([0.0, 0.02, 0.3]))
def test_the_stage_combination_error_norm_and_step_control_agree_bit_for_bit(seed, n, ns, special):
    rng = np.random.default_rng(seed)
    K = _values(rng, (7, ns, n), special)
    Y, Yn = _values(rng, (ns, n), special), _values(rng, (ns, n), special)
    h = np.abs(_values(rng, n, special))
    h[rng.random(n) < 0.1] = 0.0                      # designs that have finished take steps of 0
    scratch = lambda: [np.empty((ns, n)) for _ in range(3)]      # noqa: E731
    for m, coeffs in [(st_, stepkernel.DOPRI_A[st_]) for st_ in range(1, 6)] + [(6, stepkernel.DOPRI_B)]:
        a, b = _both(lambda: stepkernel.combine(coeffs, m, h, Y, K, np.empty((ns, n))).copy())
        assert _same(a, b), m
    rtol, atol = 10.0 ** rng.uniform(-12, -3), 10.0 ** rng.uniform(-12, -3)
    en_a, en_b = _both(lambda: stepkernel.error_norm(K, h, Y, Yn, rtol, atol, *scratch()))
    assert _same(en_a, en_b)
    en = np.where(rng.random(n) < 0.1, 0.0, en_a)     # an error of exactly 0 grows the step tenfold
    live, rejected, h_old = rng.random(n) < 0.8, rng.random(n) < 0.3, rng.random(n)
    ca, cb = _both(lambda: stepkernel.step_control(en, h, h_old, live, rejected))
    assert all(_same(x, y) for x, y in zip(ca, cb))


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 600), ns=st.integers(7, 10),
       special=st.sampled_from([0.0, 0.02]))
def test_the_running_maxima_agree_bit_for_bit(seed, n, ns, special):
    rng = np.random.default_rng(seed)
    K = _values(rng, (7, ns, n), special)
    Y, F, Yn = (_values(rng, (ns, n), special) for _ in range(3))
    an = np.abs(_values(rng, n, special))
    evi = np.flatnonzero(rng.random(n) < 0.2)         # steps cut at an event
    ev_pos = np.full(n, -1, dtype=np.intp)
    ev_pos[evi] = np.arange(len(evi))
    Ye, Fe = _values(rng, (ns, len(evi)), special), _values(rng, (ns, len(evi)), special)
    ane, Qe = np.abs(_values(rng, len(evi), special)), _values(rng, (ns, 4, len(evi)), special)
    th_end = np.ones(n)
    th_end[evi] = rng.random(len(evi))
    h, acc, prop = rng.random(n), rng.random(n) < 0.8, rng.random(n) < 0.5
    start = [_values(rng, n, special) for _ in range(4)]

    def run():
        trackers = [s.copy() for s in start]
        masks = stepkernel.maxima(acc, Y, F, K, Yn, an, ev_pos, Ye, Fe, ane, Qe, th_end, h, prop, *trackers)
        return trackers, masks
    (ta, ma), (tb, mb) = _both(run)
    assert all(_same(x, y) for x, y in zip(ta, tb))
    assert all(_same(x, y) for x, y in zip(ma, mb))


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 400))
def test_an_event_on_one_row_of_the_dense_output_is_located_at_the_same_point(seed, n):
    rng = np.random.default_rng(seed)
    y0, q = rng.normal(size=n), rng.normal(size=(4, n)) * np.exp(rng.normal(size=(4, n)))
    h = np.exp(rng.normal(size=n))
    scale = np.where(rng.random(n) < 0.5, 1.0, rng.random(n))
    y0[rng.random(n) < 0.05] = 0.0                    # events at the step's start
    gb = y0 + h * (scale * (q[0] + scale * (q[1] + scale * (q[2] + scale * q[3]))))
    gb[rng.random(n) < 0.05] = 0.0                    # and at its end
    t0 = rng.uniform(0.0, 50.0, n)
    a, b = _both(lambda: stepkernel.illinois_row(y0, h, q, scale, y0.copy(), gb, t0))
    assert _same(a, b)
    assert np.all((a >= 0.0) & (a <= 1.0))


@needs_numba
@settings(max_examples=14, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(model=st.sampled_from(FLYABLE), options=options_st, seed=st.integers(0, 2**32 - 1))
def test_both_kernels_fly_every_bundled_vehicle_to_the_same_numbers(model, options, seed):
    parsed = parse_model(_model(model, options))
    params, x = _designs(parsed, 4, np.random.default_rng(seed))
    a, b = _both(lambda: fly_designs(parsed, params, x))
    assert (a.status, a.notes, a.rhs_calls) == (b.status, b.notes, b.rhs_calls)
    assert np.array_equal(a.steps, b.steps)
    assert _same(a.values, b.values)
    assert set(a.separations) == set(b.separations)
    assert all(_same(a.separations[k], b.separations[k]) for k in a.separations)


def _fresh(code: str, **env) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=HANG_GUARD,
                          env={**os.environ, **env})


_FLY = ("import numpy as np\n"
        "from thrustgraph.models.modelfile import load_model, default_model_path\n"
        "from thrustgraph.models.model import parse_model\n"
        "from thrustgraph.models.designs import resolve\n"
        "from thrustgraph.flight.ensemble import fly_designs\n"
        "from thrustgraph.flight import stepkernel\n"
        "parsed = parse_model(load_model(default_model_path()))\n"
        "res = fly_designs(parsed, [resolve(parsed, 'components.bottle.fill')], np.array([[0.3], [0.4]]))\n"
        "print(stepkernel.KERNEL, res.status)\n")


def test_a_kernel_variable_that_names_no_kernel_is_one_clear_error(tmp_path):
    # the ensemble still imports (a study of single flights is not stopped); flying an ensemble says what is wrong
    proc = _fresh(_FLY, THRUSTGRAPH_KERNEL="fastest")
    assert proc.returncode != 0
    assert "THRUSTGRAPH_KERNEL (environment variable): 'fastest' is not a kernel. Fix: set it to numpy, numba " \
           "or auto" in proc.stderr
    # through the command line: exit 2, the message, no table written
    table = tmp_path / "sweep.csv"
    proc = subprocess.run([str(Path(sys.executable).with_name("thrustgraph")), "study", str(tg.default_model_path()),
                           "sweep", "--vary", "components.bottle.fill=0.2..0.4 in 3", "--flights", "ensemble",
                           "--engine", "serial", "--quiet", "--table", str(table)], capture_output=True, text=True,
                          timeout=HANG_GUARD, env={**os.environ, "THRUSTGRAPH_KERNEL": "fastest"})
    assert proc.returncode == 2, proc.stderr
    assert "'fastest' is not a kernel" in proc.stderr
    assert not table.exists()


def test_without_numba_the_numpy_kernel_runs_and_asking_for_numba_says_how_to_get_it():
    hide = "import sys\nsys.modules['numba'] = None\n"
    proc = _fresh(hide + _FLY, THRUSTGRAPH_KERNEL="auto")
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.split()[0] == "numpy"
    proc = _fresh(hide + _FLY, THRUSTGRAPH_KERNEL="numba")
    assert proc.returncode != 0
    assert "numba is asked for but is not installed. Fix: pip install 'thrustgraph[fast]'" in proc.stderr


@needs_numba
def test_the_compiled_loops_are_cached_in_thrustgraphs_cache_folder(tmp_path):
    cache = tmp_path / "cache"
    for _ in range(2):                # compiled and written, then read back
        proc = _fresh(_FLY, THRUSTGRAPH_KERNEL="numba", THRUSTGRAPH_CACHE_DIR=str(cache))
        assert proc.returncode == 0, proc.stderr
        assert proc.stdout.split()[0] == "numba"
    written = list((cache / "numba").rglob("*.nbi"))
    assert {p.name.split(".")[0].split("-")[0] for p in written} >= {"stepkernel"}
    assert len(list((cache / "numba").rglob("*.nbc"))) >= 5         # the five loops at least
    # "off" keeps nothing on disk: neither there nor beside the module (numba's own default)
    beside = Path(stepkernel.__file__).parent / "__pycache__"
    before = sorted(beside.glob("stepkernel*.nbi"))
    proc = _fresh(_FLY, THRUSTGRAPH_KERNEL="numba", THRUSTGRAPH_CACHE_DIR="off")
    assert proc.returncode == 0, proc.stderr
    assert len(list(tmp_path.rglob("*.nbi"))) == len(written)
    assert sorted(beside.glob("stepkernel*.nbi")) == before


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 300), deg=st.integers(2, 4))
def test_a_maximum_inside_a_step_is_found_at_the_same_point(seed, n, deg):
    rng = np.random.default_rng(seed)
    C = rng.normal(size=(3, deg + 1, n)) * np.exp(rng.normal(size=(3, deg + 1, n)))
    C[:, :, rng.random(n) < 0.05] = 0.0               # a polynomial that is zero
    hi = np.where(rng.random(n) < 0.3, 1.0, rng.random(n))
    a, b = _both(lambda: stepkernel.norm_max(C, hi))
    assert _same(a, b)


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 300), rest=st.booleans(), way=st.sampled_from([-1.0, 1.0]))
def test_a_guide_or_track_event_is_located_at_the_same_point(seed, n, rest, way):
    rng = np.random.default_rng(seed)
    y0, q = rng.normal(size=(3, n)), rng.normal(size=(3, 4, n))
    u = rng.normal(size=(3, n))
    u /= np.sqrt((u * u).sum(axis=0))
    x0, off, h, t0 = rng.normal(size=(3, n)), rng.normal(size=n), np.exp(rng.normal(size=n)), rng.uniform(0, 9, n)
    value = lambda th: stepkernel._along_value(*(y0[r] + h * (th * (q[r, 0] + th * (q[r, 1] + th * (         # noqa
        q[r, 2] + th * q[r, 3])))) for r in range(3)), x0, u, off, way, rest)
    ga, gb = value(np.zeros(n)), value(np.ones(n))
    a, b = _both(lambda: stepkernel.illinois_along(y0, h, q, x0, u, off, way, rest, ga, gb, t0))
    assert _same(a, b)


@needs_numba
@settings(max_examples=40, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 300), moded=st.integers(0, 3), kinds=st.integers(1, 3))
def test_the_designs_phase_codes_agree(seed, n, moded, kinds):
    rng = np.random.default_rng(seed)
    kin = rng.integers(0, 4, n).astype(np.int8)
    slide = rng.choice([-1.0, 0.0, 1.0], n)
    modes = rng.integers(0, kinds, (moded, n)).astype(np.int8)
    if rng.random() < 0.3:                            # every design in one phase
        kin[:], slide[:], modes[:] = kin[0], slide[0], modes[:, :1]
    fresh = stepkernel.phase_code(kin, slide, modes, None)[0]
    other = fresh.copy()
    other[rng.integers(0, n)] += 1
    for old in (None, fresh, other, fresh[: n - 1]):
        a, b = _both(lambda: stepkernel.phase_code(kin, slide, modes, old))
        assert _same(a[0], b[0]) and a[1:] == b[1:]
        assert a[2] == (old is fresh)
        assert a[1] == (len(np.unique(a[0])) == 1)
