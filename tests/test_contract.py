"""The plugin contract is checked (thrustgraph.kinds.contract): a broken plugin gets one message naming the plugin, the
kind, the hook and the fix; the command line exits 2 without a traceback, and never blames the user's model file.

The broken plugins of the first tests are the sample family of docs/plugins.md with one mistake each, installed
through a real entry point (see tests/pluginguide.py) and run through the command line in a fresh process.
"""

from __future__ import annotations

import dataclasses
import math
import pickle
import re

import pytest
from pluginguide import GUIDE, cli, install_guide_family

from thrustgraph import hookimpl
from thrustgraph.kinds import contract
from thrustgraph.flight.assembly import assemble
from thrustgraph.kinds.component import (BodyFns, ComponentKind, EnvironmentKind, FlowFns, JetFns, SourceFns, StateVar,
                                   VolumeFns)
from thrustgraph.kinds.contract import HOOKS, check_system
from thrustgraph.models.designs import resolve
from thrustgraph.base.errors import ContractError, PluginError
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import default_model_path, load_model
from thrustgraph.kinds.parameters import Number, Quantity
from thrustgraph.models.plugins import component_kinds, environment_kinds, get_plugin_manager
from thrustgraph.studies.studies import evaluate

PLUGIN = "plugin 'sharp_orifices' (distribution sharp-orifices 0.1.0, module sharp_orifices"


def broken(path: str, old: str, new: str):
    """An edit of the guide's family: replace ``old`` by ``new`` in file ``path`` (which must contain it)."""
    def edit(p: str, text: str) -> str:
        if p != path:
            return text
        assert old in text, f"docs/plugins.md's {path} no longer contains {old!r}: update this test"
        return text.replace(old, new)
    return edit


def one_plugin_error(proc) -> str:
    """The single line the command line printed for a plugin error (exit 2, no traceback)."""
    assert proc.returncode == 2, proc.stdout + proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("thrustgraph: plugin error: "), proc.stderr
    return lines[0]


CASES = {
    "flow signature": (
        broken("sharp_orifices/orifice.py", "def flow(up, p_down, mode):", "def flow(up, p_down):"),
        ["kind 'sharp-edged-orifice' (flow) as component 'cap', FlowFns.flow = "
         "SharpEdgedOrifice.build_flow.<locals>.flow() at sharp_orifices/orifice.py:",
         "takes 2 positional arguments (up, p_down), but the balance calls flow(up, p_down, mode)",
         "Fix: define it as flow(up, p_down, mode) returning (mdot, v_e, p_e, A_e, dthrust_dp)"]),
    "return length": (
        broken("sharp_orifices/orifice.py", "return (rho * area * v, v, p_down, area, 2.0 * area)",
               "return (rho * area * v, v, p_down, area)"),
        ["kind 'sharp-edged-orifice' (flow) as component 'cap', FlowFns.flow = ",
         "returned 4 values, not 5 when called as flow(up, p_down, mode) at the initial state, where "
         "(mdot, v_e, p_e, A_e, dthrust_dp) was expected"]),
    "not finite at the initial state": (
        # a sign slip under a numpy square root: NaN (numpy warns, it does not raise)
        broken("sharp_orifices/orifice.py", "v = math.sqrt(2.0 * (p_up - p_down) / rho)",
               "v = float(__import__('numpy').sqrt(2.0 * (p_down - p_up) / rho))"),
        ["kind 'sharp-edged-orifice' (flow) as component 'cap', FlowFns.flow = ",
         "entry 0 is nan, not a finite number when called as flow(up, p_down, mode) at the initial state"]),
    "rise signature": (
        broken("sharp_orifices/fitting.py", "def rise(up, mdot, mode):", "def rise(up, mdot, mode, rho):"),
        ["kind 'fitting-loss' (flow) as component 'entrance', FlowFns.rise = ",
         "needs 4 positional arguments (up, mdot, mode, rho), but the balance calls rise(up, mdot, mode)"]),
    "default without its unit": (
        broken("sharp_orifices/fitting.py", 'Quantity("bore", "mm", low=0.0,',
               'Quantity("bore", "mm", default=21, low=0.0,'),
        ["kind 'fitting-loss' (flow), parameter 'bore': its default 21 has no unit, but the parameter is declared "
         "in 'mm'. Fix: write the default with its unit, default=\"21 mm\""]),
    "signal key declared twice": (
        broken("sharp_orifices/orifice.py", 'signal_units = {"choked": ""}',
               'signal_units = {"choked": "", "choked": "1"}'),
        ["kind 'sharp-edged-orifice' (flow), signal_units['choked']: the key 'choked' is declared twice in "
         "signal_units (Python keeps only the last one)"]),
    "signal reported bare": (
        broken("sharp_orifices/orifice.py", 'signal_units = {"choked": ""}', 'signal_units = {}'),
        ["kind 'sharp-edged-orifice' (flow) as component 'cap', FlowFns.signals = ",
         "reports the signal 'choked' but its kind declares no unit for it",
         "Fix: add 'choked': \"UNIT\" to the kind's signal_units (\"\" for a pure number)"]),
    "parameter declared twice": (
        broken("sharp_orifices/fitting.py", 'Number("loss_coefficient", default=0.5,', 'Number("bore", default=0.5,'),
        ["kind 'fitting-loss' (flow), parameter 'bore': is declared twice among the kind's parameters"]),
}


