"""Outputs that fit the vehicle: which outcomes every bundled model reports, net and gross thrust against closed
forms, display units by magnitude, events and signals per mount (docs/outputs.md)."""

from __future__ import annotations

import math
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.flight.integrate import integrate
from thrustgraph.models.model import parse_model
from thrustgraph.models.designs import resolve
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.studies.studyflight import fly_design
from conftest import model_from_toml
from thrustgraph.balance.outcomes import OUTCOMES, outputs_by_vehicle
from thrustgraph.kinds.outcomespec import display_unit
from thrustgraph.kinds.vehicle import vehicle_profile

ROOT = Path(__file__).resolve().parent.parent
MODELS = sorted((ROOT / "models").glob("*.toml"))

#: The class of every bundled model (thrustgraph.kinds.vehicle) and what its summary must and must not show.
KIND = {
    "bottle-rocket": "flying", "twin-nozzle-bottle-rocket": "flying", "rocket-with-parachute": "flying",
    "small-rocket-standard-atmosphere": "flying", "two-stage-demo": "flying", "hose-fed-hover": "hovering",
    "water-jet-boat": "track", "gas-cartridge-cart": "track", "cold-gas-track": "track",
    "cold-gas-free-floater": "weightless",
}
MUST = {
    "flying": {"flight_time", "burn_time", "apogee", "range", "max_speed", "total_impulse", "peak_thrust"},
    "hovering": {"flight_time", "powered_time", "max_height", "mean_height", "height_oscillation",
                 "peak_net_thrust", "net_impulse"},
    "track": {"run_time", "top_speed", "time_to_90_percent_speed", "distance", "total_impulse"},
    "weightless": {"run_time", "burn_time", "max_speed", "range", "peak_side_force"},
}
NEVER = {
    "flying": {"run_time", "top_speed", "distance", "max_height"},
    "hovering": {"apogee", "run_time", "burn_time", "propellant_expelled", "specific_impulse", "guide_exit_speed",
                 "range"},
    "track": {"flight_time", "apogee", "impact_speed", "max_speed", "range", "guide_exit_speed", "max_height"},
    "weightless": {"flight_time", "apogee", "impact_speed", "guide_exit_speed", "top_speed"},
}


@pytest.fixture(scope="module")
def runs():
    return {}


def _run(runs, stem):
    if stem not in runs:
        runs[stem] = tg.fly(tg.load_model(ROOT / "models" / f"{stem}.toml"))
    return runs[stem]


def test_every_bundled_model_has_its_class():
    assert {p.stem for p in MODELS} == set(KIND), "a new bundled model: give it its class here"


@pytest.mark.parametrize("path", MODELS, ids=[p.stem for p in MODELS])
def test_each_bundled_model_reports_the_outcomes_of_its_class(path, runs):
    r = _run(runs, path.stem)
    kind = KIND[path.stem]
    assert r.vehicle.kind == kind == vehicle_profile(parse_model(tg.load_model(path))).kind
    core = {k for k in r.summary if k in OUTCOMES}
    assert MUST[kind] <= core, (path.stem, MUST[kind] - core)
    assert not (NEVER[kind] & core), (path.stem, NEVER[kind] & core)
    # every outcome reported applies to the class (the generated table of docs/outputs.md says so too)
    assert all(OUTCOMES[k].applies(r.vehicle) for k in core)
    names = [e.name for e in r.events]
    if kind != "flying":
        assert "apogee" not in names, path.stem
    if kind == "hovering":
        assert "lift-off" in names and "guide exit" not in names      # a zero-length pad


def test_the_docs_list_the_outcomes_of_every_class_of_vehicle():
    text = (ROOT / "docs" / "outputs.md").read_text()
    assert outputs_by_vehicle() in text, "docs/outputs.md: regenerate the table from outcomes.outputs_by_vehicle()"


