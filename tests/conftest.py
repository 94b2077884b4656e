"""Shared helpers for the test suite: build small models from TOML text."""

from __future__ import annotations

import textwrap

import pytest
from hypothesis import settings

from thrustgraph.modelfile import loads_model

HEADER = 'format = "thrustgraph-model"\nversion = 1\n'

#: Seconds after which a test gives up on a child process that has stopped making progress. It only ends a test
#: that would otherwise hang; it never decides a pass, and no step of any test comes near it on a loaded machine
#: (tests are driven by events: a line of output, a file, the child's exit, never by a time window).
HANG_GUARD = 1800.0

# No per-example deadline for property tests: a shared, loaded machine must not turn a slow example into a failure.
settings.register_profile("thrustgraph", deadline=None)
settings.load_profile("thrustgraph")


def model_from_toml(body: str, name: str = "test"):
    """A Model from the body of a model file (format and version lines are added)."""
    return loads_model(HEADER + f'name = "{name}"\n' + textwrap.dedent(body), source=f"<{name}>")


@pytest.fixture
def toml_model():
    return model_from_toml
