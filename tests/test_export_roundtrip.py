"""thrustgraph reads its own export: every column of the CSV export carries a unit, and compare's reader gets back
every value of every bundled model's flight.

* each header is ``name [unit]``: the unit the result declares for the signal (``[1]`` for a pure number, ``[text]``
  for the phase), from the one place signal units come from (:func:`thrustgraph.flight.result.signal_unit`);
* :func:`thrustgraph.measured.records.read_record` reads the file back as a saved prediction and holds every value exactly
  (``repr`` of a float reads back to the same float; SI units convert by 1), the repeated time of each phase
  boundary and the ``nan`` of a signal with no value in a phase;
* ``thrustgraph compare`` of the model against its own export finds (next to) no error.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import re

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.cli import main
from thrustgraph.measured.compare import compare
from thrustgraph.base.errors import ModelError
from thrustgraph.outputs.exportformats import EXPORTS
from thrustgraph.models.modelfile import bundled_models, load_model
from thrustgraph.measured.records import ColumnMap, loads_record, read_record
from thrustgraph.flight.result import signal_unit
from thrustgraph.base.units import Q_

MODELS = sorted(bundled_models().items())


@pytest.mark.parametrize("name, path", MODELS, ids=[n for n, _ in MODELS])
def test_every_bundled_model_export_reads_back_through_the_record_reader(name, path, tmp_path):
    r = tg.integrate(load_model(path))
    text = EXPORTS["csv"].render(r)
    (tmp_path / "run.csv").write_text(text)
    rec = read_record(tmp_path / "run.csv")
    assert rec.exported and rec.notes[0].startswith("thrustgraph ")
    header = next(line for line in text.splitlines() if not line.startswith("#")).split(",")
    assert header[-1] == "phase [text]"
    assert all(h.endswith("]") and " [" in h for h in header), name
    cols = r.columns()
    assert [h.split(" [")[0] for h in header[:-1]] == [n for n, _, _ in cols]
    np.testing.assert_array_equal(rec.time, r.t)
    for col, unit, values in cols[1:]:
        assert rec.units[col] == unit, (name, col)
        assert Q_(1.0, unit or "").dimensionality == Q_(1.0, rec.si_units[col] or "").dimensionality, (name, col)
        np.testing.assert_allclose(rec.columns[col], values, rtol=1e-15, atol=0.0, equal_nan=True, err_msg=col)
    assert rec.labels["phase"] == tuple(r.phase_at(float(t)) for t in r.t)
    # the JSON export holds the same series and notes: it reads back to the very record the CSV export gives
    (tmp_path / "run.json").write_text(EXPORTS["json"].render(r))
    _same_record(read_record(tmp_path / "run.json"), rec)
    # every signal's unit comes from the one place, and pint reads it
    for sig in r.signals:
        assert r.unit(sig) == signal_unit(sig, {k: v for k, v in r.units.items()}), sig
        Q_(1.0, r.unit(sig))
    # compared with itself (repeated times and nan handled): a sample stands for its interval, so the prediction
    # averaged over it differs from the point value by about dt^2 y''/24, and the impulses agree
    maps = [ColumnMap("thrust", "thrust"), ColumnMap("mass", "mass"), ColumnMap("altitude", "altitude")]
    c = compare(r, rec, maps)
    # (measured on the bundled models: RMS at most 2 % of the peak, the impulses within 0.5 %, except the
    # gas-cartridge cart, whose thrust falls steeply inside a sample interval when its liquid is spent: 1.07 %
    # with the lowest declared versions of the libraries, CoolProp 6.6.0 among them)
    for s in c.signals:
        assert s.rms_error <= 0.05 * abs(s.peak_measured) + 1e-12, (name, s.signal)
        if s.impulse_error is not None:
            assert abs(s.impulse_error) <= 0.02 * abs(s.impulse_measured), (name, s.signal)


def test_compare_command_reads_the_export_of_a_run(tmp_path):
    """`thrustgraph export` then `thrustgraph compare` of the same model against the file: the reader accepts the
    tool's own output and the flight agrees with itself within the interpolation of the finer output."""
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["export", "bottle-rocket", "--csv", str(tmp_path / "run.csv"), "--quiet"]) == 0
        assert main(["compare", "bottle-rocket", str(tmp_path / "run.csv"), "--map", "altitude=altitude",
                     "--map", "thrust=thrust", "--json", str(tmp_path / "c.json")]) == 0
    doc = json.loads((tmp_path / "c.json").read_text())
    alt = next(s for s in doc["signals"] if s["signal"] == "altitude")
    assert alt["rms_error"] < 1e-3 * alt["peak_measured"]
    assert abs(alt["apogee_error"]) < 1e-3 * alt["apogee_measured"]


