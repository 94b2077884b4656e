"""Helpers the sub-commands share: load and check a model, fly it with progress, write outputs all or nothing.

Every command that writes files checks every output path before it does any
work (:func:`check_paths`), builds all of their content in memory, and then
writes them all or none (:func:`thrustgraph.base.outputfiles.write_all`): bad
input, a bad path, a failed flight or an interrupt leaves no file behind.

>>> default_stem(Model(name="Two-litre water rocket!"))
'two-litre-water-rocket'
"""

from __future__ import annotations

import argparse
import re
from pathlib import Path
from typing import Any, Sequence

from ..base.errors import ModelError, ThrustgraphError
from ..outputs.exportformats import EXPORTS
from ..models.model import Model, ParsedModel, parse_model
from ..base.outputfiles import check_outputs, write_all
from .common import load_with_overrides, parse_override
from .progress import Progress

__all__ = ["add_quiet_option", "add_export_options", "export_targets", "load_checked", "fly_model", "default_stem",
           "need_matplotlib", "check_paths", "write_outputs"]


def add_quiet_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--quiet", action="store_true",
                   help="no progress indicator (it is shown only when standard error is a terminal anyway)")


def add_export_options(p: argparse.ArgumentParser, verb: str = "write") -> None:
    """``--NAME FILE`` for every format of the export registry (:mod:`thrustgraph.outputs.exportformats`)."""
    for f in EXPORTS.values():
        need = f", needs {f.needs}" if f.needs else ""
        p.add_argument(f"--{f.name}", metavar="FILE", help=f"{verb} {f.holds} to FILE ({f.title}{need})")


def export_targets(args: argparse.Namespace) -> list[tuple[str, str]]:
    """(format, path) of every ``--NAME FILE`` given; a format whose package is missing is refused."""
    targets = [(name, getattr(args, name)) for name in EXPORTS if getattr(args, name, None)]
    for name, _ in targets:
        EXPORTS[name].require()
    return targets


def load_checked(name: str | None, overrides: Sequence[str]) -> tuple[Model, ParsedModel]:
    """Load a model, apply ``--set`` overrides and check it against the installed kinds.

    An error in an overridden value names the ``--set`` option; any other
    error names the model file.
    """
    model = load_with_overrides(name, list(overrides))
    keys = [parse_override(text)[0] for text in overrides]
    try:
        parsed = parse_model(model)
    except ModelError as exc:
        for key in keys:
            if exc.where == key or exc.where.startswith(key + "."):
                raise exc.located("--set") from None
        if model.source:
            raise exc.located(model.source) from None
        raise
    return model, parsed


def fly_model(parsed: ParsedModel, *, quiet: bool = False) -> Any:
    """Integrate a checked model, showing progress on a terminal."""
    from ..flight.integrate import integrate

    with Progress("flying", quiet=quiet, unit="s") as bar:
        return integrate(parsed, progress=bar)


def default_stem(model: Model) -> str:
    """A file-name stem for a model's outputs: the model file's stem, else its name made safe."""
    if model.source and not model.source.startswith("<"):
        return Path(model.source).stem
    slug = re.sub(r"[^a-z0-9]+", "-", model.name.lower()).strip("-")
    return slug or "model"


def need_matplotlib() -> None:
    """Raise a clear error when matplotlib (for plots, graphs and reports) is missing."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        raise ThrustgraphError("plots, graphs and reports need matplotlib, which is not installed. Fix: pip "
                               "install 'thrustgraph[plots]' (or pip install matplotlib)") from None


def check_paths(files: Sequence[str | Path | None] = (), directories: Sequence[str | Path | None] = ()) -> None:
    """Refuse, before any work, an output that cannot be written (``None`` entries are options not given)."""
    check_outputs([f for f in files if f], [d for d in directories if d])


def write_outputs(outputs: Sequence[tuple[str | Path, str | bytes]], *, directories: Sequence[str | Path] = (),
                  say: bool = True) -> None:
    """Write prepared outputs all or none; print ``wrote PATH`` for each once all are in place.

    ``directories`` are output folders the user named (created when missing; their parent must exist).
    """
    write_all(outputs, directories=[d for d in directories if d])
    if say:
        for path, _ in outputs:
            print(f"wrote {path}")
