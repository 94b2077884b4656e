"""Isentropic flow of a perfect gas in a duct of varying area, and the normal shock.

Relations (Ames Research Staff, *Equations, Tables, and Charts for Compressible
Flow*, NACA Report 1135, 1953: the isentropic relations and Table I; the
normal-shock relations and Table II)::

    T/T0   = 1 / (1 + (g - 1)/2 M^2)
    p/p0   = (T/T0)^(g/(g - 1))
    rho/rho0 = (T/T0)^(1/(g - 1))
    A/A*   = (1/M) [(2/(g + 1)) (1 + (g - 1)/2 M^2)]^((g + 1)/(2 (g - 1)))

    normal shock from M1 > 1:
    M2^2        = (1 + (g - 1)/2 M1^2) / (g M1^2 - (g - 1)/2)
    p2/p1       = 1 + 2 g/(g + 1) (M1^2 - 1)
    p02/p01     = [((g + 1)/2 M1^2) / (1 + (g - 1)/2 M1^2)]^(g/(g - 1))
                  * [2 g/(g + 1) M1^2 - (g - 1)/(g + 1)]^(-1/(g - 1))

The area relation has two roots for every A/A* > 1: a subsonic and a
supersonic Mach number; :func:`mach_from_area_ratio` returns the branch asked
for. Functions take plain floats (SI or dimensionless), or, with ``ops`` the array namespace of
:mod:`thrustgraph.base.xp`, numpy arrays of designs: one definition for both (the roots by
:mod:`thrustgraph.base.roots`, whose iterates are those of one design alone).

Examples
--------
>>> round(pressure_ratio(2.0, 1.4), 5), round(area_ratio(2.0, 1.4), 4)
(0.1278, 1.6875)
>>> round(mach_from_area_ratio(2.0, 1.4, "subsonic"), 4), round(mach_from_area_ratio(2.0, 1.4, "supersonic"), 4)
(0.3059, 2.1972)
"""

from __future__ import annotations

from typing import Any

from thrustgraph.base.roots import illinois, newton
from thrustgraph.base.xp import scalar_ops

__all__ = ["temperature_ratio", "pressure_ratio", "density_ratio", "area_ratio", "mach_from_area_ratio",
           "mach_from_pressure_ratio", "critical_pressure_ratio", "mass_flux_factor", "normal_shock",
           "shock_mach_from_total_pressure_ratio"]


def temperature_ratio(mach: float, gamma: float) -> float:
    """T/T0 at Mach ``mach``.

    >>> round(temperature_ratio(1.0, 1.4), 6)
    0.833333
    """
    return 1.0 / (1.0 + 0.5 * (gamma - 1.0) * mach * mach)


def pressure_ratio(mach: float, gamma: float) -> float:
    """p/p0 at Mach ``mach``.

    >>> round(pressure_ratio(1.0, 1.4), 6)
    0.528282
    """
    return temperature_ratio(mach, gamma) ** (gamma / (gamma - 1.0))


def density_ratio(mach: float, gamma: float) -> float:
    """rho/rho0 at Mach ``mach``.

    >>> round(density_ratio(1.0, 1.4), 6)
    0.633938
    """
    return temperature_ratio(mach, gamma) ** (1.0 / (gamma - 1.0))


def area_ratio(mach: float, gamma: float) -> float:
    """A/A*: duct area over the sonic (throat) area at Mach ``mach`` > 0.

    >>> round(area_ratio(5.0, 1.4), 12)    # (1/5) * 5^3 exactly
    25.0
    """
    k = 0.5 * (gamma + 1.0) / (gamma - 1.0)
    return (2.0 / (gamma + 1.0) * (1.0 + 0.5 * (gamma - 1.0) * mach * mach)) ** k / mach


