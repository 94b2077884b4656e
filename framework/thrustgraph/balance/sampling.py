"""Every term of the balance at a flight's output samples, a segment at a time.

A flight's full result holds the signals and the per-term ledger at every output sample. Within one
segment the phase is fixed, so the samples are a batch like an ensemble's designs: the one balance
(:class:`thrustgraph.balance.balance.Balance`) is evaluated once over numpy arrays of samples, through the vehicle's
plan rebuilt over :data:`thrustgraph.base.xp.array_ops` (parameters stay floats, states are arrays). Vehicles
with a kind not written to the one-definition convention are evaluated sample by sample, as before.

Both give the same numbers to rounding (checked in ``tests/test_straightline.py``).

Examples
--------
>>> import numpy as np
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.flight.assembly import assemble
>>> from thrustgraph.balance.balance import Balance
>>> system = assemble(load_model(default_model_path()))
>>> bal = Balance(system)
>>> y = np.array([system.y0, system.y0]).T
>>> table = sample_terms(bal, np.array([0.0, 0.0]), y)
>>> table.values["mass"].shape
(2,)
"""

from __future__ import annotations

import weakref
from bisect import bisect_left
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["SampleTable", "RawSamples", "sample_snapshot", "sample_terms", "join_tables", "at_samples", "dense_states", "take_samples"]

#: Over arrays of samples, a branch whose condition differs between the samples evaluates both sides for all of
#: them (:meth:`thrustgraph.base.xp.ArrayOps.branch`) and keeps, per sample, the side it takes: the other side
#: may divide by zero (the body axis into the wind of a vehicle at rest, free from a pad at t0) and is thrown
#: away, so its floating-point warnings say nothing (the ensemble flies its designs under the same rule).
_BOTH_SIDES = {"divide": "ignore", "invalid": "ignore"}


@dataclass
class SampleTable:
    """Signals (name -> array of shape (n,) or (n, 3)) and ledger ((component, term) -> (n, 3)) of n samples."""

    n: int
    values: dict[str, np.ndarray] = field(default_factory=dict)
    ledger: dict[tuple[str, str], np.ndarray] = field(default_factory=dict)
    #: the snapshot of :meth:`~thrustgraph.balance.balance.Balance.terms` at the same samples (from the same pass
    #: over arrays; None when the samples were evaluated one by one)
    terms: dict[str, Any] | None = None


@dataclass
class RawSamples:
    """A segment's snapshot over arrays of ``n`` samples (:func:`sample_snapshot`) whose first ``m`` samples are
    kept, converted only when joined: :func:`join_tables` writes them straight into the joined columns and
    fills :attr:`values` and :attr:`ledger` (the same dicts, in place) with views of their rows there."""

    snap: dict
    n: int
    m: int
    values: dict[str, np.ndarray] = field(default_factory=dict)
    ledger: dict[tuple[str, str], np.ndarray] = field(default_factory=dict)

    @property
    def terms(self) -> Any:
        return self.snap["terms"]


def sample_snapshot(bal: Any, t: np.ndarray, y: np.ndarray) -> dict | None:
    """The ``samples`` snapshot of the balance over arrays at the columns of ``y`` (states by samples) at times
    ``t``, in its current phase; None when the vehicle's kinds need the samples one by one (see
    :func:`sample_terms`)."""
    n = len(t)
    many = bal.sampling_balance() if n > 1 else None
    if many is None:
        return None
    rows = [row for row in np.asarray(y, dtype=float)]
    line = bal.sample_line("samples", len(rows))
    with np.errstate(**_BOTH_SIDES):
        if line is not None:
            return line(np.asarray(t, dtype=float), rows, ())
        many.set_phase(bal.modes, bal.kinematics, bal.descending, bal.slide)
        return many._solve(np.asarray(t, dtype=float), rows, "samples")


