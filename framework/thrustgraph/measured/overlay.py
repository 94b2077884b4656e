"""Several runs side by side: flights, ``--set`` variants, saved results and measured records in one overlay.

An :class:`Overlay` holds :class:`OverlayRun` entries, each a time axis, its
scalar signals in SI (by signal name) and the outcomes it reports:

* a flight (a model file, or a variant of it with changed parameters) brings
  every scalar signal and its summary (:func:`run_of_result`);
* a saved result, the CSV a ``thrustgraph export`` wrote, brings its columns
  and the outcomes written in its ``# outcome`` lines (:func:`run_of_record`;
  the record reader reads it as a saved prediction);
* a measured record brings the columns mapped to signals (``load=thrust``,
  as for ``thrustgraph compare``; a gauge pressure gets the ambient pressure of
  the first predicted run added) and no outcomes.

:meth:`Overlay.table` is the table of outcome differences: every outcome any
run reports, in registry order, its value per run and its difference from the
first run (the reference); a run that does not report an outcome has none
(``None``). The values are the runs' own summaries, unchanged. The overlay's
plots are entries of the plot registry (:mod:`thrustgraph.outputs.plotkinds`, subject
``overlay``), drawn by :mod:`thrustgraph.outputs.overlayplots`.

Examples
--------
>>> from thrustgraph import fly
>>> a, b = fly(), fly(**{"components.bottle.fill": 0.4})
>>> ov = Overlay((run_of_result(a, "fill 0.33"), run_of_result(b, "fill 0.4")))
>>> row = next(r for r in ov.table() if r.key == "apogee")
>>> row.values == (a.summary["apogee"], b.summary["apogee"])
True
>>> row.differences[1] == b.summary["apogee"] - a.summary["apogee"]
True
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from ..kinds.displayunits import current
from ..base.errors import ModelError
from ..balance.outcomes import OUTCOMES
from ..kinds.outcomespec import OutcomeSpec
from .records import ColumnMap, Record
from ..flight.result import FlightResult
from ..base.units import Q_

__all__ = ["OverlayRun", "Overlay", "TableRow", "run_of_result", "run_of_record", "read_outcome_lines",
           "mapped_columns", "unique_labels", "FLIGHT_RUN", "SAVED_RUN", "RECORD_RUN"]

#: What a run is: flown now, read from a saved export, or measured.
FLIGHT_RUN, SAVED_RUN, RECORD_RUN = "flight", "saved result", "measured record"

_OUTCOME_LINE = re.compile(r"^outcome\s+(?P<key>[a-z][a-z0-9_.\-]*)\s+\[(?P<unit>[^\[\]]*)\]\s*=\s*(?P<value>\S+)\s*$")


def read_outcome_lines(notes: Sequence[str], *, where: str) -> dict[str, tuple[float, str]]:
    """Outcomes of a saved result from its ``#`` lines (:meth:`FlightResult.outcome_lines
    <thrustgraph.flight.result.FlightResult.outcome_lines>`): key -> (value, unit as written); other notes are ignored.

    >>> read_outcome_lines(["thrustgraph 0.1.0", "outcome apogee [m] = 54.3"], where="run.csv")
    {'apogee': (54.3, 'm')}
    """
    out: dict[str, tuple[float, str]] = {}
    for note in notes:
        m = _OUTCOME_LINE.match(note)
        if not m:
            continue
        try:
            value = float(m.group("value"))
        except ValueError:
            raise ModelError(f"{where}: # {note}", f"the outcome's value {m.group('value')!r} is not a number",
                             "write it as thrustgraph export does, e.g. # outcome apogee [m] = 54.3") from None
        unit = "" if m.group("unit") in ("", "1") else m.group("unit")
        out[m.group("key")] = (value, unit)
    return out


@dataclass(frozen=True)
class OverlayRun:
    """One run of an overlay.

    Fields
    ------
    label : how plots and tables name it
    kind : :data:`FLIGHT_RUN`, :data:`SAVED_RUN` or :data:`RECORD_RUN`
    source : the model file, saved result or record it came from
    t : (n,) times, s (model time; a record shifted by its alignment)
    signals : signal name -> (n,) SI values (scalar signals; ``NAME.x`` for a vector's component)
    units : signal name -> SI unit (``""`` for a pure number)
    outcomes : outcome key -> SI value (what the run's summary holds)
    specs : outcome key -> its :class:`~thrustgraph.kinds.outcomespec.OutcomeSpec` (label, units)
    """

    label: str
    kind: str
    source: str
    t: np.ndarray
    signals: Mapping[str, np.ndarray]
    units: Mapping[str, str]
    outcomes: Mapping[str, float] = field(default_factory=dict)
    specs: Mapping[str, OutcomeSpec] = field(default_factory=dict)

    @property
    def predicted(self) -> bool:
        """A prediction (flown now or saved), not a measurement."""
        return self.kind != RECORD_RUN


@dataclass(frozen=True)
class TableRow:
    """One outcome across the runs: its spec, the value per run and the difference from the first run (SI;
    None where a run does not report it); ``shown``: a run's summary prints it (the spec's ``show`` rule: not a
    net thrust equal to the gross, a side force of rounding size, an end point...), so the text table does."""

    key: str
    spec: OutcomeSpec
    values: tuple[float | None, ...]
    differences: tuple[float | None, ...]
    shown: bool = True


def run_of_result(result: FlightResult, label: str, source: str = "", kind: str = FLIGHT_RUN) -> OverlayRun:
    """A flight as an overlay run: its scalar signals (a vector's as ``NAME.x``, ``.y``, ``.z``) and summary."""
    signals: dict[str, np.ndarray] = {}
    units: dict[str, str] = {}
    for name, arr in result.signals.items():
        if arr.ndim == 1:
            signals[name], units[name] = arr, result.unit(name)
        else:
            for k, c in enumerate("xyz"):
                signals[f"{name}.{c}"], units[f"{name}.{c}"] = arr[:, k], result.unit(name)
    specs = {k: result.outcome_specs.get(k) or _loose_spec(k, result.unit(k)) for k in result.summary}
    return OverlayRun(label=label, kind=kind, source=source or (result.provenance or {}).get("model_name", ""),
                      t=result.t, signals=signals, units=units, outcomes=dict(result.summary), specs=specs)


def _loose_spec(key: str, unit: str) -> OutcomeSpec:
    """The spec of an outcome the registry does not hold (a component's ``NAME.KEY`` read from a saved result)."""
    return OutcomeSpec(key, "", unit, unit, key.replace("_", " "), "read from a saved result")


def run_of_record(record: Record, label: str, mapping: Sequence[ColumnMap] = (),
                  ambient: tuple[np.ndarray, np.ndarray] | None = None) -> OverlayRun:
    """A record as an overlay run.

    A saved result (:attr:`Record.exported`) brings every column under its own name and the outcomes of its
    ``# outcome`` lines. A measured record brings the columns ``mapping`` names, each as its signal; a gauge
    pressure is made absolute with ``ambient`` (times, ambient pressure in Pa) of a predicted run.
    """
    if record.exported:
        outcomes: dict[str, float] = {}
        specs: dict[str, OutcomeSpec] = {}
        for key, (value, unit) in read_outcome_lines(record.notes, where=record.source).items():
            spec = OUTCOMES.get(key) or _loose_spec(key, unit)
            outcomes[key] = _to_unit(value, unit, spec.unit, f"{record.source}: outcome {key!r}")
            specs[key] = spec
        return OverlayRun(label=label, kind=SAVED_RUN, source=record.source, t=record.time,
                          signals=dict(record.columns), units=_si_units(record), outcomes=outcomes, specs=specs)
    signals: dict[str, np.ndarray] = {}
    units: dict[str, str] = {}
    for cmap in mapped_columns(record, mapping):
        x = record.column(cmap.column)
        if cmap.pressure == "gauge":
            if ambient is None:
                raise ModelError(f"{record.source}: column {cmap.column!r}", "is a gauge pressure, but no "
                                 "predicted run gives the ambient pressure to make it absolute",
                                 "overlay it with a model or a saved result, or mark the column --absolute")
            x = x + np.interp(record.time, ambient[0], ambient[1])
        signals[cmap.signal] = x
        units[cmap.signal] = _si_units(record)[cmap.column]
    return OverlayRun(label=label, kind=RECORD_RUN, source=record.source, t=record.time, signals=signals, units=units)


def mapped_columns(record: Record, mapping: Sequence[ColumnMap]) -> list[ColumnMap]:
    """The mappings of a measured record's columns, checked (a pressure says gauge or absolute); a record none of
    whose columns is mapped is refused. Cheap: callers check every record before any flight."""
    if not mapping:
        raise ModelError(f"{record.source}", "a measured record is overlaid through the columns mapped to signals, "
                         "and none is mapped", "add e.g. --map load=thrust (record column load drawn as the thrust)")
    mine = [c for c in mapping if c.column in record.columns]
    if not mine:
        raise ModelError(f"{record.source}", f"has none of the mapped columns "
                         f"({', '.join(c.column for c in mapping)}; its columns: {', '.join(record.columns)})",
                         "map a column the record has, e.g. --map load=thrust")
    for cmap in mine:
        cmap.check(record)
    return mine


def _si_units(record: Record) -> dict[str, str]:
    """The SI unit of every column of a record (a saved result's headers are SI already)."""
    return dict(record.units) if record.exported else dict(record.si_units)


def _to_unit(value: float, unit: str, si: str, where: str) -> float:
    if unit == si or not math.isfinite(value):
        return value
    try:
        return float(Q_(value, unit or "").to(si or "").magnitude)
    except Exception:  # noqa: BLE001 - pint raises several types
        raise ModelError(where, f"is written in [{unit or '1'}], which is not a unit of [{si or '1'}]",
                         "write the outcome in its own unit, as thrustgraph export does") from None


@dataclass(frozen=True)
class Overlay:
    """Runs side by side; the first is the reference of the differences."""

    runs: tuple[OverlayRun, ...]

    def __post_init__(self) -> None:
        if not self.runs:
            raise ModelError("overlay", "no run to overlay", "name at least one model, saved result or record")

    def ambient(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(times, ambient pressure) of the first predicted run that has it."""
        for run in self.runs:
            if run.predicted and "ambient_pressure" in run.signals:
                return run.t, run.signals["ambient_pressure"]
        return None

    def table(self) -> list[TableRow]:
        """Every outcome a run reports, in registry order (then the others as they come), across the runs."""
        keys: list[str] = [k for k in OUTCOMES if any(k in r.outcomes for r in self.runs)]
        for r in self.runs:
            keys += [k for k in r.outcomes if k not in keys]
        rows = []
        for key in keys:
            spec = next(r.specs[key] for r in self.runs if key in r.specs)
            values = tuple(r.outcomes.get(key) for r in self.runs)
            ref = values[0]
            diffs = tuple(None if ref is None or v is None else v - ref for v in values)
            shown = any(key in r.outcomes and r.specs.get(key, spec).show(r.outcomes) for r in self.runs)
            rows.append(TableRow(key, spec, values, diffs, shown))
        return rows

    def format_table(self) -> str:
        """The table of outcome differences as text for people: values in each outcome's display unit, or in the
        units of choice in force (:func:`thrustgraph.kinds.displayunits.using`).

        It holds the outcomes the runs' summaries print (:attr:`TableRow.shown`; the CSV table holds every one),
        and a difference within rounding (1e-9 of the values) reads ``+0``."""
        rows = [row for row in self.table() if row.shown]
        labels = [r.label for r in self.runs]
        width = max([30] + [len(row.spec.label) for row in rows])
        head = [("outcome", width)] + [(lab, max(14, len(lab))) for lab in labels]
        head += [(f"{lab} - {labels[0]}", max(14, len(lab) + len(labels[0]) + 3)) for lab in labels[1:]]
        lines = ["  ".join(f"{h:<{w}s}" for h, w in head).rstrip()]
        for row in rows:
            finite = [abs(v) for v in row.values if v is not None and math.isfinite(v)]
            unit = current().unit_for(row.spec.unit, max(finite, default=math.nan), row.spec.display) \
                if row.spec.unit else ""
            cells = [f"{row.spec.label:<{width}s}"]
            for (_, w), v in zip(head[1:], row.values):
                cells.append(f"{_shown(row.spec, v, unit):<{w}s}")
            for (_, w), d, v in zip(head[1 + len(labels):], row.differences[1:], row.values[1:]):
                if d is not None and v is not None and abs(d) <= 1e-9 * max(abs(v), abs(row.values[0] or 0.0)):
                    d = 0.0        # the rounding of two equal results
                rel = ""
                if d is not None and row.values[0]:
                    rel = f" ({100.0 * d / abs(row.values[0]):+.3g} %)"
                cells.append(f"{_shown(row.spec, d, unit, signed=True)}{rel}".ljust(w))
            lines.append("  ".join(cells).rstrip())
        if not rows:
            lines.append("(no run reports an outcome: measured records have none)")
        return "\n".join(lines)

    def to_csv(self) -> str:
        """The table of outcome differences as CSV: one row per outcome; SI values, the unit in each header.

        Columns: ``outcome``, ``label``, ``unit``, one value per run (headed by its label) and one difference
        per run after the first (``LABEL - REFERENCE``); an empty cell where a run does not report it.
        """
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        labels = [r.label for r in self.runs]
        w.writerow(["outcome", "label", "unit"] + labels + [f"{lab} - {labels[0]}" for lab in labels[1:]])
        for row in self.table():
            cells = ["" if v is None else repr(float(v)) for v in row.values]
            cells += ["" if d is None else repr(float(d)) for d in row.differences[1:]]
            w.writerow([row.key, row.spec.label, row.spec.unit or "1"] + cells)
        return buf.getvalue()


def _shown(spec: OutcomeSpec, value: float | None, unit: str, signed: bool = False) -> str:
    if value is None:
        return "-"
    number = spec.shown(value, unit) if not signed else value * _factor(spec.unit, unit)
    text = f"{number:{'+' if signed else ''}.5g}"
    return f"{text} {unit}" if unit else text


def _factor(si: str, unit: str) -> float:
    """Size of one SI unit in ``unit``, for differences (a difference of temperatures has no offset)."""
    if not si or unit == si:
        return 1.0
    return float(Q_(1.0, si).to(unit).magnitude) if not _offset(unit) else \
        float(Q_(1.0, f"delta_{unit}").to(si).magnitude) ** -1


def _offset(unit: str) -> bool:
    return unit in ("degC", "degF", "celsius", "fahrenheit", "degR")


def unique_labels(labels: Sequence[str]) -> list[str]:
    """Labels made unique by a number after repeats: ``['a', 'a (2)', 'b']``.

    >>> unique_labels(["a", "a", "b"])
    ['a', 'a (2)', 'b']
    """
    out: list[str] = []
    for lab in labels:
        name, k = lab, 1
        while name in out:
            k += 1
            name = f"{lab} ({k})"
        out.append(name)
    return out

