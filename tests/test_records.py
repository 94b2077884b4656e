"""Measured records: reading CSV with units, conversion, alignment, resampling, filtering, comparison, bad input.

Synthetic records are made from the bundled bottle rocket held on a test stand
(``launch.mount = "held"``): the model's own prediction, sampled like a logger
would, plus known offsets, biases or noise.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph import ModelError
from thrustgraph.measured.compare import (compare, interval_means, model_for_records, plot_comparison, prepare_record)
from thrustgraph.measured.records import (ColumnMap, Trigger, align, crossing_time, is_even, loads_record, lowpass,
                                 read_record, resample, trim)

# Exact conversion factors: NIST Special Publication 811 (2008), Appendix B.8 / B.9
# (1 ft = 0.3048 m exactly; 1 in = 0.0254 m exactly; 1 lbf = 4.4482216152605 N exactly; so
# 1 psi = 1 lbf/in^2 = 6894.757293168... Pa, which SP 811 lists as 6.894 757 E+03).
FT = 0.3048
LBF = 4.4482216152605
PSI = LBF / 0.0254 ** 2
PA_STD = 101325.0


def held_model(**overrides):
    m = tg.load_model(tg.default_model_path()).set("launch.mount", "held")
    for k, v in overrides.items():
        m.set(k, v)
    return m


@pytest.fixture(scope="module")
def held_fine():
    """The held bottle flown with a fine output grid (10 us)."""
    return tg.integrate(held_model(**{"run.output_interval": "0.00001 s"}))


def csv_text(header: str, columns) -> str:
    rows = zip(*columns)
    return header + "\n" + "\n".join(",".join(repr(float(v)) for v in row) for row in rows) + "\n"


def sample(result, name, times):
    """A logger's samples of a predicted signal: point values, thrust 0 and pressure at charge before release."""
    y = np.interp(times, result.t, result.signal(name))
    if name == "thrust":
        y = np.where(times < 0.0, 0.0, y)
    return y


# ---------------------------------------------------------------------------
# reading and units
# ---------------------------------------------------------------------------

def test_unit_conversion_against_exact_factors():
    # Source: NIST SP 811 (2008), Appendix B: the foot, the pound-force and the psi are defined exactly.
    text = "time [ms],thrust [lbf],pressure [psi],altitude [ft],mass [g]\n0,1,1,1,1\n2.5,2.5,60,1000,250\n"
    rec = loads_record(text, source="units.csv")
    assert rec.time.tolist() == [0.0, 0.0025]
    assert rec.column("thrust") == pytest.approx([LBF, 2.5 * LBF], rel=1e-14)
    assert rec.column("pressure") == pytest.approx([PSI, 60 * PSI], rel=1e-14)
    assert PSI == pytest.approx(6894.757293168, rel=1e-12)
    assert rec.column("altitude") == pytest.approx([FT, 1000 * FT], rel=1e-14)
    assert rec.column("mass") == pytest.approx([1e-3, 0.25], rel=1e-14)
    assert rec.units == {"thrust": "lbf", "pressure": "psi", "altitude": "ft", "mass": "g"}
    assert rec.si_units["thrust"] == "N" and rec.si_units["pressure"] == "Pa" and rec.si_units["altitude"] == "m"


def test_reading_a_file_notes_delimiters_and_hash(tmp_path):
    import hashlib

    body = "# logger v2, channel 3\ntime [s];load [N]\n\n0;1\n0.1;2\n"
    f = tmp_path / "log.csv"
    f.write_bytes(body.encode())
    rec = read_record(f)
    assert rec.sha256 == hashlib.sha256(body.encode()).hexdigest()
    assert rec.column("load").tolist() == [1.0, 2.0]
    tab = tmp_path / "tab.csv"
    tab.write_text("time [s]\tload [kN]\n0\t1\n1\t2\n")
    assert read_record(tab).column("load").tolist() == [1000.0, 2000.0]
    # a temperature column goes through pint's offset units
    rec = loads_record("time [s],T [degC]\n0,0\n1,100\n", source="t.csv")
    assert rec.column("T") == pytest.approx([273.15, 373.15], rel=1e-14)


