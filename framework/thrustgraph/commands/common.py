"""Options and helpers shared by several sub-commands.

>>> parse_override("components.bottle.fill=0.4")
('components.bottle.fill', 0.4)
>>> parse_override("components.bottle.gauge_pressure=5 bar")
('components.bottle.gauge_pressure', '5 bar')
"""

from __future__ import annotations

import argparse
import tomllib
from typing import Any

from ..displayunits import UnitChoice, parse_units
from ..errors import ModelError
from ..model import Model
from ..modelfile import bundled_models, default_model_path, load_model

__all__ = ["add_model_argument", "add_set_option", "parse_override", "load_with_overrides", "add_units_option",
           "units_choice"]


def add_model_argument(p: argparse.ArgumentParser) -> None:
    p.add_argument("model", nargs="?", default=None,
                   help="model file (TOML) or the name of a bundled scenario; default: the bundled bottle rocket")


def add_set_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--set", dest="overrides", action="append", default=[], metavar="KEY=VALUE",
                   help='change a parameter for this run, e.g. --set components.bottle.fill=0.4 '
                        '--set "components.bottle.gauge_pressure=5 bar" (repeatable)')


def add_units_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--units", metavar="CHOICE",
                   help="the units results are shown in: SI, imperial, or QUANTITY=UNIT pairs, e.g. "
                        "length=ft,speed=mph (or imperial,pressure=bar); default: the model's [run] units, else SI")


def units_choice(args: argparse.Namespace, parsed: Any = None) -> UnitChoice:
    """The unit choice in force: ``--units`` when given, else the model's ``[run] units`` (SI without either).

    >>> units_choice(argparse.Namespace(units="length=ft")).chosen
    {'length': 'ft'}
    """
    if getattr(args, "units", None):
        return parse_units(args.units, where="--units")
    run = getattr(parsed, "run", None)
    return getattr(run, "units", None) or parse_units(None)


def parse_override(text: str) -> tuple[str, Any]:
    """Split ``key.path=value``; the value is read as a TOML literal, else kept as text."""
    if "=" not in text:
        raise ModelError(f"--set {text}", "expected KEY=VALUE", 'write e.g. --set "components.bottle.fill=0.4"')
    key, raw = text.split("=", 1)
    key, raw = key.strip(), raw.strip()
    if not key:
        raise ModelError(f"--set {text}", "the key is empty", 'write e.g. --set "components.bottle.fill=0.4"')
    try:
        value = tomllib.loads(f"v = {raw}")["v"]
    except tomllib.TOMLDecodeError:
        value = raw
    return key, value


def resolve_model_path(name: str | None):
    if name is None:
        return default_model_path()
    bundled = bundled_models()
    if name in bundled and not name.endswith(".toml"):
        return bundled[name]
    return name


def load_with_overrides(name: str | None, overrides: list[str]) -> Model:
    model = load_model(resolve_model_path(name))
    for text in overrides:
        key, value = parse_override(text)
        try:
            model.get(key)
        except ModelError:
            pass  # a new key is allowed; it is checked when the model is parsed
        model.set(key, value)
    return model
