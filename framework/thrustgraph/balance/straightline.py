"""Straight-line Python for one phase of one vehicle, derived from the one balance by tracing it.

A single flight spends most of its time in the right-hand side. The general evaluator
(:class:`thrustgraph.balance.balance.Balance` over :data:`thrustgraph.base.xp.scalar_ops`) walks the plan on every call:
loops over lines and bodies, checks of modes and constraints, tuples built and taken apart. Within one phase
(modes and kinematic constraint fixed) all of that is the same on every call; only the arithmetic on the
state changes. This module runs the *same* balance once per phase with :data:`trace_ops`, a namespace whose
values are symbols: every operation on the state is written down as one line of Python, every choice that
does not depend on the state is taken once, at trace time. The lines are compiled into one function.

Nothing here knows the balance or any device: what is traced is exactly the code a single flight runs
(``Balance._solve`` and the plugins' callables, rebuilt by :func:`thrustgraph.balance.plan.build_plan` with
``trace_ops``). The traced function performs the same floating-point operations in the same order as the
general evaluator, so both give the same numbers (checked for every bundled model and phase in
``tests/test_straightline.py``). Code that does something the tracer cannot follow (``float()`` of a
state-dependent value, ``math`` functions on it, a Python ``if`` on it, a numpy call) raises
:class:`TraceError` and the flight keeps the general evaluator.

The namespace adds one structured primitive to those of :mod:`thrustgraph.base.xp`, used by the balance's
Newton iterations: ``ops.iterate(carry, test, step, n)``; and ``ops.refuse(cond, error)``, which raises
``error`` for one design (floats) when ``cond`` holds and does nothing over arrays, where the caller flags
the designs instead.

Examples
--------
>>> def f(x, ops):
...     return ops.branch(x > 1.0, lambda v: ops.sqrt(v), lambda v: 2.0 * v, x)
>>> fn = compile_function(lambda t, s: [f(s[0], trace_ops)], 1)
>>> fn(0.0, [4.0]), fn(0.0, [0.25])
([2.0], [0.5])
"""

from __future__ import annotations

import math
import threading
from typing import Any, Callable, Sequence

import numpy as np

from ..base.xp import ArrayOps, ScalarOps, hold

__all__ = ["TraceError", "Sym", "trace_ops", "array_trace_ops", "compile_function"]


class TraceError(Exception):
    """The traced code did something a straight-line function cannot reproduce (the caller falls back)."""


# --------------------------------------------------------------------------------------------------------------
# The recorder: blocks of statements, names, constants.

class _Block:
    __slots__ = ("stmts", "cse", "parent")

    def __init__(self, parent: "_Block | None") -> None:
        self.stmts: list = []
        self.cse: dict[str, "Sym"] = {}
        self.parent = parent

    def lookup(self, expr: str) -> "Sym | None":
        b: _Block | None = self
        while b is not None:
            v = b.cse.get(expr)
            if v is not None:
                return v
            b = b.parent
        return None


class _Recorder:
    def __init__(self, arrays: bool = False) -> None:
        self.count = 0
        self.consts: dict[int, str] = {}
        self.namespace: dict[str, Any] = {}
        self.block = _Block(None)
        #: the array dialect (numpy arrays of designs at run time): logic with ``&``, ``|``, ``_not``
        self.arrays = arrays
        #: constants read as tables (``ops.interp``, ``ops.layer``, ``ops.take``), never per design
        self.shared: set[str] = set()
        #: constants read as numbers (per design when they are arrays of the designs' shape)
        self.numbers: set[str] = set()

    def name(self, prefix: str = "v") -> str:
        self.count += 1
        return f"{prefix}{self.count}"

    def const(self, obj: Any) -> str:
        key = id(obj)
        n = self.consts.get(key)
        if n is None:
            n = self.consts[key] = self.name("k")
            self.namespace[n] = obj
        return n

    def emit(self, expr: str, deps: tuple) -> "Sym":
        hit = self.block.lookup(expr)
        if hit is not None:
            return hit
        v = Sym(self.name())
        self.block.stmts.append(("=", v.name, expr, frozenset(deps)))
        self.block.cse[expr] = v
        return v


_local = threading.local()


def _rec() -> _Recorder:
    r = getattr(_local, "rec", None)
    if r is None:
        raise TraceError("a traced value was used outside tracing")
    return r


def _lit(x: Any) -> tuple[str, tuple]:
    """Source text of an operand and the symbols it reads."""
    if type(x) is Sym:
        return x.name, (x.name,)
    if type(x) is bool or x is None:
        return repr(x), ()
    if type(x) is int:
        return (repr(x) if x >= 0 else f"({x!r})"), ()
    if isinstance(x, float):          # also numpy floats: the same value as a Python float
        f = float(x)
        if math.isfinite(f):
            return (repr(f) if f >= 0.0 and math.copysign(1.0, f) > 0.0 else f"({f!r})"), ()
        return _rec().const(f), ()
    if type(x).__name__ in ("int64", "int32", "bool_"):
        return _lit(x.item())
    rec = _rec()
    name = rec.const(x)
    rec.numbers.add(name)
    return name, ()


