"""Units of choice: ``--units`` (SI, imperial, or per quantity) for the terminal summary, the report, plots and
exports, the model file's ``[run] units``, and ``compare`` in the record's own units.

The conversions are pint's, with the exact NIST SP 811 factors (1 ft = 0.3048 m, 1 lb = 0.45359237 kg,
1 lbf = 4.4482216152605 N, 1 psi = 1 lbf/in^2): checked here against those factors written out.
"""

from __future__ import annotations

import contextlib
import io
import json
import re

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.cli import main
from thrustgraph.kinds.displayunits import parse_units, shown, using
from thrustgraph.base.errors import ModelError
from thrustgraph.models.modelfile import bundled_models, load_model
from thrustgraph.outputs.plots import figures
from thrustgraph.measured.records import read_record

FT, LB, LBF = 0.3048, 0.45359237, 4.4482216152605      # NIST SP 811 (2008), appendix B: exact by definition
PSI = LBF / 0.0254 ** 2


def _cli(*argv: str) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        status = main(list(argv))
    assert status == 0, out.getvalue()
    return out.getvalue()


def _line(text: str, label: str) -> list[str]:
    line = next(l for l in text.splitlines() if l.strip().startswith(label))
    return line[len(label) + 2:].split()


def test_the_one_conversion_against_the_exact_factors():
    imperial = parse_units("imperial")
    value, unit = shown(100.0, "m", imperial)
    assert unit == "ft" and value == pytest.approx(100.0 / FT, rel=1e-15)
    assert shown(10.0, "N", imperial)[0] == pytest.approx(10.0 / LBF, rel=1e-15)
    assert shown(1.0, "kg", imperial)[0] == pytest.approx(1.0 / LB, rel=1e-15)
    assert shown(5e5, "Pa", imperial)[0] == pytest.approx(5e5 / PSI, rel=1e-12)
    assert shown(5e5, "Pa", parse_units("imperial,pressure=bar")) == (5.0, "bar")
    assert shown(30.0, "m/s", parse_units("speed=mph"))[0] == pytest.approx(30.0 / (1609.344 / 3600.0), rel=1e-14)
    assert shown(0.3, "", imperial) == (0.3, "")


@pytest.mark.parametrize("text, says", [
    ("length=kg", "'kg' is not a unit of length"),
    ("lenght=ft", "did you mean 'length'?"),
    ("metric", "neither a unit system"),
    ("length=ft,imperial", "neither a unit system"),
])
def test_a_bad_choice_is_one_clear_error(text, says):
    with pytest.raises(ModelError, match=re.escape(says)):
        parse_units(text)


def test_run_prints_the_summary_in_the_units_of_choice(tmp_path):
    si = _cli("run", "bottle-rocket", "--quiet", "--json", str(tmp_path / "r.json"))
    apogee = json.loads((tmp_path / "r.json").read_text())["summary"]["apogee"]["value"]
    imperial = _cli("run", "bottle-rocket", "--quiet", "--units", "imperial")
    value, unit = _line(imperial, "apogee")[:2]
    assert unit == "ft" and float(value) == pytest.approx(apogee / FT, rel=1e-5)
    value, unit = _line(_cli("run", "bottle-rocket", "--quiet", "--units", "length=mm"), "apogee")[:2]
    assert unit == "mm" and float(value) == pytest.approx(apogee * 1e3, rel=1e-5)
    assert _line(si, "apogee")[1] == "m"


def test_the_model_file_may_prefer_a_system_and_the_option_overrides_it(tmp_path):
    m = load_model(bundled_models()["bottle-rocket"])
    m.set("run.units", "imperial")
    tg.save_model(m, tmp_path / "imp.toml")
    assert _line(_cli("run", str(tmp_path / "imp.toml"), "--quiet"), "apogee")[1] == "ft"
    assert _line(_cli("run", str(tmp_path / "imp.toml"), "--quiet", "--units", "SI"), "apogee")[1] == "m"
    m.set("run.units", "length=parsec_per_s")
    tg.save_model(m, tmp_path / "bad.toml")
    out = io.StringIO()
    with contextlib.redirect_stderr(out):
        assert main(["check", str(tmp_path / "bad.toml")]) == 2
    assert "run.units" in out.getvalue() and "Fix:" in out.getvalue()


def test_exports_in_imperial_read_back_to_the_same_si_values(tmp_path):
    _cli("export", "bottle-rocket", "--units", "imperial", "--csv", str(tmp_path / "r.csv"),
         "--json", str(tmp_path / "r.json"), "--quiet")
    r = tg.fly()
    head = next(l for l in (tmp_path / "r.csv").read_text().splitlines() if not l.startswith("#"))
    assert "altitude [ft]" in head and "thrust [lbf]" in head and "ambient_temperature [degF]" in head
    rec = read_record(tmp_path / "r.csv")
    for name, unit, values in r.columns()[1:]:
        np.testing.assert_allclose(rec.columns[name], values, rtol=1e-12, atol=1e-9, err_msg=name)
    entry = json.loads((tmp_path / "r.json").read_text())["summary"]["apogee"]
    assert entry["unit"] == "m" and entry["shown"]["unit"] == "ft"
    assert entry["shown"]["value"] == pytest.approx(entry["value"] / FT, rel=1e-14)


def test_plots_and_the_report_follow_the_choice():
    r = tg.fly()
    with using(parse_units("imperial")):
        figs = figures(r, ["thrust", "motion", "pressure"])
        from thrustgraph.outputs.report import render_report
        page = render_report(r, load_model(bundled_models()["bottle-rocket"]), plots=["thrust"], graph=False)
    assert figs["thrust"].axes[0].get_ylabel() == "thrust [lbf]"
    assert figs["motion"].axes[0].get_ylabel() == "altitude [ft]"
    assert figs["pressure"].axes[0].get_ylabel() == "pressure [psi]"
    line = figs["motion"].axes[0].get_lines()[0]
    np.testing.assert_allclose(line.get_ydata(), r.signal("altitude") / FT, rtol=1e-12)
    assert f"{r.summary['apogee'] / FT:.5g}" in page and ">ft<" in page
    assert figures(r, ["motion"])["motion"].axes[0].get_ylabel() == "altitude [m]"   # SI again outside


def test_compare_reports_in_the_record_s_own_units(stand):
    out = _cli("compare", str(stand / "held.toml"), str(stand / "stand.csv"), "--map", "load=thrust")
    assert "lbf" not in out and " N" in out
    # the same log written in lbf and ms: the metrics come back in lbf (and the impulse in lbf*s)
    rec = read_record(stand / "stand.csv")
    text = "time [ms],load [lbf]\n" + "".join(f"{t * 1e3!r},{f / LBF!r}\n" for t, f in
                                              zip(rec.time.tolist(), rec.column("load").tolist()))
    (stand / "stand-lbf.csv").write_text(text)
    out_lbf = _cli("compare", str(stand / "held.toml"), str(stand / "stand-lbf.csv"), "--map", "load=thrust")
    rms_n = float(re.search(r"RMS error\s+(\S+) N", out).group(1))
    rms_lbf = float(re.search(r"RMS error\s+(\S+) lbf", out_lbf).group(1))
    assert rms_lbf == pytest.approx(rms_n / LBF, rel=1e-3)
    assert "lbf*s" in out_lbf
