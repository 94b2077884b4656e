"""Plots and the HTML report: produced, non-empty, readable, holding the right numbers; the report in a browser."""

from __future__ import annotations

import base64
import hashlib
import html
import io
import re
import shutil
import subprocess
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

from conftest import HANG_GUARD, model_from_toml
from thrustgraph import fly, integrate, load_model
from thrustgraph.models.modelfile import bundled_models, check_model, default_model_path, dumps_model
from thrustgraph.outputs.plotkinds import FLIGHT, names
from thrustgraph.outputs.plots import figure, figures, graph_figure, powered_window, render, save_plots
from thrustgraph.outputs.report import ledger_audit, render_report, write_report

PNG = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def bottle():
    m = load_model(default_model_path())
    return m, fly(m)


JET = """
    flow_paths = ["motor -> outside"]
    [launch]
    mount = "free"
    elevation = "90 deg"
    [run]
    end_time = "5 s"
    stop_at_apogee = true
    [environment.medium]
    kind = "vacuum"
    [components.body]
    kind = "airframe"
    dry_mass = "1 kg"
    [components.motor]
    kind = "prescribed-jet"
    propellant_mass = "0.2 kg"
    mass_flow = "0.1 kg/s"
    exhaust_velocity = "600 m/s"
    [components.outside]
    kind = "surroundings"
"""


def non_white_fraction(png: bytes) -> float:
    img = mpimg.imread(io.BytesIO(png), format="png")[..., :3]
    return float(np.mean(np.any(img < 0.95, axis=-1)))


def test_every_plot_renders_to_png_and_svg_and_is_not_blank(bottle):
    _, r = bottle
    figs = figures(r)
    assert list(figs) == list(names(FLIGHT))  # a water rocket has a vessel: every plot applies
    for name, fig in figs.items():
        png = render(fig, "png")
        assert png.startswith(PNG) and len(png) > 20_000, name
        assert non_white_fraction(png) > 0.05, name
        svg = render(fig, "svg")
        root = ET.fromstring(svg)
        assert root.tag.endswith("svg"), name


def test_plots_that_do_not_apply_are_left_out():
    r = integrate(model_from_toml(JET, name="jet"))
    figs = figures(r)
    assert "pressure" not in figs and figure(r, "pressure") is None
    assert {"thrust", "mass", "motion", "trajectory", "ledger"} <= set(figs)


def test_unknown_plot_name_lists_the_valid_ones(bottle):
    with pytest.raises(ValueError, match="choose from thrust, mass"):
        figure(bottle[1], "thrusts")


def test_rendering_is_repeatable(bottle):
    fig = figure(bottle[1], "ledger")
    assert render(fig, "png") == render(fig, "png")
    assert render(fig, "svg") == render(fig, "svg")
    assert b"<dc:date>" not in render(fig, "svg")  # no date stamped into the file


def test_ledger_plot_stacks_every_acting_term_and_their_sum(bottle):
    _, r = bottle
    fig = figure(r, "ledger")
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    for term in ("neck: momentum flux", "neck: pressure thrust", "vehicle: weight", "airframe: drag"):
        assert term in labels
    assert "sum = mass × acceleration" in labels
    # The black line of each panel is the sum of the terms along the body axis, which is M a along the axis.
    along = r.ledger_along("axis")
    total = np.sum(list(along.values()), axis=0)
    ma = np.einsum("ij,ij->i", r.signals["inertia"], r.signals["axis"])
    assert np.allclose(total, ma, rtol=1e-9, atol=1e-9 * np.max(np.abs(ma)))
    ax = fig.axes[0]
    line = [ln for ln in ax.get_lines() if ln.get_color() == "black" and len(ln.get_xdata()) == len(r.t)][0]
    assert np.allclose(line.get_ydata(), total)
    # One stacked band per term and sign (positive above zero, negative below).
    acting = [k for k, v in along.items() if np.max(np.abs(v)) > 1e-9 * np.max(np.abs(total))]
    assert len(ax.collections) >= 2 * len(acting)


def test_world_ledger_projection_closes_on_each_axis(bottle):
    _, r = bottle
    for k, axis in enumerate("xyz"):
        total = np.sum(list(r.ledger_along(axis).values()), axis=0)
        assert np.allclose(total, r.signals["inertia"][:, k], atol=1e-9 * np.max(np.abs(r.signals["inertia"])))
    with pytest.raises(ValueError):
        r.ledger_along("up")


def test_powered_window_covers_the_burn(bottle):
    _, r = bottle
    w = powered_window(r)
    burn_end = max(p.t_end for p in r.phases if p.name in ("liquid thrust", "gas thrust"))
    assert burn_end < w < r.t[-1]


def test_save_plots_writes_every_file(bottle, tmp_path):
    paths = save_plots(bottle[1], tmp_path / "pics", formats=("png", "svg"), names=["thrust", "mass"])
    assert sorted(p.name for p in paths) == ["mass.png", "mass.svg", "thrust.png", "thrust.svg"]
    assert all(p.stat().st_size > 10_000 for p in paths)


