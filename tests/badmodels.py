"""The suite's own generator of bad model files, and a time-boxed runner for them.

:func:`make_case` turns ``(seed, index)`` into a model file mutated from one of the bundled scenarios: wrong
types and units, extreme and non-finite numbers, deep nesting, long strings, broken flow paths, trigger
nonsense, odd run settings. The same pair always gives the same file, so a failure is reproduced from its
seed and index alone (``python tools/bad_models.py --seed S --show INDEX``).

:func:`run_case` puts one file through the path of ``thrustgraph run FILE --json OUT`` in the calling process
and sorts the outcome into

* ``refused`` -- exit status 2 (bad input) or 1 (a flight that could not be completed), with one message line;
* ``ok`` -- exit status 0, every number of the summary and of the JSON export finite;
* ``nan`` -- a non-finite number in the summary, the export or a message (unless the file itself wrote one);
* ``crash`` -- a traceback, or a message that is not one readable line.

:func:`run_cases` runs many cases in a small pool of worker processes. Each case has a budget of wall time
(generous, far above the slowest normal run): a case past it counts as a ``hang`` and its worker is killed and
replaced. The budget bounds how long a hang can stall the run; it is not a measurement (no test asserts a time).

Examples
--------
>>> a, b = make_case(7, 3), make_case(7, 3)
>>> a.text == b.text and a.mutations == b.mutations
True
>>> make_case(7, 3).text.startswith('format = "thrustgraph-model"')
True
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import math
import multiprocessing as mp
import os
import random
import re
import resource
import tempfile
import time
import tomllib
import traceback
from dataclasses import dataclass
from multiprocessing.connection import wait
from pathlib import Path
from typing import Any, Callable, Iterator

import tomli_w

__all__ = ["Case", "Outcome", "make_case", "run_case", "run_cases", "KINDS", "MUTATORS"]

KINDS = ("refused", "ok", "nan", "crash", "hang")
_MODELS_DIR = Path(__file__).resolve().parent.parent / "models"
#: Longest message line a refused case may print (the parts of it that echo input are cut to about 80 characters).
MAX_MESSAGE = 2000


@dataclass(frozen=True)
class Case:
    """One generated model file: where it came from and what was done to it."""

    seed: int
    index: int
    base: str
    mutations: tuple[str, ...]
    text: str


@dataclass(frozen=True)
class Outcome:
    """What ``thrustgraph run`` did with a case: one of :data:`KINDS`, with the message or traceback."""

    kind: str
    detail: str = ""
    seconds: float = 0.0


# ---------------------------------------------------------------------------
# the generator
# ---------------------------------------------------------------------------

class Raw(str):
    """TOML text to insert as it is (deep nesting, 400-digit integers, dates): written where the value goes."""


_BASES: dict[str, dict[str, Any]] = {}


def _bases() -> dict[str, dict[str, Any]]:
    if not _BASES:
        for p in sorted(_MODELS_DIR.glob("*.toml")):
            _BASES[p.stem] = tomllib.loads(p.read_text())
    return _BASES


_UNITS = ["bar", "Pa", "kPa", "psi", "L", "mL", "m^3", "mm", "m", "km", "ft", "g", "kg", "lb", "s", "ms", "min",
          "m/s", "km/h", "m/s^2", "kg/m^3", "K", "degC", "degF", "deg", "rad", "N", "lbf", "W", "J/kg/K",
          "W/m^2/K", "m^2", "mm^2", "L/s", "", "%", "dimensionless", "Hz", "V", "mol", "cd"]
_ODD_TEXT = ["", " ", "bar", "5", "five bar", "5 bar bar", "5 barr", "5 m/s/s", "1e5", "--5 bar", "5 bar 3",
             "(1+2) bar", "2*3 bar", "2 ** 3 bar", "1e400 m", "1e-400 m", "nan", "inf", "-inf", "nan bar",
             "inf L", "-inf m/s", "NaN kg", "Infinity m", "1_000 Pa", "0x10 m", "5 bar\n", "5\tbar", "½ L",
             "5 m ** 9999", "5 m ** -9999", "5 / 0 m", "5 m / 0", "1 / s", "3 Ω", "5 kilo", "1 a", "$", "{}",
             "5 bar; import os", "__import__('os')", "10**400 L", "2**1024 m", "10**400 degC", "-10**400 K",
             "1e308 bar * 1e308", "5 degC * 2", "5 delta_degC", "0 K", "-300 degC"]


def _number(rng: random.Random) -> Any:
    pick = rng.random()
    if pick < 0.15:
        return rng.choice([math.nan, math.inf, -math.inf])
    if pick < 0.25:
        return Raw(rng.choice(["-", ""]) + "1" + "0" * rng.choice([19, 20, 40, 309, 400, 4000]))
    if pick < 0.45:
        return rng.choice([0, -0.0, -1, 1, 1e308, -1e308, 1.7976931348623157e308, 5e-324, 1e-308, 2.5e-300,
                           1e300, 1e30, 1e-30, 1e15, 9007199254740993, -2**63, 2**63 - 1])
    return rng.choice([1, -1]) * 10.0 ** rng.uniform(-320, 308)


def _scaled(value: Any, rng: random.Random) -> Any:
    """The same value times 10**k (k from -300 to 300), keeping its unit."""
    k = rng.choice([-300, -100, -30, -12, -6, -3, 3, 6, 12, 30, 100, 300, rng.randint(-320, 320)])
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        try:
            return float(value) * 10.0 ** k
        except OverflowError:
            return math.inf
    if isinstance(value, str):
        m = re.match(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*)$", value)
        if m:
            return f"{m.group(1)}e{k} {m.group(2)}".strip() if "e" not in m.group(1).lower() else \
                f"{float(m.group(1)) * 10.0 ** min(k, 300):g} {m.group(2)}".strip()
    return value


def _unit_of(value: Any) -> str:
    if isinstance(value, str):
        m = re.match(r"^\s*[-+0-9.eE]+\s*(.*)$", value)
        if m:
            return m.group(1)
    return ""


def _quantity(value: Any, rng: random.Random) -> Any:
    """A quantity string: extreme or non-finite number, wrong unit, arithmetic, long unit, odd text."""
    unit = _unit_of(value) or rng.choice(_UNITS)
    pick = rng.random()
    if pick < 0.25:
        n = _number(rng)
        return f"{n} {unit}".strip() if not isinstance(n, Raw) else f"{n} {unit}".strip()
    if pick < 0.4:
        num = re.match(r"^\s*([-+0-9.eE]+)", value).group(1) if isinstance(value, str) and _unit_of(value) else "5"
        return f"{num} {rng.choice(_UNITS)}".strip()
    if pick < 0.6:
        return rng.choice(_ODD_TEXT)
    if pick < 0.65:
        return "9**9**9 " + unit if rng.random() < 0.5 else "9**9**9**9 " + unit
    if pick < 0.8:
        n = rng.choice([100, 1000, 10_000, 100_000])
        body = rng.choice(["m*", "kilo", "m/", "(", "m**2*", "x", " "])
        return ("1 " + body * (n // len(body)) + "m")[: n + 2]
    return _scaled(value, rng)


def _wrong_type(rng: random.Random, value: Any) -> Any:
    opts: list[Any] = [True, False, [], {}, ["bottle"], [1, 2, 3], {"a": 1}, "text", 42, 3.5, Raw("1979-05-27"),
                       Raw("07:32:00"), Raw("1979-05-27T07:32:00Z"), [[1, 2], [3, 4]], {"units": ["s"], "rows": []},
                       [value, value], {"value": value}, [None], "x" * rng.choice([100, 10_000, 1_000_000])]
    v = rng.choice(opts)
    return "" if v == [None] else v


def _nested(rng: random.Random) -> Raw:
    d = rng.choice([30, 100, 300, 600, 1000, 5000])
    if rng.random() < 0.5:
        return Raw("[" * d + "1" + "]" * d)
    return Raw("{ a = " * d + "1" + " }" * d)


def _vector(rng: random.Random) -> Any:
    return rng.choice([[1e200, 0, 0], [1e300, 1e300, 1e300], [5e-324, 0, 0], [1e-200, 0, 0], [0, 0, 0],
                       [math.nan, 0, 0], [math.inf, 0, 0], [-1, 0], [-1, 0, 0, 0], ["-1", 0, 0], [True, 0, 0],
                       [Raw("1" + "0" * 400), 0, 0], [-1e308, -1e308, 0], [1, 1e-320, 0]])


def _leaves(data: dict[str, Any]) -> list[tuple[list[Any], Any]]:
    """Every (path, value) under the sections a user edits, lists and tables included."""
    out: list[tuple[list[Any], Any]] = []

    def walk(node: Any, path: list[Any]) -> None:
        if isinstance(node, dict):
            for k, v in node.items():
                out.append((path + [k], v))
                walk(v, path + [k])
        elif isinstance(node, list):
            for k, v in enumerate(node):
                out.append((path + [k], v))
                walk(v, path + [k])

    for section in ("components", "launch", "run", "environment", "flow_paths", "stages", "triggers"):
        if section in data:
            out.append(([section], data[section]))
            walk(data[section], [section])
    return out


def _set(data: dict[str, Any], path: list[Any], value: Any) -> None:
    node = data
    for p in path[:-1]:
        node = node[p]
    node[path[-1]] = value


def _pick_leaf(rng: random.Random, data: dict[str, Any], scalar: bool = True) -> tuple[list[Any], Any] | None:
    leaves = [(p, v) for p, v in _leaves(data) if not scalar or not isinstance(v, (dict, list))]
    leaves = [(p, v) for p, v in leaves if p[-1] != "kind" or rng.random() < 0.2]
    return rng.choice(leaves) if leaves else None


def m_number(rng, data):
    leaf = _pick_leaf(rng, data)
    if not leaf:
        return "nothing"
    path, value = leaf
    new = _number(rng) if not isinstance(value, str) or rng.random() < 0.3 else _quantity(value, rng)
    _set(data, path, new)
    return f"{_p(path)} = {_short(new)}"


def m_quantity(rng, data):
    leaves = [(p, v) for p, v in _leaves(data) if isinstance(v, str) and _unit_of(v)]
    if not leaves:
        return m_number(rng, data)
    path, value = rng.choice(leaves)
    new = _quantity(value, rng)
    _set(data, path, new)
    return f"{_p(path)} = {_short(new)}"


def m_scale(rng, data):
    leaves = [(p, v) for p, v in _leaves(data) if isinstance(v, (int, float, str)) and not isinstance(v, bool)
              and (not isinstance(v, str) or _unit_of(v))]
    if not leaves:
        return "nothing"
    path, value = rng.choice(leaves)
    new = _scaled(value, rng)
    _set(data, path, new)
    return f"{_p(path)} = {_short(new)}"


def m_type(rng, data):
    leaf = _pick_leaf(rng, data, scalar=rng.random() < 0.7)
    if not leaf:
        return "nothing"
    path, value = leaf
    new = _wrong_type(rng, value)
    _set(data, path, new)
    return f"{_p(path)} = {_short(new)}"


def m_nesting(rng, data):
    leaf = _pick_leaf(rng, data)
    if not leaf:
        return "nothing"
    path, _ = leaf
    new = _nested(rng)
    _set(data, path, new)
    return f"{_p(path)} = nested {len(new) // 2} deep"


def m_vector(rng, data):
    leaves = [(p, v) for p, v in _leaves(data) if isinstance(v, list) and len(v) == 3
              and all(isinstance(c, (int, float)) for c in v)]
    comps = list(data.get("components", {}))
    if leaves and rng.random() < 0.7:
        path = rng.choice(leaves)[0]
    elif comps:
        name = rng.choice(comps)
        path = ["components", name, rng.choice(["direction", "outlet_direction", "inflow_direction"])]
    else:
        return "nothing"
    new = _vector(rng)
    _set(data, path, new)
    return f"{_p(path)} = {_short(new)}"


def m_long_string(rng, data):
    leaf = _pick_leaf(rng, data)
    n = rng.choice([200, 10_000, 100_000, 1_000_000])
    text = rng.choice(["x", "5 bar ", "m", "é", "\\u0000", "->"]) * (n // 5)
    if not leaf or rng.random() < 0.2:
        data["name"] = text
        return f"name = <{len(text)} chars>"
    _set(data, leaf[0], text)
    return f"{_p(leaf[0])} = <{len(text)} chars>"


def m_paths(rng, data):
    comps = list(data.get("components", {}))
    paths = list(data.get("flow_paths", []))
    pick = rng.randrange(9)
    if pick == 0 and paths:
        paths.pop(rng.randrange(len(paths)))
    elif pick == 1 and comps:
        a = rng.choice(comps)
        paths.append(f"{a} -> {a}")
    elif pick == 2 and len(comps) > 1:
        a, b = rng.sample(comps, 2)
        paths += [f"{a} -> {b}", f"{b} -> {a}"]
    elif pick == 3:
        paths.append(rng.choice(["", "->", "a -> -> b", "ghost -> outside", " -> ", "a->b->", "x" * 10_000]))
    elif pick == 4 and paths:
        paths = [" -> ".join(reversed(p.split("->"))) if isinstance(p, str) else p for p in paths]
    elif pick == 5:
        data["flow_paths"] = rng.choice(["bottle -> neck -> outside", 5, {"a": "b"}, [[["x"]]], [1, 2]])
        return f"flow_paths = {_short(data['flow_paths'])}"
    elif pick == 6 and len(comps) > 1:
        paths.append(" -> ".join(rng.sample(comps, len(comps))))
    elif pick == 7 and comps:
        paths.append(" -> ".join([rng.choice(comps)] * rng.choice([2, 50, 5000])))
    else:
        paths = []
    data["flow_paths"] = paths
    return f"flow_paths = {_short(paths)}"


def m_components(rng, data):
    comps = data.setdefault("components", {})
    names = list(comps)
    kinds = sorted({t.get("kind") for b in _bases().values() for t in b.get("components", {}).values()})
    pick = rng.randrange(8)
    if pick == 0 and names:
        n = rng.choice(names)
        del comps[n]
        return f"removed component {n}"
    if pick == 1 and names:
        n = rng.choice(names)
        keys = [k for k in comps[n]]
        k = rng.choice(keys)
        del comps[n][k]
        return f"removed components.{n}.{k}"
    if pick == 2 and names:
        n = rng.choice(names)
        comps[n][rng.choice(["volum", "x", "direction", "mass", "kind2", "é"])] = rng.choice([1, "1 m", True])
        return f"added a key to components.{n}"
    if pick == 3 and names:
        n = rng.choice(names)
        comps[n]["kind"] = rng.choice(kinds + ["nozzle", "", "surroundings", "airframe"])
        return f"components.{n}.kind = {comps[n]['kind']}"
    if pick == 4 and names:
        n = rng.choice(names)
        comps[n + "_copy"] = copy.deepcopy(comps[n])
        return f"copied component {n}"
    if pick == 5:
        other = rng.choice(list(_bases().values()))
        if other.get("components"):
            n, t = rng.choice(list(other["components"].items()))
            comps[n] = copy.deepcopy(t)
            return f"component {n} from another model"
    if pick == 6 and names:
        n = rng.choice(names)
        comps[n] = rng.choice(["table", 5, [], {"kind": 5}, {"kind": ["airframe"]}])
        return f"components.{n} = {_short(comps[n])}"
    name = rng.choice(["1abc", "a b", "a.b", "", "x" * 5000, "a->b", "ä"])
    comps[name] = {"kind": rng.choice(kinds)}
    return f"component named {_short(name)}"


def _trigger_value(rng: random.Random, names: list[str], key: str) -> Any:
    if key == "when":
        sig = rng.choice(["time", "altitude", "speed", "mass", "ghost", "bottle.pressure", "booster_motor.burn_clock",
                          "x" * 5000, "", "time.time"])
        val = rng.choice(["1 s", "150 m", "nan s", "inf m", "1e400 s", "10**400 s", "9**9**9 s", "-1e308 m", "0",
                          "5 bar", "1", "1e-300 s", "x", "1 " + "m*" * 3000 + "m"])
        return rng.choice([f"{sig} {rng.choice('<>')} {val}", f"{sig} = {val}", [f"{sig} > {val}"], 5, True, ""])
    if key == "then":
        return rng.choice(["separate", "switch", "stop", "explode", ["stop"], 1, "", {"a": 1}])
    if key in ("stage", "component"):
        return rng.choice([[rng.choice(names or ["x"])], rng.choice(names or ["x"]), "s1", ["s1"], 5, {"a": 1}, "",
                           ["bottle"], "booster"])
    if key == "mode":
        return rng.choice(["burning", "open", "stopped", ["burning"], 0, "", "x" * 1000])
    return rng.choice(["0.3 s", "nan s", "inf s", "-1 s", "1e300 s", 0.3, [1], "1e400 s", "5 bar", True])


def m_triggers(rng, data):
    names = list(data.get("components", {}))
    triggers = data.setdefault("triggers", {})
    stages = data.setdefault("stages", {})
    pick = rng.randrange(4)
    if pick == 0 or not triggers:
        t = {k: _trigger_value(rng, names, k) for k in ("when", "then", "stage", "component", "mode", "after")
             if k in ("when", "then") or rng.random() < 0.5}
        triggers[rng.choice(["t1", "drop", "x"])] = t
        if rng.random() < 0.5:
            stages["s1"] = {"components": rng.choice([[rng.choice(names or ["x"])], "x", [], [[names[:1]]],
                                                      names, ["outside"]])}
        return f"trigger {_short(t)}"
    if pick == 1:
        name = rng.choice(list(triggers))
        key = rng.choice(["when", "then", "stage", "component", "mode", "after", "unknown"])
        triggers[name][key] = _trigger_value(rng, names, key)
        return f"triggers.{name}.{key} = {_short(triggers[name][key])}"
    if pick == 2:
        stages[rng.choice(["s1", "booster"])] = rng.choice([{"components": names}, {"components": ["ghost"]},
                                                             {"components": "booster_frame"}, "x", {"c": 1},
                                                             {"components": []}, {"components": [5]}])
        return "stages nonsense"
    data["triggers"] = rng.choice([5, "x", [1], {"t": 5}, {"t": []}])
    return f"triggers = {_short(data['triggers'])}"


_RUN_VALUES = {
    "rtol": [math.nan, math.inf, 0, -1, 1e-300, 1e-13, 1e-2, 1, "1e-9", True, 1e-15],
    "atol": [math.nan, math.inf, 0, -1, 1e-300, 1e-15, 1, 1e3, "1e-9", -math.inf],
    "output_interval": ["1e-7 s", "5e-324 s", "1e-3 s", "0 s", "-1 s", "1e300 s", "nan s", "1e-12 s", "0.5 s",
                        "1e-5 s", 0.01],
    "end_time": ["60000 s", "1e9 s", "1e300 s", "1e-300 s", "0.001 s", "inf s", "1e6 s", "-5 s", "3600 s"],
    "method": ["DOP853", "RK45", "Radau", "LSODA", "Euler", "", ["RK45"]],
    "stop_at_apogee": [True, False, "yes", 1],
}
_LAUNCH_VALUES = {
    "speed": ["1e300 m/s", "1e6 m/s", "-1e300 m/s", "nan m/s", "300000000 m/s", "-50 m/s", "1e-300 m/s"],
    "altitude": ["1e300 m", "-1e300 m", "1e6 m", "-1e6 m", "100 km", "nan m", "-6400 km"],
    "guide_length": ["1e300 m", "1e6 m", "0 m", "1e-300 m", "inf m"],
    "elevation": ["-90 deg", "90 deg", "1e300 deg", "nan deg", "0 deg", "90.0000001 deg", "1.5707963 rad"],
    "azimuth": ["1e300 deg", "-360 deg", "720 deg", "nan deg"],
    "mount": ["guide", "held", "free", "track", "flying", 5],
    "friction": [1e300, 2.0, math.nan, -1, 0],
    "min_follow_speed": ["1e300 m/s", "0 m/s", "nan m/s"],
    "attitude": ["fixed", "follow-wind", "tumbling"],
}


def m_run(rng, data):
    run = data.setdefault("run", {})
    key = rng.choice(list(_RUN_VALUES) + ["unknown_setting"])
    run[key] = rng.choice(_RUN_VALUES.get(key, [1]))
    return f"run.{key} = {_short(run[key])}"


def m_launch(rng, data):
    launch = data.setdefault("launch", {})
    key = rng.choice(list(_LAUNCH_VALUES))
    launch[key] = rng.choice(_LAUNCH_VALUES[key])
    return f"launch.{key} = {_short(launch[key])}"


def m_environment(rng, data):
    env = data.setdefault("environment", {})
    kinds = {"medium": ["still-air", "vacuum", "standard-atmosphere-1976", "still-water", "ghost"],
             "gravity": ["uniform-gravity", "inverse-square-gravity", "ghost"]}
    slot = rng.choice(["medium", "gravity", "weather"])
    if slot == "weather" or rng.random() < 0.3:
        env[slot] = {"kind": rng.choice(kinds.get(slot, ["x"]))}
        return f"environment.{slot} = {env[slot]}"
    table = env.setdefault(slot, {"kind": kinds[slot][0]})
    if not isinstance(table, dict):
        return "nothing"
    key = rng.choice(["density", "pressure", "temperature", "g", "g0", "radius", "wind_x", "datum_altitude",
                      "wind_speed", "surface_pressure", "wind_ceiling"])
    table[key] = rng.choice(["1e6 kg/m^3", "1e300 kg/m^3", "1e-300 kg/m^3", "1e300 Pa", "1e-300 K", "1e300 K",
                             "1e6 m/s^2", "1e300 m/s^2", "1e300 m", "-1e300 m", "1e300 m/s", "nan Pa", "0 Pa",
                             "1 m", "1e9 Pa"])
    return f"environment.{slot}.{key} = {table[key]}"


def m_table(rng, data):
    tables = [(p, v) for p, v in _leaves(data) if isinstance(v, dict) and set(v) == {"units", "rows"}]
    if not tables:
        return m_number(rng, data)
    path, t = rng.choice(tables)
    rows = t["rows"]
    pick = rng.randrange(6)
    if pick == 0 and rows:
        r = rng.randrange(len(rows))
        c = rng.randrange(len(rows[r])) if isinstance(rows[r], list) and rows[r] else 0
        if isinstance(rows[r], list) and rows[r]:
            rows[r][c] = _number(rng)
    elif pick == 1:
        t["rows"] = rows[:1]
    elif pick == 2:
        t["rows"] = list(reversed(rows))
    elif pick == 3:
        t["units"] = [rng.choice(_UNITS) for _ in t["units"]] + ([] if rng.random() < 0.7 else ["s"])
    elif pick == 4:
        t["rows"] = [[float(i), float(i)] for i in range(rng.choice([3, 1000, 100_000]))]
    else:
        t["rows"] = [[r[0], r[1] * 1e300] if isinstance(r, list) and len(r) == 2 else r for r in rows]
    return f"{_p(path)} mutated"


def m_header(rng, data):
    pick = rng.randrange(5)
    if pick == 0:
        data["version"] = rng.choice([0, 2, -1, "1", 1.0, Raw("1" + "0" * 400)])
        return f"version = {_short(data['version'])}"
    if pick == 1:
        data["format"] = rng.choice(["thrustgraph", 1, ""])
        return "format changed"
    if pick == 2:
        data["name"] = rng.choice(["rocket $\\frac{1}{$", "$x^2$", "a\nb", "", "\\", "%s", 5])
        return f"name = {_short(data['name'])}"
    if pick == 3:
        data[rng.choice(["lanch", "study", "calibration", "extra"])] = rng.choice([5, {"a": 1}, []])
        return "added a top-level key"
    data["run"] = rng.choice([5, "fast", [1]])
    return f"run = {data['run']}"


#: (weight, mutator): each returns a one-line description of what it changed.
MUTATORS: list[tuple[float, Callable[[random.Random, dict[str, Any]], str]]] = [
    (3, m_number), (4, m_quantity), (2, m_scale), (3, m_type), (1, m_nesting), (1, m_vector), (1, m_long_string),
    (2, m_paths), (2, m_components), (2, m_triggers), (2, m_run), (2, m_launch), (2, m_environment), (1, m_table),
    (1, m_header),
]


def _p(path: list[Any]) -> str:
    return ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in path).replace(".[", "[")


def _short(value: Any, n: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= n else text[: n - 3] + "..."


def _dump(data: dict[str, Any]) -> str:
    raws: list[str] = []

    def sub(node: Any) -> Any:
        if isinstance(node, Raw):
            raws.append(str(node))
            return f"@@RAW{len(raws) - 1}@@"
        if isinstance(node, dict):
            return {k: sub(v) for k, v in node.items()}
        if isinstance(node, list):
            return [sub(v) for v in node]
        return node

    text = tomli_w.dumps(sub(data))
    for k, raw in enumerate(raws):
        text = text.replace(f'"@@RAW{k}@@"', raw)
    return text


def make_case(seed: int, index: int) -> Case:
    """The ``index``-th bad model file of the run seeded ``seed`` (deterministic)."""
    rng = random.Random(f"{seed}:{index}")
    bases = _bases()
    base = rng.choice(sorted(bases))
    data = copy.deepcopy(bases[base])
    weights = [w for w, _ in MUTATORS]
    done = []
    for _ in range(rng.choice([1, 1, 1, 2, 2, 3])):
        fn = rng.choices([f for _, f in MUTATORS], weights)[0]
        try:
            what = fn(rng, data)
        except (TypeError, KeyError, IndexError, AttributeError):  # an earlier mutation replaced the table
            what = "nothing (the table was replaced)"
        done.append(f"{fn.__name__[2:]}: {what}")
    return Case(seed, index, base, tuple(done), _dump(data))


# ---------------------------------------------------------------------------
# running one case
# ---------------------------------------------------------------------------

_NONFINITE = re.compile(r"(?<![\w.])[-+]?(nan|inf|infinity)(?![\w])", re.IGNORECASE)


def _strict_json(text: str) -> Any:
    def refuse(name: str) -> Any:
        raise ValueError(f"non-finite number {name} in the JSON export")
    return json.loads(text, parse_constant=refuse)


def run_case(case: Case, workdir: str | os.PathLike[str]) -> Outcome:
    """Put a case through ``thrustgraph run FILE --json OUT`` in this process and sort the outcome."""
    from thrustgraph.cli import main

    d = Path(workdir)
    model = d / f"case-{case.index}.toml"
    out = d / f"case-{case.index}.json"
    model.write_text(case.text, encoding="utf-8")
    stdout, stderr = io.StringIO(), io.StringIO()
    t0 = time.perf_counter()
    try:
        with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
            rc = main(["run", str(model), "--json", str(out), "--quiet"])
    except SystemExit as exc:  # argparse
        rc = exc.code if isinstance(exc.code, int) else 2
    except BaseException:  # noqa: BLE001 - this is what the generator looks for
        return Outcome("crash", traceback.format_exc(limit=-8), time.perf_counter() - t0)
    finally:
        model.unlink(missing_ok=True)
    seconds = time.perf_counter() - t0
    text_nonfinite = bool(_NONFINITE.search(case.text))
    try:
        if rc == 0:
            summary = stdout.getvalue()
            export = out.read_text(encoding="utf-8")
            try:
                _strict_json(export)
            except ValueError as exc:
                return Outcome("nan", f"{exc}", seconds)
            bad = [ln for ln in summary.splitlines() if _NONFINITE.search(ln) and not text_nonfinite]
            if bad:
                return Outcome("nan", f"non-finite number in the summary: {bad[0]!r}", seconds)
            return Outcome("ok", "", seconds)
        err = stderr.getvalue()
        lines = [ln for ln in err.splitlines() if ln.strip()]
        if out.exists():
            return Outcome("crash", f"exit {rc} but {out.name} was written", seconds)
        if not lines or not lines[-1].startswith("thrustgraph:"):
            return Outcome("crash", f"exit {rc} without a message: {err[-2000:]!r}", seconds)
        msg = [ln for ln in lines if ln.startswith("thrustgraph:")]
        if len(msg) != 1 or len(msg[0]) > MAX_MESSAGE:
            return Outcome("crash", f"exit {rc}, message of {len(lines)} line(s) and {len(err)} characters: "
                                    f"{err[:300]!r}", seconds)
        if _NONFINITE.search(msg[0]) and not text_nonfinite:
            return Outcome("nan", f"non-finite number in the message: {msg[0]}", seconds)
        return Outcome("refused", msg[0], seconds)
    finally:
        out.unlink(missing_ok=True)


# ---------------------------------------------------------------------------
# many cases in a pool of workers, each case time-boxed
# ---------------------------------------------------------------------------

def _worker(conn: Any, seed: int, workdir: str, memory: int) -> None:
    import warnings

    warnings.simplefilter("ignore")  # numpy/scipy warnings are not the message a user reads; the outcome is
    if memory:
        resource.setrlimit(resource.RLIMIT_AS, (memory, memory))
    import thrustgraph.cli  # noqa: F401 - import once, before the first case's clock starts
    conn.send(("ready", None))
    while True:
        index = conn.recv()
        if index is None:
            return
        try:
            outcome = run_case(make_case(seed, index), workdir)
        except BaseException:  # noqa: BLE001 - a failure of the generator itself is reported, not hidden
            outcome = Outcome("crash", "generator: " + traceback.format_exc(limit=-4))
        conn.send((index, outcome))


class _Slot:
    def __init__(self, ctx: Any, seed: int, workdir: str, memory: int) -> None:
        self.conn, child = ctx.Pipe()
        self.proc = ctx.Process(target=_worker, args=(child, seed, workdir, memory), daemon=True)
        self.proc.start()
        child.close()
        self.index: int | None = None
        self.started = 0.0
        self.ready = False

    def stop(self) -> None:
        if self.proc.is_alive():
            self.proc.kill()
        self.proc.join()
        self.conn.close()


def run_cases(seed: int, indices: Any, *, workers: int = 2, budget: float = 60.0,
              memory: int = 3 * 2**30) -> Iterator[tuple[int, Outcome]]:
    """Run the cases ``indices`` of ``seed`` in ``workers`` processes; yield ``(index, outcome)`` as they end.

    A case still running after ``budget`` seconds is a ``hang``: its worker is killed (and replaced). Each
    worker's address space is capped at ``memory`` bytes, so an unbounded allocation fails in the worker
    (as a crash with its traceback) instead of taking the machine down.
    """
    ctx = mp.get_context("fork" if hasattr(os, "fork") else "spawn")
    todo = list(indices)[::-1]
    with tempfile.TemporaryDirectory(prefix="bad-models-") as workdir:
        slots = [_Slot(ctx, seed, workdir, memory) for _ in range(max(1, min(workers, len(todo))))]
        try:
            while True:
                for s in slots:
                    if s.ready and s.index is None and todo:
                        s.index = todo.pop()
                        s.started = time.monotonic()
                        s.conn.send(s.index)
                busy = [s for s in slots if s.index is not None or not s.ready]
                if not busy:
                    return
                now = time.monotonic()
                timeout = min([s.started + budget - now for s in busy if s.index is not None] + [budget])
                for conn in wait([s.conn for s in busy], timeout=max(0.0, timeout)):
                    s = next(s for s in slots if s.conn is conn)
                    try:
                        msg = conn.recv()
                    except EOFError:  # the worker died (killed by the system, a hard crash)
                        index = s.index
                        code = s.proc.exitcode
                        s.stop()
                        slots[slots.index(s)] = _Slot(ctx, seed, workdir, memory)
                        if index is not None:
                            yield index, Outcome("crash", f"the worker process died (exit code {code})")
                        continue
                    if msg[0] == "ready":
                        s.ready = True
                        continue
                    index, outcome = msg
                    s.index = None
                    yield index, outcome
                now = time.monotonic()
                for k, s in enumerate(slots):
                    if s.index is not None and now - s.started > budget:
                        index = s.index
                        s.stop()
                        slots[k] = _Slot(ctx, seed, workdir, memory)
                        yield index, Outcome("hang", f"still running after {budget:g} s", budget)
        finally:
            for s in slots:
                try:
                    s.conn.send(None)
                except (OSError, ValueError):
                    pass
                s.stop()
