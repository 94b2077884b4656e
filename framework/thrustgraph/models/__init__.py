"""Model files: the plugin manager, stages and triggers as written, a model checked against the installed kinds, model files read and written, design parameters.

May import: thrustgraph.base, thrustgraph.kinds, thrustgraph.balance (docs/layout.md; checked by tests/test_layout.py).
"""
