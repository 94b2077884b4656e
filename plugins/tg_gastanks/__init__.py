"""Gas vessels: the compressed-gas tank (ideal or real gas) and the self-pressurising liquefied-gas tank.

Kinds
-----
``gas-tank``
    :class:`~tg_gastanks.gas_tank.GasTank`: a rigid tank of compressed gas;
    adiabatic (energy equation, optional wall heat transfer), isothermal or
    polytropic; ideal gas from :data:`~tg_gastanks.gases.IDEAL_GASES` or the
    fluid's equation of state through CoolProp.
``self-pressurising-tank``
    :class:`~tg_gastanks.saturated.SelfPressurisingTank`: a liquefied gas over
    its own vapour (a CO2 cartridge), in two-phase equilibrium through
    CoolProp; liquid then vapour outflow; it cools as it boils.

CoolProp is an optional extra (``pip install 'thrustgraph[realgas]'``); only
the real-gas options need it. The equations, assumptions, limits and sources
are in each module and in docs/fluid-devices.md.

Examples
--------
>>> sorted(k.kind for k in thrustgraph_component_kinds())
['gas-tank', 'self-pressurising-tank']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .gas_tank import GasTank
from .gases import IDEAL_GASES, IdealGas, lookup_gas
from .saturated import SelfPressurisingTank

__all__ = ["GasTank", "SelfPressurisingTank", "IDEAL_GASES", "IdealGas", "lookup_gas",
           "thrustgraph_component_kinds"]


@hookimpl
def thrustgraph_component_kinds():
    return [GasTank, SelfPressurisingTank]
