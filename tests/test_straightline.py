"""The straight-line functions traced from the balance give the general evaluator's numbers.

:mod:`thrustgraph.balance.straightline` runs the one balance once per phase over symbols and compiles what it did.
Its functions must agree with the general evaluator (:meth:`Balance._solve` over floats) at every state of
every phase a flight visits: exactly (``==``; the tracer drops only ``+ 0``, ``* 1`` and ``* 0``, which can
change nothing but the sign of a zero). Drawn by hypothesis over every bundled model, the physics options of
their kinds and mounts, and random designs inside the declared bounds. The reference is the balance itself
(two evaluations of one definition; no published source needed).
"""

from __future__ import annotations

import pickle
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg
from thrustgraph.balance import balance as balance_module
from thrustgraph.balance.balance import SAMPLES_AFTER, Balance
from thrustgraph.balance.sampling import _from_snapshot, dense_states
from thrustgraph.models.modelfile import bundled_models
from thrustgraph.base.errors import IntegrationError
from thrustgraph.flight.integrate import fly_segments
from thrustgraph.balance.straightline import TraceError, compile_function, trace_ops

MODELS = sorted(Path(tg.default_model_path()).parent.glob("*.toml"))

# physics options that change which code the balance runs: (path, values); a model takes those it has
OPTIONS = {
    "components.bottle.internal_momentum": (False, True),
    "components.bottle.inertial_head": (True, False),
    "components.bottle.expansion_exponent": (1.4, 1.0),
    "launch.attitude": ("follow-wind", "fixed"),
    "launch.mount": (None, "guide", "free", "held"),
    "launch.friction": (0.0, 0.3),
}
# designs varied inside the declared bounds
VARIED = {
    "components.bottle.fill": (0.05, 0.6),
    "components.bottle.gauge_pressure": (2e5, 7e5),
    "components.airframe.dry_mass": (0.08, 0.6),
    "launch.elevation_deg": (60.0, 90.0),
}


def _model(path: Path, choices: dict, varied: dict):
    m = tg.load_model(path)
    for key, value in {**choices, **varied}.items():
        section, *rest = key.split(".")
        if value is None or (section == "components" and rest[0] not in m.components):
            continue
        if key == "launch.elevation_deg":
            m.set("launch.elevation", f"{value} deg")
        else:
            m.set(key, value)
    if choices.get("launch.mount") == "free":
        m.set("launch.speed", "5 m/s")
    return m


def _compare(system, *, n_samples: int = 6) -> int:
    """Fly the system; at sample states of every segment compare both evaluators; return the phases checked."""
    segs = fly_segments(system, dense=False, audit=True)
    checked = 0
    for ph, sol, bal in segs.segments:
        if len(sol.t) < 2:
            continue
        bal.set_phase(ph.modes, ph.kin, ph.descending, getattr(ph, "slide", 0.0))
        n = len(sol.y)
        fn = bal.straight_line("rhs" if n == len(system.y0) else "core", n)
        if fn is None:
            continue
        checked += 1
        idx = np.unique(np.linspace(0, len(sol.t) - 1, n_samples).astype(int))
        for k in idx:
            t, y = float(sol.t[k]), sol.y[:, k]
            for want in ("rhs" if n == len(system.y0) else "core", "terms", "drives"):
                line = bal.straight_line(want, n)
                assert line is not None, bal.untraced
                try:
                    ref = bal._solve(t, y.tolist(), want)
                except IntegrationError as exc:
                    with pytest.raises(IntegrationError, match=str(exc)[:30]):
                        line(t, y)
                    continue
                got = line(t, y)
                assert got == ref, (system.parsed.model.source, want, ph.modes, ph.kin, t, got, ref)
    return checked


