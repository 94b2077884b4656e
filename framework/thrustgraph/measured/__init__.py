"""Measured data: records read and checked, predictions compared with them, parameters fitted.

May import: thrustgraph.base, thrustgraph.kinds, thrustgraph.balance, thrustgraph.models, thrustgraph.flight, thrustgraph.outputs (docs/layout.md; checked by tests/test_layout.py).
"""
