"""Stage separation in flight: the vehicle flying on and the stage it drops, each assembled anew.

:mod:`thrustgraph.models.staging` reads the stages and triggers of a model file; this module says what a separation
does, once for a single flight and for an ensemble: which model flies on and which is dropped
(:func:`stage_models`), and how the states and modes of the vehicle before carry over to each of them
(:func:`carry`, for one design or for arrays of designs). :mod:`thrustgraph.flight.integrate` calls :func:`separate`
while a vehicle flies; :mod:`thrustgraph.flight.ensemble` calls the two parts on its arrays. It may import the model,
assembly and balance layers; nothing below them imports it.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, bundled_models
>>> from thrustgraph.models.model import parse_model
>>> parsed = parse_model(load_model(bundled_models()["two-stage-demo"]))
>>> upper, dropped = stage_models(parsed, parsed.stages["booster"])
>>> list(upper.model.components), dropped.launch.mount
(['upper_frame', 'sustainer', 'outside'], 'free')
>>> y, modes = carry(("a", "b", "audit.mass_out"), ("b",), [1.0, 2.0, 3.0], [1], ("b", "c", "audit.mass_out"),
...                  ("c", "b"), (0, 0))
>>> y.tolist(), modes
([2.0, 0.0, 0.0], [0, 1])
"""

from __future__ import annotations

import dataclasses
from typing import Any, Sequence

import numpy as np

from .assembly import ACCUMULATORS, assemble
from ..balance.balance import Balance
from ..models.model import ParsedModel, parse_model

__all__ = ["separate", "stage_models", "carry"]


def _sub(parsed: ParsedModel, keep: Sequence[str], name: str, free: bool) -> ParsedModel:
    """The model of some of a vehicle's components (and the flow paths between them), without stages and
    triggers; ``free`` launches it in free flight (a dropped stage, with the launch settings' defaults).

    The components and the environment keep the parsed values of ``parsed`` (a study's design sets them
    there, not in the model's text), and the vehicle flying on keeps its launch settings.
    """
    model = parsed.model
    m = model.copy()
    m.name = name
    m.components = {n: t for n, t in model.components.items() if n in keep}
    m.flow_paths = [f"{a} -> {b}" for a, b in parsed.graph.edges if a in keep and b in keep]
    m.stages, m.triggers = {}, {}
    if free:
        m.launch = {"mount": "free", "attitude": model.launch.get("attitude", "follow-wind")}
    sub = parse_model(m, plugin_manager=parsed.plugin_manager)
    values = {"params": {n: parsed.params[n] for n in sub.params}, "env_params": dict(parsed.env_params)}
    if not free:
        values.update(launch=parsed.launch, ambient=parsed.ambient)
    return dataclasses.replace(sub, **values)


def stage_models(parsed: ParsedModel, stage: Sequence[str]) -> tuple[ParsedModel, ParsedModel]:
    """What a separation of ``stage`` (component names) leaves of a vehicle's model: the model that flies on
    (every other component, the same launch) and the dropped stage's (its components and the surroundings,
    in free flight)."""
    model = parsed.model
    inside = set(stage)
    boundaries = [n for n in model.components if parsed.kinds[n].role == "boundary"]
    upper = _sub(parsed, [n for n in model.components if n not in inside], model.name, False)
    dropped = _sub(parsed, [n for n in model.components if n in inside or n in boundaries],
                   f"{model.name}: {' + '.join(stage)}", True)
    return upper, dropped


def carry(old_names: Sequence[str], old_moded: Sequence[str], y: Any, modes: Sequence[Any],
          new_names: Sequence[str], new_moded: Sequence[str], new_mode0: Sequence[Any]) -> tuple[np.ndarray, list]:
    """The states and modes of a vehicle after a separation, from those before it, by name.

    A state the new vehicle shares with the old keeps its value; the closure-audit accumulators (``audit.*``)
    and states the old vehicle did not have start at zero; a moded component keeps its mode (a new one takes
    ``new_mode0``). ``y`` holds one value per old state, each a float (one design) or an array over designs;
    ``modes`` one mode per old moded component, likewise.
    """
    old = {n: k for k, n in enumerate(old_names)}
    first = np.asarray(y[0]) if len(old_names) else np.zeros(())
    out = np.zeros((len(new_names),) + first.shape)
    for k, n in enumerate(new_names):
        if n in old and not n.startswith("audit."):
            out[k] = y[old[n]]
    om = {n: k for k, n in enumerate(old_moded)}
    return out, [modes[om[n]] if n in om else new_mode0[k] for k, n in enumerate(new_moded)]


def separate(system, y: np.ndarray, modes: list[int], stage: tuple[str, ...]):
    """Split a running vehicle into the part that flies on and the dropped stage.

    Returns ``(upper_system, upper_y, upper_modes, dropped_system, dropped_y, dropped_modes, dropped_mass)``.
    The upper stage's audit accumulators carry on, with the dropped mass and its momentum added to what left
    the control volume.
    """
    up_parsed, drop_parsed = stage_models(system.parsed, stage)
    upper, dropped = assemble(up_parsed), assemble(drop_parsed)

    def mapped(sysm):
        vals, md = carry(system.state_names, system.moded, [float(v) for v in y], modes, sysm.state_names,
                         sysm.moded, sysm.mode0)
        return vals, [int(m) for m in md]

    uy, um = mapped(upper)
    dy, dm = mapped(dropped)
    n_acc = len(ACCUMULATORS)
    uy[-n_acc:] = y[-n_acc:]
    m_before = _mass(system, y)
    m_after = _mass(upper, uy)
    m_drop = m_before - m_after
    v = y[3:6]
    uy[-n_acc] += m_drop                       # mass that left the control volume
    uy[-n_acc + 1:-n_acc + 4] += m_drop * v    # and the momentum it took with it
    return upper, uy, um, dropped, dy, dm, m_drop


def _mass(system, y) -> float:
    return float(Balance(system).mass(list(y)))