@pytest.mark.parametrize("path", MODELS, ids=lambda p: p.stem)
def test_every_bundled_model_traces_or_says_why(path):
    system = tg.assemble(tg.load_model(path))
    checked = _compare(system)
    bal = Balance(system)
    traceable = bal._traceable
    if traceable:
        # every phase of a one-definition vehicle becomes a straight line
        assert checked > 0
        assert not bal.untraced
    else:
        assert checked == 0


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(data=st.data())
def test_straight_lines_equal_the_general_evaluator(data):
    path = data.draw(st.sampled_from(MODELS), label="model")
    choices = {k: data.draw(st.sampled_from(v), label=k) for k, v in OPTIONS.items()}
    varied = {k: data.draw(st.floats(*v), label=k) for k, v in VARIED.items()}
    try:
        system = tg.assemble(_model(path, choices, varied))
    except tg.ModelError:
        return                      # an option the model's kinds or mount do not take
    try:
        _compare(system, n_samples=4)
    except IntegrationError:
        return                      # a design that cannot fly (the general evaluator says so too)


def test_a_flight_with_straight_lines_is_the_flight_without(monkeypatch):
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    fast = fly_segments(system, dense=False, audit=True)
    monkeypatch.setattr(balance_module, "STRAIGHT_AFTER", 0)
    slow = fly_segments(tg.assemble(tg.load_model(tg.default_model_path())), dense=False, audit=True)
    assert len(fast.segments) == len(slow.segments)
    for (_, a, _), (_, b, _) in zip(fast.segments, slow.segments):
        assert np.array_equal(a.t, b.t)
        assert np.array_equal(a.y, b.y)


def test_what_the_tracer_cannot_follow_is_refused():
    def python_if(t, s):
        return [s[0] if s[0] > 0.0 else -s[0]]

    def math_call(t, s):
        import math
        return [math.sqrt(s[0])]

    for body in (python_if, math_call):
        with pytest.raises(TraceError):
            compile_function(body, 1)


def test_branches_and_iterations_run_like_the_float_namespace():
    from thrustgraph.base.xp import scalar_ops

    def newton(x, ops):
        # square root of x by Newton from 1 (stops on a relative change)
        def test(c):
            r = c * c - x
            return ops.abs(r) <= 1e-15 * x, r

        def step(c, r):
            return c - r / (2.0 * c)
        return ops.iterate(1.0 + 0.0 * x, test, step, 60)[0]

    def regimes(x, ops):
        return ops.branch(x > 2.0, lambda v: (v, ops.sqrt(v)), lambda v: (2.0 * v, -v), x)

    fn = compile_function(lambda t, s: [newton(s[0], trace_ops), *regimes(s[0], trace_ops)], 1)
    for x in (0.5, 2.0, 3.0, 1e4):
        assert fn(0.0, [x]) == [newton(x, scalar_ops), *regimes(x, scalar_ops)]


def test_compiled_lines_do_not_travel_between_processes():
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    fly_segments(system, dense=False, audit=True)
    assert any(callable(f) for f in system.straight_lines.values())
    again = pickle.loads(pickle.dumps(system.straight_lines))
    assert type(again) is type(system.straight_lines) and len(again) == 0


@pytest.mark.parametrize("path", MODELS, ids=lambda p: p.stem)
def test_the_full_result_over_arrays_of_samples_is_the_sample_by_sample_result(path, monkeypatch):
    # the output samples of a segment evaluated at once (thrustgraph.balance.sampling) against one at a time; numpy's
    # elementwise functions may differ from the math module's in the last bit, and the stand or guide
    # reaction is a difference of large terms: 1e-12 of each signal's largest magnitude
    batched = tg.fly(tg.load_model(path))
    monkeypatch.setattr(Balance, "sampling_balance", lambda self: None)
    single = tg.fly(tg.load_model(path))
    assert list(batched.signals) == list(single.signals)
    assert list(batched.ledger) == list(single.ledger)
    for key, ref in single.signals.items():
        got = batched.signals[key]
        assert got.shape == ref.shape
        assert np.array_equal(np.isnan(got), np.isnan(ref)), key
        scale = np.nanmax(np.abs(ref)) if np.isfinite(ref).any() else 0.0
        # an unchoked nozzle's throat Mach number is the subsonic root of A/A*(M_t) = 1 + d: near choking
        # (d -> 0, at the sample located on the regime change) a last-bit difference in d moves M_t by about
        # 1e-16 / sqrt(d), the conditioning of the physics itself: 1e-10 of the largest magnitude there
        # Elsewhere 1e-12; 1e-11 with numpy 1.24 (the declared floor), whose vectorised powers differ from the
        # math module's in the last bit more often: a converging-diverging nozzle's exit velocity on the cold-gas
        # track measured 1.1e-12 of its largest value there
        rel = 1e-10 if key.rsplit(".", 1)[-1].startswith("throat_") else 1e-11
        assert np.nanmax(np.abs(got - ref), initial=0.0) <= rel * max(scale, 1e-300), key
    for key, ref in single.ledger.items():
        assert np.max(np.abs(batched.ledger[key] - ref), initial=0.0) <= 1e-11 * max(np.max(np.abs(ref)), 1e-300)
    assert batched.summary == pytest.approx(single.summary, rel=1e-12, abs=1e-12)


