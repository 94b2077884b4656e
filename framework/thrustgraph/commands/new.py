"""``thrustgraph new``: start a model file from one of the bundled starter scenarios.

The scenario's text is copied as it is (comments included); ``--name``
changes the model's name line. The file is checked after writing and an
existing file is never replaced unless ``--force`` is given.
"""

from __future__ import annotations

import argparse
import difflib
import os
import re

from . import SUMMARIES
from ..base.errors import ModelError
from ..models.modelfile import bundled_models, default_model_path, dumps_model, load_model, loads_model
from .outputs import check_paths, write_outputs

NAME = "new"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", nargs="?", help="the model file to create, e.g. my-rocket.toml")
    p.add_argument("--from", dest="scenario", default=default_model_path().stem, metavar="SCENARIO",
                   help="the starter scenario to copy (default: %(default)s)")
    p.add_argument("--name", help="the new model's name (default: the scenario's)")
    p.add_argument("--list", action="store_true", help="list the bundled scenarios and exit")
    p.add_argument("--force", action="store_true", help="replace the file if it exists")


def _first_line(text: str, width: int = 90) -> str:
    """The first sentence of a description, shortened to ``width`` characters.

    >>> _first_line("Demo scenario: a bottle. More text.")
    'Demo scenario: a bottle.'
    """
    flat = " ".join(text.split())
    end = flat.find(". ")
    first = flat if end < 0 else flat[:end + 1]
    return first if len(first) <= width else first[:width - 3].rstrip() + "..."


def main(args: argparse.Namespace) -> int:
    scenarios = bundled_models()
    if args.list:
        print("Bundled starter scenarios (thrustgraph new FILE --from SCENARIO):")
        width = max(len(k) for k in scenarios)
        for stem, path in scenarios.items():
            m = load_model(path)
            print(f"  {stem:<{width}s}  {m.name}: {_first_line(m.description)}")
        return 0
    if not args.file:
        raise ModelError("thrustgraph new", "no file name given", "write e.g. thrustgraph new my-rocket.toml")
    if args.scenario not in scenarios:
        close = difflib.get_close_matches(args.scenario, list(scenarios), n=1)
        hint = f"did you mean {close[0]!r}?" if close else f"bundled scenarios: {', '.join(scenarios)}"
        raise ModelError(f"--from {args.scenario}", "no such bundled scenario", hint)
    target = args.file
    if os.path.lexists(target) and not args.force:
        raise ModelError(target, "already exists; it was left as it is", "choose another name or add --force")
    check_paths([target])
    text = scenarios[args.scenario].read_text(encoding="utf-8")
    if args.name is not None:
        line = "name = " + dumps_model_name(args.name)
        new, count = re.subn(r'(?m)^name\s*=\s*"(?:[^"\\]|\\.)*"\s*$', lambda _: line, text, count=1)
        if count == 1 and loads_model(new, source=target).name == args.name:
            text = new
        else:  # the scenario's name line is not a plain one: write the model out instead
            m = loads_model(text, source=target)
            m.name = args.name
            text = dumps_model(m)
    m = loads_model(text, source=target)  # what is written must load
    write_outputs([(target, text)], say=False)
    print(f"wrote {target} (from the scenario {args.scenario!r}, model {m.name!r}). Edit it, then run: "
          f"thrustgraph check {target}")
    return 0


def dumps_model_name(name: str) -> str:
    """The TOML text of a name value.

    >>> dumps_model_name('my "best" rocket')
    '"my \\\\"best\\\\" rocket"'
    """
    import tomli_w

    return tomli_w.dumps({"v": name})[4:].rstrip("\n")
