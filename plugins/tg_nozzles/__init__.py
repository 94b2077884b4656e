"""Nozzles: a convergent nozzle (or plain orifice) passing liquid or gas to the surroundings.

Liquid (quasi-steady Bernoulli from the vessel's bore to the jet, with continuity; outlet pressure including
the liquid head)::

    v_e = sqrt(2 (p_up - p_a) / (rho (1 - beta^2))),   beta = Cd A / A_b
    mdot = rho Cd A v_e,   thrust = mdot v_e = 2 Cd A (p_up - p_a) / (1 - beta^2)

1 / (1 - beta^2) is the velocity-of-approach factor: the liquid in the bore
(area A_b) already moves at v_e Cd A / A_b toward the nozzle, and Bernoulli
between the bore and the jet with continuity v_b A_b = v_e Cd A gives it
(F. M. White, *Fluid Mechanics*, McGraw-Hill, the Bernoulli obstruction-meter
theory, V2 = sqrt(2 dp / (rho (1 - beta^4))) with beta = d/D the diameter
ratio; the chapter is from memory, 6.12 in the 7th edition). The jet's area
is taken as Cd A (the vena contracta). It applies with ``approach_velocity =
true`` (the default) when the nozzle is the single outlet of a vessel that
knows its bore (a ``pressurised-liquid-tank``); otherwise (several outlets,
which the liquid approaches together; a valve in between), or with
``approach_velocity = false``, beta = 0 (the nozzle much narrower than the
bore). For the bundled
bottle (21 mm neck, Cd 0.98, 100 mm bore) beta = 0.0432 and the factor
1.0019: +0.19 % thrust at a given pressure.

Gas (isentropic flow of a perfect gas from the vessel's stagnation state,
NACA Report 1135, 1953, eqs. 43-45 and the choked mass flow):

* choked when p_a / p_up <= (2 / (gamma + 1))^(gamma / (gamma - 1)) (0.52828 for gamma = 1.4)::

      mdot = Cd A p_up sqrt(gamma / (R T)) (2 / (gamma + 1))^((gamma + 1) / (2 (gamma - 1)))
      exit at M = 1: T_e = 2 T / (gamma + 1), v_e = sqrt(gamma R T_e), p_e = p* > p_a

* otherwise the jet leaves at ambient pressure::

      v_e = sqrt(2 gamma R T / (gamma - 1) (1 - (p_a / p_up)^((gamma - 1) / gamma)))

Thrust along the axis is ``mdot v_e + (p_e - p_a) Cd A``. The discharge
coefficient scales the flow area; the pressure term uses the same effective
area (an assumption: common practice, no source). The gas relations take the
gas in the vessel at rest (no approach factor). A nozzle whose jet area Cd A
reaches 0.8 of the bore's is refused (the factor would pass 2.8 and the
quasi-steady column this assumes no longer holds). The flow never reverses:
below ambient pressure nothing flows.

The kind is ``vectorised``: its one definition is written against the namespace of
:mod:`thrustgraph.base.xp` and runs on floats (a single flight) and on numpy arrays of designs (an ensemble),
choosing the regime with ``ops.branch`` (square roots and powers clipped so unused branches stay finite).

Examples
--------
>>> from thrustgraph.kinds.component import scalar_ops
>>> P = ConvergentNozzle.params_class()
>>> p = P(diameter=0.022, discharge_coefficient=1.0, direction=(-1.0, 0.0, 0.0), approach_velocity=True)
>>> f = ConvergentNozzle.build_flow(p, scalar_ops)                       # no bore known: beta = 0
>>> mdot, ve, pe, Ae, c = f.flow((101325.0 + 4e5, 288.15, 998.2, 1.4, 287.05, 1.0, 0.0), 101325.0, 0)
>>> round(ve, 3)
28.31
>>> f = ConvergentNozzle.build_flow(p, scalar_ops, approach_area=math.pi * 0.1 ** 2 / 4)   # a 100 mm bore
>>> round(f.flow((101325.0 + 4e5, 288.15, 998.2, 1.4, 287.05, 1.0, 0.0), 101325.0, 0)[1], 3)
28.343
"""

from __future__ import annotations

import math

from thrustgraph import hookimpl
from thrustgraph.kinds.component import ComponentKind, Flow, FlowFns
from thrustgraph.kinds.parameters import Flag, Number, Quantity, Vector

__all__ = ["ConvergentNozzle", "critical_pressure_ratio", "choked_flux_factor", "approach_factor",
           "MAX_APPROACH_RATIO"]

#: Largest jet-to-bore area ratio Cd A / A_b accepted with the velocity of approach.
MAX_APPROACH_RATIO = 0.8


