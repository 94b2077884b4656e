"""Design studies: sweeps, local sensitivities, bounded optimisation and dispersion, on any engine.

Every study is a table of designs: rows of parameter values (key paths of
the model, :mod:`thrustgraph.models.designs`) flown by :func:`evaluate` on an
engine (:mod:`thrustgraph.studies.engines`) and returned as a :class:`DesignTable` of
outcome values (:mod:`thrustgraph.balance.outcomes`). Designs that cannot fly (a
value outside its bounds, a combination a component refuses, no lift-off, an
integration failure) are screened out and say why in their row; they never
stop the study. Ctrl-C keeps the rows already flown (the table says how many).

Studies
-------
:func:`sweep`
    every combination (``combine="grid"``) or the n-th values together
    (``"list"``) of the varied parameters.
:func:`sensitivities`
    local derivatives of each outcome with respect to each parameter by
    central differences at the model's values (:class:`Sensitivity`).
:func:`thrustgraph.studies.optimisation.optimise`
    a bounded optimisation of one outcome with limits on others.
:func:`thrustgraph.studies.dispersion.disperse`
    a seeded Monte Carlo dispersion with statistics and the impact footprint.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> table = sweep(load_model(default_model_path()), ["components.bottle.fill=0.2..0.4 in 3"],
...               outputs=["apogee"], engine="serial", quiet=True)
>>> [round(float(v), 2) for v in table.column("apogee")]
[53.99, 54.8, 52.32]
>>> table.status.tolist()
['ok', 'ok', 'ok']
"""

from __future__ import annotations

import csv
import io
import math
import os
import sys
import time
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from ..flight.arraysystem import unsupported
from ..flight.assembly import assemble
from ..flight.ensemble import COMPUTED
from ..models.designs import DesignParameter, within_bounds
from .engines import FLIGHTS, ENGINES, ChunkRows, FlightTask, chunks, default_chunk_size, make_engine, idle_cores, usable_cores
from ..base.errors import ModelError
from ..base.frames import design_frame, sensitivity_frame
from ..base.limits import MAX_DESIGNS, check_count
from ..models.model import Model, ParsedModel, parse_model
from ..balance.outcomes import OUTCOMES, STATUS_NOT_RUN, STATUS_OK, STATUS_SCREENED, check_outputs, default_outputs
from ..base.outputfiles import atomic_write
from .studyprogress import StudyProgress
from .studyspec import Vary
from ..models.modelfile import default_model_path, load_model
from ..models.designs import bounds_text
from ..base.units import Q_

__all__ = ["DesignTable", "evaluate", "sweep", "sensitivities", "Sensitivity", "choose_engine", "run_options",
           "DEFAULT_OUTPUTS", "as_vary", "csv_head", "csv_columns", "csv_rows", "table_report", "fly_rows",
           "out_of_bounds", "bounds_note", "POOL_FROM_ENSEMBLE", "POOL_FROM_SINGLE", "POOL_IDLE_CORES"]

#: Outcomes a study reports when none are named (the registry's defaults; any other outcome can be named).
DEFAULT_OUTPUTS = default_outputs()

#: Keyword options every study passes on to :func:`evaluate`.
run_options = ("engine", "flights", "workers", "scheduler", "timeout", "chunk_size", "quiet", "stream", "rtol",
               "atol", "table")


def _fmt(x: float) -> str:
    return "" if not math.isfinite(x) else repr(float(x))


