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

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["SampleTable", "sample_terms", "join_tables", "at_samples"]


@dataclass
class SampleTable:
    """Signals (name -> array of shape (n,) or (n, 3)) and ledger ((component, term) -> (n, 3)) of n samples."""

    n: int
    values: dict[str, np.ndarray] = field(default_factory=dict)
    ledger: dict[tuple[str, str], np.ndarray] = field(default_factory=dict)


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
        if k in ("ledger", "derivatives", "time"):
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
    many = bal.sampling_balance() if n > 1 else None
    if many is not None:
        many.set_phase(bal.modes, bal.kinematics, bal.descending, bal.slide)
        snap = many._solve(np.asarray(t, dtype=float), [row for row in np.asarray(y, dtype=float)], "ledger")
        return _from_snapshot(snap, n)
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
    many.set_phase(bal.modes, bal.kinematics, bal.descending, bal.slide)
    return many._solve(np.asarray(t, dtype=float), [row for row in np.asarray(y, dtype=float)], want)


def join_tables(tables: list[SampleTable]) -> SampleTable:
    """Tables one after another (a name missing from a table is NaN there; a ledger term missing is zero)."""
    n = sum(tb.n for tb in tables)
    out = SampleTable(n)
    keys: list[str] = []
    seen: set[str] = set()
    lkeys: list[tuple[str, str]] = []
    lseen: set[tuple[str, str]] = set()
    width: dict[str, int] = {}
    for tb in tables:
        for k, v in tb.values.items():
            if k not in seen:
                seen.add(k)
                keys.append(k)
                width[k] = v.shape[1] if v.ndim == 2 else 0
        for k in tb.ledger:
            if k not in lseen:
                lseen.add(k)
                lkeys.append(k)
    for k in keys:
        col = np.full((n, width[k]) if width[k] else n, np.nan)
        at = 0
        for tb in tables:
            if k in tb.values:
                col[at:at + tb.n] = tb.values[k]
            at += tb.n
        out.values[k] = col
    for k in lkeys:
        col = np.zeros((n, 3))
        at = 0
        for tb in tables:
            if k in tb.ledger:
                col[at:at + tb.n] = tb.ledger[k]
            at += tb.n
        out.ledger[k] = col
    return out
