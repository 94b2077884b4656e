"""thrustgraph: predict how a jet-propelled vehicle moves, from a graph of its components.

The vehicle is an accelerating control volume. Components (vessels, nozzles,
jets, an airframe, the surroundings) come from plugins; the core assembles
them into one momentum balance, integrates it phase by phase and keeps every
term of the balance for audit.

Examples
--------
>>> import thrustgraph as tg
>>> r = tg.fly()
>>> round(r.audit.mass_relative, 12) == 0.0
True
"""

from __future__ import annotations

from .version import __version__

from .hookspecs import hookimpl, hookspec
from .errors import IntegrationError, ModelError, PluginError, ThrustgraphError
from .model import Model, ParsedModel, parse_model
from .modelfile import default_model_path, load_model, loads_model, save_model, dumps_model
from .assembly import System, assemble
from .integrate import fly, integrate
from .result import FlightResult

__all__ = [
    "__version__", "hookimpl", "hookspec", "ThrustgraphError", "ModelError", "PluginError", "IntegrationError",
    "Model", "ParsedModel", "parse_model", "load_model", "loads_model", "save_model", "dumps_model",
    "default_model_path", "System", "assemble", "integrate", "fly", "FlightResult",
]
