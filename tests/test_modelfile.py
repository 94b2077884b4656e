"""Model files: round trips (property test and every bundled model), precise errors, versions, [study].

The property test builds models from the installed component and environment
kinds, with raw values each kind's own parameter specs accept, and checks that
writing and reading them gives back the identical model.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thrustgraph as tg

from thrustgraph import ModelError
from thrustgraph.cli import main
from thrustgraph.base.errors import OutputError
from thrustgraph.models.model import LAUNCH_SPECS, RUN_SPECS, Model
from thrustgraph.models.modelfile import (FORMAT_VERSION, TOP_LEVEL_KEYS, UPGRADES, atomic_write, bundled_models, check_model, dumps_model,
                                   load_model, loads_model, save_model, upgrade_data)
from thrustgraph.kinds.parameters import Choice, Flag, Quantity, Table, Vector, parse_params
from thrustgraph.models.plugins import component_kinds, environment_kinds, get_plugin_manager

PM = get_plugin_manager()
KINDS = component_kinds(PM)
ENV_KINDS = environment_kinds(PM)
HEAD = 'format = "thrustgraph-model"\nversion = 1\n'


# ---------------------------------------------------------------------------
# strategies: raw values the installed specs accept
# ---------------------------------------------------------------------------

def _accepts(spec, value) -> bool:
    try:
        spec.parse(value, where="x")
    except ModelError:
        return False
    return True


def _number_range(spec: Quantity) -> tuple[float, float]:
    lo = -1e4 if spec.low is None else float(spec.low)
    hi = lo + 2e4 if spec.high is None else float(spec.high)
    return lo, hi


def raw_value(spec):
    """A strategy of raw (as written in a file) values that ``spec`` accepts, or None if unknown."""
    if isinstance(spec, Quantity):
        lo, hi = _number_range(spec)
        nums = st.floats(min_value=lo, max_value=hi, allow_nan=False, allow_infinity=False)
        if spec.unit:
            base = nums.map(lambda x, u=spec.unit: f"{x!r} {u}")
        else:
            ints = st.integers(min_value=math.ceil(lo), max_value=math.floor(hi)) if math.ceil(lo) <= hi else nums
            base = st.one_of(nums, ints)
        return base.filter(lambda v, s=spec: _accepts(s, v))
    if isinstance(spec, Choice):
        return st.sampled_from(spec.options)
    if isinstance(spec, Flag):
        return st.booleans()
    if isinstance(spec, Vector):
        comp = st.one_of(st.floats(min_value=-10, max_value=10, allow_nan=False), st.integers(-5, 5))
        return st.lists(comp, min_size=3, max_size=3).filter(lambda v, s=spec: _accepts(s, v))
    if isinstance(spec, Table):
        units = [u for _, u in spec.columns]

        @st.composite
        def table(draw):
            n = draw(st.integers(min_value=spec.min_rows, max_value=6))
            steps = draw(st.lists(st.floats(min_value=1e-3, max_value=10.0), min_size=n, max_size=n))
            first, rows = 0.0, []
            for k in range(n):
                first = first + steps[k] if k else draw(st.floats(min_value=0.0, max_value=1.0))
                rest = draw(st.lists(st.floats(min_value=0.0, max_value=1e3), min_size=len(units) - 1,
                                     max_size=len(units) - 1))
                rows.append([first, *rest])
            return {"units": list(units), "rows": rows}
        return table().filter(lambda v, s=spec: _accepts(s, v))
    if getattr(spec, "default", None) is not None:  # a spec type this test does not know: its default
        return st.just(spec.default)
    return None


def params_of(specs):
    """A strategy of parameter tables: every required parameter, a random subset of the others."""
    strategies = {s.name: raw_value(s) for s in specs}

    @st.composite
    def build(draw):
        out = {}
        for s in specs:
            strat = strategies[s.name]
            if strat is None:
                continue
            if s.required or draw(st.booleans()):
                out[s.name] = draw(strat)
        return out
    return build()


def _generable(cls) -> bool:
    return all(raw_value(s) is not None or not s.required for s in cls.parameters)


COMPONENT_KINDS = sorted(k for k, c in KINDS.items() if _generable(c))
NAMES = st.from_regex(r"[a-z][a-z0-9_-]{0,8}", fullmatch=True)
TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=40)
PLAIN = st.one_of(TEXT, st.integers(-10**6, 10**6), st.floats(allow_nan=False, allow_infinity=False), st.booleans())
STUDY = st.recursive(PLAIN, lambda inner: st.one_of(st.lists(inner, max_size=3),
                                                    st.dictionaries(TEXT, inner, max_size=3)), max_leaves=8)


KNOWN = {"name", "description", "components", "flow_paths", "environment", "launch", "run", "source", "study"}
OTHER_SECTIONS = [f.name for f in dataclasses.fields(Model) if f.name not in KNOWN and f.name in TOP_LEVEL_KEYS]


@st.composite
def models(draw):
    names = draw(st.lists(NAMES, min_size=1, max_size=5, unique=True))
    components = {}
    for n in names:
        kind = draw(st.sampled_from(COMPONENT_KINDS))
        components[n] = {"kind": kind, **draw(params_of(KINDS[kind].parameters))}
    paths = draw(st.lists(st.lists(st.sampled_from(names), min_size=2, max_size=4), max_size=3))
    environment = {}
    for slot in ("medium", "gravity"):
        options = sorted(k for k, c in ENV_KINDS.items() if c.slot == slot and _generable(c))
        if options and draw(st.booleans()):
            kind = draw(st.sampled_from(options))
            environment[slot] = {"kind": kind, **draw(params_of(ENV_KINDS[kind].parameters))}
    study = draw(st.dictionaries(TEXT, STUDY, max_size=3))
    # Sections other parts of thrustgraph keep in the file (tables of tables), whatever they are.
    others = {name: draw(st.dictionaries(NAMES, st.dictionaries(NAMES, PLAIN, max_size=3), max_size=2))
              for name in OTHER_SECTIONS}
    return Model(name=draw(TEXT), description=draw(TEXT), components=components,
                 flow_paths=[" -> ".join(p) for p in paths], environment=environment,
                 launch=draw(params_of(LAUNCH_SPECS)), run=draw(params_of(RUN_SPECS)), study=study, **others)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(models())
def test_writing_then_reading_gives_the_identical_model(m):
    text = dumps_model(m)
    back = loads_model(text, source="generated.toml")
    assert back == dataclasses.replace(m, source="generated.toml")
    assert dumps_model(back) == text  # and the text is stable: the model hash does not drift
    # The generated values are ones the kinds accept (so the round trip covers real parameters).
    for cname, table in back.components.items():
        cls = KINDS[table["kind"]]
        parse_params(cls.parameters, {k: v for k, v in table.items() if k != "kind"},
                     where=f"components.{cname}", params_class=cls.params_class())


def test_awkward_text_round_trips():
    for text in ['a\n"""\nb\\', "line\r\nbreak", "\ttab and \x00 nul", "ends with newline\n", "\n", "'"]:
        m = Model(name=text, description=text, study={text: [text, {text: text}]})
        assert loads_model(dumps_model(m), source="s") == dataclasses.replace(m, source="s"), repr(text)


