"""The outcome registry: one definition and one computation of every outcome, whoever reports it.

* every bundled model reports the same value for every outcome through ``thrustgraph run --json`` and a
  one-design ``thrustgraph study`` (both through the real command line);
* the total impulse of a constant-thrust jet equals its closed-form solution, in the run and in the study;
* every label and unit people read is unique and pint-readable, accelerations are shown in standard gravities
  with the unambiguous ``g0``;
* the docs hold the generated outcome table and name every component outcome with its unit;
* a component kind that declares an outcome twice, or two kinds that define one differently, give one clear
  plugin error naming the plugin and what to change.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import math
import re
from pathlib import Path

import pytest

from conftest import model_from_toml
from thrustgraph import PluginError, hookimpl, integrate, load_model, parse_model
from thrustgraph.cli import main
from thrustgraph.kinds.component import BodyFns, ComponentKind
from thrustgraph.models.designs import resolve
from thrustgraph.flight.ensemble import COMPUTED
from thrustgraph.base.errors import ModelError
from thrustgraph.models.modelfile import bundled_models
from thrustgraph.balance.outcomes import G0, OUTCOMES, check_kind_outcomes, default_outputs, markdown_table
from thrustgraph.kinds.outcomespec import OutcomeSpec
from thrustgraph.models.plugins import component_kinds, get_plugin_manager
from thrustgraph.studies.studies import choose_engine, evaluate
from thrustgraph.studies.studyflight import fly_design
from thrustgraph.studies.studyspec import Limit
from thrustgraph.base.units import Q_

MODELS = sorted(bundled_models().items())
DOCS = Path(__file__).resolve().parent.parent / "docs"


def _cli(*argv: str) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        status = main(list(argv))
    assert status == 0, out.getvalue()
    return out.getvalue()


def _study_row(path: Path) -> dict[str, float]:
    rows = list(csv.reader(line for line in path.read_text().splitlines() if not line.startswith("#")))
    assert len(rows) == 2, "one design"
    out = {}
    for head, cell in zip(*rows):
        key = head.split(" [")[0]
        if key in OUTCOMES:
            out[key] = float(cell) if cell else math.nan
    return out


@pytest.mark.parametrize("name, path", MODELS, ids=[n for n, _ in MODELS])
def test_run_and_one_design_study_report_the_same_outcomes(name, path, tmp_path):
    model = load_model(path)
    elevation = model.launch.get("elevation", "90 deg")     # the model's own value: the one design is the model
    _cli("run", str(path), "--json", str(tmp_path / "run.json"), "--quiet")
    _cli("study", str(path), "sweep", "--vary", f"launch.elevation={elevation}", "--flights", "single",
         "--engine", "serial", "--outputs", ",".join(OUTCOMES), "--table", str(tmp_path / "study.csv"), "--quiet")
    summary = json.loads((tmp_path / "run.json").read_text())["summary"]
    run = {k: v["value"] for k, v in summary.items() if k in OUTCOMES}
    study = _study_row(tmp_path / "study.csv")
    assert set(study) == set(OUTCOMES)
    # the run reports exactly the outcomes that apply and happened; the study has them, and NaN for the rest
    assert {k for k, v in study.items() if math.isfinite(v)} == set(run), name
    assert {"launch_mass", "total_impulse"} <= set(run)
    assert ("flight_time" in run) != ("run_time" in run), name           # flying vehicles fly, the others run
    assert ("burn_time" in run) != ("powered_time" in run), name         # fed from outside: powered, not burning
    for key, value in run.items():
        assert study[key] == pytest.approx(value, rel=1e-9, abs=1e-12), (name, key)
        assert summary[key]["unit"] == OUTCOMES[key].unit and summary[key]["label"] == OUTCOMES[key].label


def _constant_thrust(mount: str):
    # 100 N for 10 s: propellant 1 kg at 0.1 kg/s, exhaust velocity 1000 m/s, in vacuum
    return model_from_toml(f"""
        flow_paths = ["motor -> outside"]
        [launch]
        mount = "{mount}"
        elevation = "90 deg"
        [run]
        end_time = "15 s"
        [environment.medium]
        kind = "vacuum"
        [environment.gravity]
        kind = "uniform-gravity"
        g = "0 m/s^2"
        [components.body]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.motor]
        kind = "prescribed-jet"
        programme = "constant-flow"
        propellant_mass = "1 kg"
        mass_flow = "0.1 kg/s"
        exhaust_velocity = "1000 m/s"
        [components.outside]
        kind = "surroundings"
    """, name=f"constant thrust {mount}")


@pytest.mark.parametrize("mount", ["held", "free"])
def test_total_impulse_of_a_constant_thrust_jet_is_its_closed_form_solution(mount):
    # closed-form solution: a constant thrust F = mdot ve for t_b = m_p / mdot gives I = F t_b = m_p ve, and the
    # specific impulse I / (m_p g0) = ve / g0 (Sutton & Biblarz, Rocket Propulsion Elements, ch. 2, definitions of
    # total and specific impulse; from memory)
    F, tb, mp, ve = 100.0, 10.0, 1.0, 1000.0
    model = _constant_thrust(mount)
    run = integrate(model).summary
    study = fly_design(parse_model(model), list(OUTCOMES)).values
    assert run["total_impulse"] == pytest.approx(F * tb, rel=1e-9)
    assert study["total_impulse"] == pytest.approx(run["total_impulse"], rel=1e-9)
    assert run["burn_time"] == pytest.approx(tb, rel=1e-9)
    assert run["propellant_expelled"] == pytest.approx(mp, rel=1e-9)
    assert run["specific_impulse"] == pytest.approx(ve / G0, rel=1e-9)
    assert run["peak_thrust"] == pytest.approx(F, rel=1e-12)
    assert ("max_speed" in run) == (mount != "held")


def test_labels_are_unique_and_every_unit_is_pint_readable():
    kinds = component_kinds(get_plugin_manager())
    specs = list(OUTCOMES.values()) + [s for cls in kinds.values() for s in cls.outcomes]
    labels = [s.label for s in OUTCOMES.values()]
    assert len(labels) == len(set(labels)), "two core outcomes share a label"
    for cls in kinds.values():
        own = [s.label for s in cls.outcomes]
        assert len(own) == len(set(own)), cls.kind
    for spec in specs:
        for unit in (spec.unit, spec.display, *spec.also):
            Q_(1.0, unit).to(spec.unit or "")          # readable and of the outcome's dimension
        assert spec.quantity and spec.label and spec.doc
    accelerations = [s for s in OUTCOMES.values() if Q_(1.0, s.unit).dimensionality == Q_(1.0, "m/s^2").dimensionality]
    assert accelerations and all("g0" in s.also for s in accelerations)
    assert Q_(1.0, "g0").to("m/s^2").magnitude == G0


def test_every_summary_line_printed_names_a_pint_unit_of_its_outcome(tmp_path):
    # a model with parachutes, so the kinds' outcomes are printed too
    text = _cli("run", str(bundled_models()["rocket-with-parachute"]), "--quiet")
    block = text.split("\nSummary\n", 1)[1].split("\n\n", 1)[0].splitlines()
    specs = {s.label: s for s in OUTCOMES.values()}
    specs.update({f"{comp} {s.label}": s for comp in ("drogue", "main")
                  for s in component_kinds(get_plugin_manager())["recovery-device"].outcomes})
    seen = []
    for line in block:
        m = re.match(r"^  (.+?)\s{2,}(-?[0-9.eE+-]+)(?: (\S+))?(?:   \((-?[0-9.eE+-]+) (\S+)\))?$", line)
        assert m, line
        label, value, unit, also_value, also_unit = m.groups()
        spec = specs[label]
        seen.append(label)
        # the display unit scaled to the value (g / kg / t: thrustgraph.kinds.outcomespec.display_unit)
        assert (unit or "") == spec.unit_for(Q_(float(value), unit or "").to(spec.unit or "").magnitude)
        Q_(float(value), unit or "").to(spec.unit or "")
        if also_unit:
            assert also_unit in spec.also
            assert Q_(float(also_value), also_unit).to(unit).magnitude == pytest.approx(float(value), rel=1e-3)
    assert len(seen) == len(set(seen))
    assert "peak acceleration" in seen and "drogue deployment speed" in seen and "burn time" in seen
    assert "downrange distance" not in seen        # the flight stays in the launch plane: downrange = range


def test_a_cross_wind_shows_downrange_and_drift():
    bottle = load_model(bundled_models()["bottle-rocket"]).copy()
    bottle.set("environment.medium.wind_y", "3 m/s")
    r = integrate(bottle)
    assert r.summary["drift"] != 0.0 and r.summary["range"] == pytest.approx(math.hypot(r.summary["downrange"],
                                                                                          r.summary["drift"]))
    shown = [spec.label for key, spec in r.outcome_specs.items() if spec.show(r.summary)]
    assert "downrange distance" in shown and "drift across the azimuth" in shown


def test_limits_read_their_units_through_the_registry():
    assert Limit.parse("peak_acceleration <= 60 g0").si() == pytest.approx(60 * G0)
    with pytest.raises(ModelError, match=r"standard gravities are g0: g is a gram"):
        Limit.parse("peak_acceleration <= 60 g")
    assert Limit.parse("peak_vessel_pressure <= 6 bar").si() == pytest.approx(6e5)


def test_docs_hold_the_generated_outcome_table_and_every_component_outcome():
    studies = (DOCS / "studies.md").read_text()
    start = "<!-- outcomes table: generated by thrustgraph.balance.outcomes.markdown_table(); a test checks it is current -->\n"
    assert start + markdown_table() + "<!-- end of the outcomes table -->" in studies, \
        "docs/studies.md: regenerate the outcomes table from thrustgraph.balance.outcomes.markdown_table()"
    text = "\n".join(p.read_text() for p in DOCS.glob("*.md"))
    for cls in component_kinds(get_plugin_manager()).values():
        for spec in cls.outcomes:
            assert re.search(rf"`{spec.key}`\s*\|\s*{re.escape(spec.unit or '1')}\s*\|", text), (cls.kind, spec.key)
    assert set(default_outputs()) <= set(OUTCOMES)


# -- plugins that declare outcomes ----------------------------------------------------------------------------

def _plugin(*kinds):
    class Plugin:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return list(kinds)
    return Plugin()


def _build_body(cls, p, ops):
    return BodyFns(mass=0.01)


def _kind(name: str, outcomes: tuple) -> type:
    return type(f"Kind_{name.replace('-', '_')}", (ComponentKind,), {"kind": name, "role": "body", "summary": "test",
                                                                     "outcomes": outcomes,
                                                                     "build_body": classmethod(_build_body)})


SPEED = OutcomeSpec("release_speed", "speed", "m/s", "m/s", "release speed", "speed at release")


def test_a_kind_declaring_an_outcome_twice_is_refused_by_name():
    twice = _kind("twice", (SPEED, OutcomeSpec("release_speed", "time", "s", "s", "release time", "when")))
    with pytest.raises(PluginError, match=r"kind 'twice' declares outcome 'release_speed' twice. Fix: declare each "
                                          r"outcome once"):
        component_kinds(get_plugin_manager(extra=[_plugin(twice)]))


def test_two_kinds_defining_one_outcome_differently_are_refused_naming_both():
    a = _kind("hook-a", (SPEED,))
    b = _kind("hook-b", (OutcomeSpec("release_speed", "time", "s", "s", "release time", "when it let go"),))
    with pytest.raises(PluginError, match=r"outcome 'release_speed' is declared by kind 'hook-a' \(plugin .*\) as "
                                          r"'release speed' \[m/s\] and by kind 'hook-b' .* Fix: rename one"):
        component_kinds(get_plugin_manager(extra=[_plugin(a, b)]))
    same = _kind("hook-c", (SPEED,))                  # the same definition, shared, is one outcome
    assert {"hook-a", "hook-c"} <= set(component_kinds(get_plugin_manager(extra=[_plugin(a, same)])))


@pytest.mark.parametrize("outcomes, message", [
    ((OutcomeSpec("apogee", "length", "m", "m", "top", "top"),), r"'apogee', a core outcome .* own key"),
    ((OutcomeSpec("load", "force", "N", "g0", "load", "load"),), r"unit 'g0' is not a unit of 'N'"),
    ((OutcomeSpec("Bad.Key", "force", "N", "N", "load", "load"),), r"outcome key 'Bad.Key'"),
    ((SPEED, OutcomeSpec("release_time", "time", "s", "s", "release speed", "when")), r"two outcomes the label"),
])
def test_bad_outcome_declarations_are_refused(outcomes, message):
    with pytest.raises(PluginError, match=message):
        component_kinds(get_plugin_manager(extra=[_plugin(_kind("bad-kind", outcomes))]))


def test_the_old_summary_units_table_is_refused_with_the_fix():
    old = type("Old", (ComponentKind,), {"kind": "old-kind", "role": "body", "summary": "t",
                                         "summary_units": {"x": "m"}})
    seen: dict = {}
    with pytest.raises(PluginError, match=r"sets summary_units, which thrustgraph no longer reads. Fix: declare "
                                          r"outcomes"):
        check_kind_outcomes(old, "old-plugin", seen)


def test_a_kind_returning_an_undeclared_outcome_is_named(toml_model):
    airframe = component_kinds(get_plugin_manager())["airframe"]
    loud = type("Loud", (airframe,), {"kind": "loud-airframe", "outcomes": (SPEED,),
                                      "summarize": classmethod(lambda cls, name, p, result: {"releas_speed": 1.0})})
    model = load_model(bundled_models()["bottle-rocket"]).copy()
    model.set("components.airframe.kind", "loud-airframe")
    parsed = parse_model(model, plugin_manager=get_plugin_manager(extra=[_plugin(loud)]))
    with pytest.raises(PluginError, match=r"kind 'loud-airframe': summarize returned 'releas_speed', which the kind "
                                          r"does not declare"):
        integrate(parsed)


def test_a_study_asking_for_an_outcome_the_ensemble_does_not_compute_flies_single_flights():
    model = load_model(bundled_models()["bottle-rocket"])
    parsed = parse_model(model)
    assert "peak_thrust" not in COMPUTED and set(COMPUTED) <= set(OUTCOMES)
    assert choose_engine(500, parsed, "serial", "auto", ["apogee"])[1] == "ensemble"
    assert choose_engine(500, parsed, "serial", "auto", ["apogee", "peak_thrust"])[1] == "single"
    with pytest.raises(ModelError, match="the vectorised ensemble does not compute peak_thrust"):
        evaluate(model, [resolve(parsed, "components.bottle.fill")], [[0.3]], ["apogee", "peak_thrust"],
                 parsed=parsed, engine="serial", flights="ensemble", quiet=True)
