"""Recovery devices: a parachute or streamer that deploys at apogee, after a delay or at an altitude.

Kinds
-----
``recovery-device``
    :class:`~tg_recovery.device.RecoveryDevice`: a body with its own mass and
    the drag area of the open device, packed until it deploys, then opening
    over an opening time. States ``delay_timer`` and ``opening``; modes
    ``packed`` -> ``armed`` -> ``opening`` -> ``open``.

After a run, :func:`~tg_recovery.summary.recovery_summary` gives each device's
deployment time, altitude and speed and its peak opening load. The equations,
assumptions, limits and sources are in :mod:`tg_recovery.device` and in
docs/recovery-and-launch.md.

Examples
--------
>>> [k.kind for k in thrustgraph_component_kinds()]
['recovery-device']
"""

from __future__ import annotations

from thrustgraph import hookimpl

from .device import RecoveryDevice
from .summary import recovery_summary

__all__ = ["RecoveryDevice", "recovery_summary", "thrustgraph_component_kinds", "thrustgraph_check_model"]


@hookimpl
def thrustgraph_component_kinds():
    return [RecoveryDevice]


@hookimpl
def thrustgraph_check_model(model):
    """A recovery device needs a medium to push on."""
    problems = []
    devices = [n for n in model.model.components if issubclass(model.kinds[n], RecoveryDevice)]
    if not devices:
        return problems
    name = devices[0]
    rho = model.ambient.density
    if rho == 0.0:
        problems.append(f"components.{name}: a recovery device in a medium without density (vacuum) never makes "
                        "any drag; to fix it, fly it in air (e.g. [environment.medium] kind = \"still-air\") or "
                        "remove it")
    return problems
