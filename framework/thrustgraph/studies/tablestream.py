"""A study's table streamed to its file as the chunks come back: design order, memory flat, the file all or none.

A study of a million designs cannot build its CSV table as one string (about
400 bytes a design, several times that while it is built): with a
:class:`TableStream`, :func:`thrustgraph.studies.studies.evaluate` hands each
chunk's rows over as they come back instead of holding them, and they are
written in design order, range by range, by the same functions that write a
table held in memory (:func:`~thrustgraph.studies.studies.csv_rows`), so the
file is the same byte for byte.

How it is written
-----------------
* The designs are cut into ranges of consecutive rows, one chunk each (a
  range whose designs are all out of bounds needs no flight). A range is
  written as soon as it and every range before it are back; the few that come
  back early wait (at most about as many as the engine flies at once).
* The rows go to an unnamed scratch file beside the table; the outcome values
  go, column by column, to a second one (8 bytes a value), from which the
  statistics and plots read one column at a time. The head of the table
  (its row counts) is known only at the end: the table is then written as
  head plus the scratch file's bytes (copied by the kernel) into a
  :class:`~thrustgraph.base.outputfiles.StreamedFile`, which the command puts
  in place together with the summary and plots, all or none.
* Interrupted (Ctrl-C, SIGTERM), the rows already back are written and the rest
  marked ``not run``, exactly as a table held in memory; stopped harder (a
  kill), the scratch and staged files are unnamed and vanish: there is never a
  half-written table at the path.

What is held per design: its parameter values (the designs themselves, 8 bytes
a parameter), a status code (1 byte) and the first parameter out of bounds
(2 bytes); per flying chunk its summary rows; at the end one outcome column at
a time (8 bytes a design) for the statistics.

Examples
--------
>>> import tempfile, pathlib
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.studies.studies import sweep
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> t = sweep(load_model(default_model_path()), ["components.bottle.fill=0.2..0.4 in 3"], outputs=["apogee"],
...           engine="serial", quiet=True, table=TableStream(d / "t.csv"))
>>> [round(float(v), 2) for v in t.column("apogee")], sorted(p.name for p in d.iterdir())
([53.99, 54.8, 52.32], [])
>>> t.write()
>>> (d / "t.csv").read_text() == sweep(load_model(default_model_path()), ["components.bottle.fill=0.2..0.4 in 3"],
...                                   outputs=["apogee"], engine="serial", quiet=True).to_csv()
True
"""

from __future__ import annotations

import os
import tempfile
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from ..balance.outcomes import STATUS_NOT_RUN, STATUS_OK, STATUS_SCREENED
from ..base.errors import ModelError
from ..base.outputfiles import StreamedFile, check_output
from ..models.designs import DesignParameter
from .engines import ChunkRows
from .studies import _NOT_FLOWN, bounds_note, csv_columns, csv_head, csv_rows, out_of_bounds, table_report

__all__ = ["TableStream", "StreamedTable", "STATUSES", "SCREENED_KEPT"]

#: Status of a design by its code (what a streamed table holds per design: one byte).
STATUSES = (STATUS_NOT_RUN, STATUS_OK, STATUS_SCREENED)
_NOT_RUN, _OK, _SCREENED = range(3)
#: Screened designs a streamed table keeps with their notes, for the report (every note is in the file).
SCREENED_KEPT = 8


class TableStream:
    """The CSV file a study's table is streamed to; give it to a study as ``table=``.

    The path is checked now: one that cannot be written is refused before any design flies.
    """

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = path
        self.real = check_output(path)

    def rows(self, params: Sequence[DesignParameter], outputs: Sequence[str], x: np.ndarray) -> "_StreamRows":
        """Where :func:`~thrustgraph.studies.studies.evaluate` puts the rows of one study."""
        return _StreamRows(self, params, outputs, x)


