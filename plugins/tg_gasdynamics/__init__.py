"""Gas dynamics: isentropic relations, the normal shock, ideal nozzle performance, the converging-diverging nozzle.

Kinds
-----
``converging-diverging-nozzle``
    :class:`~tg_gasdynamics.cd_nozzle.ConvergingDivergingNozzle`: throat and
    area ratio, choked or unchoked, a normal shock inside the nozzle, pressure
    thrust, conical divergence loss, a separation flag.

Modules
-------
:mod:`~tg_gasdynamics.isentropic` (NACA Report 1135 relations),
:mod:`~tg_gasdynamics.performance` (thrust coefficient, c*, specific impulse).
The equations, assumptions, limits and sources are in each module and in
docs/fluid-devices.md.

Examples
--------
>>> [k.kind for k in thrustgraph_component_kinds()]
['converging-diverging-nozzle']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .cd_nozzle import ConvergingDivergingNozzle
from .isentropic import (area_ratio, critical_pressure_ratio, mach_from_area_ratio, mass_flux_factor,
                         normal_shock, pressure_ratio, temperature_ratio)
from .performance import divergence_factor, ideal_specific_impulse, thrust_coefficient

__all__ = ["ConvergingDivergingNozzle", "area_ratio", "critical_pressure_ratio", "mach_from_area_ratio",
           "mass_flux_factor", "normal_shock", "pressure_ratio", "temperature_ratio", "divergence_factor",
           "ideal_specific_impulse", "thrust_coefficient", "thrustgraph_component_kinds"]


@hookimpl
def thrustgraph_component_kinds():
    return [ConvergingDivergingNozzle]
