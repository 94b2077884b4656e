"""Measured records: CSV logs whose column headers carry units, read into SI arrays.

A record is what a data logger wrote during a test: a load cell on a test
stand, a pressure transducer on the vessel, a barometric altimeter or an
accelerometer in flight. Every column header names the quantity and its unit
in square brackets, ``name [unit]``; the unit goes through the one pint
registry of :mod:`thrustgraph.base.units`, so ``psi``, ``lbf``, ``ft``, ``kPa``,
``ms`` and the like all arrive as SI floats. A plain number is written
``[1]``. Lines starting with ``#`` are notes and are skipped; the delimiter is
a comma, a semicolon or a tab.

A column of words rather than numbers (a logger's state, a note) is marked
``[text]``; its cells are kept as written in :attr:`Record.labels`.

A Parquet file (thrustgraph's Parquet export; needs pyarrow) is read through
the same checks: each column's unit comes from its field metadata ``unit``
(else the column's name must carry it, ``time [s]``), a string column is a
``[text]`` column, and the export's ``#`` lines come from the schema metadata
``thrustgraph.notes``.

A JSON file (thrustgraph's JSON export, :meth:`FlightResult.to_json
<thrustgraph.flight.result.FlightResult.to_json>`) is read through the same
checks too: each object of its ``series`` is a column (``name``, ``unit``,
``values``; ``null`` for no value), and its ``provenance`` and ``summary`` give
the ``#`` lines the CSV export starts with. A JSON file without a ``series``
(the metrics of ``compare --json``) is refused with one message saying so.

thrustgraph reads its own CSV export the same way (:meth:`FlightResult.to_csv
<thrustgraph.flight.result.FlightResult.to_csv>`: every header carries its unit, the
phase is a ``[text]`` column). A file whose first line is the export's
provenance line ``# thrustgraph VERSION`` is read as a saved prediction
(:attr:`Record.exported`): a time may repeat there (the values just before
and just after a phase boundary), a value may be ``nan`` (a signal
with no value in that phase), and its ``#`` lines are kept in
:attr:`Record.notes`. A measured record gets neither allowance.

A :class:`Record` is immutable: :func:`resample`, :func:`lowpass`,
:func:`shift`, :func:`trim` and :func:`align` return new records and append a
line to its ``history``. Times are kept in the model's clock once the record
is aligned: ``time = file time - offset``.

Pressure transducers usually read *gauge* pressure (above the surroundings);
the model's vessel pressures are *absolute*. A :class:`ColumnMap` of a pressure
column must say which one it holds (``pressure="gauge"`` or ``"absolute"``);
:mod:`thrustgraph.measured.compare` adds the model's ambient pressure to a gauge column
before comparing. Nothing is guessed.

Examples
--------
>>> rec = loads_record('''time [ms],thrust [lbf],pressure [psi]
... 0,0,60
... 1,50,59
... 2,48,58
... ''', source="stand.csv")
>>> rec.time
array([0.   , 0.001, 0.002])
>>> round(float(rec.column("thrust")[1]), 6)
222.411081
>>> rec.units["pressure"], rec.si_units["pressure"]
('psi', 'Pa')
>>> loads_record("time [s],thrust\\n0,1\\n", source="stand.csv")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: stand.csv: column 2 'thrust': the header has no unit. Fix: write the unit in square brackets after the name, e.g. "thrust [N]" or "pressure [psi]" (or in round brackets, "Time (s)"); write [1] for a plain number.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
import json
import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from ..base.errors import ModelError
from ..base.exportnotes import outcome_note, provenance_notes
from ..kinds.signalunits import TEXT_UNIT
from ..base.units import Q_, to_si

__all__ = ["Record", "ColumnMap", "Trigger", "read_record", "loads_record", "parse_header", "resample",
           "lowpass", "shift", "trim", "align", "trigger_time", "crossing_time", "is_even", "MAX_HEADER_CELL",
           "MIN_SAMPLE_INTERVAL", "EXPORT_MARK", "is_json"]

#: The longest header cell read, characters: a name and a unit ("bottle pressure [psi]"), not a document.
MAX_HEADER_CELL = 200
#: The shortest time between two samples, s: 1 ns (1 GHz) is far beyond any logger of load, pressure or motion
#: (common practice, no source); closer times are a unit slip (ms written as s) or corrupt data.
MIN_SAMPLE_INTERVAL = 1e-9

#: The first line of a thrustgraph export (its provenance): what marks a file as a saved prediction.
EXPORT_MARK = re.compile(r"^#\s*thrustgraph\s+\S+\s*$")
_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*\[(?P<unit>[^\[\]]*)\]\s*$")
# the other common form, "Time (s)": the unit in round brackets at the end (a unit may hold one more pair)
_HEADER_ROUND = re.compile(r"^\s*(?P<name>[^\[\]()]*?)\s*\((?P<unit>[^()\[\]]*(?:\([^()]*\)[^()\[\]]*)?)\)\s*$")
_PLAIN = ("", "1", "-")
_DIM_REFERENCE = (("N", "force"), ("Pa", "pressure"), ("m", "length"), ("s", "time"), ("kg", "mass"),
                  ("K", "temperature"), ("m/s", "speed"), ("m/s^2", "acceleration"), ("kg/s", "mass flow"),
                  ("m^3", "volume"), ("Hz", "frequency"), ("N*s", "impulse"), ("", "plain number"))
_DIM_NAMES: dict[Any, str] = {}


def dimension_name(unit: str) -> str:
    """Name of the quantity a unit measures, for messages.

    >>> dimension_name("psi"), dimension_name("lbf"), dimension_name("")
    ('pressure', 'force', 'plain number')
    """
    if not _DIM_NAMES:
        for ref, name in _DIM_REFERENCE:
            _DIM_NAMES[Q_(1.0, ref).dimensionality] = name
    dim = Q_(1.0, unit).dimensionality if unit else Q_(1.0, "").dimensionality
    return _DIM_NAMES.get(dim, f"quantity of dimension {dim}")


@dataclass(frozen=True)
class Record:
    """A measured record in SI, one time axis shared by every column.

    Fields
    ------
    source : the file it came from (as given)
    sha256 : hash of the file's bytes (hex)
    time : (n,) strictly increasing times, s, in the model's clock once aligned
    columns : column name -> (n,) SI values (the time column is not among them)
    units : column name -> unit as written in the header
    si_units : column name -> the SI unit its values are in
    time_column : name of the time column in the file
    offset : file time of the model's t = 0, s (``time = file time - offset``)
    history : what was done to the record since it was read, in order
    labels : column name -> (n,) cells of a ``[text]`` column, as written
    notes : the file's ``#`` lines (without the ``#``), in order
    exported : True for a thrustgraph export read back (a saved prediction, not a measurement)
    """

    source: str
    sha256: str
    time: np.ndarray
    columns: dict[str, np.ndarray]
    units: dict[str, str]
    si_units: dict[str, str]
    time_column: str = "time"
    offset: float = 0.0
    history: tuple[str, ...] = field(default=())
    labels: dict[str, tuple[str, ...]] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    exported: bool = False

    def column(self, name: str) -> np.ndarray:
        """SI values of a column; a wrong name gets the closest one suggested."""
        if name not in self.columns:
            names = list(self.columns)
            close = difflib.get_close_matches(name, names, n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"the record's columns are {', '.join(names)}"
            raise ModelError(f"{self.source}: column {name!r}", "no such column in the record", hint)
        return self.columns[name]

    @property
    def interval(self) -> float:
        """Median spacing of the samples, s."""
        return float(np.median(np.diff(self.time)))

    def dimension(self, name: str) -> str:
        """Name of the quantity a column holds (``'pressure'``, ``'force'``, ...)."""
        self.column(name)
        return dimension_name(self.units[name])


@dataclass(frozen=True)
class ColumnMap:
    """Which result signal a record column is compared with.

    Parameters
    ----------
    column : name of the column in the record (without its unit)
    signal : name of the result signal, e.g. ``"thrust"``, ``"bottle.pressure"``,
        ``"altitude"``; a component of a vector signal is ``"acceleration.z"``
    pressure : for a pressure column, ``"gauge"`` (above the surroundings, what
        most transducers read) or ``"absolute"``; must be None for other columns
    weight : relative weight of this signal in a calibration (default 1)

    Examples
    --------
    >>> ColumnMap("pressure", "bottle.pressure", pressure="gauge")
    ColumnMap(column='pressure', signal='bottle.pressure', pressure='gauge', weight=1.0)
    """

    column: str
    signal: str
    pressure: str | None = None
    weight: float = 1.0

    def check(self, record: Record) -> None:
        """Refuse a mapping that does not fit the record (missing column, pressure reference)."""
        record.column(self.column)
        where = f"{record.source}: column {self.column!r}"
        is_pressure = record.dimension(self.column) == "pressure"
        if self.pressure not in (None, "gauge", "absolute"):
            raise ModelError(where, f"pressure reference {self.pressure!r} is neither 'gauge' nor 'absolute'",
                             "say gauge (above the surroundings) or absolute")
        if is_pressure and self.pressure is None:
            raise ModelError(where, f"holds a pressure [{record.units[self.column]}] but the mapping does not say "
                             "whether it is gauge or absolute",
                             f"mark it gauge (most transducers read above the surroundings) or absolute, e.g. "
                             f"--gauge {self.column} or --absolute {self.column}")
        if not is_pressure and self.pressure is not None:
            raise ModelError(where, f"is marked {self.pressure} but holds a {record.dimension(self.column)}, "
                             "not a pressure", "mark only pressure columns gauge or absolute")
        if not (isinstance(self.weight, (int, float)) and math.isfinite(self.weight) and self.weight > 0):
            raise ModelError(where, f"weight {self.weight!r} is not a positive number",
                             "give a weight such as 1 or 0.5")


@dataclass(frozen=True)
class Trigger:
    """The moment a column first rises above (or falls below) a level: release or ignition.

    Examples
    --------
    >>> Trigger.parse("thrust > 5 N")
    Trigger(column='thrust', direction='rising', level='5 N')
    >>> Trigger.parse("pressure<2 bar").direction
    'falling'
    """

    column: str
    direction: str
    level: Any

    @classmethod
    def parse(cls, text: str) -> "Trigger":
        """Read ``"COLUMN > LEVEL"`` (rising) or ``"COLUMN < LEVEL"`` (falling)."""
        m = re.match(r"^\s*([^<>]+?)\s*([<>])\s*(.+?)\s*$", text or "")
        if not m:
            raise ModelError(f"trigger {text!r}", "expected COLUMN > LEVEL or COLUMN < LEVEL",
                             'write e.g. "thrust > 5 N" (release when the thrust first rises above 5 N)')
        return cls(m.group(1), "rising" if m.group(2) == ">" else "falling", m.group(3))

    def describe(self) -> str:
        return f"{self.column} {'>' if self.direction == 'rising' else '<'} {self.level}"


# -- reading ------------------------------------------------------------------

def parse_header(cell: str, *, where: str) -> tuple[str, str]:
    """Split a header ``"thrust [lbf]"`` into its name and unit, checking the unit.

    >>> parse_header("pressure [psi]", where="x.csv")
    ('pressure', 'psi')
    >>> parse_header("ratio [1]", where="x.csv")
    ('ratio', '')
    >>> parse_header("phase [text]", where="x.csv")
    ('phase', 'text')
    >>> parse_header("Time (s)", where="x.csv"), parse_header("c_p (J/(kg K))", where="x.csv")
    (('Time', 's'), ('c_p', 'J/(kg K)'))
    """
    m = _HEADER.match(cell) or _HEADER_ROUND.match(cell)
    if not m or not m.group("name"):
        raise ModelError(where, "the header has no unit",
                         'write the unit in square brackets after the name, e.g. "thrust [N]" or "pressure [psi]" '
                         '(or in round brackets, "Time (s)"); write [1] for a plain number')
    name, unit = m.group("name"), m.group("unit").strip()
    if unit in _PLAIN:
        return name, ""
    if unit == TEXT_UNIT:
        return name, TEXT_UNIT
    chained = re.search(r"(\*\*|\^)\s*\(?\s*[-+]?[\d.]+\s*\)?\s*(\*\*|\^)", unit)   # a**b**c
    if re.search(r"\d{7,}", unit) or chained or any(
            int(p) > 12 for p in re.findall(r"(?:\*\*|\^)\s*\(?\s*[-+]?(\d+)", unit)):
        raise ModelError(where, f"the unit {_cut(unit)!r} is an arithmetic expression, not a unit",
                         "write a unit such as N, lbf, kPa, m/s^2 or kg/m^3")
    try:
        q = Q_(1.0, unit)
        float(q.to_base_units().magnitude)
    except Exception as exc:  # pint raises several types for a bad unit
        extra = " (for a gauge pressure write the plain unit, e.g. psi, and mark the column gauge)" \
            if unit.lower().endswith(("g", "gauge")) else ""
        raise ModelError(where, f"unknown unit {_cut(unit)!r} ({type(exc).__name__}){extra}",
                         "write a unit such as N, lbf, kPa, bar, psi, m, ft, s or ms") from None
    return name, unit


def read_record(path: str | Path, *, time_column: str = "time") -> Record:
    """Read a measured record from a CSV file (see the module docstring for the format)."""
    p = Path(path)
    if not p.is_file():
        raise ModelError(str(p), "no such record file", "check the path")
    data = p.read_bytes()
    if data[:4] == PARQUET_MAGIC:
        text = _parquet_text(data, str(path))
        return loads_record(text, source=str(path), time_column=time_column,
                            sha256=hashlib.sha256(data).hexdigest())
    if is_json(p, data):
        return loads_record(_json_text(data, str(path)), source=str(path), time_column=time_column,
                            sha256=hashlib.sha256(data).hexdigest())
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ModelError(str(p), f"is not UTF-8 text ({exc.reason} at byte {exc.start})",
                         "save the log as a UTF-8 (or plain ASCII) CSV file") from None
    return loads_record(text, source=str(path), time_column=time_column, sha256=hashlib.sha256(data).hexdigest())


#: The first four bytes of a Parquet file.
PARQUET_MAGIC = b"PAR1"


def _parquet_text(data: bytes, source: str) -> str:
    """A Parquet file's table as the CSV text :func:`loads_record` reads: its ``#`` lines (schema metadata
    ``thrustgraph.notes``), a header ``name [unit]`` per column (field metadata ``unit``; ``[text]`` for
    strings) and the values as ``repr`` of each float (which reads back to the same float)."""
    try:
        import pyarrow as pa          # optional (the parquet extra); imported only for a Parquet file
        import pyarrow.parquet as pq
    except ImportError:
        raise ModelError(source, "is a Parquet file, and reading one needs pyarrow, which is not installed",
                         "pip install 'thrustgraph[parquet]' (or pip install pyarrow), or give the CSV "
                         "export instead") from None
    try:
        table = pq.read_table(pa.BufferReader(data))
    except Exception as exc:  # noqa: BLE001 - pyarrow raises several types for a damaged file
        raise ModelError(source, f"cannot be read as Parquet ({type(exc).__name__}: {_cut(str(exc))})",
                         "give the file thrustgraph export wrote, whole, or a CSV record") from None
    meta = table.schema.metadata or {}
    notes = json.loads(meta[b"thrustgraph.notes"]) if b"thrustgraph.notes" in meta else []
    heads, columns = [], []
    for fld, col in zip(table.schema, table.columns):
        unit = (fld.metadata or {}).get(b"unit")
        text_column = pa.types.is_string(fld.type) or pa.types.is_large_string(fld.type)
        if text_column:
            heads.append(f"{fld.name} [{TEXT_UNIT}]")
            columns.append(["" if v is None else str(v) for v in col.to_pylist()])
        else:
            heads.append(fld.name if unit is None else f"{fld.name} [{unit.decode() or '1'}]")
            columns.append([repr(float("nan") if v is None else float(v)) for v in col.to_pylist()])
    buf = io.StringIO()
    buf.writelines(f"# {line}\n" for line in notes)
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(heads)
    w.writerows(zip(*columns))
    return buf.getvalue()


def is_json(path: str | Path, data: bytes) -> bool:
    """True for a JSON file: named ``*.json``, or its first character (after a byte-order mark and blanks) opens
    a JSON object or array, which no CSV header does.

    >>> is_json("run.json", b""), is_json("run.txt", b' {"series": []}'), is_json("log.csv", b"time [s],x [m]")
    (True, True, False)
    """
    return Path(path).suffix.lower() == ".json" or data.lstrip(b"\xef\xbb\xbf \t\r\n")[:1] in (b"{", b"[")


def _json_text(data: bytes, source: str) -> str:
    """A JSON export's time series as the CSV text :func:`loads_record` reads (see
    :meth:`FlightResult.to_json <thrustgraph.flight.result.FlightResult.to_json>`): a header ``name [unit]`` per
    object of ``series`` (``[text]`` for a text column) and its values as the ``repr`` of each float (``nan`` for
    ``null``); its ``provenance`` and ``summary`` become the ``#`` lines the CSV export starts with
    (:mod:`thrustgraph.base.exportnotes`), so the record and its outcomes are those of the CSV export."""
    fix = ("give the file thrustgraph export --json wrote (its \"series\" holds the signals), or its CSV or Parquet "
           "export; a measured record is a CSV whose headers carry units")
    try:
        doc = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError as exc:
        raise ModelError(source, f"is not UTF-8 text ({exc.reason} at byte {exc.start})", fix) from None
    except ValueError as exc:
        raise ModelError(source, f"cannot be read as JSON ({_cut(str(exc))})", fix) from None
    series = doc.get("series") if isinstance(doc, dict) else None
    if series is None:
        what = ("the metrics of thrustgraph compare" if isinstance(doc, dict) and "signals" in doc else
                "a summary without the signals" if isinstance(doc, dict) and "summary" in doc else
                "JSON of another shape")
        raise ModelError(source, f"is a JSON file with no time series (no \"series\" of signals; it holds {what}), "
                         "so there is nothing to compare or draw", "export the run again, thrustgraph export MODEL "
                         "--json FILE (the JSON export holds the series), or " + fix.split(", or ", 1)[1])
    if not isinstance(series, list) or not series:
        raise ModelError(f"{source}: series", "is not a list of columns", fix)
    heads, columns, rows = [], [], None
    for i, col in enumerate(series):
        where = f"{source}: series[{i}]"
        ok = (isinstance(col, dict) and isinstance(col.get("name"), str) and isinstance(col.get("unit"), str)
              and isinstance(col.get("values"), list))
        if not ok:
            raise ModelError(where, "is not a column: an object with a \"name\", a \"unit\" and a list of "
                             "\"values\"", fix)
        name, unit, values = col["name"], col["unit"], col["values"]
        where = f"{source}: series[{i}] {_cut(name)!r}"
        if rows is None:
            rows = len(values)
        if len(values) != rows:
            raise ModelError(where, f"has {len(values)} values but the first column has {rows}",
                             "give every column one value per time")
        if unit == TEXT_UNIT:
            if any(not (v is None or isinstance(v, str)) or (isinstance(v, str) and ("\n" in v or "\r" in v))
                   for v in values):
                raise ModelError(where, "is a text column whose values are not all one-line text", fix)
            columns.append(["" if v is None else v for v in values])
        else:
            cells = []
            for k, v in enumerate(values):
                if v is None:
                    cells.append("nan")
                elif isinstance(v, (int, float)) and not isinstance(v, bool):
                    cells.append(repr(float(v)))
                else:
                    raise ModelError(f"{where}, value {k + 1}", f"{_cut(repr(v))} is not a number",
                                     "write numbers (null where there is no value); the unit belongs in \"unit\"")
            columns.append(cells)
        heads.append(f"{name} [{unit or '1'}]")
    notes: list[str] = []
    if isinstance(doc.get("provenance"), dict):          # a thrustgraph export: its notes, as the CSV's # lines
        notes = provenance_notes(doc["provenance"])
        summary = doc.get("summary") or {}
        if not isinstance(summary, dict):
            raise ModelError(f"{source}: summary", "is not an object of outcomes", fix)
        for key, entry in summary.items():
            value = entry.get("value") if isinstance(entry, dict) else None
            if not (isinstance(entry, dict) and isinstance(entry.get("unit", ""), str) and
                    (value is None or isinstance(value, (int, float)) and not isinstance(value, bool))):
                raise ModelError(f"{source}: summary.{_cut(str(key))}", "is not an outcome: an object with a "
                                 "numeric \"value\" (or null) and its \"unit\"", fix)
            notes.append(outcome_note(key, entry.get("unit", ""), math.nan if value is None else value))
    buf = io.StringIO()
    buf.writelines(f"# {line}\n" for line in notes)
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(heads)
    w.writerows(zip(*columns))
    return buf.getvalue()


def loads_record(text: str, *, source: str = "<text>", time_column: str = "time",
                 sha256: str | None = None) -> Record:
    """Read a record from CSV text; every error names ``source``, the column and the line."""
    if sha256 is None:
        sha256 = hashlib.sha256(text.encode("utf-8")).hexdigest()
    all_lines = text.splitlines()
    notes = tuple(line.strip()[1:].strip() for line in all_lines if line.lstrip().startswith("#"))
    first = next((line.strip() for line in all_lines if line.strip()), "")
    exported = bool(EXPORT_MARK.match(first))
    lines = [(k, line) for k, line in enumerate(all_lines, start=1)
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise ModelError(source, "the record is empty",
                         "give a header line such as \"time [s],thrust [N]\" and data rows")
    head_no, head = lines[0]
    delim = max(",;\t", key=head.count)
    names, units, time_column = _header(head, head_no, delim, source, time_column)
    rows = lines[1:]
    if len(rows) < 2:
        raise ModelError(source, f"the record has {len(rows)} data row(s)", "give at least two samples")
    tj = names.index(time_column)
    words = {j for j, u in enumerate(units) if u == TEXT_UNIT}
    raw, cells = _numbers(rows, delim, names, source, words=words, nan_ok=exported, time_index=tj)
    if units[tj] == TEXT_UNIT or dimension_name(units[tj]) != "time":
        raise ModelError(f"{source}: column {time_column!r}", f"the time column is in [{units[tj] or '1'}], "
                         f"a {'text' if units[tj] == TEXT_UNIT else dimension_name(units[tj])}",
                         f'write its unit as a time, e.g. "{time_column} [s]" or [ms]')
    si = {j: _column_si(raw, j, name, unit, rows, source) for j, (name, unit) in enumerate(zip(names, units))
          if j not in words}
    time = si[tj]
    _check_time(time, raw[:, tj], units[tj], rows, source, time_column, exported=exported)
    measured = [j for j in range(len(names)) if j != tj and j not in words]
    return Record(source=source, sha256=sha256, time=time, columns={names[j]: si[j] for j in measured},
                  units={names[j]: units[j] for j in measured}, si_units={names[j]: _si_name(units[j]) for j in measured},
                  time_column=time_column, labels={names[j]: tuple(c) for j, c in cells.items()}, notes=notes,
                  exported=exported)


def _header(head: str, head_no: int, delim: str, source: str, time_column: str
            ) -> tuple[list[str], list[str], str]:
    """The names and units of the header line's columns, and the time column's name as written there (its case
    may differ); the time column must be among them, with another."""
    names: list[str] = []
    units: list[str] = []
    for k, cell in enumerate(_cells(head, delim, f"{source}: line {head_no}")):
        if len(cell) > MAX_HEADER_CELL:
            raise ModelError(f"{source}: line {head_no}, column {k + 1} {_cut(cell.strip())!r}",
                             f"the header cell has {len(cell):,} characters (at most {MAX_HEADER_CELL:,})",
                             'write a name and a unit, e.g. "thrust [N]"; check that the file is the logger\'s CSV')
        name, unit = parse_header(cell, where=f"{source}: column {k + 1} {cell.strip()!r}")
        if name in names:
            raise ModelError(f"{source}: column {k + 1} {cell.strip()!r}", f"the name {name!r} appears twice",
                             "give every column its own name")
        names.append(name)
        units.append(unit)
    if time_column not in names:
        # "Time (s)" names the time column as well as "time [s]": the case of its name does not matter
        same = [n for n in names if n.lower() == time_column.lower()]
        if len(same) == 1:
            time_column = same[0]
    if time_column not in names:
        close = difflib.get_close_matches(time_column, names, n=1)
        hint = f"did you mean {close[0]!r}? " if close else ""
        raise ModelError(f"{source}: line {head_no}", f"no time column {time_column!r} (columns: {', '.join(names)})",
                         f"{hint}name the time column \"{time_column} [s]\" or choose it with the time-column option")
    if len(names) < 2:
        raise ModelError(source, "the record has only a time column", "add the measured columns")
    return names, units, time_column


def _numbers(rows: list[tuple[int, str]], delim: str, names: list[str], source: str, *, words: set[int] = set(),
             nan_ok: bool = False, time_index: int = -1) -> tuple[np.ndarray, dict[int, list[str]]]:
    """The data rows as numbers (rows x columns), as written, and the cells of the ``[text]`` columns (``words``);
    a gap or a word is one clear error, but a saved prediction (``nan_ok``) may hold ``nan`` outside its time."""
    raw = np.empty((len(rows), len(names)))
    cells: dict[int, list[str]] = {j: [] for j in words}
    gaps: dict[int, list[int]] = {}
    for i, (line_no, line) in enumerate(rows):
        vals = _cells(line, delim, f"{source}: line {line_no}")
        if len(vals) != len(names):
            raise ModelError(f"{source}: line {line_no}", f"has {len(vals)} values but the header names "
                             f"{len(names)} columns", "give one value per column on every line")
        for j, v in enumerate(vals):
            v = v.strip()
            if j in cells:
                cells[j].append(v)
                raw[i, j] = math.nan
                continue
            if nan_ok and v.lower() == "nan" and j != time_index:     # a signal with no value in this phase
                raw[i, j] = math.nan
                continue
            if v == "" or v.lower() in ("nan", "na", "n/a", "null", "none"):
                gaps.setdefault(j, []).append(line_no)
                raw[i, j] = math.nan
                continue
            raw[i, j] = _number(v, f"{source}: column {names[j]!r}, line {line_no}")
    if gaps:
        j = min(gaps, key=lambda c: gaps[c][0])
        where = f"{source}: column {names[j]!r}, line {gaps[j][0]}"
        raise ModelError(where, f"has {len(gaps[j])} missing value(s) (empty or NaN), the first here",
                         "fill the gap from the logger's raw data or cut the record before it; thrustgraph does not "
                         "guess missing samples")
    return raw, cells


def _number(v: str, where: str) -> float:
    try:
        x = float(v)
    except ValueError:
        raise ModelError(where, f"cannot read {_cut(v)!r} as a number",
                         "write plain numbers; the unit belongs in the header") from None
    if not math.isfinite(x):
        raise ModelError(where, f"{v!r} is not a finite number", "remove the row or write a measured value")
    return x


def _column_si(raw: np.ndarray, j: int, name: str, unit: str, rows: list[tuple[int, str]], source: str
               ) -> np.ndarray:
    """Column ``j`` in SI units; a value that overflows in the conversion is one clear error."""
    with np.errstate(over="ignore", invalid="ignore"):
        q = Q_(raw[:, j], unit).to_base_units() if unit else Q_(raw[:, j], "")
        values = np.asarray(q.magnitude, dtype=float)
    bad = ~np.isfinite(values) & ~np.isnan(raw[:, j])        # a saved prediction's nan stays nan
    if np.any(bad):
        i = int(np.argmax(bad))
        raise ModelError(f"{source}: column {name!r}, line {rows[i][0]}",
                         f"{raw[i, j]:g} {unit} is too large to convert to SI units (it overflows to infinity)",
                         "check the value and the unit in the header")
    return values


def _check_time(time: np.ndarray, raw: np.ndarray, unit: str, rows: list[tuple[int, str]], source: str,
                time_column: str, *, exported: bool = False) -> None:
    """Time increases, by at least :data:`MIN_SAMPLE_INTERVAL` per sample (``raw``: as written, in ``unit``); a
    saved prediction (``exported``) repeats a time at a phase boundary (the values before and after it; once per
    boundary when several fall on one instant), and its steps may be as short as the solver's."""
    steps = np.diff(time)
    back = steps < 0 if exported else steps <= 0
    if np.any(back):
        i = int(np.argmax(back))
        raise ModelError(f"{source}: column {time_column!r}, line {rows[i + 1][0]}",
                         f"time does not increase ({raw[i + 1]:g} {unit} follows {raw[i]:g} {unit})",
                         "sort the rows by time and remove repeated samples")
    if not exported and float(np.min(steps)) < MIN_SAMPLE_INTERVAL:
        i = int(np.argmax(steps < MIN_SAMPLE_INTERVAL))
        raise ModelError(f"{source}: column {time_column!r}, line {rows[i + 1][0]}",
                         f"samples {float(steps[i]):.3g} s apart (the least accepted is {MIN_SAMPLE_INTERVAL:g} s, "
                         "1 GHz)", f"check the time unit in the header (e.g. \"{time_column} [ms]\" for milliseconds)")


