"""Bad input ends in one clear message (component, parameter, fix), exit status 2, and nothing written.

Run as a user would: the installed ``thrustgraph`` command through subprocess.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from thrustgraph import default_model_path

BASE = default_model_path().read_text()


def run_cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], cwd=cwd, capture_output=True, text=True)


def write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "model.toml"
    p.write_text(text)
    return p


CASES = [
    # (description, edit of the bundled model, words the message must contain)
    ("pressure given in kg", lambda t: t.replace('gauge_pressure = "4.5 bar"', 'gauge_pressure = "5 kg"'),
     ["components.bottle.gauge_pressure", "expected a pressure", "5 kg", "Fix:"]),
    ("zero volume", lambda t: t.replace('volume = "2 L"', 'volume = "0 L"'),
     ["components.bottle.volume", "greater than 0", "Fix:"]),
    ("negative volume", lambda t: t.replace('volume = "2 L"', 'volume = "-2 L"'),
     ["components.bottle.volume", "greater than 0"]),
    ("fill above one", lambda t: t.replace("fill = 0.33", "fill = 1.2"),
     ["components.bottle.fill", "less than 1", "Fix:"]),
    ("unknown kind", lambda t: t.replace('kind = "convergent-nozzle"', 'kind = "convergent-nozle"'),
     ["components.neck.kind", "unknown component kind", "did you mean 'convergent-nozzle'"]),
    ("nozzle with no upstream volume", lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]',
                                                             'flow_paths = ["neck -> outside"]'),
     ["components.neck", "needs exactly one upstream vessel", "Fix:"]),
    ("no path to the outside", lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]',
                                                     'flow_paths = ["bottle -> neck"]'),
     ["components.neck", "surroundings", "Fix:"]),
    ("unknown parameter", lambda t: t.replace("fill = 0.33", "fil = 0.33"),
     ["components.bottle.fil", "unknown parameter", "did you mean 'fill'"]),
    ("newer format", lambda t: t.replace("version = 1", "version = 7"),
     ["version", "newer than this thrustgraph reads", "upgrade"]),
    ("malformed TOML", lambda t: t.replace('volume = "2 L"', 'volume = "2 L'), ["is not valid TOML"]),
]


@pytest.mark.parametrize("what, edit, words", CASES, ids=[c[0] for c in CASES])
def test_bad_model_gives_one_clear_message_and_writes_nothing(tmp_path, what, edit, words):
    path = write(tmp_path, edit(BASE))
    out = tmp_path / "series.csv"
    proc = run_cli("run", str(path), "--csv", str(out), cwd=tmp_path)
    assert proc.returncode == 2, proc.stderr
    err = proc.stderr.strip()
    assert len(err.splitlines()) == 1, err
    for w in words:
        assert w in err, f"{w!r} not in {err!r}"
    assert proc.stdout == ""
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["model.toml"]


def test_nozzle_fed_from_nothing(tmp_path):
    text = BASE.replace('flow_paths = ["bottle -> neck -> outside"]',
                        'flow_paths = ["bottle -> neck -> outside", "spare -> outside"]')
    text += '\n[components.spare]\nkind = "convergent-nozzle"\ndiameter = "9 mm"\n'
    proc = run_cli("run", str(write(tmp_path, text)), cwd=tmp_path)
    assert proc.returncode == 2
    assert "components.spare" in proc.stderr and "upstream vessel" in proc.stderr


def test_bad_override_from_the_command_line(tmp_path):
    proc = run_cli("run", "--set", "components.bottle.fill=2", cwd=tmp_path)
    assert proc.returncode == 2
    assert "components.bottle.fill" in proc.stderr and "less than 1" in proc.stderr


def test_good_run_exits_zero_and_writes_csv(tmp_path):
    out = tmp_path / "series.csv"
    proc = run_cli("run", "--csv", str(out), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    for word in ("liquid thrust", "gas thrust", "apogee", "peak thrust", "total impulse", "mass residual",
                 "momentum residual", "Cautions"):
        assert word in proc.stdout
    assert out.stat().st_size > 1000