# ---------------------------------------------------------------------------
# bad input: one clear message each, naming the file and the column
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("text, parts", [
    ("time [s],thrust\n0,1\n1,2\n", ["log.csv", "column 2 'thrust'", "the header has no unit", "[N]"]),
    ("time [s],thrust [lbz]\n0,1\n1,2\n", ["log.csv", "'thrust [lbz]'", "unknown unit 'lbz'"]),
    ("time [s],p [psig]\n0,1\n1,2\n", ["log.csv", "unknown unit 'psig'", "mark the column gauge"]),
    ("time [s],thrust [N]\n0,1\n0.1,2\n0.1,3\n", ["log.csv", "column 'time', line 4", "time does not increase"]),
    ("time [s],thrust [N]\n0,1\n0.2,2\n0.1,3\n", ["log.csv", "line 4", "0.1 s follows 0.2 s"]),
    ("time [s],thrust [N]\n0,1\n0.1,\n0.2,3\n0.3,nan\n",
     ["log.csv", "column 'thrust', line 3", "2 missing value(s)", "does not guess"]),
    ("time [s],thrust [N],p [kPa]\n0,1,NaN\n0.1,2,3\n", ["log.csv", "column 'p', line 2", "missing value"]),
    ("time [s],thrust [N]\n0,1\n0.1,lots\n", ["log.csv", "column 'thrust', line 3", "cannot read 'lots'"]),
    ("time [s],thrust [N]\n0,1\n0.1,2,3\n", ["log.csv", "line 3", "has 3 values", "2 columns"]),
    ("Times [s],thrust [N]\n0,1\n0.1,2\n", ["log.csv", "no time column 'time'", "did you mean 'Times'"]),
    ("time [N],thrust [N]\n0,1\n0.1,2\n", ["log.csv", "column 'time'", "a force", "[s]"]),
    ("time [s],a [N],a [N]\n0,1,1\n1,2,2\n", ["log.csv", "column 3", "appears twice"]),
    ("time [s],thrust [N]\n0,1\n", ["log.csv", "1 data row(s)", "at least two"]),
    ("", ["log.csv", "empty"]),
])
def test_bad_records(text, parts):
    with pytest.raises(ModelError) as err:
        loads_record(text, source="log.csv")
    msg = str(err.value)
    for part in parts:
        assert part in msg, msg
    assert "Fix:" in msg


def test_record_shorter_than_the_signal(held_fine):
    # The held bottle's prediction runs to about 0.115 s; a log that stops at 0.05 s cannot cover it.
    t = np.arange(0.0, 0.05, 0.001)
    rec = loads_record(csv_text("time [s],load [N]", [t, sample(held_fine, "thrust", t)]), source="short.csv")
    with pytest.raises(ModelError) as err:
        compare(held_fine, rec, [ColumnMap("load", "thrust")])
    msg = str(err.value)
    assert "short.csv: column 'load'" in msg and "shorter than the signal it is matched to" in msg
    assert f"{held_fine.t[-1]:.6g} s" in msg and "--until" in msg
    # comparing only the first part is allowed, and a window past the record's end is refused
    assert compare(held_fine, rec, [ColumnMap("load", "thrust")], end="0.04 s").signals[0].n == 41
    with pytest.raises(ModelError, match="ends at model time 0.049 s, before the requested end 0.08 s"):
        compare(held_fine, rec, [ColumnMap("load", "thrust")], end="80 ms")


def test_mapping_errors(held_fine):
    t = np.arange(0.0, 0.2, 0.001)
    rec = loads_record(csv_text("time [s],load [N],p [bar]", [t, sample(held_fine, "thrust", t), t * 0 + 3]),
                       source="m.csv")
    cases = [
        ([ColumnMap("p", "bottle.pressure")], ["m.csv: column 'p'", "does not say whether it is gauge or absolute"]),
        ([ColumnMap("load", "thrust", pressure="gauge")], ["column 'load'", "marked gauge", "not a pressure"]),
        ([ColumnMap("lod", "thrust")], ["m.csv: column 'lod'", "no such column", "did you mean 'load'"]),
        ([ColumnMap("load", "thrst")], ["signal 'thrst'", "no such signal", "'thrust'"]),
        ([ColumnMap("load", "bottle.pressure")], ["column 'load'", "holds a force [N]", "'bottle.pressure' is in Pa"]),
        ([ColumnMap("load", "acceleration")], ["is a vector", "acceleration.z"]),
        ([ColumnMap("load", "thrust", weight=-1)], ["column 'load'", "weight -1", "positive"]),
    ]
    for mapping, parts in cases:
        with pytest.raises(ModelError) as err:
            compare(held_fine, rec, mapping)
        for part in parts:
            assert part in str(err.value), str(err.value)