def _cut(text: str, width: int = 60) -> str:
    """Text echoed in a message, cut to a readable length.

    >>> _cut("x" * 100, 10)
    'xxxxxxx...'
    """
    return text if len(text) <= width else text[:width - 3] + "..."


def _cells(line: str, delim: str, where: str) -> list[str]:
    """The cells of one CSV line; a line the csv module refuses (a cell beyond its 131,072-character limit,
    a stray quote) is one clear error."""
    try:
        return next(csv.reader([line], delimiter=delim))
    except csv.Error as exc:
        raise ModelError(where, f"cannot be read as CSV ({exc}; the line has {len(line):,} characters)",
                         "a record holds short headers and numbers: check that the file is the logger's CSV") from None


def _si_name(unit: str) -> str:
    """Short SI unit name of a unit's dimension, for labels ('N', 'Pa', 'm', ...)."""
    short = {name: ref for ref, name in _DIM_REFERENCE}
    name = dimension_name(unit)
    return short.get(name, str(Q_(1.0, unit).to_base_units().units) if unit else "")


# -- processing -----------------------------------------------------------------

def _si(value: Any, unit: str, where: str) -> float:
    """A float is taken as SI already; text goes through :func:`thrustgraph.base.units.to_si`."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        x = float(value)
        if not math.isfinite(x):
            raise ModelError(where, f"{value!r} is not finite", "give a finite value")
        return x
    return to_si(value, unit, where=where)


def is_even(time: np.ndarray, rel: float = 1e-6) -> bool:
    """True when the samples are evenly spaced (to ``rel`` of the spacing).

    >>> is_even(np.array([0.0, 0.1, 0.2])), is_even(np.array([0.0, 0.1, 0.25]))
    (True, False)
    """
    d = np.diff(time)
    return bool(np.all(np.abs(d - np.median(d)) <= rel * np.median(d)))


def resample(record: Record, interval: Any) -> Record:
    """Linear interpolation of every column onto an even grid from the first sample.

    ``interval`` is a time (``"1 ms"``) or seconds.

    >>> rec = loads_record("time [s],x [m]\\n0,0\\n0.3,3\\n", source="r.csv")
    >>> resample(rec, "0.1 s").column("x")
    array([0., 1., 2., 3.])
    """
    dt = _si(interval, "s", f"{record.source}: resample interval")
    t0, t1 = float(record.time[0]), float(record.time[-1])
    if not dt > 0.0 or dt > t1 - t0:
        raise ModelError(f"{record.source}: resample interval", f"{interval!r} must be positive and shorter than "
                         f"the record ({t1 - t0:.6g} s)", 'give a sample interval such as "1 ms"')
    n = int(math.floor((t1 - t0) / dt * (1.0 + 1e-12))) + 1
    grid = t0 + dt * np.arange(n)
    cols = {k: np.interp(grid, record.time, v) for k, v in record.columns.items()}
    # a text column (a phase's name) has no value between its samples: it is not carried onto the new grid
    return replace(record, time=grid, columns=cols, labels={},
                   history=record.history + (f"resampled every {dt:.6g} s",))


def lowpass(record: Record, cutoff: Any, *, order: int = 4, columns: Sequence[str] | None = None) -> Record:
    """Zero-phase Butterworth low-pass filter (scipy.signal.butter + sosfiltfilt).

    Run forward and backward, the filter shifts nothing in time and its
    magnitude response is the square of the Butterworth response (-6 dB at the
    cutoff). The record must be evenly sampled (see :func:`resample`).

    >>> rec = resample(loads_record("time [s],x [m]\\n0,1\\n1,1\\n", source="r.csv"), "0.01 s")
    >>> bool(np.allclose(lowpass(rec, "5 Hz").column("x"), 1.0))
    True
    """
    from scipy.signal import butter, sosfiltfilt

    where = f"{record.source}: low-pass filter"
    fc = _si(cutoff, "Hz", where)
    if not is_even(record.time):
        raise ModelError(where, "the record is not evenly sampled", "resample it first (e.g. every 1 ms)")
    if not isinstance(order, int) or isinstance(order, bool) or not 1 <= order <= 10:
        raise ModelError(where, f"filter order {order!r} is not a whole number from 1 to 10", "use order 2 or 4")
    fs = 1.0 / record.interval
    if not 0.0 < fc < fs / 2.0:
        raise ModelError(where, f"cutoff {fc:.6g} Hz must lie between 0 and half the sample rate ({fs / 2:.6g} Hz)",
                         "choose a cutoff below the Nyquist frequency of the record")
    sos = butter(order, fc, btype="low", fs=fs, output="sos")
    pad = 3 * (2 * len(sos) + 1)
    if len(record.time) <= pad:
        raise ModelError(where, f"the record has {len(record.time)} samples, too few to filter at order {order} "
                         f"(more than {pad} needed)", "use a longer record or a lower order")
    names = list(record.columns) if columns is None else list(columns)
    cols = dict(record.columns)
    for name in names:
        cols[name] = sosfiltfilt(sos, record.column(name))
    return replace(record, columns=cols,
                   history=record.history + (f"zero-phase low-pass {fc:.6g} Hz, order {order} ({', '.join(names)})",))


def shift(record: Record, offset: float, note: str = "") -> Record:
    """Move the record's clock: the sample at record time ``offset`` becomes t = 0."""
    text = note or f"time shifted by {offset:.6g} s"
    return replace(record, time=record.time - offset, offset=record.offset + offset, history=record.history + (text,))


