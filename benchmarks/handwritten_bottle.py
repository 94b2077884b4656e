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
PA, T_AIR, R_AIR = 101325.0, 288.15, 8314.32 / 28.9644   # dry air, US Standard Atmosphere 1976
RHO_A = PA / (R_AIR * T_AIR)          # still air at 15 degC, as the model's medium
V, FILL, GAUGE, RHO_L, BORE = 0.002, 0.33, 4.5e5, 998.2, 0.1
N_POLY, GAM, R_GAS, T0 = 1.4, 1.4, 287.05, 288.15
D_NOZ, CD_NOZ = 0.021, 0.98
M_DRY, D_REF, CD = 0.110, 0.1, 0.4
GUIDE, ELEV = 1.0, math.radians(80.0)
CRIT = (2 / (GAM + 1)) ** (GAM / (GAM - 1))
FLUX = math.sqrt(GAM / R_GAS) * (2 / (GAM + 1)) ** ((GAM + 1) / (2 * (GAM - 1)))


def bottle(fill=FILL, gauge=GAUGE, d_noz=D_NOZ, m_dry=M_DRY, *, nozzles=1, cant=0.0, cd=CD, elevation=ELEV):
    """The constants of one design (the four values a study varies; ``nozzles`` equal nozzles canted ``cant``
    radians off the axis in opposite directions, whose sideways thrusts cancel; drag coefficient, guide
    elevation), as a tuple the right-hand side unpacks."""
    a_n = CD_NOZ * math.pi * d_noz ** 2 / 4
    a_bore = math.pi * BORE ** 2 / 4
    # velocity of approach of the liquid in the bore (one outlet fed straight from the bore; none for several)
    k_app = 1.0 / (1.0 - (a_n / a_bore) ** 2) if nozzles == 1 else 1.0
    p0 = PA + gauge
    vg0 = V * (1 - fill)
    mg0 = p0 * vg0 / (R_GAS * T0)
    k_drag = 0.5 * RHO_A * cd * math.pi * D_REF ** 2 / 4
    axial = nozzles * math.cos(cant)          # thrust along the axis per nozzle's thrust
    return (a_n, a_bore, k_app, p0, mg0 / vg0, m_dry, k_drag, nozzles, axial, math.cos(elevation),
            math.sin(elevation), fill, mg0)


DEFAULT = bottle()


def rhs(t, y, phase, on_guide, b=DEFAULT):
    """phase 0 liquid, 1 gas, 2 none.  y = x, z, vx, vz, m_l, m_g; b the design (:func:`bottle`)."""
    x, z, vx, vz, ml, mg = y
    A_N, A_BORE, K_APP, P0, RHOG0, M_DRY, K_DRAG, NOZ, AXIAL, UX, UZ = b[:11]
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
        c = 2 * K_APP * A_N * AXIAL      # axial thrust per pascal of outlet pressure, all nozzles
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
            v = math.sqrt(2 * K_APP * dp / RHO_L)
            mdot = RHO_L * A_N * v
            thrust = AXIAL * mdot * v
            mdot = NOZ * mdot
    elif phase == 1 and p > PA:
        pr = PA / p
        if pr <= CRIT:
            mdot = A_N * p * FLUX / math.sqrt(T)
            ve = math.sqrt(GAM * R_GAS * 2 * T / (GAM + 1))
            thrust = AXIAL * (mdot * ve + (CRIT * p - PA) * A_N)
            mdot = NOZ * mdot
        else:
            xx = pr ** ((GAM - 1) / GAM)
            ve = math.sqrt(2 * GAM * R_GAS * T / (GAM - 1) * (1 - xx))
            mdot = PA / (R_GAS * T * xx) * ve * A_N
            thrust = AXIAL * mdot * ve
            mdot = NOZ * mdot
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


def fly(rtol=1e-9, atol=1e-9, method="DOP853", b=DEFAULT):
    """Fly design ``b`` (:func:`bottle`; the model's values by default) to ground impact; return (apogee m,
    flight time s, rhs evaluations)."""
    P0, RHOG0, UX, UZ, FILL, MG0 = b[3], b[4], b[9], b[10], b[11], b[12]
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
        sol = solve_ivp(rhs, (t, 60.0), y, method=method, rtol=rtol, atol=atol, args=(phase, on_guide, b),
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
