"""A watch on the right-hand side the integrator calls: bounded work, and failures told in the model's terms.

Absurd but in-range values (a reference diameter of a kilometre, a medium a thousand times denser than
water) make a flight stiff: an explicit solver then creeps along in steps of microseconds and would take
hours. And a device model asked for a state outside its range fails in its own words ("T [nan K] below
Ttriple"). :class:`StepGuard` wraps the right-hand side of one flight and

1. counts evaluations: when a window of :data:`WINDOW` evaluations advances the flight by less than
   ``WINDOW * MIN_PACE`` seconds (the step size has collapsed), or the flight has used
   :data:`MAX_EVALUATIONS` in all, it ends the flight with an :class:`~thrustgraph.base.errors.IntegrationError`
   that names the time, the phase and the state changing fastest;
2. turns an exception raised inside the right-hand side into an IntegrationError that names the time of the
   failing evaluation, the phase, the states that left their range (not finite, or the one that moved most
   since the last good evaluation) and the device's own message;
3. remembers the first evaluation whose derivatives were not finite, so that a solver that gives up ("step
   size too small") is explained the same way (:meth:`StepGuard.explain`).

The bounds are counts of evaluations, never clock time, so a run is refused the same way on any machine. The
bundled scenarios use at most about 6,000 evaluations a flight and advance at least about 0.01 s of flight
per 1,000 evaluations (measured when the guard was written).

Examples
--------
>>> import numpy as np
>>> g = StepGuard(("vessel.mass", "vessel.temperature"), ("kg", "K"), t_end=10.0)
>>> f = g.watch(lambda t, y: -y, "blowdown")
>>> f(0.0, np.array([1.0, 300.0]))
array([  -1., -300.])
>>> def broken(t, y):
...     raise ValueError("T [nan K] below Ttriple")
>>> g.watch(broken, "blowdown")(0.5, np.array([0.5, float("nan")]))
Traceback (most recent call last):
...
thrustgraph.base.errors.IntegrationError: at t = 0.5 s in phase 'blowdown' the state vessel.temperature (not a number) left its valid range; the device model said: T [not-a-number K] below Ttriple. Fix: the vessel stopped being physical here: check its charge (pressure, temperature, fill) and its outlet size, or end the run sooner (run.end_time).
"""

from __future__ import annotations

import math
import re
from typing import Any, Callable, Sequence

import numpy as np

from ..base.errors import IntegrationError, shorten

__all__ = ["StepGuard", "WINDOW", "MIN_PACE", "MAX_EVALUATIONS"]

#: Evaluations per progress check.
WINDOW = 10_000
#: Least flight time (s) an evaluation must advance on average over a window: 10,000 evaluations must cover
#: at least 0.1 s of flight. The bundled scenarios cover 0.1 s in at most about 500.
MIN_PACE = 1e-5
#: Most right-hand-side evaluations one flight (one vehicle, all its phases) may use: about 9 times the most
#: any bundled scenario needs (5,665, the real-gas cold-gas track). At 30-150 us an evaluation that is at
#: most about 8 s of work.
MAX_EVALUATIONS = 50_000

_NONFINITE = re.compile(r"(?<![\w.])([-+]?)(nan|inf|infinity)(?!\w)", re.IGNORECASE)


def _words(text: str) -> str:
    """A device's message with its non-finite numbers in words ("T [nan K]" -> "T [not-a-number K]").

    >>> _words("The function value at x=0.0 is NaN; T [-inf K]")
    'The function value at x=0.0 is not-a-number; T [minus-infinite K]'
    """
    def word(m: re.Match) -> str:
        if m.group(2).lower() == "nan":
            return "not-a-number"
        return ("minus-" if m.group(1) == "-" else "") + "infinite"
    return _NONFINITE.sub(word, text)


_FIX = ("check the model for values far outside the usual range (a huge drag area or density, a tiny mass or "
        "outlet, an extreme pressure), or end the run sooner (run.end_time)")


