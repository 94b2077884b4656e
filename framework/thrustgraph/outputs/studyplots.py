"""Plots of studies (matplotlib, Agg; PNG or SVG): sweep maps, the impact footprint, sensitivity bars,
the optimisation trace.

Every figure is an entry of the plot registry (:mod:`thrustgraph.outputs.plotkinds`),
whose subject is the study kind it draws; this module draws them, each on an
Agg canvas with no pyplot state.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.studies.studies import sweep
>>> t = sweep(load_model(default_model_path()), ["components.bottle.fill=0.2..0.4 in 3"], outputs=["apogee"],
...           engine="serial", quiet=True)
>>> render(sweep_figure(t), "png")[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Sequence

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..balance.outcomes import OUTCOMES
from ..base.outputfiles import write_all
from .plotkinds import plots_for
from .plots import plain, render

__all__ = ["sweep_figure", "footprint_figure", "histogram_figure", "sensitivity_figure", "optimisation_figure",
           "optimisation_designs_figure", "study_figures", "study_kind_of", "render_study_plots", "save_study_plots",
           "render"]

_MAIN = "#1f5fbf"
_BAD = "#c0392b"


def _new(rows: int = 1, cols: int = 1, size: tuple[float, float] = (7.5, 4.8)):
    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    return fig, fig.subplots(rows, cols, squeeze=False)


def _label(name: str) -> str:
    """An outcome's axis label: its registry label and the SI unit the study holds its values in."""
    o = OUTCOMES.get(name)
    if o is None:
        return name.replace("_", " ")
    return f"{o.label} [{o.unit}]" if o.unit else o.label


def _plabel(p) -> str:
    return plain(f"{p.path} [{p.unit}]" if p.unit else p.path)


def sweep_figure(table: Any, output: str | None = None) -> Figure:
    """The sweep's map (see the module docstring); ``output`` picks the outcome (default: the first)."""
    output = output or table.outputs[0]
    ok = table.ok
    params = table.params
    if len(params) == 1:
        outs = [o for o in table.outputs if o not in ("impact_x", "impact_y", "launch_mass")][:4] or [output]
        if output not in outs:
            outs = [output] + outs[:3]
        fig, ax = _new(len(outs), 1, (7.5, 2.3 * len(outs) + 0.6))
        x = np.atleast_1d(params[0].shown(table.x[:, 0]))
        for k, o in enumerate(outs):
            a = ax[k, 0]
            y = table.column(o)
            a.plot(x[ok], y[ok], "o-", color=_MAIN, ms=3, lw=1.2)
            if np.any(~ok):
                lo = np.nanmin(y[ok]) if np.any(ok) else 0.0
                a.plot(x[~ok], np.full(np.sum(~ok), lo), "x", color=_BAD, label="screened")
                a.legend(loc="best")
            a.set_ylabel(_label(o))
            a.grid(True, alpha=0.35)
        ax[-1, 0].set_xlabel(_plabel(params[0]))
        fig.suptitle(plain(f"Sweep of {params[0].path}"))
        return fig
    fig, ax = _new()
    a = ax[0, 0]
    x0 = np.atleast_1d(params[0].shown(table.x[:, 0]))
    x1 = np.atleast_1d(params[1].shown(table.x[:, 1]))
    z = np.where(ok, table.column(output), np.nan)
    u0, u1 = np.unique(x0), np.unique(x1)
    grid = len(params) == 2 and len(u0) * len(u1) == len(table) and len(u0) > 1 and len(u1) > 1
    if grid:
        Z = np.full((len(u1), len(u0)), np.nan)
        i0, i1 = np.searchsorted(u0, x0), np.searchsorted(u1, x1)
        Z[i1, i0] = z
        if np.sum(np.isfinite(Z)) >= 4 and len(u0) > 2 and len(u1) > 2:
            m = a.contourf(u0, u1, Z, levels=14, cmap="viridis")
            a.contour(u0, u1, Z, levels=7, colors="k", linewidths=0.4, alpha=0.5)
        else:
            m = a.pcolormesh(u0, u1, Z, cmap="viridis", shading="nearest")
        if np.any(np.isfinite(z)):
            best = int(np.nanargmax(z))
            a.plot(x0[best], x1[best], "*", color="white", mec="k", ms=13, label=f"highest {output.replace('_', ' ')}")
            a.legend(loc="best")
    else:
        m = a.scatter(x0[ok], x1[ok], c=z[ok], cmap="viridis", s=18)
    if np.any(~ok):
        a.plot(x0[~ok], x1[~ok], "x", color=_BAD, ms=6, label="screened")
        a.legend(loc="best")
    fig.colorbar(m, ax=a, label=_label(output))
    a.set_xlabel(_plabel(params[0]))
    a.set_ylabel(_plabel(params[1]))
    a.set_title(f"{output.replace('_', ' ')} over {len(table)} designs" +
                (f" ({int(np.sum(~ok))} screened)" if np.any(~ok) else ""))
    return fig


