"""Helpers of the vectorised ensemble: which kinds build array callables, and the allocator's trim threshold.

The namespace itself (``array_ops``, the array twin of ``scalar_ops``) lives in :mod:`thrustgraph.base.xp`, with
the convention for physics written once for floats and arrays; it is re-exported here.

Examples
--------
>>> import numpy as np
>>> array_ops.where(np.array([True, False]), 1.0, 2.0).tolist(), array_ops.arrays
([1.0, 2.0], True)
"""

from __future__ import annotations

from typing import Any


from ..base.xp import ArrayOps, array_ops

__all__ = ["ArrayOps", "array_ops", "vectorised", "keep_heap"]




def vectorised(kind: Any) -> bool:
    """Whether a component or environment kind builds array callables (``vectorised = True``).

    >>> class K: vectorised = True
    >>> vectorised(K), vectorised(object)
    (True, False)
    """
    return bool(getattr(kind, "vectorised", False))


_TUNED = False


def keep_heap() -> bool:
    """Ask glibc to keep freed heap memory instead of returning it to the system at every free.

    Vectorised physics makes many short-lived temporaries of N floats (80 kB
    for 10,000 designs). With glibc's defaults each free above 128 kB at the
    top of the heap is trimmed back to the system and the next allocation
    page-faults it in again: measured here, that tripled the cost of the
    ensemble's right-hand side (3.3 ms against 1.0 ms for 10,000 designs).
    This raises the trim and mmap thresholds once per process (``mallopt``);
    memory a study has used stays reserved until the process ends. Returns
    whether the allocator was tuned (False off glibc).
    """
    global _TUNED
    if _TUNED:
        return True
    try:
        import ctypes
        import ctypes.util

        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        m_trim_threshold, m_mmap_threshold = -1, -3
        ok = libc.mallopt(m_trim_threshold, 256 * 1024 * 1024) == 1
        ok = libc.mallopt(m_mmap_threshold, 32 * 1024 * 1024) == 1 and ok
    except (OSError, AttributeError):
        return False
    _TUNED = ok
    return ok
