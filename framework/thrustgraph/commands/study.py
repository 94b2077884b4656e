"""``thrustgraph study``: sweeps, optimisation, dispersion and sensitivities of a model, on any engine.

The study comes from the model's ``[study]`` table, from the options, or
both (options replace what the table says for the same item). The table of
designs is written as CSV (``--table``) and the plots into a directory
(``--plots``); every output path is checked before the first design flies.
Ctrl-C or SIGTERM stops the study and still writes the designs already
flown (the rest are marked "not run"); the exit status is then 130 (143 for
SIGTERM). A study stopped before any design flew writes nothing, so an
earlier table at the same path is kept, never replaced by an empty one.
docs/studies.md describes the options and the ``[study]`` table.
"""

from __future__ import annotations

import argparse
import math
import os
import sys
from dataclasses import replace
from typing import Any

from . import SUMMARIES
from ..base.errors import ModelError
from ..base.interrupts import exit_status
from ..models.model import ParsedModel
from ..balance.outcomes import OUTCOMES, check_outputs, default_outputs
from ..studies.studykinds import STUDY_KINDS, StudyRun, lookup, read_study
from ..studies.studyspec import Limit, Spread, StudyDefinition, Vary
from ..studies.tablestream import StreamedTable, TableStream
from ..base.outputfiles import write_all
from .common import add_model_argument, add_set_option
from .outputs import add_quiet_option, check_paths, load_checked, need_matplotlib

NAME = "study"
HELP = SUMMARIES[NAME]


def add_arguments(p: argparse.ArgumentParser) -> None:
    add_model_argument(p)
    p.add_argument("kind", nargs="?", default=None, choices=tuple(STUDY_KINDS) + (None,), metavar="KIND",
                   help=f"which study: {', '.join(STUDY_KINDS)} (default: the one in the model's [study] table)")
    add_set_option(p)
    g = p.add_argument_group("what to vary")
    g.add_argument("--vary", action="append", default=[], metavar="PATH=VALUES",
                   help='a parameter and its values: "components.bottle.fill=0.1..0.6 in 11" (a sweep), '
                        '"components.bottle.gauge_pressure=3 bar, 4 bar", bounds "PATH=LOW..HIGH" (an '
                        "optimisation) or just PATH (a sensitivity); repeatable")
    g.add_argument("--combine", choices=("grid", "list"), default=None,
                   help="sweep every combination (grid, the default) or the n-th values together (list)")
    g.add_argument("--spread", action="append", default=[], metavar="PATH=DISTRIBUTION",
                   help='a dispersion: "environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)", '
                        '"launch.elevation=normal(sd=1 deg)", "PATH=uniform(LOW, HIGH)", '
                        '"PATH=triangular(LOW, MODE, HIGH)"; repeatable')
    g.add_argument("--samples", type=int, default=None, help="designs drawn for a dispersion (default 1000)")
    g.add_argument("--seed", type=int, default=None, help="seed of the dispersion's random draws (default 0)")
    o = g.add_mutually_exclusive_group()
    o.add_argument("--maximise", "--maximize", metavar="OUTCOME", default=None, help="optimise: the outcome to raise")
    o.add_argument("--minimise", "--minimize", metavar="OUTCOME", default=None, help="optimise: the outcome to lower")
    g.add_argument("--limit", action="append", default=[], metavar="LIMIT",
                   help='optimise subject to "peak_acceleration <= 60 g0", "guide_exit_speed >= 12 m/s", '
                        '"peak_vessel_pressure <= 6 bar"; repeatable')
    g.add_argument("--method", default=None, help="optimisation method: slsqp (default) or differential-evolution")
    g.add_argument("--start", choices=("grid", "model"), default=None,
                   help="SLSQP starts from the best point of a coarse grid (default) or the model's values")
    g.add_argument("--step", type=float, default=None,
                   help="sensitivity: finite-difference step as a fraction of each value (default 0.001)")
    g.add_argument("--outputs", default=None, metavar="NAMES",
                   help=f"outcome columns, comma separated, of: {', '.join(OUTCOMES)} (default: "
                        f"{', '.join(default_outputs())})")
    r = p.add_argument_group("where to fly")
    r.add_argument("--engine", default="auto", choices=("auto", "serial", "processes", "dask"),
                   help="this process (serial), a pool of local processes (processes) or a Dask cluster (dask); "
                        "auto picks a pool for mid-size studies")
    r.add_argument("--flights", default="auto", choices=("auto", "single", "ensemble"),
                   help="fly each design alone (single) or each chunk as one vectorised ensemble; auto uses the "
                        "ensemble from a few hundred designs when the model's devices support it")
    r.add_argument("--workers", type=int, default=None, help="processes of the local pool (default: one per core)")
    r.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="address of the Dask scheduler, e.g. tcp://10.0.0.5:8786 (implies --engine dask)")
    r.add_argument("--wait", type=float, default=10.0, metavar="SECONDS",
                   help="how long to wait for the Dask scheduler before giving up (default 10 s)")
    r.add_argument("--chunk", type=int, default=None, metavar="N", help="designs per chunk sent to a worker")
    w = p.add_argument_group("results")
    w.add_argument("--table", metavar="FILE", help="write every design and its outcomes to FILE (CSV)")
    w.add_argument("--summary", metavar="FILE",
                   help="write the study's summary to FILE (CSV): sensitivities, dispersion statistics")
    w.add_argument("--plots", metavar="DIR", help="draw the study's plots (PNG) into DIR")
    add_quiet_option(p)


