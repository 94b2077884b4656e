"""The unit of every signal, declared in one place: the core's signals, the standard keys of components' signals,
and what a component kind declares (its ``signal_units``).

The flight result's headers, the exports, plots, triggers and comparisons read a signal's unit through
:func:`signal_unit`; the plugin contract (:mod:`thrustgraph.kinds.contract`) refuses a signal a kind reports without
one. ``""`` is a pure number (written ``[1]`` in a header); :data:`TEXT_UNIT` marks a column of words.

>>> signal_unit("ambient_temperature"), signal_unit("tank.heat_flow", {"tank.heat_flow": "W"})
('K', 'W')
"""

from __future__ import annotations

from typing import Mapping

__all__ = ["SIGNAL_UNITS", "STANDARD_KEY_UNITS", "TEXT_UNIT", "signal_unit"]

#: The unit written in the header of a column of words (the CSV's ``phase``), not numbers.
TEXT_UNIT = "text"

#: SI unit of every signal the core records (vectors carry the unit of their components; ``""`` is a pure number).
#: With :data:`STANDARD_KEY_UNITS` and the ``signal_units`` a component kind declares, the one place a signal's
#: unit comes from (:func:`signal_unit`): result headers, exports, plots, triggers and comparisons read it there.
SIGNAL_UNITS = {
    "time": "s", "mass": "kg", "thrust": "N", "thrust_vector": "N", "net_thrust": "N", "net_thrust_vector": "N",
    "acceleration": "m/s^2", "acceleration_magnitude": "m/s^2", "path_acceleration": "m/s^2", "velocity": "m/s",
    "speed": "m/s", "airspeed": "m/s", "position": "m", "altitude": "m", "range": "m", "mass_flow": "kg/s",
    "weight": "N", "reaction": "N", "inertia": "N", "ambient_pressure": "Pa", "ambient_density": "kg/m^3",
    "ambient_temperature": "K", "wind": "m/s", "gravity": "m/s^2", "axis": "", "flight_path_angle": "rad",
    "vertical_speed": "m/s", "distance": "m",
}
#: SI unit of the standard keys of a component's signals (``COMPONENT.KEY``): what the balance records for every
#: line, vessel and body (``mass_flow``, ``drive``, a body's force), and the keys devices share by convention
#: (``pressure``, ``temperature``, ``liquid_mass``...). A kind that reports any other key declares its unit in
#: ``signal_units`` (:class:`~thrustgraph.kinds.component.ComponentKind`); the contract refuses a signal with no unit.
STANDARD_KEY_UNITS = {
    "mass_flow": "kg/s", "exit_velocity": "m/s", "exit_pressure": "Pa", "thrust": "N", "drag": "N", "buoyancy": "N",
    "resistance": "N", "inlet_pressure": "Pa", "pressure_rise": "Pa", "burn_clock": "s",
    "pressure": "Pa", "temperature": "K", "head_pressure": "Pa", "outlet_pressure": "Pa", "drive": "Pa",
    "liquid_mass": "kg", "gas_mass": "kg", "liquid_volume": "m^3", "propellant_mass": "kg",
    "internal_momentum": "kg*m/s", "gas_volume": "m^3", "liquid_height": "m",
}


def signal_unit(name: str, declared: Mapping[str, str] | None = None) -> str | None:
    """SI unit of a signal: declared by its component's kind (``declared``: ``COMPONENT.KEY`` -> unit), else a core
    signal (:data:`SIGNAL_UNITS`), else a standard key (:data:`STANDARD_KEY_UNITS`); None when it has none.

    ``""`` is a pure number (written ``[1]`` in headers).

    >>> signal_unit("gravity"), signal_unit("bottle.pressure"), signal_unit("axis")
    ('m/s^2', 'Pa', '')
    >>> signal_unit("drogue.drag_area", {"drogue.drag_area": "m^2"}), signal_unit("bottle.colour")
    ('m^2', None)
    """
    if declared and name in declared:
        return declared[name]
    if name in SIGNAL_UNITS:
        return SIGNAL_UNITS[name]
    if "." in name:
        return STANDARD_KEY_UNITS.get(name.rsplit(".", 1)[-1])
    return None
