"""``thrustgraph calibrate``: fit model parameters to measured records and write a calibrated model file.

>>> split_condition("run2.csv:components.bottle.fill=0.3", ["run1.csv", "run2.csv"])
('run2.csv', 'components.bottle.fill', 0.3)
"""

from __future__ import annotations

import argparse
from typing import Any, Sequence

from . import SUMMARIES
from ..base.errors import ModelError
from .common import add_set_option, load_with_overrides, parse_override
from .compare import add_record_options, check_plot_names, mapping_from, parse_pair, prepared, read_records
from .outputs import check_paths, write_outputs

NAME = "calibrate"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("model", help="model file (TOML) or the name of a bundled scenario; its values are the start")
    p.add_argument("records", nargs="+", metavar="RECORD",
                   help="measured records (CSV with units in the headers), fitted all at once")
    p.add_argument("--fit", action="append", default=[], metavar="PATH=LOW..HIGH",
                   help='a parameter to fit and its bounds, e.g. --fit components.neck.discharge_coefficient=0.5..1.0 '
                        '--fit "components.bottle.gauge_pressure=4 bar..6 bar" (repeatable; at least one)')
    p.add_argument("--out", required=True, metavar="FILE",
                   help="write the calibrated model here (written only when the fit succeeds)")
    add_set_option(p)
    p.add_argument("--condition", action="append", default=[], metavar="RECORD:KEY=VALUE",
                   help='a setting that holds only for the test in RECORD, e.g. '
                        '--condition "run2.csv:components.bottle.gauge_pressure=6 bar" (repeatable)')
    add_record_options(p)
    fit = p.add_argument_group("the fit")
    fit.add_argument("--fit-start-time", metavar="BOUND",
                     help='also fit a correction of each record\'s start time within +-BOUND, e.g. "2 ms" (a level '
                          "trigger places a sudden release only to within a sample)")
    fit.add_argument("--weight", action="append", default=[], metavar="SIGNAL=NUMBER",
                     help="relative weight of a compared signal (default 1), e.g. --weight bottle.pressure=0.5")
    fit.add_argument("--scale-by", choices=("range", "noise"), default="range",
                     help="divide each signal's residual by its measured range (default), or by its own residual "
                          "spread after a first fit (noise: gives each signal equal statistical weight)")
    fit.add_argument("--confidence", type=float, default=0.95, metavar="LEVEL",
                     help="confidence level of the reported intervals (default 0.95)")
    fit.add_argument("--max-iterations", type=int, default=60, metavar="N",
                     help="most residual evaluations the solver may use before the fit is refused (default 60)")
    out = p.add_argument_group("output")
    out.add_argument("--report", metavar="FILE", help="write the fit (values, intervals, correlation) to JSON")
    out.add_argument("--plot", action="append", default=[], metavar="FILE",
                     help="write overlay and residual plots of the calibrated model (.png or .svg; repeatable)")
    out.add_argument("--quiet", action="store_true", help="no progress line on stderr")


def split_condition(text: str, records: Sequence[str]) -> tuple[str, str, Any]:
    """Split ``RECORD:KEY=VALUE`` into the record, the key path and the value."""
    for rec in sorted(records, key=len, reverse=True):
        if text.startswith(rec + ":"):
            key, value = parse_override(text[len(rec) + 1:])
            return rec, key, value
    raise ModelError(f"--condition {text}", "does not start with one of the records and a colon",
                     f"write RECORD:KEY=VALUE with RECORD one of {', '.join(records)}")


def load_model_set(model: Any, key: str, value: Any, text: str) -> None:
    """Set a --set value on the model, an error naming the option."""
    try:
        model.set(key, value)
    except ModelError as exc:
        raise exc.located(f"--set {text}") from None