def _definition(args: argparse.Namespace, model: Any) -> StudyDefinition:
    kind = args.kind
    if kind is None and not model.study:
        guess = ("sweep" if args.vary and not (args.maximise or args.minimise) else
                 "optimise" if (args.maximise or args.minimise) else "dispersion" if args.spread else None)
        if guess is None:
            raise ModelError("study", "the model has no [study] table and the command names no study",
                             "say which study, e.g. 'thrustgraph study MODEL sweep --vary "
                             "\"components.bottle.fill=0.1..0.6 in 11\"' (docs/studies.md)")
        kind = guess
    base = read_study(model.study, kind, source=model.source or "")
    if base is None:
        raise ModelError(f"{model.source}: study" if model.source else "study", "holds no study",
                         "add e.g. [study.sweep] or name the study on the command line")
    kw: dict[str, Any] = {}
    if args.vary:
        kw["vary"] = tuple(Vary.parse(v) for v in args.vary)
    if args.combine:
        kw["combine"] = args.combine
    if args.spread:
        kw["spreads"] = tuple(Spread.parse(s) for s in args.spread)
    if args.samples is not None:
        if args.samples < 1:
            raise ModelError("--samples", f"must be at least 1, got {args.samples}", "use e.g. --samples 1000")
        kw["samples"] = args.samples
    if args.seed is not None:
        if args.seed < 0:
            raise ModelError("--seed", f"must be at least 0, got {args.seed}", "use e.g. --seed 1")
        kw["seed"] = args.seed
    if args.maximise or args.minimise:
        name = args.maximise or args.minimise
        check_outputs([name], where="--maximise" if args.maximise else "--minimise")
        kw["objective"], kw["maximise"] = name, bool(args.maximise)
    if args.limit:
        kw["limits"] = tuple(Limit.parse(s) for s in args.limit)
    if args.method:
        kw["method"] = args.method
    if args.step is not None:
        if not 0.0 < args.step < 0.5:
            raise ModelError("--step", f"must be a fraction between 0 and 0.5, got {args.step}", "use e.g. 0.001")
        kw["step"] = args.step
    if args.outputs:
        kw["outputs"] = tuple(check_outputs([s.strip() for s in args.outputs.split(",") if s.strip()],
                                            where="--outputs"))
    if args.start:
        kw["start"] = args.start
    return replace(base, **kw)


def _run_options(args: argparse.Namespace) -> dict[str, Any]:
    """Where and how to fly (options of :func:`thrustgraph.studies.studies.evaluate`), checked."""
    engine = "dask" if args.scheduler and args.engine in ("auto", "dask") else args.engine
    if engine == "dask" and not args.scheduler:
        raise ModelError("--engine dask", "needs the address of a Dask scheduler",
                         "add --scheduler tcp://HOST:8786 (start one with 'dask scheduler')")
    if args.workers is not None and args.workers < 1:
        raise ModelError("--workers", f"must be at least 1, got {args.workers}", "give a positive number")
    if args.chunk is not None and args.chunk < 1:
        raise ModelError("--chunk", f"must be at least 1, got {args.chunk}", "give a positive number")
    if not (math.isfinite(args.wait) and args.wait > 0):
        raise ModelError("--wait", f"must be a positive number of seconds, got {args.wait:g}", "use e.g. --wait 10")
    return dict(engine=engine, flights=args.flights, workers=args.workers, scheduler=args.scheduler,
                timeout=args.wait, chunk_size=args.chunk, quiet=args.quiet)