@dataclass
class DesignTable:
    """The designs of a study and what each gave.

    Fields
    ------
    kind : the study kind ("sweep", "dispersion", ...)
    params : the varied parameters, in column order
    outputs : outcome names, in column order
    x : design values, SI, shape (rows, parameters)
    values : outcome values, SI, shape (rows, outputs); NaN where not available
    status : per row "ok", "screened" or "not run"
    notes : per row, why a design was screened (or "")
    interrupted : the study was stopped (Ctrl-C) before every row was flown
    info : lines describing the study for the CSV head (model, seed, tolerances)
    engine, flights, seconds : how it ran (not written to the CSV, which depends only on the designs)
    """

    kind: str
    params: tuple[DesignParameter, ...]
    outputs: tuple[str, ...]
    x: np.ndarray
    values: np.ndarray
    status: np.ndarray
    notes: list[str]
    interrupted: bool = False
    info: dict[str, Any] = field(default_factory=dict)
    engine: str = ""
    flights: str = ""
    seconds: float = 0.0

    def __len__(self) -> int:
        return len(self.x)

    @property
    def ok(self) -> np.ndarray:
        """True for the rows that flew."""
        return self.status == STATUS_OK

    @property
    def counts(self) -> dict[str, int]:
        return {s: int(np.sum(self.status == s)) for s in (STATUS_OK, STATUS_SCREENED, STATUS_NOT_RUN)}

    def column(self, name: str) -> np.ndarray:
        """An outcome's values (SI) or a parameter's values (SI, by key path)."""
        if name in self.outputs:
            return self.values[:, self.outputs.index(name)]
        paths = [p.path for p in self.params]
        if name in paths:
            return self.x[:, paths.index(name)]
        raise ModelError(name, "is not a column of this study", f"columns: {', '.join(paths + list(self.outputs))}")

    def screened(self) -> list[tuple[int, str]]:
        """(row, reason) of every screened design."""
        return [(i, self.notes[i]) for i in np.flatnonzero(self.status == STATUS_SCREENED)]

    def to_csv(self) -> str:
        """The table as CSV text: a commented head, then one row per design.

        Parameters are in the units the study shows them in, outcomes in SI;
        every header names its unit in brackets (``[1]`` for a plain number).
        Values are written in full precision; empty cells are outcomes a
        design does not have. A table streamed to a file
        (:mod:`thrustgraph.studies.tablestream`) is written by the same functions, piece by piece:
        :func:`csv_head`, :func:`csv_columns`, :func:`csv_rows`.
        """
        return (csv_head(self.info, self.counts, len(self), self.interrupted)
                + csv_columns(self.params, self.outputs)
                + csv_rows(self.params, self.x, self.status, self.values, self.notes, 0))

    def to_pandas(self):
        """The designs as a pandas DataFrame (optional dependency ``pandas``): one row per design, the parameters
        and outcomes in SI, units in ``attrs["units"]`` (:func:`thrustgraph.base.frames.design_frame`)."""
        return design_frame(self, {o: OUTCOMES[o].unit for o in self.outputs})

    def write_csv(self, path: str | os.PathLike[str]) -> None:
        """Write :meth:`to_csv` atomically (a temporary file renamed into place)."""

        atomic_write(path, self.to_csv())

    def report(self) -> str:
        """A few lines for people: the range of each outcome (up to five) over the designs that flew, and where
        it is highest."""
        return table_report(self)


def csv_head(info: dict[str, Any], counts: dict[str, int], rows: int, interrupted: bool) -> str:
    """The commented head of a study's CSV table: what the study was, and how many rows flew."""
    lines = ["# thrustgraph design study\n"] + [f"# {k}: {v}\n" for k, v in info.items()]
    lines.append(f"# rows: {rows} ({counts['ok']} ok, {counts['screened']} screened, {counts['not run']} not run)\n")
    if interrupted:
        lines.append(f"# interrupted: {rows - counts['not run']} of {rows} designs were flown before the study was "
                     "stopped; the rest are marked 'not run'\n")
    return "".join(lines)


def csv_columns(params: Sequence[DesignParameter], outputs: Sequence[str]) -> str:
    """The header line of a study's CSV table: every column with its unit."""
    heads = ["design", "status"] + [p.header for p in params] + [OUTCOMES[o].header for o in outputs] + ["note"]
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(heads)
    return buf.getvalue()


def _cells(values: np.ndarray) -> list[str]:
    """:func:`_fmt` of every value of a column (full precision; empty where not finite)."""
    return [repr(v) if math.isfinite(v) else "" for v in np.asarray(values, dtype=float).tolist()]


