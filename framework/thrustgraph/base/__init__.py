"""Foundations every layer may use and that know nothing of vehicles: errors, units, the version, limits on work, interrupts, progress lines, output files written all or none, the notes of a saved result, the float/array namespace.

May import: nothing of thrustgraph (docs/layout.md; checked by tests/test_layout.py).
"""
