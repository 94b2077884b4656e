"""The plugin contract: parameter specs, outcome definitions, component and environment kinds, the checked contract, the hook specifications and the model records a plugin is handed.

May import: thrustgraph.base (docs/layout.md; checked by tests/test_layout.py).
"""
