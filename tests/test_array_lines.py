"""The ensemble's right-hand side phase by phase: straight lines traced over arrays from the one balance
(:func:`thrustgraph.balance.balance.array_line`) and designs grouped by phase
(:class:`thrustgraph.flight.arraysystem.PhaseGroups`) give the general evaluator's numbers."""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.balance.straightline import TraceError, array_trace_ops, compile_function
from thrustgraph.flight import arraysystem
from thrustgraph.flight.arraysystem import FREE, ArraySystem, PhaseGroups, unsupported
from thrustgraph.balance.balance import Kinematics
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model

MODELS = sorted(Path(tg.default_model_path()).parent.glob("*.toml"))
#: vehicles traced over arrays: every bundled one. Lines with elements in series (the hover rig, the boat) are solved
#: by a root search that stops the batch when a design has no solution: traced as ``if any(...): raise`` (the
#: general evaluator's ``ops.refuse_any``). The real-gas tables trace through ops.each(..., many=) (the cold-gas
#: track, the gas-cartridge cart).
TRACED = {"bottle-rocket", "twin-nozzle-bottle-rocket", "small-rocket-standard-atmosphere", "rocket-with-parachute",
          "two-stage-demo", "cold-gas-free-floater", "cold-gas-track", "gas-cartridge-cart", "hose-fed-hover",
          "water-jet-boat"}


def _system(path: Path, n: int, rng: np.random.Generator) -> ArraySystem:
    parsed = parse_model(tg.load_model(path))
    assert unsupported(parsed) is None
    paths = [f"components.{c}.dry_mass" for c, p in parsed.params.items() if hasattr(p, "dry_mass")]
    params = [resolve(parsed, p) for p in paths]
    base = np.array([getattr(parsed.params[p.split(".")[1]], "dry_mass") for p in paths])
    return ArraySystem(parsed, params, base * rng.uniform(0.8, 1.2, (n, len(params))))


def _phases(sysa: ArraySystem, rng: np.random.Generator, most: int = 6) -> list:
    kins = sorted({int(sysa.kin0[0]), FREE})
    combos = list(itertools.product(*(range(len(sysa.modes[nm])) for nm in sysa.moded), kins))
    picked = rng.choice(len(combos), size=min(most, len(combos)), replace=False)
    return [combos[i] for i in sorted(picked)]


@pytest.mark.parametrize("path", MODELS, ids=lambda p: p.stem)
def test_straight_lines_over_arrays_give_the_general_evaluators_numbers(path, monkeypatch):
    rng = np.random.default_rng(3)
    n = 7
    sysa = _system(path, n, rng)
    Y = sysa.y0.copy()
    Y[2] += rng.uniform(1.0, 30.0, n)
    Y[3:6] = rng.uniform(-5.0, 25.0, (3, n))
    t = rng.uniform(0.0, 0.5, n)
    rows = np.array([1, 4, 6])
    for combo in _phases(sysa, rng):
        modes = np.repeat(np.array(combo[:-1], dtype=np.int8)[:, None], n, axis=1)
        kin = np.full(n, combo[-1], dtype=np.int8)
        slide = np.full(n, 1.0 if combo[-1] in (Kinematics.GUIDE, Kinematics.TRACK) else 0.0)
        ph = sysa.phase(modes, kin, slide)
        monkeypatch.setattr(arraysystem, "LINES_AFTER", 0)
        d0, a0 = sysa.rhs(t, Y, modes, kin, phase=ph)
        dr0 = sysa.drives(t, Y, ph)
        monkeypatch.setattr(arraysystem, "LINES_AFTER", 1)
        d1, a1 = sysa.rhs(t, Y, modes, kin, phase=ph)
        dr1 = sysa.drives(t, Y, ph)
        key = (ph.modes, ph.kin, float(ph.slide), "terms", len(Y))
        if path.stem in TRACED:
            assert callable(sysa._lines.get(key)), sysa.untraced.get(key)
        else:
            assert key in sysa.untraced or callable(sysa._lines.get(key))
        np.testing.assert_array_equal(d1, d0, err_msg=f"{path.stem} {combo}")
        for k in ("accel", "thrust", "mass", "singular"):
            np.testing.assert_array_equal(np.broadcast_to(a1[k], (n,)), np.broadcast_to(a0[k], (n,)), err_msg=k)
        assert set(dr1 or {}) == set(dr0 or {})
        for k in dr0 or {}:
            np.testing.assert_array_equal(np.broadcast_to(dr1[k], (n,)), np.broadcast_to(dr0[k], (n,)))
        # a subset reads its own rows of the values per design the root's line was traced with
        sub = sysa.subset(rows)
        d2, _ = sub.rhs(t[rows], Y[:, rows], modes[:, rows], kin[rows], phase=sub.phase(modes[:, rows], kin[rows],
                                                                                        slide[rows]))
        np.testing.assert_array_equal(d2, d0[:, rows])


