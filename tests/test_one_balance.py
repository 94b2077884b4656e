"""One balance for every path: a single flight and an ensemble of the same designs give the same numbers.

Both evaluate :class:`thrustgraph.balance.balance.Balance` over the same :class:`thrustgraph.balance.plan.Plan` (floats for a
single flight, numpy arrays of designs for an ensemble), so their right-hand sides agree to rounding
(1e-12 relative) and their outcomes to the integration tolerance (1e-6 relative at rtol = atol = 1e-9). The
properties are drawn by hypothesis over the bundled models the ensemble flies, every physics option of their
kinds and of the mount, the stage and trigger settings of the models with stages (what separates, the
conditions, the delays), and random designs inside the declared bounds; the right-hand sides also of the
vehicles that fly on and fall away after a separation, and the triggers' conditions. The reference for agreement is the
balance itself, a closed-form identity between two evaluations of one definition (no published source needed).

Burn time is compared more loosely: it ends where the vessel pressure reaches ambient tangentially (the
flow falls like (t0 - t)^2), a double root that any event locator finds only to about the square root of
the tolerance (common practice of numerical event location, no source). On a test stand the run ends when the
propulsion is spent, so its flight time is that burn time.
"""

from __future__ import annotations

import math
import json
import subprocess
import sys
from dataclasses import replace as dataclass_replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg
from thrustgraph.flight.arraysystem import ArraySystem, unsupported
from thrustgraph.balance.balance import Balance, Kinematics
from thrustgraph.models.designs import apply, resolve
from thrustgraph.flight.ensemble import COMPUTED, fly_designs
from thrustgraph.base.errors import IntegrationError
from thrustgraph.flight.integrate import available_signals, fly_segments
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import loads_model
from thrustgraph.flight.separation import stage_models
from thrustgraph.models.staging import condition, resolve_thresholds
from thrustgraph.studies.studyflight import fly_design
from thrustgraph.base.xp import array_ops, scalar_ops
from tg_atmosphere import StillWater
from tg_drag import BoatHull, Buoyancy
from tg_feeds import Inlet, Pump, froude_efficiency

from conftest import HANG_GUARD