def test_boat_net_thrust_at_steady_speed_is_the_waterjet_momentum_balance(runs):
    # Waterjet momentum balance: net thrust T = mdot (V_j - V_0), the jet's momentum less the inlet's ram drag
    # (Carlton, Marine Propellers and Propulsion, 2nd ed. 2007, ch. 21 waterjet propulsion; from memory). At the
    # steady speed it equals the hull resistance (the acceleration is below 1e-5 m/s^2 at 19.9 s).
    r = _run(runs, "water-jet-boat")
    k = int(np.searchsorted(r.t, 19.9))
    mdot, vj, v0 = r.signals["jet.mass_flow"][k], r.signals["jet.exit_velocity"][k], r.signals["speed"][k]
    assert r.signals["net_thrust"][k] == pytest.approx(mdot * (vj - v0), rel=1e-12)
    assert r.signals["thrust"][k] == pytest.approx(mdot * vj, rel=1e-12)             # gross: the jet alone
    resistance = -r.ledger[("hull", "resistance")][k, 0]
    assert abs(r.signals["path_acceleration"][k]) < 1e-5
    assert r.signals["net_thrust"][k] == pytest.approx(resistance, rel=1e-5)
    assert r.signals["net_thrust"][k] < 0.7 * r.signals["thrust"][k]                # ram drag is a third of it
    assert r.summary["net_impulse"] < r.summary["total_impulse"]


def test_hose_rig_net_thrust_adds_the_hose_inflow_momentum(runs):
    # Linear momentum of a control volume (White, Fluid Mechanics, 7th ed. 2011, eq. 3.40): water entering from
    # below at v = mdot / (rho A_hose) brings momentum mdot^2 / (rho A_hose) upward.
    r = _run(runs, "hose-fed-hover")
    rho, A = 998.2, math.pi / 4 * 0.08 ** 2
    mdot = r.signals["hose.mass_flow"]
    extra = r.signals["net_thrust"] - r.signals["thrust"]
    assert np.max(np.abs(extra - mdot ** 2 / (rho * A))) < 1e-9 * np.max(r.signals["thrust"])
    assert r.summary["peak_net_thrust"] > r.summary["peak_thrust"]


def test_the_coasting_boat_decelerates_with_a_negative_path_acceleration(runs):
    r = _run(runs, "water-jet-boat")
    coast = (r.t > 20.5) & (r.t < 59.0)
    assert np.all(r.signals["path_acceleration"][coast] < 0.0)
    assert np.allclose(np.abs(r.signals["path_acceleration"]), r.signals["acceleration_magnitude"], atol=1e-9)


def test_the_summary_shows_each_value_in_the_unit_of_its_magnitude(runs):
    from thrustgraph.commands.run import summary_lines
    boat = "\n".join(summary_lines(_run(runs, "water-jet-boat")))
    bottle = "\n".join(summary_lines(_run(runs, "bottle-rocket")))
    assert re.search(r"launch mass\s+25 kg", boat)
    assert re.search(r"launch mass\s+777\.\d+ g\b", bottle)
    assert re.search(r"burn time\s+112\.\d+ ms", bottle)
    assert display_unit("kg", 25000.0) == "t" and display_unit("m", 1929.8) == "km"
    assert display_unit("Pa", 5e5, "bar") == "bar"


def _vent_model(opening: str) -> str:
    return model_from_toml(f"""
        flow_paths = ["tank -> valve -> outside"]
        [launch]
        mount = "free"
        elevation = "0 deg"
        attitude = "fixed"
        [run]
        end_time = "0.5 s"
        output_interval = "0.05 s"
        [environment.medium]
        kind = "vacuum"
        [environment.gravity]
        kind = "uniform-gravity"
        g = "0 m/s^2"
        [components.frame]
        kind = "airframe"
        dry_mass = "1 kg"
        [components.tank]
        kind = "gas-tank"
        gas = "air"
        volume = "1 L"
        gauge_pressure = "10 bar"
        process = "isothermal"
        [components.valve]
        kind = "vent"
        flow_area = "3 mm^2"
        {opening}
        [components.outside]
        kind = "surroundings"
    """)


