"""The flight result: arrays, phases, events, the balance ledger and the closure audits.

A :class:`FlightResult` is built in one place (:func:`thrustgraph.flight.integrate.integrate`)
and has fixed fields. Signals are SI numpy arrays; :meth:`FlightResult.quantity`
returns them as pint quantities for people.

Examples
--------
>>> from thrustgraph import fly
>>> r = fly()                      # the bundled bottle rocket
>>> r.success, r.phases[0].name
(True, 'liquid thrust')
>>> r.quantity("altitude").max().to("m").units
<Unit('meter')>
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..kinds.displayunits import UnitChoice, convert_array, current, shown
from ..base.frames import flight_frame
from ..base.outputfiles import atomic_write
from ..kinds.signalunits import SIGNAL_UNITS, STANDARD_KEY_UNITS, TEXT_UNIT, signal_unit
from ..base.units import Q_
from ..base.errors import ThrustgraphError
from ..base.exportnotes import outcome_note, provenance_notes

__all__ = ["Phase", "Event", "Audit", "FlightResult", "SIGNAL_UNITS", "STANDARD_KEY_UNITS", "signal_unit",
           "TEXT_UNIT"]

@dataclass(frozen=True)
class Phase:
    """A stretch of flight with one set of modes: name, start and end time (s)."""

    name: str
    t_start: float
    t_end: float

    @property
    def duration(self) -> float:
        return self.t_end - self.t_start


@dataclass(frozen=True)
class Event:
    """Something that happened: time (s), what, which component, a detail line."""

    t: float
    name: str
    component: str = "vehicle"
    detail: str = ""


@dataclass(frozen=True)
class Audit:
    """Closure residuals of a run.

    mass_residual : initial mass - final mass - integral of the outflow, kg
    mass_relative : the same divided by the initial mass
    momentum_residual : vehicle momentum + internal momentum + momentum carried
        away by the exhaust (ground frame) - initial momentum - impulse of the
        external forces, kg m/s (3-vector)
    momentum_relative : its magnitude divided by the largest momentum scale
    internal_defect : with the internal-momentum term on, the change of the
        contents' momentum computed from the states minus the integral of the
        modelled (quasi-steady) rate, kg m/s: the size of what the quasi-steady
        model leaves out (the column's own acceleration); 0 when the term is off.
        The momentum residual is computed with the modelled rate.
    """

    mass_residual: float
    mass_relative: float
    momentum_residual: tuple[float, float, float]
    momentum_relative: float
    internal_defect: float = 0.0


@dataclass
class FlightResult:
    """Everything a flight produced.

    Fields
    ------
    t : (n,) times, s; a phase boundary appears twice (left and right values)
    y : (n_states, n) states
    state_names : names of the rows of ``y``
    signals : name -> (n,) or (n, 3) SI array
    ledger : (component, term) -> (n, 3) force of that term, N; their sum is M a
    phases, events : what happened when
    audit : closure residuals
    success, status, message : how the run ended (status 0 ended normally)
    nfev : right-hand-side evaluations
    summary : outcome key -> SI value: every outcome of the registry (:mod:`thrustgraph.balance.outcomes`) that applies
        to the vehicle and happened, then the outcomes component kinds add, as ``COMPONENT.KEY``
    cautions : safety cautions of the model
    provenance : tool and plugin versions, model hash
    dropped : stage name -> the flight of a stage dropped at a separation, flown on as its own vehicle
    units : SI units of the signals and summary entries that component kinds declare
    outcome_specs : summary key -> its :class:`~thrustgraph.kinds.outcomespec.OutcomeSpec` (label, units, meaning)
    vehicle : the :class:`~thrustgraph.kinds.vehicle.VehicleProfile` of what flew (which outcomes and plots fit it)

    Thrust signals: ``thrust`` (and ``thrust_vector``) is the gross thrust, the momentum flux and pressure thrust
    of every opening; ``net_thrust`` (``net_thrust_vector``) adds the momentum of the fluid entering through
    sources (an inlet's ram drag, a hose's inflow): the force the flow puts on the vehicle. Both along the body
    axis. ``path_acceleration`` is the acceleration along the path, signed (negative while slowing down).
    """

    t: np.ndarray
    y: np.ndarray
    state_names: tuple[str, ...]
    signals: dict[str, np.ndarray]
    ledger: dict[tuple[str, str], np.ndarray]
    phases: list[Phase]
    events: list[Event]
    audit: Audit
    success: bool
    status: int
    message: str
    nfev: int
    summary: dict[str, float] = field(default_factory=dict)
    cautions: list[str] = field(default_factory=list)
    provenance: dict[str, Any] = field(default_factory=dict)
    dropped: dict[str, "FlightResult"] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    outcome_specs: dict[str, Any] = field(default_factory=dict)
    vehicle: Any = None

    # -- access ------------------------------------------------------------
    @staticmethod
    def unit_of(name: str) -> str:
        """SI unit of a core signal or a standard key by its name alone (``""`` when the name does not say; a
        result's :meth:`unit` also knows what its components' kinds declare)."""
        return signal_unit(name) or ""

    def unit(self, name: str) -> str:
        """SI unit of a signal (or of one component ``NAME.x`` of a vector signal) or summary entry of this
        result, from the one place units come from (:func:`signal_unit`, the outcome registry); ``""`` for a
        pure number."""
        if name in self.units:
            return self.units[name]
        spec = self.outcome_specs.get(name)
        if spec is not None:
            return spec.unit
        base, _, comp = name.rpartition(".")
        if comp in ("x", "y", "z") and base in self.signals and self.signals[base].ndim == 2:
            return self.unit(base)
        return signal_unit(name) or ""

    def signal(self, name: str) -> np.ndarray:
        """A signal as an SI array; raises KeyError listing the valid names."""
        if name not in self.signals:
            raise KeyError(f"no signal {name!r}; available: {', '.join(sorted(self.signals))}")
        return self.signals[name]

    def quantity(self, name: str):
        """A signal as a pint quantity array."""
        return Q_(self.signal(name), self.unit(name))

    def state(self, name: str) -> np.ndarray:
        """One row of ``y`` by state name (e.g. ``bottle.liquid_mass``)."""
        return self.y[self.state_names.index(name)]

    def phase_at(self, t: float) -> str:
        for ph in self.phases:
            if ph.t_start <= t <= ph.t_end:
                return ph.name
        return ""

    # -- export ------------------------------------------------------------
    def columns(self) -> list[tuple[str, str, np.ndarray]]:
        """Flat columns (header, unit, values) of every scalar signal and vector component."""
        cols = [("time", "s", self.t)]
        for name in sorted(self.signals):
            arr = self.signals[name]
            unit = self.unit(name)
            if arr.ndim == 1:
                cols.append((name, unit, arr))
            else:
                for k, c in enumerate("xyz"):
                    cols.append((f"{name}.{c}", unit, arr[:, k]))
        for (comp, term), arr in sorted(self.ledger.items()):
            for k, c in enumerate("xyz"):
                cols.append((f"ledger.{comp}.{term.replace(' ', '_')}.{c}", "N", arr[:, k]))
        return cols

    def shown_columns(self, units: UnitChoice | None = None) -> list[tuple[str, str, np.ndarray]]:
        """:meth:`columns` in the units of choice (``units``, else those in force,
        :func:`thrustgraph.kinds.displayunits.using`): a quantity chosen (or of the imperial system) converted, the rest
        SI; never scaled by magnitude."""
        choice = current() if units is None else units
        if choice.is_si:
            return self.columns()
        out = []
        for name, unit, values in self.columns():
            to = choice.fixed_unit(unit)
            out.append((name, to, convert_array(values, unit, to)))
        return out

    def to_csv(self, *, provenance: bool = False) -> str:
        """CSV text: one row per output time; every header carries its SI unit as ``name [unit]`` (``[1]`` for a
        pure number), the last column ``phase [text]`` the phase's name.

        With ``provenance=True`` the text starts with ``#`` comment lines
        naming the tool version, the plugin versions and the model hash (what
        :meth:`write_csv` writes) and the summary (:meth:`outcome_lines`);
        :func:`thrustgraph.measured.records.read_record` reads such a file back (a time
        repeated at a phase boundary holds the values just before and just after it; ``nan`` where a signal has
        no value, e.g. a stage's after it was dropped). Values are SI, or in the units of choice in force
        (:meth:`shown_columns`; each header names its unit either way).

        >>> from thrustgraph import fly
        >>> head = fly().to_csv().splitlines()[0].split(",")
        >>> head[0], head[-1], [h for h in head if h.startswith("axis")]
        ('time [s]', 'phase [text]', ['axis.x [1]', 'axis.y [1]', 'axis.z [1]'])
        """
        cols = self.shown_columns()
        buf = io.StringIO()
        if provenance:
            buf.writelines(f"# {line}\n" for line in self.provenance_lines() + self.outcome_lines())
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([f"{n} [{u or '1'}]" for n, u, _ in cols] + [f"phase [{TEXT_UNIT}]"])
        data = np.column_stack([c for _, _, c in cols])
        for i, row in enumerate(data):
            w.writerow([repr(float(v)) for v in row] + [self.phase_at(float(self.t[i]))])
        return buf.getvalue()

    def to_json(self) -> str:
        """JSON text: summary, phases, events, audit, cautions and provenance, then the time series.

        Each summary entry holds its SI ``value``, its SI ``unit`` and its ``label``, from the outcome registry;
        under units of choice other than SI (:func:`thrustgraph.kinds.displayunits.using`) also ``shown``, the value and
        unit people read.

        ``series`` holds the columns of the CSV export (:meth:`to_csv`), in its order, one object per column on
        one line: its ``name``, its ``unit`` (SI, or the unit of choice in force, as the CSV header says; ``""``
        for a pure number, ``"text"`` for the ``phase`` column, the last) and its ``values``, one per output time
        (a time repeated at a phase boundary as in the CSV; ``null`` where a signal has no value). Strict JSON: a
        number that is not finite is written as ``null``. :func:`thrustgraph.measured.records.read_record` reads
        the file back as it reads the CSV export, so ``compare`` and ``overlay`` take it.

        >>> from thrustgraph import fly
        >>> import json
        >>> r = fly()
        >>> doc = json.loads(r.to_json())
        >>> [c["name"] for c in doc["series"][:2]], doc["series"][0]["unit"], doc["series"][-1]["unit"]
        (['time', 'acceleration.x'], 's', 'text')
        >>> doc["series"][0]["values"] == r.t.tolist()
        True
        """
        doc = {
            "summary": {k: self._summary_entry(k, v) for k, v in self.summary.items()},
            "phases": [{"name": p.name, "start_s": p.t_start, "end_s": p.t_end} for p in self.phases],
            "events": [{"t_s": e.t, "name": e.name, "component": e.component, "detail": e.detail} for e in self.events],
            "audit": {"mass_residual_kg": self.audit.mass_residual, "mass_relative": self.audit.mass_relative,
                      "momentum_residual_kg_m_s": list(self.audit.momentum_residual),
                      "momentum_relative": self.audit.momentum_relative},
            "vehicle": self.vehicle.kind if self.vehicle is not None else None,
            "success": self.success, "message": self.message, "cautions": self.cautions,
            "provenance": self.provenance,
        }
        # Strict JSON: a number that is not finite (an audit left out of a run) is written as null.
        head = json.dumps(_finite(doc), indent=2, allow_nan=False)
        columns = [{"name": n, "unit": u, "values": np.asarray(v, dtype=float).tolist()}
                   for n, u, v in self.shown_columns()]
        columns.append({"name": "phase", "unit": TEXT_UNIT, "values": [self.phase_at(float(t)) for t in self.t]})
        # the series last, a column per line: the summary above stays readable
        lines = ",\n".join("    " + json.dumps(_finite(c), allow_nan=False) for c in columns)
        return head[:-2] + ',\n  "series": [\n' + lines + "\n  ]\n}\n"

    def _summary_entry(self, key: str, value: float) -> dict[str, Any]:
        spec = self.outcome_specs.get(key)
        entry: dict[str, Any] = {"value": value, "unit": self.unit(key)}
        if spec is not None:
            entry["label"] = spec.label
        choice = current()
        if not choice.is_si:     # the value as the units of choice show it, beside the SI value
            v, u = shown(value, entry["unit"], choice, display=spec.display if spec is not None else None)
            entry["shown"] = {"value": v, "unit": u}
        return entry

    # -- export to files (added for the command line and the Python API) -----
    def provenance_lines(self) -> list[str]:
        """What produced this result, one line each: tool version, plugin versions, model name and hash.

        >>> from thrustgraph import fly
        >>> fly().provenance_lines()[0]
        'thrustgraph 0.1.0'
        """
        return provenance_notes(self.provenance)

    def outcome_lines(self) -> list[str]:
        """The summary as lines ``outcome KEY [UNIT] = VALUE`` (SI; ``repr`` of the float, which reads back
        exactly): the CSV export writes them among its ``#`` lines, so a saved result keeps its outcomes
        (:func:`thrustgraph.measured.overlay.run_of_record` reads them).

        >>> from thrustgraph import fly
        >>> fly().outcome_lines()[0].startswith("outcome flight_time [s] = ")
        True
        """
        return [outcome_note(k, self.unit(k), v) for k, v in self.summary.items()]

    def to_pandas(self):
        """The time series as a pandas DataFrame (optional dependency ``pandas``): index ``time`` (s), every
        column of :meth:`columns` in SI and the ``phase``; units in ``attrs["units"]``
        (:func:`thrustgraph.base.frames.flight_frame`)."""
        return flight_frame(self)

    def write_csv(self, path: Any) -> None:
        """Write the time series to a CSV file (atomically), with provenance comment lines (``#``) first."""

        atomic_write(path, self.to_csv(provenance=True))

    def write_json(self, path: Any) -> None:
        """Write summary, phases, events, audits, cautions, provenance and the time series to a JSON file
        (atomically; :meth:`to_json`)."""

        atomic_write(path, self.to_json())

    def to_arrow(self):
        """The time series as a ``pyarrow.Table`` (optional dependency ``pyarrow``).

        Column names are those of :meth:`columns`; each field's metadata holds
        its SI ``unit`` (or the unit of choice in force, :meth:`shown_columns`);
        the schema metadata holds the provenance as JSON under
        ``thrustgraph.provenance`` and, under ``thrustgraph.notes``, the CSV
        export's ``#`` lines as a JSON list (the provenance lines and the
        outcomes), so :func:`thrustgraph.measured.records.read_record` reads a
        Parquet export back as it reads the CSV one.
        """
        try:
            import pyarrow as pa
        except ImportError:
            raise ThrustgraphError("Parquet output needs pyarrow, which is not installed. Fix: pip install "
                                   "'thrustgraph[parquet]' (or pip install pyarrow), or write CSV instead.") from None
        fields, arrays = [], []
        for name, unit, values in self.shown_columns():
            fields.append(pa.field(name, pa.float64(), metadata={"unit": unit}))
            arrays.append(pa.array(np.asarray(values, dtype=float)))
        fields.append(pa.field("phase", pa.string()))
        arrays.append(pa.array([self.phase_at(float(t)) for t in self.t], type=pa.string()))
        meta = {"thrustgraph.provenance": json.dumps(self.provenance, sort_keys=True),
                "thrustgraph.notes": json.dumps(self.provenance_lines() + self.outcome_lines())}
        return pa.Table.from_arrays(arrays, schema=pa.schema(fields, metadata=meta))

    def to_parquet(self) -> bytes:
        """The time series as Parquet file content (see :meth:`to_arrow`)."""
        table = self.to_arrow()
        import pyarrow as pa
        import pyarrow.parquet as pq

        sink = pa.BufferOutputStream()
        pq.write_table(table, sink)
        return sink.getvalue().to_pybytes()

    def write_parquet(self, path: Any) -> None:
        """Write the time series to a Parquet file (atomically); needs pyarrow."""

        atomic_write(path, self.to_parquet())

    def ledger_along(self, direction: str = "axis") -> dict[tuple[str, str], np.ndarray]:
        """Every ledger term projected on a direction: N, shape (n,) per (component, term).

        ``direction`` is ``"axis"`` (the body axis at each instant, signal
        ``axis``) or a world axis ``"x"``, ``"y"``, ``"z"`` (z up).

        >>> from thrustgraph import fly
        >>> r = fly()
        >>> w = r.ledger_along("z")[("vehicle", "weight")]
        >>> bool(np.allclose(w, -9.80665 * r.signals["mass"]))
        True
        """
        if direction == "axis":
            e = self.signals["axis"]
            return {k: np.einsum("ij,ij->i", v, e) for k, v in self.ledger.items()}
        if direction not in ("x", "y", "z"):
            raise ValueError(f"direction must be 'axis', 'x', 'y' or 'z', got {direction!r}")
        k = "xyz".index(direction)
        return {key: v[:, k].copy() for key, v in self.ledger.items()}



def _finite(value: Any) -> Any:
    """A copy of a JSON document with every NaN or infinity replaced by None (null).

    >>> _finite({"a": [1.0, float("nan")], "b": float("inf")})
    {'a': [1.0, None], 'b': None}
    """
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value