def test_the_property_test_covers_every_installed_kind():
    assert set(COMPONENT_KINDS) == set(KINDS), "a component kind has a parameter type this test cannot generate"


@pytest.mark.parametrize("stem", sorted(bundled_models()))
def test_every_bundled_model_round_trips_and_checks(stem, tmp_path):
    path = bundled_models()[stem]
    m = load_model(path)
    again = tmp_path / f"{stem}.toml"
    save_model(m, again)
    back = load_model(again)
    assert dataclasses.replace(back, source=m.source) == m
    assert again.read_text() == dumps_model(m)
    check_model(back)  # valid against the installed kinds


def test_saved_file_has_ordinary_permissions(tmp_path):
    f = tmp_path / "m.toml"
    save_model(load_model(bundled_models()["bottle-rocket"]), f)
    assert f.stat().st_mode & 0o044  # readable by others like any file the user writes (umask permitting)


# ---------------------------------------------------------------------------
# [study]: kept as written
# ---------------------------------------------------------------------------

STUDY_TEXT = HEAD + '''name = "with a study"
flow_paths = []
[components.outside]
kind = "surroundings"
[study]
method = "grid"
[study.ranges]
"components.bottle.fill" = { from = 0.2, to = 0.5, steps = 4 }
"components.bottle.gauge_pressure" = ["3 bar", "4 bar", "5 bar"]
'''