def test_a_vent_does_not_push_unless_it_says_where_and_a_sideways_push_is_a_side_force():
    from thrustgraph.commands.run import summary_lines
    default = integrate(_vent_model(""))
    assert np.max(np.abs(default.signals["thrust_vector"])) == 0.0           # vents without pushing
    aft = integrate(_vent_model('arrangement = "one-sided"'))
    assert aft.summary["peak_thrust"] > 0.1 and not "peak side force" in "\n".join(summary_lines(aft))
    side = integrate(_vent_model('arrangement = "one-sided"\ndirection = [0, 1, 0]'))
    assert abs(side.summary["peak_thrust"]) < 1e-12
    assert side.summary["peak_side_force"] == pytest.approx(aft.summary["peak_thrust"], rel=1e-9)
    assert "peak side force" in "\n".join(summary_lines(side))


def _interp(r, t: float, key: str) -> float:
    return float(np.interp(t, r.t, r.signals[key]))


def test_nozzle_regime_changes_and_separation_are_logged_where_they_happen(runs):
    # The supersonic exit turns from under- to overexpanded where the exit pressure equals ambient, and meets the
    # separation criterion where it falls to 0.4 of ambient (Summerfield criterion p_e < ~0.4 p_a; Sutton &
    # Biblarz, Rocket Propulsion Elements, ch. 3; ratio from memory). The log locates both on the dense output;
    # the exit pressure read off the output samples (0.1 s apart, linear between) agrees to 1e-4.
    r = _run(runs, "cold-gas-track")
    log = [e for e in r.events if e.component == "thruster"]
    over = next(e for e in log if e.detail == "underexpanded or matched -> overexpanded")
    sep = next(e for e in log if e.detail.endswith("-> separation criterion met"))
    pa = 101325.0
    assert _interp(r, over.t, "thruster.exit_pressure") == pytest.approx(pa, rel=1e-4)
    assert _interp(r, sep.t, "thruster.exit_pressure") == pytest.approx(0.4 * pa, rel=1e-4)
    assert over.t < sep.t
    assert [e.t for e in r.events] == sorted(e.t for e in r.events)
    caution = next(c for c in r.cautions if c.startswith("components.thruster:"))
    assert "Summerfield" in caution and "Sutton & Biblarz" in caution and f"{sep.t:.4g} s" in caution


def test_a_tank_reports_its_lowest_temperature_and_cautions_about_cold(runs):
    r = _run(runs, "cold-gas-track")
    low = r.summary["bottle.lowest_temperature"]
    assert low == float(np.min(r.signals["bottle.temperature"])) and low < 244.15
    assert any("Cold embrittlement" in c and "components.bottle" in c for c in r.cautions)
    warm = _run(runs, "cold-gas-free-floater")          # isothermal: stays at its charge temperature
    assert warm.summary["tank.lowest_temperature"] == pytest.approx(293.15, abs=1e-9)
    assert not any("Cold embrittlement" in c for c in warm.cautions)


def test_the_motion_plot_fits_the_mount(runs, stand):
    pytest.importorskip("matplotlib")
    from thrustgraph.outputs.plots import figure
    boat = figure(_run(runs, "water-jet-boat"), "motion")
    axes = boat.axes
    assert axes[0].get_ylabel() == "distance along the track [m]"
    acc = axes[2].lines[0].get_ydata()
    assert acc.min() < -3.0 and acc.max() > 5.0             # decelerating while it coasts: signed, not a magnitude
    hover = figure(_run(runs, "hose-fed-hover"), "motion")
    assert hover.axes[0].get_ylabel() == "height [m]" and "mean height" in hover.axes[0].get_title()
    held = tg.fly(tg.load_model(stand / "held.toml"))
    assert held.vehicle.kind == "stand" and figure(held, "motion") is None
    thrust = figure(_run(runs, "water-jet-boat"), "thrust")
    labels = [ln.get_label() for ln in thrust.axes[0].lines]
    assert any(lb.startswith("gross thrust") for lb in labels) and any(lb.startswith("net thrust") for lb in labels)


