"""Regression tests for the model-input repros of issue 16: each gives one clear message (exit status 2, or 1 for
a flight that cannot be completed) and never a traceback, a hang or a non-finite number.

The commands run in this process (``thrustgraph.cli.main``), as tests/badmodels.py runs the generated cases.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
import pytest

from thrustgraph import fly
from thrustgraph.cli import main
from thrustgraph.base.errors import IntegrationError, ModelError
from thrustgraph.base.limits import MAX_DESIGNS, MAX_OUTPUT_SAMPLES
from thrustgraph.models.modelfile import bundled_models, load_model, loads_model
from thrustgraph.kinds.parameters import Number, Quantity, Spec, Vector, parse_params
from thrustgraph.flight.stepguard import MAX_EVALUATIONS, WINDOW
from thrustgraph.studies.studykinds import read_study
from thrustgraph.studies.studyspec import Vary

BOTTLE = bundled_models()["bottle-rocket"].read_text()
NONFINITE = re.compile(r"(?<![\w.])[-+]?(nan|inf|infinity)(?!\w)", re.IGNORECASE)


def edit(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def model_text(name: str, *edits: tuple[str, str]) -> str:
    text = bundled_models()[name].read_text()
    for old, new in edits:
        text = edit(text, old, new)
    return text


def cli(tmp_path: Path, capsys, text: str, *args: str, command: str = "run") -> tuple[int, str, str]:
    path = tmp_path / "model.toml"
    path.write_text(text)
    rc = main([command, str(path), *args, "--quiet"] if command != "check" else [command, str(path), *args])
    out, err = capsys.readouterr()
    return rc, out, err


def refused(tmp_path: Path, capsys, text: str, *words: str, rc: int = 2, command: str = "run") -> str:
    """Run a model that must be refused; check the one message line holds ``words`` and nothing was written."""
    out_json = tmp_path / "out.json"
    args = ("--json", str(out_json)) if command in ("run", "export") else ()
    code, out, err = cli(tmp_path, capsys, text, *args, command=command)
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert code == rc, err
    assert len(lines) == 1 and lines[0].startswith("thrustgraph:"), err
    for w in words:
        assert w in lines[0], f"{w!r} not in {lines[0]!r}"
    assert not out_json.exists()
    assert len(lines[0]) < 700, len(lines[0])
    return lines[0]


# -- non-finite numbers ---------------------------------------------------------------------------------------

@pytest.mark.parametrize("command", ["run", "check", "export"])
def test_bare_nan_fill_is_refused_by_every_command(tmp_path, capsys, command):
    text = edit(BOTTLE, "fill = 0.33", "fill = nan")
    refused(tmp_path, capsys, text, "components.bottle.fill", "nan is not a finite number", "Fix:", command=command)


@pytest.mark.parametrize("key, old, new", [
    ("run.rtol", 'end_time = "30 s"', 'end_time = "30 s"\nrtol = nan'),
    ("run.atol", 'end_time = "30 s"', 'end_time = "30 s"\natol = nan'),
    ("components.airframe.drag_coefficient", "drag_coefficient = 0.4", "drag_coefficient = nan"),
    ("components.airframe.drag_coefficient", "drag_coefficient = 0.4", "drag_coefficient = -inf"),
])
def test_nan_in_run_settings_and_coefficients_is_refused(tmp_path, capsys, key, old, new):
    refused(tmp_path, capsys, edit(BOTTLE, old, new), key, "not a finite number")


def test_nan_hose_loss_coefficient_is_refused(tmp_path, capsys):
    text = model_text("hose-fed-hover", ("loss_coefficient = 1.5", "loss_coefficient = nan"))
    refused(tmp_path, capsys, text, "components.hose.loss_coefficient", "not a finite number")


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_every_spec_refuses_non_finite_input_even_with_open_bounds(value):
    # Range checks written `lo <= x <= hi` pass NaN; the specs must not.
    from thrustgraph.base.units import Q_

    for spec in (Number("x", low=0.0, high=1.0), Number("x"), Quantity("x", "m", low=0.0, high=5.0),
                 Quantity("x", "m")):
        for v in ((f"{value} m", Q_(value, "m")) if spec.unit else (value, str(value), Q_(value, ""))):
            with pytest.raises(ModelError, match="finite"):
                spec.parse(v, where="x")


def test_a_plugin_spec_that_lets_nan_through_is_caught_by_parse_params():
    class Loose(Spec):
        def parse(self, value, *, where):
            return float(value)
    with pytest.raises(ModelError, match="components.x.k: is not a finite number"):
        parse_params([Loose("k")], {"k": "nan"}, where="components.x")


def test_export_json_is_strict_json(tmp_path, capsys):
    r = fly()
    r.audit = type(r.audit)(mass_residual=math.nan, mass_relative=math.inf, momentum_residual=(0.0, math.nan, 0.0),
                            momentum_relative=0.0, internal_defect=0.0)
    doc = json.loads(r.to_json(), parse_constant=lambda c: pytest.fail(f"{c} in the JSON"))
    assert doc["audit"]["mass_residual_kg"] is None and doc["audit"]["momentum_residual_kg_m_s"][1] is None


# -- quantity text is a number and a unit -------------------------------------------------------------------------

def test_power_tower_is_refused_at_once(tmp_path, capsys):
    line = refused(tmp_path, capsys, edit(BOTTLE, 'gauge_pressure = "4.5 bar"', 'gauge_pressure = "9**9**9 bar"'),
                   "components.bottle.gauge_pressure", "cannot read '9**9**9 bar' as a number and a unit",
                   "holds a number or arithmetic")
    assert "e-notation" in line


@pytest.mark.parametrize("key, old, value", [
    ("components.bottle.volume", 'volume = "2 L"', "10**400 L"),
    ("components.airframe.reference_diameter", 'reference_diameter = "100 mm"', "2**1024 m"),
    ("components.bottle.gas_temperature", 'gas_temperature = "15 degC"', "10**400 degC"),
])
def test_arithmetic_overflowing_a_float_gives_a_clear_error(tmp_path, capsys, key, old, value):
    key_line = old.split(" = ")[0]
    refused(tmp_path, capsys, edit(BOTTLE, old, f'{key_line} = "{value}"'), key,
            f"cannot read {value!r} as a number and a unit")


def test_a_number_beyond_a_float_is_refused(tmp_path, capsys):
    refused(tmp_path, capsys, edit(BOTTLE, 'volume = "2 L"', 'volume = "1e400 L"'), "components.bottle.volume",
            "too large for a floating-point number")


def test_a_long_unit_is_refused_quickly_and_not_echoed_whole(tmp_path, capsys):
    unit = "m*" * 5000 + "m"
    line = refused(tmp_path, capsys, edit(BOTTLE, 'reference_diameter = "100 mm"', f'reference_diameter = "1 {unit}"'),
                   "components.airframe.reference_diameter", "10003 characters long", "…")
    assert len(line) < 500


def test_echoed_input_is_cut_to_a_readable_length(tmp_path, capsys):
    text = edit(BOTTLE, "drag_coefficient = 0.4", "drag_coefficient = [" + ", ".join(["1"] * 100_000) + "]")
    line = refused(tmp_path, capsys, text, "components.airframe.drag_coefficient", "…")
    assert len(line) < 500


# -- huge and tiny numbers -----------------------------------------------------------------------------------------

def test_a_400_digit_integer_is_refused(tmp_path, capsys):
    refused(tmp_path, capsys, edit(BOTTLE, "fill = 0.33", "fill = 1" + "0" * 400),
            "components.bottle.fill", "a whole number of 401 digits is beyond the 64-bit range")


@pytest.mark.parametrize("value", [[1e200, 0, 0], [5e-324, 0, 0], [1e300, 0, 1e300]])
def test_directions_are_normalised_with_a_finite_norm(value):
    d = Vector("direction").parse(value, where="components.neck.direction")
    assert all(math.isfinite(c) for c in d) and math.isclose(math.hypot(*d), 1.0)
    assert d[0] == pytest.approx(1.0 if value[2] == 0 else math.sqrt(0.5))


def test_a_zero_direction_is_refused():
    with pytest.raises(ModelError, match="has no length"):
        Vector("direction").parse([0, 0, 0], where="components.neck.direction")


def test_a_huge_direction_flies(tmp_path, capsys):
    text = model_text("twin-nozzle-bottle-rocket",
                      ("direction = [-0.9659258262890683, 0.0, 0.25881904510252074]", "direction = [-1e200, 0, 0]"))
    rc, out, err = cli(tmp_path, capsys, text)
    assert rc == 0, err
    assert not NONFINITE.search(out)


@pytest.mark.parametrize("model, old, new, key, words", [
    ("bottle-rocket", 'reference_diameter = "100 mm"', 'reference_diameter = "1e308 m"',
     "components.airframe.reference_diameter", "must be at most 100 m"),
    ("bottle-rocket", 'reference_diameter = "100 mm"', 'reference_diameter = "1e6 m"',
     "components.airframe.reference_diameter", "must be at most 100 m"),
    ("bottle-rocket", 'diameter = "21 mm"', 'diameter = "1e300 mm"', "components.neck.diameter", "at most 10000 mm"),
    ("bottle-rocket", 'pressure = "101325 Pa"', 'pressure = "101325 Pa"\ndensity = "1e6 kg/m^3"',
     "environment.medium.density", "at most 2000 kg/m^3"),
    ("bottle-rocket", 'elevation = "80 deg"', 'elevation = "80 deg"\nspeed = "1e300 m/s"', "launch.speed",
     "at most 10000 m/s"),
    ("cold-gas-track", "area_ratio = 4.0", "area_ratio = 1e300", "components.thruster.area_ratio", "at most 10000"),
    ("cold-gas-track", 'throat_diameter = "1 mm"', 'throat_diameter = "1e307 mm"',
     "components.thruster.throat_diameter", "at most 10000 mm"),
    ("rocket-with-parachute", 'diameter = "0.9 m"', 'diameter = "1e308 m"', "components.main.diameter",
     "at most 100 m"),
    ("hose-fed-hover", 'hose_diameter = "80 mm"', 'hose_diameter = "1e308 mm"', "components.hose.hose_diameter",
     "at most 10000 mm"),
    ("small-rocket-standard-atmosphere", "[0.0, 0.45], [0.5, 0.44]", "[0.0, 0.45], [1e308, 0.44]",
     "components.airframe.drag_table.rows[1]", "outside the range up to 50"),
    ("rocket-with-parachute", "[0.05, 120.0]", "[0.05, 1e300]", "components.motor.thrust_curve.rows[1]",
     "outside the range from 0 to 1e+08 N"),
])
def test_sizes_pressures_and_speeds_have_physical_bounds(tmp_path, capsys, model, old, new, key, words):
    refused(tmp_path, capsys, model_text(model, (old, new)), key, words)


def test_a_collapsing_step_size_ends_in_a_clear_error_within_bounded_work():
    # In range but absurd: a 1 mg airframe with a 100 m drag disc. The flight turns stiff and the explicit solver
    # creeps along; the guard ends it after at most two windows of evaluations.
    with pytest.raises(IntegrationError) as info:
        fly(**{"components.airframe.reference_diameter": "100 m", "components.airframe.drag_coefficient": 5.0,
               "components.airframe.dry_mass": "1 mg"})
    msg = str(info.value)
    assert "the step size collapsed at t = " in msg and "in phase 'gas thrust'" in msg
    assert "velocity.z" in msg and "Fix:" in msg
    assert not NONFINITE.search(msg)


def test_a_flight_that_never_ends_stops_at_the_evaluation_limit():
    with pytest.raises(IntegrationError, match=f"used {MAX_EVALUATIONS} evaluations .* by t = .*phase 'hose-fed "
                                               "thrust'.*run.end_time"):
        fly(str(bundled_models()["hose-fed-hover"]), **{"run.end_time": "1e6 s", "run.output_interval": "100 s"})


def test_the_step_guard_windows_are_far_from_the_bundled_scenarios():
    # The bounds must never touch a normal flight: the bundled ones use a small fraction of them.
    for name, path in bundled_models().items():
        r = fly(str(path))
        assert r.nfev < MAX_EVALUATIONS / 5, name
        assert r.nfev < WINDOW or r.t[-1] / r.nfev * WINDOW > 0.5, name


# -- unbounded allocations -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("interval", ["1e-7 s", "5e-324 s"])
def test_a_tiny_output_interval_is_refused_with_the_count_and_the_limit(tmp_path, capsys, interval):
    line = refused(tmp_path, capsys, edit(BOTTLE, 'end_time = "30 s"', f'end_time = "30 s"\noutput_interval = "{interval}"'),
                   "run.output_interval", "output samples", f"the limit is {MAX_OUTPUT_SAMPLES}", "Fix:")
    assert not NONFINITE.search(line)


def test_a_long_end_time_on_the_free_floater_is_refused_not_a_memory_error(tmp_path, capsys):
    text = model_text("cold-gas-free-floater", ('end_time = "60 s"', 'end_time = "60000 s"'))
    refused(tmp_path, capsys, text, "run.output_interval", "asks for 600000 output samples",
            f"the limit is {MAX_OUTPUT_SAMPLES}")


def test_a_billion_dispersion_samples_are_refused():
    with pytest.raises(ModelError, match=f"asks for 1000000000 samples; the limit is {MAX_DESIGNS}"):
        read_study({"dispersion": {"spread": {"launch.elevation": "normal(sd=1 deg)"}, "samples": 1000000000}})


@pytest.mark.parametrize("text", ["components.bottle.fill=0.1..0.6 in 1000000000"])
def test_a_billion_sweep_values_are_refused(text):
    with pytest.raises(ModelError, match=f"asks for 1000000000 values; the limit is {MAX_DESIGNS}"):
        Vary.parse(text)


def test_a_billion_sweep_values_from_the_command_line(tmp_path, capsys):
    rc = main(["study", "bottle-rocket", "sweep", "--vary", "components.bottle.fill=0.1..0.6 in 1000000000",
               "--quiet"])
    err = capsys.readouterr().err
    assert rc == 2 and "asks for 1000000000 values; the limit is 1000000" in err


# -- parser and type errors ----------------------------------------------------------------------------------------

@pytest.mark.parametrize("depth", [40, 3000])
def test_deep_nesting_is_one_model_error(tmp_path, capsys, depth):
    text = edit(BOTTLE, "fill = 0.33", "fill = " + "[" * depth + "1" + "]" * depth)
    refused(tmp_path, capsys, text, "nest", "Fix:")


def test_deep_inline_tables_are_one_model_error():
    with pytest.raises(ModelError, match="nests lists or tables"):
        loads_model('format = "thrustgraph-model"\nversion = 1\nx = ' + "{ a = " * 2000 + "1" + " }" * 2000)


@pytest.mark.parametrize("key, value, words", [
    ("component", '["sustainer"]', "triggers.light_sustainer.component: expected one component name as text"),
    ("stage", '["booster"]', "triggers.drop_booster.stage: expected one stage name as text"),
])
def test_a_list_where_a_trigger_expects_a_name(tmp_path, capsys, key, value, words):
    text = bundled_models()["two-stage-demo"].read_text()
    text = edit(text, f'{key} = "{"sustainer" if key == "component" else "booster"}"', f"{key} = {value}")
    refused(tmp_path, capsys, text, words, "not a list")


def test_wrong_types_are_one_clear_error_each(tmp_path, capsys):
    for old, new, words in [
        ('volume = "2 L"', "volume = true", "expected a volume, got the flag True"),
        ('volume = "2 L"', "volume = [1, 2]", "expected a volume, got list"),
        ('volume = "2 L"', "volume = 1979-05-27", "expected a quantity, number, word or flag, found a date"),
        ('kind = "airframe"', "kind = 5", "expected the name of a kind as text"),
        ('mount = "guide"', "mount = [1]", "launch.mount: expected one of"),
    ]:
        refused(tmp_path, capsys, edit(BOTTLE, old, new), words)


def test_a_model_name_with_math_text_plots(tmp_path):
    pytest.importorskip("matplotlib")
    from thrustgraph.outputs.plots import figures, render

    r = fly(loads_model(edit(BOTTLE, 'name = "two-litre water rocket"', 'name = "rocket $\\\\frac{1}{$"')))
    for fig in figures(r).values():
        assert render(fig, "png").startswith(b"\x89PNG")


# -- failures inside the integration speak the model's language ----------------------------------------------------

def test_a_device_failure_inside_the_flight_names_the_state_and_the_time():
    pytest.importorskip("CoolProp")
    # A 1 mL cartridge holding 5 g of CO2 at 20 degC is beyond what CoolProp can put in it (liquid denser than
    # the fluid can be): the tank model fails on its first state.
    m = load_model(bundled_models()["gas-cartridge-cart"])
    m.set("components.cartridge.volume", "1 mL").set("components.cartridge.propellant_mass", "5 g")
    try:
        fly(m)
    except IntegrationError as exc:
        msg = str(exc)
        assert "at t = " in msg and "cartridge." in msg and "Fix:" in msg
    except ModelError as exc:
        assert "components.cartridge" in str(exc)
    else:
        pytest.fail("the overfilled cartridge flew")


def test_a_failing_right_hand_side_is_reported_with_component_state_and_time():
    from thrustgraph.flight.stepguard import StepGuard

    g = StepGuard(("position.z", "tank.mass", "tank.temperature"), ("m", "kg", "K"), t_end=5.0)
    ok = g.watch(lambda t, y: np.zeros(3), "gas thrust")
    ok(1.0, np.array([0.0, 0.1, 290.0]))

    def coolprop_like(t, y):
        raise ValueError("T [nan K] below Ttriple")
    with pytest.raises(IntegrationError) as info:
        g.watch(coolprop_like, "gas thrust")(1.25, np.array([0.0, 0.1, math.nan]))
    msg = str(info.value)
    assert msg.startswith("at t = 1.25 s in phase 'gas thrust' the state tank.temperature (not a number) left its valid range")
    assert "T [not-a-number K] below Ttriple" in msg and "Fix: the tank stopped being physical here" in msg


def test_a_flight_whose_rates_blow_up_says_which_and_when_without_printing_nan():
    # Found by the generator (seed 1, case 3089: the hose-fed platform dropped into still water, which now flies):
    # a rate that stops being finite is named with its time and phase, in words, never as "nan"
    from thrustgraph.flight.stepguard import StepGuard

    g = StepGuard(("position.z", "hose.flow", "hose.pressure"), ("m", "kg/s", "Pa"), t_end=5.0)
    rates = g.watch(lambda t, y: np.array([0.0, math.inf if t > 1.0 else 0.1, 0.0]), "hose-fed thrust")
    rates(0.5, np.array([0.0, 0.1, 2e5]))
    rates(1.5, np.array([0.0, 0.2, 2e5]))
    line = g.explain("Required step size is less than spacing between numbers.")
    assert "stopped being a finite number at t = 1.5 s" in line and "hose-fed thrust" in line and "hose.flow" in line
    assert not NONFINITE.search(line)


@pytest.mark.parametrize("text, unit, si", [
    ("60 g0", "m/s^2", 60 * 9.80665), ("1 1/s", "Hz", 1.0), ("2 /s", "Hz", 2.0), ("287 J/(kg*K)", "J/kg/K", 287.0),
    ("3.8 cm^2", "m^2", 3.8e-4), ("2 m**2", "m^2", 2.0), ("15 degC", "K", 288.15), ("-40 degF", "K", 233.15),
    (".5 mm", "m", 5e-4), ("1e-3 s", "s", 1e-3), ("+5 m", "m", 5.0), ("30 W/m^2/K", "W/m^2/K", 30.0),
])
def test_ordinary_quantities_still_read(text, unit, si):
    from thrustgraph.base.units import to_si

    assert to_si(text, unit) == pytest.approx(si)