def csv_rows(params: Sequence[DesignParameter], x: np.ndarray, status: Sequence[str], values: np.ndarray,
             notes: Sequence[str], first: int) -> str:
    """Rows of a study's CSV table, numbered from ``first``: design number, status, the parameters in the units
    the study shows them in, the outcomes in SI, the note (quoted only when it must be: a comma, a quote)."""
    buf = io.StringIO()
    n = len(x)
    shown = [_cells(np.atleast_1d(p.shown(x[:, j])) if n else np.zeros(0)) for j, p in enumerate(params)]
    outs = [_cells(values[:, k]) for k in range(values.shape[1])]
    csv.writer(buf, lineterminator="\n").writerows(
        zip(map(str, range(first, first + n)), map(str, status), *shown, *outs, notes))
    return buf.getvalue()


def table_report(table: Any) -> str:
    """A few lines for people about a table (in memory or streamed): the range of each outcome (up to five) over
    the designs that flew, and where it is highest."""
    ok = table.ok
    if not np.any(ok):
        return "No design flew."
    lines = []
    shown = [o for o in table.outputs if o not in ("impact_x", "impact_y", "launch_mass")][:5]
    width = max([20] + [len(OUTCOMES[o].label) for o in shown])
    for o in shown:
        v = np.where(ok, table.column(o), np.nan)
        if not np.any(np.isfinite(v)):
            continue
        i = int(np.nanargmax(v))
        spec = OUTCOMES[o]
        best = ", ".join(p.text(table.x[i, k]) for k, p in enumerate(table.params))
        lines.append(f"  {spec.label:<{width}s} {spec.shown(float(np.nanmin(v))):10.5g} .. "
                     f"{spec.shown(float(np.nanmax(v))):10.5g} {spec.display:<6s} highest at {best}")
    return "Outcome ranges over the designs that flew\n" + "\n".join(lines)


#: Designs from which ``--engine auto`` flies an ensemble study on a pool of local processes (one per core).
#: A pool's workers are forked in ~25 ms and fly one chunk each (the model sent once per worker), so a pool
#: adds one chunk's fixed cost (~0.25 s of CPU) per worker beside half the per-design work: on two idle cores it
#: pays from about 2,500 designs (CPU time: 1.16x at 2,500, 1.32x at 5,000, 1.43x at 10,000; docs/studies.md).
POOL_FROM_ENSEMBLE = 4000
#: The same for single flights (each design ~10-50 ms): a pool pays from a few dozen designs.
POOL_FROM_SINGLE = 32
#: Idle cores (:func:`~thrustgraph.studies.engines.idle_cores`: the idle share of the usable cores, watched for
#: 0.05 s while the study sleeps; the one-minute load average counted the study's own process) ``auto`` needs to start a pool: a second worker
#: pays only on a core nobody else wants. On a busy machine the extra workers only share the cores the study
#: had anyway (this machine's scheduler gives each session an equal share of a busy machine, however many
#: processes it runs), and each worker's extra chunk is work a single process does not do: under a load
#: average of 7 on 2 cores, a pool of 2 took 1.8x the wall time of one process for 10,000 designs (measured).
POOL_IDLE_CORES = 1.5
#: ``--flights auto`` flies the designs as one vectorised ensemble from this many (where the model and the outcomes
#: allow it), one at a time below. Measured (CPU time, one process, the same designs both ways, every bundled
#: model: benchmarks/small_studies.py): at 16 designs the ensemble took 0.17-0.79 of the single flights' time
#: (water-jet boat 0.17, bottle rocket 0.37, cold-gas track 0.79), at 8 designs 0.33-1.36, at 4 0.63-2.68. An
#: ensemble has a fixed cost (its arrays and traced lines; 0.05-1.8 s, the most for real-gas tanks), a design's
#: single flight costs 7-160 ms. It had been 200 since the ensemble's first version, when it paid from about a
#: thousand designs.
ENSEMBLE_FROM = 16
#: a study of this many designs or more that must fly one at a time says why when it starts
LARGE_STUDY = 200


