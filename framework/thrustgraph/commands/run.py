"""``thrustgraph run``: fly a model and print its summary, events and audits."""

from __future__ import annotations

import argparse
import math
import sys
from typing import Sequence

from . import SUMMARIES
from ..kinds.displayunits import shown, using
from ..outputs.exportformats import EXPORTS
from ..flight.result import FlightResult
from .common import add_model_argument, add_set_option, add_units_option, units_choice
from .outputs import (add_export_options, add_quiet_option, check_paths, export_targets, fly_model, load_checked,
                      need_matplotlib, write_outputs)

NAME = "run"
HELP = SUMMARIES[NAME]

def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    add_export_options(p, verb="also write")
    p.add_argument("--plots", metavar="DIR", help="also draw the plots (PNG) into DIR")
    p.add_argument("--report", metavar="FILE", help="also write the self-contained HTML report to FILE")
    add_units_option(p)
    add_quiet_option(p)


def summary_lines(r: FlightResult, keys: Sequence[str] | None = None) -> list[str]:
    """One line per summary entry people need to see: label, value in its display unit scaled to its magnitude
    (:meth:`~thrustgraph.kinds.outcomespec.OutcomeSpec.unit_for`; and in ``also`` units).

    Labels and units come from the outcome registry (``r.outcome_specs``); an
    entry whose ``show`` predicate says it adds nothing (a downrange equal to
    the range) is left out. Values are shown in the units of choice in force
    (:func:`thrustgraph.kinds.displayunits.shown`; SI by default).
    """
    rows = []
    for key in (r.summary if keys is None else [k for k in keys if k in r.summary]):
        spec = r.outcome_specs.get(key)
        if spec is None:
            value, unit = shown(r.summary[key], r.unit(key))
            rows.append((key, value, f" {unit}" if unit else "", ""))
        elif spec.show(r.summary):
            v = r.summary[key]
            extra = ", ".join(f"{spec.shown(v, u):.4g} {u}" for u in spec.also)
            extra = f"   ({extra})" if extra else ""
            value, unit = shown(v, spec.unit, display=spec.display)
            rows.append((spec.label, value, f" {unit}" if unit else "", extra))
    width = max([32] + [len(label) for label, *_ in rows])     # a component's long label keeps the column
    return [f"  {label:<{width}s} {value:12.5g}{unit}{extra}" for label, value, unit, extra in rows]


def format_summary(r: FlightResult, name: str) -> str:
    lines = [f"thrustgraph: {name}", ""]
    lines.append("Phases")
    for ph in r.phases:
        lines.append(f"  {ph.name:<24s} {ph.t_start:9.4f} s -> {ph.t_end:9.4f} s   ({ph.duration:.4f} s)")
    lines.append("")
    lines.append("Summary")
    lines += summary_lines(r)
    lines.append("")
    lines.append("Events")
    for e in r.events:
        lines.append(f"  {e.t:9.4f} s  {e.name:<20s} {e.component:<10s} {e.detail}")
    lines.append("")
    a = r.audit
    lines.append("Closure audits")
    lines.append(f"  mass residual       {a.mass_residual:+.3e} kg   (relative {a.mass_relative:+.3e})")
    m = math.sqrt(sum(c * c for c in a.momentum_residual))
    lines.append(f"  momentum residual   {m:.3e} kg m/s (relative {a.momentum_relative:.3e})")
    for stage, sub in r.dropped.items():
        lines.append("")
        lines.append(f"Dropped stage {stage!r} (flown on from {sub.t[0]:.4f} s)")
        lines += summary_lines(sub, ("apogee", "range", "impact_speed", "flight_time"))
        lines.append(f"  outcome: {sub.message}")
    lines.append("")
    lines.append(f"Outcome: {r.message}")
    if r.cautions:
        lines.append("")
        lines.append("Cautions")
        for c in r.cautions:
            lines.append(f"  ! {c}")
    return "\n".join(lines)


def main(args: argparse.Namespace) -> int:
    if args.plots or args.report:
        need_matplotlib()
    exports = export_targets(args)
    model, parsed = load_checked(args.model, args.overrides)  # errors name the file or the --set option
    choice = units_choice(args, parsed)
    for w in parsed.warnings():       # on stderr, before the flight: the summary on stdout stays as it was
        print(f"thrustgraph: warning: {w}", file=sys.stderr)
    check_paths([path for _, path in exports] + [args.report], [args.plots])  # before flying: a bad path costs nothing
    result = fly_model(parsed, quiet=args.quiet)
    # Build every output in memory first, so a failure leaves no partial file; all in the units of choice.
    with using(choice):
        outputs = [(path, EXPORTS[name].render(result)) for name, path in exports]
        if args.plots:
            from ..outputs.plots import figures, render
            outputs += [(f"{args.plots}/{n}.png", render(fig, "png")) for n, fig in figures(result).items()]
        if args.report:
            from ..outputs.report import render_report
            outputs.append((args.report, render_report(result, model, parsed=parsed)))
        print(format_summary(result, model.name))
    write_outputs(outputs, directories=[args.plots])
    return 0
