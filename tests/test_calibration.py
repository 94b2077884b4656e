"""Test-stand physics and calibration: the held bottle against exact quadrature, fits that recover known
parameters within their reported intervals, bad input, provenance of the calibrated model, and the command line.

Every synthetic record here comes from the bundled bottle rocket held on a test stand
(models/bottle-rocket.toml with ``launch.mount = "held"``), flown with chosen "true" parameters and sampled the
way an averaging logger samples (each sample the mean over its own interval, computed here by a midpoint rule
independent of thrustgraph.measured.compare), plus Gaussian noise of a known level.
"""

from __future__ import annotations

import hashlib
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad, trapezoid
from scipy.stats import t as student_t

import thrustgraph as tg
from thrustgraph import ModelError
from thrustgraph.measured.calibrate import FitParameter, MeasuredRun, ProgressLine, calibrate, write_calibrated_model
from thrustgraph.measured.records import ColumnMap, align, loads_record

PA = 101325.0            # the bundled model's still air: 101325 Pa
RHO = 998.2              # the tank's default liquid density, kg/m^3
G = 9.80665              # the bundled model's uniform gravity, m/s^2
TRUE = {"components.neck.discharge_coefficient": 0.93, "components.bottle.expansion_exponent": 1.25}
FITS = [FitParameter.parse("components.neck.discharge_coefficient=0.5..1.0"),
        FitParameter.parse("components.bottle.expansion_exponent=1.0..1.67")]
MAPPING = (ColumnMap("load", "thrust"), ColumnMap("pressure", "bottle.pressure", pressure="gauge"))
DT = 0.001               # 1 kHz logger
OFFSET = 0.75            # s of record before the release


def held_model(**overrides):
    m = tg.load_model(tg.default_model_path()).set("launch.mount", "held")
    for k, v in overrides.items():
        m.set(k, v)
    return m


# ---------------------------------------------------------------------------
# the static water phase against the exact quadrature of the quasi-steady Bernoulli model
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("elevation, head", [(90.0, False), (90.0, True), (60.0, True)])
def test_static_water_phase_impulse_matches_quadrature(elevation, head):
    # Source: /work/shared/references.md section 6 (derived, status C): for a vessel held still the water phase
    # has the exact quasi-steady solution I = integral sqrt(2 rho (p - pa)) dV, t = integral dV / (Cd A v).
    # Our model: thrust = rho Q v = 2 k Cd A (p_out - pa), v = sqrt(2 k (p_out - pa) / rho), dV = Q dt, with
    # k = 1 / (1 - (Cd A / A_bore)^2) the velocity-of-approach factor (Bernoulli from the bore to the jet with
    # continuity: F. M. White, Fluid Mechanics, obstruction-meter theory), so
    # I = integral T dt = integral rho v dV over the expelled volume V = 0 .. V_l0, with
    #   p_out(V) = p0 (V_g0 / (V_g0 + V))^n + [rho g sin(elevation) (V_l0 - V) / A_bore  if inertial_head]
    # (the polytropic ullage, plus the column's gravity head along the axis: a = 0 on the stand).
    m = held_model(**{"launch.elevation": f"{elevation} deg"})
    m.components["bottle"]["inertial_head"] = head
    r = tg.integrate(m)
    volume, fill, n = 0.002, 0.33, 1.4
    p0 = PA + 4.5e5
    cd_area = 0.98 * math.pi * 0.021 ** 2 / 4.0
    a_bore = math.pi * 0.1 ** 2 / 4.0
    vl0, vg0 = volume * fill, volume * (1.0 - fill)
    g_axis = G * math.sin(math.radians(elevation))

    def drive(x: float) -> float:   # p_out - pa after a volume x has left
        hp = RHO * g_axis * (vl0 - x) / a_bore if head else 0.0
        return p0 * (vg0 / (vg0 + x)) ** n + hp - PA

    k = 1.0 / (1.0 - (cd_area / a_bore) ** 2)
    impulse, _ = quad(lambda x: math.sqrt(2.0 * k * RHO * drive(x)), 0.0, vl0, epsabs=0.0, epsrel=1e-12)
    duration, _ = quad(lambda x: 1.0 / (cd_area * math.sqrt(2.0 * k * drive(x) / RHO)), 0.0, vl0,
                       epsabs=0.0, epsrel=1e-12)

    liquid = r.phases[0]
    assert liquid.name == "liquid thrust"
    assert liquid.t_end == pytest.approx(duration, rel=1e-7)
    k = int(np.searchsorted(r.t, liquid.t_end))   # first (left-hand) sample at the end of the water phase
    # The integral of the simulated thrust: in the water phase the thrust is all momentum flux (p_e = p_a), and
    # the integrator carries its integral as the exhaust-momentum audit state.
    sim = float(np.linalg.norm([r.state(f"audit.exhaust_momentum.{c}")[k] for c in "xyz"]))
    assert sim == pytest.approx(impulse, rel=1e-7)
    # The same integral by the trapezoid rule over a fine output grid of the thrust signal itself.
    fine = tg.integrate(m.copy().set("run.output_interval", "0.00001 s"))
    kk = int(np.searchsorted(fine.t, liquid.t_end))
    trap = float(trapezoid(fine.signal("thrust")[:kk + 1], fine.t[:kk + 1]))
    assert trap == pytest.approx(impulse, rel=1e-6)