def test_a_measured_record_gets_no_allowance_of_a_saved_prediction():
    text = "time [s],load [N]\n0,1\n0.001,2\n0.001,3\n0.002,4\n"
    with pytest.raises(ModelError, match="time does not increase"):
        loads_record(text, source="stand.csv")
    assert len(loads_record("# thrustgraph 0.1.0\n" + text, source="run.csv").time) == 4
    with pytest.raises(ModelError, match="missing value"):
        loads_record("time [s],load [N]\n0,1\n0.001,nan\n", source="stand.csv")
    # a saved prediction may repeat a time (phase boundaries, several at one instant), never go back
    assert len(loads_record("# thrustgraph 0.1.0\ntime [s],x [m]\n0,1\n1,2\n1,3\n1,4\n", source="run.csv").time) == 4
    with pytest.raises(ModelError, match="time does not increase"):
        loads_record("# thrustgraph 0.1.0\ntime [s],x [m]\n0,1\n1,2\n0.5,3\n", source="run.csv")
    with pytest.raises(ModelError, match="missing value"):
        loads_record("# thrustgraph 0.1.0\ntime [s],x [m]\n0,1\nnan,2\n", source="run.csv")


def test_a_text_column_is_kept_as_written():
    rec = loads_record("time [s],state [text],load [lbf]\n0,armed,0\n1,fired,10\n", source="log.csv")
    assert rec.labels["state"] == ("armed", "fired") and list(rec.columns) == ["load"]
    with pytest.raises(ModelError, match="the time column is in"):
        loads_record("time [text],load [N]\n0,1\n1,2\n", source="log.csv")



# ---------------------------------------------------------------------------
# the Parquet export through the same reader
# ---------------------------------------------------------------------------

def _same_record(a, b) -> None:
    np.testing.assert_array_equal(a.time, b.time)
    assert list(a.columns) == list(b.columns)
    for col in a.columns:
        np.testing.assert_array_equal(a.columns[col], b.columns[col], err_msg=col)   # nan where nan
    assert (a.units, a.si_units, a.labels, a.notes, a.exported) == (b.units, b.si_units, b.labels, b.notes,
                                                                      b.exported)


@pytest.mark.parametrize("name, path", MODELS, ids=[n for n, _ in MODELS])
def test_every_bundled_model_parquet_export_reads_back_as_its_csv_export(name, path, tmp_path):
    # "Round trip of every export through compare's reader": the Parquet export (units in the field metadata,
    # the CSV's # lines in the schema metadata) reads back to the very record the CSV export gives: every value
    # (float64 both ways), unit, phase cell, provenance and outcome line.
    pytest.importorskip("pyarrow")
    r = tg.integrate(load_model(path))
    (tmp_path / "run.csv").write_text(EXPORTS["csv"].render(r))
    (tmp_path / "run.parquet").write_bytes(EXPORTS["parquet"].render(r))
    _same_record(read_record(tmp_path / "run.parquet"), read_record(tmp_path / "run.csv"))


