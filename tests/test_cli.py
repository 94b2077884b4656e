"""The command line as a user runs it: every sub-command through subprocess, outputs, bad input, progress.

Bad input must end in one message on standard error (file, key path, what was
expected and found, how to fix it), exit status 2, and no output file at all.
"""

from __future__ import annotations

import csv
import json
import os
import pty
import re
import select
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from conftest import HANG_GUARD
from thrustgraph import fly, load_model
from thrustgraph.cli import COMMANDS, build_parser
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import bundled_models, default_model_path, dumps_model
from thrustgraph.models.plugins import component_kinds, environment_kinds, get_plugin_manager

BASE = default_model_path().read_text()
PNG = b"\x89PNG\r\n\x1a\n"


def tg(*args: str, cwd: Path, env: dict | None = None) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], cwd=cwd, capture_output=True,
                          text=True, env=env)


def tg_here(capsys, *args: str, cwd: Path) -> tuple[int, str, str]:
    """The same command line in this process (quicker; for the secondary cases)."""
    from thrustgraph.cli import main

    old = os.getcwd()
    os.chdir(cwd)
    try:
        rc = main(list(args))
    finally:
        os.chdir(old)
    out, err = capsys.readouterr()
    return rc, out, err


def files_in(d: Path) -> list[str]:
    return sorted(str(p.relative_to(d)) for p in d.rglob("*"))


# ---------------------------------------------------------------------------
# help
# ---------------------------------------------------------------------------

def test_help_lists_every_command(tmp_path):
    proc = tg("--help", cwd=tmp_path)
    assert proc.returncode == 0
    for name in COMMANDS:
        assert re.search(rf"^\s+{re.escape(name)}\b", proc.stdout, re.M), name
    for name in ("check", "kinds", "new", "export", "graph", "plot", "report"):
        assert name in COMMANDS


def test_every_command_has_help_with_its_options():
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    for name, p in sub.choices.items():
        text = p.format_help()
        assert text.startswith("usage:"), name
    assert "--out-dir" in sub.choices["export"].format_help()
    assert "--parquet" in sub.choices["export"].format_help()
    for opt in ("--plots", "--report", "--quiet", "--set", "--csv"):
        assert opt in sub.choices["run"].format_help()


# ---------------------------------------------------------------------------
# check, kinds, new
# ---------------------------------------------------------------------------