# ---------------------------------------------------------------------------
# synthetic stand records
# ---------------------------------------------------------------------------

def logger_mean(result, name: str, times: np.ndarray, dt: float, before: float, sub: int = 200) -> np.ndarray:
    """Mean of a predicted signal over each sample's interval [t - dt/2, t + dt/2] (midpoint rule); the signal
    is ``before`` until the release at t = 0."""
    offsets = ((np.arange(sub) + 0.5) / sub - 0.5) * dt
    grid = times[:, None] + offsets[None, :]
    y = np.interp(grid, result.t, result.signal(name))
    return np.where(grid < 0.0, before, y).mean(axis=1)


def synthetic_run(seed: int, *, noise_thrust: float, noise_pressure: float, settings=None,
                  truth=TRUE, name="stand.csv", lead: float = 0.0) -> tuple[str, MeasuredRun]:
    """CSV text of a noisy stand record made with the true parameters, and the run aligned on the known offset."""
    settings = dict(settings or {})
    m = held_model(**{"run.output_interval": "0.0001 s"}, **settings, **truth)
    r = tg.integrate(m)
    tm = np.arange(DT / 2 - lead, 0.16, DT)      # sample times (model clock), ``lead`` of them before the release
    rng = np.random.default_rng(seed)
    p0 = float(r.signal("bottle.pressure")[0])
    load = logger_mean(r, "thrust", tm, DT, 0.0) + rng.normal(0.0, noise_thrust, tm.size)
    gauge = logger_mean(r, "bottle.pressure", tm, DT, p0) - PA + rng.normal(0.0, noise_pressure, tm.size)
    text = "time [s],load [N],pressure [kPa]\n" + "\n".join(
        f"{float(t + OFFSET)!r},{float(f)!r},{float(p / 1e3)!r}" for t, f, p in zip(tm, load, gauge))
    rec = align(loads_record(text, source=name), start_at=f"{OFFSET} s")
    return text, MeasuredRun(rec, MAPPING, settings=settings)


def test_fit_recovers_known_parameters_within_the_intervals():
    # Noise of 1 % of each signal's range (306 N of thrust, 4.5 bar of pressure), so the scaled residuals of the
    # two signals share one spread, as the intervals assume (Bates & Watts 1988, ch. 2).
    fits = []
    for seed in range(1, 6):
        _, run = synthetic_run(seed, noise_thrust=3.06, noise_pressure=4500.0)
        fits.append(calibrate(held_model(), [run], FITS))
    covered = 0
    for cal in fits:
        t999 = float(student_t.ppf(0.9995, cal.dof))
        for v in cal.values:
            truth = TRUE[v.path]
            assert abs(v.value - truth) <= t999 * v.standard_error, (v.path, v.value, v.standard_error)
            lo, hi = v.interval
            covered += lo <= truth <= hi
            assert not v.at_bound
        assert cal.confidence == 0.95 and cal.dof == cal.n_residuals - 2
        assert abs(cal.correlation[0, 1]) < 0.99
    # 95 % intervals: with 10 of them, 8 or more should hold the truth (binomial, p = 0.95: 98.8 %).
    assert covered >= 8
    # The reported standard errors match the spread of the estimates over the seeds (5 samples, 4 degrees of
    # freedom: the ratio lies within 0.2 .. 2.5 with probability above 99.6 %).
    for k, path in enumerate(TRUE):
        spread = float(np.std([c.values[k].value for c in fits], ddof=1))
        se = float(np.mean([c.values[k].standard_error for c in fits]))
        assert 0.2 * se <= spread <= 2.5 * se, (path, spread, se)


