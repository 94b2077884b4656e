"""The plugin contract: the core imports no plugin, built-ins come through the entry-point group, and a device
family from outside the core flies without any core change."""

from __future__ import annotations

import ast
import inspect
import math
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import thrustgraph
from thrustgraph.kinds import hookspecs
from thrustgraph.base.errors import PluginError
from thrustgraph.models.plugins import component_kinds, environment_kinds, get_plugin_manager

ROOT = Path(__file__).resolve().parents[1]
CORE = ROOT / "framework" / "thrustgraph"
PLUGIN_PACKAGES = {p.name for p in (ROOT / "plugins").iterdir() if p.is_dir() and (p / "__init__.py").exists()}


def test_core_source_imports_no_plugin():
    for path in CORE.rglob("*.py"):
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names = [node.module]
            for n in names:
                assert n.split(".")[0] not in PLUGIN_PACKAGES, f"{path} imports plugin {n}"


def test_importing_thrustgraph_loads_no_plugin():
    code = "import sys, thrustgraph, thrustgraph.cli; print(sorted(m for m in sys.modules if m.startswith('tg_')))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_builtins_arrive_through_the_entry_point_group():
    from importlib.metadata import entry_points

    eps = {ep.value for ep in entry_points(group="thrustgraph")}
    assert {"tg_airframe", "tg_vessels", "tg_nozzles", "tg_jets", "tg_boundary", "tg_media"} <= eps
    # with autoload off, nothing is known: the core has no private path to the built-ins
    assert component_kinds(get_plugin_manager(autoload=False)) == {}
    kinds = component_kinds(get_plugin_manager())
    assert {"airframe", "pressurised-liquid-tank", "convergent-nozzle", "prescribed-jet", "surroundings"} <= set(kinds)
    assert {"still-air", "vacuum", "uniform-gravity"} <= set(environment_kinds(get_plugin_manager()))


def test_duplicate_kind_names_both_plugins():
    from thrustgraph import hookimpl
    from thrustgraph.kinds.component import ComponentKind

    class Clash(ComponentKind):
        kind = "airframe"
        role = "body"

    class Rogue:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return [Clash]

    pm = get_plugin_manager(extra=[Rogue()])
    with pytest.raises(PluginError, match="declared twice"):
        component_kinds(pm)


def test_every_hook_is_documented_in_the_spec_and_in_docs():
    docs = (ROOT / "docs" / "plugins.md").read_text()
    specs = [(n, f) for n, f in vars(hookspecs).items() if n.startswith("thrustgraph_") and callable(f)]
    assert len(specs) >= 4
    for name, fn in specs:
        assert fn.__doc__ and "Called" in fn.__doc__ and "Returns" in fn.__doc__, name
        sig = f"{name}({', '.join(inspect.signature(fn).parameters)})"
        assert sig in docs, f"docs/plugins.md does not show {sig}"


def test_check_model_hook_stops_a_run_with_its_message():
    from thrustgraph import ModelError, hookimpl, load_model, default_model_path, parse_model

    class Strict:
        @hookimpl
        def thrustgraph_check_model(self, model):
            if model.params["bottle"].gauge_pressure > 4e5:
                return ["components.bottle.gauge_pressure: this club limits launches to 4 bar gauge"]
            return []

    with pytest.raises(ModelError, match="club limits"):
        parse_model(load_model(default_model_path()), plugin_manager=get_plugin_manager(extra=[Strict()]))


def test_cautions_hook_adds_cautions():
    from thrustgraph import hookimpl, load_model, default_model_path, parse_model

    class Club:
        @hookimpl
        def thrustgraph_cautions(self, model):
            return ["Launch only with the range safety officer present."]

    parsed = parse_model(load_model(default_model_path()), plugin_manager=get_plugin_manager(extra=[Club()]))
    cautions = parsed.cautions()
    assert "Launch only with the range safety officer present." in cautions
    assert any("burst" in c for c in cautions)


