"""External forces on the vehicle: drag tables against Mach number or speed, boat-hull resistance, buoyancy.

All kinds have role ``body``: a fixed mass plus a force on the velocity
through the medium.

Kinds
-----
``mach-table-airframe``
    :class:`~tg_drag.airframes.MachTableAirframe`: dry mass, reference
    diameter, C_D against Mach number.
``speed-table-airframe``
    :class:`~tg_drag.airframes.SpeedTableAirframe`: C_D against speed.
``boat-hull``
    :class:`~tg_drag.hull.BoatHull`: dry mass and a resistance table (N
    against m/s).
``buoyancy``
    :class:`~tg_drag.buoyancy.Buoyancy`: rho g V of a fully immersed volume,
    no mass of its own.

The equations, assumptions, limits and sources are in each module and in
docs/environment.md.

Examples
--------
>>> sorted(k.kind for k in thrustgraph_component_kinds())
['boat-hull', 'buoyancy', 'mach-table-airframe', 'speed-table-airframe']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .airframes import MachTableAirframe, SpeedTableAirframe
from .buoyancy import Buoyancy
from .hull import BoatHull
from .tables import clamped_interpolator

__all__ = ["MachTableAirframe", "SpeedTableAirframe", "BoatHull", "Buoyancy", "clamped_interpolator",
           "thrustgraph_component_kinds", "thrustgraph_check_model"]


@hookimpl
def thrustgraph_component_kinds():
    return [MachTableAirframe, SpeedTableAirframe, BoatHull, Buoyancy]


@hookimpl
def thrustgraph_check_model(model):
    """A model whose only massive-looking parts are buoyancy volumes has no mass to move."""
    names = [n for n in model.model.components if model.kinds[n].role in ("body", "volume", "jet")]
    if names and all(issubclass(model.kinds[n], Buoyancy) for n in names):
        return [f"components.{names[0]}: a buoyancy volume carries no mass, and nothing else in the model has any; "
                "to fix it, add the vehicle's structure (e.g. an airframe or boat-hull with its dry mass)"]
    return []
