"""Honest defaults: warnings for what a valid model probably did not mean, and the trade's gauge units.

``check`` lists the warnings, ``run`` prints them on standard error before it flies (one line each, naming the
key path and the fix); gauge (``psig``, ``barg``) and absolute (``psia``, ``bara``) units are read where the
parameter holds that kind of pressure and refused where it holds the other. Trade facts, no published source:
1 psi = 6894.757 Pa (NIST SP 811, the exact lbf/in^2), a gauge reading is above the surroundings.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from thrustgraph import ModelError, fly
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import default_model_path, loads_model

BASE = default_model_path().read_text()


def parsed(text: str):
    return parse_model(loads_model(text, source="m.toml"))


def tg(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], cwd=cwd, capture_output=True, text=True)


def test_the_bundled_bottle_has_no_warning():
    assert parsed(BASE).warnings() == []


def test_an_airframe_without_drag_data_is_warned_about_in_check_and_run(tmp_path):
    text = BASE.replace("drag_coefficient = 0.4\n", "")
    (tmp_path / "m.toml").write_text(text)
    [w] = parsed(text).warnings()
    assert w.startswith("components.airframe: the airframe has no drag data (drag_coefficient left at 0)")
    assert "to fix it, give drag_coefficient and reference_diameter" in w
    check = tg("check", "m.toml", cwd=tmp_path)
    assert check.returncode == 0 and f"  warning: {w}" in check.stdout
    run = tg("run", "m.toml", cwd=tmp_path)
    assert run.returncode == 0
    assert run.stderr.splitlines() == [f"thrustgraph: warning: {w}"]
    # ...and it matters: with no drag the bottle climbs higher than with Cd 0.4 (the warning is about something)
    assert fly(loads_model(text)).summary["apogee"] > 1.3 * fly(loads_model(BASE)).summary["apogee"]


@pytest.mark.parametrize("edit", [
    lambda t: t.replace('mount = "guide"', 'mount = "held"').replace("drag_coefficient = 0.4\n", ""),   # a stand
    lambda t: t.replace('kind = "still-air"\npressure = "101325 Pa"\ntemperature = "15 degC"',
                        'kind = "vacuum"').replace("drag_coefficient = 0.4\n", ""),                    # no air
])
def test_no_drag_warning_where_drag_cannot_act(edit):
    text = edit(BASE)
    assert text != BASE
    assert parsed(text).warnings() == []


def test_a_guide_left_at_its_default_length_is_warned_about():
    text = BASE.replace('guide_length = "1 m"\n', "")
    [w] = parsed(text).warnings()
    assert w.startswith("launch.guide_length: not given, so the launch guide is 0 m long")
    assert 'guide_length = "1 m"' in w
    # written out as 0 m, it is what the user said: no warning
    assert parsed(BASE.replace('guide_length = "1 m"', 'guide_length = "0 m"')).warnings() == []


# ---------------------------------------------------------------------------
# gauge and absolute units
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("written, plain", [("65.2 psig", "65.2 psi"), ("4.5 barg", "4.5 bar")])
def test_gauge_units_on_a_gauge_pressure(written, plain):
    a = parsed(BASE.replace('gauge_pressure = "4.5 bar"', f'gauge_pressure = "{written}"'))
    b = parsed(BASE.replace('gauge_pressure = "4.5 bar"', f'gauge_pressure = "{plain}"'))
    assert a.params["bottle"].gauge_pressure == b.params["bottle"].gauge_pressure


def test_absolute_units_on_an_absolute_pressure():
    a = parsed(BASE.replace('pressure = "101325 Pa"', 'pressure = "14.6959 psia"'))
    assert a.env_params["medium"].pressure == pytest.approx(101325.0, rel=1e-5)   # 14.6959 psi * 6894.757 Pa/psi


@pytest.mark.parametrize("old, new, parts", [
    ('gauge_pressure = "4.5 bar"', 'gauge_pressure = "79.7 psia"',
     ["components.bottle.gauge_pressure", "'79.7 psia' is absolute", "this parameter is gauge",
      "a plain unit (psi, bar, kPa) means above the ambient pressure at launch"]),
    ('pressure = "101325 Pa"', 'pressure = "0 psig"',
     ["environment.medium.pressure", "'0 psig' is gauge", "this parameter is absolute",
      "a plain unit (psi, bar, kPa) means above vacuum"]),
    ('gauge_pressure = "4.5 bar"', 'gauge_pressure = "-5 psi"',
     ["components.bottle.gauge_pressure", "must be at least 0 bar", "this pressure is gauge: a plain unit"]),
    ('gauge_pressure = "4.5 bar"', 'gauge_pressure = "65 lbf"',
     ["components.bottle.gauge_pressure", "expected a pressure", "this pressure is gauge"]),
])
def test_pressure_errors_say_what_a_plain_unit_means(old, new, parts):
    with pytest.raises(ModelError) as err:
        parsed(BASE.replace(old, new))
    for part in parts:
        assert part in str(err.value), str(err.value)