def test_plot_and_export_take_the_same_out_dir_option_and_the_old_spelling_still_works(tmp_path, capsys):
    pytest.importorskip("matplotlib")
    from thrustgraph.cli import main
    assert main(["plot", "--quiet", "--only", "mass", "--out-dir", str(tmp_path / "a")]) == 0
    assert (tmp_path / "a" / "mass.png").exists()
    assert "deprecated" not in capsys.readouterr().err
    assert main(["plot", "--quiet", "--only", "mass", "--out", str(tmp_path / "b")]) == 0
    assert (tmp_path / "b" / "mass.png").exists()
    err = capsys.readouterr().err
    assert "--out is deprecated" in err and "--out-dir" in err
    assert main(["export", "--quiet", "--out-dir", str(tmp_path / "c")]) == 0
    assert (tmp_path / "c" / "bottle-rocket.json").exists()


def test_the_pump_reports_its_operating_point(runs):
    # A power pump above its shut-off flow gives the liquid eta P: Q dp = 0.6 x 1.5 kW (its model, docs/
    # fluid-devices.md); the head is dp / (rho g0). Read at the last sample while it runs (19.9 s of 20 s).
    r = _run(runs, "water-jet-boat")
    s = r.summary
    k = int(np.searchsorted(r.t, s["pump.operating_time"]))
    assert s["pump.operating_time"] == pytest.approx(19.9, abs=1e-9)
    assert s["pump.volume_flow"] == pytest.approx(r.signals["pump.mass_flow"][k] / 998.2, rel=1e-12)
    assert s["pump.hydraulic_power"] == pytest.approx(0.6 * 1500.0, rel=1e-9)
    assert s["pump.efficiency"] == pytest.approx(0.6, rel=1e-9) and s["pump.shaft_power"] == 1500.0
    assert s["pump.head"] == pytest.approx(r.signals["pump.pressure_rise"][k] / (998.2 * 9.80665), rel=1e-12)


# ---------------------------------------------------------------------------
# the documented outcomes of each class, exactly, on every bundled model
# ---------------------------------------------------------------------------

#: Facts about each bundled model read by eye from its file (not from thrustgraph.kinds.vehicle, which the
#: generated table comes from): it has stages, a vessel (a tank, a bottle, a cartridge), a feed from outside (an
#: inlet, a hose). The guide length is read from the file's [launch] table below.
FACTS = {
    "bottle-rocket": {"vessel"}, "twin-nozzle-bottle-rocket": {"vessel"}, "rocket-with-parachute": set(),
    "small-rocket-standard-atmosphere": set(), "two-stage-demo": {"stages"}, "hose-fed-hover": {"fed"},
    "water-jet-boat": {"fed"}, "gas-cartridge-cart": {"vessel"}, "cold-gas-track": {"vessel"},
    "cold-gas-free-floater": {"vessel"}, "held": {"vessel"},
}
#: The words of a cell of the table in docs/outputs.md, as the test reads them, against a model's facts.
CELLS = {
    "yes": lambda facts: True,
    "-": lambda facts: False,
    "with stages": lambda facts: "stages" in facts,
    "with a vessel": lambda facts: "vessel" in facts,
    "yes, unless fed from outside": lambda facts: "fed" not in facts,
    "fed from outside": lambda facts: "fed" in facts,
    "on a guide longer than 0": lambda facts: "guide" in facts,
}
#: The outcomes kept for tables and never printed in a summary (the end point, for the range and the overlay).
TABLE_ONLY = {"impact_x", "impact_y"}


def _documented() -> dict[str, dict[str, str]]:
    """The table "Which outcomes each class shows" of docs/outputs.md: {class label: {key: cell}}."""
    text = (ROOT / "docs" / "outputs.md").read_text()
    rows = [line for line in text.split("## Which outcomes each class shows")[1].splitlines()
            if line.startswith("| `")]
    head = next(line for line in text.splitlines() if line.startswith("| key | label |"))
    classes = [c.strip() for c in head.strip("|").split("|")][2:]
    table: dict[str, dict[str, str]] = {c: {} for c in classes}
    for line in rows:
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        for c, cell in zip(classes, cells[2:]):
            table[c][cells[0].strip("`")] = cell
    return table