THIRD_PARTY = '''
"""A device family that is not part of thrustgraph: a linearly fading cold-gas puffer."""
import math
from thrustgraph import hookimpl
from thrustgraph.kinds.component import ComponentKind, EventSpec, JetFns, Mode, StateVar
from thrustgraph.kinds.parameters import Quantity


class FadingPuffer(ComponentKind):
    kind = "fading-puffer"
    role = "jet"
    summary = "mass flow falling linearly from mdot0 to zero over the burn time, constant exhaust velocity"
    parameters = (
        Quantity("initial_mass_flow", "kg/s", low=0.0, low_open=True),
        Quantity("burn_time", "s", low=0.0, low_open=True),
        Quantity("exhaust_velocity", "m/s", low=0.0, low_open=True),
    )
    states = (StateVar("gas_mass", "kg"),)
    modes = (Mode("puffing", "puffer thrust"), Mode("empty", "empty", propulsive=False))

    @classmethod
    def initial_state(cls, p, amb):
        return (0.5 * p.initial_mass_flow * p.burn_time,)

    @classmethod
    def build_jet(cls, p, i, ops, amb):
        m0, tb, ve = p.initial_mass_flow, p.burn_time, p.exhaust_velocity

        def jet(t, s, mode, pa):
            mdot = m0 * max(0.0, 1.0 - t / tb) if mode == 0 else 0.0
            return (mdot, ve, pa, 0.0)

        return JetFns(mass=lambda s: s[i], jet=jet, derivs=lambda t, s, mode, mdot: (-mdot,),
                      signals=lambda t, s, mode: {"gas_mass": s[i]}, jet_dir=(-1.0, 0.0, 0.0),
                      events=(EventSpec("puffer empty", lambda t, s, d: t - tb, 1.0, ("puffing",), "empty"),))


@hookimpl
def thrustgraph_component_kinds():
    return [FadingPuffer]
'''

MODEL = '''
format = "thrustgraph-model"
version = 1
name = "free-floating puffer"
flow_paths = ["puffer -> outside"]
[launch]
mount = "free"
[run]
end_time = "5 s"
[environment.medium]
kind = "vacuum"
[environment.gravity]
kind = "uniform-gravity"
g = "0 m/s^2"
[components.frame]
kind = "airframe"
dry_mass = "2 kg"
[components.puffer]
kind = "fading-puffer"
initial_mass_flow = "0.2 kg/s"
burn_time = "2 s"
exhaust_velocity = "700 m/s"
[components.outside]
kind = "surroundings"
'''


def test_third_party_family_flies_without_core_change(tmp_path):
    """Install a family as a third party would: a package plus dist-info metadata with an entry point on the
    ``thrustgraph`` group, found on sys.path by importlib.metadata; then run the CLI on a model that uses it."""
    site = tmp_path / "site"
    pkg = site / "fading_puffer"
    pkg.mkdir(parents=True)
    (pkg / "__init__.py").write_text(THIRD_PARTY)
    dist = site / "fading_puffer-0.1.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: fading-puffer\nVersion: 0.1\n")
    (dist / "entry_points.txt").write_text("[thrustgraph]\nfading_puffer = fading_puffer\n")
    model = tmp_path / "puffer.toml"
    model.write_text(MODEL)
    env = {"PYTHONPATH": str(site), "PATH": "/usr/bin:/bin"}
    json_out = tmp_path / "out.json"
    proc = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "run", str(model), "--json", str(json_out)],
                          capture_output=True, text=True, env=env)
    assert proc.returncode == 0, proc.stderr
    assert "puffer thrust" in proc.stdout
    import json
    doc = json.loads(json_out.read_text())
    # Rocket equation (Tsiolkovsky) holds for any mass-flow history at constant ve:
    # m_p = mdot0 tb / 2 = 0.2 kg, dv = ve ln(m0/mf) = 700 ln(2.2/2.0)
    assert doc["summary"]["max_speed"]["value"] == pytest.approx(700 * math.log(2.2 / 2.0), rel=1e-6)
    assert "fading_puffer" in doc["provenance"]["plugins"]
    assert "fading-puffer 0.1" in doc["provenance"]["plugins"]["fading_puffer"]