@pytest.mark.parametrize("path", [p for p in MODELS if p.stem in ("bottle-rocket", "twin-nozzle-bottle-rocket",
                                                                  "cold-gas-free-floater", "gas-cartridge-cart")],
                         ids=lambda p: p.stem)
def test_designs_grouped_by_phase_give_the_numbers_of_a_mixed_batch(path):
    rng = np.random.default_rng(5)
    n = 40
    sysa = _system(path, n, rng)
    assert sysa.grouped                  # flows are solved: grouping pays
    Y = sysa.y0.copy()
    Y[2] += rng.uniform(1.0, 30.0, n)
    Y[3:6] = rng.uniform(0.0, 25.0, (3, n))
    t = rng.uniform(0.0, 0.5, n)
    modes = np.array([rng.integers(0, len(sysa.modes[nm]), n) for nm in sysa.moded], dtype=np.int8).reshape(-1, n)
    kin = np.where(rng.random(n) < 0.5, sysa.kin0, FREE).astype(np.int8)
    slide = np.where(kin == FREE, 0.0, 1.0)
    mixed, aux = sysa.rhs(t, Y, modes, kin, slide=slide)
    groups = PhaseGroups(smallest=1)
    grouped, gaux = groups.rhs(sysa, t, Y, modes, kin, slide)
    assert groups.split(sysa, modes, kin, slide) is not None
    # a design's numbers do not depend on the designs beside it (each iteration stops design by design)
    np.testing.assert_array_equal(grouped, mixed)
    np.testing.assert_array_equal(gaux["accel"], np.broadcast_to(aux["accel"], (n,)))
    # the groups are kept while the phases stay; a change of one design's phase regroups
    again = groups.split(sysa, modes, kin, slide)
    assert all(a[1] is b[1] for a, b in zip(again, groups.split(sysa, modes, kin, slide)))
    kin2 = kin.copy()
    kin2[0] = FREE if kin[0] != FREE else sysa.kin0[0]
    assert sum(len(r) for r, _, _ in groups.split(sysa, modes, kin2, slide)) == n


