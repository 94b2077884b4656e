"""Command-line arguments and records that once crashed, hung or misled: each now gives one clear message.

Every case is run as a user types it (``thrustgraph.cli.main``) and checks the
exit status, the one message on standard error (what, where, how to fix) and
that nothing was written.
"""

from __future__ import annotations

import os
import re
import socket
import subprocess
import sys
import threading
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from conftest import HANG_GUARD

MATH_NAME = "rocket $\\frac{1}{$"


def run_here(capsys, args: list[str], cwd: Path) -> tuple[int, str, str]:
    from thrustgraph.cli import main

    old = os.getcwd()
    os.chdir(cwd)
    try:
        rc = main(args)
    finally:
        os.chdir(old)
    out, err = capsys.readouterr()
    return rc, out, err


def refused(capsys, args: list[str], cwd: Path, message: str) -> str:
    """Run, expect exit 2 with exactly one line on stderr that holds ``message``, and nothing written."""
    before = sorted(p.name for p in cwd.iterdir())
    rc, out, err = run_here(capsys, args, cwd)
    assert rc == 2, out + err
    assert err.startswith("thrustgraph: error: ") and err.count("\n") == 1, err
    assert message in err, err
    assert "Fix: " in err and len(err) < 600, err
    assert sorted(p.name for p in cwd.iterdir()) == before
    return err


@pytest.fixture
def here(stand, tmp_path) -> Path:
    for name in ("held.toml", "stand.csv"):
        (tmp_path / name).write_bytes((stand / name).read_bytes())
    return tmp_path


# ---------------------------------------------------------------------------
# studies
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("vary, message", [
    ("components.bottle.fill=", "--vary components.bottle.fill=: gives no values after '='"),
    ("components.bottle.fill=   ", "--vary components.bottle.fill=: gives no values after '='"),
    ("components.bottle.fill=,", "--vary components.bottle.fill: ',' holds no value"),
    ("components.bottle.fill", "sweep components.bottle.fill: gives no values to sweep"),
])
def test_a_sweep_without_values_is_refused(vary, message, here, capsys):
    refused(capsys, ["study", "sweep", "--vary", vary, "--engine", "serial", "--table", "t.csv"], here, message)


class NotAScheduler:
    """A TCP server on this machine that is not a Dask scheduler: it answers like a web server, or says nothing."""

    def __init__(self, reply: bytes | None) -> None:
        self.sock = socket.create_server(("127.0.0.1", 0))
        self.address = "tcp://127.0.0.1:%d" % self.sock.getsockname()[1]
        self.reply = reply
        self.held: list[socket.socket] = []
        self.thread = threading.Thread(target=self._serve, daemon=True)
        self.thread.start()

    def _serve(self) -> None:
        try:
            conn, _ = self.sock.accept()   # one connection: the probe's
        except OSError:
            return
        if self.reply is None:
            self.held.append(conn)         # keep it open and silent
        else:
            conn.sendall(self.reply)
            conn.close()

    def close(self) -> None:
        self.sock.close()
        for c in self.held:
            c.close()
        self.thread.join(HANG_GUARD)


@pytest.mark.parametrize("reply, message", [
    (b"HTTP/1.1 400 Bad Request\r\nContent-Length: 0\r\n\r\n", "answers, but not as a Dask scheduler (it began "
                                                               "with b'HTTP/1.1')"),
    (None, "accepts connections but sends no Dask handshake within 1 s: it is not a Dask scheduler"),
    (b"", "closed the connection without a Dask handshake"),
])
def test_an_address_that_is_not_a_dask_scheduler_is_one_clear_error(reply, message, here, capsys):
    pytest.importorskip("distributed")
    server = NotAScheduler(reply)
    try:
        err = refused(capsys, ["study", "sweep", "--vary", "components.bottle.fill=0.2, 0.3", "--scheduler",
                               server.address, "--wait", "1", "--table", "t.csv"], here, message)
    finally:
        server.close()
    assert "EiB" not in err and "allocate" not in err


@pytest.mark.parametrize("args, message", [
    (["--scheduler", "not a url"], "--scheduler: 'not a url' is not a scheduler address. Fix: write "
                                   "tcp://HOST:PORT"),
    (["--scheduler", "http://127.0.0.1:8786"], "unknown protocol 'http'"),
    (["--scheduler", "tcp://127.0.0.1:99999"], "port 99999 is not between 1 and 65535"),
    (["--scheduler", "tcp://127.0.0.1:9", "--wait", "nan"], "--wait: must be a positive number of seconds, got nan"),
    (["--scheduler", "tcp://127.0.0.1:9", "--wait", "-1"], "--wait: must be a positive number of seconds, got -1"),
    (["--scheduler", "tcp://127.0.0.1:9", "--wait", "inf"], "--wait: must be a positive number of seconds, got inf"),
])
def test_bad_dask_options_are_refused_before_any_connection(args, message, here, capsys):
    pytest.importorskip("distributed")
    refused(capsys, ["study", "sweep", "--vary", "components.bottle.fill=0.2, 0.3", *args, "--table", "t.csv"],
            here, message)