def test_compare_and_overlay_read_a_parquet_export_in_its_own_units(tmp_path):
    # written in imperial units, compared in them (compare reports in the record's own units), and brought back
    # by overlay as a saved result with its outcomes exactly
    pytest.importorskip("pyarrow")
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["export", "water-jet-boat", "--units", "imperial", "--parquet", str(tmp_path / "b.parquet"),
                     "--csv", str(tmp_path / "b.csv"), "--quiet"]) == 0
        assert main(["compare", "water-jet-boat", str(tmp_path / "b.parquet"), "--map", "speed=speed",
                     "--json", str(tmp_path / "c.json")]) == 0
        assert main(["overlay", "water-jet-boat", str(tmp_path / "b.parquet"), "--table", str(tmp_path / "t.csv"),
                     "--quiet"]) == 0
    _same_record(read_record(tmp_path / "b.parquet"), read_record(tmp_path / "b.csv"))
    assert read_record(tmp_path / "b.parquet").units["speed"] == "ft/s"
    speed = next(s for s in json.loads((tmp_path / "c.json").read_text())["signals"] if s["signal"] == "speed")
    assert speed["rms_error"] < 1e-2 * speed["peak_measured"]                 # the JSON stays SI
    assert re.search(r"RMS error\s+\S+ ft/s", out.getvalue())                # the text in the record's units
    rows = list(csv.DictReader((tmp_path / "t.csv").open()))
    assert rows and all(row["b.parquet - water-jet-boat"] == "0.0" for row in rows), rows


def test_a_parquet_file_of_another_program_and_a_damaged_one(tmp_path, monkeypatch):
    pa = pytest.importorskip("pyarrow")
    import pyarrow.parquet as pq
    # another logger's Parquet: the units in the column names, as in a CSV header; no thrustgraph notes
    table = pa.table({"time [ms]": [0.0, 1.0, 2.0], "load [lbf]": [0.0, 10.0, 5.0], "state": ["a", "b", "c"]})
    pq.write_table(table, tmp_path / "log.parquet")
    rec = read_record(tmp_path / "log.parquet")
    np.testing.assert_allclose(rec.time, [0.0, 0.001, 0.002], rtol=1e-15)
    assert rec.columns["load"][1] == pytest.approx(44.482216152605, rel=1e-12)
    assert rec.labels["state"] == ("a", "b", "c") and not rec.exported
    (tmp_path / "bad.parquet").write_bytes(b"PAR1" + b"\0" * 40)
    with pytest.raises(ModelError, match="cannot be read as Parquet"):
        read_record(tmp_path / "bad.parquet")
    # without pyarrow: one message naming the fix
    import builtins
    real = builtins.__import__

    def no_pyarrow(name, *args, **kwargs):
        if name == "pyarrow" or name.startswith("pyarrow."):
            raise ImportError("No module named 'pyarrow'")
        return real(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_pyarrow)
    with pytest.raises(ModelError, match=r"needs pyarrow.*pip install 'thrustgraph\[parquet\]'"):
        read_record(tmp_path / "log.parquet")


# ---------------------------------------------------------------------------
# the JSON export through the same reader
# ---------------------------------------------------------------------------

