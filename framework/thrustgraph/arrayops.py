"""The array twin of :data:`thrustgraph.component.scalar_ops`: elementwise helpers over numpy arrays of designs.

When the vectorised ensemble (:mod:`thrustgraph.ensemble`) assembles N
designs at once it passes :data:`array_ops` to the component kinds' builders.
The contract for a kind that can do this:

1. Set the class attribute ``vectorised = True``.
2. In ``build_*``, test ``getattr(ops, "arrays", False)``; when true, the
   numeric parameter fields of ``p`` (and of ``amb``) may be numpy arrays of
   shape ``(N,)``, one value per design, or floats shared by all designs.
   Flags, choices and vectors are shared by all designs.
3. The callables then receive ``s`` as a list of arrays of shape ``(N,)``
   (one per state), ``mode`` as an integer array of mode indices (or a
   plain ``int`` when every design is in that mode, so a kind may skip its
   selections), ``air`` and ``up`` tuples of arrays (an outlet's phase and
   head may be plain floats shared by all designs), and return arrays (or
   floats) in the same tuple layout as the scalar callables. They must be
   branch-free over designs (``np.where`` over both branches, clipped square
   roots and powers); a design's numbers must not depend on which other
   designs share the arrays.
4. ``initial_state(p, amb)`` must accept array parameters;
   ``initial_mode`` and ``check`` are still called per design with floats.
5. The scalar build (``scalar_ops``) stays exactly as it was: array support
   must not change a single flight by one bit.

Examples
--------
>>> import numpy as np
>>> array_ops.where(np.array([True, False]), 1.0, 2.0).tolist(), array_ops.arrays
([1.0, 2.0], True)
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["ArrayOps", "array_ops", "vectorised", "keep_heap"]


class ArrayOps:
    """numpy ufuncs under the names of :class:`~thrustgraph.component.ScalarOps`."""

    arrays = True
    sqrt = staticmethod(np.sqrt)
    exp = staticmethod(np.exp)
    log = staticmethod(np.log)
    where = staticmethod(np.where)
    maximum = staticmethod(np.maximum)
    minimum = staticmethod(np.minimum)

    @staticmethod
    def interp(x: Any, xp: Any, fp: Any) -> Any:
        return np.interp(x, xp, fp)


array_ops = ArrayOps()


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