def _one(v: Any, n: int) -> np.ndarray:
    if type(v) is np.ndarray and v.shape == (n,):
        return v if v.dtype == float else v.astype(float)
    return np.full(n, float(v))


def _column(v: Any, n: int) -> np.ndarray:
    if isinstance(v, tuple):
        out = np.empty((n, len(v)))
        for k, c in enumerate(v):
            out[:, k] = c
        return out
    return _one(v, n)


def _from_snapshot(snap: dict, n: int) -> SampleTable:
    table = SampleTable(n)
    for k, v in snap.items():
        if k in ("ledger", "derivatives", "time", "terms"):
            continue
        table.values[k] = _column(v, n)
    for comp, term, vec in snap["ledger"]:
        key = (comp, term)
        col = _column(tuple(vec), n)
        table.ledger[key] = table.ledger[key] + col if key in table.ledger else col
    return table


def sample_terms(bal: Any, t: np.ndarray, y: np.ndarray) -> SampleTable:
    """The snapshot of :meth:`Balance.evaluate` at each column of ``y`` (states by samples) at times ``t``, in
    the balance's current phase: over arrays when the vehicle's kinds allow it, else sample by sample."""
    n = len(t)
    snap = sample_snapshot(bal, t, y)
    if snap is not None:
        table = _from_snapshot(snap, n)
        table.terms = snap["terms"]
        return table
    return _from_snapshots([bal.evaluate(float(t[k]), y[:, k]) for k in range(n)])


def _from_snapshots(snaps: list[dict]) -> SampleTable:
    """One table from snapshots of one sample each."""
    n = len(snaps)
    table = SampleTable(n)
    keys: dict[str, Any] = {}
    lkeys: dict[tuple[str, str], None] = {}
    for snap in snaps:
        for k, v in snap.items():
            if k not in keys and k not in ("ledger", "derivatives", "time"):
                keys[k] = v
        for comp, term, _ in snap["ledger"]:
            lkeys.setdefault((comp, term))
    for k, sample in keys.items():
        if isinstance(sample, tuple):
            table.values[k] = np.array([snap.get(k, (np.nan,) * 3) for snap in snaps], dtype=float)
        else:
            table.values[k] = np.array([snap.get(k, np.nan) for snap in snaps], dtype=float)
    for key in lkeys:
        table.ledger[key] = np.zeros((n, 3))
    for i, snap in enumerate(snaps):
        for comp, term, vec in snap["ledger"]:
            table.ledger[(comp, term)][i] += vec
    return table


def at_samples(bal: Any, t: np.ndarray, y: np.ndarray, want: str) -> Any:
    """``Balance.core`` (a list of derivative arrays) or ``Balance.terms`` (a dict of arrays) at each column of
    ``y`` at times ``t``, in the balance's current phase, over arrays when the vehicle's kinds allow it (None
    when they do not: the caller evaluates sample by sample)."""
    many = bal.sampling_balance() if len(t) > 1 else None
    if many is None:
        return None
    rows = [row for row in np.asarray(y, dtype=float)]
    line = bal.sample_line(want, len(rows))
    with np.errstate(**_BOTH_SIDES):
        if line is not None:
            return line(np.asarray(t, dtype=float), rows, ())
        many.set_phase(bal.modes, bal.kinematics, bal.descending, bal.slide)
        return many._solve(np.asarray(t, dtype=float), rows, want)


def take_samples(snap: Any, index: np.ndarray, n: int) -> Any:
    """A snapshot over n samples (arrays of length n, numbers shared by all, tuples, lists and dicts of them)
    at the samples ``index`` only.

    >>> import numpy as np
    >>> take_samples({"a": np.arange(4.0), "b": 2.0, "c": (np.arange(4.0), 0.0)}, np.array([1, 3]), 4)
    {'a': array([1., 3.]), 'b': 2.0, 'c': (array([1., 3.]), 0.0)}
    """
    if isinstance(snap, dict):
        return {k: take_samples(v, index, n) for k, v in snap.items()}
    if isinstance(snap, (tuple, list)):
        return type(snap)(take_samples(v, index, n) for v in snap)
    if isinstance(snap, np.ndarray) and snap.ndim >= 1 and snap.shape[0] == n:
        return snap[index]
    return snap


