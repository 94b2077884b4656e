"""The least value of a function of one variable on an interval: Brent's method, in plain floats.

Brent's minimisation without derivatives (golden sections, with parabolic steps where the parabola through the
last three points is acceptable): R. P. Brent, *Algorithms for Minimization without Derivatives*, 1973, ch. 5;
the bounded form of G. E. Forsythe, M. A. Malcolm and C. B. Moler, *Computer Methods for Mathematical
Computations*, 1977 ("fmin"). :func:`bounded_minimum` takes the same steps in the same order as scipy's
``minimize_scalar(method="bounded")`` (``scipy.optimize._optimize._minimize_scalar_bounded``), on Python
floats instead of numpy scalars: the same iterates and the same answer (``tests/test_extremum.py`` checks
``==`` against scipy on drawn functions and intervals), without numpy's cost on every scalar operation. The
peaks of a flight's outcomes are refined with it a few times a run.

Examples
--------
>>> x, fx, n = bounded_minimum(lambda x: (x - 1.0) ** 2, 0.0, 3.0, 1e-10)
>>> round(x, 8), fx < 1e-16, n < 20
(1.0, True, True)
"""

from __future__ import annotations

import math
from typing import Callable

__all__ = ["bounded_minimum"]

_SQRT_EPS = math.sqrt(2.2e-16)
_GOLDEN = 0.5 * (3.0 - math.sqrt(5.0))


def _sign(x: float) -> float:
    """numpy's sign (NaN for NaN) plus 1 at zero, as scipy's step direction."""
    if x != x:
        return x
    return 1.0 if x >= 0.0 else -1.0


def bounded_minimum(fun: Callable[[float], float], lo: float, hi: float, xatol: float = 1e-5,
                    maxiter: int = 500) -> tuple[float, float, int]:
    """``(x, fun(x), evaluations)``: the least value of ``fun`` on ``[lo, hi]`` found to ``xatol`` in ``x`` (or
    after ``maxiter`` evaluations). ``lo <= hi``, both finite."""
    a, b = float(lo), float(hi)
    fulc = a + _GOLDEN * (b - a)
    nfc = xf = fulc
    rat = e = 0.0
    x = xf
    fx = fun(x)
    num = 1
    ffulc = fnfc = fx
    xm = 0.5 * (a + b)
    tol1 = _SQRT_EPS * abs(xf) + xatol / 3.0
    tol2 = 2.0 * tol1
    while abs(xf - xm) > (tol2 - 0.5 * (b - a)):
        golden = True
        if abs(e) > tol1:                      # a parabola through the last three points
            golden = False
            r = (xf - nfc) * (fx - ffulc)
            q = (xf - fulc) * (fx - fnfc)
            p = (xf - fulc) * q - (xf - nfc) * r
            q = 2.0 * (q - r)
            if q > 0.0:
                p = -p
            q = abs(q)
            r = e
            e = rat
            if abs(p) < abs(0.5 * q * r) and p > q * (a - xf) and p < q * (b - xf):
                rat = (p + 0.0) / q
                x = xf + rat
                if (x - a) < tol2 or (b - x) < tol2:
                    rat = tol1 * (_sign(xm - xf) if xm != xf else 1.0)
            else:
                golden = True
        if golden:                             # a golden section
            e = a - xf if xf >= xm else b - xf
            rat = _GOLDEN * e
        step = abs(rat)
        x = xf + _sign(rat) * (step if step != step or step > tol1 else tol1)
        fu = fun(x)
        num += 1
        if fu <= fx:
            if x >= xf:
                a = xf
            else:
                b = xf
            fulc, ffulc = nfc, fnfc
            nfc, fnfc = xf, fx
            xf, fx = x, fu
        else:
            if x < xf:
                a = x
            else:
                b = x
            if fu <= fnfc or nfc == xf:
                fulc, ffulc = nfc, fnfc
                nfc, fnfc = x, fu
            elif fu <= ffulc or fulc == xf or fulc == nfc:
                fulc, ffulc = x, fu
        xm = 0.5 * (a + b)
        tol1 = _SQRT_EPS * abs(xf) + xatol / 3.0
        tol2 = 2.0 * tol1
        if num >= maxiter:
            break
    return xf, fx, num
