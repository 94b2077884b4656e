"""Progress on the terminal for long work: flights, studies and calibrations, drawn by tqdm.

Each indicator draws one line on standard error and rewrites it in place, and
only when standard error is a terminal: piped or redirected output, logs and
CI stay clean (nothing is drawn, and tqdm is not even imported). ``quiet=True``
(the ``--quiet`` option) turns it off everywhere. The line fits the terminal,
at most :data:`MAX_WIDTH` characters, also when the terminal is resized: the
bar takes what the text leaves, so the line never wraps (a wrapped line
cannot be rewritten in place).

:class:`Progress` is a callable ``(done, total)``: it plugs straight into
:func:`thrustgraph.flight.integrate.integrate`'s ``progress(t, t_end)`` callback,
where ``done`` is the simulated time reached and ``total`` the longest
simulated time (most flights end earlier, at ground impact). When the work
ends the line is cleared, so the results print on a clean screen.

The drawing is tqdm's (a well-kept library: terminal width, rates and their
smoothing, locking, a stream that fails to write), configured once in
:func:`line_class`. A call costs what it cost with the three hand-written
indicators tqdm replaced (interleaved medians: 1.15 against 1.17 us when
drawing, well under 1 us when off), and the line now fits the terminal (a
study's line was 84 characters: it wrapped on an 80-column terminal, and a
wrapped line cannot be rewritten in place).

Examples
--------
>>> import io
>>> out = io.StringIO()
>>> with Progress("flying", stream=out, enabled=True, unit="s", every=0.0) as bar:
...     bar(7.5, 30.0)
>>> "25%" in out.getvalue() and "7.5 s of 30 s" in out.getvalue()
True
>>> Progress("flying", stream=io.StringIO()).enabled   # not a terminal: stays quiet
False
"""

from __future__ import annotations

import functools
import io
import os
import sys
import threading
from typing import IO, Any, Callable

__all__ = ["Progress", "MAX_WIDTH", "is_terminal", "width", "line", "line_class"]

#: The longest line drawn, in characters (a wider terminal gets no longer a line).
MAX_WIDTH = 80


def is_terminal(stream: Any) -> bool:
    """Does ``stream`` write to a terminal?"""
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def width(stream: Any) -> int:
    """Columns a line may take on ``stream``: one less than the terminal's (a line that reaches the last column
    wraps on some terminals), at most :data:`MAX_WIDTH`; :data:`MAX_WIDTH` where no width is known.

    >>> import io
    >>> width(io.StringIO())
    80
    """
    try:
        columns = os.get_terminal_size(stream.fileno()).columns - 1
    except (AttributeError, ValueError, OSError, io.UnsupportedOperation):
        return MAX_WIDTH
    return min(columns, MAX_WIDTH) if columns > 0 else MAX_WIDTH


def line(stream: IO[str], fields: Callable[[dict], dict], **options: Any) -> Any:
    """A tqdm line on ``stream`` as thrustgraph draws it (see :func:`line_class`); ``options`` are tqdm's."""
    return line_class()(file=stream, fields=fields, **options)


@functools.cache
def line_class() -> type:
    """The tqdm subclass every indicator draws with, made on first use: tqdm is imported only when a line is
    drawn, never for piped output or with ``--quiet``.

    A line is at most :data:`MAX_WIDTH` wide and never wider than the terminal; there is no monitor thread and
    the lock is a thread lock only (a study starts worker processes: no thread or process-shared lock of ours
    should exist then); ``fields(format_dict)`` adds the fields of the line's own text; ``clock`` (seconds, by
    default tqdm's wall clock) is what its rate and time left are measured with (tests drive it by hand).
    """
    from tqdm import tqdm

    class Line(tqdm):
        monitor_interval = 0

        def __init__(self, *args: Any, fields: Callable[[dict], dict], clock: Callable[[], float] | None = None,
                     **kw: Any) -> None:
            self.fields = fields
            self.stream = kw.get("file")
            kw.setdefault("position", 0)   # one line, always the current one (never below an unclosed one)
            kw.setdefault("ncols", width(self.stream))
            kw.setdefault("nrows", 1000)   # tqdm hides a line below the terminal's height; a bare pty reports 0
            super().__init__(*args, **kw)
            if clock is not None:
                self._time = clock
                self.last_print_t = self.start_t = clock()

        def close(self) -> None:
            # a line interrupted (Ctrl-C, SIGTERM) while tqdm's __init__ runs has no clock yet; tqdm 4.66's
            # __del__ would then print a traceback from close() (later releases check): nothing to close
            if not hasattr(self, "last_print_t"):
                return
            super().close()

        @property
        def format_dict(self) -> dict:
            d = super().format_dict
            d["ncols"] = width(self.stream)   # read at every redraw: the line follows a resized terminal
            d.update(self.fields(d))
            return d

    Line.set_lock(threading.RLock())
    return Line


class Progress:
    """A one-line progress bar on a terminal stream.

    Parameters
    ----------
    label : str
        What is being done ("flying", "study").
    stream : file, optional
        Where to draw (default: standard error).
    quiet : bool
        Never draw.
    enabled : bool, optional
        Force drawing on or off; by default it draws only on a terminal.
    unit : str
        Unit of ``done`` and ``total`` for the text ("s" for simulated time,
        "" for a count).
    width : int, optional
        Characters of the bar itself (default: what the text leaves of the line).
    every : float
        Least time between redraws, s of wall-clock time.
    """

    def __init__(self, label: str, *, stream: IO[str] | None = None, quiet: bool = False,
                 enabled: bool | None = None, unit: str = "", width: int | None = None, every: float = 0.1) -> None:
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = (not quiet) and (is_terminal(self.stream) if enabled is None else enabled)
        self.unit = unit
        self.width = width
        self.every = every
        self.bar: Any = None

    def __call__(self, done: float, total: float) -> None:
        if not self.enabled:
            return
        if self.bar is None:
            u = f" {self.unit}" if self.unit else ""
            bar = "{bar}" if self.width is None else f"{{bar:{self.width}}}"
            self.bar = line(self.stream, lambda d: {}, total=total, desc=self.label, leave=False, ascii=".#",
                            mininterval=self.every, bar_format=f"{{desc}} [{bar}] {{percentage:3.0f}}%  "
                                                               f"{{n:.4g}}{u} of {{total:.4g}}{u}")
        if total != self.bar.total:
            self.bar.total = total
        self.bar.update(done - self.bar.n)

    def close(self) -> None:
        """Clear the line (if anything was drawn)."""
        if self.bar is not None:
            self.bar.close()
            self.bar = None

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()