def approach_factor(jet_area, approach_area):
    """The velocity-of-approach factor 1 / (1 - beta^2), beta = jet area / approach area (floats or arrays).

    >>> round(approach_factor(0.98 * math.pi * 0.021 ** 2 / 4, math.pi * 0.1 ** 2 / 4), 6)
    1.001871
    """
    beta = jet_area / approach_area
    return 1.0 / (1.0 - beta * beta)


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
    return gamma ** 0.5 * (2.0 / (gamma + 1.0)) ** ((gamma + 1.0) / (2.0 * (gamma - 1.0)))


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
        Flag("approach_velocity", default=True,
             doc="liquid: include the velocity of approach 1 / (1 - (Cd A / A_bore)^2) when fed directly by a "
                 "vessel of known bore"),
    )

    vectorised = True
    takes_approach_area = True

    @classmethod
    def build_flow(cls, p, ops, approach_area=None):
        """One definition for one design (floats) and for an ensemble (``up`` and parameters arrays).

        The regimes (liquid, choked gas, unchoked gas, shut) are chosen by ``ops.branch``: one function runs
        for a float; over arrays each runs only when some design is in it, over every design, with its square
        roots and powers clipped so that designs in other regimes stay finite.
        """
        area = p.discharge_coefficient * math.pi * p.diameter ** 2 / 4.0
        # liquid: v_e^2 = 2 dp k / rho, k the velocity-of-approach factor (1 without a known bore)
        k = approach_factor(area, approach_area) if p.approach_velocity and approach_area is not None else 1.0
        two_k = 2.0 * k

        def shut(pu, T, rho, gam, R, p_down):
            return Flow(0.0 * pu, 0.0 * pu, p_down + 0.0 * pu, area, 0.0 * pu)

        def liquid(pu, T, rho, gam, R, p_down):
            dp = pu - p_down
            v = ops.sqrt(two_k * ops.maximum(dp, 0.0) / rho)
            return Flow(rho * area * v, v, p_down + 0.0 * pu, area, ops.where(dp > 0.0, two_k * area, 0.0))

        def choked(pu, T, rho, gam, R, p_down):
            crit = critical_pressure_ratio(gam)
            mdot = area * pu * choked_flux_factor(gam) / ops.sqrt(R * T)
            ve = ops.sqrt(gam * R * (2.0 * T / (gam + 1.0)))
            pe = crit * pu
            # thrust = pu * area * const - p_down * area  ->  d/dpu = (thrust + p_down area) / pu
            return Flow(mdot, ve, pe, area, (mdot * ve + pe * area) / pu)

        def unchoked(pu, T, rho, gam, R, p_down):
            x = ops.maximum(p_down / pu, 1e-300) ** ((gam - 1.0) / gam)
            ve = ops.sqrt(2.0 * gam * R / (gam - 1.0) * T * ops.maximum(1.0 - x, 0.0))
            mdot = (p_down / (R * T * x)) * ve * area
            return Flow(mdot, ve, p_down + 0.0 * pu, area, 2.0 * area + 0.0 * pu)

        def gas(pu, T, rho, gam, R, p_down):
            return ops.branch(p_down / pu <= critical_pressure_ratio(gam), choked, unchoked,
                              pu, T, rho, gam, R, p_down)

        def open_gas(pu, T, rho, gam, R, p_down):
            flowing = pu > p_down
            # designs that cannot flow are evaluated at a pressure just above ambient, then zeroed
            return ops.branch(flowing, gas, shut, ops.where(flowing, pu, p_down + 1.0), T, rho, gam, R, p_down)

        def flow(up, p_down, mode=0):
            pu, T, rho, gam, R, phase, head = up
            if type(phase) is float:            # every design in the same phase (always so for one design)
                if phase > 0.5:
                    return liquid(pu, T, rho, gam, R, p_down)
                if phase < -0.5:
                    return shut(pu, T, rho, gam, R, p_down)
                return open_gas(pu, T, rho, gam, R, p_down)
            return ops.branch(phase > 0.5, liquid,
                              lambda *a: ops.branch(phase < -0.5, shut, open_gas, *a),
                              pu, T, rho, gam, R, p_down)

        return FlowFns(flow=flow, jet_dir=p.direction)


@hookimpl
def thrustgraph_component_kinds():
    return [ConvergentNozzle]


@hookimpl
def thrustgraph_check_model(model):
    """Refuse a nozzle whose jet nearly fills the bore it is fed through (with the velocity of approach on)."""
    problems = []
    for name in model.model.components:
        if model.kinds[name] is not ConvergentNozzle or not model.params[name].approach_velocity:
            continue
        up = list(model.graph.predecessors(name))
        if len(up) != 1 or model.kinds[up[0]].role != "volume" or model.graph.out_degree(up[0]) != 1:
            continue
        bore = model.kinds[up[0]].approach_area(model.params[up[0]])
        if bore is None:
            continue
        p = model.params[name]
        ratio = p.discharge_coefficient * math.pi * p.diameter ** 2 / 4.0 / bore
        if not ratio < MAX_APPROACH_RATIO:
            problems.append(
                f"components.{name}: its jet area (discharge_coefficient x area) is {ratio:.3g} of the bore of "
                f"{up[0]!r}, at least {MAX_APPROACH_RATIO:g}: the velocity-of-approach factor 1 / (1 - beta^2) "
                f"would be {1.0 / max(1.0 - ratio * ratio, 1e-300):.3g} or unbounded, and the quasi-steady jet "
                f"does not hold; to fix it, give the nozzle's and the bore's real diameters, or set "
                f"approach_velocity = false to leave the factor out")
    return problems
