"""The inlet: a source that captures the surrounding fluid (water or air) at the vehicle's speed.

Model
-----
The inlet faces into the relative flow and captures fluid that arrives at
``-V`` relative to the vehicle (V the vehicle's velocity through the medium).
What it delivers to the elements downstream (a pump, a nozzle) is the
captured fluid at its recovered total pressure::

    liquid:  p_t = p_a + (1 - K) rho V^2 / 2
    gas:     p_t = p_a + (1 - K) (p0 - p_a),  p0 = p_a (1 + (g-1)/2 M^2)^(g/(g-1)),
             T0 = T_a (1 + (g-1)/2 M^2)

with K the inlet loss coefficient: the fraction of the ram (dynamic)
pressure the inlet loses (0 for a perfect inlet). The mass flow is set by
the elements downstream. The captured momentum enters the balance as the
inflow term ``mdot * (-V)``: the **ram drag** ``mdot V`` against the motion
(the ``- mdot_0 V_0`` term of the general thrust equation, F = mdot_e V_e -
mdot_0 V_0 + (p_e - p_a) A_e: Sutton & Biblarz, *Rocket Propulsion Elements*,
ch. 2; NASA Glenn, Beginner's Guide to Propulsion).

Assumptions and limits: the inlet always faces the relative flow (no
incidence or spillage model), quasi-steady, no cavitation or choking in the
inlet; the loss coefficient is a number the user supplies (0.1-0.3 is
typical of a flush water-jet inlet near design: common practice, no source).

The kind is ``vectorised``: its one definition is written against the namespace of :mod:`thrustgraph.base.xp`
and runs on floats (a single flight) and on numpy arrays of designs (an ensemble); the fluid it takes in is
a choice shared by every design.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> from thrustgraph.base.xp import array_ops
>>> P = Inlet.params_class()
>>> src = Inlet.build_source(P(fluid="liquid", loss_coefficient=0.2, gas_gamma=1.4, gas_constant=287.05),
...                          -1, scalar_ops, Ambient(101325.0, 293.15, 998.2))
>>> up, mfix, vx, vy, vz = src.supply(0.0, [], 0, (998.2, 101325.0, 293.15, 5.0, 0.0, 0.0, 5.0))
>>> round(up[0] - 101325.0, 3), mfix, vx       # 0.8 of the ram pressure; the captured water arrives at -V
(9982.0, -1.0, -5.0)
>>> src = Inlet.build_source(P(fluid="gas", loss_coefficient=np.array([0.0, 0.5]), gas_gamma=1.4, gas_constant=287.05),
...                          -1, array_ops, Ambient(101325.0, 288.15, 1.225))
>>> up = src.supply(0.0, [], 0, (1.225, 101325.0, 288.15, np.full(2, 100.0), np.zeros(2), np.zeros(2),
...                              np.full(2, 100.0)))[0]
>>> (up[0] - 101325.0).round(1).tolist()           # the whole ram rise at Mach 0.29, then half of it
[6258.4, 3129.2]
"""

from __future__ import annotations

from thrustgraph.kinds.component import ComponentKind, SourceFns
from thrustgraph.kinds.parameters import Choice, Number, Quantity

__all__ = ["Inlet"]


class Inlet(ComponentKind):
    """Ram inlet: captures the medium at the vehicle's speed (see the module docstring)."""

    kind = "inlet"
    role = "source"
    summary = "captures the surrounding water or air at the vehicle's speed: ram pressure, ram drag"
    parameters = (
        Choice("fluid", options=("liquid", "gas"), default="liquid",
               doc="what the inlet takes in: liquid (water) or gas (air); match the medium"),
        Number("loss_coefficient", default=0.2, low=0.0, high=1.0,
               doc="fraction of the ram (dynamic) pressure lost in the inlet"),
        Number("gas_gamma", default=1.4, low=1.0, low_open=True, high=1.7,
               doc="ratio of specific heats of the captured gas"),
        # Dry air: R = 8314.32 / 28.9644 J/(kg K) (US Standard Atmosphere 1976).
        Quantity("gas_constant", "J/kg/K", default="287.05 J/kg/K", low=10.0, high=10_000.0,
                 doc="specific gas constant of the captured gas"),
    )

    vectorised = True

    @classmethod
    def build_source(cls, p, i, ops, amb):
        """One definition for floats and arrays: the parameters and ``air`` may be arrays over designs."""
        keep = 1.0 - p.loss_coefficient
        liquid = p.fluid == "liquid"
        g, R = p.gas_gamma, p.gas_constant
        k = g / (g - 1.0)

        def supply(t, s, mode, air):
            rho, pa, Ta, vx, vy, vz, sp = air
            if liquid:
                up = (pa + keep * 0.5 * rho * sp * sp, Ta, rho, g, R, 1.0, 0.0)
            else:
                fac = 1.0 + 0.5 * (g - 1.0) * sp * sp / (g * R * Ta)
                pt = pa + keep * (pa * fac ** k - pa)
                up = (pt, Ta * fac, pt / (R * Ta * fac), g, R, 0.0, 0.0)
            return (up, -1.0, -vx, -vy, -vz)

        return SourceFns(supply=supply)
