"""The progress bar of the command line: see :mod:`thrustgraph.progress`."""

from ..progress import Progress

__all__ = ["Progress"]
