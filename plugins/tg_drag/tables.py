"""Table look-ups for the external-force kinds: linear interpolation between rows, stated behaviour at the ends.

The interpolators are built once at assembly from a parsed
:class:`~thrustgraph.kinds.parameters.Table` (an SI array whose first column
increases strictly) and are written once for floats and arrays through ``ops.interp`` (for floats a
bisection over a tuple, no numpy call per evaluation; for arrays of designs ``numpy.interp``).

Examples
--------
>>> cd = clamped_interpolator([0.0, 0.8, 1.2], [0.40, 0.45, 0.70])
>>> [round(cd(m), 9) for m in (0.4, 1.0, -1.0, 3.0)]
[0.425, 0.575, 0.4, 0.7]
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from thrustgraph.base.xp import scalar_ops

from thrustgraph.base.errors import ModelError

__all__ = ["clamped_interpolator", "check_column"]


def clamped_interpolator(xs: Sequence[float], ys: Sequence[float], ops: Any = scalar_ops) -> Callable[[Any], Any]:
    """``f(x)``: linear interpolation in (xs, ys); below xs[0] it returns ys[0], above xs[-1] ys[-1].

    One definition for floats and arrays of designs (``ops``: :mod:`thrustgraph.base.xp`).

    Parameters
    ----------
    xs : sequence of float
        Strictly increasing abscissae (at least two).
    ys : sequence of float
        Values at ``xs``.

    >>> f = clamped_interpolator([0.0, 1.0], [2.0, 4.0])
    >>> f(-1.0), f(0.25), f(3.0)
    (2.0, 2.5, 4.0)
    """
    x = tuple(float(v) for v in xs)
    y = tuple(float(v) for v in ys)
    if ops.arrays:
        x, y = np.array(x), np.array(y)  # type: ignore[assignment]
    interp = ops.interp

    def f(v: Any) -> Any:
        return interp(v, x, y)
    return f


def check_column(table: np.ndarray, col: int, *, where: str, name: str, unit: str, low: float | None = None,
                 high: float | None = None, fix: str) -> None:
    """Refuse a table whose column ``col`` leaves [low, high]; the message names the row.

    >>> check_column(np.array([[0.0, 0.5], [1.0, -0.1]]), 1, where="components.body.drag_table", name="drag_coefficient",
    ...              unit="", low=0.0, fix="a drag coefficient is never negative")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.body.drag_table.rows[1]: drag_coefficient -0.1 is below 0. Fix: a drag coefficient is never negative.
    """
    u = f" {unit}" if unit else ""
    for i, v in enumerate(table[:, col]):
        if low is not None and v < low:
            raise ModelError(f"{where}.rows[{i}]", f"{name} {v:g}{u} is below {low:g}{u}", fix)
        if high is not None and v > high:
            raise ModelError(f"{where}.rows[{i}]", f"{name} {v:g}{u} is above {high:g}{u}", fix)