def main(args: argparse.Namespace) -> int:
    if args.kind is None and args.model in STUDY_KINDS and not os.path.exists(args.model):
        args.kind, args.model = args.model, None      # "thrustgraph study sweep ...": the bundled model
    if args.plots:
        need_matplotlib()
    model, parsed = load_checked(args.model, args.overrides)
    d = _definition(args, model)
    kind = lookup(d.kind)
    run = _run_options(args)
    if args.summary and not kind.summary:
        raise ModelError("--summary", f"a {d.kind} has no summary table", "use --table for its designs")
    check_paths([args.table, args.summary], [args.plots])   # before the first design flies
    if args.table and kind.streams:   # rows go to the file as they fly; it is put in place with the rest
        run["table"] = TableStream(args.table)
    done = kind.run(model, d, run)
    _print_study(done, d, parsed, run["engine"], args.flights)
    table = done.table
    nothing_flew = table.interrupted and table.counts["ok"] == 0
    _write_results(done, args, nothing_flew)
    cautions = parsed.cautions()
    if cautions:
        print()
        print("Cautions")
        for c in cautions:
            print(f"  ! {c}")
    if table.interrupted:
        flown = len(table) - table.counts["not run"]
        where = f"; wrote them to {args.table}" if args.table and not nothing_flew else ""
        print(f"thrustgraph: interrupted: {flown} of {len(table)} designs were flown{where}", file=sys.stderr)
        return exit_status()
    return 0


def _print_study(done: StudyRun, d: StudyDefinition, parsed: ParsedModel, engine: str, flights: str) -> None:
    table = done.table
    print(f"thrustgraph study: {d.kind} of {parsed.model.name!r}")
    print(f"  {len(table)} designs ({table.counts['ok']} flew, {table.counts['screened']} screened) on "
          f"{getattr(table, 'engine', '') or engine}, flights {getattr(table, 'flights', '') or flights}")
    print()
    print(done.text)
    screened = table.screened()[:8]
    count = table.counts["screened"]
    if count:
        print()
        print(f"Screened designs ({count}):")
        for i, note in screened:
            vals = ", ".join(p.text(table.x[i, j]) for j, p in enumerate(table.params))
            print(f"  design {i} ({vals}): {note}")
        if count > len(screened):
            print(f"  ... and {count - len(screened)} more (see the table)")


def _write_results(done: StudyRun, args: argparse.Namespace, nothing_flew: bool) -> None:
    """The table, the summary and the plots: all or none; none when no design flew (an empty table must not
    replace a good one from an earlier run). A streamed table is already staged: it is put in place with the
    rest."""
    streamed = isinstance(done.table, StreamedTable)
    outputs: list[tuple[str, Any]] = []
    if args.table and not streamed:
        outputs.append((args.table, done.table.to_csv()))
    if args.summary and done.summary_csv is not None:
        outputs.append((args.summary, done.summary_csv))
    if args.plots:
        from ..outputs.studyplots import render_study_plots

        outputs += render_study_plots(done.result, args.plots)
    print()
    if not nothing_flew:
        files = [done.table.file] if streamed and done.table.file is not None else []
        if streamed:
            done.table.file = None    # write_all owns it now: it puts it in place or drops it
        write_all(outputs, directories=[args.plots] if args.plots else [], streams=files)
        for path in ([args.table] if files else []) + [p for p, _ in outputs]:
            print(f"wrote {path}")
        return
    if streamed:
        done.table.discard()
    shown = ([args.table] if streamed else []) + [p for p, _ in outputs]
    if shown:
        print(f"thrustgraph: no design flew before the study was stopped: nothing was written (an existing "
              f"{', '.join(str(p) for p in shown[:2])}{' ...' if len(shown) > 2 else ''} was left as "
              "it was)", file=sys.stderr)
