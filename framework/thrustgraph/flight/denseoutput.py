"""DOP853 whose dense output calls the right-hand side directly.

A full result needs every step's interpolant (its output samples fall in every step). scipy's DOP853 builds it
right after the step from three more right-hand sides at points inside the step (the dense output of
J. R. Dormand and P. J. Prince, as E. Hairer, S. P. Norsett and G. Wanner, *Solving Ordinary Differential
Equations I*, 2nd ed., 1993, sec. II.6 give it), each through the solver's wrapper (an evaluation count, a
conversion to an array) and thrustgraph's step guard (:mod:`thrustgraph.flight.stepguard`: failures told in
the model's terms). Those points lie inside a step the solver has accepted, where every stage was already
watched; :class:`Dop853Direct` is scipy's DOP853 with its interpolant built by scipy's own formula, line for line,
with the right-hand side called directly (``direct``, given to ``solve_ivp``). The numbers are scipy's
(``tests/test_dense_states.py`` compares the interpolants with ``==``); the solver's ``nfev`` leaves them out
(:func:`dense_evaluations` counts them: three a step).

Examples
--------
>>> import numpy as np
>>> from scipy.integrate import solve_ivp
>>> f = lambda t, y: [y[1], -y[0]]
>>> sol = solve_ivp(f, (0.0, 3.0), [0.0, 1.0], method=Dop853Direct, dense_output=True, direct=f)
>>> ref = solve_ivp(f, (0.0, 3.0), [0.0, 1.0], method="DOP853", dense_output=True)
>>> t = np.linspace(0.0, 3.0, 7)
>>> bool((sol.sol(t) == ref.sol(t)).all()), sol.nfev + dense_evaluations(sol) == ref.nfev
(True, True)
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np
from scipy.integrate import DOP853
from scipy.integrate._ivp.rk import Dop853DenseOutput

__all__ = ["Dop853Direct", "dense_evaluations"]


class Dop853Direct(DOP853):
    """scipy's DOP853; its dense output evaluates ``direct(t, y)`` (the right-hand side unwrapped)."""

    def __init__(self, fun: Callable, t0: float, y0: Any, t_bound: float, *, direct: Callable, **options: Any
                 ) -> None:
        super().__init__(fun, t0, y0, t_bound, **options)
        self.direct = direct

    def _dense_output_impl(self) -> Dop853DenseOutput:
        # scipy's DOP853._dense_output_impl, with self.direct for self.fun
        K = self.K_extended
        h = self.h_previous
        for s, (a, c) in enumerate(zip(self.A_EXTRA, self.C_EXTRA), start=self.n_stages + 1):
            dy = np.dot(K[:s].T, a[:s]) * h
            K[s] = self.direct(self.t_old + c * h, self.y_old + dy)
        F = np.empty((3 + len(self.D), self.n), dtype=self.y_old.dtype)
        f_old = K[0]
        delta_y = self.y - self.y_old
        F[0] = delta_y
        F[1] = h * f_old - delta_y
        F[2] = 2 * delta_y - h * (self.f + f_old)
        F[3:] = h * np.dot(self.D, K)
        return Dop853DenseOutput(self.t_old, self.t, self.y_old, F)


def dense_evaluations(sol: Any) -> int:
    """The right-hand sides a :class:`Dop853Direct` solution's dense output evaluated (three for each step's
    interpolant; none for a step of zero length)."""
    ode = getattr(sol, "sol", None)
    return len(DOP853.C_EXTRA) * sum(type(ip) is Dop853DenseOutput for ip in getattr(ode, "interpolants", ()))
