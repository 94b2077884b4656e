"""A flight report: one self-contained HTML file a person can read, keep and send.

The page holds, in this order: the safety cautions, the summary with units,
the phases, the event log, the ledger audit (closure residuals and the
impulse of every balance term), the plots and the component graph (PNG
embedded as base64, so the file needs nothing beside it), the model text
exactly as flown, and what produced it (thrustgraph and plugin versions, the
libraries, the model's SHA-256). Nothing in it depends on the clock, so the
same model and versions give the same page.

Examples
--------
>>> from thrustgraph import fly, load_model, default_model_path
>>> m = load_model(default_model_path())
>>> r = fly(m)
>>> page = render_report(r, m)
>>> page.startswith("<!DOCTYPE html>"), r.provenance["model_sha256"] in page
(True, True)
"""

from __future__ import annotations

import base64
import hashlib
import html
import math
import platform
import string
from importlib import metadata
from typing import Any, Iterable

import numpy as np
from scipy.integrate import trapezoid

from ..kinds.displayunits import shown
from ..models.model import Model
from ..models.modelfile import check_model, dumps_model
from ..base.outputfiles import atomic_write
from .plotkinds import MODEL, PLOTS, plots_for
from ..flight.result import FlightResult

__all__ = ["render_report", "write_report", "ledger_audit"]

_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 0 auto; max-width: 1100px;
       padding: 1.2em 2em 3em; color: #1d1d1d; background: #ffffff; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.2em; border-bottom: 2px solid #d0d7de; padding-bottom: 0.2em; margin-top: 1.8em; }
