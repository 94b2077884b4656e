"""Valves: always-open vents and relief valves (cracking and reseat pressures), one-sided or symmetric.

Kinds
-----
``vent``
    :class:`~tg_valves.valves.Vent`: an opening that is always open.
``relief-valve``
    :class:`~tg_valves.valves.ReliefValve`: closed until its inlet pressure
    rises through the cracking pressure, open until it falls through the
    reseat pressure (modes ``closed`` and ``open``, switched by events).

Equations, assumptions and sources: :mod:`tg_valves.valves` and
docs/fluid-devices.md.

Examples
--------
>>> sorted(k.kind for k in thrustgraph_component_kinds())
['relief-valve', 'vent']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .valves import ReliefValve, Vent

__all__ = ["Vent", "ReliefValve", "thrustgraph_component_kinds"]


@hookimpl
def thrustgraph_component_kinds():
    return [Vent, ReliefValve]
