"""Small helpers for 3-vectors held as tuples of floats (fast in the right-hand side).

>>> [round(c, 12) + 0.0 for c in body_frame((0.0, 0.0, 1.0), 0.0)[1]]
[0.0, 1.0, 0.0]
"""

from __future__ import annotations

import math
from typing import Any, Sequence

from ..base.xp import scalar_ops

__all__ = ["unit_from_angles", "body_frame", "to_world", "solve_rank_one", "frame_of"]

Vec = tuple[float, float, float]


def unit_from_angles(elevation: float, azimuth: float) -> Vec:
    """Unit vector at ``elevation`` above the horizon, ``azimuth`` from +x toward +y (radians).

    >>> tuple(round(c, 12) for c in unit_from_angles(math.pi / 2, 0.0))
    (0.0, 0.0, 1.0)
    """
    ce = math.cos(elevation)
    v = (ce * math.cos(azimuth), ce * math.sin(azimuth), math.sin(elevation))
    # cos(pi/2) is 6e-17, not 0: keep a vertical guide exactly vertical
    return tuple(0.0 if abs(c) < 1e-15 else c for c in v)  # type: ignore[return-value]


def body_frame(e: Vec, azimuth: float) -> tuple[Vec, Vec, Vec]:
    """Body axes (x along ``e``, y horizontal to the left, z completing a right-handed set).

    When ``e`` is vertical the horizontal y axis is taken across the launch azimuth. (:func:`frame_of` over
    floats.)
    """
    return frame_of(e, azimuth, scalar_ops)


def frame_of(e: Vec, azimuth, ops) -> tuple[Vec, Vec, Vec]:
    """:func:`body_frame` over floats or arrays of designs (``ops`` is the namespace: see :mod:`thrustgraph.base.xp`).

    >>> from thrustgraph.base.xp import scalar_ops
    >>> frame_of((0.0, 0.0, 1.0), 0.0, scalar_ops) == body_frame((0.0, 0.0, 1.0), 0.0)
    True
    """
    ex, ey, ez = e
    n = ops.hypot(ex, ey)
    tilted = n > 1e-12
    d = ops.where(tilted, n, 1.0)
    yb = (ops.where(tilted, -ey / d, -ops.sin(azimuth)), ops.where(tilted, ex / d, ops.cos(azimuth)), 0.0 * n)
    zb = (ey * yb[2] - ez * yb[1], ez * yb[0] - ex * yb[2], ex * yb[1] - ey * yb[0])
    return e, yb, zb


def to_world(d: Vec, frame: tuple[Vec, Vec, Vec]) -> Vec:
    """Rotate a body-frame vector ``d`` into the world frame."""
    xb, yb, zb = frame
    return (d[0] * xb[0] + d[1] * yb[0] + d[2] * zb[0],
            d[0] * xb[1] + d[1] * yb[1] + d[2] * zb[1],
            d[0] * xb[2] + d[1] * yb[2] + d[2] * zb[2])


def solve_rank_one(m: Any, pairs: list, b: Sequence[Any], ops: Any) -> tuple[tuple[Any, Any, Any], Any]:
    """Solve ``(m I + sum_k u_k v_k^T) x = b`` by repeated Sherman-Morrison updates, over floats or arrays.

    Returns ``(x, singular)``: ``singular`` is True (per design) where an update's denominator vanishes; the
    solution there is not meaningful (the caller decides: a single flight stops, an ensemble screens the design).

    >>> from thrustgraph.base.xp import scalar_ops
    >>> solve_rank_one(2.0, [((1.0, 0.0, 0.0), (1.0, 0.0, 0.0))], (3.0, 2.0, 0.0), scalar_ops)
    ((1.0, 1.0, 0.0), False)
    """
    x = (b[0] / m, b[1] / m, b[2] / m)
    ws = [(u[0] / m, u[1] / m, u[2] / m) for u, _ in pairs]
    singular: Any = False
    for k, (_, v) in enumerate(pairs):
        wk = ws[k]
        den = 1.0 + v[0] * wk[0] + v[1] * wk[1] + v[2] * wk[2]
        bad = ops.abs(den) < 1e-12
        singular = singular | bad
        den = ops.where(bad, 1.0, den)
        cx = (v[0] * x[0] + v[1] * x[1] + v[2] * x[2]) / den
        x = (x[0] - cx * wk[0], x[1] - cx * wk[1], x[2] - cx * wk[2])
        for j in range(k + 1, len(ws)):
            wj = ws[j]
            cj = (v[0] * wj[0] + v[1] * wj[1] + v[2] * wj[2]) / den
            ws[j] = (wj[0] - cj * wk[0], wj[1] - cj * wk[1], wj[2] - cj * wk[2])
    return x, singular
