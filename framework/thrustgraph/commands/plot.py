"""``thrustgraph plot``: fly a model and draw its plots (PNG and/or SVG) into a directory.

Plots: thrust, mass, pressure (vessels only), motion (altitude, speed,
acceleration), trajectory, ledger (the balance terms along the body axis,
stacked) and ledger-world (along x, y and z). Files are named NAME.png or
NAME.svg.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from .common import add_model_argument, add_set_option
from .outputs import add_quiet_option, check_paths, default_stem, fly_model, load_checked, need_matplotlib, write_outputs

NAME = "plot"
HELP = "fly a model and draw thrust, mass, pressure, motion, trajectory and balance-ledger plots (PNG/SVG)"

PLOT_NAMES = ("thrust", "mass", "pressure", "motion", "trajectory", "ledger", "ledger-world")


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    p.add_argument("--out", metavar="DIR", help="directory for the images (default: STEM-plots)")
    p.add_argument("--format", choices=("png", "svg", "both"), default="png", help="image format (default png)")
    p.add_argument("--only", action="append", choices=PLOT_NAMES, metavar="PLOT",
                   help=f"draw only this plot (repeatable): {', '.join(PLOT_NAMES)}")
    add_quiet_option(p)


def main(args: argparse.Namespace) -> int:
    need_matplotlib()
    model, parsed = load_checked(args.model, args.overrides)
    out = Path(args.out) if args.out else Path(f"{default_stem(model)}-plots")
    check_paths(directories=[out])   # before flying
    result = fly_model(parsed, quiet=args.quiet)
    from ..plots import figures, render

    formats = ("png", "svg") if args.format == "both" else (args.format,)
    outputs = [(out / f"{name}.{fmt}", render(fig, fmt)) for name, fig in figures(result, args.only).items()
               for fmt in formats]
    write_outputs(outputs, directories=[out])
    return 0
