"""Changes of a component's signals (a nozzle's flow regime, a separation flag) as entries of the event log.

A component kind names the signals whose changes people should see in ``logged``
(:class:`~thrustgraph.kinds.component.LoggedSignal`). After a run, :func:`signal_events` looks for changes between
the output samples of each segment and locates each one on the segment's dense output by bisection on the
balance's own snapshot (to 1e-9 of the time), so the log gives when it happened, not the next output sample.
A change at a segment boundary (an event that switched a mode) is logged at that instant. The signals never
feed back into the motion: this reads them after the run and costs nothing during it.

Examples
--------
>>> from thrustgraph import fly, load_model
>>> from thrustgraph.models.modelfile import bundled_models
>>> r = fly(load_model(bundled_models()["cold-gas-track"]))
>>> [e.detail for e in r.events if e.name == "nozzle regime"][:2]
['underexpanded or matched -> overexpanded', 'overexpanded -> normal shock inside']
"""

from __future__ import annotations

import math
from typing import Any, Iterable

import numpy as np

from ..balance.sampling import dense_states
from .result import Event

__all__ = ["signal_events", "MAX_CHANGES"]

#: Changes logged per signal at most (a flag that chatters is cut short with a note).
MAX_CHANGES = 40


def _locate(bal: Any, ph: Any, sol: Any, key: str, t_lo: float, t_hi: float, before: float) -> float:
    """The time of the change of ``key`` between two samples: bisection on the dense output (to 1e-9 of t)."""
    if getattr(sol, "sol", None) is None:
        return t_hi
    bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
    for _ in range(80):
        if t_hi - t_lo <= 1e-9 * max(1.0, abs(t_hi)):
            break
        mid = 0.5 * (t_lo + t_hi)
        v = bal.evaluate(mid, dense_states(sol, mid)).get(key, math.nan)
        if v == before:
            t_lo = mid
        else:
            t_hi = mid
    return t_hi


def signal_events(pieces: Iterable[tuple]) -> list[Event]:
    """Log entries of the changes of every logged signal.

    ``pieces`` holds, per segment in time order, ``(phase, solution, balance, t, values)``: the segment's
    output sample times and its sampled signals (name -> array).
    """
    out: list[Event] = []
    last: dict[str, float] = {}
    counts: dict[str, int] = {}
    for ph, sol, bal, tt, values in pieces:
        for n, cls in bal.system.parsed.kinds.items():
            for ls in getattr(cls, "logged", ()):
                key = f"{n}.{ls.key}"
                v = values.get(key)
                if v is None or len(v) == 0:
                    continue
                v = np.asarray(v, dtype=float)
                found: list[tuple[float, float, float]] = []
                if key not in last:
                    if float(v[0]) in ls.at_start:
                        found.append((float(tt[0]), math.nan, float(v[0])))
                elif math.isfinite(last[key]) and math.isfinite(v[0]) and v[0] != last[key]:
                    found.append((float(tt[0]), last[key], float(v[0])))
                for i in np.nonzero(v[1:] != v[:-1])[0]:
                    if math.isfinite(v[i]) and math.isfinite(v[i + 1]):
                        t = _locate(bal, ph, sol, key, float(tt[i]), float(tt[i + 1]), float(v[i]))
                        found.append((t, float(v[i]), float(v[i + 1])))
                last[key] = float(v[-1])
                for t, old, new in found:
                    counts[key] = counts.get(key, 0) + 1
                    if counts[key] > MAX_CHANGES:
                        if counts[key] == MAX_CHANGES + 1:
                            out.append(Event(t, ls.event, n, f"further changes of {ls.key} not logged"))
                        continue
                    text = f"starts {ls.words(new)}" if math.isnan(old) else f"{ls.words(old)} -> {ls.words(new)}"
                    out.append(Event(t, ls.event, n, text))
    return out