MODELS = sorted(Path(tg.default_model_path()).parent.glob("*.toml"))
# the physics options of the kinds and mounts these models use: (path, values); a model takes those of its
# components
OPTIONS = {
    "components.bottle.internal_momentum": (False, True),
    "components.bottle.inertial_head": (True, False),
    "components.bottle.expansion_exponent": (1.4, 1.0, 1.2),
    "components.neck.approach_velocity": (True, False),
    "environment.medium.wind_exponent": (0.142857, 0.0),
    "environment.medium.relative_humidity": (0.0, 0.6),
    "components.hull.acts": ("horizontal", "along-motion"),
    "components.pump.programme": ("power", "head-curve"),
    "launch.attitude": ("follow-wind", "fixed"),
    "launch.mount": ("guide", "free", "held", "track"),
    "launch.friction": (0.0, 0.3),
    # the gas tank: ideal gas or CoolProp's equation of state; its processes; wall heat transfer (adiabatic
    # only: _model keeps the combinations a gas tank accepts)
    "components.tank.equation_of_state": ("ideal", "coolprop"),
    "components.tank.process": ("isothermal", "adiabatic", "polytropic"),
    "components.tank.wall_heat_transfer_coefficient": ("0 W/m^2/K", "15 W/m^2/K"),
    "components.relief.arrangement": ("one-sided", "symmetric"),
    "components.vent.arrangement": ("one-sided", "symmetric"),
    # the stages and triggers of the two-stage demo: what separates, on which condition, and what it does
    "stages.booster.components": (["booster_frame", "booster_motor"], ["booster_motor"]),
    # (at the burnout time, the clock and the time reach their values at the burnout's own point: events that
    # reach their zero together fire together on both paths)
    "triggers.drop_booster.when": ("booster_motor.burn_clock > 1.2 s", "time > 0.9 s", "altitude > 40 m",
                                   "booster_motor.propellant_mass < 0.01 kg", "speed > 95 m/s",
                                   "vertical_speed < -2 m/s", "time > 1.2 s"),
    "triggers.drop_booster.then": ("separate", "separate", "stop"),
    "triggers.light_sustainer.when": ("time > 1.5 s", "mass < 0.3 kg", "altitude > 60 m"),
}
#: a head-flow curve for the pump's head-curve programme (invented numbers, a demo curve)
HEAD_CURVE = {"units": ["L/s", "m"], "rows": [[0.0, 16.0], [4.0, 14.0], [8.0, 9.0], [12.0, 1.0]]}
#: trigger delays drawn inside their declared bounds (0 s and up; a second at most, so that they act in flight)
DELAYS = ("triggers.drop_booster.after", "triggers.light_sustainer.after")
# varied per design, with ranges inside the declared bounds (a model takes those of its components)
VARIED = {
    "components.bottle.fill": (0.05, 0.6),
    "components.bottle.bore": (60.0e-3, 120.0e-3),         # the approach factor varies per design with it
    "components.bottle.gauge_pressure": (2e5, 7e5),
    "components.airframe.dry_mass": (0.08, 0.6),
    "components.motor.exhaust_velocity": (1500.0, 2200.0),
    "environment.medium.wind_speed": (0.0, 8.0),
    "environment.medium.temperature": (263.15, 318.15),     # still air: the density derived per design
    "launch.elevation": (np.radians(60.0), np.radians(90.0)),
    "components.tank.gauge_pressure": (10e5, 40e5),
    "components.tank.temperature": (260.0, 330.0),
    "components.tank.polytropic_exponent": (1.0, 1.4),
    "components.main.throat_diameter": (0.5e-3, 1.2e-3),
    "components.main.area_ratio": (1.5, 40.0),
    "components.left.half_angle": (0.0, np.radians(25.0)),
    "components.right.discharge_coefficient": (0.8, 1.0),
    # the hover rig: ranges in which it lifts off (a rig held on the pad all flight integrates its thrust over
    # the supply's spin-up in steps the frozen states do not limit, on either path: docs/studies.md)
    "components.hose.supply_pressure": (1.9e5, 2.4e5),
    "components.hose.hose_length": (5.0, 30.0),
    "components.hose.ramp_time": (20.0, 150.0),
    "components.jet.diameter": (0.038, 0.042),
    "components.platform.dry_mass": (20.0, 32.0),
    "components.relief.cracking_pressure": (20e5, 35e5),
    "components.relief.flow_area": (0.1e-6, 1e-6),
    "components.vent.discharge_coefficient": (0.5, 0.9),
    "components.upper_frame.dry_mass": (0.1, 0.4),
    "components.booster_frame.dry_mass": (0.05, 0.3),
    "components.booster_motor.exhaust_velocity": (600.0, 900.0),
    "components.sustainer.exhaust_velocity": (600.0, 900.0),
    "components.hull.dry_mass": (10.0, 50.0),
    "components.intake.loss_coefficient": (0.0, 0.5),
    "components.pump.shaft_power": (500.0, 3000.0),
    "components.pump.efficiency": (0.4, 0.8),
    "components.pump.run_time": (0.0, 30.0),        # 0: the pump never stops
    "components.jet.diameter": (0.02, 0.04),
    "environment.medium.current_x": (-1.0, 1.0),
    "environment.medium.surface_altitude": (-1.0, 1.0),
    # last, so that the columns above draw the same numbers: static friction at least the drawn friction (0, 0.3)
    "launch.static_friction": (0.3, 0.6),
}


def _applies(parsed, path: str) -> bool:
    section, owner = path.split(".")[:2]
    if section == "components":      # names recur between models: the component must have the parameter
        return owner in parsed.params and hasattr(parsed.params[owner], path.split(".")[-1])
    if section == "environment":
        return path.split(".")[-1] in {f.name for f in parsed.env_kinds[owner].parameters}
    if section in ("stages", "triggers"):
        return owner in getattr(parsed.model, section)
    if path == "launch.static_friction":        # varied where the model gives one
        return parsed.launch.static_friction is not None
    return True


