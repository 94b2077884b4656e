"""Plots of a flight and of a model's component graph (matplotlib, Agg; PNG and SVG).

Every figure is a :class:`matplotlib.figure.Figure` drawn on an Agg canvas: no
window, no pyplot state, so plots can be made in scripts, tests and servers.
Flight phases are shaded in the background and events marked with dashed
lines, so a curve can be read against what the vehicle was doing.

The figures of a flight and the component graph are entries of the plot
registry, :mod:`thrustgraph.outputs.plotkinds`, which names, describes and orders
them; this module draws them. Figures that do not apply (``pressure`` for a
model without vessels) are left out.

Examples
--------
>>> from thrustgraph import fly
>>> r = fly()
>>> sorted(figures(r))
['ledger', 'ledger-world', 'mass', 'motion', 'pressure', 'thrust', 'trajectory']
>>> render(figure(r, "thrust"), "png")[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
"""

from __future__ import annotations

import io
import re
from pathlib import Path
from typing import Any, Iterable

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import FancyBboxPatch, Patch

from ..kinds.displayunits import axis_scale, current, shown
from ..base.outputfiles import write_all
from .plotkinds import FLIGHT, IMAGE_FORMATS, PLOTS
from .plotkinds import names as plot_names
from ..flight.result import FlightResult

__all__ = ["figure", "figures", "render", "save_plots", "graph_figure", "summary_title", "powered_window", "plain",
           "thrust_figure", "mass_figure", "pressure_figure", "motion_figure", "trajectory_figure", "ledger_figure",
           "ledger_world_figure"]

# Thrust and the main curve of each figure: a blue used nowhere else in the report's page style.
MAIN = "#1f5fbf"
_TERM_COLOURS = ["#1f5fbf", "#e07b00", "#2a9d3a", "#c0392b", "#7d4cb0", "#8c5a3c", "#d45d9e", "#6b6b6b",
                 "#b5a300", "#1aa3b8"]
_PHASE_COLOURS = ["#fff1d6", "#e3f0ff", "#eaf6e3", "#f4e6f7", "#f2f2f2", "#fde8e8"]
_NOT_POWERED = ("coast", "descent", "on guide", "spent")
_RC = {"font.size": 9, "axes.titlesize": 10, "axes.labelsize": 9, "legend.fontsize": 8,
       "svg.hashsalt": "thrustgraph", "svg.fonttype": "path", "axes.grid": True, "grid.alpha": 0.35,
       # Names come from the model file ("rocket $\\frac{1}{$"): show them as written, never as math text.
       "text.parse_math": False}


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------

def plain(text: object) -> str:
    r"""Text from a user (a model or file name, a record's column) shown as it is, never read as math.

    matplotlib reads text between two ``$`` signs as mathematical notation and
    raises on what it cannot parse; an escaped ``\$`` is shown as a dollar sign.

    >>> plain(r"rocket $\frac{1}{$")
    'rocket \\$\\frac{1}{\\$'
    >>> fig = Figure(); _ = FigureCanvasAgg(fig); _ = fig.suptitle(plain(r"rocket $\frac{1}{$"))
    >>> render(fig, "png")[:4] == b"\x89PNG"
    True
    """
    return str(text).replace("$", "\\$")


def _new(rows: int = 1, cols: int = 1, size: tuple[float, float] = (8.0, 4.5), **kw: Any):
    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(rows, cols, squeeze=False, **kw)
    return fig, axes


def powered_window(result: FlightResult) -> float | None:
    """End of the powered flight, s, when it is a small part of the run (else None, meaning: show everything).

    >>> from thrustgraph import fly
    >>> round(powered_window(fly()), 3)
    0.147
    """
    ends = [p.t_end for p in result.phases if p.name not in _NOT_POWERED]
    total = float(result.t[-1] - result.t[0])
    if not ends or total <= 0:
        return None
    end = max(ends)
    if end >= 0.5 * total:
        return None
    return float(min(total, 1.3 * end))