def test_graph_figure_draws_every_component(bottle):
    m, _ = bottle
    fig = graph_figure(check_model(m))
    texts = " ".join(t.get_text() for t in fig.axes[0].texts)
    for name, table in m.components.items():
        assert name in texts and table["kind"] in texts
    assert non_white_fraction(render(fig, "png")) > 0.02


# ---------------------------------------------------------------------------
# the report
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def page(bottle):
    m, r = bottle
    return render_report(r, m)


def test_report_holds_summary_events_audit_cautions_model_and_versions(bottle, page):
    m, r = bottle
    for section in ("cautions", "summary", "phases", "events", "audit", "plots", "model", "provenance"):
        assert f'id="{section}"' in page
    assert f"{r.summary['apogee']:.5g}" in page and ">m<" in page
    assert f"{r.summary['peak_thrust']:.5g}" in page
    for e in r.events:
        assert html.escape(e.name) in page
    for c in r.cautions:
        assert html.escape(c) in page
    assert r.provenance["model_sha256"] in page
    for name, version in r.provenance["plugins"].items():
        assert f"plugin {name}" in page and html.escape(version) in page
    # The model text in the page is the model as flown: it hashes to the recorded hash.
    text = html.unescape(re.search(r'<section id="model">.*?<pre>(.*?)</pre>', page, re.S).group(1))
    assert hashlib.sha256(text.encode()).hexdigest() == r.provenance["model_sha256"]
    assert text == dumps_model(m)


def test_report_images_are_embedded_pngs(bottle, page):
    images = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(images) == len(figures(bottle[1])) + 1  # every plot and the component graph
    for data in images:
        png = base64.b64decode(data)
        assert png.startswith(PNG) and non_white_fraction(png) > 0.02
    assert "http://" not in page.replace("http://www.w3.org", "") and "https://" not in page  # self-contained


def test_ledger_audit_sums_to_mass_times_acceleration(bottle, page):
    rows = ledger_audit(bottle[1])
    total, ma = rows[-2], rows[-1]
    assert total["term"] == "sum of the terms" and ma["term"] == "mass x acceleration"
    for key in ("axis", "x", "y", "z"):
        assert total[key] == pytest.approx(ma[key], rel=1e-9, abs=1e-9)
    assert "momentum flux" in page and "sum of the terms" in page


def test_report_refuses_a_model_it_was_not_flown_from(bottle):
    m, r = bottle
    other = m.copy().set("components.bottle.fill", 0.2)
    with pytest.raises(ValueError, match="not the one this result was flown from"):
        render_report(r, other)


def test_report_is_the_same_page_twice(bottle, page, tmp_path):
    m, r = bottle
    write_report(r, m, tmp_path / "again.html")
    assert (tmp_path / "again.html").read_text() == page


# ---------------------------------------------------------------------------
# the report in a real browser
# ---------------------------------------------------------------------------

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (run .ci/install-browser); "
                                             "the report's browser rendering is not checked")
def test_report_renders_in_headless_chromium(bottle, page, tmp_path):
    _, r = bottle
    f = tmp_path / "report.html"
    f.write_text(page)
    shot = tmp_path / "shot.png"

    def chromium(*args: str) -> subprocess.CompletedProcess:
        profile = tempfile.mkdtemp(dir=tmp_path)
        return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args, f.as_uri()],
                              capture_output=True, text=True, timeout=HANG_GUARD)

    proc = chromium(f"--screenshot={shot}", "--window-size=1200,9000")
    assert shot.exists(), proc.stderr[-2000:]
    img = mpimg.imread(shot)[..., :3]
    assert img.shape[0] == 9000 and img.shape[1] == 1200
    assert float(np.mean(np.any(img < 0.9, axis=-1))) > 0.03  # not blank
    # The plots' own blue (used for the main curve of every plot, nowhere in the page style) is on screen:
    # the embedded images were decoded and drawn.
    blue = np.array([0x1F, 0x5F, 0xBF]) / 255.0
    assert int(np.sum(np.all(np.abs(img - blue) < 0.04, axis=-1))) > 2000
    # The caution box's orange border is there too (the page's style was applied).
    border = np.array([0xB4, 0x53, 0x09]) / 255.0
    assert int(np.sum(np.all(np.abs(img - border) < 0.04, axis=-1))) > 500

    dom = chromium("--dump-dom").stdout
    assert dom.count('<img alt="') == len(figures(r)) + 1
    assert f"{r.summary['apogee']:.5g}" in dom and r.provenance["model_sha256"] in dom
    assert "ground impact" in dom


@pytest.mark.parametrize("stem", sorted(bundled_models()))
def test_every_bundled_model_checks_draws_and_plots(stem):
    from thrustgraph.commands.check import format_check

    parsed = check_model(load_model(bundled_models()[stem]))
    text = format_check(parsed)
    assert "The model is valid" in text and "->" in text and "total" in text
    assert render(graph_figure(parsed), "png", dpi=40).startswith(PNG)
    r = integrate(parsed)
    figs = figures(r)
    assert {"thrust", "mass", "motion", "trajectory", "ledger"} <= set(figs)
    assert ("pressure" in figs) == any(k.endswith(".pressure") for k in r.signals)
    assert non_white_fraction(render(figs["ledger"], "png", dpi=40)) > 0.05
