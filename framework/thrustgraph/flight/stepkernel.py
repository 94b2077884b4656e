"""The ensemble's per-design step arithmetic, in numpy or compiled with numba.

The vectorised Dormand-Prince 5(4) integrator (:mod:`thrustgraph.flight.ensemble`) spends much of its time on
generic arithmetic over the designs: the stage combinations, the error norm and the step control, the running
maxima, the sign tests that find a maximum inside a step and its location (Newton on the dense output), and the
location of the events whose values are one to three rows of the dense output and read no balance (apogee, ground
impact, a height maximum; guide exit, back at the guide's foot, at rest on a guide or track). None of it knows any
physics: the right-hand side (the one balance, :mod:`thrustgraph.balance.balance`) stays in numpy and is called
between these pieces.

Each piece has two bodies with the same formulas in the same order of operations: a numpy one over whole arrays
(the reference, always there) and a loop over designs compiled by numba (the optional extra ``fast``; installed
with ``pip install 'thrustgraph[fast]'``), which does each design's work in one pass instead of one pass of memory
per numpy operation. :data:`KERNEL` says which one runs: the environment variable ``THRUSTGRAPH_KERNEL``
(``numpy``, ``numba`` or ``auto``, the default: numba where it is installed) is read when this module is first
imported; :func:`use` changes it for the process (tests and benchmarks compare the two). The numbers the two give
are the same bit for bit (the loops add the terms in numpy's order; numpy's einsum adds its terms one after the
other, and no operation is fused into a multiply-add) except where a body calls a function numpy computes with
its own vector library: the step factor's power ``err ** -1/5`` is taken by numpy on both paths for that reason.

The compiled loops are cached on disk (numba's ``cache=True``) in the folder of thrustgraph's other caches:
``THRUSTGRAPH_CACHE_DIR``, else ``$XDG_CACHE_HOME/thrustgraph``, else ``~/.cache/thrustgraph`` (``numba`` inside
it; ``off`` compiles in every process). The first call in a fresh cache compiles them (a few seconds, once).

The coefficients are J. R. Dormand and P. J. Prince, "A family of embedded Runge-Kutta formulae", J. Comput.
Appl. Math. 6 (1980) 19-26, with the dense output of L. F. Shampine, "Some practical Runge-Kutta formulas",
Math. Comp. 46 (1986) 135-150, as scipy's ``RK45`` holds them (copied from scipy.integrate._ivp.rk).

Examples
--------
>>> import numpy as np
>>> K = np.ones((7, 2, 3))
>>> out = np.empty((2, 3))
>>> out = combine(DOPRI_B, 6, np.full(3, 0.5), np.zeros((2, 3)), K, out)     # the weights sum to 1
>>> [round(float(v), 12) for v in out[0]]
[0.5, 0.5, 0.5]
>>> KERNEL in ("numpy", "numba")
True
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Callable

import numpy as np

from ..base.errors import ModelError

try:
    import numba
except ImportError:          # the optional extra "fast" is not installed: the numpy bodies run
    numba = None

__all__ = ["DOPRI_C", "DOPRI_A", "DOPRI_B", "DOPRI_E", "DOPRI_P", "JERK_ENDS", "KERNEL", "AVAILABLE", "use",
           "ready", "cache_folder", "rowsum", "illinois", "combine", "error_norm", "step_control", "maxima",
           "illinois_row", "norm_max", "illinois_along", "phase_code"]

# Dormand-Prince 5(4) (scipy RK45's arrays).
DOPRI_C = np.array([0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1])
DOPRI_A = np.array([
    [0, 0, 0, 0, 0],
    [1 / 5, 0, 0, 0, 0],
    [3 / 40, 9 / 40, 0, 0, 0],
    [44 / 45, -56 / 15, 32 / 9, 0, 0],
    [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0],
    [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656]])
DOPRI_B = np.array([35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84])
DOPRI_E = np.array([-71 / 57600, 0, 71 / 16695, -71 / 1920, 17253 / 339200, -22 / 525, 1 / 40])
DOPRI_P = np.array([
    [1, -8048581381 / 2820520608, 8663915743 / 2820520608, -12715105075 / 11282082432],
    [0, 0, 0, 0],
    [0, 131558114200 / 32700410799, -68118460800 / 10900136933, 87487479700 / 32700410799],
    [0, -1754552775 / 470086768, 14199869525 / 1410260304, -10690763975 / 1880347072],
    [0, 127303824393 / 49829197408, -318862633887 / 49829197408, 701980252875 / 199316789632],
    [0, -282668133 / 205662961, 2019193451 / 616988883, -1453857185 / 822651844],
    [0, 40617522 / 29380423, -110615467 / 29380423, 69997945 / 29380423]])
#: the jerk times the step at the start (theta = 0) and end (theta = 1) of a step, from the dense output's
#: velocity v0 + h (q0 theta + q1 theta^2 + q2 theta^3 + q3 theta^4), q_k = sum_s DOPRI_P[s, k] K_s:
#: h da/dt = 2 q1 + 6 q2 theta + 12 q3 theta^2
JERK_ENDS = np.column_stack([2.0 * DOPRI_P[:, 1], 2.0 * DOPRI_P[:, 1] + 6.0 * DOPRI_P[:, 2] + 12.0 * DOPRI_P[:, 3]])
#: step control as scipy's RK45: safety factor, smallest and largest factor
SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0
_EPS = float(np.finfo(float).eps)
#: whether numba is installed
AVAILABLE = numba is not None


def cache_folder() -> Path | None:
    """thrustgraph's cache folder (as the real-gas tables keep theirs), or None when ``THRUSTGRAPH_CACHE_DIR``
    is ``off``.

    >>> isinstance(cache_folder(), (Path, type(None)))
    True
    """
    value = os.environ.get("THRUSTGRAPH_CACHE_DIR")
    if value is not None:
        return None if value.strip().lower() in ("", "off") else Path(value)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "thrustgraph"


def _choice(value: str | None) -> str:
    """The kernel that runs for a value of ``THRUSTGRAPH_KERNEL``."""
    v = (value or "auto").strip().lower()
    where = "THRUSTGRAPH_KERNEL (environment variable)"
    if v not in ("auto", "numpy", "numba"):
        raise ModelError(where, f"{value!r} is not a kernel", "set it to numpy, numba or auto, or unset it")
    if v == "numba" and not AVAILABLE:
        raise ModelError(where, "numba is asked for but is not installed",
                         "pip install 'thrustgraph[fast]', or set THRUSTGRAPH_KERNEL=numpy or auto")
    return "numba" if v == "numba" or (v == "auto" and AVAILABLE) else "numpy"


# ---------------------------------------------------------------------------------------------------------------
# numpy bodies (the reference)

def rowsum(x: np.ndarray) -> np.ndarray:
    """Sum over the first axis, row after row: the same rounding for every design whatever the array's size
    (numpy's own reduction sums a contiguous axis pairwise, so a one-design array would round differently)."""
    acc = x[0].copy()
    for r in range(1, len(x)):
        acc += x[r]
    return acc


def _combine_np(coeffs, m, h, Y, K, out):
    # einsum, not BLAS: a threaded BLAS on a busy 2-core machine made this 100x slower (measured)
    ns, n = Y.shape
    assert out.flags.c_contiguous   # else reshape would copy and the sum would be lost
    np.einsum("s,sk->k", coeffs[:m], K.reshape(7, ns * n)[:m], out=out.reshape(-1))
    out *= h
    out += Y
    return out


def _error_norm_np(E, K, h, Y, Yn, rtol, atol, err, tmp, tmp2):
    ns, n = Y.shape
    np.einsum("s,sk->k", E, K.reshape(7, ns * n), out=err.reshape(-1))
    err *= h
    np.abs(Y, out=tmp)
    np.maximum(tmp, np.abs(Yn, out=tmp2), out=tmp)
    tmp *= rtol
    tmp += atol
    err /= tmp
    err *= err
    en = np.sqrt(rowsum(err) / ns)
    return np.where(np.isfinite(en), en, np.inf)


def _step_control_np(en, fac, h, h_old, live, rejected):
    acc = live & (en < 1.0)
    rej = live & ~acc
    fac_acc = np.where(en == 0.0, MAX_FACTOR, np.minimum(MAX_FACTOR, fac))
    fac_acc = np.where(rejected, np.minimum(1.0, fac_acc), fac_acc)
    h_next = np.where(acc, h * fac_acc, np.where(rej, h * np.maximum(MIN_FACTOR, fac), h_old))
    return acc, rej, h_next, np.where(acc, False, np.where(rej, True, rejected))


def _maxima_np(JE, acc, Y, F, K, Yn, an, ev_pos, Ye, Fe, ane, Qe, th_end, h, prop, vmax, amax, zmax, burn):
    n = len(acc)
    v0x, v0y, v0z = Y[3], Y[4], Y[5]
    a0x, a0y, a0z = F[3], F[4], F[5]
    evi = np.flatnonzero(ev_pos >= 0)
    if len(evi):
        v1, a1 = Yn[3:6].copy(), K[6][3:6].copy()
        an = an.copy()
        z1 = Yn[2].copy()
        v1[:, evi] = Ye[3:6]
        a1[:, evi] = Fe[3:6]
        an[evi] = ane
        z1[evi] = Ye[2]
    else:
        v1, a1, z1 = Yn[3:6], K[6][3:6], Yn[2]
    v1x, v1y, v1z = v1
    a1x, a1y, a1z = a1
    np.maximum(vmax, np.sqrt(v1x * v1x + v1y * v1y + v1z * v1z), out=vmax, where=acc)
    np.maximum(amax, an, out=amax, where=acc)
    np.maximum(zmax, z1, out=zmax, where=acc)
    # a height maximum inside the step: v_z goes from + to -
    zin = acc & (v0z > 0.0) & (v1z < 0.0)
    # a speed maximum inside the step: v . a goes from + to -
    inner = acc & (v0x * a0x + v0y * a0y + v0z * a0z > 0.0) & (v1x * a1x + v1y * a1y + v1z * a1z < 0.0)
    # an acceleration maximum inside the step: the dense output's rate of |a| goes from + to -; the jerk times
    # the step (its sign is all the test needs) at both ends of whole steps in one pass over the stages
    kv = K[:, 3:6, :].reshape(7, 3 * n)           # a view: each stage's velocity rows are contiguous
    jh = np.einsum("sp,sk->pk", JE, kv).reshape(2, 3, n)
    j0, j1 = jh[0], jh[1]
    if len(evi):          # steps cut at an event end at theta < 1
        Qv = Qe[3:6]      # their dense-output coefficients, velocity rows
        tc = th_end[evi]
        j1[:, evi] = 2.0 * Qv[:, 1] + 6.0 * Qv[:, 2] * tc + 12.0 * Qv[:, 3] * tc * tc
    ainner = acc & (a0x * j0[0] + a0y * j0[1] + a0z * j0[2] > 0.0) & (a1x * j1[0] + a1y * j1[1] + a1z * j1[2] < 0.0)
    np.add(burn, h * th_end, out=burn, where=acc & prop)
    return zin, inner, ainner


def _illinois_np(y0, h, q, scale, ga, gb, t0):
    def g(f):
        th = f * scale   # Horner's rule, as the ensemble's dense output
        return y0 + h * (th * (q[0] + th * (q[1] + th * (q[2] + th * q[3]))))
    return illinois(g, ga, gb, t0, h)


def illinois(g: Callable[[np.ndarray], np.ndarray], ga: np.ndarray, gb: np.ndarray, t0: np.ndarray,
             hh: np.ndarray) -> np.ndarray:
    """Vectorised Illinois (modified regula falsi) for the zero of ``g(theta)`` on [0, 1], per design; ``ga``,
    ``gb`` its values at the ends; returns the later end of the final bracket (the post-crossing side).

    >>> float(illinois(lambda th: th - 0.25, np.array([-0.25]), np.array([0.75]), np.zeros(1), np.ones(1))[0])
    0.25
    """
    a = np.zeros(len(ga))
    b = np.ones(len(ga))
    fa, fb = ga.astype(float).copy(), gb.astype(float).copy()
    done = (fa == 0.0)
    root = np.where(done, 0.0, np.where(fb == 0.0, 1.0, np.nan))
    done |= fb == 0.0
    tol = np.maximum(4 * _EPS * np.maximum(np.abs(t0), 1.0) / np.where(hh > 0, hh, 1.0), 1e-13)
    for _ in range(80):
        if np.all(done):
            break
        # the secant point; where fb = fa it is inf or nan, and the bracket test below sends it to the
        # midpoint, as any point not strictly inside the bracket
        with np.errstate(divide="ignore", invalid="ignore"):
            c = b - fb * (b - a) / (fb - fa)
        c = np.where((c > np.minimum(a, b)) & (c < np.maximum(a, b)), c, 0.5 * (a + b))
        fc = g(c)
        exact = (fc == 0.0) & ~done
        if exact.any():
            root = np.where(exact, c, root)
            done |= exact
        opp = np.sign(fc) != np.sign(fb)       # root between c and b
        # Illinois: halve the retained end's value when the same end is kept twice
        fa_new = np.where(opp, fb, fa * 0.5)
        a_new = np.where(opp, b, a)
        a, fa = np.where(done, a, a_new), np.where(done, fa, fa_new)
        b, fb = np.where(done, b, c), np.where(done, fb, fc)
        conv = ~done & (np.abs(b - a) <= tol)
        # the event has happened at the end where g has its post-crossing sign: take the later end
        root = np.where(conv, np.maximum(a, b), root)
        done |= conv
    root = np.where(np.isnan(root), np.maximum(a, b), root)
    return root


def _norm_max_np(C, hi, iters):
    deg = C.shape[1] - 1

    def parts(th):
        p, d1, d2 = C[:, deg], 0.0, 0.0
        for k in range(deg - 1, -1, -1):       # Horner's rule with the first two derivatives
            d2 = d2 * th + 2.0 * d1
            d1 = d1 * th + p
            p = p * th + C[:, k]
        return p, d1, d2

    p0, d0, _ = parts(np.zeros_like(hi))
    p1, d1, _ = parts(hi)
    phi0, phi1 = rowsum(p0 * d0), rowsum(p1 * d1)
    den = phi0 - phi1
    th = np.clip(hi * phi0 / np.where(den > 0.0, den, 1.0), 0.0, hi)
    best = np.zeros_like(hi)
    for _ in range(iters):
        p, d1, d2 = parts(th)
        best = np.maximum(best, rowsum(p * p))
        dphi = rowsum(d1 * d1 + p * d2)
        step = rowsum(p * d1) / np.where(dphi < 0.0, dphi, -1.0)
        th = np.clip(th - np.where(dphi < 0.0, step, 0.0), 0.0, hi)
    p, _, _ = parts(th)
    return np.sqrt(np.maximum(best, rowsum(p * p)))


def _along_value(d0, d1, d2, x0, u, off, way, rest):
    """The guide's and track's event values from three dense-output rows (numpy body): the distance along the
    guide less ``off`` (positions d0..d2 from the launch point ``x0``), or ``rest``: the speed along it (d0..d2
    velocities) with a speed of exactly 0 counting as ``way`` 1e-300 (as thrustgraph.flight.integrate.rest_value)."""
    if rest:
        v = d0 * u[0] + d1 * u[1] + d2 * u[2]
        return np.where(v != 0.0, v, way * 1e-300)
    return (d0 - x0[0]) * u[0] + (d1 - x0[1]) * u[1] + (d2 - x0[2]) * u[2] - off


def _illinois_along_np(y0, h, q, x0, u, off, way, rest, ga, gb, t0):
    def g(theta):
        th = theta
        d = [y0[r] + h * (th * (q[r, 0] + th * (q[r, 1] + th * (q[r, 2] + th * q[r, 3])))) for r in range(3)]
        return _along_value(d[0], d[1], d[2], x0, u, off, way, rest)
    return illinois(g, ga, gb, t0, h)


def _phase_code_np(kin, slide, modes, old, has_old):
    code = kin.astype(np.int64) * 3 + (np.sign(slide) + 1.0).astype(np.int64)     # slide: -1, 0, +1
    for k in range(len(modes)):
        code = code * 64 + modes[k]
    uniform = len(code) == 0 or int(code.min()) == int(code.max())
    return code, uniform, has_old and np.array_equal(code, old)


# ---------------------------------------------------------------------------------------------------------------
# compiled bodies: the same formulas, design by design

def _compiled(fn):
    """``fn`` compiled by numba (cached in :func:`cache_folder`), or None without numba. The loops are compiled at
    their first call (lazily): importing this module compiles nothing."""
    if numba is None:
        return None
    folder = cache_folder()
    saved = numba.config.CACHE_DIR
    try:
        if folder is not None:
            # the cache's folder is fixed when the function is decorated: set it for this module's functions only
            numba.config.CACHE_DIR = str(folder / "numba")
            try:
                return numba.njit(cache=True, nogil=True)(fn)
            except RuntimeError:     # numba found no folder it may write to: compiled in each process instead
                pass
        return numba.njit(nogil=True)(fn)
    finally:
        numba.config.CACHE_DIR = saved


def _nmax(a, b):
    """np.maximum of two floats (NaN wins)."""
    return a if (a >= b or a != a) else b


def _nmin(a, b):
    """np.minimum of two floats (NaN wins)."""
    return a if (a <= b or a != a) else b


def _sgn(x):
    """np.sign of a float (NaN stays NaN)."""
    if x > 0.0:
        return 1.0
    if x < 0.0:
        return -1.0
    if x == 0.0:
        return 0.0
    return x


def _clip(x, lo, hi):
    """np.clip of a float (NaN stays NaN; numpy's order of comparisons, so the sign of a zero too)."""
    t = x if (x != x or x > lo) else lo
    return t if (t != t or t < hi) else hi


def _bracket_start(fa, fb, t0, h):
    """One design's Illinois iteration on the step fraction [0, 1] (the numpy body's rules, design by design):
    ``(root, done, tol)`` from the values at the ends; the root is NaN until found."""
    done = fa == 0.0
    root = 0.0 if done else (1.0 if fb == 0.0 else np.nan)
    done = done or fb == 0.0
    tol = _nmax(4 * _EPS * _nmax(abs(t0), 1.0) / (h if h > 0 else 1.0), 1e-13)
    return root, done, tol


def _bracket_point(a, b, fa, fb):
    """The next point: the secant's, or the middle where the secant leaves the bracket."""
    den = fb - fa
    num = fb * (b - a)
    if den != 0.0:
        c = b - num / den
    else:      # numpy's x / 0: inf or nan, never inside the bracket
        c = np.nan
    if not (c > _nmin(a, b) and c < _nmax(a, b)):
        c = 0.5 * (a + b)
    return c


def _bracket_update(a, b, fa, fb, c, fc, tol):
    """``(a, b, fa, fb, root, done)`` once the value at ``c`` is ``fc`` (the Illinois rule: the value kept at an
    end that stays is halved)."""
    if fc == 0.0:
        return a, b, fa, fb, c, True
    if _sgn(fc) != _sgn(fb):
        fa, a = fb, b
    else:
        fa = fa * 0.5
    b, fb = c, fc
    if abs(b - a) <= tol:
        return a, b, fa, fb, _nmax(a, b), True
    return a, b, fa, fb, np.nan, False


if numba is not None:      # the helpers compiled, for the compiled loops that call them
    _nmax, _nmin, _sgn, _clip = (_compiled(f) for f in (_nmax, _nmin, _sgn, _clip))
    _bracket_start, _bracket_point, _bracket_update = (_compiled(f) for f in (_bracket_start, _bracket_point,
                                                                               _bracket_update))


#: designs per block of the compiled loops: a block's partial sums stay in the first-level cache, and the innermost
#: loops run over contiguous designs (vectorised by the compiler without reordering any sum)
_BLOCK = 512


def _combine_loop(coeffs, m, h, Y, K, out):
    ns, n = Y.shape
    acc = np.empty(_BLOCK)
    for r in range(ns):
        for i0 in range(0, n, _BLOCK):
            nb = min(_BLOCK, n - i0)
            a = acc[:nb]
            for i in range(nb):
                a[i] = 0.0
            for s in range(m):
                c = coeffs[s]
                Ks = K[s, r, i0:i0 + nb]
                for i in range(nb):
                    a[i] += c * Ks[i]
            Yr, hr, o = Y[r, i0:i0 + nb], h[i0:i0 + nb], out[r, i0:i0 + nb]
            for i in range(nb):
                o[i] = a[i] * hr[i] + Yr[i]
    return out


def _error_norm_loop(E, K, h, Y, Yn, rtol, atol, err, tmp, tmp2):
    ns, n = Y.shape
    en = np.empty(n)
    e_b = np.empty(_BLOCK)
    tot_b = np.empty(_BLOCK)
    for i0 in range(0, n, _BLOCK):
        nb = min(_BLOCK, n - i0)
        e, tot, hr = e_b[:nb], tot_b[:nb], h[i0:i0 + nb]
        for i in range(nb):
            tot[i] = 0.0        # 0 + the first square: numpy's row sum from its first row, exactly
        for r in range(ns):
            for i in range(nb):
                e[i] = 0.0
            for s in range(7):
                c = E[s]
                Ks = K[s, r, i0:i0 + nb]
                for i in range(nb):
                    e[i] += c * Ks[i]
            Yr, Ynr = Y[r, i0:i0 + nb], Yn[r, i0:i0 + nb]
            for i in range(nb):
                a, b = abs(Yr[i]), abs(Ynr[i])
                big = a if (a >= b or a != a) else b        # np.maximum, written out: the loop vectorises
                v = e[i] * hr[i] / (big * rtol + atol)
                tot[i] += v * v
        o = en[i0:i0 + nb]
        for i in range(nb):
            v = np.sqrt(tot[i] / ns)
            o[i] = v if (v - v) == 0.0 else np.inf
    return en


def _step_control_loop(en, fac, h, h_old, live, rejected):
    n = len(en)
    acc = np.zeros(n, dtype=np.bool_)
    rej = np.zeros(n, dtype=np.bool_)
    h_next = np.empty(n)
    rej_new = np.empty(n, dtype=np.bool_)
    for i in range(n):
        a = live[i] and en[i] < 1.0
        r = live[i] and not a
        acc[i], rej[i] = a, r
        if a:
            f = MAX_FACTOR if en[i] == 0.0 else _nmin(MAX_FACTOR, fac[i])
            if rejected[i]:
                f = _nmin(1.0, f)
            h_next[i] = h[i] * f
            rej_new[i] = False
        elif r:
            h_next[i] = h[i] * _nmax(MIN_FACTOR, fac[i])
            rej_new[i] = True
        else:
            h_next[i] = h_old[i]
            rej_new[i] = rejected[i]
    return acc, rej, h_next, rej_new


def _maxima_loop(JE, acc, Y, F, K, Yn, an, ev_pos, Ye, Fe, ane, Qe, th_end, h, prop, vmax, amax, zmax, burn):
    n = len(acc)
    zin = np.zeros(n, dtype=np.bool_)
    inner = np.zeros(n, dtype=np.bool_)
    ainner = np.zeros(n, dtype=np.bool_)
    j0 = np.empty(3)
    j1 = np.empty(3)
    for i in range(n):
        if not acc[i]:
            continue
        k = ev_pos[i]
        if k >= 0:
            v1x, v1y, v1z, z1 = Ye[3, k], Ye[4, k], Ye[5, k], Ye[2, k]
            a1x, a1y, a1z, a1n = Fe[3, k], Fe[4, k], Fe[5, k], ane[k]
        else:
            v1x, v1y, v1z, z1 = Yn[3, i], Yn[4, i], Yn[5, i], Yn[2, i]
            a1x, a1y, a1z, a1n = K[6, 3, i], K[6, 4, i], K[6, 5, i], an[i]
        vmax[i] = _nmax(vmax[i], np.sqrt(v1x * v1x + v1y * v1y + v1z * v1z))
        amax[i] = _nmax(amax[i], a1n)
        zmax[i] = _nmax(zmax[i], z1)
        v0x, v0y, v0z = Y[3, i], Y[4, i], Y[5, i]
        a0x, a0y, a0z = F[3, i], F[4, i], F[5, i]
        zin[i] = v0z > 0.0 and v1z < 0.0
        inner[i] = (v0x * a0x + v0y * a0y + v0z * a0z > 0.0) and (v1x * a1x + v1y * a1y + v1z * a1z < 0.0)
        for c in range(3):
            s0 = 0.0
            s1 = 0.0
            for s in range(7):
                s0 += JE[s, 0] * K[s, 3 + c, i]
                s1 += JE[s, 1] * K[s, 3 + c, i]
            j0[c] = s0
            j1[c] = s1
        if k >= 0:
            tc = th_end[i]
            for c in range(3):
                j1[c] = 2.0 * Qe[3 + c, 1, k] + 6.0 * Qe[3 + c, 2, k] * tc + 12.0 * Qe[3 + c, 3, k] * tc * tc
        ainner[i] = (a0x * j0[0] + a0y * j0[1] + a0z * j0[2] > 0.0) and \
            (a1x * j1[0] + a1y * j1[1] + a1z * j1[2] < 0.0)
        if prop[i]:
            burn[i] = burn[i] + h[i] * th_end[i]
    return zin, inner, ainner


def _illinois_loop(y0, h, q, scale, ga, gb, t0):
    m = len(ga)
    out = np.empty(m)
    for i in range(m):
        hi, sc, yi = h[i], scale[i], y0[i]
        q0, q1, q2, q3 = q[0, i], q[1, i], q[2, i], q[3, i]
        a, b = 0.0, 1.0
        fa, fb = ga[i], gb[i]
        root, done, tol = _bracket_start(fa, fb, t0[i], hi)
        for _ in range(80):
            if done:
                break
            c = _bracket_point(a, b, fa, fb)
            th = c * sc
            fc = yi + hi * (th * (q0 + th * (q1 + th * (q2 + th * q3))))
            a, b, fa, fb, r, done = _bracket_update(a, b, fa, fb, c, fc, tol)
            if done:
                root = r
        if root != root:
            root = _nmax(a, b)
        out[i] = root
    return out


def _norm_max_loop(C, hi, iters):
    nd, deg1, m = C.shape
    deg = deg1 - 1
    out = np.empty(m)
    p = np.empty(nd)
    d1 = np.empty(nd)
    d2 = np.empty(nd)
    for i in range(m):
        hii = hi[i]
        # the ends: P . P' at 0 and at hi
        phis = np.empty(2)
        for e in range(2):
            th = 0.0 if e == 0 else hii
            for c in range(nd):
                pc, a1, a2 = C[c, deg, i], 0.0, 0.0
                for k in range(deg - 1, -1, -1):
                    a2 = a2 * th + 2.0 * a1
                    a1 = a1 * th + pc
                    pc = pc * th + C[c, k, i]
                p[c], d1[c] = pc, a1
            acc = p[0] * d1[0]
            for c in range(1, nd):
                acc += p[c] * d1[c]
            phis[e] = acc
        phi0, phi1 = phis[0], phis[1]
        den = phi0 - phi1
        th = _clip(hii * phi0 / (den if den > 0.0 else 1.0), 0.0, hii)
        best = 0.0
        for it in range(iters + 1):
            for c in range(nd):
                pc, a1, a2 = C[c, deg, i], 0.0, 0.0
                for k in range(deg - 1, -1, -1):
                    a2 = a2 * th + 2.0 * a1
                    a1 = a1 * th + pc
                    pc = pc * th + C[c, k, i]
                p[c], d1[c], d2[c] = pc, a1, a2
            pp = p[0] * p[0]
            for c in range(1, nd):
                pp += p[c] * p[c]
            best = _nmax(best, pp)
            if it == iters:
                break
            dphi = d1[0] * d1[0] + p[0] * d2[0]
            for c in range(1, nd):
                dphi += d1[c] * d1[c] + p[c] * d2[c]
            pd = p[0] * d1[0]
            for c in range(1, nd):
                pd += p[c] * d1[c]
            step = pd / (dphi if dphi < 0.0 else -1.0)
            th = _clip(th - (step if dphi < 0.0 else 0.0), 0.0, hii)
        out[i] = np.sqrt(best)
    return out


def _illinois_along_loop(y0, h, q, x0, u, off, way, rest, ga, gb, t0):
    m = len(ga)
    out = np.empty(m)
    d = np.empty(3)
    for i in range(m):
        hi = h[i]
        a, b = 0.0, 1.0
        fa, fb = ga[i], gb[i]
        root, done, tol = _bracket_start(fa, fb, t0[i], hi)
        for _ in range(80):
            if done:
                break
            c = _bracket_point(a, b, fa, fb)
            th = c
            for r in range(3):
                d[r] = y0[r, i] + hi * (th * (q[r, 0, i] + th * (q[r, 1, i] + th * (q[r, 2, i] + th * q[r, 3, i]))))
            if rest:
                v = d[0] * u[0, i] + d[1] * u[1, i] + d[2] * u[2, i]
                fc = v if v != 0.0 else way * 1e-300
            else:
                fc = (d[0] - x0[0, i]) * u[0, i] + (d[1] - x0[1, i]) * u[1, i] + (d[2] - x0[2, i]) * u[2, i] - off[i]
            a, b, fa, fb, r, done = _bracket_update(a, b, fa, fb, c, fc, tol)
            if done:
                root = r
        if root != root:
            root = _nmax(a, b)
        out[i] = root
    return out


def _phase_code_loop(kin, slide, modes, old, has_old):
    n = len(kin)
    code = np.empty(n, dtype=np.int64)
    nm = modes.shape[0]
    same = has_old and len(old) == n
    for i in range(n):
        sl = slide[i]
        c = np.int64(kin[i]) * 3 + (2 if sl > 0.0 else (0 if sl < 0.0 else 1))
        for k in range(nm):
            c = c * 64 + np.int64(modes[k, i])
        code[i] = c
        if same and old[i] != c:
            same = False
    uniform = True
    for i in range(1, n):
        if code[i] != code[0]:
            uniform = False
            break
    return code, uniform, same


_BODIES = {
    "combine": (_combine_np, _combine_loop),
    "error_norm": (_error_norm_np, _error_norm_loop),
    "step_control": (_step_control_np, _step_control_loop),
    "maxima": (_maxima_np, _maxima_loop),
    "illinois_row": (_illinois_np, _illinois_loop),
    "norm_max": (_norm_max_np, _norm_max_loop),
    "illinois_along": (_illinois_along_np, _illinois_along_loop),
    "phase_code": (_phase_code_np, _phase_code_loop),
}
_COMPILED = {name: _compiled(loop) for name, (_, loop) in _BODIES.items()}
_ACTIVE: dict[str, Callable] = {name: body for name, (body, _) in _BODIES.items()}
#: the kernel that runs: "numpy" or "numba"
KERNEL = "numpy"
_UNUSABLE: ModelError | None = None


def use(kernel: str | None = None) -> str:
    """Run the numpy bodies (``"numpy"``) or the compiled ones (``"numba"``; ``"auto"``: numba where installed);
    None reads ``THRUSTGRAPH_KERNEL``. Returns the kernel that now runs; a value that names no kernel, or numba
    where it is not installed, raises :class:`~thrustgraph.base.errors.ModelError` and changes nothing.

    >>> use("numpy")
    'numpy'
    >>> use() in ("numpy", "numba")
    True
    """
    global KERNEL, _UNUSABLE
    KERNEL = _choice(os.environ.get("THRUSTGRAPH_KERNEL") if kernel is None else kernel)
    _UNUSABLE = None
    for name, (np_body, _) in _BODIES.items():
        _ACTIVE[name] = _COMPILED[name] if KERNEL == "numba" else np_body
    return KERNEL


def ready() -> None:
    """Raise the error of a ``THRUSTGRAPH_KERNEL`` that names no usable kernel (read when this module was
    imported, where raising would break every import of the ensemble); the ensemble calls it when it starts."""
    if _UNUSABLE is not None:
        raise _UNUSABLE


def combine(coeffs: np.ndarray, m: int, h: np.ndarray, Y: np.ndarray, K: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``out = Y + h * sum_s coeffs[s] K[s]`` over the first ``m`` stages (``K`` of shape (7, states, designs),
    ``Y`` and ``out`` (states, designs) and C-contiguous); returns ``out``."""
    return _ACTIVE["combine"](coeffs, m, h, Y, K, out)


def error_norm(K: np.ndarray, h: np.ndarray, Y: np.ndarray, Yn: np.ndarray, rtol: float, atol: float,
               err: np.ndarray, tmp: np.ndarray, tmp2: np.ndarray) -> np.ndarray:
    """The RMS over the states of the local error estimate ``h sum_s DOPRI_E[s] K[s]`` scaled by
    ``atol + rtol max(|Y|, |Yn|)``, per design (inf where it is not finite, as scipy's solvers); ``err``, ``tmp``
    and ``tmp2`` are scratch arrays of the shape of ``Y`` (the numpy body's)."""
    return _ACTIVE["error_norm"](DOPRI_E, K, h, Y, Yn, float(rtol), float(atol), err, tmp, tmp2)


def step_control(en: np.ndarray, h: np.ndarray, h_old: np.ndarray, live: np.ndarray,
                 rejected: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Accept or reject the steps ``h`` of the designs ``live`` by their error norms ``en`` and propose the next
    step (scipy RK45's rule: safety 0.9, factors 0.2-10, no growth right after a rejection); ``h_old`` is kept
    for the other designs. Returns (accepted, rejected now, next step, rejected flag to carry)."""
    fac = SAFETY * en ** (-1.0 / 5.0)       # numpy's power on both paths (see the module's docstring)
    return _ACTIVE["step_control"](en, fac, h, h_old, live, rejected)


def maxima(acc: np.ndarray, Y: np.ndarray, F: np.ndarray, K: np.ndarray, Yn: np.ndarray, an: np.ndarray,
           ev_pos: np.ndarray, Ye: np.ndarray, Fe: np.ndarray, ane: np.ndarray, Qe: np.ndarray, th_end: np.ndarray,
           h: np.ndarray, prop: np.ndarray, vmax: np.ndarray, amax: np.ndarray, zmax: np.ndarray,
           burn: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The running maxima over the accepted steps ``acc``, updated in place: speed ``vmax``, acceleration
    ``amax`` (``an`` at the step's end), height ``zmax``, and the burn time ``burn`` (``h th_end`` added where
    ``prop``). A step cut at an event (``ev_pos`` >= 0: its column in ``Ye``, ``Fe``, ``ane`` and in the dense
    coefficients ``Qe`` (states, 4, events)) ends at the event point, the fraction ``th_end`` of the step.
    Returns the designs whose height, speed or acceleration has a maximum inside the step (found by the caller on
    the dense output): v_z, v . a, or a . da/dt changing from + to -."""
    return _ACTIVE["maxima"](JERK_ENDS, acc, Y, F, K, Yn, an, ev_pos, Ye, Fe, ane, Qe, th_end, h, prop,
                             vmax, amax, zmax, burn)


def illinois_row(y0: np.ndarray, h: np.ndarray, q: np.ndarray, scale: np.ndarray, ga: np.ndarray, gb: np.ndarray,
                 t0: np.ndarray) -> np.ndarray:
    """:func:`illinois` for the zero of one row of the dense output, ``y0 + h (th q0 + th^2 q1 + th^3 q2 +
    th^4 q3)`` at ``th = scale theta`` (``q`` of shape (4, designs)), per design, with no Python call per
    iteration on the compiled path.

    >>> q = np.array([[1.0], [0.0], [0.0], [0.0]])
    >>> float(illinois_row(np.array([-0.5]), np.ones(1), q, np.ones(1), np.array([-0.5]), np.array([0.5]),
    ...                    np.zeros(1))[0])
    0.5
    """
    return _ACTIVE["illinois_row"](y0, h, q, scale, ga, gb, t0)


def norm_max(C: np.ndarray, hi: np.ndarray, iters: int = 5) -> np.ndarray:
    """Largest |P(theta)| on [0, hi] per design, for the vector polynomial P(theta) = sum_k C[:, k] theta^k
    (C of shape (components, degree + 1, designs)) whose square rises at 0 and falls at hi, so that it has an
    interior maximum: Newton on the root of P . P' from the regula-falsi point of the ends, iterates kept in
    [0, hi]; returns the largest |P| met (each is a lower bound of the maximum; Newton converges quadratically,
    so the last is the maximum to rounding).

    >>> C = np.array([[[1.0], [2.0], [-1.0]]])        # P = 1 + 2 theta - theta^2: largest 2 at theta = 1
    >>> float(norm_max(C, np.array([1.5]))[0])
    2.0
    """
    return _ACTIVE["norm_max"](np.ascontiguousarray(C, dtype=float), np.ascontiguousarray(hi, dtype=float), iters)


def illinois_along(y0: np.ndarray, h: np.ndarray, q: np.ndarray, x0: np.ndarray, u: np.ndarray, off: np.ndarray,
                   way: float, rest: bool, ga: np.ndarray, gb: np.ndarray, t0: np.ndarray) -> np.ndarray:
    """:func:`illinois` for the events of a guide or track, which read three rows of the dense output (``y0``
    (3, designs), ``q`` (3, 4, designs)) and no balance: the distance along the unit vector ``u`` from ``x0`` less
    ``off`` (guide exit, back at its foot), or with ``rest`` the speed along ``u`` (zero counts as ``way``
    1e-300: the vehicle at rest)."""
    c = np.ascontiguousarray
    return _ACTIVE["illinois_along"](c(y0, dtype=float), c(h, dtype=float), c(q, dtype=float), c(x0, dtype=float),
                                     c(u, dtype=float), c(off, dtype=float), float(way), bool(rest),
                                     c(ga, dtype=float), c(gb, dtype=float), c(t0, dtype=float))


def phase_code(kin: np.ndarray, slide: np.ndarray, modes: np.ndarray,
               old: np.ndarray | None) -> tuple[np.ndarray, bool, bool]:
    """Each design's whole phase as one integer (constraint, the way it slides, the mode of every moded component:
    designs in the same phase get the same code), whether every design has the same, and whether the codes equal
    ``old`` (None: no codes before).

    >>> code, uniform, same = phase_code(np.array([1, 1]), np.array([0.0, 1.0]), np.zeros((1, 2), np.int8), None)
    >>> code.tolist(), uniform, same
    ([256, 320], False, False)
    """
    return _ACTIVE["phase_code"](kin, np.ascontiguousarray(slide, dtype=float), modes,
                                 _NO_CODE if old is None else old, old is not None)


_NO_CODE = np.empty(0, dtype=np.int64)


try:
    use()
except ModelError as _exc:     # the numpy bodies stay in place; fly_designs raises it (ready)
    _UNUSABLE = _exc
