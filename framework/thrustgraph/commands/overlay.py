"""``thrustgraph overlay``: several runs in one set of plots and one table of outcome differences.

A run is a model (a file or a bundled scenario's name, flown now), a variant
of the first model (``--variant "KEY=VALUE; KEY=VALUE"``), a saved result
(the CSV, JSON or Parquet ``thrustgraph export`` wrote, with its outcomes) or a measured record
(a CSV whose headers carry units; ``--map COLUMN=SIGNAL`` says what its
columns are, as for ``thrustgraph compare``). The first run is the reference
of the differences. Everything is read and checked before the first flight,
and the files are written all or none (:mod:`thrustgraph.base.outputfiles`).

>>> variant_settings("components.bottle.fill=0.4; components.bottle.gauge_pressure=5 bar")
[('components.bottle.fill', 0.4), ('components.bottle.gauge_pressure', '5 bar')]
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from . import SUMMARIES
from ..base.errors import ModelError
from ..outputs.plotkinds import IMAGE_FORMATS, OVERLAY, names
from ..measured.records import read_record, shift
from ..kinds.displayunits import using
from .common import add_set_option, add_units_option, parse_override, units_choice
from .compare import mapping_from
from .outputs import add_quiet_option, check_paths, default_stem, fly_model, load_checked, need_matplotlib, \
    write_outputs

__all__ = ["add_arguments", "main", "variant_settings"]

NAME = "overlay"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("runs", nargs="+", metavar="RUN",
                   help="a model file or bundled scenario (flown), a saved result (the CSV, JSON or Parquet of "
                        "thrustgraph export) or a measured record (CSV with units in its headers); the first is the "
                        "reference")
    add_set_option(p)
    p.add_argument("--variant", action="append", default=[], metavar="SETTINGS",
                   help='one more run: the first model with these changes, e.g. --variant '
                        '"components.bottle.fill=0.4; components.bottle.gauge_pressure=5 bar" (repeatable)')
    r = p.add_argument_group("measured records")
    r.add_argument("--map", dest="maps", action="append", default=[], metavar="COLUMN=SIGNAL",
                   help="draw record column COLUMN as signal SIGNAL, e.g. --map load=thrust (repeatable)")
    r.add_argument("--gauge", action="append", default=[], metavar="COLUMN",
                   help="the pressure in COLUMN is gauge: the first prediction's ambient pressure is added")
    r.add_argument("--absolute", action="append", default=[], metavar="COLUMN",
                   help="the pressure in COLUMN is absolute")
    r.add_argument("--time-column", default="time", metavar="NAME", help="name of the time column (default: time)")
    r.add_argument("--start-at", metavar="TIME",
                   help='record time of the release (the model\'s t = 0) in the measured records, e.g. "1.25 s"')
    o = p.add_argument_group("output")
    o.add_argument("--table", metavar="FILE", help="write the table of outcome differences to FILE (CSV, SI units)")
    o.add_argument("--plots", metavar="DIR", help="draw the overlay plots into DIR (OVERLAY-NAME.png)")
    o.add_argument("--format", choices=IMAGE_FORMATS + ("both",), default="png",
                   help=f"image format of the plots: {', '.join(IMAGE_FORMATS)} or both (default png)")
    o.add_argument("--only", action="append", choices=names(OVERLAY), metavar="PLOT",
                   help=f"draw only this plot (repeatable): {', '.join(names(OVERLAY))}")
    add_units_option(p)
    add_quiet_option(p)


def variant_settings(text: str) -> list[tuple[str, Any]]:
    """The ``KEY=VALUE`` settings of one ``--variant``, separated by ``;``."""
    parts = [s.strip() for s in text.split(";") if s.strip()]
    if not parts:
        raise ModelError(f"--variant {text!r}", "names no setting",
                         'write e.g. --variant "components.bottle.fill=0.4"')
    return [parse_override(s) for s in parts]


def _is_record(name: str) -> bool:
    """A record or a saved result (read as a record), not a model: a CSV, JSON or Parquet file."""
    return name.lower().endswith((".csv", ".json", ".parquet"))


def main(args: argparse.Namespace) -> int:
    from ..measured.overlay import Overlay, mapped_columns, run_of_record, run_of_result, unique_labels
    from ..base.units import to_si

    formats = IMAGE_FORMATS if args.format == "both" else (args.format,)
    if args.plots:
        need_matplotlib()
    check_paths([args.table], [args.plots])      # before any work
    # read and check everything before the first flight
    planned: list[tuple[str, Any]] = []          # ("record", Record) or ("model", (label, Model, parsed))
    first_model: str | None = None
    first_parsed: Any = None
    for name in args.runs:
        if _is_record(name):
            planned.append(("record", read_record(name, time_column=args.time_column)))
        else:
            model, parsed = load_checked(name, args.overrides)
            first_model = first_model or name
            first_parsed = first_parsed or parsed
            planned.append(("model", (default_stem(model), model, parsed)))
    for text in args.variant:
        if first_model is None:
            raise ModelError(f"--variant {text!r}", "there is no model to vary: every run is a record or a saved result",
                             "name a model file or bundled scenario among the runs")
        settings = variant_settings(text)
        model, parsed = load_checked(first_model, list(args.overrides) + [f"{k}={_toml(v)}" for k, v in settings])
        short = "; ".join(f"{key.rsplit('.', 1)[-1]}={value}" for key, value in settings)
        label = f"{default_stem(model)} ({short})"
        planned.append(("model", (label, model, parsed)))
    choice = units_choice(args, first_parsed)    # --units, else the first model's [run] units
    measured = [rec for kind, rec in planned if kind == "record" and not rec.exported]
    mapping = mapping_from(args) if measured else ()
    if args.maps and not measured:
        raise ModelError("--map", "there is no measured record among the runs", "leave out --map, or add a record")
    for rec in measured:                       # every record's mapping checked before the first flight
        gauge = [c.column for c in mapped_columns(rec, mapping) if c.pressure == "gauge"]
        if gauge and not any(kind == "model" or item.exported for kind, item in planned):
            raise ModelError(f"{rec.source}: column {gauge[0]!r}", "is a gauge pressure, but no predicted run "
                             "gives the ambient pressure to make it absolute",
                             "overlay it with a model or a saved result, or mark the column --absolute")
    if args.start_at:
        start = to_si(args.start_at, "s", where="--start-at")
        ids = {id(r) for r in measured}
        planned = [(k, shift(v, start, f"model t = 0 at record time {args.start_at}")
                    if k == "record" and id(v) in ids else v) for k, v in planned]
    labels = unique_labels([Path(v.source).name if k == "record" else v[0] for k, v in planned])
    # fly, then build the runs in the order given
    runs: list[Any] = [None] * len(planned)
    for i, (kind, item) in enumerate(planned):
        if kind == "model":
            label, model, parsed = item
            result = fly_model(parsed, quiet=args.quiet)
            runs[i] = run_of_result(result, labels[i], source=model.source or label)
        elif item.exported:
            runs[i] = run_of_record(item, labels[i])
    ambient = Overlay(tuple(r for r in runs if r is not None)).ambient() if any(runs) else None
    for i, (kind, item) in enumerate(planned):
        if runs[i] is None:
            runs[i] = run_of_record(item, labels[i], mapping, ambient=ambient)
    overlay = Overlay(tuple(runs))
    print(f"thrustgraph: overlay of {len(runs)} runs (the first is the reference)")
    for r in overlay.runs:
        print(f"  {r.label}: {r.kind}, {r.source}")
    print()
    outputs: list[tuple[Any, Any]] = []
    with using(choice):       # the table printed and the plots in the units of choice; the CSV table stays SI
        print(overlay.format_table())
        if args.table:
            outputs.append((args.table, overlay.to_csv()))
        if args.plots:
            from ..outputs.overlayplots import overlay_figures, render

            outputs += [(Path(args.plots) / f"{n}.{fmt}", render(fig, fmt))
                        for n, fig in overlay_figures(overlay, args.only).items() for fmt in formats]
    write_outputs(outputs, directories=[args.plots])
    return 0


def _toml(value: Any) -> str:
    """A value parsed from a setting, written back as ``--set`` reads it."""
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return "true" if value else "false"
    return repr(value)