def _phases(ax, result: FlightResult, t_max: float | None = None, label: bool = False) -> None:
    names: list[str] = []
    for ph in result.phases:
        if ph.name not in names:
            names.append(ph.name)
    for ph in result.phases:
        if t_max is not None and ph.t_start > t_max:
            continue
        colour = _PHASE_COLOURS[names.index(ph.name) % len(_PHASE_COLOURS)]
        ax.axvspan(ph.t_start, ph.t_end, color=colour, zorder=0, lw=0)
    for e in result.events:
        if e.name in ("start", "end time") or (t_max is not None and e.t > t_max):
            continue
        ax.axvline(e.t, color="#999999", lw=0.8, ls="--", zorder=1)
    if label:
        handles = [Patch(color=_PHASE_COLOURS[k % len(_PHASE_COLOURS)], label=plain(n)) for k, n in enumerate(names)]
        ax.figure.legend(handles=handles, loc="outside lower center", ncol=min(6, len(handles)), frameon=False,
                         title="phases (shaded); dashed lines: events", title_fontsize=8)


def _limit(ax, result: FlightResult, t_max: float | None, t_min: float | None = None) -> None:
    ax.set_xlim(float(result.t[0]) if t_min is None else t_min,
                t_max if t_max is not None else float(result.t[-1]))


def _scaled(unit: str, values: np.ndarray) -> tuple[str, float]:
    """The display unit of a curve in the units of choice in force (:func:`~thrustgraph.kinds.displayunits.axis_scale`;
    under SI chosen by its largest magnitude, :func:`~thrustgraph.kinds.outcomespec.display_unit`), and the factor from SI
    to it."""
    f, shown = axis_scale(unit, values)       # the units of choice in force; under SI by magnitude
    return shown, f


def _mass_unit(result: FlightResult) -> tuple[str, float]:
    return _scaled("kg", result.signals["mass"])


def _scale(si: str, *values: Any, display: str | None = None) -> tuple[float, str]:
    """(factor, unit) of an axis of SI values in the units of choice in force (:func:`axis_scale`)."""
    arrays = [np.ravel(np.asarray(v, dtype=float)) for v in values]
    return axis_scale(si, np.concatenate(arrays) if arrays else np.empty(0), display=display)


def _title(fig, result: FlightResult, what: str) -> None:
    name = (result.provenance or {}).get("model_name", "")
    fig.suptitle(plain(f"{what}: {name}" if name else what), fontsize=11)


def summary_title(r: FlightResult, keys: Iterable[str]) -> str:
    """Summary entries as a figure title, labels and units from the outcome registry.

    >>> from thrustgraph import fly
    >>> summary_title(fly(), ("apogee", "peak_acceleration"))
    'apogee 54.36 m, peak acceleration 1179 m/s^2 (120.2 g0)'
    """
    return ", ".join(f"{r.outcome_specs[k].label} {_text(r.outcome_specs[k], r.summary[k])}"
                     for k in keys if k in r.summary and k in r.outcome_specs)


def _text(spec: Any, value: float) -> str:
    """An outcome's value in the units of choice in force, and in its ``also`` units (``g0``)."""
    v, unit = shown(value, spec.unit, display=spec.display)
    extra = ", ".join(f"{spec.shown(value, u):.4g} {u}" for u in spec.also)
    return f"{v:.4g}" + (f" {unit}" if unit else "") + (f" ({extra})" if extra else "")


# ---------------------------------------------------------------------------
# the figures
# ---------------------------------------------------------------------------