def test_the_array_dialect_keeps_array_ops_rules():
    """A choice on a condition over designs runs the one regime every design is in, else both and takes each
    design's; an iteration stops each design where its own test does (as for floats, whatever designs share the
    arrays); values per design are taken for the rows."""
    ops = array_trace_ops
    calls = []
    scale = np.array([1.0, 2.0, 3.0, 4.0])

    def body(t, s):
        def big(x):
            calls.append("big")
            return ops.sqrt(x) * scale

        def small(x):
            calls.append("small")
            return -x

        chosen = ops.branch(s[0] > 1.0, big, small, s[0])

        def test(c):
            return ops.abs(c * c - s[1]) < 1e-12, None

        def step(c, _):
            return 0.5 * (c + s[1] / c)

        root, _ = ops.iterate(s[1] + 1.0, test, step, 60)
        return [chosen, root]

    f = compile_function(body, 2, designs=4)
    c = tuple(f.per_design)
    out = f(0.0, [np.array([4.0, 9.0, 0.25, 16.0]), np.array([2.0, 3.0, 5.0, 7.0])], c)
    np.testing.assert_array_equal(out[0], [2.0, 6.0, -0.25, 16.0])
    # each design stops where its own test does, with the float iteration's root (the loop ends when every design
    # has stopped; a design that stopped early keeps its value meanwhile)
    alone = []
    for a in (2.0, 3.0, 5.0, 7.0):
        c = a + 1.0
        for it in range(60):
            if it and abs(c * c - a) < 1e-12:
                break
            c = 0.5 * (c + a / c)
        alone.append(c)
    np.testing.assert_array_equal(out[1], alone)
    np.testing.assert_allclose(out[1], np.sqrt([2.0, 3.0, 5.0, 7.0]), rtol=1e-12)
    out = f(0.0, [np.array([4.0, 9.0]), np.array([2.0, 2.0])], tuple(a[[1, 3]] for a in f.per_design))
    np.testing.assert_array_equal(out[0], [4.0, 12.0])
    with pytest.raises(TraceError):
        compile_function(lambda t, s: [1.0 if ops.any(s[0] > 0.0) else 0.0], 1, designs=4)


def test_a_builders_iteration_over_values_per_design_runs_at_trace_time(monkeypatch):
    """A converging-diverging nozzle whose area ratio differs between designs solves its exit Mach numbers
    when it is built, by an iteration over those values: traced over arrays, it runs then (values, not
    symbols), so that nothing the builder keeps leaks from one phase's trace into the next."""
    path = next(p for p in MODELS if p.stem == "cold-gas-free-floater")
    parsed = parse_model(tg.load_model(path).set("launch.mount", "guide"))     # two phases with flow
    params = [resolve(parsed, "components.main.area_ratio"), resolve(parsed, "components.tank.gauge_pressure")]
    rng = np.random.default_rng(11)
    n = 5
    x = np.column_stack([rng.uniform(15.0, 40.0, n), rng.uniform(20e5, 40e5, n)])
    sysa = ArraySystem(parsed, params, x)
    Y = sysa.y0.copy()
    Y[3:6] = rng.uniform(0.0, 5.0, (3, n))
    monkeypatch.setattr(arraysystem, "LINES_AFTER", 1)
    phases = [(m, kin) for m in range(len(sysa.modes[sysa.moded[0]])) for kin in sorted({int(sysa.kin0[0]), FREE})]
    assert len(phases) > 1
    for m, kin in phases:
        modes = np.full_like(sysa.mode0, m)
        k = np.full(n, kin, dtype=np.int8)
        ph = sysa.phase(modes, k, np.zeros(n))
        d1, _ = sysa.rhs(np.zeros(n), Y, modes, k, phase=ph)
        monkeypatch.setattr(arraysystem, "LINES_AFTER", 0)
        d0, _ = sysa.rhs(np.zeros(n), Y, modes, k, phase=ph)
        monkeypatch.setattr(arraysystem, "LINES_AFTER", 1)
        np.testing.assert_array_equal(d1, d0)
    assert not sysa.untraced and sum(callable(v) for v in sysa._lines.values()) == len(phases)


def test_a_vehicle_driven_by_prescribed_jets_alone_is_not_grouped():
    """Without lines a batch in mixed phases costs less than gathering and scattering groups: it is evaluated
    in one call."""
    path = next(p for p in MODELS if p.stem == "two-stage-demo")
    sysa = _system(path, 8, np.random.default_rng(2))
    assert not sysa.plan.lines and not sysa.grouped
    modes = np.array([np.arange(8) % len(sysa.modes[nm]) for nm in sysa.moded], dtype=np.int8)
    assert PhaseGroups(smallest=1).split(sysa, modes, sysa.kin0, np.zeros(8)) is None
