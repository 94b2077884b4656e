"""The layers of the core, as docs/layout.md plans them, and the imports allowed between them.

Every module of ``framework/thrustgraph`` belongs to one layer (the subpackage it is to move into); a layer may
import only itself and the layers :data:`MAY_IMPORT` lists for it. Every import counts: at the top of a module,
inside a function, under ``if TYPE_CHECKING``, relative or absolute, and a module named in a string
(``importlib.import_module("thrustgraph.x")``, a registry's ``"thrustgraph.outputs.plots:thrust_figure"``). The modules
import one another without a cycle, and the device plugins import only the plugin contract (and its base).
So the move into subpackages keeps the rules, and a new module or import that breaks them fails here.
"""

from __future__ import annotations

import ast
import re
import tomllib
from pathlib import Path

import networkx as nx
import pytest

ROOT = Path(__file__).resolve().parent.parent
CORE = ROOT / "framework" / "thrustgraph"
PLUGINS = ROOT / "plugins"

#: layer -> its modules (names inside the ``thrustgraph`` package). docs/layout.md says what each holds.
LAYERS: dict[str, tuple[str, ...]] = {
    'base': ('base', 'base.errors', 'base.units', 'base.version', 'base.limits', 'base.interrupts',
        'base.progress', 'base.outputfiles', 'base.xp', 'base.roots', 'base.extremum', 'base.frames', 'base.exportnotes'),
    'kinds': ('kinds', 'kinds.parameters', 'kinds.outcomespec', 'kinds.vehicle', 'kinds.component',
        'kinds.contract', 'kinds.hookspecs', 'kinds.modeldata', 'kinds.signalunits', 'kinds.displayunits'),
    'balance': ('balance', 'balance.plan', 'balance.balance', 'balance.vectors', 'balance.straightline',
        'balance.arrayops', 'balance.sampling', 'balance.outcomes'),
    'models': ('models', 'models.plugins', 'models.staging', 'models.model', 'models.modelfile', 'models.designs'),
    'flight': ('flight', 'flight.assembly', 'flight.separation', 'flight.stepguard', 'flight.denseoutput', 'flight.integrate',
        'flight.result', 'flight.signallog', 'flight.arraysystem', 'flight.stepkernel', 'flight.ensemble'),
    'outputs': ('outputs', 'outputs.exportformats', 'outputs.plotkinds', 'outputs.plots', 'outputs.studyplots',
        'outputs.report', 'outputs.overlayplots'),
    'measured': ('measured', 'measured.records', 'measured.compare', 'measured.calibrate', 'measured.overlay'),
    'studies': ('studies', 'studies.studyspec', 'studies.studyprogress', 'studies.studyflight', 'studies.engines',
        'studies.studies', 'studies.tablestream', 'studies.dispersion', 'studies.optimisation', 'studies.studykinds'),
    'cli': ('cli', 'commands', 'commands.calibrate', 'commands.check', 'commands.common', 'commands.compare',
        'commands.export', 'commands.graph', 'commands.kinds', 'commands.new', 'commands.outputs', 'commands.plot',
        'commands.progress', 'commands.report', 'commands.run', 'commands.study', 'commands.overlay'),
    'package': ('',),
}

_BELOW = ("base", "kinds", "balance", "models", "flight", "outputs")
#: layer -> the other layers it may import.
MAY_IMPORT: dict[str, tuple[str, ...]] = {
    "base": (),
    "kinds": ("base",),
    "balance": ("base", "kinds"),
    "models": ("base", "kinds", "balance"),
    "flight": ("base", "kinds", "balance", "models"),
    "outputs": ("base", "kinds", "balance", "models", "flight"),
    "measured": _BELOW,
    "studies": _BELOW,
    "cli": _BELOW + ("measured", "studies", "package"),
    "package": _BELOW,
}

#: What the device plugins (plugins/tg_*) may import of the core: the contract, its base, and the package itself
#: (``from thrustgraph import hookimpl``).
PLUGIN_MAY_IMPORT = ("base", "kinds", "package")
#: ... and these modules of other layers: the record reader, for a kind's data files (a thrust-curve table).
PLUGIN_MAY_ALSO = ("measured.records",)

LAYER_OF = {m: layer for layer, mods in LAYERS.items() for m in mods}
_NAMED = re.compile(r"^thrustgraph\.[A-Za-z_][\w.]*(:[A-Za-z_]\w*)?$")


