"""Dispersion (Monte Carlo): seeded samples of spread parameters, outcome statistics and the impact footprint.

Samples are drawn in the parent process, in SI, from one
``numpy.random.Generator`` (PCG64) seeded with ``seed``, parameter after
parameter in the order given, before any design is flown: the same seed
gives the same designs on every engine and with any chunk size, hence the
same table.

The footprint is the set of impact points (x downrange, y across) of the
designs that flew to ground impact. Its mean and sample covariance
(``ddof=1``) give ellipses of constant Mahalanobis distance k: for a
bivariate normal distribution the probability inside is ``1 - exp(-k^2/2)``
(the chi-square distribution with two degrees of freedom), so the ellipse
holding a fraction q has ``k = sqrt(-2 ln(1 - q))``; its semi-axes are k
times the square roots of the covariance's eigenvalues (T. W. Anderson, *An
Introduction to Multivariate Statistical Analysis*, 3rd ed., Wiley 2003,
sec. 3.3 — from memory; the closed form is checked against
``scipy.stats.chi2`` in the tests). The ellipses describe the sample; they
are a normal approximation, not a guarantee of where a vehicle lands.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> d = disperse(load_model(default_model_path()), ["launch.elevation=normal(sd=2 deg)"], samples=8, seed=3,
...              engine="serial", quiet=True)
>>> d.footprint.points.shape, round(d.footprint.ellipses[0.95].k, 4)
((8, 2), 2.4477)
"""

from __future__ import annotations

import io
import math
import os
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from ..base.errors import ModelError
from ..base.frames import statistics_frame
from ..base.limits import MAX_DESIGNS, check_count
from ..models.model import Model
from ..balance.outcomes import OUTCOMES
from ..base.outputfiles import atomic_write
from .studies import DEFAULT_OUTPUTS, DesignTable, _fmt, _prepare, evaluate
from .studyspec import LEVELS, Spread

__all__ = ["disperse", "Dispersion", "Footprint", "Ellipse", "statistics", "ellipse", "sample", "LEVELS"]

_STATS = ("count", "mean", "sd", "min", "p05", "p50", "p95", "max")


@dataclass(frozen=True)
class Ellipse:
    """An ellipse of the footprint: centre (m), semi-axes (m, major first), angle of the major axis from +x
    toward +y (rad), its Mahalanobis radius ``k`` and the probability ``level`` it holds under normality."""

    centre: tuple[float, float]
    semi_major: float
    semi_minor: float
    angle: float
    k: float
    level: float

    def outline(self, n: int = 181) -> np.ndarray:
        """Points on the ellipse, shape (n, 2)."""
        s = np.linspace(0.0, 2.0 * math.pi, n)
        ca, sa = math.cos(self.angle), math.sin(self.angle)
        u, v = self.semi_major * np.cos(s), self.semi_minor * np.sin(s)
        return np.column_stack([self.centre[0] + u * ca - v * sa, self.centre[1] + u * sa + v * ca])


def ellipse(mean: Sequence[float], cov: np.ndarray, level: float) -> Ellipse:
    """The ellipse holding a fraction ``level`` of a bivariate normal distribution.

    >>> e = ellipse([0.0, 0.0], np.diag([4.0, 1.0]), 0.95)
    >>> round(e.semi_major, 4), round(e.semi_minor, 4), round(e.angle, 6)
    (4.8955, 2.4477, 0.0)
    """
    if not 0.0 < level < 1.0:
        raise ModelError("footprint level", f"must lie between 0 and 1, got {level!r}", "use e.g. 0.95")
    k = math.sqrt(-2.0 * math.log(1.0 - level))
    w, V = np.linalg.eigh(np.asarray(cov, dtype=float))
    w = np.maximum(w, 0.0)
    major = V[:, 1]
    angle = math.atan2(major[1], major[0])
    if angle > math.pi / 2:
        angle -= math.pi
    elif angle <= -math.pi / 2:
        angle += math.pi
    return Ellipse(centre=(float(mean[0]), float(mean[1])), semi_major=k * math.sqrt(w[1]),
                   semi_minor=k * math.sqrt(w[0]), angle=angle + 0.0, k=k, level=level)


