"""``thrustgraph export``: fly a model and write its results in the export formats (CSV, JSON, Parquet...).

The formats, their options (``--NAME FILE``) and what each file holds are
those of the export registry (:mod:`thrustgraph.outputs.exportformats`). CSV holds
every signal and every ledger term per output time, with the unit in each
header and ``#`` lines first naming the tool version, the plugin versions and
the model hash; JSON the summary, phases, events, audits, cautions, the
same provenance and the CSV's columns (``series``: name, unit, values); Parquet (with pyarrow) the CSV's columns with units in the
field metadata and the provenance in the schema metadata.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from . import SUMMARIES
from ..kinds.displayunits import using
from ..base.errors import ThrustgraphError
from ..outputs.exportformats import EXPORTS
from .common import add_model_argument, add_out_dir_option, add_set_option, add_units_option, units_choice
from .outputs import (add_export_options, add_quiet_option, check_paths, default_stem, export_targets, fly_model,
                      load_checked, write_outputs)

NAME = "export"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    add_set_option(p)
    add_export_options(p)
    add_out_dir_option(p, f"write STEM{', STEM'.join(f.suffix for f in EXPORTS.values())} into DIR (a format "
                          "whose package is not installed is left out), STEM being the model file's name")
    add_units_option(p)
    add_quiet_option(p)


def main(args: argparse.Namespace) -> int:
    named = export_targets(args)
    if not (named or args.out_dir):
        raise ThrustgraphError("export: name at least one output. Fix: add "
                               f"{', '.join(f'--{name} FILE' for name in EXPORTS)} or --out-dir DIR")
    model, parsed = load_checked(args.model, args.overrides)
    choice = units_choice(args, parsed)
    targets: list[tuple[str, str | Path]] = []
    if args.out_dir:
        stem = Path(args.out_dir) / default_stem(model)
        for f in EXPORTS.values():
            if f.available():
                targets.append((f.name, stem.with_suffix(f.suffix)))
            else:
                print(f"{f.needs} is not installed: no {f.title} file ({f.install_hint()})")
    targets += named
    check_paths([path for _, path in targets], [args.out_dir])   # before flying
    result = fly_model(parsed, quiet=args.quiet)
    with using(choice):      # every file in the units of choice (the headers and metadata say which)
        outputs = [(path, EXPORTS[name].render(result)) for name, path in targets]  # all in memory before writing
    write_outputs(outputs, directories=[args.out_dir])
    if not result.success:
        print(f"note: {result.message}")
    return 0
