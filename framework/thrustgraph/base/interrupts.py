"""Stopping from outside: Ctrl-C (SIGINT) and SIGTERM end the work the same way, and worker processes stay quiet.

Python turns SIGINT into :class:`KeyboardInterrupt`. Inside
:func:`stop_on_signals`, SIGTERM raises :class:`Terminated`, which *is* a
``KeyboardInterrupt``: every place that keeps finished work on Ctrl-C (a
study keeps the designs already flown) does the same when a service
manager, ``timeout`` or ``kill`` stops the process, and every ``finally``
block (removing temporary files) runs. :func:`exit_status` gives the
conventional status, 128 + the number of the signal that arrived (130 for
SIGINT, 143 for SIGTERM), also where the exception was caught and replaced
on the way (a study that stops early returns its table instead).

A terminal's Ctrl-C goes to every process of the foreground group, worker
processes included. :func:`sigint_held` holds SIGINT back while a pool of
workers starts: the processes started meanwhile inherit the held signal and
never see it (no traceback from a half-started worker), while this process
gets it, once, right after.

Examples
--------
>>> import signal
>>> with stop_on_signals():
...     try:
...         signal.raise_signal(signal.SIGTERM)
...     except KeyboardInterrupt as exc:
...         print(type(exc).__name__, exit_status(exc))
Terminated 143
>>> exit_status(KeyboardInterrupt())
130
"""

from __future__ import annotations

import signal
import threading
from contextlib import contextmanager
from typing import Any, Iterator

__all__ = ["Terminated", "stop_on_signals", "exit_status", "last_signal", "sigint_held"]


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived (inside :func:`stop_on_signals`): handled like Ctrl-C, reported as SIGTERM."""

    signum = signal.SIGTERM


#: The last signal that arrived inside :func:`stop_on_signals` (None: none yet).
_received: list[int] = []


def _on_signal(signum: int, frame: Any) -> None:
    _received[:] = [signum]
    if signum == signal.SIGTERM:
        raise Terminated()
    raise KeyboardInterrupt()


def last_signal() -> int | None:
    """The number of the last signal that stopped work inside :func:`stop_on_signals`, or None."""
    return _received[0] if _received else None


@contextmanager
def stop_on_signals() -> Iterator[None]:
    """Within the block, SIGTERM raises :class:`Terminated` and SIGINT ``KeyboardInterrupt``; both are remembered
    for :func:`exit_status` until the block ends.

    Only the main thread can set signal handlers; elsewhere the block changes nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _received.clear()
    old = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for s, handler in old.items():
            signal.signal(s, handler)
        _received.clear()


def exit_status(exc: BaseException | None = None) -> int:
    """128 + the number of the signal that stopped the work (130 for Ctrl-C, 143 for SIGTERM): the exception's
    own, else the last one :func:`stop_on_signals` saw, else SIGINT's."""
    signum = getattr(exc, "signum", None) or last_signal() or signal.SIGINT
    return 128 + int(signum)


@contextmanager
def sigint_held() -> Iterator[None]:
    """Hold SIGINT back (blocked, not lost) in this thread for the block; processes started inside inherit it
    blocked. A Ctrl-C meanwhile is delivered when the block ends."""
    if not hasattr(signal, "pthread_sigmask"):   # pragma: no cover - not POSIX
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)
