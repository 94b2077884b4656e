"""docs/plugins.md runs as written: its sample family is built from the page's own code blocks, installed through a
real entry point, and flown (a single flight and a study) with the page's own commands.

Every fenced block of the guide is one of three things, and each is exercised here:

* a file (its first line is ``# file: PATH``): written out as it stands; the package files and the
  ``pyproject.toml`` make the ``sharp-orifices`` distribution, the ``.toml`` file is the model;
* a shell block: every ``thrustgraph ...`` line is run, in order, with the family installed;
* an excerpt: a shorter block quoting one of the files (its lines appear in that file, in order).

Installing: pip would build a wheel and unpack it into site-packages together with a ``*.dist-info`` directory
whose ``entry_points.txt`` carries the ``[project.entry-points.thrustgraph]`` table. :mod:`pluginguide` writes that
installed layout itself, into a temporary directory put on ``PYTHONPATH`` (building a wheel needs ``wheel``, which
the test environment need not have, and ``pip install`` would write into the test's own environment).
"""

from __future__ import annotations

import csv
import json
import math
import shlex
import tomllib
from pathlib import Path

import pytest
import tomli_w
from pluginguide import FILE, GUIDE, cli, guide_blocks, guide_files, install_guide_family

from thrustgraph.kinds.contract import BUILDERS, HOOKS


@pytest.fixture(scope="module")
def guide(tmp_path_factory):
    """The guide's family, written from the page and installed; the page's commands run once, in order."""
    work = tmp_path_factory.mktemp("guide")
    site, models = install_guide_family(work)
    commands = [line for lang, body in guide_blocks() if lang == "sh"
                for line in body.splitlines() if line.startswith("thrustgraph ")]
    runs = [(line, cli(shlex.split(line)[1:], work, site)) for line in commands]
    return {"work": work, "site": site, "models": models, "runs": runs}


