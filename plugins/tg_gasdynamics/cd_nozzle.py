"""The converging-diverging (de Laval) nozzle: a flow element that discharges gas (or liquid) to the surroundings.

Model (one-dimensional, isentropic outside shocks, perfect gas with the
upstream condition's exponent g and gas constant R; NACA Report 1135, 1953)
-----------------------------------------------------------------------------
The throat area A_t and the area ratio eps = A_e/A_t fix three pressure
ratios p_a/p0 (p0, T0 the stagnation state upstream):

* ``pr1 = p/p0`` at the **subsonic** root of A/A* = eps: above it the flow is
  subsonic throughout (a venturi) and leaves at ambient pressure;
* ``pr3 = p/p0`` at the **supersonic** root: the design (full expansion) exit
  pressure;
* ``pr2 = pr3 * (p2/p1)`` of a normal shock standing at the exit at the
  supersonic exit Mach number.

Regimes by the back-pressure ratio ``r = p_a/p0``:

1. ``r >= pr1`` subsonic: ``v_e = sqrt(2 g R T0/(g-1) (1 - r^((g-1)/g)))``,
   mdot = Cd rho_e v_e A_e, p_e = p_a.
2. ``pr2 < r < pr1`` **normal shock inside the diverging section**: the throat
   is choked, the exit is subsonic at p_e = p_a. The exit Mach number follows
   from the mass flow and T0 (conserved through the shock):
   ``M_e^2 (1 + (g-1)/2 M_e^2) = (A_t p0 Gamma / (p_a A_e sqrt(g)))^2``; the
   shock position from the total-pressure loss p0e/p0 = p_a/(p0 (p/p0)(M_e)).
3. ``r <= pr2`` supersonic exit at the design Mach number, p_e = pr3 p0,
   overexpanded when p_e < p_a, underexpanded when p_e > p_a.

Choked mass flow: ``mdot = Cd A_t p0 Gamma(g)/sqrt(R T0)``,
``Gamma = sqrt(g) (2/(g+1))^((g+1)/(2(g-1)))``. Thrust along the axis
(Sutton & Biblarz, *Rocket Propulsion Elements*, ch. 3)::

    F = lambda mdot v_e + (p_e - p_a) A_e,   lambda = (1 + cos alpha)/2

The divergence factor lambda of a conical exit (half angle alpha) scales the
axial momentum; the exit velocity the element reports is the axial one,
lambda v_e, so the ledger and the momentum audit use the same value.

**Shock and separation.** Regime 2 is handled with the normal shock above
(NACA 1135 area relation and normal-shock relations) and flagged. Real
nozzles separate before the 1-D shock reaches the exit: the signal
``separation`` is 1 when the full-flowing exit pressure falls below
``separation_pressure_ratio`` (default 0.4) times ambient, a Summerfield-type
criterion (Summerfield, Foster & Swan, "Flow separation in overexpanded
supersonic exhaust nozzles", Jet Propulsion 24, 1954; the value 0.4 and the
citation are from memory: common practice). In that range the thrust
printed is the full-flowing (or normal-shock) estimate, which a separated
nozzle usually exceeds: treat it as uncertain. Signals per nozzle:
``regime`` (0 no flow, 1 subsonic, 2 shock inside, 3 overexpanded,
4 underexpanded or matched), ``exit_mach``, ``shock_area_ratio`` (NaN without
a shock), ``separation`` (0 or 1), ``thrust_coefficient`` F/(p0 A_t), and the
throat state ``throat_pressure``, ``throat_temperature``, ``throat_velocity``
(Pa, K, m/s).

**Throat state.** Choked (regimes 2-4) the throat is sonic, M_t = 1, and
p*/p0 = (2/(g+1))^(g/(g-1)), T*/T0 = 2/(g+1), v* = sqrt(g R T*) (Anderson,
*Modern Compressible Flow*, 3rd ed., 2003, eqs. 3.35 and 3.36 for a sonic
reference state; equation numbers from memory). Unchoked (regime 1) the
throat Mach number is the subsonic root of A/A* = (A_e/A*)(M_e) / eps, and
p_t, T_t, v_t follow from the isentropic relations at M_t. A liquid passes
the throat at v_t = eps v_e (continuity) with p_t = p0 - rho v_t^2 / 2
(Bernoulli; below the liquid's vapour pressure it would cavitate: not
checked). With no flow the throat holds the upstream pressure and
temperature at rest. The ideal (isentropic) throat state: the discharge
coefficient scales the mass flow only.

Assumptions and limits: quasi-steady, adiabatic, one-dimensional flow; the
discharge coefficient scales the mass flow only (the exit state follows the
geometric area ratio); the jump of the divergence loss across the
normal-shock regime boundary is left as it is ((1 - lambda) mdot (v1 - v2),
about 1 % of thrust at 15 degrees). A real gas enters through its effective
exponent rho a^2/p and R_eff = p/(rho T) at the stagnation state (see the gas
tank): exact for the choked mass flux at the stagnation state's density and
sound speed to first order, approximate for the expansion. A liquid is passed
through the exit area by Bernoulli (the diverging part as an ideal diffuser;
cavitation at the throat is not checked: use a convergent nozzle for liquids).

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> P = ConvergingDivergingNozzle.params_class()
>>> p = P(throat_diameter=0.002, area_ratio=50.0, half_angle=0.0, discharge_coefficient=1.0,
...       separation_pressure_ratio=0.4, direction=(-1.0, 0.0, 0.0))
>>> f = ConvergingDivergingNozzle.build_flow(p, scalar_ops)
>>> up = (10e5, 293.15, 11.5, 1.4, 8314.462618 / 28.0134, 0.0, 0.0)
>>> mdot, ve, pe, Ae, c = f.flow(up, 0.0, 0)
>>> round((mdot * ve + pe * Ae) / (10e5 * math.pi * 0.002 ** 2 / 4), 4)     # C_F in vacuum
1.7292
"""

