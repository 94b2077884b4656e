"""``thrustgraph overlay``: several runs in one set of plots and one table of outcome differences.

* an overlay of two runs (a model and a ``--variant`` of it) whose difference table matches the two summaries
  that ``thrustgraph run --json`` writes for the same two runs;
* a saved result (the CSV of ``thrustgraph export``) brings the outcomes of its run back exactly;
* a measured record is drawn through ``--map``; the plots are the plot registry's ``overlay`` entries;
* bad input: one line naming what, where and how to fix it, exit 2, and no file written.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from thrustgraph.cli import main
from thrustgraph.outputs.plotkinds import names

PNG = b"\x89PNG\r\n\x1a\n"


def _cli(*argv: str) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        status = main(list(argv))
    assert status == 0, out.getvalue()
    return out.getvalue()


def _table(path: Path) -> dict[str, dict[str, str]]:
    return {row["outcome"]: row for row in csv.DictReader(path.open())}


def test_the_difference_table_of_two_runs_matches_their_two_summaries(tmp_path):
    fill = "components.bottle.fill=0.4"
    _cli("run", "bottle-rocket", "--json", str(tmp_path / "a.json"), "--quiet")
    _cli("run", "bottle-rocket", "--set", fill, "--json", str(tmp_path / "b.json"), "--quiet")
    text = _cli("overlay", "bottle-rocket", "--variant", fill, "--table", str(tmp_path / "t.csv"),
                "--plots", str(tmp_path / "plots"), "--quiet")
    a = {k: v["value"] for k, v in json.loads((tmp_path / "a.json").read_text())["summary"].items()}
    b = {k: v["value"] for k, v in json.loads((tmp_path / "b.json").read_text())["summary"].items()}
    rows = _table(tmp_path / "t.csv")
    labels = list(next(csv.reader((tmp_path / "t.csv").open())))[3:]
    ref, var, diff = labels
    assert ref == "bottle-rocket" and var == "bottle-rocket (fill=0.4)" and diff == f"{var} - {ref}"
    assert set(rows) == set(a) | set(b)
    for key, row in rows.items():
        assert float(row[ref]) == a[key] and float(row[var]) == b[key], key
        assert float(row[diff]) == pytest.approx(b[key] - a[key], rel=1e-15, abs=1e-300), key
    assert b["apogee"] != a["apogee"]          # the variant did change the flight
    # the terminal shows the same table: apogee of both runs and their difference, in the display unit
    line = next(l for l in text.splitlines() if l.startswith("apogee"))
    assert f"{a['apogee']:.5g} m" in line and f"{b['apogee']:.5g} m" in line
    assert f"{b['apogee'] - a['apogee']:+.5g} m" in line
    drawn = sorted(p.name for p in (tmp_path / "plots").iterdir())
    assert drawn == sorted(f"{n}.png" for n in names("overlay"))
    assert all(p.read_bytes().startswith(PNG) for p in (tmp_path / "plots").iterdir())


def test_a_saved_result_brings_back_its_outcomes_and_a_record_is_drawn_through_its_map(tmp_path):
    _cli("export", "bottle-rocket", "--csv", str(tmp_path / "saved.csv"), "--quiet")
    held = "launch.mount=held"
    _cli("export", "bottle-rocket", "--set", held, "--csv", str(tmp_path / "held.csv"), "--quiet")
    # a stand's log of the held flight's thrust, as a load cell in lbf would write it
    rows = [r for r in csv.reader(l for l in (tmp_path / "held.csv").read_text().splitlines() if l[:1] != "#")]
    head = rows[0]
    t = np.array([float(r[head.index("time [s]")]) for r in rows[1:]])
    f = np.array([float(r[head.index("thrust [N]")]) for r in rows[1:]])
    ts = np.arange(0.0, 0.15, 0.002)
    lbf = np.interp(ts, t, f) / 4.4482216152605
    (tmp_path / "stand.csv").write_text("time [ms],load [lbf]\n" + "".join(f"{a * 1e3!r},{b!r}\n"
                                                                        for a, b in zip(ts.tolist(), lbf.tolist())))
    text = _cli("overlay", "bottle-rocket", str(tmp_path / "saved.csv"), str(tmp_path / "stand.csv"),
                "--map", "load=thrust", "--table", str(tmp_path / "t.csv"), "--plots", str(tmp_path / "p"),
                "--format", "svg", "--only", "overlay-thrust", "--quiet")
    assert "saved.csv: saved result" in text and "stand.csv: measured record" in text
    table = _table(tmp_path / "t.csv")
    # the flight and its saved result agree exactly, outcome by outcome; the record has none
    for key, row in table.items():
        assert row["saved.csv - bottle-rocket"] == "0.0", key
        assert row["stand.csv"] == "" and row["stand.csv - bottle-rocket"] == "", key
    assert [p.name for p in (tmp_path / "p").iterdir()] == ["overlay-thrust.svg"]
    assert (tmp_path / "p" / "overlay-thrust.svg").read_text().lstrip().startswith("<?xml")
    # the same runs through the API: the record's samples drawn as dots over the two predictions' lines
    from thrustgraph.models.modelfile import bundled_models, load_model
    from thrustgraph.flight.integrate import integrate
    from thrustgraph.measured.overlay import Overlay, run_of_record, run_of_result
    from thrustgraph.outputs.overlayplots import overlay_figures
    from thrustgraph.measured.records import ColumnMap, read_record

    flown = run_of_result(integrate(load_model(bundled_models()["bottle-rocket"])), "flown")
    saved = run_of_record(read_record(tmp_path / "saved.csv"), "saved")
    stand = run_of_record(read_record(tmp_path / "stand.csv"), "stand", [ColumnMap("load", "thrust")])
    np.testing.assert_allclose(stand.signals["thrust"], lbf * 4.4482216152605, rtol=1e-12)
    lines = overlay_figures(Overlay((flown, saved, stand)))["overlay-thrust"].axes[0].get_lines()
    assert [line.get_label() for line in lines] == ["flown", "saved", "stand"]
    assert [line.get_linestyle() for line in lines] == ["-", "-", "None"]


def _fails(tmp_path: Path, *args: str) -> str:
    proc = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "overlay", *args], cwd=tmp_path,
                          capture_output=True, text=True, timeout=1800)
    assert proc.returncode == 2, proc.stdout + proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thrustgraph: error: ") and "Fix:" in lines[0], proc.stderr
    return lines[0]


@pytest.mark.parametrize("args, says", [
    (["missing.csv", "--table", "t.csv"], "missing.csv: no such record file"),
    (["stand.csv", "--variant", "components.bottle.fill=0.4", "--table", "t.csv"], "there is no model to vary"),
    (["bottle-rocket", "stand.csv", "--table", "t.csv"], "no record column is mapped"),
    (["bottle-rocket", "--variant", "components.bottle.fil=0.4", "--table", "t.csv"], "fil"),
    (["bottle-rocket", "stand.csv", "--map", "force=thrust", "--table", "t.csv"], "has none of the mapped"),
    (["bottle-rocket", "--table", "nowhere/t.csv"], "nowhere does not exist"),
])
def test_bad_input_is_one_line_exit_2_and_nothing_written(tmp_path, args, says):
    (tmp_path / "stand.csv").write_text("time [s],load [N]\n0,0\n0.001,5\n")
    line = _fails(tmp_path, *args)
    assert says in line, line
    assert not (tmp_path / "t.csv").exists()


def test_the_overlay_is_in_the_docs_and_the_plot_registry():
    docs = (Path(__file__).resolve().parent.parent / "docs" / "cli.md").read_text()
    assert "thrustgraph overlay" in docs
    for n in names("overlay"):
        assert f"`{n}`" in docs


def _summary_labels(text: str) -> list[str]:
    block = text.split("\nSummary\n")[1].split("\n\n")[0]
    return [re.split(r"\s{2,}", line.strip())[0] for line in block.splitlines()]


def test_runs_may_follow_options_and_the_text_table_shows_what_the_summaries_show(tmp_path):
    # a RUN after --variant used to be refused ("unrecognized arguments"); the text table holds the outcomes the
    # runs' summaries print (no side force of rounding size, no end point, no drift of zero), in aligned columns,
    # and a difference of two equal results reads +0; the CSV table keeps every outcome
    fill = "components.bottle.fill=0.4"
    text = _cli("overlay", "bottle-rocket", "--variant", fill, "bottle-rocket", "--table", str(tmp_path / "t.csv"),
                "--quiet")
    assert "bottle-rocket (2): flight" in text
    printed = set(_summary_labels(_cli("run", "bottle-rocket", "--quiet"))) | \
        set(_summary_labels(_cli("run", "bottle-rocket", "--set", fill, "--quiet")))
    table = [line for line in text.split("\n\n")[1].splitlines() if not line.startswith("wrote ")]
    head, rows = table[0], table[1:]
    assert {re.split(r"\s{2,}", r)[0] for r in rows} == printed
    assert {"peak side force", "end point x", "drift across the azimuth"} & printed == set()
    assert {"peak_side_force", "impact_x", "drift"} <= set(_table(tmp_path / "t.csv"))
    col = head.index("bottle-rocket")           # every value starts under its run's label
    assert all(r[col - 2:col] == "  " and r[col] != " " for r in rows), rows
    final = next(r for r in rows if r.startswith("final mass"))
    assert final.endswith("+0 g (+0 %)")             # 5.6e-17 kg apart: the same dry mass