def test_study_table_is_passed_through_and_round_trips():
    m = loads_model(STUDY_TEXT, source="study.toml")
    assert m.study == {"method": "grid", "ranges": {
        "components.bottle.fill": {"from": 0.2, "to": 0.5, "steps": 4},
        "components.bottle.gauge_pressure": ["3 bar", "4 bar", "5 bar"]}}
    assert loads_model(dumps_model(m), source="study.toml") == m


def test_study_must_be_a_table():
    with pytest.raises(ModelError, match=r"s\.toml: study: expected a table, found a number 3"):
        loads_model(HEAD + "study = 3\n", source="s.toml")


# ---------------------------------------------------------------------------
# precise errors: file, key path, expected, found, closest valid name
# ---------------------------------------------------------------------------

BASE = bundled_models()["bottle-rocket"].read_text()
VOLUME_LINE = BASE.splitlines().index('volume = "2 L"') + 1


def err(text: str, source: str = "m.toml", check: bool = False) -> str:
    with pytest.raises(ModelError) as info:
        m = loads_model(text, source=source)
        if check:
            check_model(m)
    return str(info.value)


@pytest.mark.parametrize("edit, words", [
    (lambda t: t.replace("[launch]", "[lanch]"), ["m.toml: lanch", "unknown top-level key", "did you mean 'launch'"]),
    (lambda t: t.replace("flow_paths", "flowpaths"), ["m.toml: flowpaths", "did you mean 'flow_paths'"]),
    (lambda t: t.replace("guide_length", "guide_lenght"),
     ["m.toml: launch.guide_lenght", "unknown [launch] setting", "did you mean 'guide_length'"]),
    (lambda t: t.replace("end_time", "end_tme"), ["m.toml: run.end_tme", "unknown [run] setting",
                                                  "did you mean 'end_time'"]),
    (lambda t: t.replace("flow_paths =", "run = 5\nflow_paths =").replace('[run]\nend_time = "30 s"\n', ""), ["m.toml: run", "expected a table, found a number 5"]),
    (lambda t: t.replace('format = "thrustgraph-model"', 'format = "other-tool"'),
     ["m.toml: format", "expected 'thrustgraph-model'", "found text 'other-tool'"]),
    (lambda t: t.replace('format = "thrustgraph-model"\n', ""), ["m.toml: format", "found no format line"]),
    (lambda t: t.replace("version = 1\n", ""), ["m.toml: version", "found no version line", "version = 1"]),
    (lambda t: t.replace("version = 1", 'version = "1"'), ["m.toml: version", "expected a whole number",
                                                          "found text '1'"]),
    (lambda t: t.replace("version = 1", "version = 0"), ["version 0 does not exist"]),
    (lambda t: t.replace("version = 1", "version = 2"),
     ["m.toml: version", "format version 2, newer than this thrustgraph reads", "versions 1 to 1",
      "upgrade thrustgraph (pip install --upgrade thrustgraph)"]),
    (lambda t: t.replace('name = "two-litre water rocket"', "name = 12"), ["m.toml: name", "expected text",
                                                                          "found a number 12"]),
    (lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]', 'flow_paths = "bottle -> neck"'),
     ["m.toml: flow_paths", "expected a list of paths", "found text"]),
    (lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]', 'flow_paths = ["bottle, neck"]'),
     ["m.toml: flow_paths[0]", "expected a path like", "join component names with ->"]),
    (lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]', 'flow_paths = ["bottle -> nek -> outside"]'),
     ["m.toml: flow_paths[0]", "names 'nek', which is not a component", "did you mean 'neck'"]),
    (lambda t: t.replace("[components.neck]", "[components.\"neck\\n\"]"),
     ["components.neck\n", "cannot be a component name"]),
    (lambda t: t.replace("[components.neck]", "[components.\"my neck\"]"),
     ["components.my neck", "cannot be a component name", "letters, digits"]),
    (lambda t: t.replace('kind = "airframe"\n', ""), ["m.toml: components.airframe.kind", "found no kind line",
                                                      "thrustgraph kinds"]),
    (lambda t: t.replace('kind = "airframe"', "kind = 3"), ["components.airframe.kind", "found a number 3"]),
    (lambda t: t.replace('kind = "still-air"\n', ""), ["m.toml: environment.medium.kind", "found no kind line"]),
    (lambda t: t.replace("fill = 0.33", "fill = 2024-05-01"),
     ["m.toml: components.bottle.fill", "found a date or time", "quote quantities"]),
    (lambda t: t.replace('volume = "2 L"', 'volume = "2 L'), ["m.toml: is not valid TOML",
     f"line {VOLUME_LINE}, column 14"]),
])
def test_structure_errors_name_file_key_expected_and_found(edit, words):
    text = edit(BASE)
    assert text != BASE
    message = err(text)
    for w in words:
        assert w in message, message


