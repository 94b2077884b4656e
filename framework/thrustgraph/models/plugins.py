"""The plugin manager: load the hook specs, then every plugin on the entry-point group.

The core imports no plugin module. Built-in device families and third-party
ones are found the same way, through the ``thrustgraph`` entry-point group.
A fresh manager is made per call; importing thrustgraph loads nothing.

Examples
--------
>>> pm = get_plugin_manager()
>>> kinds = component_kinds(pm)
>>> kinds["airframe"].role
'body'
"""

from __future__ import annotations

import functools
from typing import Iterable

import pluggy

from ..kinds import hookspecs
from ..kinds.component import ROLES, ComponentKind, EnvironmentKind
from ..kinds.contract import check_declaration
from ..base.errors import PluginError
from ..balance.outcomes import check_kind_outcomes

__all__ = ["get_plugin_manager", "component_kinds", "environment_kinds", "plugin_versions"]


def get_plugin_manager(*, autoload: bool = True, block: Iterable[str] = (),
                       extra: Iterable[object] = ()) -> pluggy.PluginManager:
    """Make a plugin manager with the thrustgraph hook specs.

    Parameters
    ----------
    autoload : bool
        Load every plugin registered on the ``thrustgraph`` entry-point group.
    block : iterable of str
        Entry-point names not to load.
    extra : iterable of objects
        Plugin objects to register in addition (for scripts and tests).
    """
    pm = pluggy.PluginManager(hookspecs.PROJECT)
    pm.add_hookspecs(hookspecs)
    for name in block:
        pm.set_blocked(name)
    if autoload:
        pm.load_setuptools_entrypoints(hookspecs.PROJECT)
    for obj in extra:
        pm.register(obj)
    pm.check_pending()
    return pm


def _merge(pm: pluggy.PluginManager, hook_name: str, base: type) -> dict[str, type]:
    hook = getattr(pm.hook, hook_name)
    table: dict[str, type] = {}
    owner: dict[str, str] = {}
    outcomes: dict = {}
    for impl in hook.get_hookimpls():
        plugin_name = pm.get_name(impl.plugin) or repr(impl.plugin)
        result = impl.function() if not impl.argnames else None
        for cls in result or ():
            if not (isinstance(cls, type) and issubclass(cls, base)):
                raise PluginError(f"plugin {plugin_name!r}: {hook_name} returned {cls!r}, "
                                  f"which is not a {base.__name__} subclass")
            if not cls.kind:
                raise PluginError(f"plugin {plugin_name!r}: {cls.__name__} has no 'kind' name")
            if cls.kind in table:
                raise PluginError(f"component kind {cls.kind!r} is declared twice: by plugin "
                                  f"{owner[cls.kind]!r} and by plugin {plugin_name!r}; block one of them")
            if base is ComponentKind and cls.role not in ROLES:
                raise PluginError(f"plugin {plugin_name!r}: kind {cls.kind!r} has role {cls.role!r}; "
                                  f"expected one of {ROLES}")
            check_declaration(cls, pm, impl.plugin)
            if base is ComponentKind:
                check_kind_outcomes(cls, plugin_name, outcomes)
            table[cls.kind] = cls
            owner[cls.kind] = plugin_name
    return table


def component_kinds(pm: pluggy.PluginManager) -> dict[str, type[ComponentKind]]:
    """All component kinds declared by the registered plugins, keyed by kind."""
    return _merge(pm, "thrustgraph_component_kinds", ComponentKind)


def environment_kinds(pm: pluggy.PluginManager) -> dict[str, type[EnvironmentKind]]:
    """All environment kinds declared by the registered plugins, keyed by kind."""
    return _merge(pm, "thrustgraph_environment_kinds", EnvironmentKind)


def plugin_versions(pm: pluggy.PluginManager) -> dict[str, str]:
    """Distribution name and version of every plugin loaded from an entry point.

    Reading a distribution's metadata parses its files (about 3 ms for the bundled plugins, on every flight's
    provenance): the answer is kept per plugin manager and set of registered plugins.
    """
    key = tuple(sorted(str(pm.get_name(plugin)) for plugin, _ in pm.list_plugin_distinfo()))
    return dict(_versions(pm, key))


@functools.lru_cache(maxsize=16)
def _versions(pm: pluggy.PluginManager, key: tuple) -> tuple:
    out = {}
    for plugin, dist in pm.list_plugin_distinfo():
        out[pm.get_name(plugin)] = f"{dist.project_name} {dist.version}"
    return tuple(sorted(out.items()))