def test_noise_scaling_with_unequal_noise():
    # Thrust much cleaner than pressure (0.3 % against 2 % of range): scale="noise" divides each signal by its own
    # residual spread, so the scaled residual has unit spread and the intervals hold again.
    for seed in (11, 12):
        _, run = synthetic_run(seed, noise_thrust=1.0, noise_pressure=9000.0)
        cal = calibrate(held_model(), [run], FITS, scale="noise")
        assert cal.s == pytest.approx(1.0, abs=0.1)
        t999 = float(student_t.ppf(0.9995, cal.dof))
        for v in cal.values:
            assert abs(v.value - TRUE[v.path]) <= t999 * v.standard_error


def test_two_records_at_different_charge_pressures(tmp_path):
    texts, runs = [], []
    for seed, p, name in ((21, "4 bar", "four.csv"), (22, "6 bar", "six.csv")):
        text, run = synthetic_run(seed, noise_thrust=3.0, noise_pressure=5000.0, name=str(tmp_path / name),
                                  settings={"components.bottle.gauge_pressure": p})
        (tmp_path / name).write_text(text)
        texts.append(text)
        runs.append(run)
    cal = calibrate(held_model(), runs, FITS)
    t999 = float(student_t.ppf(0.9995, cal.dof))
    for v in cal.values:
        assert abs(v.value - TRUE[v.path]) <= t999 * v.standard_error
    assert len(cal.signal_rms) == 4
    for (src, sig), (before, after) in cal.signal_rms.items():
        assert after < before
    # the calibrated model: fitted values in place, provenance for each, reads back, flies
    out = tmp_path / "calibrated.toml"
    write_calibrated_model(cal, str(out))
    back = tg.load_model(out)
    assert back.get("components.neck.discharge_coefficient") == cal.value("components.neck.discharge_coefficient").raw
    entry = back.calibration["components.bottle.expansion_exponent"]
    assert [r["file"] for r in entry["records"]] == [str(tmp_path / "four.csv"), str(tmp_path / "six.csv")]
    assert entry["records"][1]["sha256"] == hashlib.sha256(texts[1].encode()).hexdigest()
    assert entry["records"][1]["settings"] == {"components.bottle.gauge_pressure": "6 bar"}
    assert entry["tool"] == f"thrustgraph {tg.__version__}" and entry["date"].endswith("+00:00")
    assert entry["fitted_with"] == ["components.neck.discharge_coefficient"]
    assert entry["confidence"] == 0.95 and len(entry["interval"]) == 2
    # the per-run settings are not baked into the calibrated model
    assert back.get("components.bottle.gauge_pressure") == "4.5 bar"
    assert tg.integrate(back).success


def test_start_time_correction_after_a_trigger():
    # Aligned by a level trigger, the sudden release is placed only to within a sample (here 0.6 ms late); the
    # fit corrects the start time together with the parameters and recovers the logger's true offset.
    from thrustgraph.measured.compare import prepare_record
    from thrustgraph.measured.records import Trigger

    text, _ = synthetic_run(61, noise_thrust=3.0, noise_pressure=4500.0, lead=0.01)
    raw = loads_record(text, source="trig.csv")
    rec = prepare_record(raw, tg.integrate(held_model()), MAPPING, trigger=Trigger.parse("load > 120 N"))
    assert 5e-5 < abs(rec.offset - OFFSET) <= DT
    cal = calibrate(held_model(), [MeasuredRun(rec, MAPPING)], FITS, start_time_bound="3 ms")
    t999 = float(student_t.ppf(0.9995, cal.dof))
    for v in cal.values[:2]:
        assert abs(v.value - TRUE[v.path]) <= t999 * v.standard_error
    shift = cal.values[2]
    assert shift.start_time_of == "trig.csv" and shift.unit == "ms"
    # the refined alignment puts the release back at the logger's true file time
    refined = cal.runs[0].record.offset
    assert abs(refined - OFFSET) <= t999 * shift.standard_error
    assert abs(refined - OFFSET) < abs(rec.offset - OFFSET)
    entry = cal.calibrated_model().calibration["components.neck.discharge_coefficient"]
    assert entry["records"][0]["start_time_correction_s"] == shift.value
    assert "start time" not in " ".join(cal.calibrated_model().calibration)