def trim(record: Record, start: Any = None, end: Any = None) -> Record:
    """Keep the samples with ``start <= t <= end`` (times in the record's current clock).

    >>> rec = loads_record("time [s],x [m]\\n0,0\\n1,1\\n2,2\\n3,3\\n", source="r.csv")
    >>> trim(rec, "1 s", 2.0).time
    array([1., 2.])
    """
    lo = -math.inf if start is None else _si(start, "s", f"{record.source}: trim start")
    hi = math.inf if end is None else _si(end, "s", f"{record.source}: trim end")
    keep = (record.time >= lo) & (record.time <= hi)
    if keep.sum() < 2:
        raise ModelError(f"{record.source}: trim", f"fewer than two samples lie between {lo:.6g} s and {hi:.6g} s "
                         f"(the record spans {record.time[0]:.6g} s to {record.time[-1]:.6g} s)",
                         "choose a start and end inside the record")
    cols = {k: v[keep] for k, v in record.columns.items()}
    words = {k: tuple(np.asarray(v, dtype=object)[keep]) for k, v in record.labels.items()}
    return replace(record, time=record.time[keep], columns=cols, labels=words,
                   history=record.history + (f"trimmed to {lo:.6g} s .. {hi:.6g} s",))


def crossing_time(t: np.ndarray, x: np.ndarray, level: float, direction: str) -> float | None:
    """First time ``x`` reaches ``level`` going up (``"rising"``) or down (``"falling"``).

    Linear interpolation between the two samples around the crossing; ``t[0]``
    when the first sample is already there; None when it never gets there.

    >>> crossing_time(np.array([0.0, 1.0, 2.0]), np.array([0.0, 0.0, 10.0]), 5.0, "rising")
    1.5
    """
    sign = 1.0 if direction == "rising" else -1.0
    d = sign * (np.asarray(x, dtype=float) - level)
    hit = np.flatnonzero(d >= 0.0)
    if hit.size == 0:
        return None
    k = int(hit[0])
    if k == 0:
        return float(t[0])
    d0, d1 = d[k - 1], d[k]
    return float(t[k - 1] + (t[k] - t[k - 1]) * (-d0) / (d1 - d0))