def test_every_block_is_a_file_a_command_or_an_excerpt_of_a_file():
    files = guide_files()
    assert {"pyproject.toml", "sharp_orifices/__init__.py", "sharp_orifices/orifice.py",
            "sharp_orifices/fitting.py", "drilled-cap-rocket.toml"} <= set(files)
    for lang, body in guide_blocks():
        if FILE.match(body) or lang == "sh":
            continue
        lines = [ln for ln in body.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
        quoted = False
        for text in files.values():
            rest = iter(text.splitlines())
            if all(any(ln.strip() == other.strip() for other in rest) for ln in lines):
                quoted = True
        assert quoted, f"this block of docs/plugins.md is neither a file, a command nor a quote of a file:\n{body}"
    # the Python files are valid Python, the TOML files valid TOML
    for path, text in files.items():
        if path.endswith(".py"):
            compile(text, path, "exec")
        else:
            tomllib.loads(text)


def test_guide_shows_every_callable_as_the_balance_calls_it():
    """Each hook of the contract appears in the guide with the positional arguments the balance passes."""
    text = " ".join(GUIDE.read_text().split())
    for hook in HOOKS.values():
        call = hook.call if hook.owner not in ("medium", "gravity", "EventSpec") else f"fn({', '.join(hook.args)})"
        assert call in text, f"docs/plugins.md does not show {hook.name} as {call}"
    for role, (name, args) in BUILDERS.items():
        assert f"{name}({', '.join(args)})" in text, f"docs/plugins.md does not show {name}({', '.join(args)})"


def test_guide_commands_run_with_the_family_installed(guide):
    assert guide["runs"], "docs/plugins.md has no commands to run"
    for line, proc in guide["runs"]:
        assert proc.returncode == 0, f"{line!r} failed:\n{proc.stderr}"
        assert "Traceback" not in proc.stderr, proc.stderr
    kinds = guide["runs"][0][1].stdout
    assert "sharp-edged-orifice" in kinds and "fitting-loss" in kinds
    assert "from plugin sharp_orifices (sharp-orifices 0.1.0)" in kinds
    doc = json.loads((guide["work"] / "flight.json").read_text())
    assert doc["success"]
    assert "sharp-orifices 0.1.0" in doc["provenance"]["plugins"]["sharp_orifices"]


def _rows(path: Path) -> list[dict[str, str]]:
    return list(csv.DictReader(line for line in path.read_text().splitlines() if not line.startswith("#")))


def _model(guide) -> dict:
    return tomllib.loads(guide["models"][0].read_text())


def test_guide_flight_starts_with_the_closed_form_liquid_flow(guide):
    """At launch the water leaves the bottle through the entrance loss and the orifice in series.

    Bernoulli across the orifice (Torricelli), mdot = rho Cd A_o sqrt(2 dp_o / rho), and the resistance
    coefficient across the fitting (Crane Co., Technical Paper No. 410, 1988: dp_f = K rho v^2 / 2 at its bore)
    add up to the pressure the bottle delivers, dp = p_outlet - p_a:
        mdot = sqrt(2 rho dp / (1 / (Cd A_o)^2 + K / A_f^2)).
    """
    first = _rows(guide["work"] / "flight.csv")[0]
    c = _model(guide)["components"]
    cd = 0.61                                      # the orifice kind's default discharge coefficient
    a_o = cd * math.pi * float(c["cap"]["diameter"].split()[0]) ** 2 / 4 * 1e-6
    a_f = math.pi * float(c["entrance"]["bore"].split()[0]) ** 2 / 4 * 1e-6
    k = c["entrance"]["loss_coefficient"]
    rho = float(first["bottle.liquid_mass [kg]"]) / float(first["bottle.liquid_volume [m^3]"])
    dp = float(first["bottle.outlet_pressure [Pa]"]) - float(first["ambient_pressure [Pa]"])
    mdot = math.sqrt(2 * rho * dp / (1 / a_o ** 2 + k / a_f ** 2))
    assert float(first["time [s]"]) == 0.0
    assert float(first["cap.mass_flow [kg/s]"]) == pytest.approx(mdot, rel=1e-9)
    v_f = mdot / (rho * a_f)
    assert float(first["entrance.pressure_rise [Pa]"]) == pytest.approx(-k * rho * v_f ** 2 / 2, rel=1e-9)
    assert float(first["cap.exit_velocity [m/s]"]) == pytest.approx(mdot / (rho * a_o), rel=1e-9)
    # the regime signal the orifice declares: not choked while water flows, choked when the gas blow-down starts
    rows = _rows(guide["work"] / "flight.csv")
    wet = [r for r in rows if r["phase [text]"] == "liquid thrust" and float(r["bottle.liquid_mass [kg]"]) > 1e-9]
    assert len(wet) > 10 and all(float(r["cap.choked [1]"]) == 0.0 for r in wet)
    first_gas = next(r for r in rows if r["phase [text]"] == "gas thrust")
    assert float(first_gas["cap.choked [1]"]) == 1.0


def test_guide_family_matches_the_builtin_nozzle_without_the_loss(guide, tmp_path):
    """With K = 0 and the same discharge coefficient, the guide's orifice and the built-in convergent nozzle
    (two implementations of the same published relations: Bernoulli, NACA Report 1135, 1953) fly the same flight."""
    model = _model(guide)
    model["components"]["entrance"]["loss_coefficient"] = 0.0
    model["components"]["cap"]["discharge_coefficient"] = 0.61
    (tmp_path / "plugin.toml").write_text(tomli_w.dumps(model))
    builtin = _model(guide)
    del builtin["components"]["entrance"]
    # the guide's orifice is the narrow-nozzle relation: the built-in nozzle without its velocity of approach
    builtin["components"]["cap"] = {"kind": "convergent-nozzle", "diameter": model["components"]["cap"]["diameter"],
                                    "discharge_coefficient": 0.61, "approach_velocity": False}
    builtin["flow_paths"] = ["bottle -> cap -> outside"]
    (tmp_path / "builtin.toml").write_text(tomli_w.dumps(builtin))
    out = {}
    for name in ("plugin", "builtin"):
        proc = cli(["run", f"{name}.toml", "--json", f"{name}.json", "--quiet"], tmp_path, guide["site"])
        assert proc.returncode == 0, proc.stderr
        out[name] = json.loads((tmp_path / f"{name}.json").read_text())["summary"]
    for key in ("apogee", "max_speed", "burn_time", "total_impulse", "flight_time"):
        assert out["plugin"][key]["value"] == pytest.approx(out["builtin"][key]["value"], rel=1e-7), key


def test_guide_study_flies_each_hole_size_as_the_single_flight_does(guide):
    rows = _rows(guide["work"] / "holes.csv")
    assert [r["status"] for r in rows] == ["ok", "ok", "ok"]
    sizes = [float(r["components.cap.diameter [mm]"]) for r in rows]
    assert sizes == pytest.approx([9.0, 12.0, 15.0])
    flight = json.loads((guide["work"] / "flight.json").read_text())["summary"]
    twelve = rows[sizes.index(pytest.approx(12.0))]
    assert float(twelve["apogee [m]"]) == pytest.approx(flight["apogee"]["value"], rel=1e-8)
    assert float(twelve["burn_time [s]"]) == pytest.approx(flight["burn_time"]["value"], rel=1e-8)
    # a smaller hole passes less water per second: a longer burn
    burns = [float(r["burn_time [s]"]) for r in rows]
    assert burns[0] > burns[1] > burns[2]