def test_trigger_and_filter_errors(held_fine):
    t = np.arange(-0.01, 0.2, 0.001)
    rec = loads_record(csv_text("time [s],load [N]", [t, sample(held_fine, "thrust", t)]), source="a.csv")
    with pytest.raises(ModelError, match=r"a.csv: column 'load'.*never goes above the trigger level 400 N"):
        align(rec, trigger=Trigger.parse("load > 400 N"))
    late = trim(rec, 0.0)
    with pytest.raises(ModelError, match="already above the trigger level 5 N at the first sample"):
        align(late, trigger=Trigger.parse("load > 5 N"))
    with pytest.raises(ModelError, match="either a start time or a trigger"):
        align(rec)
    with pytest.raises(ModelError, match="expected COLUMN > LEVEL"):
        Trigger.parse("load = 5 N")
    with pytest.raises(ModelError, match=r"cutoff 600 Hz must lie between 0 and half the sample rate \(500 Hz\)"):
        lowpass(rec, "600 Hz")
    uneven = loads_record("time [s],x [m]\n0,0\n0.1,1\n0.25,2\n0.3,3\n", source="u.csv")
    with pytest.raises(ModelError, match="u.csv: low-pass filter: the record is not evenly sampled"):
        lowpass(uneven, "1 Hz")
    with pytest.raises(ModelError, match=r"a.csv: low-pass filter: expected .*\(unit like Hz\), got '5 N'"):
        lowpass(rec, "5 N")


# ---------------------------------------------------------------------------
# time alignment recovers a known offset
# ---------------------------------------------------------------------------

def test_alignment_recovers_a_known_offset(held_fine):
    offset = 1.23456  # s: the logger was started this long before the release
    dt = 0.001
    tm = np.arange(-0.03, 0.2, dt) + 0.000313  # model times of the samples (not on the model's grid)
    load = sample(held_fine, "thrust", tm)
    gauge = np.where(tm < 0.0, 4.5e5, np.interp(tm, held_fine.t, held_fine.signal("bottle.pressure")) - PA_STD)
    text = csv_text("time [s],load [N],pressure [Pa]", [tm + offset, load, gauge])
    rec = loads_record(text, source="offset.csv")
    mapping = [ColumnMap("load", "thrust"), ColumnMap("pressure", "bottle.pressure", pressure="gauge")]
    # The thrust steps at the release: a level crossing places it within one sample interval.
    a = prepare_record(rec, held_fine, mapping, trigger=Trigger.parse("load > 150 N"))
    assert abs(a.offset - offset) <= dt
    # The pressure falls smoothly through 2 bar gauge in the gas phase: the record's crossing is put where the
    # prediction crosses the same level, so the offset comes back to a small fraction of a sample.
    b = prepare_record(rec, held_fine, mapping, trigger=Trigger.parse("pressure < 2 bar"))
    assert abs(b.offset - offset) <= 0.05 * dt
    # A given start time is exact.
    c = prepare_record(rec, held_fine, mapping, start_at=f"{offset} s")
    assert c.offset == pytest.approx(offset, abs=1e-15)
    assert c.time[0] == pytest.approx(tm[0], abs=1e-12)
    assert "aligned" in c.history[-1]


def test_crossing_time_interpolates():
    t = np.array([0.0, 1.0, 2.0, 3.0])
    assert crossing_time(t, np.array([5.0, 4.0, 2.0, 1.0]), 3.0, "falling") == 1.5
    assert crossing_time(t, np.array([5.0, 4.0, 2.0, 1.0]), 3.0, "rising") == 0.0   # already there
    assert crossing_time(t, np.array([0.0, 0.0, 0.0, 1.0]), 9.0, "rising") is None


# ---------------------------------------------------------------------------
# resampling and zero-phase filtering
# ---------------------------------------------------------------------------

def test_resample_is_exact_for_a_straight_line():
    t = np.array([0.0, 0.013, 0.05, 0.0731, 0.1])
    rec = loads_record(csv_text("time [s],x [m]", [t, 3.0 * t + 1.0]), source="r.csv")
    r = resample(rec, "10 ms")
    assert is_even(r.time) and r.time[-1] == pytest.approx(0.1)
    assert r.column("x") == pytest.approx(3.0 * r.time + 1.0, rel=1e-12)