@pytest.mark.parametrize("case", list(CASES))
def test_a_broken_guide_family_gets_one_clear_error(case, tmp_path):
    edit, expected = CASES[case]
    site, (model,) = install_guide_family(tmp_path, edit)
    if "declared" in case or "unit" in case:     # found when the kinds are registered: before any model is read
        commands = [["kinds", "--brief"], ["check", model.name]]
    else:                                         # found when the vehicle is assembled: check and run alike
        commands = [["check", model.name], ["run", model.name, "--quiet", "--json", "out.json"]]
    for args in commands:
        line = one_plugin_error(cli(args, tmp_path, site))
        assert PLUGIN in line, line
        for text in expected:
            assert text in line, f"{args}: {line}"
        assert model.name not in line and "components." not in line   # the plugin's fault, not the model file's
    assert not (tmp_path / "out.json").exists()


def test_the_guide_quotes_the_error_it_documents(tmp_path):
    """docs/plugins.md shows what a flow function without ``mode`` gets; that is what thrustgraph prints."""
    site, (model,) = install_guide_family(tmp_path, CASES["flow signature"][0])
    line = one_plugin_error(cli(["check", model.name], tmp_path, site))
    text = " ".join(GUIDE.read_text().split())
    quoted = re.search(r"(thrustgraph: plugin error: .*? docs/plugins\.md\.)", text).group(1)
    assert quoted == " ".join(line.split())


def test_a_study_with_a_broken_plugin_stops_with_the_one_error(tmp_path):
    site, (model,) = install_guide_family(tmp_path, CASES["return length"][0])
    line = one_plugin_error(cli(["study", model.name, "sweep", "--vary", "components.cap.diameter=9 mm, 12 mm",
                                 "--table", "t.csv", "--quiet"], tmp_path, site))
    assert "returned 4 values, not 5" in line
    assert not (tmp_path / "t.csv").exists()


# ---------------------------------------------------------------------------
# In process: the checker itself, on kinds registered as plugin objects
# ---------------------------------------------------------------------------

def test_hooks_table_lists_every_callable_of_every_bundle():
    """The checker's table and component.py's bundles name the same callables."""
    for bundle in (BodyFns, VolumeFns, FlowFns, SourceFns, JetFns):
        fields = {f.name for f in dataclasses.fields(bundle) if "Callable" in str(f.type)}
        listed = {h.field for h in HOOKS.values() if h.owner == bundle.__name__}
        assert fields == listed, bundle.__name__


def _default_with(kind_cls, component="neck", **extra_components):
    """The default model with ``component`` replaced by a kind registered from a plugin object."""
    class Family:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return [kind_cls]

    m = load_model(default_model_path())
    m.components[component] = {"kind": kind_cls.kind, **extra_components}
    return parse_model(m, plugin_manager=get_plugin_manager(extra=[Family()]))


class _Nozzle(ComponentKind):
    """A nozzle whose flow function a test supplies (``make(area)`` returns it)."""

    kind = "test-nozzle"
    role = "flow"
    summary = "test nozzle"
    parameters = (Quantity("diameter", "mm", default="21 mm"),)
    make = None

    @classmethod
    def build_flow(cls, p, ops):
        return FlowFns(flow=cls.make(math.pi * p.diameter ** 2 / 4.0))


def _nozzle(make):
    return type("Nozzle", (_Nozzle,), {"kind": f"test-nozzle-{make.__name__.replace('_', '-')}",
                                       "make": staticmethod(make)})


def test_a_callable_that_raises_is_named_with_its_exception():
    def raising(area):
        def flow(up, p_down, mode):
            return {"mdot": 0.0}["m_dot"]
        return flow

    with pytest.raises(ContractError, match=r"FlowFns.flow = .*raised KeyError: 'm_dot' \(at tests/test_contract.py:"
                                             r"\d+\) when called as flow\(up, p_down, mode\) at the initial state"):
        assemble(_default_with(_nozzle(raising)))


def test_a_callable_that_changes_the_state_list_is_refused():
    class Tank(ComponentKind):
        kind = "test-mutating-tank"
        role = "volume"
        summary = "a tank whose outlet writes into s"
        parameters = ()
        states = (StateVar("mass", "kg"),)

        @classmethod
        def initial_state(cls, p, amb):
            return (1.0,)

        @classmethod
        def build_volume(cls, p, i, ops, amb):
            def outlet(s, mode):
                s[i] = min(s[i], 0.5)          # clamping the state in place: forbidden
                return (2e5, 288.0, 1000.0, 1.4, 287.0, 1.0, 0.0)
            return VolumeFns(mass=lambda s: s[i], outlet=outlet, derivs=lambda s, mode, mdot: (-mdot,),
                             signals=lambda s, mode: {})

    with pytest.raises(ContractError, match="VolumeFns.outlet = .*changed the state list s it was given"):
        assemble(_default_with(Tank, component="bottle"))


