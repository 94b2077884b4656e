"""Plots of an overlay (matplotlib, Agg; PNG or SVG): the same signal of every run on one set of axes.

Every figure is an entry of the plot registry (:mod:`thrustgraph.outputs.plotkinds`)
whose subject is ``overlay``; this module draws them from an
:class:`~thrustgraph.measured.overlay.Overlay` (read through its ``runs``, so
this module imports nothing of the measured-data layer). Predictions are lines (the first, the
reference, the heaviest), measured records dots. A figure none of whose
signals any run has is left out (``None``), as is a panel whose curves are
all zero (the altitude of a boat).

Examples
--------
>>> from thrustgraph import fly
>>> from thrustgraph.measured.overlay import Overlay, run_of_result
>>> ov = Overlay((run_of_result(fly(), "a"), run_of_result(fly(**{"components.bottle.fill": 0.4}), "b")))
>>> sorted(overlay_figures(ov))
['overlay-mass', 'overlay-motion', 'overlay-pressure', 'overlay-thrust']
>>> render(overlay_figures(ov)["overlay-thrust"], "png")[:4] == b"\\x89PNG"
True
"""

from __future__ import annotations

from typing import Any, Iterable, Sequence

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..kinds.displayunits import axis_scale, convert_array
from .plotkinds import OVERLAY, PLOTS, plots_for
from .plots import _RC, plain, render

__all__ = ["OVERLAY", "thrust_overlay", "mass_overlay", "motion_overlay", "pressure_overlay", "overlay_figures",
           "render"]

_COLOURS = ["#1f5fbf", "#e07b00", "#2a9d3a", "#c0392b", "#7d4cb0", "#8c5a3c", "#d45d9e", "#6b6b6b", "#b5a300",
            "#1aa3b8"]
#: The unit an axis of these SI units is shown in under SI (a vessel pressure in bar, as the flight's plots).
_DISPLAY = {"Pa": "bar"}


def _new(rows: int, size: tuple[float, float]):
    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig, fig.subplots(rows, 1, squeeze=False, sharex=True)


def _draw(ax, ov: Any, signal: str, *, style_of: Any = None) -> bool:
    """Every run's ``signal`` on ``ax``; False when no run has it."""
    having = [run for run in ov.runs if signal in run.signals]
    if not having:
        return False
    unit = having[0].units.get(signal, "")    # one unit for the axis, picked for every run's values together
    f, name = axis_scale(unit, np.concatenate([np.ravel(r.signals[signal]) for r in having]),
                         display=_DISPLAY.get(unit))
    drawn = False
    for k, run in enumerate(ov.runs):
        if signal not in run.signals:
            continue
        colour = _COLOURS[k % len(_COLOURS)]
        label = plain(run.label if style_of is None else f"{run.label}: {style_of}")
        y = convert_array(run.signals[signal], run.units.get(signal, ""), unit) * f   # a record's own SI name
        if run.predicted:
            ax.plot(run.t, y, color=colour, lw=2.0 if k == 0 else 1.3, label=label, zorder=3 if k == 0 else 2)
        else:
            ax.plot(run.t, y, ".", ms=2.5, color=colour, label=label, zorder=4)
        ax.set_ylabel(plain(f"{signal.replace('_', ' ')} [{name or '1'}]"))
        drawn = True
    return drawn


def _finish(fig: Figure, axes: Sequence[Any], title: str) -> Figure:
    for a in axes:
        a.grid(True, lw=0.3)
    axes[0].legend(loc="best")
    axes[-1].set_xlabel("time [s]")
    fig.suptitle(plain(title), fontsize=11)
    return fig


def _signals_figure(ov: Any, signals: Sequence[str], title: str) -> Figure | None:
    """One panel per signal some run has, all-zero panels left out."""
    keep = [s for s in signals if any(s in r.signals and np.any(np.nan_to_num(r.signals[s]) != 0.0)
                                      for r in ov.runs)]
    if not keep:
        return None
    fig, ax = _new(len(keep), (8.0, 2.6 * len(keep) + 1.2))
    for s, a in zip(keep, ax[:, 0]):
        _draw(a, ov, s)
    return _finish(fig, list(ax[:, 0]), title)


def thrust_overlay(ov: Any) -> Figure | None:
    """The thrust along the body axis of every run."""
    return _signals_figure(ov, ["thrust"], "Thrust, runs overlaid")


def mass_overlay(ov: Any) -> Figure | None:
    """The vehicle mass of every run."""
    return _signals_figure(ov, ["mass"], "Mass, runs overlaid")


def motion_overlay(ov: Any) -> Figure | None:
    """Altitude, horizontal distance and speed of every run."""
    return _signals_figure(ov, ["altitude", "range", "speed"], "Motion, runs overlaid")


def pressure_overlay(ov: Any) -> Figure | None:
    """The absolute pressure of every vessel of every run (a prediction, never a rating)."""
    names: list[str] = []
    for run in ov.runs:
        names += [s for s in run.signals if s.endswith(".pressure") and s not in names]
    if not names:
        return None
    fig, ax = _new(len(names), (8.0, 2.6 * len(names) + 1.2))
    for s, a in zip(names, ax[:, 0]):
        _draw(a, ov, s)
    return _finish(fig, list(ax[:, 0]), "Vessel pressure (absolute), runs overlaid: a prediction, not a rating")


def overlay_figures(ov: Any, names: Iterable[str] | None = None) -> dict[str, Figure]:
    """The overlay's figures that apply, by registry name, in registry order (or the order of ``names``)."""
    kinds = plots_for(OVERLAY) if names is None else [PLOTS[n] for n in names]
    out = {}
    with matplotlib.rc_context(_RC):
        for kind in kinds:
            fig = kind.draw()(ov)
            if fig is not None:
                out[kind.name] = fig
    return out