def footprint_figure(dispersion: Any, output: str | None = None) -> Figure:
    """Impact points, mean, covariance ellipses and the launch point of a dispersion (``output`` is not used:
    the footprint is of the impact points)."""
    fig, ax = _new(size=(6.8, 6.2))
    a = ax[0, 0]
    fp = dispersion.footprint
    a.plot([0.0], [0.0], "^", color="k", ms=9, label="launch point")
    if fp is None:
        a.text(0.5, 0.5, "fewer than 3 designs reached the ground", transform=a.transAxes, ha="center")
    else:
        a.scatter(fp.points[:, 0], fp.points[:, 1], s=9, color=_MAIN, alpha=0.55, lw=0,
                  label=f"impact points ({len(fp.points)})")
        a.plot([fp.mean[0]], [fp.mean[1]], "+", color="k", ms=14, mew=2, label="mean")
        styles = ["-", "--", ":", "-."]
        for k, (lvl, e) in enumerate(sorted(fp.ellipses.items())):
            xy = e.outline()
            a.plot(xy[:, 0], xy[:, 1], styles[k % 4], color=_BAD, lw=1.4,
                   label=f"{lvl * 100:g} % ellipse ({e.semi_major:.3g} m x {e.semi_minor:.3g} m)")
    a.set_aspect("equal", adjustable="datalim")
    a.set_xlabel("downrange x [m]")
    a.set_ylabel("cross-range y [m]")
    a.grid(True, alpha=0.35)
    a.legend(loc="best", fontsize=8)
    a.set_title(f"Impact footprint: {len(dispersion.table)} samples, seed {dispersion.seed}")
    return fig


def sensitivity_figure(sens: Any, output: str | None = None, *, outputs: Sequence[str] | None = None) -> Figure:
    """Elasticities of each outcome to each parameter, one panel per outcome (of ``outputs``, default: the
    study's; ``output`` is not used: every outcome has its panel)."""
    outs = [o for o in (outputs or [o for o in sens.outputs if o not in ("impact_x", "impact_y", "launch_mass")])
            if o in sens.outputs]
    outs = [o for o in outs if np.any(np.isfinite(sens.elasticity[sens.outputs.index(o)]))][:6] or outs[:1]
    fig, ax = _new(len(outs), 1, (7.5, 1.0 + (0.45 * len(sens.params) + 0.7) * len(outs)))
    names = [p.path if p.nominal != 0.0 else f"{p.path} (per 1 {p.unit or 'unit'})" for p in sens.params]
    for k, o in enumerate(outs):
        a = ax[k, 0]
        e = sens.elasticity[sens.outputs.index(o)]
        colours = [_MAIN if v >= 0 else _BAD for v in np.nan_to_num(e)]
        a.barh(np.arange(len(e)), np.nan_to_num(e), color=colours)
        a.set_yticks(np.arange(len(e)), names, fontsize=8)
        a.invert_yaxis()                    # the first parameter on top
        a.axvline(0.0, color="k", lw=0.8)
        a.set_title(f"{OUTCOMES[o].label} = {OUTCOMES[o].text(sens.nominal[sens.outputs.index(o)], 4)}", fontsize=9)
        a.grid(True, axis="x", alpha=0.35)
    ax[-1, 0].set_xlabel("% change of the outcome per 1 % change of the parameter")
    fig.suptitle("Local sensitivities at the model's values")
    return fig


def optimisation_figure(opt: Any, output: str | None = None) -> Figure:
    """The objective of every flown design, in order, with the feasible ones and the best marked (``output`` is
    not used: the figure shows the objective)."""
    fig, ax = _new()
    a = ax[0, 0]
    t = opt.table
    y = t.column(opt.objective)
    n = np.arange(len(y))
    feas = _feasible(opt)
    a.plot(n[t.ok], y[t.ok], ".", color="#999999", label="flown")
    a.plot(n[feas], y[feas], ".", color=_MAIN, label="within the limits")
    if math.isfinite(opt.value):
        a.axhline(opt.value, color=_BAD, lw=1.0, ls="--", label=f"best {OUTCOMES[opt.objective].text(opt.value)}")
    a.set_xlabel("design flown (in order)")
    a.set_ylabel(_label(opt.objective))
    a.grid(True, alpha=0.35)
    a.legend(loc="best")
    a.set_title(f"{'Maximise' if opt.maximise else 'Minimise'} {opt.objective.replace('_', ' ')} ({opt.method})")
    return fig