p.lead { color: #444; white-space: pre-line; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.92em; }
th, td { border: 1px solid #d0d7de; padding: 0.25em 0.6em; text-align: left; vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; font-family: ui-monospace, monospace; }
th { background: #f3f4f6; }
.cautions { border: 2px solid #b45309; background: #fff7ed; padding: 0.4em 1.2em 0.8em; margin-top: 1.2em; }
.cautions h2 { border: none; margin-top: 0.4em; color: #92400e; }
.outcome { font-weight: 600; }
.ok { color: #166534; } .bad { color: #991b1b; }
figure { margin: 1.2em 0; } figure img { max-width: 100%; border: 1px solid #e5e7eb; }
figcaption { font-size: 0.9em; color: #444; }
pre { background: #f6f8fa; border: 1px solid #d0d7de; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }
code { font-family: ui-monospace, monospace; }
nav a { margin-right: 1em; }
"""

def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


class Html(str):
    """Text that is HTML already (a table, the style sheet): the page puts it in as it is."""


class _Escaped(dict):
    """The page's values, escaped when put in (``html.escape``) unless they are :class:`Html`: what a template
    engine's autoescaping does, with the entities this report has always written (``&quot;``, ``&#x27;``)."""

    def __getitem__(self, key: str) -> str:
        value = super().__getitem__(key)
        return value if isinstance(value, Html) else _e(value)


# The page, with a $name for each value (string.Template; a backslash ends a source line, not a line of the page), in
# place of the string appends that built it: the same bytes for every bundled model, in the same time (5.65 against
# 5.47 ms of CPU per page without figures, interleaved medians). A template engine (Jinja2) would add a dependency and
# escape quotes as &#34; and &#39; where reports have always had &quot; and &#x27; (every page's bytes would change),
# for no more than the escaping by default that _Escaped gives here.
_PAGE = string.Template("""\
<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>$title</title>
<meta name="viewport" content="width=device-width, initial-scale=1">
<style>$css</style></head><body>
<h1>$name</h1>
${lead}<p class="outcome">Outcome: <span class="$ok" id="outcome">$message</span></p>
<nav><a href="#summary">Summary</a><a href="#events">Events</a><a href="#audit">Ledger audit</a>\
<a href="#plots">Plots</a><a href="#model">Model</a><a href="#provenance">Provenance</a></nav>
<section class="cautions" id="cautions"><h2>Safety cautions</h2><ul>
${cautions}\
<li>Every number in this report is a prediction from a model, never a safe rating or a guarantee. Follow the\
 codes and licensed practice that apply where you are.</li></ul></section>
<section id="summary"><h2>Summary</h2>
$summary
</section>
<section id="phases"><h2>Phases</h2>
$phases
</section><section id="events"><h2>Event log</h2>
$events
</section>
<section id="audit"><h2>Ledger audit</h2>
<p>Closure of the balance over the whole flight: mass at launch minus final mass minus the mass expelled, and\
 the momentum of vehicle, contents and exhaust against the impulse of the external forces. Both should be\
 near rounding.</p>
$closure
<p>Impulse of every term of the balance (the integral of its force over the flight). The sum of the terms\
 equals the integral of mass times acceleration.</p>
$impulses
<p>Right-hand-side evaluations: $nfev; output samples: $samples.</p></section>
<section id="plots"><h2>Plots</h2>
${figures}</section>
<section id="model"><h2>Model</h2>\
<p>The model exactly as flown (any parameter changed for this run included)${source}. Save it as a .toml file\
 to fly it again.</p>
<pre>$text</pre></section>
<section id="provenance"><h2>Provenance</h2>
$provenance
</section></body></html>
""")


def _num(x: float, digits: int = 6) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return str(x)
    return f"{x:.{digits}g}"


def _unit_text(unit: str) -> str:
    """A unit as people write it.

    >>> _unit_text("m/s^2"), _unit_text("N*s"), _unit_text("")
    ('m/s²', 'N s', '-')
    """
    if not unit:
        return "-"
    return unit.replace("**", "^").replace("^2", "²").replace("^3", "³").replace("*", " ")


def _table(head: Iterable[str], rows: Iterable[Iterable[Any]], numeric: Iterable[int] = ()) -> Html:
    numeric = set(numeric)
    out = ["<table><thead><tr>", *(f"<th>{_e(h)}</th>" for h in head), "</tr></thead><tbody>"]
    for row in rows:
        out.append("<tr>" + "".join(f'<td class="num">{_e(c)}</td>' if k in numeric else f"<td>{_e(c)}</td>"
                                    for k, c in enumerate(row)) + "</tr>")
    out.append("</tbody></table>")
    return Html("".join(out))


def ledger_audit(result: FlightResult) -> list[dict[str, Any]]:
    """Impulse of every balance term over the flight: along the body axis and as a world vector (N s).

    The last row, ``sum of the terms``, should match ``mass x acceleration``
    (the integral of M a, signal ``inertia``): the ledger closes at every
    instant, so their difference is rounding.

    >>> from thrustgraph import fly
    >>> rows = ledger_audit(fly())
    >>> rows[-1]["term"], abs(rows[-1]["axis"] - rows[-2]["axis"]) < 1e-9 * abs(rows[-2]["axis"])
    ('mass x acceleration', True)
    """
    t = result.t
    along = result.ledger_along("axis")
    rows = []
    total_axis, total_world = 0.0, np.zeros(3)
    for (comp, term), vec in result.ledger.items():
        ax = float(trapezoid(along[(comp, term)], t))
        world = trapezoid(vec, t, axis=0)
        peak = float(np.max(np.linalg.norm(vec, axis=1))) if len(vec) else 0.0
        rows.append({"component": comp, "term": term, "axis": ax, "x": float(world[0]), "y": float(world[1]),
                     "z": float(world[2]), "peak": peak})
        total_axis += ax
        total_world = total_world + world
    rows.append({"component": "", "term": "sum of the terms", "axis": total_axis, "x": float(total_world[0]),
                 "y": float(total_world[1]), "z": float(total_world[2]), "peak": math.nan})
    if "inertia" in result.signals:
        ma = result.signals["inertia"]
        e = result.signals["axis"]
        w = trapezoid(ma, t, axis=0)
        rows.append({"component": "", "term": "mass x acceleration",
                     "axis": float(trapezoid(np.einsum("ij,ij->i", ma, e), t)), "x": float(w[0]),
                     "y": float(w[1]), "z": float(w[2]), "peak": float(np.max(np.linalg.norm(ma, axis=1)))})
    return rows


def _versions() -> list[tuple[str, str]]:
    out = [("python", platform.python_version())]
    for lib in ("numpy", "scipy", "networkx", "pluggy", "pint", "matplotlib"):
        try:
            out.append((lib, metadata.version(lib)))
        except metadata.PackageNotFoundError:
            pass
    return out


def render_report(result: FlightResult, model: Model, *, parsed: Any = None, plots: Iterable[str] | None = None,
                  graph: bool = True) -> str:
    """The HTML text of a report on one flight.

    Parameters
    ----------
    result : FlightResult
        The flight.
    model : Model
        The model it was flown from (with any changed parameters); its text
        must hash to ``result.provenance["model_sha256"]``.
    parsed : ParsedModel, optional
        The checked model, for the component graph (checked here if absent).
    plots : iterable of str, optional
        Which plots to embed (default: all that apply; see :mod:`thrustgraph.outputs.plots`).
    graph : bool
        Embed the component graph.

    Raises
    ------
    ValueError
        If the model is not the one the result was flown from.
    """
    from . import plots as tgplots

    text = dumps_model(model)
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()
    prov = result.provenance or {}
    if prov.get("model_sha256") and prov["model_sha256"] != digest:
        raise ValueError("the model given is not the one this result was flown from (its SHA-256 differs); "
                         "pass the model exactly as it was flown")
    rows = []
    for key, value in result.summary.items():
        spec = result.outcome_specs.get(key)
        if spec is None:
            unit = result.unit(key)
            v, u = shown(value, unit)          # in the units of choice in force (SI by default)
            rows.append((key, _num(v, 5), _unit_text(u), _num(value, 9), _unit_text(unit)))
        elif spec.show(result.summary):
            v, u = shown(value, spec.unit, display=spec.display)    # units of choice; under SI by magnitude
            unit = _unit_text(u) + "".join(f" ({_num(spec.shown(value, a), 4)} {_unit_text(a)})" for a in spec.also)
            rows.append((spec.label, _num(v, 5), unit, _num(value, 9), _unit_text(spec.unit)))
    a = result.audit
    m_res = math.sqrt(sum(c * c for c in a.momentum_residual))
    # Plots (rendered before anything is written).
    figs = tgplots.figures(result, plots)
    if graph:
        parsed = parsed if parsed is not None else check_model(model)
        figs.update({k.name: k.draw()(parsed) for k in plots_for(MODEL)})
    figures = []
    for name, fig in figs.items():
        data = base64.b64encode(tgplots.render(fig, "png")).decode("ascii")
        figures.append(f'<figure id="plot-{_e(name)}"><img alt="{_e(name)} plot" src="data:image/png;base64,{data}">'
                       f"<figcaption>{_e(PLOTS[name].caption)}</figcaption></figure>\n")
    prows = [("thrustgraph", prov.get("thrustgraph", "?")), ("model SHA-256", digest)]
    prows += [(f"plugin {k}", v) for k, v in prov.get("plugins", {}).items()]
    prows += _versions()
    description = model.description.strip()
    return _PAGE.substitute(_Escaped(
        title=f"thrustgraph report: {model.name}", css=Html(_CSS), name=model.name,
        lead=Html(f'<p class="lead">{_e(description)}</p>\n' if description else ""),
        ok="ok" if result.success else "bad", message=result.message,
        # cautions first: a person reads the top of a page
        cautions=Html("".join(f"<li>{_e(c)}</li>\n" for c in result.cautions)),
        summary=_table(("quantity", "value", "unit", "SI value", "SI unit"), rows, numeric=(1, 3)),
        phases=_table(("phase", "from [s]", "to [s]", "duration [s]"),
                      [(p.name, _num(p.t_start), _num(p.t_end), _num(p.duration)) for p in result.phases],
                      numeric=(1, 2, 3)),
        events=_table(("time [s]", "event", "component", "detail"),
                      [(_num(e.t, 7), e.name, e.component, e.detail) for e in result.events], numeric=(0,)),
        closure=_table(("check", "residual", "unit", "relative"),
                       [("mass", _num(a.mass_residual, 4), "kg", _num(a.mass_relative, 4)),
                        ("momentum", _num(m_res, 4), "kg m/s", _num(a.momentum_relative, 4))], numeric=(1, 3)),
        impulses=_table(("component", "term", "along the body axis [N s]", "x [N s]", "y [N s]", "z [N s]",
                         "peak force [N]"),
                        [(r["component"], r["term"], _num(r["axis"]), _num(r["x"]), _num(r["y"]), _num(r["z"]),
                          "" if math.isnan(r["peak"]) else _num(r["peak"])) for r in ledger_audit(result)],
                        numeric=(2, 3, 4, 5, 6)),
        nfev=result.nfev, samples=len(result.t), figures=Html("".join(figures)),
        source=Html(f" from <code>{_e(model.source)}</code>" if model.source else ""), text=text,
        provenance=_table(("what", "version or hash"), prows)))


def write_report(result: FlightResult, model: Model, path: Any, **options: Any) -> None:
    """Render the report and write it to ``path`` (atomically). Options as :func:`render_report`."""
    atomic_write(path, render_report(result, model, **options))
