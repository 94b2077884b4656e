"""Propulsive efficiency of a jet: the Froude (ideal) efficiency.

A jet that takes in fluid at the flight speed V_0 and expels it at V_j
(relative to the vehicle) gives the useful power T V_0 = mdot (V_j - V_0) V_0
for the kinetic energy it adds, mdot (V_j^2 - V_0^2) / 2, per unit time::

    eta_p = 2 / (1 + V_j / V_0)

(the Froude propulsive efficiency: any propulsion text, e.g. Hill & Peterson,
*Mechanics and Thermodynamics of Propulsion*; references.md section 7 lists
0.8000 / 0.6667 / 0.5000 / 0.3333 at V_j/V_0 = 1.5 / 2 / 3 / 5).

Examples
--------
>>> froude_efficiency(3.0, 1.0)
0.5
"""

from __future__ import annotations

__all__ = ["froude_efficiency"]


def froude_efficiency(jet_speed: float, flight_speed: float) -> float:
    """eta_p = 2 / (1 + V_j / V_0) for a jet speed and a flight speed (both relative to the medium, m/s).

    >>> round(froude_efficiency(1.5, 1.0), 4)
    0.8
    """
    return 2.0 / (1.0 + jet_speed / flight_speed)