class _StreamRows:
    """The rows of one study on their way to the file (the streamed counterpart of the in-memory rows)."""

    def __init__(self, stream: TableStream, params: Sequence[DesignParameter], outputs: Sequence[str],
                 x: np.ndarray) -> None:
        self.stream = stream
        self.params, self.outputs, self.x = tuple(params), tuple(outputs), x
        self.n, self.k = len(x), len(outputs)
        self.codes = np.zeros(self.n, dtype=np.uint8)
        self.first_bad = np.full(self.n, -1, dtype=np.int16)
        folder = stream.real.parent
        self.body = tempfile.TemporaryFile(dir=folder)    # unnamed where the system allows (O_TMPFILE)
        self.spill = tempfile.TemporaryFile(dir=folder)   # outcome values, SI float64, one column after another
        self.body.write(csv_columns(self.params, self.outputs).encode())
        self.done = self.screened = 0
        self.size = max(1, self.n)
        self.pending: dict[int, tuple[np.ndarray, ChunkRows] | None] = {}
        self.next = 0
        self.ranges = 0
        self.kept: list[tuple[int, str]] = []

    # --- the interface evaluate() uses -------------------------------------------------------------------------
    def screen_out_of_bounds(self, params: Sequence[DesignParameter], x: np.ndarray) -> np.ndarray:
        self.first_bad = out_of_bounds(params, x)
        bad = self.first_bad >= 0
        self.codes[bad] = _SCREENED
        self.done = self.screened = int(np.sum(bad))
        return ~bad

    def parts(self, inside: np.ndarray, size: int, flights: str) -> list[np.ndarray]:
        """Ranges of ``size`` consecutive rows, one chunk each (its in-bounds rows), in design order: a range
        can be written once it and those before it are back."""
        self.size = max(1, int(size))
        self.ranges = -(-self.n // self.size)
        parts = []
        for r in range(self.ranges):
            s = r * self.size
            idx = np.flatnonzero(inside[s:s + self.size]) + s
            if len(idx):
                parts.append(idx)
            else:
                self.pending[r] = None    # nothing to fly in it
        self._write_ready()
        return parts

    def put(self, idx: np.ndarray, res: ChunkRows) -> None:
        self.pending[int(idx[0]) // self.size] = (idx, res)
        self.done += len(idx)
        self.screened += sum(1 for s in res.status if s == STATUS_SCREENED)
        self._write_ready()

    def table(self, *, kind: str, params: tuple, outputs: tuple, x: np.ndarray, interrupted: bool,
              info: dict[str, Any], engine: str, flights: str, seconds: float) -> "StreamedTable":
        """Write what is left (interrupted: the rows back, the rest ``not run``) and stage the whole file."""
        file = None
        try:
            if interrupted:
                while self.next < self.ranges:
                    self._write_range(self.next, self.pending.pop(self.next, None))
                    self.next += 1
            elif self.next < self.ranges:   # pragma: no cover - an engine that lost a chunk
                raise ModelError("study", f"{self.ranges - self.next} chunks never came back", "run it again")
            counts = np.bincount(self.codes, minlength=3)
            counts = {STATUSES[c]: int(counts[c]) for c in range(3)}
            file = StreamedFile(self.stream.path)
            file.write(csv_head(info, counts, self.n, interrupted))
            self.body.flush()
            file.copy_from(self.body)
        except BaseException:
            if file is not None:
                file.discard()
            self.spill.close()
            raise
        finally:
            self.body.close()
        return StreamedTable(kind=kind, params=params, outputs=outputs, x=x, codes=self.codes, path=self.stream.path,
                             file=file, spill=self.spill, kept=self.kept, interrupted=interrupted, info=info,
                             engine=engine, flights=flights, seconds=seconds)

    # --- writing -------------------------------------------------------------------------------------------------
    def _write_ready(self) -> None:
        while self.next in self.pending:
            self._write_range(self.next, self.pending.pop(self.next))
            self.next += 1

    def _write_range(self, r: int, got: tuple[np.ndarray, ChunkRows] | None) -> None:
        s = r * self.size
        e = min(self.n, s + self.size)
        m = e - s
        codes = self.codes[s:e]
        status = [STATUS_NOT_RUN] * m
        notes = [_NOT_FLOWN] * m
        values = np.full((m, self.k), np.nan)
        for i in np.flatnonzero(self.first_bad[s:e] >= 0):
            status[i] = STATUS_SCREENED
            notes[i] = bounds_note(self.params, self.x[s + i], int(self.first_bad[s + i]))
        if got is not None:
            idx, res = got
            local = idx - s
            values[local] = res.values
            for i, st, note in zip(local.tolist(), res.status, res.notes):
                status[i] = st
                notes[i] = "" if st == STATUS_OK and note == _NOT_FLOWN else note
                codes[i] = STATUSES.index(st)
        for i, st in enumerate(status):
            if st == STATUS_SCREENED and len(self.kept) < SCREENED_KEPT:
                self.kept.append((s + i, notes[i]))
        self.body.write(csv_rows(self.params, self.x[s:e], status, values, notes, s).encode())
        fd = self.spill.fileno()
        for j in range(self.k):
            _pwrite_all(fd, np.ascontiguousarray(values[:, j]).tobytes(), (j * self.n + s) * 8)


def _pwrite_all(fd: int, data: bytes, offset: int) -> None:
    view = memoryview(data)
    while view:
        done = os.pwrite(fd, view, offset)
        view, offset = view[done:], offset + done


@dataclass
class StreamedTable:
    """A study's table that was streamed to a file: what the study, its statistics and plots read from it.

    It answers like a :class:`~thrustgraph.studies.studies.DesignTable` (``len``, ``ok``, ``counts``,
    ``column``, ``x``, ``report``), reading outcome columns one at a time from its scratch file; ``values``
    and ``status`` build the whole arrays (as much memory as a table held in memory). The file itself is
    staged (``file``): :meth:`write` puts it in place (the command puts it in place with the other outputs),
    :meth:`discard` drops it.

    Fields
    ------
    kind, params, outputs, x, interrupted, info, engine, flights, seconds : as for a DesignTable
    codes : status per design, as an index of :data:`STATUSES`
    path : the table's path
    file : the staged file (None once written or dropped)
    kept : (row, note) of the first :data:`SCREENED_KEPT` screened designs
    """

    kind: str
    params: tuple[DesignParameter, ...]
    outputs: tuple[str, ...]
    x: np.ndarray
    codes: np.ndarray
    path: Any
    file: StreamedFile | None
    spill: Any
    kept: list[tuple[int, str]] = field(default_factory=list)
    interrupted: bool = False
    info: dict[str, Any] = field(default_factory=dict)
    engine: str = ""
    flights: str = ""
    seconds: float = 0.0

    def __len__(self) -> int:
        return len(self.codes)

    @property
    def ok(self) -> np.ndarray:
        """True for the rows that flew."""
        return self.codes == _OK

    @property
    def counts(self) -> dict[str, int]:
        c = np.bincount(self.codes, minlength=3)
        return {STATUSES[i]: int(c[i]) for i in range(3)}

    @property
    def status(self) -> np.ndarray:
        """Per row "ok", "screened" or "not run" (built on demand)."""
        return np.asarray(STATUSES)[self.codes]

    def column(self, name: str) -> np.ndarray:
        """An outcome's values (SI, read from the scratch file) or a parameter's values (SI, by key path)."""
        if name in self.outputs:
            n = len(self)
            out = np.empty(n)
            buf = memoryview(out).cast("B")
            offset = self.outputs.index(name) * n * 8
            got = 0
            while got < len(buf):
                k = os.preadv(self.spill.fileno(), [buf[got:]], offset + got) if hasattr(os, "preadv") else \
                    _pread_into(self.spill.fileno(), buf[got:], offset + got)
                if k <= 0:
                    raise OSError(f"the scratch file of the study's table ended early ({got} of {len(buf)} bytes)")
                got += k
            return out
        paths = [p.path for p in self.params]
        if name in paths:
            return self.x[:, paths.index(name)]
        raise ModelError(name, "is not a column of this study", f"columns: {', '.join(paths + list(self.outputs))}")

    @property
    def values(self) -> np.ndarray:
        """Every outcome value, shape (rows, outputs), SI: the whole table in memory."""
        return np.column_stack([self.column(o) for o in self.outputs]) if self.outputs else np.zeros((len(self), 0))

    def screened(self) -> list[tuple[int, str]]:
        """(row, reason) of the first :data:`SCREENED_KEPT` screened designs (``counts`` has how many; the file
        has every note)."""
        return list(self.kept)

    def report(self) -> str:
        return table_report(self)

    def write(self) -> None:
        """Put the table's file in place (alone: a command puts it in place with its other outputs)."""
        if self.file is None:
            raise ModelError(str(self.path), "the table was already written or dropped", "run the study again")
        f, self.file = self.file, None
        f.commit()

    def discard(self) -> None:
        """Drop the table's file: nothing is written."""
        if self.file is not None:
            self.file.discard()
            self.file = None


def _pread_into(fd: int, buf: memoryview, offset: int) -> int:   # pragma: no cover - systems without preadv
    data = os.pread(fd, len(buf), offset)
    buf[:len(data)] = data
    return len(data)