def choose_engine(n: int, parsed: ParsedModel, engine: str = "auto", flights: str = "auto",
                  outputs: Sequence[str] | None = None) -> tuple[str, str]:
    """Resolve ``auto``: vectorised ensembles from :data:`ENSEMBLE_FROM` designs of a family they support (and
    outcomes they compute); a process pool from :data:`POOL_FROM_ENSEMBLE` ensemble designs (:data:`POOL_FROM_SINGLE`
    single flights) when more than one core is usable and the machine leaves :data:`POOL_IDLE_CORES` of them
    idle; this process otherwise."""
    if flights not in FLIGHTS + ("auto",):
        raise ModelError("--flights", f"unknown way to fly {flights!r}", f"choose one of {', '.join(FLIGHTS)}, auto")
    if engine not in ENGINES + ("auto",) and not hasattr(engine, "run"):
        make_engine(str(engine))  # raises the clear message
    if flights == "auto":
        flights = "single"
        if n >= ENSEMBLE_FROM:
            if unsupported(parsed) is None and all(o in COMPUTED for o in (outputs or DEFAULT_OUTPUTS)):
                flights = "ensemble"
    if engine == "auto":
        big = POOL_FROM_ENSEMBLE if flights == "ensemble" else POOL_FROM_SINGLE
        engine = "processes" if n >= big and usable_cores() > 1 and idle_cores() >= POOL_IDLE_CORES else "serial"
    return engine, flights


def evaluate(model: Model, params: Sequence[DesignParameter], x: Any, outputs: Sequence[str] | None = None, *,
             parsed: ParsedModel | None = None, kind: str = "designs", engine: Any = "auto", flights: str = "auto",
             workers: int | None = None, scheduler: Any = None, timeout: float = 10.0, chunk_size: int | None = None,
             quiet: bool = False, stream: Any = None, rtol: float | None = None, atol: float | None = None,
             info: dict[str, Any] | None = None, token: str | None = None, table: Any = None) -> Any:
    """Fly a table of designs and return their outcomes.

    Parameters
    ----------
    model : the base model (raw values)
    params : the varied parameters (resolved against ``parsed``)
    x : design values, SI, shape (rows, parameters)
    outputs : outcome names (default: all)
    engine : ``serial``, ``processes``, ``dask``, ``auto``, or an engine object (kept open: the caller closes it)
    flights : ``single``, ``ensemble`` or ``auto``
    workers : processes of the pool (default: one per core)
    scheduler, timeout : Dask scheduler address (or Client) and how long to wait for it, s
    chunk_size : designs per chunk (default: :func:`~thrustgraph.studies.engines.default_chunk_size`)
    quiet, stream : progress bar off / where to draw it (default standard error, only on a terminal)
    rtol, atol : integration tolerances (default: the model's ``[run]`` values)
    token : names the flight task, so that batches of one study (an optimiser's) reuse a kept process pool
    table : a :class:`~thrustgraph.studies.tablestream.TableStream`: the rows are written to its file in
        design order as the chunks come back, instead of being held, and a
        :class:`~thrustgraph.studies.tablestream.StreamedTable` is returned (the same table, the same
        statistics; memory stays flat however many designs there are)

    Returns
    -------
    DesignTable, or StreamedTable with ``table``
    """
    parsed = parsed or parse_model(model)
    assemble(parsed)  # the plugin contract, checked once for the study here, not once per design
    outputs = tuple(check_outputs(outputs if outputs is not None else DEFAULT_OUTPUTS))
    x = np.asarray(x, dtype=float).reshape(-1, len(params))
    n = len(x)
    eng_name, flights = _how_to_fly(n, parsed, engine, flights, outputs, quiet, stream)
    own = isinstance(engine, str)
    eng = make_engine(eng_name, workers=workers, scheduler=scheduler, timeout=timeout) if own else engine
    task = FlightTask(model, tuple(p.path for p in params), tuple(p.unit for p in params), outputs, flights,
                      rtol, atol, token=token or "")
    size = chunk_size or default_chunk_size(n, eng.workers, flights)
    if eng.name == "serial" and flights == "single" and chunk_size is None:
        size = min(size, 8)
    rows = _Rows(n, len(outputs)) if table is None else table.rows(params, outputs, x)
    inside = rows.screen_out_of_bounds(params, x)
    t0 = time.perf_counter()
    bar = StudyProgress(n, kind, stream=stream, quiet=quiet)
    try:
        interrupted = fly_rows(eng, task, x, rows.parts(inside, size, flights), bar, rows)
    finally:
        bar.close()
        if own:
            eng.close()
    head = {"model": parsed.model.name, "study": kind,
            "flights": f"{flights} (rtol {rtol if rtol is not None else parsed.run.rtol:g}, "
                       f"atol {atol if atol is not None else parsed.run.atol:g})"}
    head.update(info or {})
    return rows.table(kind=kind, params=tuple(params), outputs=outputs, x=x, interrupted=interrupted, info=head,
                      engine=eng_name, flights=flights, seconds=time.perf_counter() - t0)


