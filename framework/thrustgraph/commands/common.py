"""Options and helpers shared by several sub-commands.

>>> parse_override("components.bottle.fill=0.4")
('components.bottle.fill', 0.4)
>>> parse_override("components.bottle.gauge_pressure=5 bar")
('components.bottle.gauge_pressure', '5 bar')
"""

from __future__ import annotations

import argparse
import sys
import tomllib
from typing import Any

from ..kinds.displayunits import UnitChoice, parse_units
from ..base.errors import ModelError
from ..models.model import Model
from ..models.modelfile import load_model

__all__ = ["add_model_argument", "add_set_option", "add_out_dir_option", "parse_override", "load_with_overrides",
           "add_units_option", "units_choice"]


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


class _Deprecated(argparse.Action):
    """An old spelling of an option: stores into the new one's destination and says so on standard error."""

    def __init__(self, *args: Any, new: str = "", **kw: Any) -> None:
        self.new = new
        super().__init__(*args, **kw)

    def __call__(self, parser: argparse.ArgumentParser, namespace: argparse.Namespace, values: Any,
                 option_string: str | None = None) -> None:
        print(f"{parser.prog}: {option_string} is deprecated and will be removed in the next release: use "
              f"{self.new} instead", file=sys.stderr)
        setattr(namespace, self.dest, values)


def add_out_dir_option(p: argparse.ArgumentParser, help: str, *, old: str | None = None) -> None:
    """``--out-dir DIR``: the one name of the option that sets the directory a command writes its files into
    (``plot``, ``export``). ``old`` is a former spelling still accepted for one release, with a note."""
    p.add_argument("--out-dir", dest="out_dir", metavar="DIR", help=help)
    if old:
        p.add_argument(old, dest="out_dir", metavar="DIR", action=_Deprecated, new="--out-dir",
                       help=f"deprecated spelling of --out-dir (removed in the next release)")


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


def load_with_overrides(name: str | None, overrides: list[str]) -> Model:
    model = load_model(name)      # a path, a bundled scenario's name or None (models.modelfile.model_path)
    for text in overrides:
        key, value = parse_override(text)
        try:
            model.get(key)
        except ModelError:
            pass  # a new key is allowed; it is checked when the model is parsed
        model.set(key, value)
    return model