def test_lines_are_kept_per_number_of_states():
    # a solver with audits passes the accumulators too, one without passes the physical states alone; event drives
    # and snapshots are asked with either (regression: a drive traced with 18 states was handed 8)
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    first = [fly_segments(system, dense=False, audit=False), fly_segments(system, dense=False), tg.integrate(system)]
    again = [fly_segments(system, dense=False, audit=False), fly_segments(system, dense=False), tg.integrate(system)]
    for a, b in zip(first[:2], again[:2]):
        assert np.array_equal(a.segments[-1][1].y, b.segments[-1][1].y)
    assert first[2].summary == again[2].summary


@pytest.mark.parametrize("path", sorted(bundled_models().values()), ids=lambda p: p.stem)
def test_sample_lines_equal_the_general_evaluator_over_arrays(path):
    """A phase's straight line over arrays of output samples (Balance.sample_line, traced over array_trace_ops
    with the parameters as numbers) gives every signal and ledger term of the general array evaluator, ``==``,
    at samples spread over every segment of every bundled model."""
    system = tg.assemble(tg.load_model(path))
    segs = fly_segments(system)
    for ph, sol, bal in segs.segments:
        if len(sol.t) < 2 or sol.t[-1] <= sol.t[0]:
            continue
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
        many = bal.sampling_balance()
        if many is None:
            continue
        t = np.linspace(sol.t[0], sol.t[-1], 37)
        rows = [r for r in dense_states(sol, t)]
        many.set_phase(bal.modes, bal.kinematics, bal.descending, bal.slide)
        ref = _from_snapshot(many._solve(t, rows, "samples"), len(t))
        line = None
        for _ in range(SAMPLES_AFTER):
            line = bal.sample_line("samples", len(rows))
        if line is None:
            assert bal.untraced, "a phase neither traced nor said why"
            continue
        got = _from_snapshot(line(t, rows, ()), len(t))
        assert list(got.values) == list(ref.values) and list(got.ledger) == list(ref.ledger)
        for k, v in ref.values.items():
            assert np.array_equal(got.values[k], v, equal_nan=True), (path.stem, k)
        for k, v in ref.ledger.items():
            assert np.array_equal(got.ledger[k], v), (path.stem, k)


def test_a_refusal_of_the_whole_batch_traces_over_arrays_and_for_one_design():
    # ops.refuse_any: a line with no solution stops the whole batch (arrays) or the flight (one design); traced, it
    # is a test written into the straight line, the same as the general evaluator's
    from thrustgraph.balance.straightline import array_trace_ops, compile_function, trace_ops
    from thrustgraph.base.xp import array_ops, scalar_ops

    def body(ops):
        def f(t, s):
            x = s[0] * 2.0
            ops.refuse_any(x > 1.0, ValueError, "no solution")
            return [x + 1.0]
        return f

    arrays = compile_function(body(array_trace_ops), 1, designs=3)
    assert arrays(0.0, [np.array([0.1, 0.2, 0.3])], tuple(arrays.per_design))[0].tolist() == [1.2, 1.4, 1.6]
    with pytest.raises(ValueError, match="no solution"):
        arrays(0.0, [np.array([0.1, 0.6, 0.3])], tuple(arrays.per_design))
    with pytest.raises(ValueError, match="no solution"):
        body(array_ops)(0.0, [np.array([0.1, 0.6, 0.3])])
    one = compile_function(body(trace_ops), 1)
    assert one(0.0, [0.25]) == [1.5] == body(scalar_ops)(0.0, [0.25])
    with pytest.raises(ValueError, match="no solution"):
        one(0.0, [0.75])