def thrust_figure(r: FlightResult) -> Figure:
    w = powered_window(r)
    fig, ax = _new(2, 1, (8.0, 5.5), sharex=True)
    a, b = ax[0, 0], ax[1, 0]
    sources = [k[:-len(".thrust")] for k in r.signals if k.endswith(".thrust")]
    gross, net = r.signals["thrust"], r.signals.get("net_thrust", r.signals["thrust"])
    differs = bool(np.any(np.abs(net - gross) > 1e-9 * max(float(np.max(np.abs(gross))), 1e-30)))
    unit, f = _scaled("N", np.concatenate([gross, net]))
    a.plot(r.t, gross * f, color=MAIN, lw=1.8, zorder=3,
           label="gross thrust along the body axis" if differs else "thrust along the body axis (net = gross)")
    if differs:      # fluid enters (an inlet's ram drag, a hose's inflow): the net thrust is what moves the vehicle
        a.plot(r.t, net * f, color="black", lw=1.6, ls="--", zorder=3,
               label="net thrust (gross + momentum of the entering fluid)")
    if len(sources) > 1:
        for k, n in enumerate(sources):
            a.plot(r.t, r.signals[f"{n}.thrust"] * f, lw=1.0, color=_TERM_COLOURS[(k + 1) % 10], label=plain(n))
    a.set_ylabel(f"thrust [{unit}]")
    a.legend(loc="upper right")
    title = "\n".join(t for t in (summary_title(r, ("peak_thrust", "peak_net_thrust")),
                                   summary_title(r, ("total_impulse", "net_impulse"))) if t)
    if title:
        a.set_title(title)
    flows = [n for n in sources if f"{n}.mass_flow" in r.signals]
    peak_flow = max((float(np.max(r.signals[f"{n}.mass_flow"])) for n in flows), default=0.0)
    unit, f = ("kg/s", 1.0) if peak_flow >= 1.0 else ("g/s", 1e3)
    if not current().is_si:
        f, unit = _scale("kg/s", [peak_flow])
    for n in flows:
        b.plot(r.t, r.signals[f"{n}.mass_flow"] * f, lw=1.3, label=plain(n))
    b.set_ylabel(f"mass flow [{unit}]")
    b.set_xlabel("time [s]" + (" (powered flight)" if w else ""))
    if sources:
        b.legend(loc="upper right")
    for x in (a, b):
        _phases(x, r, w)
        _limit(x, r, w)
    _phases(b, r, w, label=True)
    _title(fig, r, "Thrust")
    return fig


def mass_figure(r: FlightResult) -> Figure:
    w = powered_window(r)
    unit, f = _mass_unit(r)
    fig, ax = _new(1, 1, (8.0, 4.5))
    a = ax[0, 0]
    a.plot(r.t, r.signals["mass"] * f, color=MAIN, lw=1.8, label="vehicle", zorder=3)
    k = 1
    for key in r.signals:
        if key.endswith(("liquid_mass", "gas_mass", "propellant_mass")) and "." in key:
            a.plot(r.t, r.signals[key] * f, lw=1.1, color=_TERM_COLOURS[k % 10], label=plain(key.replace("_", " ")))
            k += 1
    a.set_ylabel(f"mass [{unit}]")
    a.set_xlabel("time [s]" + (" (powered flight; constant afterwards)" if w else ""))
    a.legend(loc="upper right")
    a.set_title(f"launch {r.signals['mass'][0] * f:.4g} {unit}, final {r.signals['mass'][-1] * f:.4g} {unit}")
    _phases(a, r, w, label=True)
    _limit(a, r, w)
    _title(fig, r, "Mass")
    return fig


def pressure_figure(r: FlightResult) -> Figure | None:
    keys = [k for k in r.signals if k.endswith(".pressure")]
    if not keys:
        return None
    w = powered_window(r)
    fig, ax = _new(1, 1, (8.0, 4.5))
    a = ax[0, 0]
    pf, pu = _scale("Pa", *(r.signals[k] for k in keys), display="bar")
    for k, key in enumerate(keys):
        a.plot(r.t, r.signals[key] * pf, lw=1.8, color=_TERM_COLOURS[k % 10], label=plain(f"{key[:-9]} (absolute)"),
               zorder=3)
    if "ambient_pressure" in r.signals:
        a.plot(r.t, r.signals["ambient_pressure"] * pf, color="#444444", lw=1.0, ls=":", label="ambient")
    a.set_ylabel(f"pressure [{pu}]")
    a.set_xlabel("time [s]" + (" (powered flight)" if w else ""))
    a.legend(loc="upper right")
    a.set_title("vessel pressure (a prediction, not a rating of any vessel)")
    _phases(a, r, w, label=True)
    _limit(a, r, w)
    _title(fig, r, "Vessel pressure")
    return fig


#: What the motion plot shows for each class of vehicle (thrustgraph.kinds.vehicle): the first row's signal, its label
#: and the outcomes in the title.
_MOTION = {
    "flying": ("altitude", "altitude", ("apogee", "max_speed", "peak_acceleration")),
    "hovering": ("altitude", "height", ("mean_height", "height_oscillation", "max_height")),
    "track": ("distance", "distance along the track", ("distance", "top_speed", "time_to_90_percent_speed")),
    "weightless": ("distance", "distance from the start", ("range", "max_speed", "peak_acceleration")),
}