def trigger_time(record: Record, trigger: Trigger) -> float:
    """Time (record clock) at which the trigger condition is first met in the record.

    Refuses a record that starts already past the level (it began after the
    event) or never reaches it.
    """
    x = record.column(trigger.column)
    where = f"{record.source}: column {trigger.column!r}"
    unit = record.units[trigger.column]
    level = _si(trigger.level, unit, f"{where} (trigger level)")
    if trigger.direction not in ("rising", "falling"):
        raise ModelError(where, f"trigger direction {trigger.direction!r}", "use rising or falling")
    word = "above" if trigger.direction == "rising" else "below"
    tc = crossing_time(record.time, x, level, trigger.direction)
    if tc is None:
        raise ModelError(where, f"never goes {word} the trigger level {trigger.level} (it spans "
                         f"{_fmt(x.min(), unit)} to {_fmt(x.max(), unit)})",
                         "choose a level the record crosses, or give the start time directly")
    if tc == float(record.time[0]):
        raise ModelError(where, f"is already {word} the trigger level {trigger.level} at the first sample",
                         "the record starts after the event: log from before the release, or give the start time")
    return tc


def align(record: Record, *, start_at: Any = None, trigger: Trigger | None = None,
          trigger_model_time: float = 0.0) -> Record:
    """Shift the record so that the release (or ignition) lands on model time ``trigger_model_time``.

    Give either ``start_at`` (the record time of the model's t = 0) or a
    ``trigger``; with a trigger, the moment the record first crosses the level
    is put at ``trigger_model_time`` (the time the prediction crosses the same
    level; :func:`thrustgraph.measured.compare.align_to_prediction` works it out).

    >>> rec = loads_record("time [s],thrust [N]\\n0,0\\n1,0\\n2,10\\n3,10\\n", source="r.csv")
    >>> align(rec, trigger=Trigger.parse("thrust > 5 N")).time
    array([-1.5, -0.5,  0.5,  1.5])
    >>> align(rec, start_at="2 s").offset
    2.0
    """
    if (start_at is None) == (trigger is None):
        raise ModelError(f"{record.source}: alignment", "give either a start time or a trigger, not both or neither",
                         'e.g. start at "1.25 s", or start when "thrust > 5 N"')
    if trigger is not None:
        tc = trigger_time(record, trigger)
        off = tc - trigger_model_time
        return shift(record, off, f"aligned: {trigger.describe()} at file time {record.offset + tc:.6g} s "
                                  f"-> model time {trigger_model_time:.6g} s")
    off = _si(start_at, "s", f"{record.source}: start time")
    return shift(record, off, f"aligned: model t = 0 at file time {record.offset + off:.6g} s")


def _fmt(value: float, unit: str) -> str:
    if not unit:
        return f"{value:.6g}"
    return f"{Q_(value, Q_(1.0, unit).to_base_units().units).to(unit).magnitude:.6g} {unit}"
