"""Model files: TOML with a format name, a version and quantities written with units.

Reading a file never executes anything from it: it is parsed as TOML data and
checked key by key. Writing goes to a temporary file that is renamed into
place, so a failed write leaves nothing half-written.

A model file looks like::

    format = "thrustgraph-model"
    version = 1
    name = "my rocket"

    [components.bottle]
    kind = "pressurised-liquid-tank"
    volume = "2 L"

    flow_paths = ["bottle -> neck -> outside"]

Examples
--------
>>> m = load_model(default_model_path())
>>> m.components["bottle"]["kind"]
'pressurised-liquid-tank'
"""

from __future__ import annotations

import difflib
import os
import tempfile
import tomllib
from importlib import resources
from pathlib import Path
from typing import Any

import tomli_w

from .errors import ModelError
from .model import Model

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "load_model", "loads_model", "save_model", "dumps_model",
           "default_model_path", "bundled_models", "atomic_write"]

FORMAT_NAME = "thrustgraph-model"
FORMAT_VERSION = 1
_TOP = ("format", "version", "name", "description", "components", "flow_paths", "environment", "launch", "run")


def bundled_models() -> dict[str, Path]:
    """The scenario files shipped with thrustgraph, by file stem."""
    root = resources.files("thrustgraph_models")
    return {Path(str(p)).stem: Path(str(p)) for p in root.iterdir() if str(p).endswith(".toml")}


def default_model_path() -> Path:
    """The bundled model run when the user names none."""
    return bundled_models()["bottle-rocket"]


def loads_model(text: str, *, source: str = "<text>") -> Model:
    """Read a model from TOML text; errors name ``source`` and the key path."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ModelError(source, f"is not valid TOML ({exc})", "fix the syntax at the line and column given") from None
    try:
        return _from_data(data, source)
    except ModelError as exc:
        raise exc.located(source) from None


def load_model(path: str | os.PathLike[str]) -> Model:
    """Read a model file."""
    p = Path(path)
    if not p.is_file():
        raise ModelError(str(p), "no such model file", "check the path, or run 'thrustgraph models' for the bundled ones")
    m = loads_model(p.read_text(encoding="utf-8"), source=str(p))
    m.source = str(p)
    return m


def _table(data: dict, key: str) -> dict:
    val = data.get(key, {})
    if not isinstance(val, dict):
        raise ModelError(key, f"expected a table, got {val!r}", f"write [{key}] followed by key = value lines")
    return val


def _from_data(data: dict[str, Any], source: str) -> Model:
    for key in data:
        if key not in _TOP:
            close = difflib.get_close_matches(key, _TOP, n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"valid top-level keys: {', '.join(_TOP)}"
            raise ModelError(key, "unknown top-level key", hint)
    fmt = data.get("format")
    if fmt != FORMAT_NAME:
        raise ModelError("format", f"expected {FORMAT_NAME!r}, got {fmt!r}",
                         f"start the file with format = \"{FORMAT_NAME}\" and version = {FORMAT_VERSION}")
    version = data.get("version")
    if not isinstance(version, int) or isinstance(version, bool):
        raise ModelError("version", f"expected a whole number, got {version!r}", f"write version = {FORMAT_VERSION}")
    if version > FORMAT_VERSION:
        raise ModelError("version", f"the file is format version {version}, newer than this thrustgraph reads "
                         f"(up to {FORMAT_VERSION})", "upgrade thrustgraph (pip install -U thrustgraph)")
    if version < 1:
        raise ModelError("version", f"format version {version} does not exist", f"write version = {FORMAT_VERSION}")
    comps = _table(data, "components")
    for name, table in comps.items():
        if not isinstance(table, dict):
            raise ModelError(f"components.{name}", f"expected a table, got {table!r}", f"write [components.{name}]")
    paths = data.get("flow_paths", [])
    if not isinstance(paths, list):
        raise ModelError("flow_paths", f"expected a list, got {paths!r}", "write flow_paths = [\"tank -> nozzle -> outside\"]")
    env = _table(data, "environment")
    name = data.get("name", Path(source).stem)
    desc = data.get("description", "")
    for key, val in (("name", name), ("description", desc)):
        if not isinstance(val, str):
            raise ModelError(key, f"expected text, got {val!r}", f"write {key} = \"...\"")
    return Model(name=name, description=desc, components={k: dict(v) for k, v in comps.items()},
                 flow_paths=list(paths), environment={k: dict(v) for k, v in env.items()},
                 launch=dict(_table(data, "launch")), run=dict(_table(data, "run")), source=source)


def dumps_model(model: Model) -> str:
    """TOML text of a model; :func:`loads_model` reads it back to an equal model."""
    data: dict[str, Any] = {"format": FORMAT_NAME, "version": FORMAT_VERSION, "name": model.name}
    if model.description:
        data["description"] = model.description
    data["flow_paths"] = list(model.flow_paths)
    for key in ("launch", "run"):
        if getattr(model, key):
            data[key] = getattr(model, key)
    if model.environment:
        data["environment"] = model.environment
    data["components"] = model.components
    return tomli_w.dumps(data)


def atomic_write(path: str | os.PathLike[str], data: str | bytes) -> None:
    """Write a file through a temporary file and a rename: all or nothing."""
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=p.parent, prefix=f".{p.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data.encode("utf-8") if isinstance(data, str) else data)
        os.replace(tmp, p)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def save_model(model: Model, path: str | os.PathLike[str]) -> None:
    """Write a model file (atomically)."""
    atomic_write(path, dumps_model(model))