# ---------------------------------------------------------------------------
# calibrate and compare
# ---------------------------------------------------------------------------

CALIBRATE = ["calibrate", "held.toml", "stand.csv", "--map", "load=thrust", "--start-at", "0 s", "--fit",
             "components.neck.discharge_coefficient=0.5..1.0", "--out", "cal.toml"]


@pytest.mark.parametrize("extra, message", [
    (["--max-iterations", "0"], "--max-iterations: must be at least 1, got 0. Fix: allow the solver some "
                                "evaluations"),
    (["--max-iterations", "-5"], "--max-iterations: must be at least 1, got -5"),
    (["--confidence", "nan"], "--confidence: must be a level between 0 and 1, got nan"),
    (["--confidence", "1.5"], "--confidence: must be a level between 0 and 1, got 1.5"),
])
def test_calibrate_settings_out_of_range_are_refused(extra, message, here, capsys):
    refused(capsys, CALIBRATE + extra, here, message)


def _record(here: Path, name: str, head: str, times, values) -> None:
    (here / name).write_text(head + "\n" + "".join(f"{t!r},{v!r}\n" for t, v in zip(times, values)))


def test_a_value_that_overflows_on_conversion_is_refused_not_compared(here, capsys):
    t = np.arange(0.0005, 0.16, 0.001).tolist()
    values = [100.0] * len(t)
    values[3] = 1e308                                  # a float, but 4.4e308 N: past the largest float
    _record(here, "huge.csv", "time [s],load [lbf]", t, values)
    err = refused(capsys, ["compare", "held.toml", "huge.csv", "--map", "load=thrust", "--json", "c.json"], here,
                  "huge.csv: column 'load', line 5: 1e+308 lbf is too large to convert to SI units (it overflows "
                  "to infinity)")
    assert "inf" not in err.replace("infinity", "") and "nan" not in err


def test_huge_values_give_finite_metrics_or_one_clear_error(here, capsys):
    t = np.arange(0.0005, 0.16, 0.001).tolist()
    values = [100.0] * len(t)
    values[3] = 1e300                                  # absurd but finite: its square overflows, the RMS must not
    _record(here, "big.csv", "time [s],load [N]", t, values)
    rc, out, err = run_here(capsys, ["compare", "held.toml", "big.csv", "--map", "load=thrust"], here)
    assert rc == 0, err
    assert "RMS error         7.9057e+298 N   (7.91 % of the measured peak)" in out
    assert not re.search(r"\b(inf|nan)\b", out.lower())
    values[3] = values[4] = 1.7e308                    # two neighbours near the largest float: their mean overflows
    _record(here, "edge.csv", "time [s],load [N]", t, values)
    refused(capsys, ["compare", "held.toml", "edge.csv", "--map", "load=thrust", "--json", "c.json"], here,
            "edge.csv: column 'load': its values are too large to compare (impulse measured overflows; the largest "
            "value is 1.7e+308 N)")


def test_a_header_cell_beyond_the_csv_limit_is_refused(here, capsys):
    t = np.arange(0.0005, 0.16, 0.001).tolist()
    _record(here, "long.csv", "time [s],load" + "x" * 140_000 + " [N]", t, [1.0] * len(t))
    refused(capsys, ["compare", "held.toml", "long.csv", "--map", "load=thrust"], here,
            "long.csv: line 1: cannot be read as CSV (field larger than field limit (131072); the line has "
            "140,017 characters)")
    _record(here, "wide.csv", "time [s],load" + "y" * 1000 + " [N]", t, [1.0] * len(t))
    refused(capsys, ["compare", "held.toml", "wide.csv", "--map", "load=thrust"], here,
            "the header cell has 1,008 characters (at most 200)")


def test_a_record_sampled_every_1e_300_s_is_refused(here, capsys):
    n = 160
    _record(here, "tiny.csv", "time [s],load [N]", [k * 1e-300 for k in range(n)], [1.0] * n)
    refused(capsys, ["compare", "held.toml", "tiny.csv", "--map", "load=thrust"], here,
            "tiny.csv: column 'time', line 3: samples 1e-300 s apart (the least accepted is 1e-09 s, 1 GHz). "
            "Fix: check the time unit in the header")


@pytest.mark.parametrize("unit", ["9**9**9", "m**999", "10**400 N"])
def test_arithmetic_in_a_record_unit_is_refused(unit, here, capsys):
    t = np.arange(0.0005, 0.16, 0.001).tolist()
    _record(here, "calc.csv", f"time [s],load [{unit}]", t, [1.0] * len(t))
    refused(capsys, ["compare", "held.toml", "calc.csv", "--map", "load=thrust"], here,
            f"the unit {unit!r} is an arithmetic expression, not a unit")


# ---------------------------------------------------------------------------
# names that plotting reads as math
# ---------------------------------------------------------------------------