def test_lowpass_matches_the_butterworth_response():
    # Source: S. Butterworth, "On the theory of filter amplifiers", Wireless Engineer 7 (1930) 536-541:
    # |H|^2 = 1 / (1 + (f/fc)^(2n)) for the analogue filter. scipy.signal.butter(fs=...) maps it to a digital
    # filter by the bilinear transform with the cutoff prewarped, which puts tan(pi f / fs) in place of f
    # (A. V. Oppenheim, R. W. Schafer, Discrete-Time Signal Processing, 3rd ed. 2010, sec. 7.2; from memory).
    # Run forward and backward (zero phase) the gain is |H|^2 and the phase 0.
    fs, fc, n = 1000.0, 50.0, 4
    t = np.arange(0.0, 4.0, 1.0 / fs)
    for f in (20.0, 50.0, 80.0):
        x = np.sin(2 * math.pi * f * t)
        rec = loads_record(csv_text("time [s],x [m]", [t, x]), source="f.csv")
        y = lowpass(rec, f"{fc} Hz", order=n).column("x")
        mid = slice(len(t) // 4, 3 * len(t) // 4)   # away from the ends, where the filter starts up
        gain = float(np.max(np.abs(y[mid])))
        ratio = math.tan(math.pi * f / fs) / math.tan(math.pi * fc / fs)
        assert gain == pytest.approx(1.0 / (1.0 + ratio ** (2 * n)), rel=2e-3)
        # zero phase: the filtered sine has no lag (correlation with the input at lag 0 is maximal)
        lags = [np.dot(y[mid], np.roll(x, k)[mid]) for k in (-2, -1, 0, 1, 2)]
        assert int(np.argmax(lags)) == 2


# ---------------------------------------------------------------------------
# comparison metrics
# ---------------------------------------------------------------------------

def test_metrics_of_a_known_bias(held_fine):
    # Closed form: a record equal to the prediction plus a constant b has RMS error |b|, mean error -b, impulse
    # error -b (t1 - t0) and peak error -b (prediction minus measurement).
    dt = 0.0005
    tm = np.arange(0.0, 0.2, dt)
    edges = np.concatenate(([0.0], 0.5 * (tm[1:] + tm[:-1]), [tm[-1] + dt / 2]))
    exact = interval_means(held_fine.t, held_fine.signal("thrust"), edges)
    b = 2.5
    rec = loads_record(csv_text("time [s],load [N]", [tm, exact + b]), source="bias.csv")
    s = compare(held_fine, rec, [ColumnMap("load", "thrust")]).signal("thrust")
    assert s.rms_error == pytest.approx(b, rel=1e-6)
    assert s.mean_error == pytest.approx(-b, rel=1e-6)
    assert s.peak_error == pytest.approx(held_fine.summary["peak_thrust"] - (exact.max() + b), rel=1e-9)
    span = tm[-1] - tm[0]
    assert s.impulse_error == pytest.approx(-b * span, rel=1e-4)
    # the predicted impulse over the whole burn is the model's own total impulse
    assert s.impulse_predicted == pytest.approx(held_fine.summary["total_impulse"], rel=1e-6)
    assert s.apogee_error is None


def test_gauge_and_absolute_columns_agree(held_fine):
    t = np.arange(0.0, 0.2, 0.001)
    p_abs = np.interp(t, held_fine.t, held_fine.signal("bottle.pressure"))
    text = csv_text("time [s],pg [psi],pa [kPa]", [t, (p_abs - PA_STD) / PSI, p_abs / 1e3])
    rec = loads_record(text, source="p.csv")
    c = compare(held_fine, rec, [ColumnMap("pg", "bottle.pressure", pressure="gauge"),
                                 ColumnMap("pa", "bottle.pressure", pressure="absolute")])
    g, a = c.signal("pg"), c.signal("pa")
    assert g.measured == pytest.approx(a.measured, rel=1e-12)
    assert g.rms_error == pytest.approx(a.rms_error, rel=1e-9)
    assert g.peak_measured == pytest.approx(PA_STD + 4.5e5, rel=1e-9)


def test_apogee_error_of_a_flight():
    r = tg.integrate(tg.load_model(tg.default_model_path()))
    t = np.arange(0.0, r.t[-1] + 0.5, 0.01)
    alt = np.interp(t, r.t, r.signal("altitude")) - 1.5   # an altimeter that reads 1.5 m low
    rec = loads_record(csv_text("time [s],height [ft]", [t, alt / FT]), source="alt.csv")
    s = compare(r, rec, [ColumnMap("height", "altitude")]).signal("altitude")
    assert s.apogee_predicted == pytest.approx(r.summary["apogee"], rel=1e-9)
    assert s.apogee_error == pytest.approx(r.summary["apogee"] - (np.max(alt)), rel=1e-9)
    assert 1.5 <= s.apogee_error < 1.6
    assert s.impulse_error is None


def test_model_for_records_refines_the_output():
    m = held_model()
    rec = loads_record("time [s],x [N]\n0,0\n0.002,0\n0.004,0\n", source="r.csv")
    fine = model_for_records(m, [rec])
    assert fine.run["output_interval"] == "0.0005 s"
    assert "output_interval" not in m.run


# ---------------------------------------------------------------------------
# plots and the command line
# ---------------------------------------------------------------------------

def test_plots_are_written_atomically(tmp_path, held_fine):
    t = np.arange(0.0, 0.2, 0.001)
    rec = loads_record(csv_text("time [s],load [N]", [t, sample(held_fine, "thrust", t)]), source="s.csv")
    c = compare(held_fine, rec, [ColumnMap("load", "thrust")])
    for name in ("c.png", "c.svg"):
        plot_comparison(c, tmp_path / name)
        assert (tmp_path / name).stat().st_size > 1000
    assert (tmp_path / "c.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert b"<svg" in (tmp_path / "c.svg").read_bytes()[:400]
    with pytest.raises(ModelError, match="name the plot file .png or .svg"):
        plot_comparison(c, tmp_path / "c.pdf")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.png", "c.svg"]   # no temporary files left


def thrustgraph_command() -> list[str]:
    """The installed console script, as a user types it (the module when no script is installed)."""
    exe = Path(sys.executable).with_name("thrustgraph")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "thrustgraph.cli"]


def test_cli_compare(tmp_path, held_fine):
    offset = 0.5
    tm = np.arange(-0.02, 0.25, 0.001)
    rng = np.random.default_rng(7)
    load = sample(held_fine, "thrust", tm) + rng.normal(0.0, 2.0, tm.size)
    p = np.where(tm < 0, 4.5e5, np.interp(tm, held_fine.t, held_fine.signal("bottle.pressure")) - PA_STD)
    (tmp_path / "stand.csv").write_text(
        csv_text("time [ms],load [lbf],pressure [psi]", [(tm + offset) * 1e3, load / LBF, p / PSI]))
    model = tmp_path / "m.toml"
    tg.save_model(held_model(), model)
    cmd = thrustgraph_command() + ["compare", str(model), "stand.csv", "--map", "load=thrust",
                                   "--map", "pressure=bottle.pressure", "--gauge", "pressure",
                                   "--start-when", "load > 30 lbf", "--lowpass", "200 Hz",
                                   "--plot", "cmp.png", "--plot", "cmp.svg", "--json", "metrics.json"]
    proc = subprocess.run(cmd, cwd=tmp_path, capture_output=True, text=True, env=dict(os.environ))
    assert proc.returncode == 0, proc.stderr
    assert "RMS error" in proc.stdout and "impulse" in proc.stdout and "Cautions" in proc.stdout
    for name in ("cmp.png", "cmp.svg", "metrics.json"):
        assert (tmp_path / name).stat().st_size > 500
    doc = json.loads((tmp_path / "metrics.json").read_text())
    assert abs(doc["offset_s"] - offset) <= 0.001
    thrust = next(s for s in doc["signals"] if s["signal"] == "thrust")
    assert thrust["rms_error"] < 10.0
    # bad input through the command line: exit 2, one message, nothing written
    bad = subprocess.run(thrustgraph_command() + ["compare", str(model), "stand.csv",
                                                  "--map", "pressure=bottle.pressure", "--json", "bad.json"],
                         cwd=tmp_path, capture_output=True, text=True)
    assert bad.returncode == 2
    assert "stand.csv: column 'pressure'" in bad.stderr and "gauge or absolute" in bad.stderr
    assert not (tmp_path / "bad.json").exists()


@pytest.mark.parametrize("header", ["time [s],thrust [N]", "Time (s),Thrust (N)", "TIME [s];thrust (N)",
                                    "time (ms),thrust (lbf)"])
def test_common_header_forms_are_read(header):
    # "Time (s)" as well as "time [s]": the unit in round or square brackets, the time column's name in any case
    delim = ";" if ";" in header else ","
    rec = loads_record(header + "\n" + f"0{delim}1\n1{delim}2\n", source="log.csv")
    scale = 1e-3 if "ms" in header else 1.0
    assert rec.time.tolist() == [0.0, scale]
    name = next(iter(rec.columns))
    assert name.lower() == "thrust"
    assert rec.columns[name][1] == pytest.approx(2.0 * (4.4482216152605 if "lbf" in header else 1.0), rel=1e-14)