def test_check_prints_graph_mass_breakdown_and_cautions_without_flying(tmp_path):
    proc = tg("check", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "The model is valid" in out
    assert "bottle -> neck -> outside" in out and "airframe" in out
    assert "Cautions" in out and "eye protection" in out
    # The mass lines add up to the total, and the total is the launch mass the flight starts with.
    block = out.split("Mass at launch")[1].split("Cautions")[0]
    parts = [float(x) for x in re.findall(r"([\d.]+) g$", block, re.M)]
    *pieces, total = parts
    assert total == pytest.approx(sum(pieces), abs=1e-3)
    assert total == pytest.approx(fly().summary["launch_mass"] * 1e3, abs=1e-3)
    assert "flight time" not in out  # nothing was flown


def test_check_names_the_set_option_when_an_override_is_bad(tmp_path):
    proc = tg("check", "--set", "components.bottle.fill=1.5", cwd=tmp_path)
    assert proc.returncode == 2
    assert proc.stderr.startswith("thrustgraph: error: --set: components.bottle.fill: must be less than 1")


def test_kinds_lists_every_installed_kind_with_parameters_units_and_defaults(tmp_path):
    proc = tg("kinds", "--settings", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    pm = get_plugin_manager()
    for kind, cls in {**component_kinds(pm), **environment_kinds(pm)}.items():
        assert f"  {kind}  [" in proc.stdout
        for spec in cls.parameters:
            assert re.search(rf"^\s+{spec.name}\s+{re.escape(spec.describe())}$", proc.stdout, re.M), spec.name
    assert "volume" in proc.stdout and "[L]" in proc.stdout and "required" in proc.stdout
    assert "[launch] settings" in proc.stdout and "guide_length" in proc.stdout


def test_kinds_suggests_the_closest_kind(tmp_path, capsys):
    rc, out, err = tg_here(capsys, "kinds", "convergent-nozle", cwd=tmp_path)
    assert rc == 2
    assert "did you mean 'convergent-nozzle'" in err


def test_new_creates_a_model_that_checks_and_never_overwrites(tmp_path, capsys):
    rc, out, _ = tg_here(capsys, "new", "--list", cwd=tmp_path)
    assert rc == 0
    for stem in bundled_models():
        assert stem in out
    proc = tg("new", "mine.toml", "--name", 'my "first" rocket', cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    made = tmp_path / "mine.toml"
    m = load_model(made)
    assert m.name == 'my "first" rocket'
    assert m.components == load_model(default_model_path()).components
    assert "# " in made.read_text() or made.read_text().count("\n") > 10
    before = made.read_bytes()
    rc, _, err = tg_here(capsys, "new", "mine.toml", cwd=tmp_path)
    assert rc == 2 and "already exists" in err and "--force" in err
    assert made.read_bytes() == before
    rc, _, err = tg_here(capsys, "new", "x.toml", "--from", "bottle-rocke", cwd=tmp_path)
    assert rc == 2 and "did you mean 'bottle-rocket'" in err
    assert not (tmp_path / "x.toml").exists()
    rc, out, err = tg_here(capsys, "check", "mine.toml", cwd=tmp_path)
    assert rc == 0 and "The model is valid" in out, err


# ---------------------------------------------------------------------------
# export, graph, plot, report, run with outputs
# ---------------------------------------------------------------------------

def test_export_writes_csv_json_and_parquet_with_provenance(tmp_path):
    pa = pytest.importorskip("pyarrow")
    import pyarrow.parquet as pq

    proc = tg("export", "bottle-rocket", "--out-dir", "out", "--set", "components.bottle.fill=0.4", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""  # not a terminal: no progress line
    out = tmp_path / "out"
    assert files_in(out) == ["bottle-rocket.csv", "bottle-rocket.json", "bottle-rocket.parquet"]

    model = load_model(default_model_path()).set("components.bottle.fill", 0.4)
    r = fly(model)
    digest = r.provenance["model_sha256"]
    text = (out / "bottle-rocket.csv").read_text()
    comments = [line for line in text.splitlines() if line.startswith("#")]
    assert comments[0] == "# thrustgraph 0.1.0"
    assert f"# model sha256: {digest}" in comments
    assert all(f"{k} = {v}" in comments[1] for k, v in r.provenance["plugins"].items())
    rows = list(csv.reader(line for line in text.splitlines() if not line.startswith("#")))
    assert rows[0][0] == "time [s]" and len(rows) == len(r.t) + 1
    assert np.array_equal([float(row[0]) for row in rows[1:]], r.t)

    doc = json.loads((out / "bottle-rocket.json").read_text())
    assert doc["provenance"]["model_sha256"] == digest
    assert doc["summary"]["apogee"]["value"] == pytest.approx(r.summary["apogee"], rel=1e-12)

    table = pq.read_table(out / "bottle-rocket.parquet")
    assert table.num_rows == len(r.t)
    assert np.array_equal(table.column("time").to_numpy(), r.t)
    assert np.array_equal(table.column("thrust").to_numpy(), r.signals["thrust"])
    assert table.schema.field("thrust").metadata[b"unit"] == b"N"
    prov = json.loads(table.schema.metadata[b"thrustgraph.provenance"])
    assert prov["model_sha256"] == digest
    assert isinstance(pa.__version__, str)


def test_export_needs_an_output(tmp_path, capsys):
    rc, _, err = tg_here(capsys, "export", cwd=tmp_path)
    assert rc == 2 and "name at least one output" in err
    assert files_in(tmp_path) == []


def test_graph_draws_png_and_svg(tmp_path, capsys):
    proc = tg("graph", "--out", "g.svg", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert ET.parse(tmp_path / "g.svg").getroot().tag.endswith("svg")
    rc, out, err = tg_here(capsys, "graph", cwd=tmp_path)
    assert rc == 0, err
    assert (tmp_path / "bottle-rocket-graph.png").read_bytes().startswith(PNG)
    rc, _, err = tg_here(capsys, "graph", "--out", "g.jpg", cwd=tmp_path)
    assert rc == 2 and ".png or .svg" in err
    assert files_in(tmp_path) == ["bottle-rocket-graph.png", "g.svg"]


def test_plot_writes_the_chosen_plots_in_both_formats(tmp_path):
    proc = tg("plot", "--out-dir", "pics", "--format", "both", "--only", "ledger", "--only", "trajectory", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert files_in(tmp_path / "pics") == ["ledger.png", "ledger.svg", "trajectory.png", "trajectory.svg"]
    for p in (tmp_path / "pics").glob("*.png"):
        assert p.read_bytes().startswith(PNG) and p.stat().st_size > 20_000
    for p in (tmp_path / "pics").glob("*.svg"):
        assert ET.parse(p).getroot().tag.endswith("svg")


def test_run_with_plots_report_and_csv(tmp_path):
    proc = tg("run", "--plots", "p", "--report", "r.html", "--csv", "s.csv", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "apogee" in proc.stdout and "wrote r.html" in proc.stdout
    assert {"thrust.png", "ledger.png", "motion.png"} <= set(files_in(tmp_path / "p"))
    html_text = (tmp_path / "r.html").read_text()
    assert html_text.count("data:image/png;base64,") >= 7
    assert (tmp_path / "s.csv").read_text().startswith("# thrustgraph ")


def test_report_command_default_name(tmp_path, capsys):
    rc, out, err = tg_here(capsys, "report", "bottle-rocket", cwd=tmp_path)
    assert rc == 0, err
    assert files_in(tmp_path) == ["bottle-rocket-report.html"]
    assert "outcome: ground impact" in out


# ---------------------------------------------------------------------------
# bad input: one message, exit 2, no output
# ---------------------------------------------------------------------------

BAD = [
    ("malformed TOML", lambda t: t.replace('volume = "2 L"', 'volume = "2 L'),
     ["model.toml: is not valid TOML", "line", "column"]),
    ("unknown top-level key", lambda t: t.replace("[launch]", "[lanch]"),
     ["model.toml: lanch: unknown top-level key", "did you mean 'launch'"]),
    ("unknown launch setting", lambda t: t.replace("elevation =", "elevaton ="),
     ["model.toml: launch.elevaton: unknown [launch] setting", "did you mean 'elevation'"]),
    ("unknown run setting", lambda t: t.replace("end_time =", "endtime ="),
     ["model.toml: run.endtime", "did you mean 'end_time'"]),
    ("unknown environment parameter", lambda t: t.replace("g = \"9.80665 m/s^2\"", "gg = \"9.80665 m/s^2\""),
     ["model.toml: environment.gravity.gg: unknown parameter", "did you mean 'g'"]),
    ("unknown component parameter", lambda t: t.replace("dry_mass", "drymass"),
     ["model.toml: components.airframe.drymass: unknown parameter", "did you mean 'dry_mass'"]),
    ("wrong units", lambda t: t.replace('diameter = "21 mm"', 'diameter = "21 bar"'),
     ["model.toml: components.neck.diameter: expected a length", "'21 bar'", "Fix:", '"22 mm"']),
    ("missing connection", lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]', "flow_paths = []"),
     ["model.toml: components.", "Fix: add a path such as"]),
    ("newer format version", lambda t: t.replace("version = 1", "version = 3"),
     ["model.toml: version: the file is format version 3, newer than this thrustgraph reads",
      "pip install --upgrade thrustgraph"]),
]

# Each case runs a different writing command, so every command is shown to write nothing on bad input.
WRITERS = [
    ("run", "--csv", "out.csv", "--json", "out.json", "--report", "out.html"),
    ("export", "--out-dir", "out"),
    ("plot", "--out-dir", "pics"),
    ("report", "--out", "out.html"),
    ("graph", "--out", "graph.png"),
    ("export", "--csv", "out.csv", "--parquet", "out.parquet"),
    ("run", "--plots", "pics"),
    ("check",),
    ("report",),
]


@pytest.mark.parametrize("k", range(len(BAD)), ids=[b[0] for b in BAD])
def test_bad_input_gives_one_message_exit_2_and_no_output(tmp_path, k):
    what, edit, words = BAD[k]
    text = edit(BASE)
    assert text != BASE, what
    (tmp_path / "model.toml").write_text(text)
    cmd, *opts = WRITERS[k]
    proc = tg(cmd, "model.toml", *opts, cwd=tmp_path)
    assert proc.returncode == 2, (what, proc.stdout, proc.stderr)
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert lines[0].startswith("thrustgraph: error: ")
    for w in words:
        assert w in lines[0], (w, lines[0])
    assert files_in(tmp_path) == ["model.toml"]  # nothing written, no temporary file left
    assert "Traceback" not in proc.stderr


def test_an_unwritable_output_is_one_message_and_writes_nothing(tmp_path, capsys):
    (tmp_path / "busy").write_text("a file, not a directory")
    rc, _, err = tg_here(capsys, "run", "--csv", "ok.csv", "--plots", "busy", cwd=tmp_path)
    assert rc == 2
    assert "cannot write busy: it is a file, not a folder" in err
    assert files_in(tmp_path) == ["busy"]


# ---------------------------------------------------------------------------
# progress on a terminal
# ---------------------------------------------------------------------------

def _run_on_terminal(args: list[str], cwd: Path) -> tuple[int, str]:
    """Run with standard error on a pseudo-terminal; return the exit status and what the terminal showed."""
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "thrustgraph.cli", *args], cwd=cwd, stdout=subprocess.DEVNULL,
                            stderr=slave, stdin=subprocess.DEVNULL)
    os.close(slave)
    chunks = []
    while True:
        ready, _, _ = select.select([master], [], [], HANG_GUARD)   # waits for output, not for a time
        if not ready:
            break
        try:
            data = os.read(master, 4096)
        except OSError:  # the child closed the terminal
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    return proc.wait(HANG_GUARD), b"".join(chunks).decode("utf-8", "replace")


def test_progress_shows_on_a_terminal_and_not_with_quiet(tmp_path):
    rc, shown = _run_on_terminal(["export", "--json", "a.json"], tmp_path)
    assert rc == 0, shown
    assert re.search(r"flying \[#*\.*\] +\d+%", shown), shown
    assert shown.endswith("\r")  # the line is cleared at the end
    rc, shown = _run_on_terminal(["export", "--json", "b.json", "--quiet"], tmp_path)
    assert rc == 0, shown
    assert shown == ""


def test_progress_callback_is_called_with_the_simulated_time():
    import io

    from thrustgraph import integrate
    from thrustgraph.commands.progress import Progress

    calls = []
    out = io.StringIO()

    class Recording(Progress):
        def __call__(self, done, total):
            calls.append((done, total))
            super().__call__(done, total)

    bar = Recording("flying", stream=out, enabled=True, unit="s", every=0.0)
    r = integrate(parse_model(load_model(default_model_path())), progress=bar)
    bar.close()
    assert calls and calls[-1][0] == pytest.approx(float(r.t[-1]))
    assert all(total == 30.0 for _, total in calls)  # run.end_time of the bundled model
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    assert "100%" not in out.getvalue() or calls[-1][0] == 30.0
    assert out.getvalue().endswith("\r")


def test_model_text_of_a_run_is_the_model_as_flown():
    m = load_model(default_model_path()).set("components.bottle.fill", 0.25)
    r = fly(m)
    import hashlib

    assert r.provenance["model_sha256"] == hashlib.sha256(dumps_model(m).encode()).hexdigest()


# ---------------------------------------------------------------------------
# the docs keep up with the command line and the API
# ---------------------------------------------------------------------------

DOCS = Path(__file__).resolve().parent.parent / "docs"
OURS = ("run", "check", "kinds", "new", "export", "graph", "plot", "report")


def test_cli_doc_describes_every_command_and_option():
    text = (DOCS / "cli.md").read_text()
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    for name, p in sub.choices.items():
        assert f"`thrustgraph {name}`" in text, f"docs/cli.md has no section for 'thrustgraph {name}'"
        if name not in OURS:
            continue
        for action in p._actions:
            for opt in action.option_strings:
                if opt.startswith("--") and opt != "--help":
                    assert f"`{opt}" in text, f"docs/cli.md does not describe {name} {opt}"


def test_api_doc_examples_run(tmp_path):
    import doctest

    old = os.getcwd()
    os.chdir(tmp_path)
    try:
        result = doctest.testfile(str(DOCS / "api.md"), module_relative=False, optionflags=doctest.ELLIPSIS,
                                  verbose=False, report=True)
    finally:
        os.chdir(old)
    assert result.attempted > 40
    assert result.failed == 0, "an example in docs/api.md no longer runs as written (see the output above)"
