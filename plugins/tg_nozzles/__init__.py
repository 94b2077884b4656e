"""Nozzles: a convergent nozzle (or plain orifice) passing liquid or gas to the surroundings.

Liquid (quasi-steady Bernoulli, outlet pressure including the liquid head)::

    v_e = sqrt(2 (p_up - p_a) / rho),  mdot = rho Cd A v_e,  thrust = mdot v_e = 2 Cd A (p_up - p_a)

Gas (isentropic flow of a perfect gas from the vessel's stagnation state,
NACA Report 1135, 1953, eqs. 43-45 and the choked mass flow):

* choked when p_a / p_up <= (2 / (gamma + 1))^(gamma / (gamma - 1)) (0.52828 for gamma = 1.4)::

      mdot = Cd A p_up sqrt(gamma / (R T)) (2 / (gamma + 1))^((gamma + 1) / (2 (gamma - 1)))
      exit at M = 1: T_e = 2 T / (gamma + 1), v_e = sqrt(gamma R T_e), p_e = p* > p_a

* otherwise the jet leaves at ambient pressure::

      v_e = sqrt(2 gamma R T / (gamma - 1) (1 - (p_a / p_up)^((gamma - 1) / gamma)))

Thrust along the axis is ``mdot v_e + (p_e - p_a) Cd A``. The discharge
coefficient scales the flow area; the pressure term uses the same effective
area (an assumption: common practice, no source). The liquid relation assumes
the nozzle is much narrower than the vessel bore (the column's velocity head
is neglected). The flow never reverses: below ambient pressure nothing flows.

The kind is ``vectorised``: given :data:`thrustgraph.arrayops.array_ops` it
builds the same flow over numpy arrays of designs, evaluating the liquid,
choked and unchoked branches for every design and picking one with
``np.where`` (square roots and powers clipped so unused branches stay finite).

Examples
--------
>>> from thrustgraph.component import scalar_ops
>>> P = ConvergentNozzle.params_class()
>>> f = ConvergentNozzle.build_flow(P(diameter=0.022, discharge_coefficient=1.0, direction=(-1.0, 0.0, 0.0)),
...                                 scalar_ops)
>>> mdot, ve, pe, Ae, c = f.flow((101325.0 + 4e5, 288.15, 998.2, 1.4, 287.05, 1.0, 0.0), 101325.0, 0)
>>> round(ve, 3)
28.31
"""

from __future__ import annotations

import math

from thrustgraph import hookimpl
from thrustgraph.component import ComponentKind, FlowFns
from thrustgraph.parameters import Number, Quantity, Vector

__all__ = ["ConvergentNozzle", "critical_pressure_ratio", "choked_flux_factor"]


def critical_pressure_ratio(gamma: float) -> float:
    """p*/p0 of a perfect gas at M = 1 (NACA Report 1135, 1953).

    >>> round(critical_pressure_ratio(1.4), 6)
    0.528282
    """
    return (2.0 / (gamma + 1.0)) ** (gamma / (gamma - 1.0))


def choked_flux_factor(gamma: float) -> float:
    """sqrt(gamma) (2/(gamma+1))^((gamma+1)/(2(gamma-1))): mdot = Cd A p0 / sqrt(R T0) times this.

    >>> round(choked_flux_factor(1.4) / math.sqrt(287.05), 6)
    0.040415
    """
    return math.sqrt(gamma) * (2.0 / (gamma + 1.0)) ** ((gamma + 1.0) / (2.0 * (gamma - 1.0)))


