"""A progress bar for studies: designs flown out of the total, screened designs, rate and time left.

It draws one line on standard error, rewritten in place, only when that
stream is a terminal (pipes, logs and CI stay clean) and not with
``quiet=True``. Closing it clears the line.

Examples
--------
>>> import io
>>> out = io.StringIO()
>>> bar = StudyProgress(100, "sweep", stream=out, enabled=True)
>>> bar.update(25, screened=2)
>>> "25/100" in out.getvalue() and "2 screened" in out.getvalue()
True
>>> StudyProgress(10, "sweep", stream=io.StringIO()).enabled    # not a terminal
False
"""

from __future__ import annotations

import time
from typing import IO

from .progress import Progress

__all__ = ["StudyProgress"]


class StudyProgress(Progress):
    """``update(done, screened)`` after each chunk; ``close()`` at the end."""

    def __init__(self, total: int, label: str = "study", *, stream: IO[str] | None = None, quiet: bool = False,
                 enabled: bool | None = None, width: int = 24, every: float = 0.1) -> None:
        super().__init__(label, stream=stream, quiet=quiet, enabled=enabled, width=width, every=every)
        self.total = max(int(total), 0)
        self._t0 = time.monotonic()

    def update(self, done: int, screened: int = 0) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self._last < self.every and done < self.total:
            return
        self._last = now
        frac = done / self.total if self.total else 1.0
        el = now - self._t0
        rate = done / el if el > 0 else 0.0
        left = (self.total - done) / rate if rate > 0 else float("nan")
        eta = f", {left:.0f} s left" if rate > 0 and done < self.total else ""
        scr = f", {screened} screened" if screened else ""
        self._write(f"{self._bar(frac)} {done}/{self.total} designs ({rate:.4g}/s{eta}{scr})")
