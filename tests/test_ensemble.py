"""The vectorised ensemble: agreement with single flights, independence from the chunk, screening, its right-hand
side against the scalar balance, the family it supports, and a closed form."""

from __future__ import annotations


import numpy as np
import pytest

from conftest import model_from_toml
from thrustgraph.flight.arraysystem import ArraySystem, unsupported
from thrustgraph.flight.assembly import assemble
from thrustgraph.models.designs import apply, resolve
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.base.errors import ModelError
from thrustgraph.flight.integrate import fly_segments
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import default_model_path, load_model
from thrustgraph.studies.studyflight import fly_design

PATHS = ["components.bottle.fill", "components.bottle.gauge_pressure", "components.neck.diameter",
         "components.neck.discharge_coefficient", "components.airframe.dry_mass", "components.airframe.drag_coefficient",
         "environment.medium.wind_x", "environment.medium.wind_y", "launch.elevation", "launch.azimuth"]


@pytest.fixture(scope="module")
def parsed():
    return parse_model(load_model(default_model_path()))


def _designs(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.column_stack([rng.uniform(0.1, 0.6, n), rng.uniform(2e5, 7e5, n), rng.uniform(0.009, 0.022, n),
                            rng.uniform(0.9, 1.0, n), rng.uniform(0.08, 0.2, n), rng.uniform(0.2, 0.6, n),
                            rng.uniform(-3, 3, n), rng.uniform(-2, 2, n), np.radians(rng.uniform(60, 90, n)),
                            np.radians(rng.uniform(-20, 20, n))])


def test_ensemble_agrees_with_single_flights_for_20_random_designs(parsed):
    """Both integrate to rtol = atol = 1e-9 (DOP853 single flights, Dormand-Prince 5(4) ensemble)."""
    params = [resolve(parsed, p) for p in PATHS]
    x = _designs(20, seed=2024)
    res = fly_designs(parsed, params, x)
    names = list(res.outputs)
    assert res.status == ["ok"] * 20
    for r in range(20):
        single = fly_design(apply(parsed, params, x[r])).values
        for k, name in enumerate(names):
            a, b = res.values[r, k], single[name]
            if np.isnan(b):                 # does not apply to this vehicle (run time of a flying one): both NaN
                assert np.isnan(a), (r, name)
            elif name == "burn_time":
                # ends where the vessel pressure reaches ambient tangentially (flow ~ (t0 - t)^2), so its time is
                # known only to about the square root of the tolerance
                assert a == pytest.approx(b, rel=5e-3), (r, name)
            elif name in ("impact_y", "impact_x") and abs(b) < 1e-3:
                assert abs(a - b) < 1e-8, (r, name)
            else:
                assert a == pytest.approx(b, rel=2e-6, abs=1e-9), (r, name)


def test_a_design_gives_the_same_numbers_in_any_chunk(parsed):
    params = [resolve(parsed, p) for p in PATHS]
    x = _designs(12, seed=7)
    whole = fly_designs(parsed, params, x)
    parts = [fly_designs(parsed, params, x[a:b]) for a, b in ((0, 5), (5, 6), (6, 12))]
    assert np.array_equal(whole.values, np.vstack([p.values for p in parts]), equal_nan=True)
    again = fly_designs(parsed, params, x[::-1])
    assert np.array_equal(whole.values, again.values[::-1], equal_nan=True)


def test_designs_that_cannot_work_are_screened_not_stalled(parsed):
    params = [resolve(parsed, "components.bottle.gauge_pressure"), resolve(parsed, "components.bottle.fill"),
              resolve(parsed, "components.bottle.bore")]
    x = np.array([[4.5e5, 0.33, 0.1],      # flies
                  [0.0, 0.33, 0.1],        # nothing pushes: no lift-off
                  [0.2e5, 0.9, 0.1],       # too weak to lift a full bottle: no lift-off
                  [4.5e5, 1.2, 0.1],       # fill outside its bounds
                  [4.5e5, 0.33, 0.001]])   # the vessel kind refuses a 1 mm bore
    res = fly_designs(parsed, params, x)
    assert res.status == ["ok", "screened", "screened", "screened", "screened"]
    assert "no lift-off" in res.notes[1] and "no lift-off" in res.notes[2]
    assert "outside its bounds" in res.notes[3] and "bore" in res.notes[4]
    assert np.all(np.isnan(res.values[1:])) and np.all(np.isfinite(res.values[0, :2]))
    tight = fly_designs(parsed, params, x[:1], max_steps=20)
    assert tight.status == ["screened"] and "step budget" in tight.notes[0]


def test_array_rhs_equals_the_scalar_balance_in_every_phase(parsed):
    """The plugins' array builds give the scalar builds' derivatives at states from real flights."""
    params = [resolve(parsed, p) for p in PATHS]
    x = _designs(4, seed=3)
    sysa = ArraySystem(parsed, params, x)
    checked = set()
    for r in range(4):
        segs = fly_segments(assemble(apply(parsed, params, x[r])))
        for ph, sol, bal in segs.segments:
            bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
            for k in (0, len(sol.t) // 2, len(sol.t) - 1):
                y = sol.y[:, k]
                ref = np.array(bal.rhs(float(sol.t[k]), y))[:8]
                Y = np.repeat(sysa.y0[:, [r]], 4, axis=1) * 0.0
                Y[:8] = y[:8, None]
                # the segment's phase, the way it slides included (at rest with slide 0 a vehicle is held)
                d, _ = sysa.rhs(np.full(4, sol.t[k]), Y, np.full((1, 4), ph.modes[0]), np.full(4, ph.kin),
                                slide=np.full(4, ph.slide))
                assert np.allclose(d[:8, r], ref, rtol=1e-12, atol=1e-12), (r, ph.modes, ph.kin)
                checked.add((ph.modes[0], ph.kin))
    assert {(0, 1), (1, 2), (2, 2)} <= checked


def test_drag_free_range_matches_the_closed_form():
    """R = v^2 sin(2 theta) / g (D. Halliday, R. Resnick and J. Walker, Fundamentals of Physics, ch. 4)."""
    m = model_from_toml("""
    [launch]
    mount = "free"
    speed = "20 m/s"
    [run]
    end_time = "10 s"
    [environment.medium]
    kind = "vacuum"
    [components.body]
    kind = "airframe"
    dry_mass = "1 kg"
    """)
    p = parse_model(m)
    th = np.radians(np.linspace(10, 80, 8))
    res = fly_designs(p, [resolve(p, "launch.elevation")], th[:, None], ["range", "apogee", "flight_time"])
    g = 9.80665
    assert np.allclose(res.values[:, 0], 400 * np.sin(2 * th) / g, rtol=1e-8)
    assert np.allclose(res.values[:, 1], 400 * np.sin(th) ** 2 / (2 * g), rtol=1e-8)
    assert np.allclose(res.values[:, 2], 40 * np.sin(th) / g, rtol=1e-8)


def test_models_outside_the_family_are_refused_with_the_reason(float_only_rocket):
    # a kind that builds callables for floats only is flown one design at a time
    p = float_only_rocket[1]
    why = unsupported(p)
    assert why == "components.airframe kind 'float-only-airframe' builds no array callables"
    with pytest.raises(ModelError, match="vectorised ensemble cannot fly this model"):
        fly_designs(p, [resolve(p, "launch.elevation")], np.array([[1.5]]))


def test_a_shared_mode_gives_the_numbers_of_a_mixed_batch(parsed):
    """Where every design shares a mode the kinds receive it as a plain int and skip their selections; each
    design's derivatives and flows must be bit for bit those it gets in a batch of mixed modes."""
    params = [resolve(parsed, p) for p in PATHS]
    x = _designs(4, seed=11)
    sysa = ArraySystem(parsed, params, x)
    Y = sysa.y0.copy()
    Y[6, 1:] *= 0.5                                  # some liquid gone
    Y[3:6] += 3.0                                    # moving
    modes = np.array([[0, 1, 2, 1]], dtype=np.int8)
    for kin in (1, 2):
        k = np.full(4, kin, dtype=np.int8)
        mixed, aux = sysa.rhs(np.zeros(4), Y, modes, k)
        assert not isinstance(sysa.phase(modes, k).modes[0], int)
        for r in range(4):
            one = sysa.subset(np.array([r]))
            ph = one.phase(modes[:, [r]], k[[r]])
            assert ph.modes[0] == modes[0, r] and isinstance(ph.modes[0], int)
            alone, aux1 = one.rhs(np.zeros(1), Y[:, [r]], modes[:, [r]], k[[r]])
            assert np.array_equal(alone[:, 0], mixed[:, r]), (r, kin)
            assert np.array_equal(np.broadcast_to(aux1["thrust"], (1,)), np.broadcast_to(aux["thrust"], (4,))[[r]])


def test_a_subset_is_the_system_built_for_its_rows(parsed):
    """subset() takes rows of the per-design arrays instead of building the system anew; for every phase its
    derivatives, event drives and pressures are bit for bit those of ArraySystem built on the same rows."""
    comp = [p for p in PATHS if p.startswith("components.")]
    params = [resolve(parsed, p) for p in comp]
    x = _designs(9, seed=5)[:, :len(comp)]
    full = ArraySystem(parsed, params, x)
    rows = np.array([7, 1, 4, 4, 0])
    fast, built = full.subset(rows), ArraySystem(parsed, params, x[rows], initial=False)
    assert fast.y0 is None and fast.n == built.n == 5
    rng = np.random.default_rng(6)
    Y = full.y0[:, rows] * rng.uniform(0.3, 1.0, (len(full.y0), 5))
    Y[3:6] += rng.uniform(-5, 20, (3, 5))
    t = rng.uniform(0, 0.2, 5)
    for modes in (np.zeros((1, 5), np.int8), np.array([[0, 1, 2, 1, 0]], np.int8), np.ones((1, 5), np.int8)):
        for kin in (1, 2):
            k = np.full(5, kin, dtype=np.int8)
            d1, a1 = fast.rhs(t, Y, modes, k)
            d2, a2 = built.rhs(t, Y, modes, k)
            assert np.array_equal(d1, d2), (modes, kin)
            assert a1["drive"].keys() == a2["drive"].keys()
            for key in a1["drive"]:
                assert np.array_equal(np.broadcast_to(a1["drive"][key], (5,)), np.broadcast_to(a2["drive"][key], (5,)))
            assert np.array_equal(fast.pressures(Y, modes), built.pressures(Y, modes))
    # a varied launch or environment value: built anew (the same system either way)
    params2 = [resolve(parsed, "launch.elevation")]
    full2 = ArraySystem(parsed, params2, np.radians([[80.0], [85.0], [90.0]]))
    sub2 = full2.subset(np.array([2, 0]))
    assert np.array_equal(sub2.u[2], np.sin(np.radians([90.0, 80.0])))


@pytest.mark.parametrize("stop", [False, True])
def test_apogee_passed_inside_a_step_or_ending_the_flight_agrees_with_single_flights(stop):
    """Apogee changes nothing in the dynamics, so the ensemble records it on the step's dense output without
    cutting the step; with run.stop_at_apogee it ends the flight there. Either way apogee, flight time and range
    agree with single flights (DOP853, events located by scipy) within the integration tolerance."""
    model = load_model(default_model_path()).set("run.stop_at_apogee", stop)
    parsed = parse_model(model)
    params = [resolve(parsed, p) for p in PATHS]
    x = _designs(6, seed=17)
    res = fly_designs(parsed, params, x, ["apogee", "flight_time", "range", "max_speed"])
    assert res.status == ["ok"] * 6
    for r in range(6):
        single = fly_design(apply(parsed, params, x[r])).values
        for k, name in enumerate(res.outputs):
            assert res.values[r, k] == pytest.approx(single[name], rel=2e-6), (stop, r, name)
    if stop:                                  # ended at apogee: shorter than the flight to impact
        up = fly_designs(parse_model(load_model(default_model_path())), params, x, ["flight_time"]).values[:, 0]
        assert np.all(res.values[:, 1] < up)