def test_a_uniform_medium_must_return_its_uniform_value():
    class Fog(EnvironmentKind):
        kind = "test-fog"
        slot = "medium"
        summary = "a medium whose fn.uniform disagrees with fn"
        parameters = ()

        @classmethod
        def build(cls, p, ops):
            def medium(z, t):
                return (1.2, 101325.0, 288.15, 0.0, 0.0, 0.0)
            medium.uniform = (1.225, 101325.0, 288.15, 0.0, 0.0, 0.0)
            return medium

    class Family:
        @hookimpl
        def thrustgraph_environment_kinds(self):
            return [Fog]

    m = load_model(default_model_path())
    m.environment["medium"] = {"kind": "test-fog"}
    parsed = parse_model(m, plugin_manager=get_plugin_manager(extra=[Family()]))
    with pytest.raises(ContractError, match=r"plugin 'Family' \(module test_contract\), kind 'test-fog' \(medium\), "
                                             r"medium fn.uniform: is \(1.225"):
        assemble(parsed)


def test_a_kind_without_its_builder_is_refused_when_registered():
    class Half(ComponentKind):
        kind = "test-half-nozzle"
        role = "flow"
        summary = "declares a flow role but builds nothing"

    class Family:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return [Half]

    with pytest.raises(ContractError, match=r"kind 'test-half-nozzle' \(flow\), build_flow: is not defined"):
        component_kinds(get_plugin_manager(extra=[Family()]))


def test_a_builder_with_the_wrong_arguments_is_refused_when_registered():
    class Old(ComponentKind):
        kind = "test-old-jet"
        role = "jet"
        summary = "builds with an older argument order"

        @classmethod
        def build_jet(cls, p, ops):
            return None

    class Family:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return [Old]

    with pytest.raises(ContractError, match=r"build_jet \(.*\): takes 2 positional arguments \(p, ops\), but "
                                             r"assembly calls build_jet\(p, i, ops, amb\)"):
        component_kinds(get_plugin_manager(extra=[Family()]))


def test_environment_kind_defaults_are_checked_too():
    class Breeze(EnvironmentKind):
        kind = "test-breeze"
        slot = "medium"
        summary = "a default wind written without its unit"
        parameters = (Quantity("wind_x", "m/s", default=3.0),)

        @classmethod
        def build(cls, p, ops):
            return lambda z, t: (1.225, 101325.0, 288.15, p.wind_x, 0.0, 0.0)

    class Family:
        @hookimpl
        def thrustgraph_environment_kinds(self):
            return [Breeze]

    with pytest.raises(ContractError, match=r"parameter 'wind_x': its default 3.0 has no unit.*default=\"3 m/s\""):
        environment_kinds(get_plugin_manager(extra=[Family()]))


def test_a_dimensionless_number_takes_a_bare_default():
    class Plain(ComponentKind):
        kind = "test-plain-body"
        role = "body"
        summary = "a coefficient needs no unit"
        parameters = (Number("drag_coefficient", default=0.5), Quantity("mass", "kg", default="1 kg"))

        @classmethod
        def build_body(cls, p, ops):
            return BodyFns(mass=p.mass)

    class Family:
        @hookimpl
        def thrustgraph_component_kinds(self):
            return [Plain]

    assert component_kinds(get_plugin_manager(extra=[Family()]))["test-plain-body"] is Plain


def test_every_bundled_model_keeps_the_contract():
    for path in sorted(default_model_path().parent.glob("*.toml")):
        contract._PASSED.clear()
        system = assemble(load_model(path))
        assert check_system(system) is system


def test_the_callables_are_tried_once_not_once_per_design(monkeypatch):
    """A study assembles its vehicle per design (single flights); the contract is tried on the first only."""
    tried = []
    real = contract._Trial.run
    monkeypatch.setattr(contract._Trial, "run", lambda self: (tried.append(1), real(self))[1])
    parsed = parse_model(load_model(default_model_path()))
    contract._PASSED.clear()
    table = evaluate(parsed.model, [resolve(parsed, "components.bottle.fill")], [[0.2], [0.3], [0.4], [0.5]],
                     ["apogee"], parsed=parsed, engine="serial", flights="single", quiet=True)
    assert list(table.status) == ["ok"] * 4
    assert len(tried) == 1


def test_contract_error_crosses_process_boundaries_whole():
    err = ContractError("plugin 'x' (module x), kind 'y' (flow), FlowFns.flow", "returned 4 values, not 5",
                        "return (mdot, v_e, p_e, A_e, dthrust_dp)")
    back = pickle.loads(pickle.dumps(err))
    assert isinstance(back, PluginError) and str(back) == str(err) and back.fix == err.fix