def _facts(stem: str, path: Path) -> set[str]:
    import tomllib
    from thrustgraph.base.units import Q_
    launch = tomllib.loads(path.read_text()).get("launch", {})
    guide = launch.get("mount", "guide") == "guide" and Q_(launch.get("guide_length", "0 m")).to("m").magnitude > 0
    return FACTS[stem] | ({"guide"} if guide else set())


def _printed_keys(r) -> set[str]:
    from thrustgraph.commands.run import summary_lines
    by_label = {OUTCOMES[k].label: k for k in OUTCOMES}
    keys = set()
    for line in summary_lines(r):
        label = re.split(r"\s{2,}", line.strip())[0]
        if label in by_label:
            keys.add(by_label[label])
    return keys


@pytest.mark.parametrize("stem", [p.stem for p in MODELS] + ["held"])
def test_the_summary_holds_exactly_the_documented_outcomes_of_its_class(stem, runs, stand):
    from thrustgraph.kinds.vehicle import LABELS
    path = stand / "held.toml" if stem == "held" else ROOT / "models" / f"{stem}.toml"
    r = runs[stem] if stem in runs else runs.setdefault(stem, tg.fly(tg.load_model(path)))
    cells = _documented()[LABELS[r.vehicle.kind]]
    facts = _facts(stem, path)
    unknown = {cell for cell in cells.values() if cell not in CELLS}
    assert not unknown, f"docs/outputs.md has cells this test cannot read: {unknown}"
    documented = {key for key, cell in cells.items() if CELLS[cell](facts)}
    got = {k for k in r.summary if k in OUTCOMES} - TABLE_ONLY
    ground_impact = any(e.name == "ground impact" for e in r.events)
    # what did not happen is left out (docs: "no ground impact"), and nothing else
    assert got == documented - (set() if ground_impact else {"impact_speed"}), (stem, got ^ documented)
    # the printed summary leaves out, besides, only what adds nothing (the rules of docs/outputs.md)
    s = r.summary
    same = {"final_mass": s["final_mass"] == pytest.approx(s["launch_mass"], rel=1e-9),
            "peak_net_thrust": s["peak_net_thrust"] == pytest.approx(s["peak_thrust"], rel=1e-9),
            "net_impulse": s["net_impulse"] == pytest.approx(s["total_impulse"], rel=1e-9),
            "peak_side_force": s["peak_side_force"] <= 1e-6 * max(s["peak_thrust"], 1e-300),
            "drift": abs(s.get("drift", 0.0)) <= 1e-9 * max(abs(s.get("range", 0.0)), 1.0)}
    same["downrange"] = same["drift"]
    assert _printed_keys(r) == {k for k in got if not same.get(k, False)}, stem


# ---------------------------------------------------------------------------
# a track's top speed, time to 90 % of it and distance against the rocket equation
# ---------------------------------------------------------------------------

