"""Model files: TOML with a format name, a version and quantities written with units.

Reading a file never executes anything from it: the text is parsed as TOML
data (``tomllib``) and checked key by key; quantities stay text until the
unit registry reads them as numbers with units. Writing goes through
:func:`thrustgraph.base.outputfiles.atomic_write` (a temporary file renamed into
place), so a failed write leaves nothing half-written.

A model file looks like::

    format = "thrustgraph-model"
    version = 1
    name = "my rocket"
    flow_paths = ["bottle -> neck -> outside"]

    [launch]
    elevation = "80 deg"

    [components.bottle]
    kind = "pressurised-liquid-tank"
    volume = "2 L"
    gauge_pressure = "4.5 bar"

Sections: ``format``, ``version``, ``name``, ``description``, ``flow_paths``,
``[launch]``, ``[run]``, ``[environment.medium]``, ``[environment.gravity]``,
``[components.NAME]``, ``[study]`` (kept as written, for parameter studies) and ``[calibration]`` (where
fitted values came from, written by ``thrustgraph calibrate``; kept as written).
docs/model-file.md describes every key.

Two levels of checking:

* :func:`loads_model` / :func:`load_model` check the structure every model
  file must have, without loading any plugin: the format line, the version
  (older versions are upgraded through :data:`UPGRADES`), the type of every
  section, unknown keys at the top level and in ``[launch]`` and ``[run]``
  (with the closest valid name), component names and ``kind`` lines, and that
  every name in ``flow_paths`` is a component.
* :func:`check_model` also checks the model against the installed component
  and environment kinds (parameter names, units, bounds, the graph) and puts
  the file name in front of every error.

Examples
--------
>>> m = load_model(default_model_path())
>>> m.components["bottle"]["kind"]
'pressurised-liquid-tank'
>>> loads_model(dumps_model(m), source=m.source) == m
True
>>> loads_model('format = "thrustgraph-model"\\nversion = 1\\n[lanch]\\n', source="demo.toml")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: demo.toml: lanch: unknown top-level key. Fix: did you mean 'launch'?
"""

from __future__ import annotations

import copy
import datetime as _dt
import difflib
import os
import re
import tomllib
from importlib import resources
from pathlib import Path
from typing import Any, Callable, Mapping

import tomli_w

from ..base.errors import ModelError, shorten
from .model import LAUNCH_SPECS, RUN_SPECS, Model
from ..base.units import finite_number
from .model import parse_model, parse_paths
from ..base.version import __version__
from ..base.outputfiles import atomic_write  # re-exported: where model files were written from first

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "OLDEST_VERSION", "UPGRADES", "TOP_LEVEL_KEYS", "load_model",
           "loads_model", "save_model", "dumps_model", "check_model", "upgrade_data", "default_model_path",
           "bundled_models", "model_path", "atomic_write"]

FORMAT_NAME = "thrustgraph-model"
#: The format version this release writes.
FORMAT_VERSION = 1
#: The oldest format version this release can still read (through :data:`UPGRADES`).
OLDEST_VERSION = 1
TOP_LEVEL_KEYS = ("format", "version", "name", "description", "flow_paths", "launch", "run", "environment",
                  "components", "stages", "triggers", "study", "calibration")

#: Upgrade steps between format versions: ``UPGRADES[n]`` takes the data of a
#: version-``n`` file (a dict, as TOML reads it) and returns the same model as
#: version ``n + 1`` data. Version 1 is the first format, so the table is empty;
#: when version 2 comes, ``UPGRADES[1]`` will turn a version-1 file into a
#: version-2 one and old files keep loading. A version older than
#: :data:`OLDEST_VERSION` fails with a message saying how to upgrade it.
UPGRADES: dict[int, Callable[[dict[str, Any]], dict[str, Any]]] = {}

# A component name must be usable in key paths (components.NAME.PARAM) and in flow paths (a -> b).
_NAME = re.compile(r"^[^\W\d][\w-]*$")
_PLAIN = (str, int, float, bool)