class StepGuard:
    """Watches the right-hand side of one flight (all of its segments). See the module docstring."""

    def __init__(self, state_names: Sequence[str], units: Sequence[str] = (), *, t_end: float,
                 rtol: float = 1e-9, atol: Any = 1e-9) -> None:
        self.names = tuple(state_names)
        self.units = tuple(units) + ("",) * (len(self.names) - len(units))
        self.t_end = t_end
        self.rtol = rtol
        self.atol = np.broadcast_to(np.asarray(atol, dtype=float), (len(self.names),)) \
            if np.ndim(atol) == 0 or len(atol) == len(self.names) else np.full(len(self.names), float(np.min(atol)))
        self.count = 0
        self.mark_t: float | None = None
        self.last: tuple[float, np.ndarray] | None = None
        self.bad: tuple[float, np.ndarray, np.ndarray, str] | None = None

    @classmethod
    def for_system(cls, system: Any, *, t_end: float, rtol: float, atol: Any) -> "StepGuard":
        """A guard for one assembled vehicle (a :class:`~thrustgraph.flight.assembly.System`): its state names and units."""
        units = {"position": "m", "velocity": "m/s"}
        for n, kind in system.parsed.kinds.items():
            for sv in kind.states:
                units[f"{n}.{sv.name}"] = sv.unit
        return cls(system.state_names, [units.get(n, units.get(n.split(".")[0], "")) for n in system.state_names],
                   t_end=t_end, rtol=rtol, atol=atol)

    def watch(self, fun: Callable[[float, np.ndarray], np.ndarray], phase: str, system: Any = None) -> Callable:
        """``fun`` wrapped for solve_ivp, for a segment flown in ``phase`` (named in messages).

        ``system``, when given and different from the one the guard names, renames the states (the upper stage
        after a separation); the counts carry on.
        """
        if system is not None and tuple(system.state_names) != self.names:
            other = StepGuard.for_system(system, t_end=self.t_end, rtol=self.rtol, atol=float(np.min(self.atol)))
            self.names, self.units, self.atol, self.last = other.names, other.units, other.atol, None

        n_names = len(self.names)

        isfinite = math.isfinite

        def rhs(t: float, y: np.ndarray) -> np.ndarray:
            # called some thousand times a flight: the common path is kept to a few operations
            self.count = count = self.count + 1
            try:
                d = fun(t, y)
            except (ValueError, ArithmeticError, RuntimeError) as exc:
                raise self._failure(t, y, phase, exc) from None
            if count % WINDOW == 0:
                self._check_pace(t, y, d, phase)
            # the sum of the rates is finite exactly when every rate is (a list's builtin sum is ~20x cheaper
            # than numpy's for a few dozen floats); a list no longer than the names needs no slice
            total = sum(d) if type(d) is list and len(d) <= n_names else float(np.sum(d[:n_names]))
            if isfinite(total) or self.bad is not None:
                self.last = (t, y)
            else:
                self.bad = (t, np.array(y), np.array(d), phase)
            return d
        return rhs

    # -- what went wrong, in the model's terms ----------------------------------------------------------------
    def _show(self, k: int, value: float) -> str:
        u = self.units[k]
        if not math.isfinite(value):
            return f"{self.names[k]} ({'not a number' if math.isnan(value) else 'infinite'})"
        return f"{self.names[k]} ({value:.4g}{' ' + u if u else ''})"

    def _fastest(self, y: np.ndarray, d: np.ndarray) -> str:
        n = min(len(self.names), len(y), len(d))
        scale = self.atol[:n] + self.rtol * np.abs(y[:n])
        with np.errstate(all="ignore"):
            rate = np.abs(d[:n]) / np.where(scale > 0.0, scale, 1.0)
        rate = np.where(np.isfinite(rate), rate, np.inf)
        phys = sorted((k for k in range(n) if not self.names[k].startswith("audit.")), key=lambda j: -rate[j])
        return " then ".join(f"{self._show(k, float(y[k]))}, changing at {float(d[k]):.3g} "
                             f"{self.units[k] + '/s' if self.units[k] else 'per s'}" for k in phys[:2])

    def _out_of_range(self, y: np.ndarray) -> str:
        n = min(len(self.names), len(y))
        bad = [k for k in range(n) if not math.isfinite(float(y[k]))]
        if not bad and self.last is not None:
            y0 = self.last[1]
            with np.errstate(all="ignore"):
                moved = np.abs(y[:n] - y0[:n]) / (np.abs(y0[:n]) + self.atol[:n])
            phys = [k for k in range(n) if not self.names[k].startswith("audit.")]
            if phys:
                bad = [max(phys, key=lambda j: moved[j])]
        if not bad:
            return "the vehicle"
        states = ", ".join(self._show(k, float(y[k])) for k in bad[:3])
        return f"the state{'s' if len(bad) > 1 else ''} {states}"

    def _component(self, text: str) -> str:
        for name in self.names:
            if name in text and "." in name and not name.startswith(("position.", "velocity.", "audit.")):
                return name.split(".", 1)[0]
        return ""

    def _failure(self, t: float, y: np.ndarray, phase: str, exc: BaseException) -> IntegrationError:
        said = _words(shorten(str(exc) or type(exc).__name__, 200).strip("'\"").rstrip("."))
        if self.bad is not None and not np.all(np.isfinite(y[:len(self.names)])):
            # the states went bad because a rate did first: name that one
            return IntegrationError(f"{self.explain('the flight cannot go on.')}; then the device model said: "
                                    f"{said}. Fix: {_FIX}.")
        where = self._out_of_range(y)
        comp = self._component(where)
        fix = f"the {comp} stopped being physical here: check its charge (pressure, temperature, fill) and its " \
              "outlet size, or end the run sooner (run.end_time)" if comp else _FIX
        verb = "left their valid range" if where.startswith("the states") else "left its valid range"
        return IntegrationError(f"at t = {t:.6g} s in phase {phase!r} {where} {verb}; the device "
                                f"model said: {said}. Fix: {fix}.")

    def _check_pace(self, t: float, y: np.ndarray, d: np.ndarray, phase: str) -> None:
        if self.count >= MAX_EVALUATIONS:
            raise IntegrationError(
                f"the flight used {self.count} evaluations of its equations by t = {t:.6g} s (phase {phase!r}), "
                f"the most one flight may use; the states changing fastest are {self._fastest(y, d)}. Fix: {_FIX}.")
        if self.mark_t is not None and t - self.mark_t < WINDOW * MIN_PACE:
            raise IntegrationError(
                f"the step size collapsed at t = {t:.6g} s in phase {phase!r}: the last {WINDOW} evaluations "
                f"advanced the flight by only {t - self.mark_t:.3g} s; the states changing fastest are "
                f"{self._fastest(y, d)}. Fix: {_FIX}.")
        self.mark_t = t

    def explain(self, message: str) -> str:
        """Why the solver gave up (its ``message``), in the model's terms when a derivative was not finite."""
        message = _words(message)
        if self.bad is None:
            return message
        t, y, d, phase = self.bad
        n = min(len(self.names), len(d))
        ks = [k for k in range(n) if not math.isfinite(float(d[k])) and not self.names[k].startswith("audit.")]
        states = ", ".join(self._show(k, float(y[k])) for k in ks[:3]) or self._out_of_range(y)
        return (f"{message} The rate of change of {states} stopped being a finite number at t = {t:.6g} s "
                f"in phase {phase!r}")