def test_top_speed_time_to_90_percent_and_distance_on_a_track_are_the_rocket_equation():
    # A constant flow mdot at exhaust speed ve on a level frictionless track in vacuum: the rocket equation
    # v(t) = ve ln(m0 / m(t)), m(t) = m0 - mdot t (Tsiolkovsky 1903; Sutton & Biblarz, Rocket Propulsion
    # Elements, ch. 4, no gravity or drag along the track), then a coast at the burnout speed. Closed forms:
    # top speed ve ln(m0/mf); 90 % of it when m = m0 (mf/m0)^0.9; the distance under power
    # ve (t_b + (mf/mdot) ln(mf/m0)), then v_b (t_end - t_b).
    m0, mf, mdot, ve, t_end = 2.0, 1.2, 0.1, 100.0, 15.0
    model = model_from_toml(f"""
        flow_paths = ["motor -> outside"]
        [launch]
        mount = "track"
        elevation = "0 deg"
        [run]
        end_time = "{t_end} s"
        [environment.medium]
        kind = "vacuum"
        [environment.gravity]
        kind = "uniform-gravity"
        [components.body]
        kind = "airframe"
        dry_mass = "{mf} kg"
        [components.motor]
        kind = "prescribed-jet"
        programme = "constant-flow"
        propellant_mass = "{m0 - mf} kg"
        mass_flow = "{mdot} kg/s"
        exhaust_velocity = "{ve} m/s"
        [components.outside]
        kind = "surroundings"
    """, name="rocket on a track")
    r = integrate(model)
    tb = (m0 - mf) / mdot
    vb = ve * math.log(m0 / mf)
    assert r.vehicle.kind == "track"
    assert r.summary["top_speed"] == pytest.approx(vb, rel=1e-9)
    assert r.summary["time_to_90_percent_speed"] == pytest.approx((m0 - m0 * (mf / m0) ** 0.9) / mdot, rel=1e-8)
    distance = ve * (tb + mf / mdot * math.log(mf / m0)) + vb * (t_end - tb)
    assert r.summary["distance"] == pytest.approx(distance, rel=1e-8)
    assert r.summary["run_time"] == t_end and "apogee" not in r.summary and "flight_time" not in r.summary


def test_a_rocket_on_a_zero_length_pad_lifts_off_and_has_no_guide_exit():
    # The complaint: a zero-length pad printed a "guide exit" at 2 us with 0.00097 m/s. With no guide there is
    # no guide exit and no guide-exit speed; the log says when it left the pad: at the start, at zero speed (its
    # thrust, 330 N, is far above its weight, 7.6 N), not a first step later (2.2 us, 0.0009 m/s, until this
    # was fixed).
    base = tg.load_model(ROOT / "models" / "bottle-rocket.toml")
    with warnings.catch_warnings():
        warnings.simplefilter("error")        # free at zero speed: the axis into the wind divides by no zero
        pad = integrate(base.set("launch.guide_length", "0 m"))
    names = [e.name for e in pad.events]
    assert "guide exit" not in names and "guide_exit_speed" not in pad.summary
    lift = next(e for e in pad.events if e.name == "lift-off")
    assert (lift.t, lift.detail) == (0.0, "speed 0 m/s") and names.index("lift-off") == 1
    assert pad.signals["thrust"][0] > 40.0 * pad.summary["launch_mass"] * 9.80665
    # an ensemble of it lifts off at the start too: its outcomes those of the single flight (the range was
    # 2e-5 apart while the ensemble left the pad a step later than the single flight; rtol 1e-9, RK45, as
    # tests/test_one_balance.py flies)
    tight = base.set("run.rtol", 1e-9).set("run.atol", 1e-9).set("run.method", "RK45")
    parsed = parse_model(tight)
    p = resolve(parsed, "components.bottle.fill")
    names = ["apogee", "range", "max_speed", "peak_acceleration"]
    res = fly_designs(parsed, [p], np.array([[0.33]]), names)
    single = fly_design(parsed).values
    size = single["apogee"]
    for k, name in enumerate(names):
        assert res.values[0, k] == pytest.approx(single[name], rel=1e-6, abs=1e-6 * size), name
    guided = integrate(tg.load_model(ROOT / "models" / "bottle-rocket.toml"))
    names = [e.name for e in guided.events]
    assert "lift-off" not in names and "guide exit" in names and guided.summary["guide_exit_speed"] > 30.0


def test_a_long_component_label_keeps_the_summary_s_value_column(runs):
    # "pump efficiency at the operating point" is 38 characters: the values all end in one column
    from thrustgraph.commands.run import summary_lines
    lines = summary_lines(_run(runs, "water-jet-boat"))
    assert any("pump efficiency at the operating point" in line for line in lines)
    ends = {re.match(r"  .*?\S\s{2,}\S+", line).end() for line in lines}
    assert len(ends) == 1, lines