def bundled_models() -> dict[str, Path]:
    """The scenario files shipped with thrustgraph, by file stem.

    >>> "bottle-rocket" in bundled_models()
    True
    """
    root = resources.files("thrustgraph_models")
    return dict(sorted((Path(str(p)).stem, Path(str(p))) for p in root.iterdir() if str(p).endswith(".toml")))


def default_model_path() -> Path:
    """The bundled model run when the user names none."""
    return bundled_models()["bottle-rocket"]


def model_path(name: str | os.PathLike[str] | None) -> Path:
    """The file a model's name stands for, as the command line and :func:`load_model` read it.

    None is the bundled default (:func:`default_model_path`); text that is a bundled scenario's name
    (``"water-jet-boat"``, a stem of :func:`bundled_models`) is that scenario's file; anything else (text or a
    path object) is a path, as given. Whether the file exists is :func:`load_model`'s to say.

    >>> model_path("water-jet-boat") == bundled_models()["water-jet-boat"]
    True
    >>> model_path("my-rocket.toml"), model_path(None).name
    (PosixPath('my-rocket.toml'), 'bottle-rocket.toml')
    """
    if name is None:
        return default_model_path()
    if isinstance(name, str):
        bundled = bundled_models()
        if name in bundled:
            return bundled[name]
    return Path(name)


