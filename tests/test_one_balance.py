"""One balance for every path: a single flight and an ensemble of the same designs give the same numbers.

Both evaluate :class:`thrustgraph.balance.Balance` over the same :class:`thrustgraph.plan.Plan` (floats for a
single flight, numpy arrays of designs for an ensemble), so their right-hand sides agree to rounding
(1e-12 relative) and their outcomes to the integration tolerance (1e-6 relative at rtol = atol = 1e-9). The
properties are drawn by hypothesis over the bundled models the ensemble flies, every physics option of their
kinds and of the mount, the stage and trigger settings of the models with stages (what separates, the
conditions, the delays), and random designs inside the declared bounds; the right-hand sides also of the
vehicles that fly on and fall away after a separation, and the triggers' conditions. The reference for agreement is the
balance itself, a closed-form identity between two evaluations of one definition (no published source needed).

Burn time is compared more loosely: it ends where the vessel pressure reaches ambient tangentially (the
flow falls like (t0 - t)^2), a double root that any event locator finds only to about the square root of
the tolerance (common practice of numerical event location, no source).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg
from thrustgraph.arraysystem import ArraySystem, unsupported
from thrustgraph.balance import Balance, Kinematics
from thrustgraph.designs import apply, resolve
from thrustgraph.ensemble import COMPUTED, fly_designs
from thrustgraph.errors import IntegrationError
from thrustgraph.integrate import available_signals, fly_segments
from thrustgraph.model import parse_model
from thrustgraph.separation import stage_models
from thrustgraph.staging import condition, resolve_thresholds
from thrustgraph.studyflight import fly_design
from thrustgraph.xp import array_ops, scalar_ops

MODELS = sorted(Path(tg.default_model_path()).parent.glob("*.toml"))
# the physics options of the kinds and mounts these models use: (path, values); a model takes those of its
# components
OPTIONS = {
    "components.bottle.internal_momentum": (False, True),
    "components.bottle.inertial_head": (True, False),
    "components.bottle.expansion_exponent": (1.4, 1.0, 1.2),
    "environment.medium.wind_exponent": (0.142857, 0.0),
    "launch.attitude": ("follow-wind", "fixed"),
    "launch.mount": ("guide", "free"),
    "launch.friction": (0.0, 0.3),
    # the stages and triggers of the two-stage demo: what separates, on which condition, and what it does
    "stages.booster.components": (["booster_frame", "booster_motor"], ["booster_motor"]),
    "triggers.drop_booster.when": ("booster_motor.burn_clock > 1.2 s", "time > 0.9 s", "altitude > 40 m",
                                   "booster_motor.propellant_mass < 0.01 kg", "speed > 95 m/s",
                                   "vertical_speed < -2 m/s"),
    "triggers.drop_booster.then": ("separate", "separate", "stop"),
    "triggers.light_sustainer.when": ("time > 1.5 s", "mass < 0.3 kg", "altitude > 60 m"),
}
#: trigger delays drawn inside their declared bounds (0 s and up; a second at most, so that they act in flight)
DELAYS = ("triggers.drop_booster.after", "triggers.light_sustainer.after")
# varied per design, with ranges inside the declared bounds (a model takes those of its components)
VARIED = {
    "components.bottle.fill": (0.05, 0.6),
    "components.bottle.gauge_pressure": (2e5, 7e5),
    "components.airframe.dry_mass": (0.08, 0.6),
    "components.motor.exhaust_velocity": (1500.0, 2200.0),
    "environment.medium.wind_speed": (0.0, 8.0),
    "launch.elevation": (np.radians(60.0), np.radians(90.0)),
    "components.upper_frame.dry_mass": (0.1, 0.4),
    "components.booster_frame.dry_mass": (0.05, 0.3),
    "components.booster_motor.exhaust_velocity": (600.0, 900.0),
    "components.sustainer.exhaust_velocity": (600.0, 900.0),
}


def _applies(parsed, path: str) -> bool:
    section, owner = path.split(".")[:2]
    if section == "components":
        return owner in parsed.params
    if section == "environment":
        return path.split(".")[-1] in {f.name for f in parsed.env_kinds[owner].parameters}
    if section in ("stages", "triggers"):
        return owner in getattr(parsed.model, section)
    return True


def _flyable() -> list[Path]:
    return [p for p in MODELS if unsupported(parse_model(tg.load_model(p))) is None]


FLYABLE = _flyable()


def test_the_ensemble_flies_the_bottle_rocket_family():
    # the models whose every kind builds array callables; the others fly one design at a time (the study says
    # so at its start)
    assert {p.stem for p in FLYABLE} >= {"bottle-rocket", "twin-nozzle-bottle-rocket",
                                        "small-rocket-standard-atmosphere", "rocket-with-parachute",
                                        "two-stage-demo"}


def _model(path: Path, options: dict):
    m = tg.load_model(path)
    parsed = parse_model(m)
    for k, v in options.items():
        if _applies(parsed, k):
            m.set(k, v)
    if options.get("launch.mount") == "free":
        m.set("launch.speed", "5 m/s")
    for k in DELAYS:
        if k in options and _applies(parsed, k):
            m.set(k, f"{options[k]!r} s")
    m.set("run.rtol", 1e-9)
    m.set("run.atol", 1e-9)
    # the ensemble's integrator family: DOP853 at rtol 1e-9 misses the tight-tolerance max speed and impulse by
    # ~1e-6 where the nozzle unchokes (a kink in the derivatives that no event marks), RK45 and Radau by 1e-9
    m.set("run.method", "RK45")
    return m


def _designs(parsed, n: int, rng: np.random.Generator):
    used = {k: v for k, v in VARIED.items() if _applies(parsed, k)}
    params = [resolve(parsed, p) for p in used]
    x = np.column_stack([rng.uniform(lo, hi, n) for lo, hi in used.values()])
    return params, x


options_st = st.fixed_dictionaries({**{k: st.sampled_from(v) for k, v in OPTIONS.items()},
                                    **{k: st.floats(0.0, 1.0) for k in DELAYS}})
STAGED = [p for p in FLYABLE if tg.load_model(p).stages]


def _vehicle(parsed, rng: np.random.Generator):
    """The whole vehicle, or (drawn) what flies on or falls away after one of its separations: the models an
    ensemble's designs fly after a separation, from the same definition as a single flight's."""
    pick = rng.integers(0, 1 + 2 * len(parsed.stages))
    if pick == 0:
        return parsed
    stage = sorted(parsed.stages)[(pick - 1) // 2]
    return stage_models(parsed, parsed.stages[stage])[(pick - 1) % 2]


@settings(max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(model=st.sampled_from(FLYABLE), options=options_st, seed=st.integers(0, 2**32 - 1))
def test_array_and_scalar_right_hand_sides_agree_to_rounding(model, options, seed):
    """Random designs, random states and random phases (every mode of every slot, guide or free per design):
    each design's derivatives from the array balance equal those of its own single-flight balance. (The Newton
    solve of the head coupling stops when every design has converged, so a design may take one more step in a
    batch than alone: a difference at the rounding level of the terms it sums.)"""
    rng = np.random.default_rng(seed)
    whole = parse_model(_model(model, options))
    parsed = _vehicle(whole, rng)
    params, x = _designs(parsed, 6, rng)
    sysa = ArraySystem(parsed, params, x)
    n = sysa.n
    Y = sysa.y0.copy()
    Y[0:3] += rng.uniform(-2.0, 2.0, (3, n))
    Y[2] = np.abs(Y[2]) + 1.0
    Y[3:6] = rng.uniform(-20.0, 40.0, (3, n))
    for name, (i, cnt) in sysa.slices.items():
        Y[i:i + cnt] *= rng.uniform(0.2, 1.0, (cnt, n))
    modes = np.array([rng.integers(0, len(sysa.modes[nm]), n) for nm in sysa.moded], dtype=np.int8)
    kins = (Kinematics.GUIDE, Kinematics.FREE) if parsed.launch.mount == "guide" else (Kinematics.FREE,)
    kin = rng.choice(kins, n).astype(np.int8)
    t = rng.uniform(0.0, 1.0, n)
    out, aux = sysa.rhs(t, Y, modes, kin)
    # the triggers' conditions (staging.condition) over the designs, component signals from the snapshot
    triggers = resolve_thresholds(whole.triggers, available_signals(tg.assemble(whole))) if whole.triggers \
        else ()
    conds = [np.broadcast_to(condition(tr, t, list(Y), sysa.x0, lambda tt, ss: sysa.snapshot(tt, ss, aux["phase"]),
                                       array_ops), (n,)) for tr in triggers]
    for r in range(n):
        system = tg.assemble(apply(parsed, params, x[r]))
        bal = Balance(system)
        bal.set_phase([int(m) for m in modes[:, r]], int(kin[r]), False)
        y = np.concatenate([Y[:-1, r], np.zeros(len(system.y0) - (len(Y) - 1))])
        try:
            ref = bal.core(float(t[r]), y)
        except IntegrationError:
            assert aux["singular"][r]
            continue
        x0 = system.y0[:3]
        for tr, c in zip(triggers, conds):
            one = condition(tr, float(t[r]), y, x0, bal.evaluate, scalar_ops)
            assert (np.isnan(one) and np.isnan(c[r])) or c[r] == pytest.approx(one, rel=1e-12, abs=1e-12), tr.name
        got = out[:-1, r]
        scale = np.maximum(np.abs(ref), 1e-300)
        # an acceleration is a sum of terms that largely cancel (thrust, weight, drag): its rounding is relative
        # to the terms, (thrust + weight) / M
        terms = float(np.broadcast_to(aux["thrust"], (n,))[r] / np.broadcast_to(aux["mass"], (n,))[r]) + 9.80665
        scale[3:6] = np.maximum(scale[3:6], terms)
        assert np.all(np.abs(got - np.array(ref)) <= 1e-12 * scale + 1e-300), (r, got, ref)
        drives = bal.drives(float(t[r]), y)
        for key, d in aux["drive"].items():
            assert np.asarray(d)[r] == pytest.approx(drives[key], rel=1e-12, abs=1e-9)


@settings(max_examples=12, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(model=st.sampled_from(FLYABLE), options=options_st, seed=st.integers(0, 2**32 - 1))
def test_ensemble_outcomes_equal_single_flights(model, options, seed):
    """The same designs flown as an ensemble and one at a time, rtol = atol = 1e-9: every outcome within 1e-6
    (burn time within 5e-3: see the module docstring). Single flights use RK45 like the ensemble: the
    difference measured is then the definition, not the choice of integrator."""
    _outcomes_agree(parse_model(_model(model, options)), np.random.default_rng(seed))


@settings(max_examples=8, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(model=st.sampled_from(STAGED), options=options_st, seed=st.integers(0, 2**32 - 1))
def test_staged_ensembles_equal_single_flights(model, options, seed):
    """The models with stages and triggers under drawn stage and trigger settings: each design separates, waits
    and fires at its own time; its outcomes (the whole flight's, over every stage it flew) and its separation
    times equal those of its single flight (1e-6 at rtol = atol = 1e-9)."""
    _outcomes_agree(parse_model(_model(model, options)), np.random.default_rng(seed))


def _thrust_table(parsed) -> bool:
    return any(getattr(p, "programme", "") == "thrust-table" or getattr(p, "thrust_curve", None) is not None
               for p in parsed.params.values())


def _outcomes_agree(parsed, rng: np.random.Generator) -> None:
    # Each path's own error at rtol = atol = 1e-9 reaches a few 1e-6 where a coarse thrust table's corners (kinks
    # no event marks) sit inside steps: measured on drawn two-stage demos against both paths converged at 1e-12,
    # apogee 1.4e-6 (single flight) and 1.0e-6 (ensemble) off on opposite sides, or 2.8e-6 and 0.5e-6. Their
    # difference is held to 5e-6 there; 1e-6 everywhere else.
    tol = 5e-6 if _thrust_table(parsed) else 1e-6
    params, x = _designs(parsed, 3, rng)
    names = list(COMPUTED)                 # the registry outcomes the ensemble computes itself
    res = fly_designs(parsed, params, x, names)
    assert set(res.separations) == set(parsed.stages)
    for r in range(len(x)):
        one = apply(parsed, params, x[r])
        single = fly_design(one)
        assert res.status[r] == single.status
        if single.status != "ok":
            continue
        if parsed.stages:
            seps = {stage: t for t, stage, *_ in fly_segments(tg.assemble(one)).separations}
            for stage, times in res.separations.items():
                if stage in seps:
                    assert times[r] == pytest.approx(seps[stage], rel=1e-6, abs=1e-9), (r, stage)
                else:
                    assert np.isnan(times[r]), (r, stage)
        for k, name in enumerate(names):
            if name not in single.values:
                continue
            a, b = float(res.values[r, k]), single.values[name]
            if np.isnan(b):                      # does not apply to this flight (no guide...): on both paths
                assert np.isnan(a), (r, name)
            elif name == "burn_time":
                assert a == pytest.approx(b, rel=5e-3), (r, name)
            elif name == "peak_acceleration" and _thrust_table(parsed):
                # the peak sits on a corner of the thrust table (a kink no event marks): each path finds it on
                # its own dense output, whose polynomial rounds the corner (measured 1.8e-5 to 1.2e-4)
                assert a == pytest.approx(b, rel=5e-4), (r, name)
            elif name in ("dropped_mass", "propellant_expelled"):
                # a difference of masses (what a separation drops may be a spent motor's last grams): its error
                # is relative to the masses differenced, not to the difference
                size = single.values["launch_mass"]
                assert a == pytest.approx(b, rel=tol, abs=tol * size), (r, name, a, b)
            elif name in ("range", "impact_x", "impact_y"):
                # where the vehicle lands: its error is relative to the size of the flight, not to the distance
                # (a near-vertical flight lands close to the pad)
                size = max(abs(single.values.get("apogee", 0.0)), abs(b), 1.0)
                assert a == pytest.approx(b, rel=tol, abs=tol * size), (r, name, a, b)
            else:
                assert a == pytest.approx(b, rel=tol, abs=1e-9), (r, name, a, b)


def test_internal_momentum_no_longer_differs_between_paths():
    """The bundled bottle rocket with internal momentum: a single run and an ensemble of the same design once
    differed by 1.5e-3 in apogee (the ensemble solved the guide phase with one Newton step). Now one balance."""
    m = _model(tg.default_model_path(), {"components.bottle.internal_momentum": True})
    parsed = parse_model(m)
    p = resolve(parsed, "components.bottle.fill")
    res = fly_designs(parsed, [p], np.array([[parsed.params["bottle"].fill]]), ["apogee", "max_speed"])
    single = fly_design(parsed).values
    assert res.values[0, 0] == pytest.approx(single["apogee"], rel=1e-6)
    assert res.values[0, 1] == pytest.approx(single["max_speed"], rel=1e-6)


def test_a_large_study_the_ensemble_cannot_fly_says_so_when_it_starts():
    """200 designs of a model with a kind that builds no array callables: the study says at its start that it
    flies them one at a time, and why. (The designs are outside their declared bounds, so they are screened
    before any flight: the notice comes first.)"""
    import io

    from thrustgraph.studies import evaluate

    m = tg.load_model(Path(tg.default_model_path()).parent / "hose-fed-hover.toml")
    parsed = parse_model(m)
    p = resolve(parsed, "components.platform.dry_mass")
    out = io.StringIO()
    table = evaluate(m, [p], np.full((200, 1), -1.0), ["apogee"], parsed=parsed, engine="serial", stream=out)
    text = out.getvalue().splitlines()[0]
    assert "flying 200 designs one at a time" in text and "hose" in text, text
    assert table.counts["screened"] == 200