@pytest.mark.parametrize("edit, words", [
    (lambda t: t.replace("fill = 0.33", "fil = 0.33"),
     ["m.toml: components.bottle.fil", "unknown parameter", "did you mean 'fill'"]),
    (lambda t: t.replace("[environment.gravity]", "[environment.gravty]"),
     ["m.toml: environment.gravty", "unknown environment section", "did you mean 'gravity'"]),
    (lambda t: t.replace('pressure = "101325 Pa"', 'presure = "101325 Pa"'),
     ["m.toml: environment.medium.presure", "did you mean 'pressure'"]),
    (lambda t: t.replace('diameter = "21 mm"', 'diameter = "21 kg"'),
     ["m.toml: components.neck.diameter", "expected a length", "'21 kg'"]),
    (lambda t: t.replace('kind = "convergent-nozzle"', 'kind = "convergent-nozle"'),
     ["m.toml: components.neck.kind", "did you mean 'convergent-nozzle'"]),
    (lambda t: t.replace('flow_paths = ["bottle -> neck -> outside"]', "flow_paths = []"),
     ["m.toml: components.neck", "needs exactly one upstream vessel"]),
])
def test_kind_level_errors_name_the_file_through_check_model(edit, words):
    text = edit(BASE)
    assert text != BASE
    message = err(text, check=True)
    for w in words:
        assert w in message, message


def test_file_errors(tmp_path):
    with pytest.raises(ModelError, match="no such model file.*thrustgraph new --list"):
        load_model(tmp_path / "missing.toml")
    bad = tmp_path / "latin1.toml"
    bad.write_bytes(HEAD.encode() + b'name = "caf\xe9"\n')
    with pytest.raises(ModelError, match="latin1.toml: is not UTF-8 text"):
        load_model(bad)


