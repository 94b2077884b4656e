"""The balance plan, the one balance over floats or arrays, its straight lines and output samples, vector helpers, and the outcome registry computed from an integrated solution.

May import: thrustgraph.base, thrustgraph.kinds (docs/layout.md; checked by tests/test_layout.py).
"""