#: the free-floating platform with a relief valve and a vent on its tank: the valve kinds, which no bundled
#: model uses
VALVED = "cold-gas-free-floater with valves"
_VALVES = """
[components.relief]
kind = "relief-valve"
cracking_pressure = "25 bar"
reseat_pressure = "18 bar"
flow_area = "0.4 mm^2"
direction = [0, 0, 1]

[components.vent]
kind = "vent"
flow_area = "0.05 mm^2"
direction = [0, -1, 0]
"""


def _load(model) -> tg.Model:
    if model == VALVED:
        path = next(p for p in MODELS if p.stem == "cold-gas-free-floater")
        text = path.read_text().replace('"tank -> right -> outside"]', '"tank -> right -> outside", '
                                        '"tank -> relief -> outside", "tank -> vent -> outside"]')
        return loads_model(text + _VALVES, source=VALVED)
    return tg.load_model(model)


def _flyable() -> list:
    return [p for p in MODELS if unsupported(parse_model(tg.load_model(p))) is None] + [VALVED]


FLYABLE = _flyable()


def test_the_ensemble_flies_every_bundled_vehicle():
    # the models whose every kind builds array callables; the others fly one design at a time (the study says
    # so at its start)
    assert {getattr(p, "stem", p) for p in FLYABLE} >= {p.stem for p in MODELS}      # every bundled vehicle


@pytest.mark.parametrize("mount", ["held", "guide", "free", "track"])
def test_every_mount_flies_as_an_ensemble(mount):
    m = tg.load_model(tg.default_model_path()).set("launch.mount", mount)
    assert unsupported(parse_model(m)) is None


def _model(path, options: dict):
    m = _load(path)
    parsed = parse_model(m)
    tethered = "hose" in parsed.params
    for k, v in options.items():
        # a tethered rig rises upright from its pad (launched free at 5 m/s it falls back before its supply
        # has spun up: a flight of a few 1e-5 N s whose jet starts at a kink no event marks), or stays held on a
        # test stand
        if _applies(parsed, k) and not (tethered and k == "launch.mount" and v != "held"):
            m.set(k, v)
    if parsed.env_kinds["medium"].kind == "vacuum" or tethered:
        # no air turns a vehicle into the wind in a vacuum (follow-wind there steers canted thrusters along the
        # velocity, a spiral whose end point amplifies the integration error), and a tethered rig hovers
        # upright (follow-wind would turn its jet down as it bobs): both keep the attitude of their files
        m.set("launch.attitude", "fixed")
    if "tank" in parsed.params and parsed.kinds["tank"].kind == "gas-tank":
        if options.get("components.tank.equation_of_state") == "coolprop" and \
                options.get("components.tank.process") == "polytropic":
            m.set("components.tank.process", "adiabatic")      # a polytrope is an ideal-gas idealisation
        if m.get("components.tank.process") != "adiabatic":
            m.set("components.tank.wall_heat_transfer_coefficient", "0 W/m^2/K")
        m.set("components.tank.wall_area", "0.08 m^2")
    if options.get("launch.mount") == "free" and not tethered:
        m.set("launch.speed", "5 m/s")
    if options.get("components.pump.programme") == "head-curve" and "pump" in parsed.params:
        m.set("components.pump.head_curve", HEAD_CURVE)
    for k in DELAYS:
        if k in options and _applies(parsed, k):
            m.set(k, f"{options[k]!r} s")
    # with friction, a static friction of its own (the designs draw it from VARIED: at least the friction option);
    # without, none (a frictionless guide or track)
    if options.get("launch.friction", 0.0) > 0.0:
        m.set("launch.static_friction", 0.45)
    m.set("run.rtol", 1e-9)
    m.set("run.atol", 1e-9)
    # the ensemble's integrator family: DOP853 at rtol 1e-9 misses the tight-tolerance max speed and impulse by
    # ~1e-6 where the nozzle unchokes (a kink in the derivatives that no event marks), RK45 and Radau by 1e-9
    m.set("run.method", "RK45")
    return m


def _designs(parsed, n: int, rng: np.random.Generator):
    # every model's guide is drawn tilted too, the tethered rig's pad included (it was left upright while a tilted
    # rig crawled off its pad with outcomes of a few 1e-4 m/s; since the break-away event both paths agree there)
    used = {k: v for k, v in VARIED.items() if _applies(parsed, k)}
    params = [resolve(parsed, p) for p in used]
    x = np.column_stack([rng.uniform(lo, hi, n) for lo, hi in used.values()])
    if "components.pump.run_time" in used:           # every other design's pump never stops
        x[::2, list(used).index("components.pump.run_time")] = 0.0
    return params, x


