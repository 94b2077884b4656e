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
HEAVY = ("numpy", "scipy", "pint", "networkx", "pluggy", "matplotlib", "dask", "pyarrow")


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
    assert [m for m in loaded if m.startswith("thrustgraph")] == ["thrustgraph", "thrustgraph.version"]


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
    for name in ("scipy.optimize", "scipy.integrate", "matplotlib", "thrustgraph.integrate",
                 "thrustgraph.commands.run", "thrustgraph.studies"):
        assert name not in loaded, name


def test_a_command_imports_only_its_own_command_module():
    loaded = imported_by(["kinds", "--brief"])
    assert [m for m in loaded if m.startswith("thrustgraph.commands.") and m.count(".") == 2] == \
        ["thrustgraph.commands.kinds"]


def test_every_public_name_is_the_object_its_module_defines():
    # in a fresh process, first use of each name; then the same after every module of the package was imported
    homes = {name: home for name, home in thrustgraph._HOME.items()}
    assert set(homes) | {"__version__"} == set(thrustgraph.__all__)
    code = ("import importlib, json, thrustgraph\n"
            f"homes = {homes!r}\n"
            "same = {n: getattr(thrustgraph, n) is getattr(importlib.import_module('thrustgraph.' + h), n)\n"
            "        for n, h in homes.items()}\n"
            "print(json.dumps(same))")
    assert all(fresh(code).values())
    # the submodules first: thrustgraph.integrate (a module and a public function) stays the function
    code_after = ("import importlib, json, pkgutil, thrustgraph\n"
                  "for m in pkgutil.iter_modules(thrustgraph.__path__):\n"
                  "    importlib.import_module('thrustgraph.' + m.name)\n"
                  f"homes = {homes!r}\n"
                  "same = {n: getattr(thrustgraph, n) is getattr(importlib.import_module('thrustgraph.' + h), n)\n"
                  "        for n, h in homes.items()}\n"
                  "print(json.dumps([same, callable(thrustgraph.integrate)]))")
    same, callable_integrate = fresh(code_after)
    assert all(same.values()) and callable_integrate


def test_star_import_dir_and_a_missing_name():
    assert fresh("import json\nfrom thrustgraph import *\nprint(json.dumps([callable(fly), Model.__name__, "
                 "__version__]))") == [True, "Model", thrustgraph.__version__]
    assert set(thrustgraph.__all__) <= set(dir(thrustgraph))
    with pytest.raises(AttributeError, match="has no attribute 'no_such_name'"):
        thrustgraph.no_such_name  # noqa: B018
    assert not hasattr(thrustgraph, "no_such_name")