def test_a_name_with_a_math_fragment_is_drawn_as_written(here, capsys):
    m = tg.load_model(here / "held.toml")
    m.name = MATH_NAME
    tg.save_model(m.set("launch.mount", "guide"), here / "m.toml")
    for args in (["run", "m.toml", "--plots", "p", "--report", "r.html"], ["graph", "m.toml", "--out", "g.svg"],
                 ["plot", "m.toml", "--out-dir", "q", "--format", "svg"], ["report", "m.toml", "--out", "s.html"]):
        rc, out, err = run_here(capsys, args, here)
        assert rc == 0, err
    html = (here / "r.html").read_text()
    assert "rocket $\\frac{1}{$" in html            # the report shows the name as written
    assert sorted(p.name for p in (here / "q").iterdir())[0].endswith(".svg")
    (here / "odd $x^{$ log.csv").write_bytes((here / "stand.csv").read_bytes())
    rc, out, err = run_here(capsys, ["compare", "held.toml", "odd $x^{$ log.csv", "--map", "load=thrust",
                                     "--start-at", "0 s", "--plot", "c.png"], here)
    assert rc == 0, err
    assert (here / "c.png").read_bytes()[:4] == b"\x89PNG"


# ---------------------------------------------------------------------------
# a reader that stops reading
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("args", [["run", "--csv", "a.csv"], ["kinds"], ["check"], ["--version"], ["--help"],
                                  ["run", "--help"]])
def test_a_closed_pipe_on_standard_output_ends_quietly_and_still_writes(args, tmp_path):
    read_end, write_end = os.pipe()
    os.close(read_end)   # the reader is gone before the first line: every write meets a broken pipe
    proc = subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], stdout=write_end,
                          stderr=subprocess.PIPE, cwd=tmp_path, timeout=HANG_GUARD)
    os.close(write_end)
    assert proc.stderr == b"" and proc.returncode == 0, proc.stderr.decode()
    if "--csv" in args:
        assert (tmp_path / "a.csv").read_text().startswith("#")


@pytest.mark.parametrize("args", ["kinds", "run", "--help"])
def test_head_of_the_output(args, tmp_path):
    # the shell's own pipe and head; PIPESTATUS holds thrustgraph's status, not head's
    proc = subprocess.run(["bash", "-c", f"'{sys.executable}' -m thrustgraph.cli {args} | head -3; "
                           "exit ${PIPESTATUS[0]}"], cwd=tmp_path, capture_output=True, text=True, timeout=HANG_GUARD)
    assert proc.returncode == 0 and proc.stderr == "" and len(proc.stdout.splitlines()) == 3, proc.stderr


def test_a_reader_that_leaves_after_three_lines(tmp_path):
    # a real pipe whose reader takes three lines and closes its end while thrustgraph still writes: the pipe holds
    # one page (Linux F_SETPIPE_SZ) and the kinds listing is several, so the writer meets the closed pipe (EPIPE)
    # part way through, whatever the timing
    fcntl = pytest.importorskip("fcntl")
    read_end, write_end = os.pipe()
    if hasattr(fcntl, "F_SETPIPE_SZ"):
        fcntl.fcntl(write_end, fcntl.F_SETPIPE_SZ, 4096)
    proc = subprocess.Popen([sys.executable, "-m", "thrustgraph.cli", "kinds"], stdout=write_end,
                            stderr=subprocess.PIPE, cwd=tmp_path)
    os.close(write_end)
    got = b""
    while got.count(b"\n") < 3:
        chunk = os.read(read_end, 256)
        assert chunk, "the output ended before three lines"
        got += chunk
    os.close(read_end)
    err = proc.communicate(timeout=HANG_GUARD)[1]
    assert err == b"" and proc.returncode == 0, err.decode()
    assert len(got) < 4096 + 256 < len(subprocess.run([sys.executable, "-m", "thrustgraph.cli", "kinds"],
                                                      capture_output=True, timeout=HANG_GUARD).stdout)


@pytest.mark.parametrize("command, argv, field, expected", [
    ("overlay", ["a.toml", "--variant", "x=1", "b.csv", "--map", "load=thrust", "c.csv"], "runs",
     ["a.toml", "b.csv", "c.csv"]),
    ("calibrate", ["m.toml", "--set", "launch.mount=held", "r1.csv", "--map", "load=thrust", "r2.csv", "--out",
                   "x.toml"], "records", ["r1.csv", "r2.csv"]),
    ("study", ["--vary", "components.bottle.fill=0.3,0.4", "m.toml", "--quiet", "sweep"], "kind", "sweep"),
    ("run", ["--units", "imperial", "m.toml", "--quiet"], "model", "m.toml"),
])
def test_positional_arguments_may_come_between_options(command, argv, field, expected):
    # as people write them: `overlay rocket.toml --variant "fill=0.4" saved.csv` used to end in "unrecognized
    # arguments: saved.csv" (argparse took a RUN list only up to the first option)
    from thrustgraph.cli import build_parser
    args = build_parser([command]).parse_args([command] + argv)
    assert getattr(args, field) == expected
    options = [a for a in argv if a.startswith("--")]
    assert options                                         # the case does mix them