def _static(x: Any) -> bool:
    return type(x) is not Sym


def _zero(x: Any) -> bool:
    return isinstance(x, float) and x == 0.0


def _one(x: Any) -> bool:
    return isinstance(x, float) and x == 1.0


def _bin(a: Any, op: str, b: Any) -> Any:
    # identities that hold up to the sign of a zero (x * 0 also for finite x only: a state that is not finite
    # makes other derivatives not finite too, which the step guard reports)
    if op == "+":
        if _zero(b):
            return a
        if _zero(a):
            return b
    elif op == "-":
        if _zero(b):
            return a
        if _zero(a):
            return -b
    elif op == "*":
        if _zero(a) or _zero(b):
            return 0.0
        if _one(b):
            return a
        if _one(a):
            return b
    elif op == "/" or op == "**":
        if _one(b):
            return a
    sa, da = _lit(a)
    sb, db = _lit(b)
    rec = _rec()
    if rec.arrays and op in _ARRAY_LOGIC:
        op = _ARRAY_LOGIC[op]
    return rec.emit(f"{sa} {op} {sb}", da + db)


#: Python's logic on bools, as numpy's on arrays of bools (the array dialect)
_ARRAY_LOGIC = {"and": "&", "or": "|"}


def _same_static(a: Any, b: Any) -> bool:
    """Two values known at trace time that are the same value (arrays: the same array)."""
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        return a is b
    return type(a) is type(b) and repr(a) == repr(b)


class Sym:
    """A value known only when the traced function runs: the name it will have there."""

    __slots__ = ("name",)
    __array_ufunc__ = None          # numpy hands arithmetic with a Sym back to its operators

    def __init__(self, name: str) -> None:
        self.name = name

    def __repr__(self) -> str:
        return f"Sym({self.name})"

    # arithmetic
    def __add__(self, o): return _bin(self, "+", o)
    def __radd__(self, o): return _bin(o, "+", self)
    def __sub__(self, o): return _bin(self, "-", o)
    def __rsub__(self, o): return _bin(o, "-", self)
    def __mul__(self, o): return _bin(self, "*", o)
    def __rmul__(self, o): return _bin(o, "*", self)
    def __truediv__(self, o): return _bin(self, "/", o)
    def __rtruediv__(self, o): return _bin(o, "/", self)
    def __pow__(self, o): return _bin(self, "**", o)
    def __rpow__(self, o): return _bin(o, "**", self)
    def __neg__(self): return _rec().emit(f"-{self.name}", (self.name,))  # noqa: E704
    def __pos__(self): return self
    def __abs__(self): return _rec().emit(f"abs({self.name})", (self.name,))

    # comparisons and logic (Python bools at run time)
    def __lt__(self, o): return _bin(self, "<", o)
    def __le__(self, o): return _bin(self, "<=", o)
    def __gt__(self, o): return _bin(self, ">", o)
    def __ge__(self, o): return _bin(self, ">=", o)
    def __eq__(self, o): return _bin(self, "==", o)  # type: ignore[override]
    def __ne__(self, o): return _bin(self, "!=", o)  # type: ignore[override]
    def __and__(self, o): return _bin(self, "and", o)
    def __rand__(self, o): return _bin(o, "and", self)
    def __or__(self, o): return _bin(self, "or", o)
    def __ror__(self, o): return _bin(o, "or", self)
    def __invert__(self):
        rec = _rec()
        return rec.emit(f"_not({self.name})" if rec.arrays else f"not {self.name}", (self.name,))
    __hash__ = object.__hash__

    # what a straight line cannot follow
    def __bool__(self):
        raise TraceError("a Python 'if', 'and' or 'or' on a state-dependent value (use ops.where or ops.branch)")

    def __float__(self):
        raise TraceError("float() or a math function of a state-dependent value (use the ops namespace)")

    def __int__(self):
        raise TraceError("int() of a state-dependent value")

    def __index__(self):
        raise TraceError("a state-dependent index (use ops.take)")

    def __iter__(self):
        raise TraceError("iteration over a state-dependent value")


# --------------------------------------------------------------------------------------------------------------
# Trees of values (tuples, named tuples, lists) flattened to leaves for branches and loops.

def _flatten(x: Any, leaves: list) -> Any:
    if isinstance(x, tuple):
        kids = tuple(_flatten(v, leaves) for v in x)
        return (type(x), kids)
    if isinstance(x, list):
        return (list, tuple(_flatten(v, leaves) for v in x))
    if type(x) is Sym or isinstance(x, (float, bool, np.ndarray)):
        leaves.append(x)
        return None
    return ("static", x)