def test_quantity_parameters_keep_their_unit(tmp_path):
    # Fit the charge pressure itself (a quantity with a unit): written back in the unit the model used.
    truth = {"components.bottle.gauge_pressure": "4.2 bar"}
    _, run = synthetic_run(31, noise_thrust=3.0, noise_pressure=4500.0, truth=truth)
    cal = calibrate(held_model(), [run], [FitParameter.parse("components.bottle.gauge_pressure=3 bar..6 bar")])
    v = cal.values[0]
    assert v.unit == "bar" and v.raw.endswith(" bar")
    assert abs(v.value - 4.2e5) <= float(student_t.ppf(0.9995, cal.dof)) * v.standard_error
    assert "bar" in cal.report()


# ---------------------------------------------------------------------------
# bad input: one clear message each; no calibrated model written
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def a_run():
    return synthetic_run(41, noise_thrust=3.0, noise_pressure=4500.0)[1]


@pytest.mark.parametrize("fit, parts", [
    (FitParameter("components.neck.dischage_coefficient", "0.5", "1.0"),
     ["fit components.neck.dischage_coefficient", "has no parameter 'dischage_coefficient'",
      "did you mean 'discharge_coefficient'"]),
    (FitParameter("components.nek.diameter", "20 mm", "22 mm"), ["no component 'nek'", "did you mean 'neck'"]),
    (FitParameter("bottle.fill", "0.1", "0.5"), ["fit bottle.fill", "does not name a model parameter"]),
    (FitParameter("components.neck.discharge_coefficient"), ["fit components.neck.discharge_coefficient",
                                                             "has no bounds"]),
    (FitParameter("components.bottle.gauge_pressure", "4", "6 bar"), ["lower bound", "with a unit"]),
    (FitParameter("components.neck.discharge_coefficient", "0.9", "0.6"), ["is not below the upper bound"]),
    (FitParameter("components.neck.discharge_coefficient", "0.5", "1.5"), ["upper bound", "at most 1"]),
    (FitParameter("components.neck.discharge_coefficient", "0.5", "0.9"),
     ["the model's value 0.98 lies outside the bounds 0.5..0.9"]),
    (FitParameter("launch.mount", "0", "1"), ["fit launch.mount", "is a choice, not a number"]),
])
def test_bad_fit_parameters(fit, parts, a_run):
    with pytest.raises(ModelError) as err:
        calibrate(held_model(), [a_run], [fit])
    for part in parts:
        assert part in str(err.value), str(err.value)


def test_bounds_text_without_bounds():
    with pytest.raises(ModelError, match="fit 'components.neck.discharge_coefficient': has no bounds"):
        FitParameter.parse("components.neck.discharge_coefficient")
    with pytest.raises(ModelError, match="are not LOW..HIGH"):
        FitParameter.parse("components.neck.discharge_coefficient=0.9")