def test_compare_and_overlay_read_a_json_export_as_they_read_its_csv_export(tmp_path):
    # a user exports a run as JSON and CSV (in imperial units: each column of the series names its unit) and
    # compares the model with either file: the metrics are the same numbers, and overlay brings back the outcomes
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["export", "water-jet-boat", "--units", "imperial", "--json", str(tmp_path / "b.json"),
                     "--csv", str(tmp_path / "b.csv"), "--quiet"]) == 0
        for name in ("b.json", "b.csv"):
            assert main(["compare", "water-jet-boat", str(tmp_path / name), "--map", "speed=speed",
                         "--map", "thrust=thrust", "--json", str(tmp_path / f"metrics-{name}.json")]) == 0
        assert main(["overlay", "water-jet-boat", str(tmp_path / "b.json"), "--table", str(tmp_path / "t.csv"),
                     "--quiet"]) == 0
    doc = json.loads((tmp_path / "b.json").read_text())
    assert "peak_thrust" in doc["summary"] and doc["provenance"]["model_sha256"]         # the summary is kept
    speed = next(c for c in doc["series"] if c["name"] == "speed")
    assert speed["unit"] == "ft/s" and doc["series"][-1]["name"] == "phase"
    _same_record(read_record(tmp_path / "b.json"), read_record(tmp_path / "b.csv"))
    by_json, by_csv = (json.loads((tmp_path / f"metrics-{n}.json").read_text()) for n in ("b.json", "b.csv"))
    assert by_json["signals"] and [s["signal"] for s in by_json["signals"]] == ["speed", "thrust"]
    assert {k: v for k, v in by_json.items() if k not in ("record", "sha256")} == \
        {k: v for k, v in by_csv.items() if k not in ("record", "sha256")}
    rows = list(csv.DictReader((tmp_path / "t.csv").open()))
    assert rows and all(row["b.json - water-jet-boat"] == "0.0" for row in rows), rows


def test_a_json_file_without_a_series_is_refused_with_one_message(tmp_path):
    metrics = {"record": "stand.csv", "signals": [{"signal": "thrust", "rms_error": 1.0}]}
    (tmp_path / "metrics.json").write_text(json.dumps(metrics))
    (tmp_path / "summary.json").write_text(json.dumps({"summary": {"apogee": {"value": 54.3, "unit": "m"}}}))
    (tmp_path / "cut.json").write_text('{"summary": {"apogee": ')
    series = [{"name": "time", "unit": "s", "values": [0.0, 1.0]}, {"name": "load", "unit": "N", "values": [1.0]}]
    (tmp_path / "ragged.json").write_text(json.dumps({"series": series}))
    series[1]["values"] = [1.0, "heavy"]
    (tmp_path / "word.json").write_text(json.dumps({"series": series}))
    for name, says in [("metrics.json", "no time series .* the metrics of thrustgraph compare"),
                       ("summary.json", "no time series .* a summary without the signals"),
                       ("cut.json", "cannot be read as JSON"),
                       ("ragged.json", r"series\[1\] 'load': has 1 values but the first column has 2"),
                       ("word.json", r"series\[1\] 'load', value 2: 'heavy' is not a number")]:
        with pytest.raises(ModelError, match=says) as err:
            read_record(tmp_path / name)
        assert "Fix:" in str(err.value) and name in str(err.value)
    # through the command: one line, exit 2, nothing written
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        assert main(["compare", "bottle-rocket", str(tmp_path / "metrics.json"), "--map", "thrust=thrust",
                     "--json", str(tmp_path / "out.json")]) == 2
    lines = err.getvalue().strip().splitlines()
    assert len(lines) == 1 and "no time series" in lines[0] and "thrustgraph export MODEL --json FILE" in lines[0]
    assert not (tmp_path / "out.json").exists()


def test_a_json_record_of_another_program_is_a_measured_record(tmp_path):
    # the export's shape without its provenance: a measured record, with none of a saved prediction's allowances
    text = json.dumps({"series": [{"name": "time", "unit": "ms", "values": [0, 1, 2]},
                                  {"name": "load", "unit": "lbf", "values": [0, 10, 5]},
                                  {"name": "state", "unit": "text", "values": ["a", "b", "c"]}]})
    (tmp_path / "log.json").write_text(text)
    rec = read_record(tmp_path / "log.json")
    np.testing.assert_allclose(rec.time, [0.0, 0.001, 0.002], rtol=1e-15)
    assert rec.columns["load"][1] == pytest.approx(44.482216152605, rel=1e-12)
    assert rec.labels["state"] == ("a", "b", "c") and not rec.exported
    (tmp_path / "gap.json").write_text(text.replace("[0, 10, 5]", "[0, null, 5]"))
    with pytest.raises(ModelError, match="missing value"):
        read_record(tmp_path / "gap.json")
