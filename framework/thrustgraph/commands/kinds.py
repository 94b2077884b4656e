"""``thrustgraph kinds``: list the installed device and environment kinds with their parameters.

Each parameter line gives its unit, its allowed range and its default (or
"required"), from the kind's own declaration, so the listing is always the
truth about what the installed plugins accept.
"""

from __future__ import annotations

import argparse
import difflib

from . import SUMMARIES
from ..kinds.component import ROLES
from ..base.errors import ModelError
from ..models.model import LAUNCH_SPECS, RUN_SPECS
from ..models.plugins import component_kinds, environment_kinds, get_plugin_manager, plugin_versions

NAME = "kinds"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("names", nargs="*", metavar="KIND", help="show only these kinds (default: all)")
    p.add_argument("--brief", action="store_true", help="one line per kind, without parameters")
    p.add_argument("--settings", action="store_true",
                   help="also list the [launch] and [run] settings every model file may use")


def _owners(pm) -> dict[str, str]:
    """Kind name -> the plugin (and distribution) that declares it."""
    versions = plugin_versions(pm)
    out = {}
    for hook in (pm.hook.thrustgraph_component_kinds, pm.hook.thrustgraph_environment_kinds):
        for impl in hook.get_hookimpls():
            name = pm.get_name(impl.plugin) or repr(impl.plugin)
            for cls in impl.function() or ():
                out[cls.kind] = f"{name} ({versions[name]})" if name in versions else name
    return out


def _params(specs) -> list[str]:
    if not specs:
        return ["      (no parameters)"]
    width = max(len(s.name) for s in specs)
    return [f"      {s.name:<{width}s}  {s.describe()}" for s in specs]


def main(args: argparse.Namespace) -> int:
    pm = get_plugin_manager()
    kinds = component_kinds(pm)
    env = environment_kinds(pm)
    owners = _owners(pm)
    every = list(kinds) + list(env)
    for n in args.names:
        if n not in every:
            close = difflib.get_close_matches(n, every, n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"installed kinds: {', '.join(sorted(every))}"
            raise ModelError(f"kinds {n}", "no such kind is installed", hint)
    wanted = set(args.names) if args.names else None
    lines = []
    comps = [c for c in kinds.values() if wanted is None or c.kind in wanted]
    roles = list(ROLES) + sorted({c.role for c in comps} - set(ROLES))
    if comps:
        lines.append("Device kinds (write them as kind = \"...\" under [components.NAME])")
        for role in roles:
            for cls in sorted((c for c in comps if c.role == role), key=lambda c: c.kind):
                lines.append(f"  {cls.kind}  [{cls.role}]  {cls.summary}")
                if not args.brief:
                    lines.append(f"      from plugin {owners.get(cls.kind, '?')}")
                    lines.extend(_params(cls.parameters))
                    lines.append("")
        if args.brief:
            lines.append("")
    envs = [c for c in env.values() if wanted is None or c.kind in wanted]
    if envs:
        lines.append("Environment kinds (write them under [environment.medium] or [environment.gravity])")
        for cls in sorted(envs, key=lambda c: (c.slot, c.kind)):
            lines.append(f"  {cls.kind}  [{cls.slot}]  {cls.summary}")
            if not args.brief:
                lines.append(f"      from plugin {owners.get(cls.kind, '?')}")
                lines.extend(_params(cls.parameters))
                lines.append("")
    if args.settings:
        lines.append("")
        for title, specs in (("[launch] settings", LAUNCH_SPECS), ("[run] settings", RUN_SPECS)):
            lines.append(title)
            lines.extend(_params(specs))
            lines.append("")
    print("\n".join(lines).rstrip())
    return 0
