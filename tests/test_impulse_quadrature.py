"""The total impulse where the thrust changes while no state does, against a closed form, on both paths.

A hover rig held on a test stand, fed a fixed mass flow that its station ramps up along a half cosine over T
(``components.hose.ramp_time``: mdot(t) = M (1 - cos(pi t / T)) / 2, then M). Its jet is a liquid jet at ambient
exit pressure, so its thrust is mdot v_e = mdot^2 / (rho A): F(t) = F_max ((1 - cos(pi t / T)) / 2)^2 up to T and
F_max after. The mean of ((1 - cos x) / 2)^2 over [0, pi] is 3/8 (expand the square: (1 - 2 cos x + cos^2 x) / 4),
so the impulse to t_end >= T is F_max (3 T / 8 + t_end - T): a closed form (no source needed), F_max read off the
thrust signal on the plateau. On the stand no state changes: a single run's steps grow tenfold each, across the
ramp's end (a kink of the thrust's second derivative), where its 3-point Gauss-Legendre quadrature was 4.3e-5 off
before the Gauss-Kronrod check (outcomes.Flight.impulses); the ensemble integrates its impulse as a state.

The 7-point Gauss-Kronrod extension of the 3-point rule (A. S. Kronrod, Nodes and Weights of Quadrature Formulas,
1965; the values are from memory) is checked here by what defines it: it keeps the three Gauss nodes and is exact
for polynomials of degree 11, and not of degree 12.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.balance import outcomes
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model

HOVER = Path(tg.default_model_path()).parent / "hose-fed-hover.toml"


def _stand(ramp: float, end: float) -> tg.Model:
    m = tg.load_model(HOVER)
    m.set("launch.mount", "held")
    m.set("components.hose.supply", "flow")
    m.set("components.hose.mass_flow", "6 kg/s")
    m.set("components.hose.ramp_time", f"{ramp} s")
    m.set("run.end_time", f"{end} s")
    m.set("run.rtol", 1e-9)
    m.set("run.atol", 1e-9)
    return m


def test_the_kronrod_rule_is_exact_to_degree_eleven():
    x = np.concatenate([outcomes._KRONROD_X, outcomes._GAUSS_X])
    w = np.concatenate([outcomes._KRONROD_W, outcomes._KRONROD_W_GAUSS])
    for k in range(12):
        exact = 2.0 / (k + 1) if k % 2 == 0 else 0.0
        assert w @ x ** k == pytest.approx(exact, abs=1e-15), k
    assert abs(w @ x ** 12 - 2.0 / 13) > 1e-4          # degree 12: no longer exact
    np.testing.assert_allclose(outcomes._GAUSS_X, [-math.sqrt(0.6), 0.0, math.sqrt(0.6)])


@pytest.mark.parametrize("method", ["DOP853", "RK45"])
@pytest.mark.parametrize("ramp, end", [(1.0, 3.0), (2.5, 2.5), (0.4, 7.0)])
def test_a_ramped_flow_on_a_stand_gives_the_closed_form_impulse(method, ramp, end):
    m = _stand(ramp, end)
    m.set("run.method", method)
    r = tg.fly(m)
    plateau = r.t >= ramp
    f_max = float(np.max(r.signals["thrust"][plateau])) if plateau.any() else None
    if f_max is None or end == ramp:        # the ramp ends with the run: its last sample is the peak
        f_max = float(r.signals["thrust"][-1])
    closed = f_max * (3.0 * ramp / 8.0 + end - ramp)
    assert r.summary["total_impulse"] == pytest.approx(closed, rel=1e-8)
    # the ensemble's integrated impulse, the same design
    parsed = parse_model(m)
    params = [resolve(parsed, "components.hose.mass_flow")]
    res = fly_designs(parsed, params, np.array([[6.0]]), ["total_impulse"])
    assert res.values[0, 0] == pytest.approx(closed, rel=1e-8)