def main(args: argparse.Namespace) -> int:
    from ..measured.calibrate import FitParameter, MeasuredRun, calibrate, compare_runs
    from ..measured.compare import plot_format, render_comparison
    from ..models.model import parse_model
    from ..models.modelfile import dumps_model, loads_model

    check_plot_names(args.plot)
    if args.max_iterations < 1:
        raise ModelError("--max-iterations", f"must be at least 1, got {args.max_iterations}",
                         "allow the solver some evaluations, e.g. --max-iterations 60 (the default)")
    if not 0.0 < args.confidence < 1.0:
        raise ModelError("--confidence", f"must be a level between 0 and 1, got {args.confidence:g}", "use e.g. 0.95")
    check_paths([args.out, args.report, *args.plot])   # before fitting: a bad path costs nothing
    if not args.fit:
        raise ModelError("--fit", "no parameter to fit",
                         "name one with its bounds, e.g. --fit components.neck.discharge_coefficient=0.5..1.0")
    # The model as its file has it is what the calibrated model starts from. A --set of a fitted parameter is its
    # starting value; any other --set is a condition of the tests (the stand's mount = "held"): applied to every
    # record's flights like --condition, recorded with the records, and kept out of the written model.
    model = load_with_overrides(args.model, [])
    fits = [FitParameter.parse(t) for t in args.fit]
    fitted = {fp.path for fp in fits}
    stand: dict[str, Any] = {}
    for text in args.overrides:
        key, value = parse_override(text)
        if key in fitted:
            load_model_set(model, key, value, text)
        else:
            stand[key] = value
    weights: dict[str, float] = {}
    for text in args.weight:
        name, raw = parse_pair(text, "--weight")
        try:
            weights[name] = float(raw)
        except ValueError:
            raise ModelError(f"--weight {text}", f"{raw!r} is not a number", "write e.g. --weight thrust=2") from None
    mapping = mapping_from(args, weights)
    named = {c.signal for c in mapping} | {c.column for c in mapping}
    for name in weights:
        if name not in named:
            raise ModelError(f"--weight {name}", "names no mapped signal or column", "weigh a signal given with --map")
    settings: dict[str, dict[str, Any]] = {r: dict(stand) for r in args.records}
    for text in args.condition:
        rec, key, value = split_condition(text, args.records)
        settings[rec][key] = value
    records = read_records(args.records, args)
    runs = []
    for path, record in zip(args.records, records):
        m = model.copy()
        for key, value in settings[path].items():
            m.set(key, value)
        _, rec = prepared(m, record, mapping, args)
        runs.append(MeasuredRun(rec, mapping, settings=settings[path], start=args.window_start, end=args.window_end))

    cal = calibrate(model, runs, fits, confidence=args.confidence, max_iterations=args.max_iterations,
                    progress=not args.quiet, scale=args.scale_by, start_time_bound=args.fit_start_time)
    calibrated = cal.calibrated_model()
    text = dumps_model(calibrated)
    loads_model(text, source=args.out)  # it must read back before it is written
    print(f"thrustgraph: calibrating {model.name}")
    print()
    print(cal.report())
    if stand:
        shown = ", ".join(f"{k} = {v!r}" if isinstance(v, str) else f"{k} = {v}" for k, v in stand.items())
        print()
        print(f"Test conditions (--set) applied to every record and not written into {args.out}: {shown}. They are "
              f"recorded with each record in its [calibration] table; the calibrated model flies as its file "
              f"says otherwise.")
    outputs: list[tuple[str, Any]] = [(args.out, text)]
    if args.report:
        outputs.append((args.report, cal.to_json()))
    if args.plot:
        comps = compare_runs(calibrated, cal.runs)
        title = f"{model.name} calibrated: prediction against measurement"
        outputs += [(path, render_comparison(comps, plot_format(path), title=title)) for path in args.plot]
    write_outputs(outputs)   # the model, the report and the plots: all or none
    cautions = parse_model(calibrated).cautions()
    if cautions:
        print()
        print("Cautions")
        for c in cautions:
            print(f"  ! {c}")
    return 0