def test_fits_that_cannot_work(a_run):
    with pytest.raises(ModelError, match=r"the fit did not converge within 2 evaluations"):
        calibrate(held_model(), [a_run], FITS, max_iterations=2)
    # drag does nothing on a stand
    with pytest.raises(ModelError, match=r"fit components.airframe.drag_coefficient: has no effect on the compared"):
        calibrate(held_model(), [a_run], [FITS[0], FitParameter.parse("components.airframe.drag_coefficient=0.1..1")])
    # the thrust and the outflow depend on Cd and the diameter only through Cd * area
    with pytest.raises(ModelError, match=r"cannot tell .*discharge_coefficient and .*diameter apart|"
                                         r"cannot tell .*diameter and .*discharge_coefficient apart"):
        calibrate(held_model(), [a_run], [FITS[0], FitParameter.parse("components.neck.diameter=18 mm..24 mm")])
    with pytest.raises(ModelError, match="is named twice"):
        calibrate(held_model(), [a_run], [FITS[0], FITS[0]])
    with pytest.raises(ModelError, match="no parameter to fit"):
        calibrate(held_model(), [a_run], [])
    bad = MeasuredRun(a_run.record, a_run.mapping, settings={"components.neck.discharge_coefficient": 0.9})
    with pytest.raises(ModelError, match="is also a fitted parameter"):
        calibrate(held_model(), [bad], FITS)


def test_progress_line():
    import io

    class Terminal(io.StringIO):
        def isatty(self) -> bool:   # a stream that says it is a terminal
            return True

    quiet = io.StringIO()
    p = ProgressLine(quiet)
    p(1, 1, 0.5)
    p.close()
    assert quiet.getvalue() == ""
    term = Terminal()
    p = ProgressLine(term)
    p(1, 1, 0.5)
    p(2, 3, 0.25)
    p.close()
    assert term.getvalue().startswith("\rcalibrating: evaluation 1, 1 model runs, residual 0.5")
    assert "evaluation 2, 3 model runs" in term.getvalue() and term.getvalue().endswith("\n")
    assert ProgressLine(term, enabled=False).enabled is False


# ---------------------------------------------------------------------------
# the command line, as a user runs it
# ---------------------------------------------------------------------------

def thrustgraph_command() -> list[str]:
    exe = Path(sys.executable).with_name("thrustgraph")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "thrustgraph.cli"]


def test_cli_calibrate(tmp_path):
    text, _ = synthetic_run(51, noise_thrust=3.0, noise_pressure=4500.0)
    (tmp_path / "stand.csv").write_text(text)
    model = tmp_path / "rocket.toml"
    tg.save_model(held_model(), model)
    base = thrustgraph_command() + ["calibrate", str(model), "stand.csv", "--map", "load=thrust",
                                    "--map", "pressure=bottle.pressure", "--gauge", "pressure",
                                    "--start-at", f"{OFFSET} s", "--set", "components.bottle.expansion_exponent=1.25",
                                    "--fit", "components.neck.discharge_coefficient=0.5..1.0"]
    proc = subprocess.run(base + ["--out", "calibrated.toml", "--report", "fit.json", "--plot", "fit.png",
                                  "--weight", "bottle.pressure=1"],
                          cwd=tmp_path, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "95 % interval" in proc.stdout and "RMS error" in proc.stdout and "Cautions" in proc.stdout
    assert "calibrating:" not in proc.stderr          # stderr is a pipe here, not a terminal: no progress line
    for name in ("calibrated.toml", "fit.json", "fit.png"):
        assert (tmp_path / name).stat().st_size > 500
    fit = json.loads((tmp_path / "fit.json").read_text())
    for p in fit["parameters"]:
        lo, hi = p["interval"]
        assert lo < p["value"] < hi
        assert abs(p["value"] - TRUE[p["path"]]) <= 3.5 * p["standard_error"] + 1e-12
    back = tg.load_model(tmp_path / "calibrated.toml")
    assert back.calibration["components.neck.discharge_coefficient"]["records"][0]["sha256"] == \
        hashlib.sha256(text.encode()).hexdigest()
    # a fit that does not converge: exit 2, one message, no calibrated model written
    bad = subprocess.run(base + ["--out", "never.toml", "--max-iterations", "1"], cwd=tmp_path,
                         capture_output=True, text=True)
    assert bad.returncode == 2
    assert "did not converge within 1 evaluations" in bad.stderr and "Fix:" in bad.stderr
    assert not (tmp_path / "never.toml").exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".never")]
    # a parameter that does not exist
    bad = subprocess.run(thrustgraph_command() + ["calibrate", str(model), "stand.csv", "--map", "load=thrust",
                                                  "--fit", "components.neck.throat=1 mm..2 mm", "--out", "x.toml"],
                         cwd=tmp_path, capture_output=True, text=True)
    assert bad.returncode == 2 and "has no parameter 'throat'" in bad.stderr
    assert not (tmp_path / "x.toml").exists()