def _how_to_fly(n: int, parsed: ParsedModel, engine: Any, flights: str, outputs: tuple[str, ...], quiet: bool,
                stream: Any) -> tuple[str, str]:
    """The engine's name and the way to fly, ``auto`` resolved; an ensemble that cannot fly the model (or compute
    the outcomes) is refused, and a large study flown one design at a time says why at its start."""
    if isinstance(engine, str):
        eng_name, flights = choose_engine(n, parsed, engine, flights, outputs)
    else:
        eng_name, flights = engine.name, choose_engine(n, parsed, "serial", flights, outputs)[1]
    why = unsupported(parsed) if flights == "ensemble" or n >= LARGE_STUDY else None
    if flights == "ensemble" and why:
        raise ModelError("--flights ensemble", f"the vectorised ensemble cannot fly this model: {why}",
                         "use --flights single")
    missing = [o for o in outputs if o not in COMPUTED]
    if flights == "ensemble" and missing:
        raise ModelError("--flights ensemble", f"the vectorised ensemble does not compute {', '.join(missing)}",
                         "use --flights single, or leave them out of the outputs")
    if why and not quiet:
        # said at the start: a large study of a model the ensemble cannot fly runs at single-flight speed
        print(f"thrustgraph: flying {n} designs one at a time: the vectorised ensemble cannot fly this model "
              f"({why})", file=stream or sys.stderr)
    return eng_name, flights


_NOT_FLOWN = "not flown: the study was stopped first"


def out_of_bounds(params: Sequence[DesignParameter], x: np.ndarray) -> np.ndarray:
    """Per design, the column of the first parameter outside its declared bounds, -1 where all are inside.

    >>> from thrustgraph.models.modelfile import load_model, default_model_path
    >>> from thrustgraph.models.designs import resolve
    >>> p = [resolve(parse_model(load_model(default_model_path())), "components.bottle.fill")]
    >>> out_of_bounds(p, np.array([[0.3], [1.5]])).tolist()
    [-1, 0]
    """
    n = len(x)
    first = np.full(n, -1, dtype=np.int16)
    for j, p in enumerate(params):
        ok = within_bounds(p, x[:, j]) if n else np.ones(0, bool)
        first[(first < 0) & ~np.asarray(ok, dtype=bool)] = j
    return first


def bounds_note(params: Sequence[DesignParameter], x_row: np.ndarray, j: int) -> str:
    """Why a design outside its bounds was screened (the note of its row)."""
    p = params[j]
    return f"{p.path} = {p.text(x_row[j])} is outside its bounds ({bounds_text(p)})"


class _Rows:
    """The rows of a study held in memory as they are flown: outcome values, status and note per design."""

    def __init__(self, n: int, k: int) -> None:
        self.values = np.full((n, k), np.nan)
        self.status = np.array([STATUS_NOT_RUN] * n, dtype=object)
        self.notes = [_NOT_FLOWN] * n
        self.done = 0
        self.screened = 0

    def screen_out_of_bounds(self, params: Sequence[DesignParameter], x: np.ndarray) -> np.ndarray:
        """Screen the designs outside their declared bounds, before any engine sees them; True for the others."""
        first = out_of_bounds(params, x)
        for i in np.flatnonzero(first >= 0):
            self.status[i] = STATUS_SCREENED
            self.notes[i] = bounds_note(params, x[i], int(first[i]))
        self.done = self.screened = int(np.sum(first >= 0))
        return first < 0

    def parts(self, inside: np.ndarray, size: int, flights: str) -> list[np.ndarray]:
        """The in-bounds rows in chunks (:func:`_parts`)."""
        return _parts(np.flatnonzero(inside), size, flights)

    def put(self, idx: np.ndarray, res: ChunkRows) -> None:
        """The rows ``idx`` came back."""
        self.values[idx] = res.values
        self.status[idx] = res.status
        for r, note in zip(idx, res.notes):
            self.notes[r] = note
        self.done += len(idx)
        self.screened += sum(1 for s in res.status if s == STATUS_SCREENED)

    def table(self, **fields: Any) -> DesignTable:
        """The table, the placeholder note of rows that flew cleared."""
        notes = ["" if s == STATUS_OK and note == _NOT_FLOWN else note for s, note in zip(self.status, self.notes)]
        return DesignTable(values=self.values, status=np.asarray(self.status, dtype=str), notes=notes, **fields)


