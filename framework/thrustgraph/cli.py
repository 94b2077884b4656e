"""The ``thrustgraph`` command line.

Each sub-command lives in its own module in :mod:`thrustgraph.commands` and
exposes ``NAME``, ``HELP``, ``add_arguments(parser)`` and ``main(args) -> int``.
Bad input ends with one message on stderr and exit status 2; nothing is
written. Integration failures exit with status 1. Ctrl-C and SIGTERM stop
the work alike (:mod:`thrustgraph.interrupts`) with status 130 or 143 and no
traceback. A reader that stops reading standard output (``| head -3``) does
not stop the work: the rest of the printed text is dropped quietly and the
files asked for are still written.

Examples
--------
>>> main(["--version"])  # doctest: +ELLIPSIS
thrustgraph ...
0
"""

from __future__ import annotations

import argparse
import importlib
import io
import os
import select
import sys
from contextlib import contextmanager
from typing import Iterator, Sequence

from .version import __version__
from .errors import IntegrationError, ModelError, PluginError, ThrustgraphError
from .interrupts import Terminated, exit_status, stop_on_signals

__all__ = ["main", "COMMANDS", "build_parser"]

# Sub-command modules, in the order `thrustgraph --help` lists them.
COMMANDS = ["run", "compare", "overlay", "calibrate", "check", "kinds", "new", "export", "graph", "plot", "report", "study"]


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
    with stop_on_signals(), _quiet_when_stdout_closes():
        return _run(args)
    return 128 + 13   # reached only when a broken standard output stopped the command (as SIGPIPE would)


def _run(args: argparse.Namespace) -> int:
    try:
        status = int(args._main(args) or 0)
        sys.stdout.flush()
        return status
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
    except KeyboardInterrupt as exc:
        what = "stopped by SIGTERM" if isinstance(exc, Terminated) else "interrupted"
        print(f"thrustgraph: {what}", file=sys.stderr)
        return exit_status(exc)


class _PipeGuard(io.TextIOBase):
    """Standard output that, once its reader has gone (EPIPE), drops what is still printed."""

    def __init__(self, out) -> None:
        self._out = out
        self.closed_by_reader = False

    def _drop(self) -> None:
        self.closed_by_reader = True
        try:   # later writes, and the interpreter's last flush, go nowhere
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, self._out.fileno())
            os.close(devnull)
        except (OSError, ValueError, io.UnsupportedOperation):
            pass

    def write(self, text: str) -> int:
        if not self.closed_by_reader:
            try:
                return self._out.write(text)
            except BrokenPipeError:
                self._drop()
        return len(text)

    def flush(self) -> None:
        if not self.closed_by_reader:
            try:
                self._out.flush()
            except BrokenPipeError:
                self._drop()

    def isatty(self) -> bool:
        return self._out.isatty()

    def fileno(self) -> int:
        return self._out.fileno()

    @property
    def encoding(self) -> str:  # type: ignore[override]
        return getattr(self._out, "encoding", "utf-8")


def _reader_gone(fd: int) -> bool:
    """True when ``fd`` is a pipe whose reading end is closed (poll reports an error on it)."""
    try:
        poller = select.poll()
        poller.register(fd, select.POLLOUT)
        return any(ev & select.POLLERR for _, ev in poller.poll(0))
    except (OSError, ValueError, AttributeError):
        return False


@contextmanager
def _quiet_when_stdout_closes() -> Iterator[None]:
    real = sys.stdout
    guard = _PipeGuard(real)
    sys.stdout = guard
    try:
        yield
    except BrokenPipeError:   # raised past the guard (e.g. by print's own flush): the same, if stdout is the pipe
        try:
            fd = real.fileno()
        except (OSError, ValueError, io.UnsupportedOperation):
            raise
        if not _reader_gone(fd):
            raise
        guard._drop()
    finally:
        sys.stdout = real


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
