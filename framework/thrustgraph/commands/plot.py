"""``thrustgraph plot``: fly a model and draw its plots (PNG and/or SVG) into a directory.

The plots are those of the plot registry (:mod:`thrustgraph.outputs.plotkinds`) whose
subject is a flight; files are named NAME.png or NAME.svg.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from . import SUMMARIES
from ..outputs.plotkinds import FLIGHT, IMAGE_FORMATS, names
from ..kinds.displayunits import using
from .common import add_model_argument, add_out_dir_option, add_set_option, add_units_option, units_choice
from .outputs import add_quiet_option, check_paths, default_stem, fly_model, load_checked, need_matplotlib, write_outputs

NAME = "plot"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    add_out_dir_option(p, "directory for the images (default: STEM-plots)", old="--out")
    p.add_argument("--format", choices=IMAGE_FORMATS + ("both",), default="png",
                   help=f"image format: {', '.join(IMAGE_FORMATS)} or both (default png)")
    p.add_argument("--only", action="append", choices=names(FLIGHT), metavar="PLOT",
                   help=f"draw only this plot (repeatable): {', '.join(names(FLIGHT))}")
    add_units_option(p)
    add_quiet_option(p)


def main(args: argparse.Namespace) -> int:
    need_matplotlib()
    model, parsed = load_checked(args.model, args.overrides)
    choice = units_choice(args, parsed)
    out = Path(args.out_dir) if args.out_dir else Path(f"{default_stem(model)}-plots")
    check_paths(directories=[out])   # before flying
    result = fly_model(parsed, quiet=args.quiet)
    from ..outputs.plots import figures, render

    formats = IMAGE_FORMATS if args.format == "both" else (args.format,)
    with using(choice):
        outputs = [(out / f"{name}.{fmt}", render(fig, fmt)) for name, fig in figures(result, args.only).items()
                   for fmt in formats]
    write_outputs(outputs, directories=[out])
    return 0