class ConvergentNozzle(ComponentKind):
    kind = "convergent-nozzle"
    role = "flow"
    summary = "convergent nozzle or orifice: Bernoulli for liquid, isentropic (choked or not) for gas"
    parameters = (
        Quantity("diameter", "mm", low=1e-3, high=10_000.0, doc="exit (throat) diameter"),
        # A well-rounded nozzle is near 0.97-0.99, a sharp-edged orifice near 0.61 (common practice, no source).
        Number("discharge_coefficient", default=0.98, low=0.0, low_open=True, high=1.0,
               doc="ratio of actual to ideal flow area"),
        Vector("direction", default=(-1.0, 0.0, 0.0), doc="body-frame direction the jet leaves in"),
    )

    vectorised = True

    @classmethod
    def build_flow(cls, p, ops):
        if getattr(ops, "arrays", False):
            return cls._build_flow_arrays(p)
        area = p.discharge_coefficient * math.pi * p.diameter ** 2 / 4.0
        sqrt = math.sqrt
        cache: dict[tuple[float, float], tuple[float, float, float, float]] = {}

        def consts(gam, R):
            key = (gam, R)
            c = cache.get(key)
            if c is None:
                crit = critical_pressure_ratio(gam)
                c = (crit, choked_flux_factor(gam) / sqrt(R), (gam - 1.0) / gam, 2.0 * gam * R / (gam - 1.0))
                cache[key] = c
            return c

        def flow(up, p_down, mode=0):
            pu, T, rho, gam, R, phase, head = up
            if phase > 0.5:  # liquid
                dp = pu - p_down
                if dp <= 0.0:
                    return (0.0, 0.0, p_down, area, 0.0)
                v = sqrt(2.0 * dp / rho)
                return (rho * area * v, v, p_down, area, 2.0 * area)
            if phase < -0.5 or pu <= p_down:
                return (0.0, 0.0, p_down, area, 0.0)
            crit, flux, k1, k2 = consts(gam, R)
            pr = p_down / pu
            if pr <= crit:
                mdot = area * pu * flux / sqrt(T)
                Te = 2.0 * T / (gam + 1.0)
                ve = sqrt(gam * R * Te)
                pe = crit * pu
                # thrust = pu * area * const - p_down * area  ->  d/dpu = (thrust + p_down area) / pu
                return (mdot, ve, pe, area, (mdot * ve + pe * area) / pu)
            x = pr ** k1
            ve = sqrt(k2 * T * (1.0 - x))
            Te = T * x
            mdot = (p_down / (R * Te)) * ve * area
            return (mdot, ve, p_down, area, 2.0 * area)

        return FlowFns(flow=flow, jet_dir=p.direction)

    @classmethod
    def _build_flow_arrays(cls, p):
        """The same nozzle over arrays of designs: ``up`` holds arrays (or floats), parameters arrays or floats.

        Each regime (liquid, choked gas, unchoked gas) is evaluated only when
        some design is in it; a design's numbers do not depend on which other
        designs share the arrays.
        """
        import numpy as np

        area = p.discharge_coefficient * math.pi * p.diameter ** 2 / 4.0

        def flow(up, p_down, mode=0):
            pu, T, rho, gam, R, phase, head = up
            if type(phase) is float:            # every design in the same phase
                if phase > 0.5:                  # liquid: the jet alone
                    dp = pu - p_down
                    v_l = np.sqrt(2.0 * np.maximum(dp, 0.0) / rho)
                    return (rho * area * v_l, v_l, p_down, area, np.where(dp > 0.0, 2.0 * area, 0.0))
                if phase < -0.5:                 # sealed
                    return (0.0, 0.0, p_down, area, 0.0)
                phase = np.float64(phase)
            liquid = phase > 0.5
            dp = pu - p_down
            wet = dp > 0.0
            open_ = (phase > -0.5) & wet
            gas = open_ & ~liquid
            md_l = v_l = c_l = md_g = ve_g = c_g = 0.0
            pe_g = p_down
            if liquid.any():
                v_l = np.sqrt(2.0 * np.maximum(dp, 0.0) / rho)
                md_l, c_l = rho * area * v_l, np.where(wet, 2.0 * area, 0.0)
            if gas.any():
                pus = np.where(open_, pu, p_down + 1.0)
                crit = (2.0 / (gam + 1.0)) ** (gam / (gam - 1.0))
                pr = p_down / pus
                choked = pr <= crit
                some_choked = bool((gas & choked).any())
                if some_choked:
                    flux = np.sqrt(gam / R) * (2.0 / (gam + 1.0)) ** ((gam + 1.0) / (2.0 * (gam - 1.0)))
                    md_g = area * pus * flux / np.sqrt(T)
                    ve_g = np.sqrt(gam * R * (2.0 * T / (gam + 1.0)))
                    pe_g = crit * pus
                    c_g = (md_g * ve_g + pe_g * area) / pus
                if (gas & ~choked).any():
                    x = np.maximum(pr, 1e-300) ** ((gam - 1.0) / gam)
                    ve_u = np.sqrt(2.0 * gam * R / (gam - 1.0) * T * np.maximum(1.0 - x, 0.0))
                    md_u = (p_down / (R * T * x)) * ve_u * area
                    if some_choked:
                        md_g, ve_g = np.where(choked, md_g, md_u), np.where(choked, ve_g, ve_u)
                        pe_g, c_g = np.where(choked, pe_g, p_down), np.where(choked, c_g, 2.0 * area)
                    else:                        # no open design is choked: the selections would pick these
                        md_g, ve_g, pe_g, c_g = md_u, ve_u, p_down, 2.0 * area
            pe = np.where(gas, pe_g, p_down)
            if not liquid.any():                 # the selections below would pick the gas values alone
                return (np.where(gas, md_g, 0.0), np.where(gas, ve_g, 0.0), pe, area, np.where(gas, c_g, 0.0))
            mdot = np.where(liquid, md_l, np.where(gas, md_g, 0.0))
            ve = np.where(liquid, v_l, np.where(gas, ve_g, 0.0))
            c = np.where(liquid, c_l, np.where(gas, c_g, 0.0))
            return (mdot, ve, pe, area, c)

        return FlowFns(flow=flow, jet_dir=p.direction)


@hookimpl
def thrustgraph_component_kinds():
    return [ConvergentNozzle]
