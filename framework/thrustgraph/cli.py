"""The ``thrustgraph`` command line.

Each sub-command lives in its own module in :mod:`thrustgraph.commands` and
exposes ``NAME``, ``HELP``, ``add_arguments(parser)`` and ``main(args) -> int``.
Bad input ends with one message on stderr and exit status 2; nothing is
written. Integration failures exit with status 1.

Examples
--------
>>> main(["--version"])  # doctest: +ELLIPSIS
thrustgraph ...
0
"""

from __future__ import annotations

import argparse
import importlib
import sys
from typing import Sequence

from .version import __version__
from .errors import IntegrationError, ModelError, PluginError, ThrustgraphError

__all__ = ["main", "COMMANDS", "build_parser"]

# Sub-command modules, in the order `thrustgraph --help` lists them.
COMMANDS = ["run", "compare", "calibrate", "check", "kinds", "new", "export", "graph", "plot", "report", "study"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="thrustgraph",
        description="Predict how a jet-propelled vehicle moves: thrust, burn time, acceleration, speed, "
                    "apogee or range, from a model graph of its components.",
        epilog="Safety: a prediction is not a rating. Pressurised vessels can burst; flying vehicles can hurt "
               "people. Follow local codes and licensed practice.")
    parser.add_argument("--version", action="store_true", help="print the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        mod = importlib.import_module(f"thrustgraph.commands.{name}")
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.HELP)
        mod.add_arguments(p)
        p.set_defaults(_main=mod.main)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.version:
        print(f"thrustgraph {__version__}")
        return 0
    if not getattr(args, "_main", None):
        parser.print_help()
        return 2
    try:
        return int(args._main(args) or 0)
    except ModelError as exc:
        print(f"thrustgraph: error: {exc}", file=sys.stderr)
        return 2
    except PluginError as exc:
        print(f"thrustgraph: plugin error: {exc}", file=sys.stderr)
        return 2
    except IntegrationError as exc:
        print(f"thrustgraph: integration failed: {exc}", file=sys.stderr)
        return 1
    except ThrustgraphError as exc:
        print(f"thrustgraph: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("thrustgraph: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
