"""The array namespace physics is written against: one definition for one design (floats) and for many (arrays).

A device's physics, and the core's balance, are written once against ``ops``, an object with elementwise
functions under fixed names. Assembly passes :data:`scalar_ops` for a single flight (Python floats, the
``math`` module) and :data:`array_ops` for an ensemble (numpy arrays of shape ``(N,)``, one value per design).
The convention for code written against it:

1. Use ``ops.sqrt``, ``ops.exp``, ``ops.log``, ``ops.sin``, ``ops.cos``, ``ops.hypot``, ``ops.maximum``, ``ops.minimum``,
   ``ops.abs``, ``ops.clip``, ``ops.interp`` (linear, held at the ends), ``ops.layer`` (which interval of a
   sorted table) and ``ops.take`` for arithmetic and look-ups that Python's operators do not cover.
2. Do not branch with ``if`` on a value that may differ between designs. Choose with
   ``ops.where(cond, a, b)`` (both already computed) or ``ops.branch(cond, f_true, f_false, *args)`` (a
   regime choice: one function is called for a float; for arrays each function is called only when some
   design needs it, over every design, so both must stay finite for every design: clip the arguments of
   square roots and powers). ``ops.any`` and ``ops.all`` reduce a condition to one bool (a float condition
   is itself).
   An iteration to convergence is written as ``ops.iterate(carry, test, step, n)``, and a condition that stops
   one design's flight as ``ops.refuse(cond, ErrorClass, message)`` (raised for a float, ignored over arrays
   where the caller flags the designs); one that stops the whole batch when it holds for any design as
   ``ops.refuse_any(cond, ErrorClass, message)`` (a line with no solution). Code that reduces a state-dependent
   condition with ``ops.any`` or ``ops.all`` cannot be traced into a straight line (docs/balance.md).
3. Parameters may be floats (shared by every design) or arrays; modes reach a callable as an ``int`` when
   every design shares it, else as an integer array. Return floats or arrays; a design's numbers must not
   depend on which other designs share the arrays.
4. Never mutate what you are given; keep no state between calls (adaptive solvers try stages and reject them).

``ops.arrays`` tells which namespace is in use; code needs it only to skip work, never to compute differently.

5. A function that only takes floats (a call into a property library such as CoolProp) is applied per design
   with ``ops.each(fn, *args, outputs=k)``: for a float it is ``fn(*args)``, for arrays ``fn`` is called on each
   design's floats in turn and its results gathered into arrays (a tuple of ``k`` arrays when ``fn`` returns a
   tuple of ``k``; ``outputs=0``, the default, for one value). The numbers are those of the single flight; the
   cost stays that of one call per design.

Examples
--------
>>> import numpy as np
>>> def jet_speed(dp, rho, ops):
...     return ops.sqrt(2.0 * ops.maximum(dp, 0.0) / rho)
>>> jet_speed(4e5, 1000.0, scalar_ops)
28.284271247461902
>>> jet_speed(np.array([4e5, -1.0]), 1000.0, array_ops).tolist()
[28.284271247461902, 0.0]
>>> scalar_ops.branch(True, lambda x: x + 1.0, lambda x: x - 1.0, 1.0)
2.0
>>> array_ops.branch(np.array([True, False]), lambda x: x + 1.0, lambda x: x - 1.0, np.ones(2)).tolist()
[2.0, 0.0]
>>> [a.tolist() for a in array_ops.each(divmod, np.array([7.0, 9.0]), 4.0)]
[[1.0, 2.0], [3.0, 1.0]]
"""

from __future__ import annotations

import math
from bisect import bisect_right
from typing import Any, Callable

import numpy as np

__all__ = ["ScalarOps", "ArrayOps", "scalar_ops", "array_ops", "hold"]


