"""Stage separation in flight: the vehicle flying on and the stage it drops, each assembled anew.

:mod:`thrustgraph.staging` reads the stages and triggers of a model file; this module carries out a separation
while a vehicle flies (:mod:`thrustgraph.integrate` calls it). It may import the model, assembly and balance
layers; nothing below them imports it.
"""

from __future__ import annotations

import numpy as np

from .assembly import ACCUMULATORS, assemble
from .balance import Balance
from .model import parse_model

__all__ = ["separate"]


def separate(system, y: np.ndarray, modes: list[int], stage: tuple[str, ...]):
    """Split a running vehicle into the part that flies on and the dropped stage.

    Returns ``(upper_system, upper_y, upper_modes, dropped_system, dropped_y, dropped_modes, dropped_mass)``.
    The upper stage's audit accumulators carry on, with the dropped mass and its momentum added to what left
    the control volume.
    """
    parsed = system.parsed
    model = parsed.model
    inside = set(stage)
    boundaries = [n for n in model.components if parsed.kinds[n].role == "boundary"]

    def sub(keep: list[str], name: str, free: bool):
        m = model.copy()
        m.name = name
        m.components = {n: t for n, t in model.components.items() if n in keep}
        m.flow_paths = [f"{a} -> {b}" for a, b in parsed.graph.edges if a in keep and b in keep]
        m.stages, m.triggers = {}, {}
        if free:
            m.launch = {"mount": "free", "attitude": model.launch.get("attitude", "follow-wind")}
        return assemble(parse_model(m, plugin_manager=parsed.plugin_manager))

    upper = sub([n for n in model.components if n not in inside], model.name, False)
    dropped = sub([n for n in model.components if n in inside or n in boundaries], f"{model.name}: {' + '.join(stage)}",
                  True)
    old = {n: k for k, n in enumerate(system.state_names)}
    old_modes = {n: modes[k] for k, n in enumerate(system.moded)}

    def mapped(sysm):
        vals = [float(y[old[n]]) if n in old and not n.startswith("audit.") else 0.0 for n in sysm.state_names]
        return np.array(vals), [old_modes.get(n, sysm.mode0[k]) for k, n in enumerate(sysm.moded)]

    uy, um = mapped(upper)
    dy, dm = mapped(dropped)
    n_acc = len(ACCUMULATORS)
    uy[-n_acc:] = y[-n_acc:]
    m_before = _mass(system, y, modes)
    m_after = _mass(upper, uy, um)
    m_drop = m_before - m_after
    v = y[3:6]
    uy[-n_acc] += m_drop                       # mass that left the control volume
    uy[-n_acc + 1:-n_acc + 4] += m_drop * v    # and the momentum it took with it
    return upper, uy, um, dropped, dy, dm, m_drop


def _mass(system, y, modes) -> float:
    bal = Balance(system)
    bal.set_phase(modes, bal.kinematics, False)
    return float(bal.evaluate(0.0, y)["mass"])