def test_the_api_takes_the_names_the_command_line_takes(tmp_path, monkeypatch, capsys):
    # every bundled scenario by its name, as `thrustgraph check NAME` takes it, gives the model of its file
    for name, path in bundled_models().items():
        assert tg.load_model(name) == load_model(path), name
        assert main(["check", name]) == 0, name
    assert tg.load_model(None) == load_model(bundled_models()["bottle-rocket"])
    # a file of the user's wins only by its path: a name is a bundled scenario, a path object is a path
    monkeypatch.chdir(tmp_path)
    (tmp_path / "mine.toml").write_text(dumps_model(load_model("water-jet-boat")))
    assert tg.load_model("mine.toml").name == "water-jet boat"
    with pytest.raises(ModelError, match="no such model file"):
        tg.load_model(Path("water-jet-boat"))
    # an unknown name: the same one-line error from both, the closest name and every bundled name in it
    with pytest.raises(ModelError) as api:
        tg.load_model("water-jet-bot")
    capsys.readouterr()
    assert main(["check", "water-jet-bot"]) == 2
    cli = capsys.readouterr().err.strip()
    assert cli == f"thrustgraph: error: {api.value}"
    assert "did you mean 'water-jet-boat'?" in cli and all(n in cli for n in bundled_models())


def test_loading_never_executes_code_from_the_file(tmp_path):
    marker = tmp_path / "marker"
    payload = f"__import__('pathlib').Path({str(marker)!r}).touch()"
    text = BASE.replace('volume = "2 L"', f'volume = "{payload}"').replace(
        'name = "two-litre water rocket"', f'name = "{payload}"')
    m = loads_model(text, source="evil.toml")
    assert m.name == payload  # just text
    with pytest.raises(ModelError, match="components.bottle.volume"):
        check_model(m)
    assert not marker.exists()


# ---------------------------------------------------------------------------
# versions
# ---------------------------------------------------------------------------

def test_this_release_reads_version_1_without_upgrade_steps():
    assert FORMAT_VERSION == 1 and UPGRADES == {}
    assert upgrade_data({"version": 1}) == {"version": 1}


def test_a_future_upgrade_step_turns_version_1_data_into_version_2():
    # What a version-2 release would register as UPGRADES[1]: here, a renamed section.
    def v1_to_v2(data):
        data["vehicle"] = data.pop("components")
        return data
    v1 = {"format": "thrustgraph-model", "version": 1, "components": {"a": {"kind": "surroundings"}}}
    v2 = upgrade_data(v1, target=2, steps={1: v1_to_v2})
    assert v2 == {"format": "thrustgraph-model", "version": 2, "vehicle": {"a": {"kind": "surroundings"}}}
    assert v1["components"] == {"a": {"kind": "surroundings"}}  # the input is not changed


def test_missing_upgrade_step_and_too_old_versions_say_how_to_upgrade():
    with pytest.raises(ModelError, match="no upgrade from format version 1 to 2"):
        upgrade_data({"version": 1}, target=2, steps={})
    with pytest.raises(ModelError, match=r"version 1 is too old.*reads versions 2 to 3.*load and save the file once"):
        upgrade_data({"version": 1}, target=3, oldest=2, steps={2: dict})


# ---------------------------------------------------------------------------
# all-or-nothing writes
# ---------------------------------------------------------------------------

def test_atomic_write_refuses_a_folder_and_leaves_nothing(tmp_path):
    target = tmp_path / "out.csv"
    target.mkdir()  # a directory where the file should go
    with pytest.raises(OutputError, match="out.csv: it is a folder"):
        atomic_write(target, "data")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.csv"]
    assert target.is_dir() and not any(target.iterdir())


def test_model_file_doc_describes_every_key():
    text = (Path(__file__).resolve().parent.parent / "docs" / "model-file.md").read_text()
    for key in TOP_LEVEL_KEYS:
        assert f"`{key}`" in text or f"[{key}" in text, f"docs/model-file.md does not describe the key {key!r}"
    for spec in LAUNCH_SPECS + RUN_SPECS:
        assert f"`{spec.name}`" in text, f"docs/model-file.md does not describe the setting {spec.name!r}"