def module_name(path: Path, root: Path) -> str:
    """``commands.plot`` for framework/thrustgraph/commands/plot.py, ``""`` for the package's __init__."""
    parts = list(path.relative_to(root).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _core_module(dotted: str) -> str | None:
    """The core module a dotted name points into (``thrustgraph.outputs.plots.figure`` -> ``outputs.plots``), or None."""
    if dotted != "thrustgraph" and not dotted.startswith("thrustgraph."):
        return None
    parts = dotted.split(".")[1:]
    while parts and ".".join(parts) not in LAYER_OF:
        parts.pop()
    return ".".join(parts)


def imports_of(path: Path, package: str) -> list[tuple[int, str]]:
    """(line, dotted name) of everything a module imports or names, at any depth. ``package`` is the module's own
    package (``thrustgraph.commands`` for a command), for relative imports."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[:len(package.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            found += [(node.lineno, f"{target}.{a.name}") for a in node.names] if not node.module else \
                [(node.lineno, target)]
        elif isinstance(node, ast.Constant) and isinstance(node.value, str) and _NAMED.match(node.value) \
                and _core_module(node.value.split(":")[0]):   # a module named in text ("thrustgraph.x" is a key)
            found.append((node.lineno, node.value.split(":")[0]))
    return found


def _core_files() -> list[Path]:
    return sorted(p for p in CORE.rglob("*.py") if "__pycache__" not in p.parts)


def _edges() -> list[tuple[str, str, int]]:
    """(importer, imported, line) between core modules."""
    out = []
    for path in _core_files():
        mod = module_name(path, CORE)
        package = "thrustgraph" + (f".{mod}" if mod and path.name == "__init__.py" else
                                   "".join(f".{p}" for p in mod.split(".")[:-1]))
        for line, dotted in imports_of(path, package):
            target = _core_module(dotted)
            if target is not None and target != mod:
                out.append((mod, target, line))
    return out


def test_every_module_is_in_one_layer():
    modules = {module_name(p, CORE) for p in _core_files()}
    listed = [m for mods in LAYERS.values() for m in mods]
    assert len(listed) == len(set(listed)), "a module is listed in two layers"
    missing = sorted(modules - set(listed))
    assert not missing, f"put these modules in a layer of tests/test_layout.py and docs/layout.md: {missing}"
    assert not set(listed) - modules, f"no such modules: {sorted(set(listed) - modules)}"
    assert set(MAY_IMPORT) == set(LAYERS)


def violations(edges: list[tuple[str, str, int]]) -> list[str]:
    """The imports of ``edges`` that cross into a layer the importer may not import."""
    return [f"{a or 'thrustgraph'} ({LAYER_OF[a]}) imports {b or 'thrustgraph'} ({LAYER_OF[b]}) at line {line}"
            for a, b, line in edges if LAYER_OF[a] != LAYER_OF[b] and LAYER_OF[b] not in MAY_IMPORT[LAYER_OF[a]]]


def test_layers_import_only_what_they_may():
    bad = violations(_edges())
    assert not bad, "imports across layers that docs/layout.md does not allow:\n" + "\n".join(bad)


def test_a_forbidden_import_is_named():
    assert violations([("outputs.plots", "studies.studies", 7), ("balance.balance", "flight.integrate", 9),
                       ("studies.studies", "measured.records", 3), ("flight.integrate", "balance.balance", 1)]) == [
        "outputs.plots (outputs) imports studies.studies (studies) at line 7",
        "balance.balance (balance) imports flight.integrate (flight) at line 9",
        "studies.studies (studies) imports measured.records (measured) at line 3"]


def test_the_allowed_imports_between_layers_have_no_cycle():
    g = nx.DiGraph([(a, b) for a, targets in MAY_IMPORT.items() for b in targets])
    assert nx.is_directed_acyclic_graph(g)


def test_the_modules_import_one_another_without_a_cycle():
    g = nx.DiGraph()
    g.add_edges_from((a, b) for a, b, _ in _edges())
    cycles = [sorted(c) for c in nx.strongly_connected_components(g) if len(c) > 1]
    assert not cycles, f"import cycles (imports inside functions count): {cycles}"


def test_the_plugins_import_only_the_contract():
    bad = []
    for path in sorted(PLUGINS.rglob("*.py")):
        if "__pycache__" in path.parts:
            continue
        package = ".".join(path.relative_to(PLUGINS).parent.parts)
        for line, dotted in imports_of(path, package):
            target = _core_module(dotted)
            if target is not None and LAYER_OF[target] not in PLUGIN_MAY_IMPORT and target not in PLUGIN_MAY_ALSO:
                bad.append(f"{path.relative_to(ROOT)}:{line} imports thrustgraph.{target} ({LAYER_OF[target]})")
    assert not bad, "plugins reach past the contract:\n" + "\n".join(bad)


def test_docs_layout_names_every_module_in_its_layer():
    text = (ROOT / "docs" / "layout.md").read_text(encoding="utf-8")
    for layer, mods in LAYERS.items():
        m = re.search(rf"^### `{layer}`.*?$(.*?)(?=^### |\Z)", text, re.M | re.S)
        assert m, f"docs/layout.md has no section ### `{layer}`"
        section = m.group(1)
        for mod in mods:
            if mod and mod != layer:                  # the subpackage itself (its __init__)
                assert f"`{mod.split('.')[-1]}" in section or f"`{mod}" in section, (layer, mod)
        allowed = ", ".join(f"`{x}`" for x in MAY_IMPORT[layer]) or "nothing"
        assert f"May import: {allowed}." in section, (layer, allowed)


@pytest.mark.parametrize("source, expected", [
    ("from .plots import figure\n", ["thrustgraph.commands.plots"]),
    ("def f():\n    from ..studies import sweep\n", ["thrustgraph.studies"]),
    ("if TYPE_CHECKING:\n    from .model import Model\n", ["thrustgraph.commands.model"]),
    ("from .. import plots as p\n", ["thrustgraph.plots"]),
    ("X = 'thrustgraph.outputs.plots:thrust_figure'\n", ["thrustgraph.outputs.plots"]),
    ("import thrustgraph.integrate\n", ["thrustgraph.integrate"]),
])
def test_the_import_reader_sees_every_form(tmp_path, source, expected):
    f = tmp_path / "m.py"
    f.write_text(source)
    assert [d for _, d in imports_of(f, "thrustgraph.commands")] == expected


def test_pyproject_ships_every_subpackage():
    # setuptools' explicit package list: a subpackage left out is missing from a wheel (an editable install hides it)
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]["packages"])
    found = {".".join(("thrustgraph",) + p.parent.relative_to(CORE).parts) for p in CORE.rglob("__init__.py")
             if "__pycache__" not in p.parts}
    assert not found - listed, f"add these packages to [tool.setuptools] packages in pyproject.toml: {sorted(found - listed)}"