from __future__ import annotations

import math
from typing import Any, NamedTuple

import numpy as np

from thrustgraph.kinds.component import ComponentKind, Flow, FlowFns, LoggedSignal
from thrustgraph.base.xp import scalar_ops
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Number, Quantity, Vector

from .isentropic import (area_ratio, mach_from_area_ratio, mass_flux_factor, normal_shock, pressure_ratio,
                         shock_mach_from_total_pressure_ratio, temperature_ratio)
from .performance import divergence_factor

__all__ = ["ConvergingDivergingNozzle", "NO_FLOW", "SUBSONIC", "SHOCK_INSIDE", "OVEREXPANDED", "UNDEREXPANDED"]

NO_FLOW, SUBSONIC, SHOCK_INSIDE, OVEREXPANDED, UNDEREXPANDED = 0, 1, 2, 3, 4


class ConvergingDivergingNozzle(ComponentKind):
    """Converging-diverging nozzle with shock-in-nozzle handling and a separation flag (module docstring)."""

    kind = "converging-diverging-nozzle"
    role = "flow"
    signal_units = {"regime": "", "exit_mach": "", "shock_area_ratio": "", "separation": "",
                    "thrust_coefficient": "", "throat_pressure": "Pa", "throat_temperature": "K",
                    "throat_velocity": "m/s"}
    summary = "converging-diverging nozzle: choked/unchoked, shock inside, pressure thrust, conical loss"
    parameters = (
        Quantity("throat_diameter", "mm", low=1e-3, high=10_000.0, doc="diameter of the throat"),
        Number("area_ratio", low=0.0, low_open=True, high=10_000.0, doc="exit area over throat area, A_e/A_t (1 or more)"),
        Quantity("half_angle", "deg", default="15 deg", low=0.0, high=45.0, high_open=True,
                 doc="half angle of the conical divergent section (0 for an ideal contoured nozzle)"),
        # A well-made nozzle passes 0.97-0.99 of the ideal flow (common practice, no source).
        Number("discharge_coefficient", default=0.99, low=0.0, low_open=True, high=1.0,
               doc="ratio of actual to ideal mass flow"),
        # Summerfield-type criterion p_e/p_a below about 0.4 (common practice, value from memory).
        Number("separation_pressure_ratio", default=0.4, low=0.0, high=1.0,
               doc="flag separation when the full-flowing exit pressure is below this fraction of ambient"),
        Vector("direction", default=(-1.0, 0.0, 0.0), doc="body-frame direction the jet leaves in"),
    )

    # the regime and the separation flag change as the tank blows down: each change is an entry of the event log
    logged = (
        LoggedSignal("regime", "nozzle regime", {0.0: "no flow", 1.0: "subsonic", 2.0: "normal shock inside",
                                                 3.0: "overexpanded", 4.0: "underexpanded or matched"}),
        LoggedSignal("separation", "flow separation", {0.0: "separation criterion no longer met",
                                                       1.0: "separation criterion met"}, (1.0,)),
    )

    @classmethod
    def flight_cautions(cls, name, p, result):
        sep = result.signals.get(f"{name}.separation")
        if sep is None or not np.any(sep >= 1.0):
            return []
        # when the event log located it (thrustgraph.flight.signallog), else the first output sample that shows it
        t = next((e.t for e in result.events if e.component == name and e.name == "flow separation"
                  and e.detail.endswith("separation criterion met")), float(result.t[int(np.argmax(sep >= 1.0))]))
        return [f"components.{name}: from t = {t:.4g} s the nozzle meets the flow-separation criterion: its "
                f"full-flowing exit pressure is below {p.separation_pressure_ratio:g} of the ambient pressure "
                "(Summerfield criterion p_e < ~0.4 p_a: Summerfield, Foster & Swan, Jet Propulsion 24, 1954; "
                "Sutton & Biblarz, Rocket Propulsion Elements, ch. 3; the ratio is from memory, common practice). "
                "The flow may separate from the wall there: the thrust printed is uncertain, and separation can "
                "put unsteady side loads on the nozzle and its mounting. Use a smaller area ratio for this back "
                "pressure, or treat those thrust values as rough, and keep clear of the exhaust."]

    @classmethod
    def check(cls, p, where):
        if p.area_ratio < 1.0:
            raise ModelError(f"{where}.area_ratio", f"an area ratio of {p.area_ratio:g} would make the exit "
                             "narrower than the throat (a converging-diverging nozzle has A_e/A_t of 1 or more)",
                             "give the exit-to-throat area ratio, e.g. area_ratio = 4, or use a "
                             "convergent-nozzle for a nozzle that only converges")

    vectorised = True

    @classmethod
    def build_flow(cls, p, ops):
        """One definition for one design (floats) and for an ensemble (``up``, parameters and the upstream
        exponent arrays over designs). The regimes are chosen by ``ops.branch``; each regime's square roots and
        powers are clipped at its own boundary, which leaves the designs inside it unchanged and the others
        finite. The regime constants (Mach numbers and pressure ratios of the area ratio) are computed once per
        exponent shared by every design (an ideal gas: once per assembly)."""
        At = math.pi * p.throat_diameter ** 2 / 4.0
        eps = p.area_ratio
        Ae = eps * At
        lam = divergence_factor(p.half_angle, ops)
        cd = p.discharge_coefficient
        psi = p.separation_pressure_ratio
        sqrt = ops.sqrt
        cache: dict[float, _Regimes] = {}

        def constants(g):
            # an exponent and area ratio shared by every design are numbers: worked out with floats, whatever
            # namespace the callables are built with
            xo = scalar_ops if type(g) is float and type(eps) is float else ops
            m_sup = mach_from_area_ratio(eps, g, "supersonic", xo)
            m_sub = mach_from_area_ratio(eps, g, "subsonic", xo)
            pr3 = pressure_ratio(m_sup, g)
            pr2 = xo.where(eps > 1.0, pr3 * normal_shock(m_sup, g, xo)[1], pr3)
            return _Regimes(mass_flux_factor(g, xo), m_sup, pressure_ratio(m_sub, g), pr2, pr3,
                            temperature_ratio(m_sup, g), (g - 1.0) / g, 2.0 * g / (g - 1.0))

        def regimes(g):
            if type(g) is not float:       # an exponent per design (a real gas): computed on every call
                return constants(g)
            c = cache.get(g)
            if c is None:
                if len(cache) > 512:       # a real gas hands a new exponent on every call
                    cache.clear()
                c = cache[g] = constants(g)
            return c

        bernoulli_slope = 2.0 * lam * cd * Ae

        def shut(pu, T, rho, g, R, pd):
            z = 0.0 * pu
            return _Solution(z, z, pd + z, NO_FLOW + z, z, z - 1.0, z)

        def liquid(pu, T, rho, g, R, pd):
            dp = pu - pd
            v = sqrt(2.0 * ops.maximum(dp, 0.0) / rho)
            on = dp > 0.0
            return _Solution(rho * cd * Ae * v, lam * v, pd + 0.0 * pu, ops.where(on, float(SUBSONIC), float(NO_FLOW)),
                             0.0 * pu, -1.0 + 0.0 * pu, ops.where(on, bernoulli_slope, 0.0))

        def subsonic(pu, T, rho, g, R, pd):
            k = regimes(g)
            x = ops.maximum(pd / pu, k.pr1) ** k.k1
            v = sqrt(k.k2 * R * T * ops.maximum(1.0 - x, 0.0))
            mdot = cd * Ae * (pd / (R * T * x)) * v
            mach = sqrt(ops.maximum(2.0 / (g - 1.0) * (1.0 / x - 1.0), 0.0))
            return _Solution(mdot, lam * v, pd + 0.0 * pu, SUBSONIC + 0.0 * pu, mach, -1.0 + 0.0 * pu,
                             bernoulli_slope + 0.0 * pu)

        def shock(pu, T, rho, g, R, pd):
            k = regimes(g)
            mdot = cd * At * pu * k.gam / sqrt(R * T)
            pe = ops.maximum(pd, k.pr2 * pu)     # the designs in this regime have pd > pr2 pu
            C = At * pu * k.gam / (pe * Ae * sqrt(g))
            X = (-1.0 + sqrt(1.0 + 2.0 * (g - 1.0) * C * C)) / (g - 1.0)
            Te = T / (1.0 + 0.5 * (g - 1.0) * X)
            ve = lam * sqrt(X * g * R * Te)
            return _Solution(mdot, ve, pd + 0.0 * pu, SHOCK_INSIDE + 0.0 * pu, sqrt(X), X,
                             (mdot * ve + pd * Ae) / pu)

        def supersonic(pu, T, rho, g, R, pd):
            k = regimes(g)
            mdot = cd * At * pu * k.gam / sqrt(R * T)
            pe = k.pr3 * pu
            ve = lam * k.m_sup * sqrt(g * R * T * k.tr3)
            return _Solution(mdot, ve, pe, ops.where(pe < pd, float(OVEREXPANDED), float(UNDEREXPANDED)),
                             k.m_sup + 0.0 * pu, -1.0 + 0.0 * pu, (mdot * ve + pe * Ae) / pu)

        def choked(pu, T, rho, g, R, pd):
            return ops.branch(pd / pu > regimes(g).pr2, shock, supersonic, pu, T, rho, g, R, pd)

        def gas(pu, T, rho, g, R, pd):
            return ops.branch(pd / pu >= regimes(g).pr1, subsonic, choked, pu, T, rho, g, R, pd)

        def open_gas(pu, T, rho, g, R, pd):
            flowing = pu > pd
            # designs that cannot flow are evaluated at a pressure just above ambient, then zeroed
            return ops.branch(flowing, gas, shut, ops.where(flowing, pu, pd + 1.0), T, rho, g, R, pd)

        def solve(up, p_down):
            """(mdot, axial v_e, p_e, regime, exit Mach, subsonic-exit Mach^2 or -1, d thrust / d p0)."""
            pu, T, rho, g, R, phase, head = up
            if type(phase) is float:            # every design in the same phase (always so for one design)
                if phase > 0.5:
                    return liquid(pu, T, rho, g, R, p_down)
                if phase < -0.5:
                    return shut(pu, T, rho, g, R, p_down)
                return open_gas(pu, T, rho, g, R, p_down)
            return ops.branch(phase > 0.5, liquid, lambda *a: ops.branch(phase < -0.5, shut, open_gas, *a),
                              pu, T, rho, g, R, p_down)

        def subsonic_throat_mach(me, g):
            # the throat of an unchoked nozzle: the subsonic root of A_t/A* = (A_e/A*)(M_e) / eps (>= 1)
            return mach_from_area_ratio(ops.maximum(area_ratio(ops.maximum(me, 1e-9), g) / eps, 1.0), g,
                                        "subsonic", ops)

        def throat(up, r):
            """(p_t, T_t, v_t) at the throat: isentropic from the upstream stagnation state for a gas (sonic when
            choked), Bernoulli with continuity for a liquid, the upstream state at rest with no flow."""
            pu, T, rho, g, R, phase = up[0], up[1], up[2], up[3], up[4], up[5]
            regime = r.regime
            m_sub = ops.branch(regime == SUBSONIC, subsonic_throat_mach, lambda me, g: 0.0 * me, r.mach, g)
            mt = ops.where(regime >= SHOCK_INSIDE, 1.0, ops.where(regime == SUBSONIC, m_sub, 0.0))
            tr = temperature_ratio(mt, g)
            Tt = T * tr
            pt = pu * tr ** (g / (g - 1.0))
            vt = mt * sqrt(g * R * Tt)
            v_liq = eps * r.ve / lam
            liquid_phase = phase > 0.5
            return (ops.where(liquid_phase, pu - 0.5 * rho * v_liq * v_liq, pt), ops.where(liquid_phase, T, Tt),
                    ops.where(liquid_phase, v_liq, vt))

        def flow(up, p_down, mode=0):
            r = solve(up, p_down)
            return Flow(r.mdot, r.ve, r.pe, Ae + 0.0 * r.mdot, r.slope)

        def signals(up, p_down, mode=0):
            r = solve(up, p_down)
            pu, g = up[0], up[3]
            k = regimes(g)
            in_gas = up[5] < 0.5
            shocked = in_gas & (r.regime == SHOCK_INSIDE)
            separated = ops.where(in_gas & ((r.regime == SHOCK_INSIDE) | (r.regime == OVEREXPANDED))
                                  & (k.pr3 * pu < psi * p_down), 1.0, 0.0)
            shock_at = math.nan + 0.0 * pu
            if ops.any(shocked):
                p0e = p_down / pressure_ratio(r.mach, g)
                ratio = ops.minimum(p0e / ops.where(pu > 0.0, pu, 1.0), 1.0)
                shock_at = ops.where(shocked, area_ratio(shock_mach_from_total_pressure_ratio(ratio, g, ops), g),
                                     math.nan)
            thrust = r.mdot * r.ve + (r.pe - p_down) * Ae
            cf = ops.where(pu > 0.0, thrust / (ops.where(pu > 0.0, pu, 1.0) * At), 0.0)
            pt, Tt, vt = throat(up, r)
            return {"regime": r.regime + 0.0, "exit_mach": r.mach, "shock_area_ratio": shock_at,
                    "separation": separated, "thrust_coefficient": cf, "throat_pressure": pt,
                    "throat_temperature": Tt, "throat_velocity": vt}

        return FlowFns(flow=flow, jet_dir=p.direction, signals=signals)


class _Regimes(NamedTuple):
    """The regime constants of one exponent: choked flux factor, design exit Mach number, the pressure ratios
    p_a/p0 of the subsonic root (pr1), of a shock at the exit (pr2) and of the design exit (pr3), the exit
    temperature ratio, (g - 1)/g and 2 g/(g - 1)."""

    gam: Any
    m_sup: Any
    pr1: Any
    pr2: Any
    pr3: Any
    tr3: Any
    k1: Any
    k2: Any


class _Solution(NamedTuple):
    """The nozzle's flow at one upstream condition (see ``solve`` in :meth:`ConvergingDivergingNozzle.build_flow`)."""

    mdot: Any
    ve: Any
    pe: Any
    regime: Any
    mach: Any
    X: Any
    slope: Any
