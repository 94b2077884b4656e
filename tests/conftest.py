"""Shared helpers for the test suite: build small models from TOML text."""

from __future__ import annotations

import textwrap

import pytest

from thrustgraph.modelfile import loads_model

HEADER = 'format = "thrustgraph-model"\nversion = 1\n'


def model_from_toml(body: str, name: str = "test"):
    """A Model from the body of a model file (format and version lines are added)."""
    return loads_model(HEADER + f'name = "{name}"\n' + textwrap.dedent(body), source=f"<{name}>")


@pytest.fixture
def toml_model():
    return model_from_toml
