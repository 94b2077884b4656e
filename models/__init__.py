"""Scenario files shipped with thrustgraph (demo vehicles of our own; invented numbers)."""
