"""Assembly and integration: a parsed model assembled into a system, stage separation, bounded solver work, the phase-by-phase integration, the flight result and the ensemble of designs.

May import: thrustgraph.base, thrustgraph.kinds, thrustgraph.balance, thrustgraph.models (docs/layout.md; checked by tests/test_layout.py).
"""
