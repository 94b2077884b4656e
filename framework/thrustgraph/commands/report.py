"""``thrustgraph report``: fly a model and write one self-contained HTML report.

The report holds the safety cautions, the summary with units, the phases and
events, the ledger audit, the plots and the component graph (embedded), the
model text as flown, and the tool and plugin versions with the model's hash.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from . import SUMMARIES
from ..kinds.displayunits import using
from .common import add_model_argument, add_set_option, add_units_option, units_choice
from .outputs import add_quiet_option, check_paths, default_stem, fly_model, load_checked, need_matplotlib, write_outputs

NAME = "report"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    p.add_argument("--out", metavar="FILE", help="the HTML file to write (default: STEM-report.html)")
    add_units_option(p)
    add_quiet_option(p)


def main(args: argparse.Namespace) -> int:
    need_matplotlib()
    model, parsed = load_checked(args.model, args.overrides)
    choice = units_choice(args, parsed)
    out = Path(args.out) if args.out else Path(f"{default_stem(model)}-report.html")
    check_paths([out])   # before flying
    result = fly_model(parsed, quiet=args.quiet)
    from ..outputs.report import render_report

    with using(choice):      # the summary and the plots in the units of choice
        page = render_report(result, model, parsed=parsed)
    write_outputs([(out, page)])
    print(f"outcome: {result.message}")
    return 0
