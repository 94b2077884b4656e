"""One design of a study, flown alone: its outcome values, or why it was screened out.

:func:`fly_design` assembles a parsed model, integrates it exactly as a single
run does (:func:`thrustgraph.flight.integrate.fly_segments`, the same steps and
events) and reads its outcomes from the registry
(:func:`thrustgraph.balance.outcomes.summarise`), so a study's numbers are the run's.
It never raises for a bad design: the result says why it could not fly.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.models.model import parse_model
>>> out = fly_design(parse_model(load_model(default_model_path())))
>>> out.status, round(out.values["apogee"], 3)
('ok', 54.358)
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Sequence

from ..flight.assembly import assemble
from ..base.errors import PluginError, ThrustgraphError, screened_note
from ..flight.integrate import fly_segments
from ..models.model import ParsedModel
from ..balance.outcomes import STATUS_OK, STATUS_SCREENED, summarise

__all__ = ["Outcome", "fly_design"]


@dataclass(frozen=True)
class Outcome:
    """What flying one design gave: ``status`` ('ok' or 'screened'), the reason, and the outcome values (SI)."""

    status: str
    message: str = ""
    values: dict[str, float] = field(default_factory=dict)


def fly_design(parsed: ParsedModel, outputs: Sequence[str] | None = None, *, rtol: float | None = None,
               atol: float | None = None) -> Outcome:
    """Fly one parsed model to its outcome values, or say why it was screened out.

    The integration is the single run's, closure-audit accumulators included:
    they never feed back into the motion, but they take part in the solver's
    error norm, so leaving them out would change the steps (by rounding) and
    the outcomes by up to the tolerance. Never raises for a bad design: a
    model error (a parameter combination a kind refuses), no lift-off, or an
    integration failure give ``Outcome("screened", reason)``. A plugin that breaks the contract
    (:class:`~thrustgraph.base.errors.PluginError`) is not a bad design: it raises.
    """
    try:
        system = assemble(parsed)
        segs = fly_segments(system, rtol=rtol, atol=atol)
    except PluginError:     # a broken plugin is not a bad design: the study stops with the plugin's message
        raise
    except (ThrustgraphError, ArithmeticError, ValueError) as exc:
        return Outcome(STATUS_SCREENED, screened_note(exc))
    if segs.status == 2:
        return Outcome(STATUS_SCREENED, "no lift-off: the thrust never exceeded the weight along the guide")
    try:
        values = summarise(system, segs, outputs)
    except (ArithmeticError, ValueError, ThrustgraphError) as exc:
        return Outcome(STATUS_SCREENED, f"summary failed: {exc}")
    if segs.message not in ("ground impact", "stopped at apogee"):
        return Outcome(STATUS_OK, segs.message, values)
    return Outcome(STATUS_OK, "", values)