_SKIP = ("ledger", "derivatives", "time", "terms")


def join_tables(tables: list[Any]) -> SampleTable:
    """Tables one after another (a name missing from a table is NaN there; a ledger term missing is zero).
    :class:`RawSamples` are converted straight into the joined columns (their values and ledger become views of
    their rows there)."""
    n = sum(tb.m if type(tb) is RawSamples else tb.n for tb in tables)
    out = SampleTable(n)
    width: dict[str, int] = {}
    lkeys: dict[tuple[str, str], None] = {}
    for tb in tables:
        if type(tb) is RawSamples:
            for k, v in tb.snap.items():
                if k not in width and k not in _SKIP:
                    width[k] = len(v) if isinstance(v, tuple) else 0
            for comp, term, _ in tb.snap["ledger"]:
                lkeys.setdefault((comp, term))
        else:
            for k, v in tb.values.items():
                if k not in width:
                    width[k] = v.shape[1] if v.ndim == 2 else 0
            for k in tb.ledger:
                lkeys.setdefault(k)
    values = {k: np.full((n, w) if w else n, np.nan) for k, w in width.items()}
    ledger = {k: np.zeros((n, 3)) for k in lkeys}
    at = 0
    for tb in tables:
        if type(tb) is RawSamples:
            m, snap = tb.m, tb.snap
            end = at + m
            for k, v in snap.items():
                if k in _SKIP:
                    continue
                col = values[k]
                if isinstance(v, tuple):
                    for c, comp in enumerate(v):
                        col[at:end, c] = comp[:m] if type(comp) is np.ndarray and comp.ndim else comp
                else:
                    col[at:end] = v[:m] if type(v) is np.ndarray and v.ndim else v
                tb.values[k] = col[at:end]
            for comp, term, vec in snap["ledger"]:
                col = ledger[(comp, term)]
                for c in range(3):
                    x = vec[c]
                    col[at:end, c] += x[:m] if type(x) is np.ndarray and x.ndim else x
                tb.ledger[(comp, term)] = col[at:end]
            at = end
        else:
            end = at + tb.n
            for k, v in tb.values.items():
                values[k][at:end] = v
            for k, v in tb.ledger.items():
                ledger[k][at:end] = v
            at = end
    out.values, out.ledger = values, ledger
    return out


#: DOP853's dense-output tables of a segment's solution, stacked once per solution (see :func:`dense_states`)
_TABLES: "weakref.WeakKeyDictionary[Any, tuple | None]" = weakref.WeakKeyDictionary()


def _dop853_tables(ode: Any) -> tuple | None:
    """(step starts, t_old, h, F, y_old, the first three as lists, and a cache of steps as lists) of every step of an ascending DOP853 solution, stacked; None for any
    other (another method, a descending or one-point solution)."""
    try:
        return _TABLES[ode]
    except (KeyError, TypeError):
        pass
    made = None
    interps = getattr(ode, "interpolants", None)
    ts = getattr(ode, "ts", None)
    if interps and ts is not None and len(ts) == len(interps) + 1 and ts[-1] > ts[0] \
            and all(type(ip).__name__ == "Dop853DenseOutput" for ip in interps):
        starts = np.array([ip.t_old for ip in interps], dtype=float)
        widths = np.array([ip.h for ip in interps], dtype=float)
        F = np.stack([ip.F for ip in interps])
        # the rows in the order the polynomial is evaluated (highest first), each a contiguous (steps, states)
        # table: a time's row is one gather
        rows = np.ascontiguousarray(F[:, ::-1, :].transpose(1, 0, 2))
        made = (np.asarray(ts, dtype=float), starts, widths, F, np.stack([ip.y_old for ip in interps]),
                [float(v) for v in ts], starts.tolist(), widths.tolist(), rows, {})
    try:
        _TABLES[ode] = made
    except TypeError:
        pass
    return made