def _unflatten(tree: Any, it: Any) -> Any:
    if tree is None:
        return next(it)
    kind, kids = tree
    if kind == "static":
        return kids
    vals = [_unflatten(k, it) for k in kids]
    if kind is list:
        return vals
    if kind is tuple:
        return tuple(vals)
    return kind(*vals)          # a named tuple


def _same_tree(a: Any, b: Any) -> bool:
    if a is None or b is None:
        return a is None and b is None
    if a[0] != b[0]:
        return False
    if a[0] == "static":
        return type(a[1]) is type(b[1]) and a[1] == b[1]
    return len(a[1]) == len(b[1]) and all(_same_tree(x, y) for x, y in zip(a[1], b[1]))


def _sub(fn: Callable, *args: Any) -> tuple[_Block, Any]:
    rec = _rec()
    outer = rec.block
    rec.block = _Block(outer)
    try:
        out = fn(*args)
        return rec.block, out
    finally:
        rec.block = outer


def _join(blocks: list[_Block], results: list, names: list[str] | None = None) -> tuple[Any, list[str]]:
    """Give the leaves of several blocks' results common names: one assignment at the end of each block."""
    trees, leaves = [], []
    for r in results:
        lv: list = []
        trees.append(_flatten(r, lv))
        leaves.append(lv)
    for t in trees[1:]:
        if not _same_tree(trees[0], t):
            raise TraceError("the two sides of a choice return different shapes")
    rec = _rec()
    out: list = []
    targets: list[str] = []
    for k in range(len(leaves[0])):
        vals = [lv[k] for lv in leaves]
        if names is None and all(_static(v) for v in vals) and all(_same_static(v, vals[0]) for v in vals):
            out.append(vals[0])
            continue
        n = names[k] if names is not None else rec.name("o")
        for b, v in zip(blocks, vals):
            s, d = _lit(v)
            b.stmts.append(("=", n, s, frozenset(d)))
        targets.append(n)
        out.append(Sym(n))
    return _unflatten(trees[0], iter(out)), targets


# --------------------------------------------------------------------------------------------------------------
# The namespace.

def _call(fn_name: str, fn: Any, *args: Any) -> Sym:
    rec = _rec()
    if fn_name not in rec.namespace:
        rec.namespace[fn_name] = fn
    parts = [_lit(a) for a in args]
    deps: tuple = ()
    for _, d in parts:
        deps = deps + d
    return rec.emit(f"{fn_name}({', '.join(s for s, _ in parts)})", deps)