def motion_figure(r: FlightResult) -> Figure | None:
    """Position, speed and the acceleration along the path (signed: negative while slowing), fitted to the
    vehicle: altitude for a flying vehicle, height with the vertical speed and acceleration for a hover rig,
    distance for a track or a platform free of gravity; none for a vehicle held on a stand."""
    kind = r.vehicle.kind if r.vehicle is not None else "flying"
    if kind not in _MOTION:
        return None
    first, what, keys = _MOTION[kind]
    s = r.signals
    pos = s["position"] - s["position"][0]
    if first == "distance":
        values = np.linalg.norm(pos, axis=1)
        if kind == "track" and r.vehicle is not None:
            u = s["axis"][0]
            values = pos @ u                 # along the track (negative if it slides back)
    else:
        values = s["altitude"]
    unit, f = _scaled("m", values)
    fig, ax = _new(3, 1, (8.0, 7.5), sharex=True)
    if kind == "hovering":      # it bobs up and down: vertical speed and acceleration, signed
        speed, speed_word = s["velocity"][:, 2], "vertical speed"
        accel, accel_word = s["acceleration"][:, 2], "vertical acceleration"
    else:
        speed, speed_word = s["speed"], "speed"
        accel, accel_word = s.get("path_acceleration", s["acceleration_magnitude"]), "acceleration along the path"
    su, sf = _scaled("m/s", speed)
    au, af = _scaled("m/s^2", accel)
    rows = [(values * f, f"{what} [{unit}]"), (speed * sf, f"{speed_word} [{su}]"),
            (accel * af, f"{accel_word} [{au.replace('^2', '²')}]")]
    for (curve, label), a in zip(rows, ax[:, 0]):
        a.plot(r.t, curve, color=MAIN, lw=1.6, zorder=3)
        a.set_ylabel(label)
        _phases(a, r)
        _limit(a, r, None)
    ax[2, 0].axhline(0.0, color="black", lw=0.6, zorder=2)
    ax[0, 0].set_title(summary_title(r, keys))
    ax[2, 0].set_xlabel("time [s]")
    _phases(ax[2, 0], r, label=True)
    _title(fig, r, f"{what[0].upper()}{what[1:]}, speed, acceleration")
    return fig


def trajectory_figure(r: FlightResult) -> Figure:
    fig, ax = _new(1, 1, (8.0, 5.0))
    a = ax[0, 0]
    lf, lu = _scale("m", r.signals["range"], r.signals["altitude"])
    x, z = r.signals["range"] * lf, r.signals["altitude"] * lf
    a.plot(x, z, color=MAIN, lw=1.8, zorder=3)
    marks = {"guide exit": "^", "apogee": "o", "ground impact": "v", "liquid exhausted": "s", "gas exhausted": "D",
             "burnout": "s"}
    for e in r.events:
        if e.name in marks:
            i = min(int(np.searchsorted(r.t, e.t)), len(r.t) - 1)
            a.plot([x[i]], [z[i]], marks[e.name], ms=6, zorder=4, ls="", markeredgecolor="#333333",
                   label=plain(f"{e.name}: t = {e.t:.4g} s, {x[i]:.3g} {lu}, {z[i]:.3g} {lu} up"))
    if a.get_legend_handles_labels()[0]:
        a.legend(loc="upper left", title="events (time, distance, altitude)", title_fontsize=8)
    a.set_xlabel(f"horizontal distance from the launch point [{lu}]")
    a.set_ylabel(f"altitude [{lu}]")
    if float(np.ptp(x)) > 0 and float(np.ptp(z)) > 0:
        a.set_aspect("equal", adjustable="datalim")
    _title(fig, r, "Trajectory")
    return fig


def _terms(values: dict[tuple[str, str], np.ndarray]) -> list[tuple[str, np.ndarray]]:
    big = max((float(np.max(np.abs(v))) for v in values.values()), default=0.0)
    return [(f"{c}: {t}", v) for (c, t), v in values.items() if big > 0 and float(np.max(np.abs(v))) > 1e-9 * big]


