"""Design studies: what a study varies, its engines, tables, sweeps, dispersion, optimisation and the study registry.

May import: thrustgraph.base, thrustgraph.kinds, thrustgraph.balance, thrustgraph.models, thrustgraph.flight, thrustgraph.outputs (docs/layout.md; checked by tests/test_layout.py).
"""
