"""``thrustgraph check``: validate a model and print its components, graph, mass at launch, warnings and cautions.

Nothing is flown, but the vehicle is assembled, so the plugin contract is
checked too (:mod:`thrustgraph.kinds.contract`). The exit status is 0 for a valid
model and 2 (with one message naming the file, the key and the fix, or the
plugin, the kind and the hook) for an invalid one.
"""

from __future__ import annotations

import argparse

import networkx as nx

from . import SUMMARIES
from ..flight.assembly import assemble
from ..models.model import ParsedModel
from .common import add_model_argument, add_set_option
from .outputs import load_checked

NAME = "check"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)


def describe_graph(parsed: ParsedModel) -> list[str]:
    """Flow paths from every vessel or jet to the surroundings, and the parts that carry no flow."""
    g = parsed.graph
    kinds = parsed.kinds
    lines = []
    names = list(parsed.model.components)
    starts = [n for n in names if kinds[n].role != "body" and g.in_degree(n) == 0 and g.out_degree(n) > 0]
    ends = [n for n in names if kinds[n].role != "body" and g.out_degree(n) == 0 and g.in_degree(n) > 0]
    for s in starts:
        for e in ends:
            for path in nx.all_simple_paths(g, s, e):
                crossing = [f"{a} -> {b}" for a, b in zip(path, path[1:])
                            if (kinds[a].role == "boundary") != (kinds[b].role == "boundary")]
                note = f"   (crosses the control surface: {', '.join(crossing)})" if crossing else ""
                lines.append("  " + " -> ".join(path) + note)
    for n in parsed.model.components:
        if kinds[n].role == "body":
            lines.append(f"  {n}   (body: carries mass and external forces, no flow)")
    return lines


def mass_breakdown(parsed: ParsedModel) -> list[tuple[str, str, float]]:
    """(component, part, kg) at launch, from each kind's ``describe_mass``."""
    rows = []
    for n in parsed.model.components:
        for part, kg in parsed.kinds[n].describe_mass(parsed.params[n], parsed.ambient).items():
            rows.append((n, part, float(kg)))
    return rows


def format_check(parsed: ParsedModel) -> str:
    m = parsed.model
    lines = [f"thrustgraph check: {m.name}" + (f"  ({m.source})" if m.source else ""), "",
             "The model is valid: every parameter, unit and connection checks out.", ""]
    width = max(len(n) for n in m.components)
    kwidth = max(len(parsed.kinds[n].kind) for n in m.components)
    lines.append("Components")
    for n in m.components:
        k = parsed.kinds[n]
        lines.append(f"  {n:<{width}s}  {k.kind:<{kwidth}s}  {k.role:<8s}  {k.summary}")
    lines.append("")
    lines.append("Graph (flow paths, upstream to downstream)")
    lines.extend(describe_graph(parsed) or ["  (no flow paths)"])
    lines.append("")
    env = ", ".join(f"{slot} {cls.kind}" for slot, cls in parsed.env_kinds.items())
    lines.append(f"Environment: {env}; at the launch point {parsed.ambient.pressure / 1e5:.5g} bar, "
                 f"{parsed.ambient.temperature - 273.15:.4g} degC, {parsed.ambient.density:.4g} kg/m^3")
    lines.append("")
    lines.append("Mass at launch")
    rows = mass_breakdown(parsed)
    pw = max([len(p) for _, p, _ in rows] + [5])
    total = 0.0
    for n, part, kg in rows:
        lines.append(f"  {n:<{width}s}  {part:<{pw}s}  {kg * 1e3:12.4f} g")
        total += kg
    lines.append(f"  {'total':<{width}s}  {'':<{pw}s}  {total * 1e3:12.4f} g")
    warnings = parsed.warnings()
    if warnings:
        lines.append("")
        lines.append("Warnings (the model is valid, but probably not what was meant)")
        lines.extend(f"  warning: {w}" for w in warnings)
    cautions = parsed.cautions()
    if cautions:
        lines.append("")
        lines.append("Cautions")
        lines.extend(f"  ! {c}" for c in cautions)
    return "\n".join(lines)


def main(args: argparse.Namespace) -> int:
    _, parsed = load_checked(args.model, args.overrides)
    assemble(parsed)  # builds every component's callables: a plugin that breaks the contract is named here
    print(format_check(parsed))
    return 0