options_st = st.fixed_dictionaries({**{k: st.sampled_from(v) for k, v in OPTIONS.items()},
                                    **{k: st.floats(0.0, 1.0) for k in DELAYS}})
STAGED = [p for p in FLYABLE if _load(p).stages]


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
    each design's derivatives from the array balance equal those of its own single-flight balance, to the
    rounding (numpy's functions against the math module's, numpy's table look-ups against bisection)."""
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
    # the constraints a design of this mount meets in flight, and the way it slides along a guide or track
    kins = {"guide": (Kinematics.GUIDE, Kinematics.FREE), "free": (Kinematics.FREE,), "held": (Kinematics.HELD,),
            "track": (Kinematics.TRACK,)}[parsed.launch.mount]
    kin = rng.choice(kins, n).astype(np.int8)
    slide = np.where((kin == Kinematics.GUIDE) | (kin == Kinematics.TRACK), rng.choice([-1.0, 0.0, 1.0], n), 0.0)
    if parsed.launch.mount == "held":
        Y[3:6] = 0.0
    t = rng.uniform(0.0, 1.0, n)
    out, aux = sysa.rhs(t, Y, modes, kin, slide=slide)
    # the triggers' conditions (staging.condition) over the designs, component signals from the snapshot
    triggers = resolve_thresholds(whole.triggers, available_signals(tg.assemble(whole))) if whole.triggers \
        else ()
    conds = [np.broadcast_to(condition(tr, t, list(Y), sysa.x0, lambda tt, ss: sysa.snapshot(tt, ss, aux["phase"]),
                                       array_ops), (n,)) for tr in triggers]
    for r in range(n):
        system = tg.assemble(apply(parsed, params, x[r]))
        bal = Balance(system)
        bal.set_phase([int(m) for m in modes[:, r]], int(kin[r]), False, float(slide[r]))
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


HOVER = next(p for p in MODELS if p.stem == "hose-fed-hover")


@settings(max_examples=6, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(options=options_st, seed=st.integers(0, 2**32 - 1))
def test_the_hover_rig_lifting_off_its_pad_equals_single_flights(options, seed):
    """The hose-fed hover rig rests on its pad until its supply's spin-up lifts it: on both paths a break-away event
    at the instant the balance's margin rises through zero (the start of the motion was a kink inside a step, where
    only atol governed near zero speed: peak acceleration 4.4e-6 apart between the paths; among these examples
    1.1e-6 before the event). Drawn options and designs: every outcome within 1e-6, the peak acceleration
    included."""
    _outcomes_agree(parse_model(_model(HOVER, options)), np.random.default_rng(seed))


@settings(max_examples=4, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(options=options_st, seed=st.integers(0, 2**32 - 1))
def test_the_hover_rig_held_on_a_stand_equals_single_flights(options, seed):
    """The hose-fed hover rig held on a test stand, its supply spinning up over 20-150 s: no state changes, so
    the ensemble's steps are held by its impulse row alone and a single flight's by nothing (they grow tenfold
    each; its impulse is checked piece by piece against the Gauss-Kronrod rule: tests/test_impulse_quadrature.py).
    Every outcome within 1e-6."""
    _outcomes_agree(parse_model(_model(HOVER, {**options, "launch.mount": "held"})), np.random.default_rng(seed))


def _thrust_table(parsed) -> bool:
    return any(getattr(p, "programme", "") == "thrust-table" or getattr(p, "thrust_curve", None) is not None
               for p in parsed.params.values())


def _outcomes_agree(parsed, rng: np.random.Generator) -> None:
    # Each path's own error at rtol = atol = 1e-9 reaches a few 1e-6 where a coarse thrust table's corners (kinks
    # no event marks) sit inside steps: measured on drawn two-stage demos against both paths converged at 1e-12,
    # apogee 1.4e-6 (single flight) and 1.0e-6 (ensemble) off on opposite sides, or 2.8e-6 and 0.5e-6. Their
    # difference is held to 5e-6 there; 1e-6 everywhere else.
    # A converging-diverging nozzle in air changes regime as its tank blows down (a shock enters it: a kink in the
    # thrust no event marks), and with wall heat the tank's flow ends tangentially at ambient: measured on the
    # cold-gas track vehicle against both paths converged at 1e-11 (where they agree to 2e-9), total impulse
    # 2.6e-6 (ensemble) and 3.2e-6 (single flight) off on opposite sides, 3e-5 at a few bar with wall heat.
    # Their difference is held to 1e-4 there.
    tol = 5e-6 if _thrust_table(parsed) else 1e-6
    # A self-pressurising (two-phase) tank's properties come from CoolProp's tables, whose interpolation has
    # kinks no event marks: measured on the gas-cartridge cart on a guide, apogee 3.1e-6 (single flight) and
    # 1.2e-6 (ensemble) off at rtol 1e-9 against both paths at 1e-12 (where they agree to 1e-8). Held to 5e-6.
    if any(k.kind == "self-pressurising-tank" for k in parsed.kinds.values()):
        tol = max(tol, 5e-6)
    if any(k.kind == "converging-diverging-nozzle" for k in parsed.kinds.values()) and \
            parsed.env_kinds["medium"].kind != "vacuum":
        tol = 1e-4
    # the end of a wall-heated tank's flow is located to about 1 % (burn time, below), and the thrust of its last
    # moments with it: total impulse 1.1e-4 apart on a stand at rtol 1e-11 (burn times 15.265 s and 15.116 s)
    if any(getattr(q, "wall_heat_transfer_coefficient", 0.0) > 0.0 for q in parsed.params.values()):
        tol = 5e-4
    params, x = _designs(parsed, 3, rng)
    names = list(COMPUTED)                 # the registry outcomes the ensemble computes itself
    # on a test stand only the propellant's states change, and they alone control the steps: at rtol 1e-9 the total
    # impulse is accurate to ~3e-6 there on both paths (measured against rtol 1e-11: a thrust table's corners inside
    # the steps; a single flight's error norm also counts its ten audit accumulators), so a stand flies at 1e-11
    tight = {"rtol": 1e-11, "atol": 1e-11} if parsed.launch.mount == "held" else {}
    res = fly_designs(parsed, params, x, names, **tight)
    assert set(res.separations) == set(parsed.stages)
    for r in range(len(x)):
        one = apply(parsed, params, x[r])
        single = fly_design(one, **tight)
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
            elif name == "burn_time" or (name in ("flight_time", "run_time") and parsed.launch.mount == "held"):
                # a wall-heated gas tank's flow ends where the warming gas lets its pressure creep down to
                # ambient: located to about 1 % on either path at any tolerance (measured 0.8 % at 1e-9 and
                # 1.1 % at 1e-11 on the cold-gas track vehicle)
                warmed = any(getattr(q, "wall_heat_transfer_coefficient", 0.0) > 0.0 for q in parsed.params.values())
                assert a == pytest.approx(b, rel=2e-2 if warmed else 5e-3), (r, name)
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
                top = single.values.get("apogee", np.nan)
                size = max(abs(top) if np.isfinite(top) else 0.0, abs(b), 1.0)
                assert a == pytest.approx(b, rel=tol, abs=tol * size), (r, name, a, b)
            elif name == "guide_exit_speed" and parsed.launch.guide_length == 0.0:
                # a pad is a guide of zero length, left 1 nm up: the speed there (~1e-6 m/s) is read on the
                # dense output of the step that holds the kink of lift-off, which it rounds; compared at the
                # scale of the flight's speeds
                assert a == pytest.approx(b, rel=tol, abs=1e-5 * single.values["max_speed"]), (r, name, a, b)
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


def test_a_large_study_the_ensemble_cannot_fly_says_so_when_it_starts(float_only_rocket):
    """200 designs of a model with a kind that builds no array callables: the study says at its start that it
    flies them one at a time, and why. (The designs are outside their declared bounds, so they are screened
    before any flight: the notice comes first.)"""
    import io

    from thrustgraph.studies.studies import evaluate

    m, parsed = float_only_rocket
    p = resolve(parsed, "components.airframe.dry_mass")
    out = io.StringIO()
    table = evaluate(m, [p], np.full((200, 1), -1.0), ["apogee"], parsed=parsed, engine="serial", stream=out)
    text = out.getvalue().splitlines()[0]
    assert "flying 200 designs one at a time" in text, text
    assert "components.airframe kind 'float-only-airframe' builds no array callables" in text, text
    assert table.counts["screened"] == 200


def _elementwise(build, scalar_args, array_args, n):
    """The callable ``build(ops)`` returns, called over arrays and design by design over floats: equal to rounding
    (table look-ups interpolate with numpy over arrays, by bisection over floats)."""
    got = build(array_ops)(*array_args)
    for r in range(n):
        ref = build(scalar_ops)(*scalar_args(r))
        pairs = zip(got, ref) if isinstance(ref, tuple) else [(got, ref)]
        for a, b in pairs:
            assert float(np.broadcast_to(a, (n,))[r]) == pytest.approx(b, rel=1e-12, abs=1e-300), (r, a, b)


@settings(max_examples=20, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1), acts=st.sampled_from(("horizontal", "along-motion")),
       programme=st.sampled_from(("power", "head-curve")), fluid=st.sampled_from(("liquid", "gas")))
def test_the_water_kinds_are_one_definition_for_floats_and_arrays(seed, acts, programme, fluid):
    """Hull, buoyancy, still water, inlet and pump over arrays of designs equal their float calls design by
    design, in every option and across the regimes (at rest, inside and above the resistance table; below and
    above the pump's shut-off flow, beyond its head curve, stopped; below and above the water's surface)."""
    from thrustgraph.kinds.component import Ambient
    from thrustgraph.kinds.parameters import parse_params

    rng = np.random.default_rng(seed)
    n = 12
    sp = np.concatenate([[0.0, 0.0], rng.uniform(0.0, 12.0, n - 2)])
    ang = rng.uniform(0.0, 2.0 * np.pi, (2, n))
    v = (sp * np.cos(ang[0]) * np.cos(ang[1]), sp * np.sin(ang[0]) * np.cos(ang[1]), sp * np.sin(ang[1]))
    rho, pa, Ta = rng.uniform(1.0, 1030.0, n), rng.uniform(5e4, 2e5), rng.uniform(250.0, 320.0, n)
    air = (rho, pa, Ta) + v + (sp,)

    def air_r(r):
        return tuple(float(np.broadcast_to(c, (n,))[r]) for c in air)

    hull = parse_params(BoatHull.parameters, {"dry_mass": "20 kg", "acts": acts, "resistance_table": {
        "units": ["m/s", "N"], "rows": [[0.5, 1.0], [2, 14], [4, 52], [8, 230]]}}, where="components.hull")
    _elementwise(lambda ops: BoatHull.build_body(hull, ops).force, lambda r: (air_r(r),), (air,), n)

    vol = rng.uniform(1e-4, 1e-2, n)
    P = Buoyancy.params_class()
    for r in range(n):
        f_arr = Buoyancy.build_body(P(displaced_volume=vol, g=9.80665), array_ops).force(air)
        f_one = Buoyancy.build_body(P(displaced_volume=float(vol[r]), g=9.80665), scalar_ops).force(air_r(r))
        assert float(f_arr[2][r]) == pytest.approx(f_one[2], rel=1e-15)

    wp = parse_params(StillWater.parameters, {"surface_altitude": "0.5 m", "current_x": "0.3 m/s"},
                      where="environment.medium")
    z = rng.uniform(-20.0, 5.0, n)
    _elementwise(lambda ops: StillWater.build(wp, ops), lambda r: (float(z[r]), 0.0), (z, np.zeros(n)), n)

    keep = rng.uniform(0.0, 1.0, n)
    IP = Inlet.params_class()
    amb = Ambient(pa, 288.15, 1.2)
    arr = Inlet.build_source(IP(fluid=fluid, loss_coefficient=keep, gas_gamma=1.4, gas_constant=287.05), -1,
                             array_ops, amb).supply(0.0, [], 0, air)
    for r in range(n):
        one = Inlet.build_source(IP(fluid=fluid, loss_coefficient=float(keep[r]), gas_gamma=1.4, gas_constant=287.05),
                                 -1, scalar_ops, amb).supply(0.0, [], 0, air_r(r))
        for a, b in zip(arr[0] + arr[1:], one[0] + one[1:]):
            assert float(np.broadcast_to(a, (n,))[r]) == pytest.approx(b, rel=1e-12, abs=1e-300)

    raw = {"programme": programme, "shaft_power": "1.5 kW", "efficiency": 0.6, "shutoff_pressure": "1.5 bar",
           "run_time": "20 s"}
    if programme == "head-curve":
        raw["head_curve"] = HEAD_CURVE
    pp = parse_params(Pump.parameters, raw, where="components.pump", params_class=Pump.params_class())
    mdot = np.concatenate([[0.0], rng.uniform(0.0, 15.0, n - 1)])
    mode = rng.integers(0, 2, n)
    up = (1e5, 293.0, rng.uniform(990.0, 1030.0, n), 1.4, 287.05, 1.0, 0.0)
    power = rng.uniform(500.0, 3000.0, n)
    for r in range(n):
        got = Pump.build_flow(dataclass_replace(pp, shaft_power=power), array_ops).rise(up, mdot, mode)
        one = Pump.build_flow(dataclass_replace(pp, shaft_power=float(power[r])), scalar_ops).rise(
            (1e5, 293.0, float(up[2][r]), 1.4, 287.05, 1.0, 0.0), float(mdot[r]), int(mode[r]))
        assert float(got[r]) == pytest.approx(one, rel=1e-12, abs=1e-300), (r, got[r], one)
    vj = rng.uniform(1.0, 30.0, n)
    assert froude_efficiency(vj, sp + 1.0).tolist() == [froude_efficiency(float(a), float(b) + 1.0)
                                                        for a, b in zip(vj, sp)]


BOAT = Path(tg.default_model_path()).parent / "water-jet-boat.toml"


@pytest.mark.skipif(unsupported(parse_model(tg.load_model(BOAT))) is not None,
                    reason="the boat's line (inlet -> pump -> nozzle) flies as an ensemble once lines with elements "
                           "in series do")
def test_a_boat_study_as_ensemble_equals_its_run():
    """One design of the water-jet boat: ``thrustgraph study --flights ensemble`` and ``thrustgraph run --json``
    report the same outcomes (within 1e-6; the outcomes a study computes that a run reports)."""
    path = BOAT
    common = ("--set", "run.rtol=1e-9", "--set", "run.atol=1e-9", "--set", "run.method=RK45")

    def cli(*args):
        r = subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], capture_output=True, text=True,
                           timeout=HANG_GUARD)
        assert r.returncode == 0, r.stderr
        return r
    tmp = Path(__import__("tempfile").mkdtemp())
    cli("run", str(path), *common, "--json", str(tmp / "run.json"), "--quiet")
    cli("study", str(path), "sweep", *common, "--vary", "components.pump.shaft_power=1.5 kW", "--flights",
        "ensemble", "--outputs", ",".join(COMPUTED), "--table", str(tmp / "t.csv"), "--quiet")
    run = {k: v["value"] for k, v in json.loads((tmp / "run.json").read_text())["summary"].items()}
    lines = [ln for ln in (tmp / "t.csv").read_text().splitlines() if not ln.startswith("#")]
    head, row = lines[0].split(","), lines[1].split(",")
    assert row[head.index("status")] == "ok"
    study = {h.split(" [")[0]: float(v) for h, v in zip(head, row) if h.split(" [")[0] in COMPUTED and v != ""}
    shared = sorted(set(study) & set(run))
    # a boat's outcomes (kinds/vehicle.py): run time, powered time, top speed, distance along its track
    assert {"run_time", "powered_time", "total_impulse", "top_speed", "distance", "peak_acceleration"} <= set(shared)
    for k in shared:
        assert study[k] == pytest.approx(run[k], rel=1e-6, abs=1e-9), (k, study[k], run[k])
    # what does not apply to a boat on a track is reported by neither
    assert not {"apogee", "impact_speed", "guide_exit_speed", "flight_time", "burn_time", "max_speed",
                "range"} & (set(study) | set(run))