def _feasible(opt: Any) -> np.ndarray:
    t = opt.table
    feas = t.ok.copy()
    for lim in opt.limits:
        v = t.column(lim.output)
        m = np.array([lim.margin(float(q)) if math.isfinite(q) else -math.inf for q in v])
        feas &= m >= -1e-6 * max(abs(lim.si()), 1.0)
    return feas


def optimisation_designs_figure(opt: Any, output: str | None = None) -> Figure:
    """The flown designs on the parameter plane (or against the one parameter), coloured by the objective;
    designs outside the limits as grey crosses, the best design as a star (``output`` is not used)."""
    t = opt.table
    feas = _feasible(opt)
    y = t.column(opt.objective)
    fig, ax = _new()
    a = ax[0, 0]
    p0 = opt.params[0]
    x0 = np.atleast_1d(p0.shown(t.x[:, 0]))
    b0 = float(p0.shown(opt.x[0]))
    if len(opt.params) == 1:
        order = np.argsort(x0)
        a.plot(x0[order][feas[order]], y[order][feas[order]], "o", color=_MAIN, ms=4, label="within the limits")
        a.plot(x0[~feas & t.ok], y[~feas & t.ok], "x", color="#888888", label="outside the limits")
        a.plot([b0], [opt.value], "*", color=_BAD, ms=14, mec="k", label="best")
        a.set_xlabel(_plabel(p0))
        a.set_ylabel(_label(opt.objective))
    else:
        p1 = opt.params[1]
        x1 = np.atleast_1d(p1.shown(t.x[:, 1]))
        m = a.scatter(x0[feas], x1[feas], c=y[feas], cmap="viridis", s=22, label="within the limits")
        a.plot(x0[~feas], x1[~feas], "x", color="#888888", ms=6, label="outside the limits or screened")
        a.plot([b0], [float(p1.shown(opt.x[1]))], "*", color=_BAD, ms=16, mec="k", label="best")
        fig.colorbar(m, ax=a, label=_label(opt.objective))
        a.set_xlabel(_plabel(p0))
        a.set_ylabel(_plabel(p1))
    a.grid(True, alpha=0.35)
    a.legend(loc="best", fontsize=8)
    lims = "; ".join(str(lim) for lim in opt.limits) or "no limits"
    a.set_title(f"{len(t)} designs flown ({lims})")
    return fig


def study_kind_of(result: Any) -> str:
    """The study kind a study result comes from: its design table records it."""
    return getattr(result, "table", result).kind


def study_figures(result: Any, output: str | None = None) -> dict[str, Figure]:
    """The figures registered for the kind of a study result (:mod:`thrustgraph.outputs.plotkinds`), by name."""
    return {k.name: k.draw()(result, output) for k in plots_for(study_kind_of(result))}


def render_study_plots(result: Any, directory: str | Path, *, fmt: str = "png", output: str | None = None
                       ) -> list[tuple[Path, bytes]]:
    """``(directory/NAME.fmt, image bytes)`` of every figure that fits a study result, rendered in memory."""
    d = Path(directory)
    return [(d / f"{name}.{fmt}", render(fig, fmt)) for name, fig in study_figures(result, output).items()]


def save_study_plots(result: Any, directory: str | Path, *, fmt: str = "png", output: str | None = None) -> list[Path]:
    """Draw the figures that fit a study result and write them to ``directory`` (created if missing, its parent
    must exist), all or none; return the paths."""
    blobs = render_study_plots(result, directory, fmt=fmt, output=output)
    write_all(blobs, directories=[directory])
    return [p for p, _ in blobs]


def histogram_figure(dispersion: Any, output: str | None = None) -> Figure:
    """A histogram of one outcome of a dispersion (default: the range, else the first), 5 %, median and 95 %
    marked."""
    output = output or ("range" if "range" in dispersion.table.outputs else dispersion.table.outputs[0])
    fig, ax = _new(size=(7.0, 4.2))
    a = ax[0, 0]
    v = dispersion.table.column(output)[dispersion.table.ok]
    v = v[np.isfinite(v)]
    if len(v):
        a.hist(v, bins=min(40, max(8, int(math.sqrt(len(v))))), color=_MAIN, alpha=0.8)
        s = dispersion.stats[output]
        for key, ls in (("p05", ":"), ("p50", "-"), ("p95", ":")):
            a.axvline(s[key], color=_BAD, ls=ls, lw=1.2)
    a.set_xlabel(_label(output))
    a.set_ylabel("designs")
    a.grid(True, alpha=0.35)
    a.set_title(f"{output.replace('_', ' ')}: 5 %, median and 95 % marked")
    return fig
