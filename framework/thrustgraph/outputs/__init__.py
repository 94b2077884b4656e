"""What a flight is turned into for people and programs: export formats, plots and their registry, study plots, the HTML report.

May import: thrustgraph.base, thrustgraph.kinds, thrustgraph.balance, thrustgraph.models, thrustgraph.flight (docs/layout.md; checked by tests/test_layout.py).
"""