def _stack(a, r: FlightResult, terms: list[tuple[str, np.ndarray]], colours: dict[str, str],
           window: tuple[float | None, float | None]) -> None:
    t_min, t_max = window
    t = r.t
    if terms:
        pos = [np.clip(v, 0.0, None) for _, v in terms]
        neg = [np.clip(v, None, 0.0) for _, v in terms]
        cs = [colours[n] for n, _ in terms]
        a.stackplot(t, *pos, colors=cs, alpha=0.85, lw=0, zorder=2)
        a.stackplot(t, *neg, colors=cs, alpha=0.85, lw=0, zorder=2)
        net = np.sum([v for _, v in terms], axis=0)
        a.plot(t, net, color="black", lw=1.0, zorder=3)
    a.axhline(0.0, color="black", lw=0.6, zorder=3)
    _phases(a, r, t_max)
    _limit(a, r, t_max, t_min)
    if t_max is not None or t_min is not None:  # scale the axis to what is visible
        sel = (t <= (t_max if t_max is not None else t[-1])) & (t >= (t_min if t_min is not None else t[0]))
        lo = sum(float(np.min(np.clip(v[sel], None, 0.0))) for _, v in terms) if terms else -1.0
        hi = sum(float(np.max(np.clip(v[sel], 0.0, None))) for _, v in terms) if terms else 1.0
        pad = 0.05 * (hi - lo or 1.0)
        a.set_ylim(lo - pad, hi + pad)


def _ledger(r: FlightResult, directions: tuple[str, ...]) -> Figure:
    w = powered_window(r)
    if len(directions) > 1:  # leave out world axes no term acts along (e.g. y in a flight in the x-z plane)
        directions = tuple(d for d in directions if _terms(r.ledger_along(d))) or directions[-1:]
    cols = 2 if w else 1
    rows = len(directions)
    fig, ax = _new(rows, cols, (11.0 if cols == 2 else 8.0, 3.2 * rows + 1.6))
    names = [f"{c}: {t}" for c, t in r.ledger]
    colours = {n: _TERM_COLOURS[k % len(_TERM_COLOURS)] for k, n in enumerate(names)}
    shown: list[str] = []
    label = {"axis": "along the body axis", "x": "along x (downrange)", "y": "along y", "z": "along z (up)"}
    ff, fu = _scale("N", *r.ledger.values())
    for i, d in enumerate(directions):
        terms = [(n, v * ff) for n, v in _terms(r.ledger_along(d))]
        shown += [n for n, _ in terms if n not in shown]
        windows = [(None, w), (w, None)] if w else [(None, None)]
        for j, window in enumerate(windows):
            a = ax[i, j]
            _stack(a, r, terms, colours, window)
            a.set_ylabel(f"force {label[d]} [{fu}]")
            if i == 0:
                a.set_title({0: "powered flight", 1: "after the powered flight"}[j] if w else "whole flight")
            if i == rows - 1:
                a.set_xlabel("time [s]")
    handles = [Patch(color=colours[n], label=plain(n)) for n in shown]
    handles.append(matplotlib.lines.Line2D([], [], color="black", lw=1.0, label="sum = mass × acceleration"))
    fig.legend(handles=handles, loc="outside right upper", frameon=False, title="balance terms")
    _phases(ax[rows - 1, 0], r, w, label=True)
    what = "Balance ledger along the body axis" if directions == ("axis",) else "Balance ledger, world axes"
    _title(fig, r, what)
    return fig


def ledger_figure(r: FlightResult) -> Figure:
    """The balance-ledger terms along the body axis, stacked."""
    return _ledger(r, ("axis",))


def ledger_world_figure(r: FlightResult) -> Figure:
    """The balance-ledger terms along the world axes x, y and z, stacked."""
    return _ledger(r, ("x", "y", "z"))


def figure(result: FlightResult, name: str) -> Figure | None:
    """One figure of a flight by its registry name (:mod:`thrustgraph.outputs.plotkinds`), or None when it does not
    apply to this flight.

    Raises
    ------
    ValueError
        For an unknown name (the message lists the valid ones).
    """
    kind = PLOTS.get(name)
    if kind is None or kind.subject != FLIGHT:
        raise ValueError(f"no plot named {name!r}; choose from {', '.join(plot_names(FLIGHT))}")
    with matplotlib.rc_context(_RC):
        return kind.draw()(result)


def figures(result: FlightResult, names: Iterable[str] | None = None) -> dict[str, Figure]:
    """The figures that apply to this flight, by name, in registry order (or the order of ``names``)."""
    out = {}
    for n in (plot_names(FLIGHT) if names is None else names):
        fig = figure(result, n)
        if fig is not None:
            out[n] = fig
    return out