class TraceOps:
    """The namespace of :mod:`thrustgraph.base.xp` over traced values: floats are computed as by
    :class:`~thrustgraph.base.xp.ScalarOps`, symbols are written down. Results equal ScalarOps' bit for bit."""

    arrays = False
    tracing = True

    @staticmethod
    def _unary(name: str, f: Callable) -> Callable:
        def op(x: Any) -> Any:
            return f(x) if _static(x) else _call(name, f, x)
        return op

    def __init__(self) -> None:
        for name, f in (("sqrt", math.sqrt), ("exp", math.exp), ("log", math.log), ("sin", math.sin),
                        ("cos", math.cos)):
            setattr(self, name, self._unary("_" + name, f))

    @staticmethod
    def abs(x: Any) -> Any:
        return abs(x)

    @staticmethod
    def hypot(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return math.hypot(a, b)
        return _call("_hypot", math.hypot, a, b)

    @staticmethod
    def any(c: Any) -> bool:
        if _static(c):
            return bool(c)
        raise TraceError("ops.any of a state-dependent condition")

    all = any

    @staticmethod
    def where(c: Any, a: Any, b: Any) -> Any:
        if _static(c):
            return a if c else b
        if _static(a) and _static(b) and _same_static(a, b):
            return a
        sc, dc = _lit(c)
        sa, da = _lit(a)
        sb, db = _lit(b)
        return _rec().emit(f"{sa} if {sc} else {sb}", dc + da + db)

    @staticmethod
    def maximum(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return a if a > b else b
        sa, da = _lit(a)
        sb, db = _lit(b)
        return _rec().emit(f"{sa} if {sa} > {sb} else {sb}", da + db)

    @staticmethod
    def minimum(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return a if a < b else b
        sa, da = _lit(a)
        sb, db = _lit(b)
        return _rec().emit(f"{sa} if {sa} < {sb} else {sb}", da + db)

    @staticmethod
    def clip(x: Any, lo: Any, hi: Any) -> Any:
        if _static(x) and _static(lo) and _static(hi):
            return ScalarOps.clip(x, lo, hi)
        sx, dx = _lit(x)
        sl, dl = _lit(lo)
        sh, dh = _lit(hi)
        return _rec().emit(f"{sl} if {sx} < {sl} else ({sh} if {sx} > {sh} else {sx})", dx + dl + dh)

    @staticmethod
    def interp(x: Any, xp: Any, fp: Any) -> Any:
        if _static(x):
            return ScalarOps.interp(x, xp, fp)
        return _call("_interp", ScalarOps.interp, x, xp, fp)

    @staticmethod
    def layer(x: Any, edges: Any) -> Any:
        if _static(x):
            return ScalarOps.layer(x, edges)
        return _call("_layer", ScalarOps.layer, x, edges)

    @staticmethod
    def take(values: Any, k: Any) -> Any:
        if _static(k):
            return values[k]
        if any(type(v) is Sym for v in values):
            raise TraceError("ops.take from state-dependent values")
        return _call("_take", ScalarOps.take, values, k)

    @staticmethod
    def branch(cond: Any, f_true: Callable, f_false: Callable, *args: Any) -> Any:
        if _static(cond):
            return f_true(*args) if cond else f_false(*args)
        bt, rt = _sub(f_true, *args)
        bf, rf = _sub(f_false, *args)
        out, targets = _join([bt, bf], [rt, rf])
        sc, dc = _lit(cond)
        _rec().block.stmts.append(("if", sc, frozenset(dc), bt, bf, tuple(targets)))
        return out

    @staticmethod
    def each(fn: Callable, *args: Any, outputs: int = 0, many: Callable | None = None) -> Any:
        """A function of floats (a property library's call), written down as a call of ``fn``; ``outputs`` is
        the length of the tuple it returns (0: one value); ``many`` (its array form) is not needed here."""
        if all(_static(a) for a in args):
            return fn(*args)
        rec = _rec()
        name = rec.const(fn)
        parts = [_lit(a) for a in args]
        deps: tuple = ()
        for _, d in parts:
            deps = deps + d
        r = rec.emit(f"{name}({', '.join(p for p, _ in parts)})", deps)
        if not outputs:
            return r
        return tuple(rec.emit(f"{r.name}[{k}]", (r.name,)) for k in range(outputs))

    @staticmethod
    def refuse(cond: Any, error: type, message: str) -> None:
        if _static(cond):
            if cond:
                raise error(message)
            return
        rec = _rec()
        sc, dc = _lit(cond)
        body = _Block(rec.block)
        body.stmts.append(("raise", f"{rec.const(error)}({rec.const(message)})"))
        rec.block.stmts.append(("if", sc, frozenset(dc), body, _Block(rec.block), ()))

    refuse_any = refuse        # one design: the same

    @staticmethod
    def iterate(carry: Any, test: Callable, step: Callable, n: int) -> tuple[Any, Any]:
        """``for it in range(n): stop, aux = test(carry); if it and stop: break; carry = step(carry, aux)``;
        returns ``(carry, aux)`` (the last test's ``aux``). Traced as the first pass in line, then a loop."""
        stop, aux = test(carry)
        if n <= 0:
            return carry, aux
        carry = step(carry, aux)
        if n == 1:
            return carry, aux
        rec = _rec()
        # loop-carried names for the carry and the test's aux; a leaf that is the same constant before the
        # loop and after a pass stays a constant (found by a first trace of the body, then traced again)
        lv: list = []
        tree = _flatten((carry, aux), lv)
        fixed = [False] * len(lv)
        for attempt in range(2):
            names = [None if fixed[k] else rec.name("c") for k in range(len(lv))]
            cur = _unflatten(tree, iter([lv[k] if fixed[k] else Sym(nm) for k, nm in enumerate(names)]))
            body_test, (stop2, aux2) = _sub(test, cur[0])
            # the loop body: test, leave when it stops, step, carry on
            after, new_carry = _sub(step, cur[0], aux2)
            lv2: list = []
            tree2 = _flatten((new_carry, aux2), lv2)
            if not _same_tree(tree, tree2):
                raise TraceError("an iteration changes the shape of what it carries")
            same = [_static(x) and _static(y) and _same_static(x, y) for x, y in zip(lv, lv2)]
            if attempt or same == fixed or not any(same):
                break
            fixed = same
        for nm, v in zip(names, lv):
            if nm is not None:
                s, d = _lit(v)
                rec.block.stmts.append(("=", nm, s, frozenset(d)))
        # the aux after the loop is the last test's: assign it inside the test block, the carry after the step
        lc: list = []
        _flatten(cur[0], lc)
        k_carry = len(lc)
        for nm, v in zip(names[k_carry:], lv2[k_carry:]):
            if nm is not None:
                s, d = _lit(v)
                body_test.stmts.append(("=", nm, s, frozenset(d)))
        for nm, v in zip(names[:k_carry], lv2[:k_carry]):
            if nm is not None:
                s, d = _lit(v)
                after.stmts.append(("=", nm, s, frozenset(d)))
        ss, ds = _lit(stop2)
        rec.block.stmts.append(("loop", n - 1, body_test, ss, frozenset(ds), after,
                                tuple(nm for nm in names if nm is not None)))
        return cur

    # (ScalarOps parity: ``ops.arrays`` is False, so code written for one design is what gets traced)


trace_ops = TraceOps()


def _leafwise(c: Any, a: Any, b: Any, where: Callable) -> Any:
    """``where(c, x, y)`` for each pair of leaves of two results of the same shape (tuples, named tuples)."""
    if isinstance(a, tuple):
        vals = [where(c, x, y) for x, y in zip(a, b)]
        return type(a)(*vals) if hasattr(a, "_fields") else tuple(vals)
    return where(c, a, b)


class ArrayTraceOps(TraceOps):
    """The namespace of :class:`~thrustgraph.base.xp.ArrayOps` over traced values: what is known at trace time
    (floats, and numpy arrays over the designs: parameters and what the builders made of them) is computed as
    ArrayOps computes it, what depends on the state or the time is written down as numpy calls, in the same
    order. Traced with :func:`compile_function` (``designs=N``), the straight line takes the states as arrays
    over designs. Choices keep ArrayOps' rules: ``ops.branch`` on a state-dependent condition runs the one
    regime every design is in, or both and chooses per design; ``ops.iterate`` holds a design that stops and ends when every design does;
    ``ops.refuse`` does nothing (the caller flags the designs)."""

    arrays = True
    tracing = True

    def __init__(self) -> None:
        for name, f in (("sqrt", np.sqrt), ("exp", np.exp), ("log", np.log), ("sin", np.sin), ("cos", np.cos),
                        ("abs", np.abs)):
            setattr(self, name, self._unary("_np_" + name, f))

    @staticmethod
    def hypot(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return np.hypot(a, b)
        return _call("_np_hypot", np.hypot, a, b)

    @staticmethod
    def any(c: Any) -> bool:
        if _static(c):
            return bool(np.any(c))
        raise TraceError("ops.any of a state-dependent condition")

    @staticmethod
    def all(c: Any) -> bool:
        if _static(c):
            return bool(np.all(c))
        raise TraceError("ops.all of a state-dependent condition")

    @staticmethod
    def where(c: Any, a: Any, b: Any) -> Any:
        if _static(c) and _static(a) and _static(b):
            return np.where(c, a, b)
        if _static(c) and np.ndim(c) == 0:
            return a if c else b        # the value np.where gives (its shape aside)
        return _call("_np_where", np.where, c, a, b)

    @staticmethod
    def maximum(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return np.maximum(a, b)
        return _call("_np_maximum", np.maximum, a, b)

    @staticmethod
    def minimum(a: Any, b: Any) -> Any:
        if _static(a) and _static(b):
            return np.minimum(a, b)
        return _call("_np_minimum", np.minimum, a, b)

    @staticmethod
    def clip(x: Any, lo: Any, hi: Any) -> Any:
        if _static(x) and _static(lo) and _static(hi):
            return np.clip(x, lo, hi)
        return _call("_np_clip", np.clip, x, lo, hi)

    @staticmethod
    def _tabled(fn_name: str, fn: Callable, x: Any, *tables: Any) -> Sym:
        """``fn(x, *tables)`` with the tables kept whole (never taken per design)."""
        rec = _rec()
        if fn_name not in rec.namespace:
            rec.namespace[fn_name] = fn
        sx, dx = _lit(x)
        names = []
        for tb in tables:
            if type(tb) is Sym or (isinstance(tb, (tuple, list)) and any(type(v) is Sym for v in tb)):
                raise TraceError(f"{fn_name} of a state-dependent table")
            n = rec.const(tb)
            rec.shared.add(n)
            names.append(n)
        return rec.emit(f"{fn_name}({sx}, {', '.join(names)})", dx)

    def interp(self, x: Any, xp: Any, fp: Any) -> Any:
        if _static(x):
            return ArrayOps.interp(x, xp, fp)
        return self._tabled("_np_interp", ArrayOps.interp, x, xp, fp)

    def layer(self, x: Any, edges: Any) -> Any:
        if _static(x):
            return ArrayOps.layer(x, edges)
        return self._tabled("_np_layer", ArrayOps.layer, x, edges)

    def take(self, values: Any, k: Any) -> Any:
        if _static(k):
            if any(type(v) is Sym for v in values):
                raise TraceError("ops.take from state-dependent values")
            return ArrayOps.take(values, k)
        return self._tabled("_np_take", lambda kk, vals: ArrayOps.take(vals, kk), k, values)

    def branch(self, cond: Any, f_true: Callable, f_false: Callable, *args: Any) -> Any:
        if _static(cond):
            c = np.asarray(cond)
            if c.ndim == 0:
                return f_true(*args) if bool(c) else f_false(*args)
            if c.all():
                return f_true(*args)
            if not c.any():
                return f_false(*args)
            return _leafwise(c, f_true(*args), f_false(*args), self.where)
        bt, rt = _sub(f_true, *args)
        bf, rf = _sub(f_false, *args)
        out, targets = _join([bt, bf], [rt, rf])
        sc, dc = _lit(cond)
        _rec().block.stmts.append(("if", sc, frozenset(dc), bt, bf, tuple(targets)))
        return out

    @staticmethod
    def each(fn: Callable, *args: Any, outputs: int = 0, many: Callable | None = None) -> Any:
        if all(_static(a) for a in args):
            return ArrayOps.each(fn, *args, outputs=outputs, many=many)
        rec = _rec()
        parts = [_lit(a) for a in args]
        deps: tuple = ()
        for _, d in parts:
            deps = deps + d
        if many is not None:        # the array form, called once over the designs
            name = rec.const(many)
            rec.shared.add(name)
            r = rec.emit(f"{name}({', '.join(p for p, _ in parts)})", deps)
            if not outputs:
                return r
            return tuple(rec.emit(f"{r.name}[{k}]", (r.name,)) for k in range(outputs))
        if "_np_each" not in rec.namespace:
            rec.namespace["_np_each"] = ArrayOps.each
        name = rec.const(fn)
        rec.shared.add(name)
        r = rec.emit(f"_np_each({name}, {', '.join(p for p, _ in parts)}, outputs={outputs})", deps)
        if not outputs:
            return r
        return tuple(rec.emit(f"{r.name}[{k}]", (r.name,)) for k in range(outputs))

    @staticmethod
    def refuse(cond: Any, error: type, message: str) -> None:
        """Nothing over arrays (as :meth:`ArrayOps.refuse`): the caller flags the designs."""

    @staticmethod
    def refuse_any(cond: Any, error: type, message: str) -> None:
        """As :meth:`ArrayOps.refuse_any`: a condition known at trace time raises now; one that depends on the
        state is written down as ``if _np_any(cond): raise error(message)``."""
        if _static(cond):
            ArrayOps.refuse_any(cond, error, message)
            return
        rec = _rec()
        sc, dc = _lit(cond)
        rec.block.stmts.append(("raise_any", sc, frozenset(dc), f"{rec.const(error)}({rec.const(message)})"))

    def iterate(self, carry: Any, test: Callable, step: Callable, n: int) -> tuple[Any, Any]:
        """As :meth:`TraceOps.iterate`; an iteration on values known at trace time (a builder's root search over
        parameters per design) runs now, as :meth:`ArrayOps.iterate` runs it, and gives values, not symbols."""
        lv: list = []
        _flatten(carry, lv)
        if all(_static(v) for v in lv):
            now, aux = carry, None
            for it in range(n):
                stop, aux = test(now)
                if not _static(stop):
                    break
                if it and bool(np.all(stop)):
                    return now, aux
                new = step(now, aux)
                lv = []
                _flatten(new, lv)
                if not all(_static(v) for v in lv):
                    break
                # a design that stops keeps its values while the others step on
                now = hold(stop, now, new) if it and bool(np.any(stop)) else new
            else:
                return now, aux
        return TraceOps.iterate(carry, test, step, n)


array_trace_ops = ArrayTraceOps()


# --------------------------------------------------------------------------------------------------------------
# From blocks to source: dead code removed, then written out.

def _prune(block: _Block, live: set) -> list:
    """Statements of ``block`` that contribute to ``live`` names (updated in place with what they read)."""
    kept = []
    for st in reversed(block.stmts):
        kind = st[0]
        if kind == "=":
            if st[1] in live:
                live.discard(st[1])
                live.update(st[3])
                kept.append(st)
        elif kind == "raise":
            kept.append(st)
        elif kind == "raise_any":
            live.update(st[2])
            kept.append(st)
        elif kind == "if":
            _, sc, dc, bt, bf, targets = st
            if targets and not any(t in live for t in targets) and not _raises(bt) and not _raises(bf):
                continue
            used = tuple(t for t in targets if t in live)       # the targets read after the choice
            lt, lf = set(live), set(live)
            kt = _prune(bt, lt)
            kf = _prune(bf, lf)
            live.clear()
            live.update(lt | lf)
            live.update(dc)
            kept.append(("if", sc, dc, kt, kf, used))
        elif kind == "loop":
            _, n, bt, ss, ds, after, names = st
            # everything the loop carries is live through it (a fixed point of liveness)
            live.update(names)
            la = set(live)
            ka = _prune(after, la)
            lt = la | set(ds) | set(names)
            kt = _prune(bt, lt)
            live.update(lt)
            kept.append(("loop", n, kt, ss, ds, ka, names))
        else:  # pragma: no cover
            raise TraceError(f"unknown statement {kind}")
    kept.reverse()
    return kept


def _assigned(stmts: list, names: set) -> None:
    """The names the statements assign (at any depth)."""
    for st in stmts:
        if st[0] == "=":
            names.add(st[1])
        elif st[0] == "if":
            _assigned(st[3], names)
            _assigned(st[4], names)
            names.update(st[5])
        elif st[0] == "loop":
            _assigned(st[2], names)
            _assigned(st[5], names)
            names.update(st[6])


def _read(stmts: list, names: set) -> None:
    """The names the statements read (at any depth)."""
    for st in stmts:
        if st[0] == "=":
            names.update(st[3])
        elif st[0] == "raise_any":
            names.update(st[2])
        elif st[0] == "if":
            names.update(st[2])
            _read(st[3], names)
            _read(st[4], names)
        elif st[0] == "loop":
            names.update(st[4])
            _read(st[2], names)
            _read(st[5], names)


def _raises(block: Any) -> bool:
    stmts = block.stmts if isinstance(block, _Block) else block
    for st in stmts:
        if st[0] in ("raise", "raise_any"):
            return True
        if st[0] == "if" and (_raises(st[3]) or _raises(st[4])):
            return True
    return False


def _write(stmts: list, indent: str, out: list) -> None:
    for st in stmts:
        kind = st[0]
        if kind == "=":
            out.append(f"{indent}{st[1]} = {st[2]}")
        elif kind == "raise":
            out.append(f"{indent}raise {st[1]}")
        elif kind == "raise_any":
            out.append(f"{indent}if {st[1]}:")
            out.append(f"{indent}    raise {st[3]}")
        elif kind == "if":
            _, sc, _dc, kt, kf, _targets = st
            if kt:
                out.append(f"{indent}if {sc}:")
                _write(kt, indent + "    ", out)
                if kf:
                    out.append(f"{indent}else:")
                    _write(kf, indent + "    ", out)
            elif kf:
                out.append(f"{indent}if not ({sc}):")
                _write(kf, indent + "    ", out)
        elif kind == "loop":
            _, n, kt, ss, _ds, ka, _names = st
            out.append(f"{indent}for _it in range({n}):")
            _write(kt, indent + "    ", out)
            out.append(f"{indent}    if {ss}:")
            out.append(f"{indent}        break")
            _write(ka, indent + "    ", out)


def _write_arrays(stmts: list, indent: str, out: list, count: list) -> None:
    """The array dialect of :func:`_write`: a choice on a condition over designs runs the regime every design is
    in, else both and takes each design's (``ArrayOps.branch``); a loop ends when every design's test stops, and
    a design whose test stops keeps what the loop carries meanwhile (``ArrayOps.iterate``)."""
    for st in stmts:
        kind = st[0]
        if kind == "=":
            out.append(f"{indent}{st[1]} = {st[2]}")
        elif kind == "raise":
            raise TraceError("a refusal in the array dialect")
        elif kind == "raise_any":
            out.append(f"{indent}if _np_any({st[1]}):")
            out.append(f"{indent}    raise {st[3]}")
        elif kind == "if":
            _, sc, _dc, kt, kf, targets = st
            count[0] += 1
            c = f"_c{count[0]}"
            out.append(f"{indent}{c} = {sc}")
            out.append(f"{indent}if _np_all({c}):")
            _write_arrays(kt, indent + "    ", out, count)
            out.append(f"{indent}    pass")
            out.append(f"{indent}elif not _np_any({c}):")
            _write_arrays(kf, indent + "    ", out, count)
            out.append(f"{indent}    pass")
            out.append(f"{indent}else:")
            _write_arrays(kt, indent + "    ", out, count)
            saved = [f"{nm}_{c}" for nm in targets]
            for nm, sv in zip(targets, saved):
                out.append(f"{indent}    {sv} = {nm}")
            _write_arrays(kf, indent + "    ", out, count)
            for nm, sv in zip(targets, saved):
                out.append(f"{indent}    {nm} = _np_where({c}, {sv}, {nm})")
        elif kind == "loop":
            _, n, kt, ss, _ds, ka, names = st
            count[0] += 1
            c = f"_s{count[0]}"
            # a design whose test stops keeps what the loop carries while the others step on (ArrayOps.iterate)
            carried = [nm for nm in names if any(s[0] == "=" and s[1] == nm for s in ka)]
            out.append(f"{indent}for _it in range({n}):")
            _write_arrays(kt, indent + "    ", out, count)
            out.append(f"{indent}    {c} = {ss}")
            out.append(f"{indent}    if _np_all({c}):")
            out.append(f"{indent}        break")
            out.append(f"{indent}    {c}_any = _np_any({c})")
            saved = [f"{nm}_{c}" for nm in carried]
            for nm, sv in zip(carried, saved):
                out.append(f"{indent}    {sv} = {nm}")
            _write_arrays(ka, indent + "    ", out, count)
            if carried:
                out.append(f"{indent}    if {c}_any:")
                for nm, sv in zip(carried, saved):
                    out.append(f"{indent}        {nm} = _np_where({c}, {sv}, {nm})")


def _source_of(x: Any, live: set, rec: _Recorder) -> str:
    """Source text that rebuilds a result (lists, tuples, named tuples, dicts of str keys, strings, leaves)."""
    if type(x) is Sym:
        live.add(x.name)
        return x.name
    if isinstance(x, np.ndarray):
        name = rec.const(x)
        rec.numbers.add(name)
        return name
    if isinstance(x, list):
        return "[" + ", ".join(_source_of(v, live, rec) for v in x) + "]"
    if isinstance(x, tuple):
        inner = ", ".join(_source_of(v, live, rec) for v in x)
        if hasattr(x, "_fields"):
            return f"{rec.const(type(x))}({inner})"
        return f"({inner},)" if len(x) == 1 else f"({inner})"
    if isinstance(x, dict):
        if not all(type(k) is str for k in x):
            raise TraceError("a traced dict with keys that are not strings")
        return "{" + ", ".join(f"{k!r}: {_source_of(v, live, rec)}" for k, v in x.items()) + "}"
    if type(x) is str:                 # a name (a ledger's component and term)
        return repr(x)
    if isinstance(x, (bool, int, float)) or x is None:
        _local.rec = rec
        try:
            return _lit(x)[0]
        finally:
            _local.rec = None
    raise TraceError(f"the traced function returned {type(x).__name__}")


def compile_function(body: Callable[[Any, list], Sequence[Any]], n_states: int, *, name: str = "phase",
                     designs: int | None = None) -> Callable:
    """Trace ``body(t, s)`` (``t`` the time's symbol, ``s`` the list of state symbols) and compile it into
    ``f(t, y)``, ``y`` any sequence of ``n_states`` numbers (a numpy array is read with ``tolist``), returning
    what the body returned (lists, tuples, named tuples and dicts of floats and bools are rebuilt). Raises
    :class:`TraceError` when the body cannot be traced.

    With ``designs=N`` the body is traced over :data:`array_trace_ops` (the array dialect) and the function is
    ``f(t, y, c)``: ``y`` a sequence of arrays over designs, and ``c`` the values per design the trace read (the
    arrays of shape ``(N,)`` among its constants, listed in ``f.per_design``), taken for the designs at hand:
    ``tuple(a[rows] for a in f.per_design)`` for some of the N designs, ``tuple(f.per_design)`` for all.

    >>> import numpy as np
    >>> k = np.array([1.0, 2.0, 3.0])
    >>> f = compile_function(lambda t, s: [array_trace_ops.maximum(s[0] * k, 2.5)], 1, designs=3)
    >>> f(0.0, [np.ones(3)], tuple(f.per_design))[0].tolist()
    [2.5, 2.5, 3.0]
    >>> f(0.0, [np.ones(2)], tuple(a[[0, 2]] for a in f.per_design))[0].tolist()
    [2.5, 3.0]
    """
    arrays = designs is not None
    rec = _Recorder(arrays)
    _local.rec = rec
    try:
        s = [Sym(f"s{k}") for k in range(n_states)]
        result = body(Sym("t"), s)
    finally:
        _local.rec = None
    live: set[str] = set()
    ret = _source_of(result, live, rec)
    stmts = _prune(rec.block, live)
    ns = dict(rec.namespace)
    known = set(ns) | {"t"} | {f"s{k}" for k in range(n_states)}
    _assigned(stmts, known)
    read = set(live)
    _read(stmts, read)
    if not read <= known:
        raise TraceError(f"the trace reads values it never computed ({', '.join(sorted(read - known)[:3])}): a "
                         "value kept from another trace")
    per_design: list[str] = []
    if arrays:
        for nm in sorted(rec.numbers, key=lambda v: int(v[1:])):
            obj = ns[nm]
            if isinstance(obj, np.ndarray) and obj.shape == (designs,):
                if nm in rec.shared:
                    raise TraceError("an array over the designs read both as a table and as numbers")
                per_design.append(nm)
        lines = [f"def {name}(t, y, _per_design):"]
        if per_design:
            lines.append(f"    {', '.join(per_design)}, = _per_design")
        ns.update(_np_all=np.all, _np_any=np.any, _np_where=np.where, _not=np.logical_not)
    else:
        lines = [f"def {name}(t, y):"]
    if n_states:
        unpack = ", ".join(f"s{k}" for k in range(n_states))
        lines.append(f"    {unpack}, = y" if arrays else f"    {unpack}, = y.tolist() if type(y) is not list else y")
    if arrays:
        _write_arrays(stmts, "    ", lines, [0])
    else:
        _write(stmts, "    ", lines)
    lines.append(f"    return {ret}")
    src = "\n".join(lines) + "\n"
    code = compile(src, f"<thrustgraph straight line: {name}>", "exec")
    exec(code, ns)                      # noqa: S102 (our own generated source, from the traced balance)
    fn = ns[name]
    fn.source = src                     # type: ignore[attr-defined]
    if arrays:
        fn.per_design = [ns[nm] for nm in per_design]   # type: ignore[attr-defined]
    return fn