def loads_model(text: str, *, source: str = "<text>") -> Model:
    """Read a model from TOML text; errors name ``source`` and the key path.

    Parameters
    ----------
    text : str
        The content of a model file.
    source : str
        What to call the text in error messages (usually the file name); kept
        as ``Model.source``.

    Raises
    ------
    ModelError
        For malformed TOML (with line and column), a missing or foreign format
        line, a version this release cannot read, a section of the wrong type,
        an unknown key (with the closest valid name) or a flow path naming a
        component that does not exist.

    Examples
    --------
    >>> m = loads_model('format = "thrustgraph-model"\\nversion = 1\\nname = "empty"\\n')
    >>> m.name, m.components
    ('empty', {})
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelError(source, f"is not valid TOML: {exc}",
                         "fix the syntax at the line and column given (quantities are quoted: volume = \"2 L\")") from None
    except RecursionError:
        raise ModelError(source, "nests lists or tables too deeply to be read (hundreds of levels)",
                         f"a model file needs at most a few levels; nest at most {MAX_DEPTH}") from None
    try:
        _check_depth(data)
        return _from_data(data, source)
    except ModelError as exc:
        raise exc.located(source) from None


def load_model(path: str | os.PathLike[str] | None) -> Model:
    """Read a model file (structure checks only; see :func:`check_model`).

    ``path`` is what the command line takes (:func:`model_path`): a model file's path, a bundled scenario's
    name, or None for the bundled default.

    >>> load_model("water-jet-boat").name
    'water-jet boat'
    >>> load_model("water-jet-bot")    # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: water-jet-bot: no such model file, nor a bundled scenario of that name. Fix: did you mean 'water-jet-boat'? A model is named by the path of a model file or a bundled scenario's name: bottle-rocket, cold-gas-free-floater, ..., water-jet-boat (thrustgraph new --list describes them).
    """
    p = model_path(path)
    if not p.is_file():
        bundled = list(bundled_models())
        close = difflib.get_close_matches(p.stem, bundled, n=1)
        hint = f"did you mean {close[0]!r}? A model is named by" if close else "give"
        raise ModelError(str(p), "no such model file, nor a bundled scenario of that name",
                         f"{hint} the path of a model file or a bundled scenario's name: {', '.join(bundled)} "
                         "(thrustgraph new --list describes them)")
    try:
        text = p.read_bytes().decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ModelError(str(p), f"is not UTF-8 text (byte {exc.start})", "save the file as UTF-8") from None
    except OSError as exc:
        raise ModelError(str(p), f"cannot be read ({exc.strerror})", "check the file's permissions") from None
    m = loads_model(text, source=str(p))
    m.source = str(p)
    return m


def check_model(model: Model, *, plugin_manager: Any = None) -> Any:
    """Check a model against the installed kinds; errors carry the file name.

    Runs :func:`thrustgraph.models.model.parse_model` (parameter names with the
    closest valid name, units, bounds, the graph, plugin checks) and puts
    ``model.source`` in front of the key path of any error.

    Returns
    -------
    ParsedModel

    Examples
    --------
    >>> m = load_model(default_model_path()).set("components.bottle.volum", "2 L")
    >>> check_model(m)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: ...bottle-rocket.toml: components.bottle.volum: unknown parameter. Fix: did you mean 'volume'?
    """

    try:
        return parse_model(model, plugin_manager=plugin_manager)
    except ModelError as exc:
        if model.source:
            raise exc.located(model.source) from None
        raise


# ---------------------------------------------------------------------------
# versions
# ---------------------------------------------------------------------------

def upgrade_data(data: dict[str, Any], *, target: int = FORMAT_VERSION, oldest: int = OLDEST_VERSION,
                 steps: Mapping[int, Callable[[dict[str, Any]], dict[str, Any]]] | None = None) -> dict[str, Any]:
    """Bring the data of a model file to format version ``target``.

    Parameters
    ----------
    data : dict
        A model file as TOML reads it, with its ``version``.
    target : int
        The version to reach (this release's :data:`FORMAT_VERSION`).
    oldest : int
        The oldest version still read.
    steps : mapping, optional
        Upgrade steps (default :data:`UPGRADES`): ``steps[n]`` turns version
        ``n`` data into version ``n + 1`` data.

    Examples
    --------
    >>> upgrade_data({"format": FORMAT_NAME, "version": 1})["version"]
    1
    >>> def rename(d):   # what a future step might do
    ...     d = dict(d); d["name"] = d.pop("title"); return d
    >>> upgrade_data({"version": 1, "title": "x"}, target=2, steps={1: rename})
    {'version': 2, 'name': 'x'}
    """

    steps = UPGRADES if steps is None else steps
    version = data.get("version")
    if "version" not in data:
        raise ModelError("version", "expected the format version (a whole number), found no version line",
                         f"add version = {target} after the format line")
    if not isinstance(version, int) or isinstance(version, bool):
        raise ModelError("version", f"expected a whole number, found {_found(version)}", f"write version = {target}")
    if version > target:
        raise ModelError("version", f"the file is format version {version}, newer than this thrustgraph reads "
                         f"(thrustgraph {__version__} reads format versions {oldest} to {target})",
                         "upgrade thrustgraph (pip install --upgrade thrustgraph) to read this file, or ask "
                         f"whoever wrote it for a version-{target} copy")
    if version < 1:
        raise ModelError("version", f"format version {version} does not exist (the first is 1)",
                         f"write version = {target}")
    if version < oldest:
        raise ModelError("version", f"format version {version} is too old for thrustgraph {__version__}, "
                         f"which reads versions {oldest} to {target}",
                         f"load and save the file once with a thrustgraph release that reads version {version} "
                         "and writes a newer one (docs/model-file.md, section 'Versions'), then load it here")
    out = data
    while out["version"] < target:
        n = out["version"]
        if n not in steps:
            raise ModelError("version", f"no upgrade from format version {n} to {n + 1} is known",
                             "upgrade the file with the thrustgraph release that introduced the next version")
        out = steps[n](copy.deepcopy(out))
        out["version"] = n + 1
    return out


# ---------------------------------------------------------------------------
# structure checks
# ---------------------------------------------------------------------------

def _closest(key: str, options: list[str] | tuple[str, ...], what: str = "valid names") -> str:
    close = difflib.get_close_matches(key, list(options), n=1, cutoff=0.6)
    if close:
        return f"did you mean {close[0]!r}?"
    return f"{what}: {', '.join(options) or '(none)'}"


def _type_name(value: Any) -> str:
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, str):
        return "text"
    if isinstance(value, (int, float)):
        return "a number"
    if isinstance(value, (_dt.date, _dt.time, _dt.datetime)):
        return "a date or time"
    return type(value).__name__


def _found(value: Any) -> str:
    return f"{_type_name(value)} {shorten(value)}"


#: Deepest nesting of lists and tables a model file may use (a thrust table inside a component is 4 levels).
MAX_DEPTH = 16


def _check_depth(data: dict[str, Any]) -> None:
    """Refuse lists and tables nested deeper than :data:`MAX_DEPTH` (walked without recursion)."""
    stack: list[tuple[Any, str, int]] = [(data, "", 0)]
    while stack:
        node, where, depth = stack.pop()
        if depth > MAX_DEPTH:
            raise ModelError(where, f"nests lists or tables more than {MAX_DEPTH} levels deep",
                             "a model file needs a few levels at most; check the brackets")
        if isinstance(node, dict):
            stack.extend((v, f"{where}.{k}" if where else str(k), depth + 1) for k, v in node.items())
        elif isinstance(node, list):
            stack.extend((v, f"{where}[{k}]", depth + 1) for k, v in enumerate(node))


def _table(data: dict[str, Any], key: str, where: str | None = None) -> dict[str, Any]:
    where = where or key
    val = data.get(key, {})
    if not isinstance(val, dict):
        raise ModelError(where, f"expected a table, found {_found(val)}",
                         f"write a [{where}] header followed by key = value lines")
    return val


def _check_values(value: Any, where: str) -> None:
    """Refuse values no parameter can take (dates and times): what TOML can hold beyond text and numbers."""
    if isinstance(value, dict):
        for k, v in value.items():
            _check_values(v, f"{where}.{k}")
    elif isinstance(value, list):
        for k, v in enumerate(value):
            _check_values(v, f"{where}[{k}]")
    elif not isinstance(value, _PLAIN):
        raise ModelError(where, f"expected a quantity, number, word or flag, found {_found(value)}",
                         'quote quantities with their unit, e.g. "5 bar"')
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        finite_number(value, where=where)  # NaN, infinities and integers beyond 64 bits mean nothing in a model


def _check_settings(table: dict[str, Any], section: str, specs: tuple) -> None:
    names = [s.name for s in specs]
    for key, val in table.items():
        if key not in names:
            raise ModelError(f"{section}.{key}", f"unknown [{section}] setting", _closest(key, names))
        _check_values(val, f"{section}.{key}")


def _check_kind_table(table: Any, where: str, header: str) -> None:
    if not isinstance(table, dict):
        raise ModelError(where, f"expected a table, found {_found(table)}",
                         f"write [{header}] followed by kind = \"...\" and its parameters")
    if "kind" not in table:
        raise ModelError(f"{where}.kind", "expected the kind of this item, found no kind line",
                         f"add kind = \"...\" under [{header}]; 'thrustgraph kinds' lists the installed kinds")
    if not isinstance(table["kind"], str):
        raise ModelError(f"{where}.kind", f"expected the name of a kind as text, found {_found(table['kind'])}",
                         "write kind = \"...\" with quotes; 'thrustgraph kinds' lists the installed kinds")
    for key, val in table.items():
        _check_values(val, f"{where}.{key}")


def _from_data(data: dict[str, Any], source: str) -> Model:

    for key in data:
        if key not in TOP_LEVEL_KEYS:
            raise ModelError(key, "unknown top-level key", _closest(key, TOP_LEVEL_KEYS, "valid top-level keys"))
    if "format" not in data:
        raise ModelError("format", f"expected format = {FORMAT_NAME!r}, found no format line",
                         f"start the file with format = \"{FORMAT_NAME}\" and version = {FORMAT_VERSION}")
    if data["format"] != FORMAT_NAME:
        raise ModelError("format", f"expected {FORMAT_NAME!r}, found {_found(data['format'])}",
                         f"this is not a thrustgraph model file; start it with format = \"{FORMAT_NAME}\"")
    data = upgrade_data(data)

    name = data.get("name", Path(source).stem)
    desc = data.get("description", "")
    for key, val in (("name", name), ("description", desc)):
        if not isinstance(val, str):
            raise ModelError(key, f"expected text, found {_found(val)}", f"write {key} = \"...\"")

    comps = _table(data, "components")
    for cname, table in comps.items():
        where = f"components.{cname}"
        if not _NAME.fullmatch(cname):
            raise ModelError(where, f"{cname!r} cannot be a component name",
                             "use letters, digits, - and _, starting with a letter (e.g. main-tank)")
        _check_kind_table(table, where, where)

    paths = data.get("flow_paths", [])
    if not isinstance(paths, list):
        raise ModelError("flow_paths", f"expected a list of paths, found {_found(paths)}",
                         "write flow_paths = [\"tank -> nozzle -> outside\"]")
    names = list(comps)
    for k, path in enumerate(paths):
        for a, b in parse_paths([path], where=f"flow_paths[{k}]"):
            for n in (a, b):
                if n not in comps:
                    raise ModelError(f"flow_paths[{k}]", f"names {n!r}, which is not a component",
                                     _closest(n, names, "components in this file") if names
                                     else f"add [components.{n}] with its kind")

    env = _table(data, "environment")
    for slot, table in env.items():
        _check_kind_table(table, f"environment.{slot}", f"environment.{slot}")

    launch = _table(data, "launch")
    _check_settings(launch, "launch", LAUNCH_SPECS)
    run = _table(data, "run")
    _check_settings(run, "run", RUN_SPECS)
    stages = _table(data, "stages")        # checked when the model is parsed (thrustgraph.models.staging)
    triggers = _table(data, "triggers")
    study = _table(data, "study")
    for key, table in (("stages", stages), ("triggers", triggers), ("study", study), ("flow_paths", paths)):
        _check_values(table, key)
    calibration = _table(data, "calibration")  # written by thrustgraph.measured.calibrate: where fitted values came from
    for key, entry in calibration.items():
        if not isinstance(entry, dict):
            raise ModelError(f"calibration.{key}", f"expected a table, found {_found(entry)}",
                             "calibration entries are written by 'thrustgraph calibrate'; remove this line")

    return Model(name=name, description=desc, components=copy.deepcopy(comps), flow_paths=list(paths),
                 environment=copy.deepcopy(env), launch=copy.deepcopy(launch), run=copy.deepcopy(run),
                 source=source, study=copy.deepcopy(study), calibration=copy.deepcopy(calibration),
                 stages=copy.deepcopy(stages), triggers=copy.deepcopy(triggers))


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------

def _has_cr(value: Any) -> bool:
    if isinstance(value, str):
        return "\r" in value
    if isinstance(value, dict):
        return any(_has_cr(k) or _has_cr(v) for k, v in value.items())
    if isinstance(value, list):
        return any(_has_cr(v) for v in value)
    return False


class _Writer:
    """A small TOML writer for model files: short arrays on one line, rows of a table one per line.

    Scalars are formatted by tomli_w (escapes, floats, dates); this class only
    lays them out. The reader is always tomllib, and the property test checks
    the two agree.
    """

    WIDTH = 100
    _BARE = re.compile(r"^[A-Za-z0-9_-]+$")

    def __init__(self, multiline: bool) -> None:
        self.multiline = multiline
        self.lines: list[str] = []

    @staticmethod
    def scalar(value: Any, multiline: bool = False) -> str:
        return tomli_w.dumps({"v": value}, multiline_strings=multiline)[4:].rstrip("\n")

    def key(self, k: str) -> str:
        return k if self._BARE.fullmatch(k) else self.scalar(k)

    def inline(self, value: Any) -> str:
        """A value on one line (inline tables must be)."""
        if isinstance(value, dict):
            if not value:
                return "{}"
            return "{ " + ", ".join(f"{self.key(k)} = {self.inline(v)}" for k, v in value.items()) + " }"
        if isinstance(value, list):
            return "[" + ", ".join(self.inline(v) for v in value) + "]"
        return self.scalar(value)

    def value(self, value: Any, indent: str = "") -> str:
        if isinstance(value, list):
            one = self.inline(value)
            if len(indent) + len(one) <= self.WIDTH or not value:
                return one
            inner = indent + "    "
            return "[\n" + "".join(f"{inner}{self.value(v, inner)},\n" for v in value) + f"{indent}]"
        if isinstance(value, dict):
            return self.inline(value)
        return self.scalar(value, self.multiline)

    def table(self, path: list[str], table: dict[str, Any]) -> None:
        body = [f"{self.key(k)} = {self.value(v)}" for k, v in table.items() if not isinstance(v, dict)]
        subs = [(k, v) for k, v in table.items() if isinstance(v, dict)]
        if path and (body or not subs):
            if self.lines:
                self.lines.append("")
            self.lines.append("[" + ".".join(self.key(p) for p in path) + "]")
        self.lines.extend(body)
        for k, v in subs:
            self.table(path + [k], v)


def dumps_model(model: Model) -> str:
    """TOML text of a model; :func:`loads_model` reads it back to an equal model.

    Sections come in a fixed order (identity, paths, launch, run, environment,
    components, study) and keep the order of their keys, so the same model
    always gives the same text (and the same hash in every output). Nothing
    is added that the model does not hold (no date, no tool version).

    >>> m = Model(name="tiny", flow_paths=["motor -> outside"], components={
    ...     "motor": {"kind": "prescribed-jet", "programme": "thrust-table", "exhaust_velocity": "800 m/s",
    ...               "thrust_curve": {"units": ["s", "N"], "rows": [[0.0, 0.0], [0.1, 20.0], [1.0, 0.0]]}},
    ...     "outside": {"kind": "surroundings"}})
    >>> print(dumps_model(m))
    format = "thrustgraph-model"
    version = 1
    name = "tiny"
    flow_paths = ["motor -> outside"]
    <BLANKLINE>
    [components.motor]
    kind = "prescribed-jet"
    programme = "thrust-table"
    exhaust_velocity = "800 m/s"
    <BLANKLINE>
    [components.motor.thrust_curve]
    units = ["s", "N"]
    rows = [[0.0, 0.0], [0.1, 20.0], [1.0, 0.0]]
    <BLANKLINE>
    [components.outside]
    kind = "surroundings"
    <BLANKLINE>
    """
    data: dict[str, Any] = {"format": FORMAT_NAME, "version": FORMAT_VERSION, "name": model.name}
    if model.description:
        data["description"] = model.description
    data["flow_paths"] = list(model.flow_paths)
    for key in ("launch", "run", "environment", "components", "stages", "triggers", "study", "calibration"):
        value = getattr(model, key, None)
        if value:
            data[key] = value
    # Multi-line strings read better, but TOML turns a CR LF inside one into LF: fall back to escapes.
    w = _Writer(multiline=not _has_cr(data))
    w.table([], data)
    return "\n".join(w.lines) + "\n"


def save_model(model: Model, path: str | os.PathLike[str]) -> None:
    """Write a model file (atomically); :func:`load_model` reads it back equal.

    >>> import tempfile, pathlib
    >>> m = load_model(default_model_path())
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "copy.toml"
    >>> save_model(m.set("components.bottle.fill", 0.4), f)
    >>> load_model(f).components["bottle"]["fill"]
    0.4
    """
    atomic_write(path, dumps_model(model))
