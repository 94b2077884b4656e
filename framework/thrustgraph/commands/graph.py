"""``thrustgraph graph``: draw a model's component graph (PNG or SVG, by the file's suffix).

Vessels, flow elements, jets, bodies and the surroundings are drawn with
their own shapes; flow paths run left to right; a dashed box marks the
control surface, which every momentum-carrying flow crosses.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from . import SUMMARIES
from ..base.errors import ThrustgraphError
from .common import add_model_argument, add_set_option
from .outputs import check_paths, default_stem, load_checked, need_matplotlib, write_outputs

NAME = "graph"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    p.add_argument("--out", metavar="FILE",
                   help="the image to write, .png or .svg (default: STEM-graph.png, STEM being the model file's name)")


def main(args: argparse.Namespace) -> int:
    need_matplotlib()
    if args.out and Path(args.out).suffix.lower() not in (".png", ".svg"):
        raise ThrustgraphError(f"--out {args.out}: the image must end in .png or .svg. Fix: e.g. --out graph.svg")
    model, parsed = load_checked(args.model, args.overrides)
    from ..outputs.plots import graph_figure, render

    out = Path(args.out) if args.out else Path(f"{default_stem(model)}-graph.png")
    check_paths([out])
    data = render(graph_figure(parsed), out.suffix.lower().lstrip("."))
    write_outputs([(out, data)])
    return 0
