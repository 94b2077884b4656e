"""Root finding written once for floats and arrays: the same iterates for one design and for many.

Both solvers run against the namespace ``ops`` of :mod:`thrustgraph.base.xp`. Over arrays every design iterates on
its own: a design whose iteration has converged keeps its values (``ops.where``) while the others go on, so a
design's iterates, and its root, are those it gets alone with floats (the same operations in the same order,
elementwise). The loop (``ops.iterate``) ends when every design has converged or after ``maxiter`` steps.

:func:`illinois` is the modified regula falsi (the Illinois rule: halve the value kept at an end that stays
twice), for a root inside a bracket; :func:`newton` is Newton's iteration from a start on the side where it
converges monotonically (a convex or concave function). Both are textbook methods (Dahlquist & Bjorck,
*Numerical Methods*, 1974, sections 6.2-6.3; from memory).

Examples
--------
>>> import numpy as np
>>> from thrustgraph.base.xp import array_ops, scalar_ops
>>> f = lambda x: x * x - 2.0
>>> r = illinois(f, 0.0, 2.0, f(0.0), f(2.0), scalar_ops)
>>> round(r, 14)
1.41421356237309
>>> rs = illinois(f, np.zeros(2), np.array([2.0, 3.0]), np.full(2, -2.0), np.array([2.0, 7.0]), array_ops)
>>> bool(rs[0] == r), round(float(rs[1]), 14)
(True, 1.41421356237309)
>>> round(newton(lambda x: (x * x - 2.0, 2.0 * x), 2.0, scalar_ops), 15)
1.414213562373095
"""

from __future__ import annotations

from typing import Any, Callable

__all__ = ["illinois", "newton"]


def illinois(f: Callable[[Any], Any], a: Any, b: Any, fa: Any, fb: Any, ops: Any, *, xtol: float = 0.0,
             rtol: float = 4e-16, maxiter: int = 200, done: Any = False) -> Any:
    """The root of ``f`` between ``a`` and ``b`` (``fa``, ``fb`` its values there, of opposite signs or zero).

    Stops a design when ``f`` is zero at the new point or the bracket is narrower than
    ``xtol + rtol |b|``; returns the last point evaluated (the end of the final bracket). ``done`` marks
    designs that need no root (they keep ``b``; their bracket need not hold one).

    >>> from thrustgraph.base.xp import scalar_ops
    >>> illinois(lambda x: x - 0.25, 0.0, 1.0, -0.25, 0.75, scalar_ops)
    0.25
    """
    done = done | (fb == 0.0)
    zero_a = ops.where(done, False, fa == 0.0)
    b, fb = ops.where(zero_a, a, b), ops.where(zero_a, fa, fb)
    done = done | zero_a

    def test(c):
        return c[4], None

    def step(c, _):
        a, b, fa, fb, done = c
        den = fb - fa
        x = b - fb * (b - a) / ops.where(den != 0.0, den, 1.0)
        inside = (x > ops.minimum(a, b)) & (x < ops.maximum(a, b)) & (den != 0.0)
        x = ops.where(inside, x, 0.5 * (a + b))
        fx = f(x)
        opp = (fx < 0.0) != (fb < 0.0)              # the root lies between b and x
        a_new, fa_new = ops.where(opp, b, a), ops.where(opp, fb, 0.5 * fa)
        a, fa = ops.where(done, a, a_new), ops.where(done, fa, fa_new)
        b, fb = ops.where(done, b, x), ops.where(done, fb, fx)
        return a, b, fa, fb, done | (fx == 0.0) | (ops.abs(b - a) <= xtol + rtol * ops.abs(b))

    (a, b, fa, fb, done), _ = ops.iterate((a, b, fa, fb, done), test, step, maxiter)
    return b


def newton(fdf: Callable[[Any], tuple], x0: Any, ops: Any, *, rtol: float = 4e-16, maxiter: int = 100) -> Any:
    """Newton's iteration from ``x0``; ``fdf(x)`` returns ``(f, df/dx)``. Stops a design when the step is below
    ``rtol |x|`` (or the slope is zero). Start where the iteration is monotone: for a convex increasing or
    concave decreasing function, above the root; for a convex decreasing or concave increasing one, below it.

    >>> from thrustgraph.base.xp import scalar_ops
    >>> newton(lambda x: (x - 3.0, 1.0), 0.0, scalar_ops)
    3.0
    """
    def test(c):
        return c[1], None

    def step(c, _):
        x, done = c
        f, df = fdf(x)
        flat = df == 0.0
        dx = ops.where(flat, 0.0, f / ops.where(flat, 1.0, df))
        x_new = x - dx
        return ops.where(done, x, x_new), done | (ops.abs(dx) <= rtol * ops.abs(x_new))

    (x, _done), _ = ops.iterate((x0, x0 != x0), test, step, maxiter)
    return x
