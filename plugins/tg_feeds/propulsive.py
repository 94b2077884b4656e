"""Propulsive efficiency of a jet: the Froude (ideal) efficiency.

A jet that takes in fluid at the flight speed V_0 and expels it at V_j
(relative to the vehicle) gives the useful power T V_0 = mdot (V_j - V_0) V_0
for the kinetic energy it adds, mdot (V_j^2 - V_0^2) / 2, per unit time::

    eta_p = 2 / (1 + V_j / V_0)

(the Froude propulsive efficiency: any propulsion text, e.g. Hill & Peterson,
*Mechanics and Thermodynamics of Propulsion*; references.md section 7 lists
0.8000 / 0.6667 / 0.5000 / 0.3333 at V_j/V_0 = 1.5 / 2 / 3 / 5).

One definition for floats and numpy arrays of designs (arithmetic only, :mod:`thrustgraph.base.xp`'s
convention).

Examples
--------
>>> froude_efficiency(3.0, 1.0)
0.5
>>> import numpy as np
>>> froude_efficiency(np.array([1.5, 2.0, 5.0]), 1.0).round(4).tolist()
[0.8, 0.6667, 0.3333]
"""

from __future__ import annotations

from typing import Any

__all__ = ["froude_efficiency"]


def froude_efficiency(jet_speed: Any, flight_speed: Any) -> Any:
    """eta_p = 2 / (1 + V_j / V_0) for a jet speed and a flight speed (both relative to the medium, m/s;
    floats or arrays).

    >>> round(froude_efficiency(1.5, 1.0), 4)
    0.8
    """
    return 2.0 / (1.0 + jet_speed / flight_speed)
