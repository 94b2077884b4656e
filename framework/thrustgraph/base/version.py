"""The version of thrustgraph (one place; the package root and the outputs read it here).

>>> __version__
'0.1.0'
"""

__all__ = ["__version__"]

__version__ = "0.1.0"
