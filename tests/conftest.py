"""Shared helpers for the test suite: build small models from TOML text."""

from __future__ import annotations

import atexit
import os
import shutil
import tempfile
import textwrap
from pathlib import Path

import numpy as np
import pytest
from hypothesis import settings

import thrustgraph as tg
from thrustgraph import hookimpl
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import loads_model
from thrustgraph.models.plugins import get_plugin_manager
from tg_airframe import Airframe

HEADER = 'format = "thrustgraph-model"\nversion = 1\n'

# Real-gas property tables (tg_gastanks.gastable) are kept in a folder of this test session's own, inherited by
# the command-line runs the tests start: the suite builds them itself and never reads or writes a user's cache.
os.environ["THRUSTGRAPH_CACHE_DIR"] = tempfile.mkdtemp(prefix="thrustgraph-test-tables-")
atexit.register(shutil.rmtree, os.environ["THRUSTGRAPH_CACHE_DIR"], True)

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


@pytest.fixture(scope="module")
def stand(tmp_path_factory) -> Path:
    """A folder with a held model (held.toml) and a record of its thrust at 1 kHz (stand.csv), as a load cell on
    a stand would log it."""
    d = tmp_path_factory.mktemp("stand")
    m = tg.load_model(tg.default_model_path()).set("launch.mount", "held")
    tg.save_model(m, d / "held.toml")
    r = tg.integrate(m)
    t = np.arange(0.0005, 0.16, 0.001)
    f = np.interp(t, r.t, r.signal("thrust"))
    (d / "stand.csv").write_text("time [s],load [N]\n" + "".join(f"{a!r},{b!r}\n" for a, b in
                                                                 zip(t.tolist(), f.tolist())))
    return d


class FloatOnlyAirframe(Airframe):
    """A third-party family that builds callables for floats only (it does not declare ``vectorised``): the
    airframe's own physics under another kind name."""

    kind = "float-only-airframe"
    vectorised = False


class _FloatOnlyFamily:
    @hookimpl
    def thrustgraph_component_kinds(self):
        return [FloatOnlyAirframe]


@pytest.fixture
def float_only_rocket():
    """The bundled bottle rocket on a float-only airframe: (raw model, parsed model), a model the vectorised
    ensemble cannot fly."""
    m = tg.load_model(tg.default_model_path()).set("components.airframe.kind", "float-only-airframe")
    return m, parse_model(m, plugin_manager=get_plugin_manager(extra=[_FloatOnlyFamily()]))
