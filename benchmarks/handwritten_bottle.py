"""A hand-written, single-function scipy model of the bundled bottle rocket, for the speed benchmark.

It is what an engineer would write for this one vehicle without thrustgraph: a planar (x, z) flight, the same
physics as the thrustgraph devices (polytropic ullage, Bernoulli liquid jet with the inertial head solved in closed
form, isentropic choked/unchoked gas blowdown with pressure thrust, quadratic drag, a launch guide), the same
events and the same integrator settings. Values are those of models/bottle-rocket.toml.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import solve_ivp

G = 9.80665
PA, RHO_A = 101325.0, 1.225
V, FILL, GAUGE, RHO_L, BORE = 0.002, 0.33, 4.5e5, 998.2, 0.1
N_POLY, GAM, R_GAS, T0 = 1.4, 1.4, 287.05, 288.15
D_NOZ, CD_NOZ = 0.021, 0.98
M_DRY, D_REF, CD = 0.110, 0.1, 0.4
GUIDE, ELEV = 1.0, math.radians(80.0)

A_N = CD_NOZ * math.pi * D_NOZ ** 2 / 4
A_BORE = math.pi * BORE ** 2 / 4
K_DRAG = 0.5 * RHO_A * CD * math.pi * D_REF ** 2 / 4
P0 = PA + GAUGE
VG0 = V * (1 - FILL)
MG0 = P0 * VG0 / (R_GAS * T0)
RHOG0 = MG0 / VG0
CRIT = (2 / (GAM + 1)) ** (GAM / (GAM - 1))
FLUX = math.sqrt(GAM / R_GAS) * (2 / (GAM + 1)) ** ((GAM + 1) / (2 * (GAM - 1)))
UX, UZ = math.cos(ELEV), math.sin(ELEV)


def rhs(t, y, phase, on_guide):
    """phase 0 liquid, 1 gas, 2 none.  y = x, z, vx, vz, m_l, m_g."""
    x, z, vx, vz, ml, mg = y
    sp = math.hypot(vx, vz)
    if on_guide or sp <= 1.0:
        ex, ez = UX, UZ
    else:
        ex, ez = vx / sp, vz / sp
    vg = V - ml / RHO_L
    rg = mg / vg
    r = rg / RHOG0 if rg > 1e-12 * RHOG0 else 1e-12
    p = P0 * r ** N_POLY
    T = T0 * r ** (N_POLY - 1)
    M = M_DRY + ml + mg
    Dx, Dz = -K_DRAG * sp * vx, -K_DRAG * sp * vz
    mdot = thrust = 0.0
    if phase == 0:
        h = ml / (RHO_L * A_BORE)
        c = 2 * A_N
        if on_guide:
            # alpha (M - c rho h) = c (p - pa + rho h g sin) - M g sin + D.e ; f.d = alpha + g sin
            De = Dx * ex + Dz * ez
            alpha = (c * (p - PA + RHO_L * h * G * ez) - M * G * ez + De) / (M - c * RHO_L * h)
            if alpha < 0 and (x * UX + z * UZ) <= 0 and (vx * UX + vz * UZ) <= 0:
                alpha = 0.0
            fd = alpha + G * ez
        else:
            # free: f.d = (a - g).e = (T + D.e)/M  ->  T (1 - c rho h / M) = c (p - pa + rho h D.e / M)
            De = Dx * ex + Dz * ez
            thrust_guess = c * (p - PA + RHO_L * h * De / M) / (1 - c * RHO_L * h / M)
            fd = (thrust_guess + De) / M
        dp = p - PA + RHO_L * h * fd
        if dp > 0:
            v = math.sqrt(2 * dp / RHO_L)
            mdot = RHO_L * A_N * v
            thrust = mdot * v
    elif phase == 1 and p > PA:
        pr = PA / p
        if pr <= CRIT:
            mdot = A_N * p * FLUX / math.sqrt(T)
            ve = math.sqrt(GAM * R_GAS * 2 * T / (GAM + 1))
            thrust = mdot * ve + (CRIT * p - PA) * A_N
        else:
            xx = pr ** ((GAM - 1) / GAM)
            ve = math.sqrt(2 * GAM * R_GAS * T / (GAM - 1) * (1 - xx))
            mdot = PA / (R_GAS * T * xx) * ve * A_N
            thrust = mdot * ve
    Fx = thrust * ex + Dx
    Fz = thrust * ez + Dz - M * G
    if on_guide:
        alpha = (Fx * UX + Fz * UZ) / M
        if alpha < 0 and (x * UX + z * UZ) <= 0 and (vx * UX + vz * UZ) <= 0:
            alpha = 0.0
        ax, az = alpha * UX, alpha * UZ
    else:
        ax, az = Fx / M, Fz / M
    dml = -mdot if phase == 0 else 0.0
    dmg = -mdot if phase == 1 else 0.0
    return [vx, vz, ax, az, dml, dmg]


def fly(rtol=1e-9, atol=1e-9, method="DOP853"):
    """Fly to ground impact; return (apogee m, flight time s, rhs evaluations)."""
    y = np.array([0.0, 0.0, 0.0, 0.0, V * FILL * RHO_L, MG0])
    t, phase, on_guide, nfev, apogee = 0.0, 0, True, 0, 0.0
    descending = False
    while True:
        ev = []
        if phase == 0:
            e1 = lambda t, y, *a: y[4]
            e1.terminal, e1.direction = True, -1
            ev.append(("liquid", e1))
        if phase == 1:
            def e2(t, y, *a):
                vg = V - y[4] / RHO_L
                return P0 * (y[5] / vg / RHOG0) ** N_POLY - PA
            e2.terminal, e2.direction = True, -1
            ev.append(("gas", e2))
        if on_guide:
            e3 = lambda t, y, *a: y[0] * UX + y[1] * UZ - GUIDE - 1e-9
            e3.terminal, e3.direction = True, 1
            ev.append(("guide", e3))
        else:
            if not descending:
                e4 = lambda t, y, *a: y[3]
                e4.terminal, e4.direction = True, -1
                ev.append(("apogee", e4))
            e5 = lambda t, y, *a: y[1]
            e5.terminal, e5.direction = True, -1
            ev.append(("impact", e5))
        sol = solve_ivp(rhs, (t, 60.0), y, method=method, rtol=rtol, atol=atol, args=(phase, on_guide),
                        events=[f for _, f in ev])
        nfev += sol.nfev
        t, y = sol.t[-1], sol.y[:, -1].copy()
        if sol.status != 1:
            break
        which = [ev[k][0] for k, te in enumerate(sol.t_events) if len(te)][0]
        if which == "liquid":
            phase = 1
        elif which == "gas":
            phase = 2
        elif which == "guide":
            on_guide = False
        elif which == "apogee":
            apogee, descending = y[1], True
        elif which == "impact":
            break
    return apogee, t, nfev


if __name__ == "__main__":  # pragma: no cover
    print(fly())
