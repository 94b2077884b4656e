"""``thrustgraph run``: fly a model and print its summary, events and audits."""

from __future__ import annotations

import argparse
import math
import sys

from ..integrate import integrate
from ..result import SUMMARY_UNITS, FlightResult
from ..units import Q_
from .common import add_model_argument, add_set_option, load_with_overrides
from .outputs import add_quiet_option, check_paths, fly_model, load_checked, need_matplotlib, write_outputs

NAME = "run"
HELP = "fly a model and print the summary (burn time, peak thrust and acceleration, apogee or range, audits)"

# How each summary value is shown to people.
_DISPLAY = {
    "flight_time": ("flight time", "s"), "burn_time": ("powered time", "s"),
    "launch_mass": ("launch mass", "g"), "final_mass": ("final mass", "g"),
    "propellant_expelled": ("mass expelled", "g"), "peak_thrust": ("peak thrust", "N"),
    "peak_acceleration": ("peak acceleration", "m/s^2"), "max_speed": ("max speed", "m/s"),
    "guide_exit_speed": ("guide exit speed", "m/s"), "apogee": ("apogee", "m"), "range": ("range", "m"),
    "downrange": ("downrange", "m"), "drift": ("drift (across azimuth)", "m"),
    "total_impulse": ("total impulse", "N*s"), "specific_impulse": ("specific impulse", "s"),
    "impact_speed": ("impact speed", "m/s"), "peak_vessel_pressure": ("peak vessel pressure (abs)", "bar"),
    "dropped_mass": ("mass dropped at separations", "g"),
}


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    p.add_argument("--csv", metavar="FILE", help="write the time series (every signal and ledger term) to CSV")
    p.add_argument("--json", metavar="FILE", help="write the summary, phases, events and audits to JSON")
    p.add_argument("--plots", metavar="DIR", help="also draw the plots (PNG) into DIR")
    p.add_argument("--report", metavar="FILE", help="also write the self-contained HTML report to FILE")
    add_quiet_option(p)


def format_summary(r: FlightResult, name: str) -> str:
    lines = [f"thrustgraph: {name}", ""]
    lines.append("Phases")
    for ph in r.phases:
        lines.append(f"  {ph.name:<24s} {ph.t_start:9.4f} s -> {ph.t_end:9.4f} s   ({ph.duration:.4f} s)")
    lines.append("")
    lines.append("Summary")
    for key, (label, unit) in _DISPLAY.items():
        if key not in r.summary:
            continue
        q = Q_(r.summary[key], SUMMARY_UNITS[key]).to(unit)
        extra = f"   ({r.summary[key] / 9.80665:.3g} g)" if key == "peak_acceleration" else ""
        lines.append(f"  {label:<28s} {q.magnitude:12.5g} {unit}{extra}")
    for key in r.summary:
        if "." in key:  # entries of a component kind (e.g. a parachute's deployment speed)
            unit = r.unit(key)
            lines.append(f"  {key:<28s} {r.summary[key]:12.5g} {unit}")
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
        for key in ("apogee", "range", "impact_speed", "flight_time"):
            if key in sub.summary:
                label, unit = _DISPLAY[key]
                q = Q_(sub.summary[key], SUMMARY_UNITS[key]).to(unit)
                lines.append(f"  {label:<28s} {q.magnitude:12.5g} {unit}")
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
    model, parsed = load_checked(args.model, args.overrides)  # errors name the file or the --set option
    check_paths([args.csv, args.json, args.report], [args.plots])  # before flying: a bad path costs nothing
    result = fly_model(parsed, quiet=args.quiet)
    # Build every output in memory first, so a failure leaves no partial file.
    outputs = []
    if args.csv:
        outputs.append((args.csv, result.to_csv(provenance=True)))
    if args.json:
        outputs.append((args.json, result.to_json()))
    if args.plots:
        from ..plots import figures, render
        outputs += [(f"{args.plots}/{n}.png", render(fig, "png")) for n, fig in figures(result).items()]
    if args.report:
        from ..report import render_report
        outputs.append((args.report, render_report(result, model, parsed=parsed)))
    print(format_summary(result, model.name))
    write_outputs(outputs, directories=[args.plots])
    return 0