def fly_rows(eng: Any, task: FlightTask, x: np.ndarray, parts: list[np.ndarray], bar: StudyProgress,
             rows: Any) -> bool:
    """Fly the chunks (each an array of row numbers) on the engine, handing each chunk's rows to ``rows`` (its
    ``put``) as they come back; True when interrupted (Ctrl-C keeps what has flown, possibly nothing)."""
    index_of = {int(idx[0]): idx for idx in parts}
    feed = ((int(idx[0]), x[idx]) for idx in parts)
    if eng.name == "serial" and bar.enabled:
        stream_ = eng.run(task, feed, progress=lambda start, k: bar.update(rows.done + k, rows.screened))
    else:
        stream_ = eng.run(task, feed)
    try:   # from the first draw of the bar on, an interrupt keeps what has flown (possibly nothing)
        bar.update(rows.done, rows.screened)
        for res in stream_:
            rows.put(index_of[res.start], res)
            bar.update(rows.done, rows.screened)
    except KeyboardInterrupt:
        return True
    return False


def _parts(rows: np.ndarray, size: int, flights: str) -> list[np.ndarray]:
    """The in-bounds rows cut into chunks of at most ``size``: runs of consecutive rows for single flights;
    for ensembles every k-th row (k the number of chunks), so that each chunk samples the whole study and the
    chunks cost alike (a grid's consecutive rows differ in cost: fills, pressures...), which keeps the workers
    of a pool or cluster equally busy. A design's row does not depend on its chunk.

    >>> [p.tolist() for p in _parts(np.arange(5), 2, "single")], [p.tolist() for p in _parts(np.arange(5), 2, "ensemble")]
    ([[0, 1], [2, 3], [4]], [[0, 3], [1, 4], [2]])
    """
    if flights != "ensemble":
        return [part[:, 0] for _, part in chunks(rows.reshape(-1, 1), size)]
    k = -(-len(rows) // max(1, int(size)))
    return [rows[j::k] for j in range(k)]


def as_vary(item: Vary | str) -> Vary:
    """A :class:`~thrustgraph.studies.studyspec.Vary` from itself or its text form."""
    return item if isinstance(item, Vary) else Vary.parse(str(item))


def _prepare(model: Model | str | None) -> tuple[Model, ParsedModel]:

    if model is None or isinstance(model, (str, os.PathLike)):
        model = load_model(model or default_model_path())
    return model, parse_model(model)


def sweep(model: Model | str | None, vary: Sequence[Vary | str], *, combine: str = "grid",
          outputs: Sequence[str] | None = None, **run: Any) -> DesignTable:
    """Fly every combination (``grid``) or the n-th values together (``list``) of the varied parameters.

    In a grid the first parameter changes slowest. ``run`` takes the options of :func:`evaluate`.
    """
    model, parsed = _prepare(model)
    vary = [as_vary(v) for v in vary]
    if not vary:
        raise ModelError("sweep", "varies no parameter", 'add --vary "components.bottle.fill=0.1..0.6 in 11"')
    for v in vary:
        if v.values is None and v.low is None:
            raise ModelError(f"sweep {v.path}", "gives no values to sweep",
                             f'write e.g. "{v.path}=LOW..HIGH in N" or "{v.path}=V1, V2"')
    params = [v.resolve(parsed, where=f"sweep {v.path}") for v in vary]
    cols = [v.si_values(p, where=f"sweep {v.path}") for v, p in zip(vary, params)]
    if combine == "grid":
        total = math.prod(len(c) for c in cols)
        check_count(total, MAX_DESIGNS, where="sweep", what=f"designs (a grid of {' x '.join(str(len(c)) for c in cols)})",
                    fix="use fewer values per parameter")
        # every combination, the first parameter slowest (as itertools.product), built as arrays: a million
        # designs as Python tuples took ~150 MB on the way
        x = np.stack([g.reshape(-1) for g in np.meshgrid(*[np.asarray(c, dtype=float) for c in cols],
                                                          indexing="ij")], axis=1).reshape(total, len(cols))
    elif combine == "list":
        lengths = {len(c) for c in cols}
        if len(lengths) != 1:
            raise ModelError("sweep", f"a list sweep needs the same number of values for every parameter, got "
                             f"{', '.join(f'{v.path}: {len(c)}' for v, c in zip(vary, cols))}",
                             "give equally long lists, or combine = \"grid\"")
        x = np.column_stack(cols)
    else:
        raise ModelError("sweep combine", f"expected \"grid\" or \"list\", got {combine!r}",
                         "grid: every combination; list: the n-th values together")
    info = {"combine": f"{combine} of {len(params)} parameter(s)"}
    return evaluate(model, params, x, outputs, parsed=parsed, kind="sweep", info=info, **run)


@dataclass
class Sensitivity:
    """Local sensitivities of each outcome to each parameter at the model's values.

    Fields
    ------
    params, outputs : in the order of the arrays
    nominal : outcome values at the model's values (SI), shape (outputs,)
    derivative : d outcome / d parameter, SI per SI, shape (outputs, parameters)
    elasticity : (x / y) d y / d x, the % change of the outcome per 1 % change of the parameter; where the
        parameter's value is 0 it is the % change of the outcome per one unit of the parameter instead
    steps : the finite-difference step of each parameter, SI
    scheme : per parameter "central", "forward" or "backward" (at a bound)
    table : the flown designs
    """

    params: tuple[DesignParameter, ...]
    outputs: tuple[str, ...]
    nominal: np.ndarray
    derivative: np.ndarray
    elasticity: np.ndarray
    steps: np.ndarray
    scheme: tuple[str, ...]
    table: DesignTable

    def to_pandas(self):
        """The sensitivities as a pandas DataFrame, one row per (outcome, parameter), SI
        (:func:`thrustgraph.base.frames.sensitivity_frame`)."""
        return sensitivity_frame(self, {o: OUTCOMES[o].unit for o in self.outputs})

    def per_unit(self, output: str, path: str) -> float:
        """The derivative in the output's SI unit per one of the parameter's shown units."""
        j = [p.path for p in self.params].index(path)
        return float(self.derivative[self.outputs.index(output), j] * _unit_size(self.params[j]))

    def to_csv(self) -> str:
        buf = io.StringIO()
        buf.write("# thrustgraph local sensitivities (finite differences at the model's values)\n")
        for k, v in self.table.info.items():
            buf.write(f"# {k}: {v}\n")
        rows = csv.writer(buf, lineterminator="\n")
        rows.writerow(["output", "parameter", "output value", "output unit", "parameter value", "parameter unit",
                       "derivative per parameter unit", "elasticity [1]", "step", "scheme"])
        for k, o in enumerate(self.outputs):
            for j, p in enumerate(self.params):
                rows.writerow([o, p.path, _fmt(self.nominal[k]), OUTCOMES[o].unit or "1",
                               _fmt(float(p.shown(p.nominal))), p.unit or "1",
                               _fmt(self.derivative[k, j] * _unit_size(p)), _fmt(self.elasticity[k, j]),
                               _fmt(float(p.shown(p.nominal + self.steps[j])) - float(p.shown(p.nominal))),
                               self.scheme[j]])
        return buf.getvalue()

    def write_csv(self, path: str | os.PathLike[str]) -> None:

        atomic_write(path, self.to_csv())

    def report(self) -> str:
        """The elasticities as a table for people, one line per outcome."""
        lines = ["Local sensitivities at the model's values (central differences, step "
                 f"{self.steps[0] / max(abs(self.params[0].nominal), 1e-300):.3g} of each value)", ""]
        head = f"  {'outcome':<22s}" + "".join(f" {p.path.split('.')[-1][:16]:>17s}" for p in self.params)
        lines.append(head + "   (% change per 1 % change)")
        for k, o in enumerate(self.outputs):
            if not np.any(np.isfinite(self.elasticity[k])):
                continue
            lines.append(f"  {o:<22s}" + "".join(f" {v:17.4g}" if math.isfinite(v) else f" {'-':>17s}"
                                                   for v in self.elasticity[k]))
        return "\n".join(lines)


def _unit_size(p: DesignParameter) -> float:
    """Size of one shown unit of a parameter in SI (without the offset of degC)."""
    if not p.unit or p.unit == p.si:
        return 1.0

    return float(Q_(1.0, p.unit).to(p.si).magnitude - Q_(0.0, p.unit).to(p.si).magnitude)


def sensitivities(model: Model | str | None, vary: Sequence[Vary | str], *, outputs: Sequence[str] | None = None,
                  step: float = 1e-3, **run: Any) -> Sensitivity:
    """Local sensitivities by central differences at the model's values.

    The step of each parameter is ``step`` times its value (times one of its
    units when the value is 0), one-sided where a bound is nearer than that.
    With outcomes accurate to the integration tolerance (about 1e-9) a
    relative step of 1e-3 keeps both the truncation error of the central
    difference (~step^2) and the amplified noise (~1e-9 / step) near 1e-6.
    """
    model, parsed = _prepare(model)
    vary = [as_vary(v) for v in vary]
    if not vary:
        raise ModelError("sensitivity", "names no parameter", 'add --vary components.bottle.fill')
    if not 0.0 < step < 0.5:
        raise ModelError("--step", f"must be a relative step between 0 and 0.5, got {step!r}", "use e.g. 0.001")
    params = [v.resolve(parsed, where=f"sensitivity {v.path}") for v in vary]
    x0 = np.array([p.nominal for p in params])
    rows = [x0]
    steps, scheme = [], []
    for j, p in enumerate(params):
        h = step * abs(p.nominal) if p.nominal != 0.0 else step * _unit_size(p)
        up, down = x0.copy(), x0.copy()
        up[j] += h
        down[j] -= h
        okp, okm = bool(within_bounds(p, up[j])), bool(within_bounds(p, down[j]))
        if okp and okm:
            scheme.append("central")
        elif okp:
            down = x0.copy()
            scheme.append("forward")
        elif okm:
            up = x0.copy()
            scheme.append("backward")
        else:
            raise ModelError(f"sensitivity {p.path}", "the step leaves the parameter's bounds on both sides",
                             "use a smaller --step")
        steps.append(h)
        rows += [up, down]
    table = evaluate(model, params, np.array(rows), outputs, parsed=parsed, kind="sensitivity",
                     info={"step": f"{step:g} of each value"}, **run)
    if table.interrupted:   # differences need every design: there is nothing partial to report
        raise KeyboardInterrupt
    if table.status[0] != STATUS_OK:
        raise ModelError("sensitivity", f"the model itself cannot fly: {table.notes[0]}", "fix the model first")
    outs = table.outputs
    K, P = len(outs), len(params)
    d = np.full((K, P), np.nan)
    for j in range(P):
        a, b = 1 + 2 * j, 2 + 2 * j
        if table.status[a] == STATUS_OK and table.status[b] == STATUS_OK:
            span = table.x[a, j] - table.x[b, j]
            d[:, j] = (table.values[a] - table.values[b]) / span
    y0 = table.values[0]
    el = np.full((K, P), np.nan)
    for j, p in enumerate(params):
        scale = p.nominal if p.nominal != 0.0 else _unit_size(p)
        with np.errstate(divide="ignore", invalid="ignore"):
            el[:, j] = np.where(y0 != 0.0, d[:, j] * scale / y0, np.nan)
    return Sensitivity(params=tuple(params), outputs=outs, nominal=y0, derivative=d, elasticity=el,
                       steps=np.array(steps), scheme=tuple(scheme), table=table)
