"""``thrustgraph compare``: a model's prediction against a measured record, with metrics and plots.

The record options defined here (column mapping, gauge or absolute pressure,
alignment, resampling, filtering, the window) are shared with
``thrustgraph calibrate``.

>>> parse_pair("load=thrust", "--map")
('load', 'thrust')
"""

from __future__ import annotations

import argparse
from typing import Any, Sequence

from . import SUMMARIES
from ..base.errors import ModelError
from ..models.model import Model
from ..measured.records import ColumnMap, Record, Trigger, read_record, resample
from .common import add_set_option, load_with_overrides
from .outputs import check_paths, write_outputs

NAME = "compare"
HELP = SUMMARIES[NAME]


def add_record_options(p: argparse.ArgumentParser) -> None:
    """Options that say how to read a record and what to compare it with."""
    g = p.add_argument_group("reading the record")
    g.add_argument("--map", dest="maps", action="append", default=[], metavar="COLUMN=SIGNAL",
                   help="compare record column COLUMN with result signal SIGNAL, e.g. --map load=thrust "
                        "--map pressure=bottle.pressure (repeatable; at least one)")
    g.add_argument("--gauge", action="append", default=[], metavar="COLUMN",
                   help="the pressure in COLUMN is gauge (above the surroundings, what most transducers read); "
                        "the model's ambient pressure is added before comparing")
    g.add_argument("--absolute", action="append", default=[], metavar="COLUMN",
                   help="the pressure in COLUMN is absolute")
    g.add_argument("--time-column", default="time", metavar="NAME", help="name of the time column (default: time)")
    g.add_argument("--start-when", metavar="CONDITION",
                   help='align on the release: "COLUMN > LEVEL" or "COLUMN < LEVEL", e.g. "load > 5 N"; the first '
                        "crossing is put where the prediction crosses the same level (t = 0 for a column that is "
                        "not mapped)")
    g.add_argument("--start-at", metavar="TIME",
                   help='record time of the release (the model\'s t = 0), e.g. "1.25 s"')
    g.add_argument("--resample", metavar="INTERVAL", help='resample the record evenly, e.g. "1 ms"')
    g.add_argument("--lowpass", metavar="FREQUENCY",
                   help='zero-phase low-pass filter of the record (Butterworth, run forward and back), e.g. "80 Hz"')
    g.add_argument("--filter-order", type=int, default=4, metavar="N", help="order of the low-pass filter (default 4)")
    g.add_argument("--from", dest="window_start", metavar="TIME",
                   help="start of the comparison in model time (default: 0 s, the release)")
    g.add_argument("--until", dest="window_end", metavar="TIME",
                   help="end of the comparison in model time (default: the end of the record)")


def parse_pair(text: str, option: str) -> tuple[str, str]:
    """Split ``LEFT=RIGHT`` of an option, refusing an empty side."""
    if "=" not in text:
        raise ModelError(f"{option} {text}", "expected NAME=VALUE", f"write e.g. {option} load=thrust")
    left, right = (s.strip() for s in text.split("=", 1))
    if not left or not right:
        raise ModelError(f"{option} {text}", "one side is empty", f"write e.g. {option} load=thrust")
    return left, right


def mapping_from(args: argparse.Namespace, weights: dict[str, float] | None = None) -> tuple[ColumnMap, ...]:
    """The column mapping the options describe."""
    if not args.maps:
        raise ModelError("--map", "no record column is mapped to a signal",
                         "add e.g. --map load=thrust (record column load compared with the predicted thrust)")
    gauge, absolute = set(args.gauge), set(args.absolute)
    both = gauge & absolute
    if both:
        raise ModelError(f"--gauge {sorted(both)[0]}", "the column is marked both gauge and absolute", "choose one")
    out = []
    columns = []
    for text in args.maps:
        col, sig = parse_pair(text, "--map")
        if col in columns:
            raise ModelError(f"--map {text}", f"column {col!r} is mapped twice", "map each column once")
        columns.append(col)
        ref = "gauge" if col in gauge else "absolute" if col in absolute else None
        w = 1.0
        if weights:
            w = weights.get(sig, weights.get(col, 1.0))
        out.append(ColumnMap(col, sig, pressure=ref, weight=w))
    for col in (gauge | absolute) - set(columns):
        raise ModelError(f"--gauge/--absolute {col}", "names a column that is not mapped", f"add --map {col}=SIGNAL")
    return tuple(out)


def read_records(paths: Sequence[str], args: argparse.Namespace) -> list[Record]:
    """Read (and resample, if asked) the record files."""
    records = [read_record(p, time_column=args.time_column) for p in paths]
    if args.resample:
        records = [resample(r, args.resample) for r in records]
    return records


def alignment_from(args: argparse.Namespace) -> tuple[Any, Trigger | None]:
    if args.start_when and args.start_at:
        raise ModelError("--start-when/--start-at", "both were given", "align on a condition or on a time, not both")
    return args.start_at, Trigger.parse(args.start_when) if args.start_when else None


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("model", help="model file (TOML) or the name of a bundled scenario")
    p.add_argument("record", help="measured record: CSV whose headers carry units, e.g. \"time [s],load [lbf]\" "
                                  "(or a saved result: the CSV, JSON or Parquet of thrustgraph export)")
    add_set_option(p)
    add_record_options(p)
    out = p.add_argument_group("output")
    out.add_argument("--plot", action="append", default=[], metavar="FILE",
                     help="write overlay and residual plots (.png or .svg; repeatable)")
    out.add_argument("--json", metavar="FILE", help="write the metrics to JSON")


def prepared(model: Model, record: Record, mapping: tuple[ColumnMap, ...], args: argparse.Namespace):
    """Fly the model finely enough for the record, then filter and align the record on the prediction."""
    from ..measured.compare import model_for_records, prepare_record
    from ..flight.integrate import integrate

    start_at, trigger = alignment_from(args)
    result = integrate(model_for_records(model, [record]))
    rec = prepare_record(record, result, mapping, lowpass_cutoff=args.lowpass, filter_order=args.filter_order,
                         start_at=start_at, trigger=trigger)
    return result, rec


def check_plot_names(paths: Sequence[str]) -> None:
    """Refuse a plot file name that is neither .png nor .svg before any work is done."""
    for path in paths:
        if not path.lower().endswith((".png", ".svg")):
            raise ModelError(f"--plot {path}", "the plot file must end in .png or .svg", "name it e.g. stand.png")


def main(args: argparse.Namespace) -> int:
    from ..measured.compare import compare, plot_format, render_comparison

    check_plot_names(args.plot)
    check_paths([*args.plot, args.json])   # before flying: a bad path costs nothing
    model = load_with_overrides(args.model, args.overrides)
    mapping = mapping_from(args)
    record = read_records([args.record], args)[0]
    result, rec = prepared(model, record, mapping, args)
    comparison = compare(result, rec, mapping, start=args.window_start, end=args.window_end)
    print(f"thrustgraph: {model.name} against {args.record}")
    print()
    print(comparison.report())
    title = f"{model.name}: prediction against {rec.source}"
    outputs: list[tuple[str, Any]] = [(path, render_comparison(comparison, plot_format(path), title=title))
                                      for path in args.plot]
    if args.json:
        outputs.append((args.json, comparison.to_json()))
    write_outputs(outputs)
    if result.cautions:
        print()
        print("Cautions")
        for c in result.cautions:
            print(f"  ! {c}")
    return 0