def _step_lists(tables: tuple, k: int, states: slice | None = None) -> tuple[list, list]:
    """Step k's polynomial rows (highest first, as scipy adds them) and start state, as Python lists (kept), of
    every state or of the ``states`` slice."""
    cache = tables[-1]
    key = k if states is None else (k, states.start, states.stop)
    got = cache.get(key)
    if got is None:
        F, y_old = tables[3], tables[4]
        cols = slice(None) if states is None else states
        got = cache[key] = ([F[k][F.shape[1] - 1 - i][cols].tolist() for i in range(F.shape[1])],
                            y_old[k][cols].tolist())
    return got


def dense_states(sol: Any, t: Any, states: slice | None = None) -> np.ndarray:
    """The states of a segment's dense output at the times ``t`` (states by times; a time alone gives the state
    vector), as ``sol.sol(t)``; ``states`` (a slice, one time only) evaluates only those states (the peaks'
    searches read a few).

    For DOP853 (the default method) every time is evaluated in one vectorised pass over the steps' polynomial
    tables: the step each time falls in is chosen as scipy's ``OdeSolution`` chooses it (a step's end belongs to
    the step it ends) and the polynomial is evaluated with the same operations in the same order as scipy's
    ``Dop853DenseOutput``, so the numbers are the same (``tests/test_dense_states.py`` checks ``==``); it saves
    scipy's call per step, which cost more than the arithmetic. Other methods go through ``sol.sol``.

    >>> import numpy as np
    >>> from scipy.integrate import solve_ivp
    >>> sol = solve_ivp(lambda t, y: [y[1], -y[0]], (0.0, 3.0), [0.0, 1.0], method="DOP853", dense_output=True)
    >>> t = np.linspace(0.0, 3.0, 7)
    >>> bool((dense_states(sol, t) == sol.sol(t)).all()), bool((dense_states(sol, 1.3) == sol.sol(1.3)).all())
    (True, True)
    >>> bool((dense_states(sol, 1.3, slice(1, 2)) == sol.sol(1.3)[1:2]).all())
    True
    """
    ode = sol.sol
    tables = _dop853_tables(ode)
    if tables is None:
        return ode(t) if states is None else ode(t)[states]
    ts, t_old, h, F, y_old, ts_list, t_old_list, h_list, rows_table, _ = tables
    t = np.asarray(t, dtype=float)
    if t.ndim == 0:       # one time: scipy's own scalar arithmetic on that step's table, without numpy's search
        tv = float(t)
        k = min(max(bisect_left(ts_list, tv) - 1, 0), len(t_old) - 1)
        x = (tv - t_old_list[k]) / h_list[k]
        # the same operations in the same order on Python floats (IEEE doubles: the same numbers, cheaper than
        # numpy's calls on a dozen states)
        rows, y0 = _step_lists(tables, k, states)
        one = [0.0] * len(y0)
        for i, row in enumerate(rows):
            w = x if i % 2 == 0 else 1 - x
            one = [(a + b) * w for a, b in zip(one, row)]
        return np.array([a + b for a, b in zip(one, y0)])
    if states is not None:
        return dense_states(sol, t)[states]
    seg = np.clip(np.searchsorted(ts, t, side="left") - 1, 0, len(t_old) - 1)
    x = ((t - t_old[seg]) / h[seg])[:, None]
    x1 = 1 - x
    y = np.zeros((len(t), F.shape[2]), dtype=y_old.dtype)
    for i, row in enumerate(rows_table):
        y += row[seg]
        y *= x if i % 2 == 0 else x1
    y += y_old[seg]
    return y.T
