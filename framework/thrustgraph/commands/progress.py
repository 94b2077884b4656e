"""The progress bar of the command line: see :mod:`thrustgraph.base.progress`."""

from ..base.progress import Progress

__all__ = ["Progress"]
