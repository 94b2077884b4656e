"""Limits on what one run may allocate: output samples, designs of a study, integration work.

A model file or a command line can ask for more than a machine holds (``output_interval = "1e-7 s"`` over a
long flight, ``--vary "... in 1000000000"``). Each request is counted before anything is allocated and
refused with a message that says how many were asked and the limit.

Examples
--------
>>> check_count(1000, MAX_DESIGNS, where="--vary components.bottle.fill", what="values")
1000
>>> check_count(10**9, MAX_DESIGNS, where="--vary components.bottle.fill", what="values")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: --vary components.bottle.fill: asks for 1000000000 values; the limit is 1000000. Fix: ask for at most 1000000 values.
"""

from __future__ import annotations

import math

from .errors import ModelError

__all__ = ["MAX_OUTPUT_SAMPLES", "MAX_DESIGNS", "check_count", "output_samples", "check_output_samples"]

#: Evenly spaced output samples of one flight (its duration / run.output_interval). Every sample holds every
#: signal and ledger term, evaluated once more: the bottle rocket took about 9 kB a sample (67,533 samples,
#: 0.7 GB peak), and a real-gas tank about 0.4 ms a sample (90,000 samples of the cold-gas track, 35 s), so
#: the limit keeps a result under about half a gigabyte and a minute. 50,000 samples are 500 s of flight at
#: the default interval of 0.01 s.
MAX_OUTPUT_SAMPLES = 50_000
#: Designs of one study (sweep values, a grid's combinations, dispersion samples).
MAX_DESIGNS = 1_000_000


def check_count(asked: float, limit: int, *, where: str, what: str, fix: str = "") -> int:
    """Return ``asked`` (a whole number) when it is within ``limit``; else refuse, naming both."""
    if not (asked <= limit):  # NaN-safe
        if isinstance(asked, float) and not math.isfinite(asked):
            shown = "more than 1e308"
        else:
            shown = f"{asked:.4g}" if isinstance(asked, float) and asked >= 1e15 else f"{int(asked)}"
        raise ModelError(where, f"asks for {shown} {what}; the limit is {limit}", fix or f"ask for at most {limit} {what}")
    return int(asked)


def output_samples(end_time: float, output_interval: float) -> float:
    """How many evenly spaced output samples a flight of ``end_time`` asks for (may be inf).

    >>> output_samples(30.0, 0.01)
    3000.0
    """
    try:
        return end_time / output_interval
    except (ZeroDivisionError, OverflowError):
        return math.inf


def check_output_samples(duration: float, output_interval: float) -> int:
    """Refuse a flight whose evenly sampled output would exceed :data:`MAX_OUTPUT_SAMPLES`.

    Checked once the flight's duration is known, before the output is built (the end time alone
    overstates it: most flights end at impact long before run.end_time).

    >>> check_output_samples(6.0, 0.01)
    600
    >>> check_output_samples(60000.0, 0.1)
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: run.output_interval: asks for 600000 output samples (a flight of 6e+04 s every 0.1 s); the limit is 50000. Fix: make run.output_interval at least 1.2 s, or end the run sooner with run.end_time.
    """
    n = output_samples(duration, output_interval)
    return check_count(n, MAX_OUTPUT_SAMPLES, where="run.output_interval",
                       what=f"output samples (a flight of {duration:.3g} s every {output_interval:.3g} s)",
                       fix=f"make run.output_interval at least {duration / MAX_OUTPUT_SAMPLES:.3g} s, or end the "
                           "run sooner with run.end_time")