class ScalarOps:
    """The namespace over Python floats (single flights)."""

    arrays = False
    sqrt = staticmethod(math.sqrt)
    exp = staticmethod(math.exp)
    log = staticmethod(math.log)
    sin = staticmethod(math.sin)
    cos = staticmethod(math.cos)
    hypot = staticmethod(math.hypot)
    abs = staticmethod(abs)
    any = staticmethod(bool)
    all = staticmethod(bool)

    @staticmethod
    def where(c: Any, a: Any, b: Any) -> Any:
        return a if c else b

    @staticmethod
    def maximum(a: float, b: float) -> float:
        return a if a > b else b

    @staticmethod
    def minimum(a: float, b: float) -> float:
        return a if a < b else b

    @staticmethod
    def clip(x: float, lo: float, hi: float) -> float:
        return lo if x < lo else (hi if x > hi else x)

    @staticmethod
    def interp(x: float, xp: Any, fp: Any) -> float:
        """Linear interpolation, held at the end values outside ``xp`` (as ``numpy.interp``)."""
        if x <= xp[0]:
            return float(fp[0])
        if x >= xp[-1]:
            return float(fp[-1])
        k = bisect_right(xp, x) - 1
        x0, f0 = xp[k], fp[k]
        return float(f0 + (fp[k + 1] - f0) * (x - x0) / (xp[k + 1] - x0))

    @staticmethod
    def layer(x: float, edges: Any) -> int:
        """Index k of the interval edges[k] <= x < edges[k + 1] (0 below the first edge)."""
        k = bisect_right(edges, x) - 1
        return k if k > 0 else 0

    @staticmethod
    def take(values: Any, k: Any) -> Any:
        """``values[k]`` (for arrays: per design)."""
        return values[k]

    @staticmethod
    def branch(cond: Any, f_true: Callable, f_false: Callable, *args: Any) -> Any:
        return f_true(*args) if cond else f_false(*args)

    @staticmethod
    def each(fn: Callable, *args: Any, outputs: int = 0, many: Callable | None = None) -> Any:
        """``fn(*args)``: a function of floats applied to one design (``outputs``, the length of the tuple it
        returns or 0 for one value, is for namespaces that cannot call it yet). ``many``, where given, is the same
        function written for arrays of designs (a table's vectorised lookup): array namespaces call it once
        instead of ``fn`` design by design."""
        return fn(*args)

    @staticmethod
    def refuse(cond: Any, error: type, message: str) -> None:
        """Raise ``error(message)`` when ``cond`` holds (one design cannot go on)."""
        if cond:
            raise error(message)

    @staticmethod
    def refuse_any(cond: Any, error: type, message: str) -> None:
        """Raise ``error(message)`` when ``cond`` holds: for one design as :meth:`refuse`; over arrays (see
        :meth:`ArrayOps.refuse_any`) when it holds for any design, which stops the whole batch."""
        if cond:
            raise error(message)

    @staticmethod
    def iterate(carry: Any, test: Callable, step: Callable, n: int) -> tuple[Any, Any]:
        """At most ``n`` steps of an iteration: ``stop, aux = test(carry)``; from the second pass on, leave when
        ``stop``; else ``carry = step(carry, aux)``. Returns ``(carry, aux)``, ``aux`` from the last test."""
        aux = None
        for it in range(n):
            stop, aux = test(carry)
            if it and stop:
                break
            carry = step(carry, aux)
        return carry, aux