@dataclass(frozen=True)
class Footprint:
    """Impact points (m, relative to the launch point), their mean and covariance, and the ellipses."""

    points: np.ndarray
    mean: np.ndarray
    covariance: np.ndarray
    ellipses: dict[float, Ellipse]


def statistics(values: np.ndarray) -> dict[str, float]:
    """count, mean, sd (ddof=1), min, 5th/50th/95th percentiles and max of the finite values.

    >>> s = statistics(np.array([1.0, 2.0, 3.0, np.nan]))
    >>> s["count"], s["mean"], s["p50"]
    (3, 2.0, 2.0)
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if len(v) == 0:
        return {"count": 0, **{k: math.nan for k in _STATS[1:]}}
    return {"count": int(len(v)), "mean": float(np.mean(v)), "sd": float(np.std(v, ddof=1)) if len(v) > 1 else
            math.nan, "min": float(np.min(v)), "p05": float(np.percentile(v, 5)), "p50": float(np.percentile(v, 50)),
            "p95": float(np.percentile(v, 95)), "max": float(np.max(v))}


def sample(spreads: Sequence[Spread], params: Sequence[Any], n: int, seed: int) -> np.ndarray:
    """Draw ``n`` designs (SI), one column per spread, from one generator seeded with ``seed``."""
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool) or seed < 0:
        raise ModelError("--seed", f"must be a whole number of at least 0, got {seed!r}", "use e.g. --seed 1")
    rng = np.random.default_rng(int(seed))
    return np.column_stack([sp.sample(p, rng, n, where=f"spread {sp.path}") for sp, p in zip(spreads, params)]) \
        if spreads else np.zeros((n, 0))


@dataclass
class Dispersion:
    """A dispersion: its designs and outcomes, statistics per outcome and the footprint."""

    table: DesignTable
    spreads: tuple[Spread, ...]
    seed: int
    stats: dict[str, dict[str, float]]
    footprint: Footprint | None

    def report(self) -> str:
        c = self.table.counts
        lines = [f"Dispersion: {len(self.table)} samples (seed {self.seed}), {c['ok']} flew, {c['screened']} "
                 f"screened{', interrupted' if self.table.interrupted else ''}", "",
                 f"  {'outcome':<22s} {'mean':>12s} {'sd':>11s} {'5 %':>11s} {'median':>11s} {'95 %':>11s}"]
        for o, s in self.stats.items():
            lines.append(f"  {OUTCOMES[o].header:<22s} {s['mean']:12.5g} {s['sd']:11.4g} "
                         f"{s['p05']:11.5g} {s['p50']:11.5g} {s['p95']:11.5g}")
        fp = self.footprint
        if fp is not None:
            lines += ["", f"Impact footprint ({len(fp.points)} points): mean x {fp.mean[0]:.4g} m, y {fp.mean[1]:.4g} m"]
            for lvl, e in fp.ellipses.items():
                lines.append(f"  {lvl * 100:g} % ellipse: semi-axes {e.semi_major:.4g} m x {e.semi_minor:.4g} m, "
                             f"major axis at {math.degrees(e.angle):.1f} deg from +x")
        return "\n".join(lines)

    def to_pandas(self):
        """The statistics per outcome as a pandas DataFrame (optional dependency ``pandas``; the designs are
        ``self.table.to_pandas()``): :func:`thrustgraph.base.frames.statistics_frame`."""
        return statistics_frame(self, {o: OUTCOMES[o].unit for o in self.stats})

    def stats_csv(self) -> str:
        """Statistics per outcome (and the footprint) as CSV text."""
        buf = io.StringIO()
        buf.write("# thrustgraph dispersion statistics\n")
        for k, v in self.table.info.items():
            buf.write(f"# {k}: {v}\n")
        buf.write("outcome,unit," + ",".join(_STATS) + "\n")
        for o, s in self.stats.items():
            buf.write(",".join([o, OUTCOMES[o].unit or "1"] + [_fmt(float(s[k])) for k in _STATS]) + "\n")
        fp = self.footprint
        if fp is not None:
            buf.write("# footprint: mean x [m], mean y [m], var x [m^2], cov xy [m^2], var y [m^2]\n")
            buf.write("# " + ",".join(_fmt(v) for v in (fp.mean[0], fp.mean[1], fp.covariance[0, 0],
                                                        fp.covariance[0, 1], fp.covariance[1, 1])) + "\n")
        return buf.getvalue()

    def write_stats_csv(self, path: str | os.PathLike[str]) -> None:

        atomic_write(path, self.stats_csv())


def footprint_of(table: DesignTable, levels: Sequence[float] = LEVELS) -> Footprint | None:
    """The impact footprint of the rows that flew to ground impact (None with fewer than 3)."""
    if "impact_x" not in table.outputs or "impact_speed" not in table.outputs:
        return None
    ok = table.ok & np.isfinite(table.column("impact_speed"))
    pts = np.column_stack([table.column("impact_x")[ok], table.column("impact_y")[ok]])
    if len(pts) < 3:
        return None
    mean = pts.mean(axis=0)
    cov = np.cov(pts, rowvar=False, ddof=1)
    return Footprint(points=pts, mean=mean, covariance=cov, ellipses={lv: ellipse(mean, cov, lv) for lv in levels})


def disperse(model: Model | str | None, spreads: Sequence[Spread | str], *, samples: int = 1000, seed: int = 0,
             outputs: Sequence[str] | None = None, levels: Sequence[float] = LEVELS, **run: Any) -> Dispersion:
    """A seeded Monte Carlo dispersion of the model over the spread parameters.

    ``spreads`` are e.g. ``"environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)"``,
    ``"launch.elevation=normal(sd=1 deg)"``, ``"components.neck.discharge_coefficient=uniform(0.95, 0.99)"``,
    ``"components.airframe.dry_mass=normal(sd=3 g)"``. Samples outside a parameter's bounds are screened
    out (and counted). ``run`` takes the options of :func:`thrustgraph.studies.studies.evaluate`.
    """
    model, parsed = _prepare(model)
    spreads = tuple(s if isinstance(s, Spread) else Spread.parse(str(s)) for s in spreads)
    if not spreads:
        raise ModelError("dispersion", "spreads no parameter", 'add --spread "launch.elevation=normal(sd=1 deg)"')
    if not isinstance(samples, int) or isinstance(samples, bool) or samples < 1:
        raise ModelError("--samples", f"must be a whole number of at least 1, got {samples!r}", "use e.g. 1000")
    check_count(samples, MAX_DESIGNS, where="--samples", what="samples")
    params = [s.resolve(parsed, where=f"spread {s.path}") for s in spreads]
    x = sample(spreads, params, samples, seed)
    outs = list(outputs if outputs is not None else DEFAULT_OUTPUTS)
    for need in ("impact_x", "impact_y", "impact_speed"):
        if need not in outs:
            outs.append(need)
    info = {"seed": seed, "spreads": "; ".join(f"{s.path} {s.distribution}"
                                               f"({', '.join(f'{k}={v}' for k, v in s.args)})" for s in spreads)}
    table = evaluate(model, params, x, outs, parsed=parsed, kind="dispersion", info=info, **run)
    stats = {o: statistics(np.where(table.ok, table.column(o), np.nan)) for o in table.outputs}
    return Dispersion(table=table, spreads=spreads, seed=seed, stats=stats,
                      footprint=footprint_of(table, levels))
