"""The package and the command line import lazily, and the public API is whole all the same.

``import thrustgraph`` loads the public names on first use (PEP 562), and the
command line imports only the module of the command it runs, so
``thrustgraph --version`` and ``--help`` start without pint, numpy or scipy,
and ``check`` without scipy's optimisers (benchmarks/cli_startup.py measures
the times). Each case runs in a fresh interpreter: what a process has
imported cannot be undone inside the test process.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import thrustgraph
from conftest import HANG_GUARD

#: Libraries that take a noticeable part of a second to import.
HEAVY = ("numpy", "scipy", "pint", "networkx", "pluggy", "matplotlib", "dask", "pyarrow", "numba")


def fresh(code: str) -> object:
    """Run ``code`` in a fresh interpreter; it prints one JSON value, returned here."""
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=HANG_GUARD)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.splitlines()[-1])


def imported_by(argv: list[str]) -> list[str]:
    """The modules a command line run has imported when it ends (its own output is discarded)."""
    return fresh("import io, json, sys, contextlib\n"
                 "from thrustgraph.cli import main\n"
                 "with contextlib.redirect_stdout(io.StringIO()):\n"
                 f"    status = main({argv!r})\n"
                 "assert status == 0, status\n"
                 "print(json.dumps(sorted(sys.modules)))")


def roots(modules: list[str]) -> set[str]:
    return {m.split(".")[0] for m in modules}


def test_importing_the_package_imports_no_library():
    loaded = fresh("import json, sys, thrustgraph\nprint(json.dumps(sorted(sys.modules)))")
    assert not roots(loaded) & set(HEAVY)
    assert [m for m in loaded if m.startswith("thrustgraph")] == ["thrustgraph", "thrustgraph.base", "thrustgraph.base.version"]


@pytest.mark.parametrize("argv", [["--version"], ["--help"]])
def test_version_and_help_import_no_library_and_no_command(argv):
    loaded = fresh("import json, sys, contextlib, io\nfrom thrustgraph.cli import main\n"
                   "with contextlib.redirect_stdout(io.StringIO()):\n"
                   "    try:\n"
                   f"        main({argv!r})\n"
                   "    except SystemExit as exc:\n"
                   "        assert exc.code == 0\n"
                   "print(json.dumps(sorted(sys.modules)))")
    assert not roots(loaded) & set(HEAVY)
    assert not [m for m in loaded if m.startswith("thrustgraph.commands.")]


def test_check_imports_no_optimiser_integrator_or_plotting():
    loaded = imported_by(["check"])
    assert "pint" in loaded and "thrustgraph.commands.check" in loaded     # what it needs, it has
    for name in ("scipy.optimize", "scipy.integrate", "matplotlib", "thrustgraph.flight.integrate",
                 "thrustgraph.commands.run", "thrustgraph.studies.studies", "numba"):
        assert name not in loaded, name


def test_a_command_imports_only_its_own_command_module():
    loaded = imported_by(["kinds", "--brief"])
    assert [m for m in loaded if m.startswith("thrustgraph.commands.") and m.count(".") == 2] == \
        ["thrustgraph.commands.kinds"]


#: Where each public name is defined, as a user would import it from its module.
DEFINED = """
from thrustgraph.kinds.hookspecs import hookimpl, hookspec
from thrustgraph.base.errors import IntegrationError, ModelError, PluginError, ThrustgraphError
from thrustgraph.models.model import Model, ParsedModel, parse_model
from thrustgraph.models.modelfile import default_model_path, load_model, loads_model, save_model, dumps_model
from thrustgraph.flight.assembly import System, assemble
from thrustgraph.flight.integrate import fly, integrate
from thrustgraph.flight.result import FlightResult
from thrustgraph.base.version import __version__
"""


@pytest.mark.parametrize("first", ["the package", "every module of the package"])
def test_every_public_name_is_the_object_its_module_defines(first):
    # in a fresh process, each name's first use; also after every module was imported first: thrustgraph.integrate
    # stays the public function (its module, thrustgraph.flight.integrate, sits in a subpackage)
    code = ("import json, importlib, pkgutil, thrustgraph\n"
            + ("for m in pkgutil.walk_packages(thrustgraph.__path__, 'thrustgraph.'):\n"
               "    importlib.import_module(m.name)\n" if first != "the package" else "")
            + "names = {}\n"
            f"exec({DEFINED!r}, names)\n"
            "print(json.dumps([sorted(thrustgraph.__all__), sorted(n for n in names if n != '__builtins__'),\n"
            "                  [n for n in thrustgraph.__all__ if getattr(thrustgraph, n) is not names[n]],\n"
            "                  callable(thrustgraph.integrate)]))")
    public, defined, differ, callable_integrate = fresh(code)
    assert public == defined and differ == [] and callable_integrate


def test_star_import_dir_and_a_missing_name():
    assert fresh("import json\nfrom thrustgraph import *\nprint(json.dumps([callable(fly), Model.__name__, "
                 "__version__]))") == [True, "Model", thrustgraph.__version__]
    assert set(thrustgraph.__all__) <= set(dir(thrustgraph))
    with pytest.raises(AttributeError, match="has no attribute 'no_such_name'"):
        thrustgraph.no_such_name  # noqa: B018
    assert not hasattr(thrustgraph, "no_such_name")