def render(fig: Figure, fmt: str = "png", *, dpi: int = 110) -> bytes:
    """The figure as PNG or SVG bytes; the same figure always gives the same bytes (no date stamped).

    >>> fig = Figure(); _ = FigureCanvasAgg(fig); _ = fig.subplots().plot([0, 1], [0, 1])
    >>> render(fig, "svg") == render(fig, "svg")
    True
    """
    if fmt not in IMAGE_FORMATS:
        raise ValueError(f"format must be one of {', '.join(IMAGE_FORMATS)}, got {fmt!r}")
    buf = io.BytesIO()
    meta = {"Date": None} if fmt == "svg" else {"Software": None}
    # PNG: zlib level 1 instead of PIL's 6 encodes the flight's seven images in about a sixth of the time for
    # files about 9 % larger (measured on the bottle rocket's plots; benchmarks/run_times.py)
    extra = {"pil_kwargs": {"compress_level": 1}} if fmt == "png" else {}
    with matplotlib.rc_context(_RC):
        engine = fig.get_layout_engine()
        if engine is not None and engine.__class__.__name__ != "PlaceHolderLayoutEngine":
            # lay the figure out once and keep that layout: the layout engine run on every save drifts in the
            # last digits of some coordinates (seen with constrained layout on the bottle's ledger plot), which
            # would make two renders of one figure differ. The engine is run by itself (what a draw runs first),
            # not through a whole draw of the figure, which would rasterise it once more for nothing.
            engine.execute(fig)
            fig.set_layout_engine("none")
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=meta, **extra)
    data = buf.getvalue()
    if fmt == "svg":
        data = _stable_svg_ids(data)
    return data


_CLIP_ID = re.compile(rb'(?<=id=")p[0-9a-f]{10}(?=")')


def _stable_svg_ids(svg: bytes) -> bytes:
    """Number the SVG clip-path ids in order: matplotlib derives some from object addresses."""
    names: dict[bytes, bytes] = {}
    for m in _CLIP_ID.finditer(svg):
        names.setdefault(m.group(0), b"clip%d" % len(names))
    if not names:
        return svg
    pattern = re.compile(rb"(?<=[\"#])(" + b"|".join(re.escape(k) for k in names) + rb')(?=[")])')
    return pattern.sub(lambda m: names[m.group(1)], svg)


def save_plots(result: FlightResult, directory: str | Path, *, formats: Iterable[str] = ("png",),
               names: Iterable[str] | None = None) -> list[Path]:
    """Render the figures and write them to ``directory`` as NAME.png / NAME.svg; return the paths.

    Everything is rendered before the first file is written, and the files are
    written all or none (:func:`thrustgraph.base.outputfiles.write_all`); the
    folder is created if it is missing and its parent exists.
    """

    formats = tuple(formats)
    for f in formats:
        if f not in IMAGE_FORMATS:
            raise ValueError(f"format must be one of {', '.join(IMAGE_FORMATS)}, got {f!r}")
    blobs = [(Path(directory) / f"{n}.{f}", render(fig, f)) for n, fig in figures(result, names).items()
             for f in formats]
    write_all(blobs, directories=[directory])
    return [p for p, _ in blobs]


# ---------------------------------------------------------------------------
# the component graph
# ---------------------------------------------------------------------------

_ROLE_STYLE = {  # marker, colour, description
    "volume": ("s", "#7fb3e6", "vessel (holds state)"),
    "flow": ("v", "#f0b35a", "flow element (nozzle, orifice)"),
    "jet": ("D", "#e58a8a", "prescribed jet"),
    "boundary": ("o", "#d9d9d9", "surroundings"),
    "body": ("h", "#9fd39a", "body (mass, drag)"),
    "source": ("p", "#c9b3e6", "source (inlet, hose feed)"),
}


