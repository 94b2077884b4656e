"""A progress indicator for long work on the terminal (flights now, studies later).

It draws one line on standard error and rewrites it in place, and only when
standard error is a terminal: piped or redirected output, logs and CI stay
clean. ``quiet=True`` (the ``--quiet`` option) turns it off everywhere. When
the work ends the line is cleared, so the results print on a clean screen.

The indicator is a callable ``(done, total)``: it plugs straight into
:func:`thrustgraph.integrate.integrate`'s ``progress(t, t_end)`` callback,
where ``done`` is the simulated time reached and ``total`` the longest
simulated time (most flights end earlier, at ground impact).

Examples
--------
>>> import io
>>> out = io.StringIO()
>>> with Progress("flying", stream=out, enabled=True, unit="s") as bar:
...     bar(7.5, 30.0)
>>> "25%" in out.getvalue() and "7.5 s of 30 s" in out.getvalue()
True
>>> Progress("flying", stream=io.StringIO()).enabled   # not a terminal: stays quiet
False
"""

from __future__ import annotations

import sys
import time
from typing import IO, Any

__all__ = ["Progress"]


def _is_terminal(stream: Any) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


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
    every : float
        Least time between redraws, s of wall-clock time.
    """

    def __init__(self, label: str, *, stream: IO[str] | None = None, quiet: bool = False,
                 enabled: bool | None = None, unit: str = "", width: int = 28, every: float = 0.1) -> None:
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = (not quiet) and (_is_terminal(self.stream) if enabled is None else enabled)
        self.unit = unit
        self.width = width
        self.every = every
        self._last = -1.0
        self._shown = 0

    def __call__(self, done: float, total: float) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        frac = 0.0 if total <= 0 else min(max(done / total, 0.0), 1.0)
        if now - self._last < self.every and frac < 1.0:
            return
        self._last = now
        u = f" {self.unit}" if self.unit else ""
        self._write(f"{self._bar(frac)} {frac * 100:3.0f}%  {done:.4g}{u} of {total:.4g}{u}")

    def _bar(self, frac: float) -> str:
        n = int(round(frac * self.width))
        return f"{self.label} [{'#' * n}{'.' * (self.width - n)}]"

    def _write(self, text: str) -> None:
        """Rewrite the line in place, padding over what was there."""
        self.stream.write("\r" + text + " " * max(0, self._shown - len(text)))
        self.stream.flush()
        self._shown = len(text)

    def close(self) -> None:
        """Clear the line (if anything was drawn)."""
        if self.enabled and self._shown:
            self.stream.write("\r" + " " * self._shown + "\r")
            self.stream.flush()
            self._shown = 0

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()
