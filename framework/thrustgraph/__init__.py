"""thrustgraph: predict how a jet-propelled vehicle moves, from a graph of its components.

The vehicle is an accelerating control volume. Components (vessels, nozzles,
jets, an airframe, the surroundings) come from plugins; the core assembles
them into one momentum balance, integrates it phase by phase and keeps every
term of the balance for audit.

The public names below load on first use (PEP 562): ``import thrustgraph``
costs a few milliseconds, and the command line imports only what its command
needs (pint, scipy and the plugins take about a second to import).

Examples
--------
>>> import thrustgraph as tg
>>> r = tg.fly()
>>> round(r.audit.mass_relative, 12) == 0.0
True
"""

from __future__ import annotations

import sys
import types
from typing import TYPE_CHECKING, Any

from .base.version import __version__

if TYPE_CHECKING:   # what the names below are, for type checkers and editors; loaded lazily at run time
    from .kinds.hookspecs import hookimpl, hookspec
    from .base.errors import IntegrationError, ModelError, PluginError, ThrustgraphError
    from .models.model import Model, ParsedModel, parse_model
    from .models.modelfile import default_model_path, load_model, loads_model, save_model, dumps_model
    from .flight.assembly import System, assemble
    from .flight.integrate import fly, integrate
    from .flight.result import FlightResult

__all__ = [
    "__version__", "hookimpl", "hookspec", "ThrustgraphError", "ModelError", "PluginError", "IntegrationError",
    "Model", "ParsedModel", "parse_model", "load_model", "loads_model", "save_model", "dumps_model",
    "default_model_path", "System", "assemble", "integrate", "fly", "FlightResult",
]

#: The names loaded on first use.
_LAZY = frozenset(__all__) - {"__version__"}


def __getattr__(name: str) -> Any:
    """Import a public name's module on first use and keep its public names here (PEP 562)."""
    if name == "hookimpl" or name == "hookspec":
        from .kinds.hookspecs import hookimpl, hookspec
    elif name in ("ThrustgraphError", "ModelError", "PluginError", "IntegrationError"):
        from .base.errors import IntegrationError, ModelError, PluginError, ThrustgraphError
    elif name in ("Model", "ParsedModel", "parse_model"):
        from .models.model import Model, ParsedModel, parse_model
    elif name in ("default_model_path", "load_model", "loads_model", "save_model", "dumps_model"):
        from .models.modelfile import default_model_path, load_model, loads_model, save_model, dumps_model
    elif name in ("System", "assemble"):
        from .flight.assembly import System, assemble
    elif name in ("fly", "integrate"):
        from .flight.integrate import fly, integrate
    elif name == "FlightResult":
        from .flight.result import FlightResult
    else:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    found = {k: v for k, v in locals().items() if k in _LAZY}
    globals().update(found)
    return found[name]


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))


class _Package(types.ModuleType):
    """The package's module type: a public name is never replaced by a submodule of the same name.

    The import system binds every submodule it loads to its package
    (``thrustgraph.flight.integrate = <module>``); ``thrustgraph.flight.integrate`` is the
    function of the public API, loaded or not yet, whatever was imported before.
    """

    def __setattr__(self, name: str, value: Any) -> None:
        if name in _LAZY and isinstance(value, types.ModuleType):
            return
        super().__setattr__(name, value)


sys.modules[__name__].__class__ = _Package