def graph_figure(parsed: Any) -> Figure:
    """Draw a checked model's component graph: the vehicle (control volume) and its flow paths.

    ``parsed`` is a :class:`~thrustgraph.models.model.ParsedModel` (from
    :func:`thrustgraph.models.modelfile.check_model`). Flow paths run left to right,
    upstream to downstream; the dashed box is the control surface, and every
    arrow that crosses it carries momentum into the balance.

    >>> from thrustgraph.models.modelfile import check_model, load_model, default_model_path
    >>> fig = graph_figure(check_model(load_model(default_model_path())))
    >>> len(render(fig, "png")) > 1000
    True
    """
    import networkx as nx

    g = parsed.graph
    role = {n: parsed.kinds[n].role for n in g.nodes}
    flow_nodes = [n for n in g.nodes if role[n] != "body"]
    sub = g.subgraph(flow_nodes)
    layer: dict[str, int] = {}
    for k, gen in enumerate(nx.topological_generations(sub)):
        for n in gen:
            layer[n] = k
    # The surroundings go last where flow ends in them, first where flow only starts from them (an inlet).
    boundary = [n for n in flow_nodes if role[n] == "boundary"]
    last = max([layer[n] for n in flow_nodes if role[n] != "boundary"], default=0) + 1
    for n in boundary:
        if sub.in_degree(n) > 0 or sub.out_degree(n) == 0:
            layer[n] = last
    pos: dict[str, tuple[float, float]] = {}
    columns: dict[int, list[str]] = {}
    order = list(parsed.model.components)
    for n in sorted(flow_nodes, key=order.index):
        columns.setdefault(layer[n], []).append(n)
    for x, names in columns.items():  # each column centred on the same line
        for k, n in enumerate(names):
            pos[n] = (float(x), -(k - (len(names) - 1) / 2.0) * 1.6)
    # Bodies sit inside the vehicle, below its flow paths, in the columns left of the surroundings.
    bodies = [n for n in sorted(g.nodes, key=order.index) if role[n] == "body"]
    low = min([p[1] for p in pos.values()], default=0.0) - 1.6
    per_row = max(1, last)
    for k, n in enumerate(bodies):
        pos[n] = (float(k % per_row), low - 1.6 * (k // per_row))

    width = max(6.0, 2.4 * (last + 1))
    rows = max((len(v) for v in columns.values()), default=1) + -(-len(bodies) // per_row)
    height = max(3.5, 1.4 * rows + 1.5)
    with matplotlib.rc_context(_RC):
        fig, ax = _new(1, 1, (width, height))
        a = ax[0, 0]
        a.grid(False)
        a.set_axis_off()
        inside = [n for n in g.nodes if role[n] != "boundary"]
        if inside:
            xs = [pos[n][0] for n in inside]
            ys = [pos[n][1] for n in inside]
            box = FancyBboxPatch((min(xs) - 0.45, min(ys) - 0.75), max(xs) - min(xs) + 1.05,
                                 max(ys) - min(ys) + 1.25, boxstyle="round,pad=0.05", fill=False, ls="--",
                                 ec="#555555", lw=1.0)
            a.add_patch(box)
            a.text(min(xs) - 0.4, max(ys) + 0.42, "vehicle (control volume)", fontsize=8, color="#555555")
        nx.draw_networkx_edges(g, pos, ax=a, arrows=True, arrowstyle="-|>", arrowsize=16, width=1.4,
                               edge_color="#333333", node_size=1400)
        styles = {**_ROLE_STYLE, **{r: ("p", "#c9b3e6", r) for r in set(role.values()) - set(_ROLE_STYLE)}}
        for r, (marker, colour, _) in styles.items():
            nodes = [n for n in g.nodes if role[n] == r]
            if nodes:
                nx.draw_networkx_nodes(g, pos, nodelist=nodes, ax=a, node_shape=marker, node_color=colour,
                                       node_size=1400, edgecolors="#333333", linewidths=1.0)
        for n, (x, y) in pos.items():
            a.text(x, y - 0.48, plain(f"{n}\n{parsed.kinds[n].kind}"), ha="center", va="top", fontsize=8)
        handles = [matplotlib.lines.Line2D([], [], marker=m, ls="", color=c, markeredgecolor="#333333", ms=9,
                                           label=d) for r, (m, c, d) in styles.items() if r in role.values()]
        a.legend(handles=handles, loc="upper right", frameon=False, fontsize=8)
        xs = [p[0] for p in pos.values()] or [0.0]
        ys = [p[1] for p in pos.values()] or [0.0]
        a.set_xlim(min(xs) - 0.8, max(xs) + 1.6)
        a.set_ylim(min(ys) - 1.2, max(ys) + 0.8)
        fig.suptitle(plain(f"Component graph: {parsed.model.name}"), fontsize=11)
    return fig