# ---------------------------------------------------------------------------
# a record 0.8 ms off the model's clock
# ---------------------------------------------------------------------------

def offset_run(seed: int, offset: float = 0.0008, name: str = "late.csv") -> tuple[str, MeasuredRun]:
    """A noisy stand record (1 % noise) aligned ``offset`` off: its samples sit that much early on the model's
    clock, as a trigger placed a little late would leave them."""
    text, _ = synthetic_run(seed, noise_thrust=3.06, noise_pressure=4500.0, lead=0.01, name=name)
    rec = align(loads_record(text, source=name), start_at=f"{OFFSET + offset} s")
    return text, MeasuredRun(rec, MAPPING)


def test_a_fit_of_the_start_time_recovers_the_parameters_of_a_record_08_ms_off():
    # The check of the issue: with the start-time correction fitted, the known parameters (Cd 0.93, n 1.25)
    # lie inside their 95 % intervals, and so does the known shift of +0.8 ms.
    _, run = offset_run(71)
    cal = calibrate(held_model(), [run], FITS, start_time_bound="2 ms")
    for v in cal.values[:2]:
        lo, hi = v.interval
        assert lo <= TRUE[v.path] <= hi, (v.path, v.value, v.interval)
    shift = cal.values[2]
    assert shift.interval[0] <= 0.0008 <= shift.interval[1], shift
    assert cal.offset_notes() == []            # the fitted shift took it up: nothing left to report


def test_the_report_says_when_the_residuals_show_a_time_offset():
    # Without the correction the residual follows the prediction's slope; the report says so, with the size.
    _, run = offset_run(71)
    cal = calibrate(held_model(), [run], FITS)
    d, se = cal.time_offsets["late.csv"]
    assert d == pytest.approx(0.0008, abs=3 * se + 1e-4), (d, se)
    [note] = cal.offset_notes()
    assert note.startswith("Time offset: the residuals of late.csv") and "--fit-start-time" in note
    assert note in cal.report()
    # ...and a record on the right clock shows none
    _, good = synthetic_run(72, noise_thrust=3.06, noise_pressure=4500.0)
    assert calibrate(held_model(), [good], FITS).offset_notes() == []


def test_cli_start_time_fit_after_a_trigger_and_the_stand_kept_out_of_the_model(tmp_path):
    # The documented command: --start-when aligns on a level, --fit-start-time "2 ms" refines it (it used to be
    # refused: "the record starts at model time ... after the start of the comparison"); --set launch.mount =
    # "held" is a condition of the test, not written into the calibrated model.
    text, _ = synthetic_run(81, noise_thrust=3.0, noise_pressure=4500.0, lead=0.01)
    (tmp_path / "stand.csv").write_text(text.replace("time [s],load [N],pressure [kPa]",
                                                     "Time (s),load (N),pressure (kPa)"))
    tg.save_model(tg.load_model(tg.default_model_path()), tmp_path / "rocket.toml")
    proc = subprocess.run(thrustgraph_command() + [
        "calibrate", "rocket.toml", "stand.csv", "--set", 'launch.mount="held"', "--map", "load=thrust",
        "--map", "pressure=bottle.pressure", "--gauge", "pressure", "--start-when", "load > 20 lbf",
        "--fit", "components.neck.discharge_coefficient=0.5..1.0",
        "--fit", "components.bottle.expansion_exponent=1.0..1.67", "--fit-start-time", "2 ms",
        "--out", "cal.toml"], cwd=tmp_path, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "start time of stand.csv" in proc.stdout
    assert "not written into cal.toml: launch.mount = 'held'" in proc.stdout
    back = tg.load_model(tmp_path / "cal.toml")
    assert back.launch.get("mount") == "guide"
    entry = back.calibration["components.neck.discharge_coefficient"]
    assert entry["records"][0]["settings"] == {"launch.mount": "held"}
    for path, truth in TRUE.items():
        lo, hi = (float(x) for x in back.calibration[path]["interval"])
        assert lo <= truth <= hi, (path, lo, hi)
