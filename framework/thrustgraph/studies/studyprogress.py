"""A progress bar for studies: designs flown out of the total, screened designs, rate and time left.

It draws one line on standard error, rewritten in place, only when that
stream is a terminal (pipes, logs and CI stay clean) and not with
``quiet=True``. Closing it clears the line. The drawing is tqdm's, as for
every indicator (:mod:`thrustgraph.base.progress`); the rate is tqdm's smoothed
rate of designs per second (over the updates: each chunk that comes back, and
inside a chunk flown in this process), the time left is the designs left at
that rate.

Examples
--------
>>> import io
>>> out = io.StringIO()
>>> bar = StudyProgress(100, "sweep", stream=out, enabled=True, every=0.0)
>>> bar.update(25, screened=2); bar.close()
>>> "25/100" in out.getvalue() and "2 screened" in out.getvalue()
True

The time left, on a clock driven by hand: 100 of 1,000 designs in the first 10 s leave 900 at 10 a second.

>>> now = [0.0]
>>> out = io.StringIO()
>>> bar = StudyProgress(1000, "dispersion", stream=out, enabled=True, every=0.0, clock=lambda: now[0])
>>> bar.update(0); now[0] = 10.0; bar.update(100)
>>> out.getvalue().rsplit("\\r", 1)[-1].split("designs ")[-1]
'(10/s, 90 s left)'
>>> bar.close()
>>> StudyProgress(10, "sweep", stream=io.StringIO()).enabled    # not a terminal
False
"""

from __future__ import annotations

import sys
from typing import IO, Any, Callable

from ..base.progress import is_terminal, line

__all__ = ["StudyProgress"]


class StudyProgress:
    """``update(done, screened)`` after each chunk; ``close()`` at the end.

    Parameters
    ----------
    total : int
        Designs in the study.
    label : str
        The study's kind, drawn first.
    stream, quiet, enabled, every
        As for :class:`thrustgraph.base.progress.Progress`.
    clock : callable, optional
        Seconds now (default: the wall clock); what the rate and the time left are measured with.
    """

    def __init__(self, total: int, label: str = "study", *, stream: IO[str] | None = None, quiet: bool = False,
                 enabled: bool | None = None, every: float = 0.1, clock: Callable[[], float] | None = None) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = (not quiet) and (is_terminal(self.stream) if enabled is None else enabled)
        self.total = max(int(total), 0)
        self.label = label
        self.every = every
        self.screened = 0
        self.clock = clock
        self.bar: Any = None

    def _fields(self, d: dict) -> dict:
        n, total, elapsed = d["n"], d["total"], d["elapsed"]
        rate = d["rate"] or ((n - d["initial"]) / elapsed if elapsed > 0 else 0.0)
        left = f", {(total - n) / rate:.0f} s left" if rate > 0 and n < total else ""
        screened = f", {self.screened} screened" if self.screened else ""
        return {"per_second": f"{rate:.4g}", "left": left, "screened": screened}

    def update(self, done: int, screened: int = 0) -> None:
        if not self.enabled:
            return
        self.screened = screened
        if self.bar is None:
            self.bar = line(self.stream, self._fields, total=self.total, initial=done, desc=self.label,
                            leave=False, ascii=".#", mininterval=self.every, clock=self.clock,
                            bar_format="{desc} [{bar}] {n}/{total} designs ({per_second}/s{left}{screened})")
        else:
            self.bar.update(done - self.bar.n)

    def close(self) -> None:
        """Clear the line (if anything was drawn)."""
        if self.bar is not None:
            self.bar.close()
            self.bar = None
