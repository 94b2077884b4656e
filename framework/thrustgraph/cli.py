"""The ``thrustgraph`` command line.

Each sub-command lives in its own module in :mod:`thrustgraph.commands` and
exposes ``NAME``, ``HELP``, ``add_arguments(parser)`` and ``main(args) -> int``.
Bad input ends with one message on stderr and exit status 2; nothing is
written. Integration failures exit with status 1. Ctrl-C and SIGTERM stop
the work alike (:mod:`thrustgraph.base.interrupts`) with status 130 or 143 and no
traceback. A reader that stops reading standard output (``| head -3``) does
not stop the work: the rest of the printed text is dropped quietly, the
files asked for are still written and the exit status is the command's own
(0 when it did its work), never a traceback; ``--version`` and ``--help``
alike.

The command line imports only what the command it runs needs: the one-line
helps of ``thrustgraph --help`` come from :data:`thrustgraph.commands.SUMMARIES`
and only the named command's module is imported and its options added
(``--version`` and ``--help`` import none; benchmarks/cli_startup.py).

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
from typing import Iterable, Iterator, Sequence

from .base.version import __version__
from .commands import SUMMARIES
from .base.errors import IntegrationError, ModelError, PluginError, ThrustgraphError
from .base.interrupts import Terminated, exit_status, stop_on_signals

__all__ = ["main", "COMMANDS", "build_parser", "CommandParser"]

# Sub-command modules, in the order `thrustgraph --help` lists them.
COMMANDS = list(SUMMARIES)


class CommandParser(argparse.ArgumentParser):
    """The parser of one command: its positional arguments may come between its options, as people write them
    (``thrustgraph overlay rocket.toml --variant "fill=0.4" saved.csv``); argparse's plain parsing takes the
    positionals of a ``RUN [RUN ...]`` list only up to the first option and refuses the rest."""

    _inner = False

    def parse_known_args(self, args=None, namespace=None):  # type: ignore[override]
        if self._inner:   # the intermixed parse calls back into this for each of its two passes
            return super().parse_known_args(args, namespace)
        self._inner = True
        try:
            return self.parse_known_intermixed_args(args, namespace)
        finally:
            self._inner = False


def build_parser(commands: Iterable[str] | None = None) -> argparse.ArgumentParser:
    """The parser of the command line, with the options of ``commands`` (default: of every command).

    Every command is listed with its one-line help; only the modules of
    ``commands`` are imported, to add their options (a command whose options
    were not added cannot be run with this parser).

    >>> build_parser(["check"]).parse_args(["check", "--set", "run.end_time=2 s"]).overrides
    ['run.end_time=2 s']
    >>> build_parser(["overlay"]).parse_args(["overlay", "a.toml", "--variant", "x=1", "b.csv"]).runs
    ['a.toml', 'b.csv']
    """
    parser = argparse.ArgumentParser(
        prog="thrustgraph",
        description="Predict how a jet-propelled vehicle moves: thrust, burn time, acceleration, speed, "
                    "apogee or range, from a model graph of its components.",
        epilog="Safety: a prediction is not a rating. Pressurised vessels can burst; flying vehicles can hurt "
               "people. Follow local codes and licensed practice.")
    parser.add_argument("--version", action="store_true", help="print the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=CommandParser)
    wanted = set(COMMANDS if commands is None else commands)
    for name in COMMANDS:
        p = sub.add_parser(name, help=SUMMARIES[name], description=SUMMARIES[name])
        if name in wanted:
            mod = importlib.import_module(f"thrustgraph.commands.{name}")
            mod.add_arguments(p)
            p.set_defaults(_main=mod.main)
    return parser


def command_named(argv: Sequence[str]) -> str | None:
    """The command an argument list runs: its first word that is not an option (the top level's options,
    ``--version`` and ``--help``, take no value), if it is a command.

    >>> command_named(["--version"]), command_named(["check", "rocket.toml"]), command_named(["chek"])
    (None, 'check', None)
    """
    for word in argv:
        if not word.startswith("-"):
            return word if word in SUMMARIES else None
    return None


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    argv = sys.argv[1:] if argv is None else list(argv)
    with stop_on_signals(), _quiet_when_stdout_closes():
        return _run(argv)
    return 128 + 13   # reached only when a broken standard output stopped the command (as SIGPIPE would)


def _run(argv: list[str]) -> int:
    try:
        command = command_named(argv)
        parser = build_parser([command] if command else [])
        try:
            args = parser.parse_args(argv)
        finally:   # --help ends in SystemExit: its text reaches the reader (or is dropped, if it has gone) first
            sys.stdout.flush()
        if args.version:
            print(f"thrustgraph {__version__}")
            sys.stdout.flush()
            return 0
        if not getattr(args, "_main", None):
            parser.print_help()
            sys.stdout.flush()
            return 2
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
