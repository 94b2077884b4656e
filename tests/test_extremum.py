"""Brent's bounded minimum (thrustgraph.base.extremum) against scipy's minimize_scalar(method="bounded"): the same
steps in the same order, so the same answer, compared with ``==`` on drawn smooth functions and intervals
(reference: scipy, a general-purpose library; the method is R. P. Brent, *Algorithms for Minimization without
Derivatives*, 1973, ch. 5)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import minimize_scalar

from thrustgraph.base.extremum import bounded_minimum

_FUNCTIONS = {
    "parabola": lambda c, w: (lambda x: (x - c) ** 2 * w),
    "cosine": lambda c, w: (lambda x: -math.cos(w * (x - c))),
    "quartic with a flat bottom": lambda c, w: (lambda x: w * (x - c) ** 4 + 1e-3 * x),
    "a peak's negative (speed near burnout)": lambda c, w: (lambda x: -(30.0 - w * (x - c) ** 2 - (x - c) ** 3)),
    "monotone (minimum at an end)": lambda c, w: (lambda x: w * x + c),
}


@settings(max_examples=60, deadline=None, derandomize=True)
@given(name=st.sampled_from(sorted(_FUNCTIONS)), c=st.floats(-5.0, 5.0), w=st.floats(0.1, 10.0),
       lo=st.floats(-10.0, 10.0), width=st.floats(1e-6, 20.0), rel=st.sampled_from([1e-5, 1e-9, 1e-12]))
def test_the_same_answer_as_scipys_bounded_method(name, c, w, lo, width, rel):
    fun = _FUNCTIONS[name](c, w)
    hi = lo + width
    xatol = rel * max(1.0, abs(hi)) + 1e-9 * width
    x, fx, n = bounded_minimum(fun, lo, hi, xatol)
    ref = minimize_scalar(fun, bounds=(lo, hi), method="bounded", options={"xatol": xatol})
    assert x == ref.x and fx == ref.fun and n == ref.nfev


def test_the_minimum_of_a_parabola_to_the_tolerance():
    x, fx, _ = bounded_minimum(lambda x: (x - 0.3) ** 2, -1.0, 2.0, 1e-12)
    assert x == pytest.approx(0.3, abs=1e-9) and fx <= 1e-17


def test_a_function_that_gives_nan_ends_the_search_without_an_error():
    x, fx, n = bounded_minimum(lambda x: math.nan, 0.0, 1.0, 1e-9, maxiter=50)
    assert math.isnan(fx) and n <= 50