def mach_from_area_ratio(ratio: Any, gamma: Any, branch: str = "supersonic", ops: Any = scalar_ops) -> Any:
    """The Mach number at area ratio A/A* = ``ratio`` >= 1 on the ``subsonic`` or ``supersonic`` branch.

    Newton's iteration on A/A*(M) - ratio, which is convex in M on both branches: from below on the subsonic
    branch, from M0 = (2/(g+1))^k / ratio (A/A* >= ratio there), and from above on the supersonic branch, from
    the root of the large-Mach bound ((g-1)/(g+1))^k M^(2k-1) = ratio (k = (g+1)/(2(g-1))): both converge
    monotonically.

    >>> round(mach_from_area_ratio(25.0, 1.4), 9)
    5.0
    """
    if not ops.arrays and ratio < 1.0:
        raise ValueError(f"an area ratio A/A* of {ratio!r} is below 1: no isentropic flow has it")
    if branch not in ("subsonic", "supersonic"):
        raise ValueError(f"branch must be 'subsonic' or 'supersonic', got {branch!r}")
    g = gamma
    k = 0.5 * (g + 1.0) / (g - 1.0)
    c = 2.0 / (g + 1.0)
    b = (g - 1.0) / (g + 1.0)
    r = ops.maximum(ratio, 1.0)
    m0 = c ** k / r if branch == "subsonic" else (r / b ** k) ** (1.0 / (2.0 * k - 1.0))

    def fdf(m):
        q = c * (1.0 + 0.5 * (g - 1.0) * m * m)
        a = q ** k / m
        return a - r, a * (k * c * (g - 1.0) * m / q - 1.0 / m)

    return ops.where(r == 1.0, 1.0, newton(fdf, m0, ops))


def mach_from_pressure_ratio(ratio: Any, gamma: Any, ops: Any = scalar_ops) -> Any:
    """The Mach number at which p/p0 = ``ratio`` (0 < ratio <= 1).

    >>> round(mach_from_pressure_ratio(0.528282, 1.4), 5)
    1.0
    """
    return ops.sqrt(ops.maximum(2.0 / (gamma - 1.0) * (ratio ** (-(gamma - 1.0) / gamma) - 1.0), 0.0))


def critical_pressure_ratio(gamma: float) -> float:
    """p*/p0: the pressure ratio at the sonic throat.

    >>> round(critical_pressure_ratio(1.3), 6)
    0.545728
    """
    return (2.0 / (gamma + 1.0)) ** (gamma / (gamma - 1.0))


def mass_flux_factor(gamma: Any, ops: Any = scalar_ops) -> Any:
    """Gamma(g) = sqrt(g) (2/(g+1))^((g+1)/(2(g-1))): choked mdot = A* p0 Gamma / sqrt(R T0).

    >>> round(mass_flux_factor(1.4), 6)
    0.684731
    """
    return ops.sqrt(gamma) * (2.0 / (gamma + 1.0)) ** ((gamma + 1.0) / (2.0 * (gamma - 1.0)))


def normal_shock(mach1: Any, gamma: Any, ops: Any = scalar_ops) -> tuple[Any, Any, Any]:
    """Downstream Mach number, static pressure ratio p2/p1 and total pressure ratio p02/p01 of a normal shock.

    >>> [round(x, 4) for x in normal_shock(2.0, 1.4)]
    [0.5774, 4.5, 0.7209]
    """
    m2 = mach1 * mach1
    g = gamma
    M2 = ops.sqrt((1.0 + 0.5 * (g - 1.0) * m2) / (g * m2 - 0.5 * (g - 1.0)))
    p21 = 1.0 + 2.0 * g / (g + 1.0) * (m2 - 1.0)
    p0 = ((0.5 * (g + 1.0) * m2) / (1.0 + 0.5 * (g - 1.0) * m2)) ** (g / (g - 1.0)) * \
        (2.0 * g / (g + 1.0) * m2 - (g - 1.0) / (g + 1.0)) ** (-1.0 / (g - 1.0))
    return M2, p21, p0


def shock_mach_from_total_pressure_ratio(ratio: Any, gamma: Any, ops: Any = scalar_ops) -> Any:
    """The upstream Mach number of the normal shock whose total pressure ratio p02/p01 is ``ratio`` (0 < ratio <= 1).

    p02/p01 falls from 1 as M1 rises from 1: the root is bracketed between 1 and the first of 2, 4, 8... where
    it has fallen below ``ratio``, and found by :func:`thrustgraph.base.roots.illinois`.

    >>> round(shock_mach_from_total_pressure_ratio(normal_shock(2.5, 1.4)[2], 1.4), 9)
    2.5
    """
    r = ops.clip(ratio, 1e-300, 1.0)
    weak = r >= 1.0

    def f(m):
        return normal_shock(m, gamma, ops)[2] - r

    hi = 2.0 + 0.0 * r
    f_hi = f(hi)
    for _ in range(1100):
        grow = ops.where(weak, False, f_hi > 0.0)
        if not ops.any(grow):
            break
        hi = ops.where(grow, 2.0 * hi, hi)
        f_hi = f(hi)
    m = illinois(f, 1.0 + 0.0 * r, hi, 1.0 - r, f_hi, ops, xtol=1e-14, rtol=8.9e-16, done=weak)
    return ops.where(weak, 1.0, m)
