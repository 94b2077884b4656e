"""Progress indicators on a real terminal (a pseudo-terminal): one line that fits, rewritten in place, then cleared.

Flights, studies and calibrations draw with tqdm (thrustgraph.base.progress). Each
case writes to the slave side of a pseudo-terminal of a given width and
reads what the terminal received from the master side: no clock is involved
(``every=0`` draws at every call; each read waits for output that is already
there).
"""

from __future__ import annotations

import fcntl
import json
import os
import pty
import select
import struct
import subprocess
import sys
import termios

import pytest

from conftest import HANG_GUARD
from thrustgraph.measured.calibrate import ProgressLine
from thrustgraph.base.progress import MAX_WIDTH, Progress
from thrustgraph.studies.studyprogress import StudyProgress


def terminal(columns: int):
    """(stream to draw on, master fd) of a pseudo-terminal ``columns`` wide that passes text as written."""
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, columns, 0, 0))
    attrs = termios.tcgetattr(slave)
    attrs[1] &= ~termios.OPOST          # no output processing: "\n" arrives as written
    termios.tcsetattr(slave, termios.TCSANOW, attrs)
    return os.fdopen(slave, "w", buffering=1), master


def received(stream, master: int, ends) -> str:
    """Close the drawing side and read everything the terminal received (until ``ends(text)``)."""
    stream.flush()
    text = ""
    while not ends(text):
        ready, _, _ = select.select([master], [], [], HANG_GUARD)
        assert ready, f"nothing more arrived: {text!r}"
        text += os.read(master, 65536).decode()
    stream.close()
    os.close(master)
    return text


def drawn_lines(text: str) -> list[str]:
    """The successive states of the line: the text between carriage returns (and line feeds)."""
    return [part for part in text.replace("\n", "\r").split("\r") if part.strip()]


@pytest.mark.parametrize("columns", [40, 60, 200])
def test_a_study_line_fits_the_terminal_and_is_cleared(columns):
    stream, master = terminal(columns)
    bar = StudyProgress(3000, "sweep", stream=stream, every=0.0)
    assert bar.enabled   # a terminal: it draws
    for done in (0, 1, 250, 1234, 2999):
        bar.update(done, screened=12)
    bar.close()
    text = received(stream, master, lambda t: t.endswith("\r") and "2999/3000" in t)
    lines = drawn_lines(text)
    assert any("1234/3000 designs" in ln for ln in lines) or columns < 60, lines
    assert all(len(ln) <= min(columns, MAX_WIDTH) for ln in lines), [len(ln) for ln in lines]
    assert "\n" not in text                      # rewritten in place, never a new line
    assert text.endswith("\r") and text.rsplit("\r", 2)[-2].strip() == ""   # cleared at the end


@pytest.mark.parametrize("columns", [40, 100])
def test_a_flight_line_fits_the_terminal(columns):
    stream, master = terminal(columns)
    with Progress("flying", stream=stream, unit="s", every=0.0) as bar:
        for t in (0.0, 1.5, 7.5, 30.0):
            bar(t, 30.0)
    text = received(stream, master, lambda t: "30 s of 30 s" in t and t.endswith("\r"))
    lines = drawn_lines(text)
    assert all(len(ln) <= min(columns, MAX_WIDTH) for ln in lines), lines
    assert any(ln.startswith("flying [") and "25%  7.5 s of 30 s" in ln for ln in lines), lines


def test_a_calibration_line_stays_on_screen():
    stream, master = terminal(80)
    line = ProgressLine(stream)
    line(1, 1, 0.5)
    line(2, 3, 0.25)
    line.close()
    text = received(stream, master, lambda t: t.endswith("\n"))
    assert drawn_lines(text)[-1] == "calibrating: evaluation 2, 3 model runs, residual 0.25"


def test_without_a_terminal_nothing_is_drawn_and_tqdm_is_not_imported(tmp_path):
    code = ("import contextlib, io, json, sys\n"
            "from thrustgraph.cli import main\n"
            "err = io.StringIO()\n"
            "with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):\n"
            "    status = main(['export', '--json', 'a.json'])\n"
            "print(json.dumps([status, err.getvalue(), 'tqdm' in sys.modules]))")
    proc = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True,
                          timeout=HANG_GUARD)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout.splitlines()[-1]) == [0, "", False]


def test_a_terminal_that_reports_no_width_gets_the_longest_line():
    stream, master = terminal(0)          # a bare pseudo-terminal: 0 columns
    with Progress("flying", stream=stream, unit="s", every=0.0) as bar:
        bar(7.5, 30.0)
    lines = drawn_lines(received(stream, master, lambda t: t.endswith("\r") and "7.5 s" in t))
    assert lines and all(len(ln) <= MAX_WIDTH for ln in lines)
    assert any("25%  7.5 s of 30 s" in ln for ln in lines), lines