class ArrayOps:
    """The namespace over numpy arrays of designs (ensembles)."""

    arrays = True
    sqrt = staticmethod(np.sqrt)
    exp = staticmethod(np.exp)
    log = staticmethod(np.log)
    sin = staticmethod(np.sin)
    cos = staticmethod(np.cos)
    hypot = staticmethod(np.hypot)
    abs = staticmethod(np.abs)
    where = staticmethod(np.where)
    maximum = staticmethod(np.maximum)
    minimum = staticmethod(np.minimum)
    clip = staticmethod(np.clip)

    @staticmethod
    def any(c: Any) -> bool:
        return bool(np.any(c))

    @staticmethod
    def all(c: Any) -> bool:
        return bool(np.all(c))

    @staticmethod
    def interp(x: Any, xp: Any, fp: Any) -> Any:
        return np.interp(x, xp, fp)

    @staticmethod
    def layer(x: Any, edges: Any) -> Any:
        return np.maximum(np.searchsorted(edges, x, side="right") - 1, 0)

    @staticmethod
    def take(values: Any, k: Any) -> Any:
        return np.asarray(values)[k]

    @staticmethod
    def branch(cond: Any, f_true: Callable, f_false: Callable, *args: Any) -> Any:
        c = np.asarray(cond)
        if c.ndim == 0:
            return f_true(*args) if bool(c) else f_false(*args)
        if c.all():
            return f_true(*args)
        if not c.any():
            return f_false(*args)
        a, b = f_true(*args), f_false(*args)
        if isinstance(a, tuple):
            return type(a)(*(np.where(c, x, y) for x, y in zip(a, b))) if hasattr(a, "_fields") else \
                tuple(np.where(c, x, y) for x, y in zip(a, b))
        return np.where(c, a, b)

    @staticmethod
    def each(fn: Callable, *args: Any, outputs: int = 0, many: Callable | None = None) -> Any:
        """``fn`` of floats applied to each design in turn (arguments broadcast to the designs' shape); a tuple
        result becomes a tuple of arrays. With ``many`` (``fn`` written for arrays), one call of it instead."""
        if many is not None:
            return many(*args)
        cols = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in args))
        rows = [fn(*xs) for xs in zip(*(c.reshape(-1).tolist() for c in cols))]
        shape = cols[0].shape if cols else ()
        if rows and isinstance(rows[0], tuple):
            return tuple(np.array(col, dtype=float).reshape(shape) for col in zip(*rows))
        return np.array(rows, dtype=float).reshape(shape)

    @staticmethod
    def refuse(cond: Any, error: type, message: str) -> None:
        """Nothing over arrays: the caller flags the designs where ``cond`` holds."""

    @staticmethod
    def refuse_any(cond: Any, error: type, message: str) -> None:
        """Raise ``error(message)`` when ``cond`` holds for any design: the whole batch stops (a condition that
        ends each of its single flights, and that the caller cannot flag design by design)."""
        if np.any(cond):
            raise error(message)

    @staticmethod
    def iterate(carry: Any, test: Callable, step: Callable, n: int) -> tuple[Any, Any]:
        """As :meth:`ScalarOps.iterate`, design by design: a design that stops keeps its carry (the others step
        on), so its iterates are those it gets alone, whatever designs share the arrays; leaves when every
        design stops.

        >>> c, _ = array_ops.iterate(np.array([1.0, 5.0]), lambda x: (x >= 4.0, None), lambda x, _: x * 2.0, 10)
        >>> c.tolist()
        [4.0, 10.0]
        """
        aux = None
        for it in range(n):
            stop, aux = test(carry)
            if not it:
                carry = step(carry, aux)
                continue
            stop = np.asarray(stop)
            if bool(np.all(stop)):
                break
            new = step(carry, aux)
            carry = hold(stop, carry, new) if bool(np.any(stop)) else new
        return carry, aux


def hold(stop: Any, old: Any, new: Any) -> Any:
    """``new``, but ``old`` for the designs where ``stop`` holds, leaf by leaf through tuples (named tuples too),
    lists and dicts; ``None`` and a leaf that did not change stay as they are.

    >>> hold(np.array([True, False]), (np.zeros(2), None), (np.ones(2), None))[0].tolist()
    [0.0, 1.0]
    """
    if new is old or new is None or old is None:
        return new
    if isinstance(new, tuple):
        vals = [hold(stop, a, b) for a, b in zip(old, new)]
        return type(new)(*vals) if hasattr(new, "_fields") else tuple(vals)
    if isinstance(new, list):
        return [hold(stop, a, b) for a, b in zip(old, new)]
    if isinstance(new, dict):
        return {k: hold(stop, old[k], v) for k, v in new.items()}
    return np.where(stop, old, new)


scalar_ops = ScalarOps()
array_ops = ArrayOps()
