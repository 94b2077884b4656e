"""pandas DataFrames of results: a flight's time series, a study's designs, dispersion statistics, sensitivities.

pandas is optional (``pip install 'thrustgraph[pandas]'``): :func:`pandas`
imports it when a frame is asked for and says how to install it when it is
missing. Every frame holds SI values, as the CSV exports do, under plain
column names (``altitude``, ``thrust_vector.x``); the unit of each column is
in ``frame.attrs["units"]`` (``""`` for a pure number), what produced it in
``frame.attrs["provenance"]`` or ``frame.attrs["info"]``.

The methods that build them are ``FlightResult.to_pandas``,
``DesignTable.to_pandas``, ``Dispersion.to_pandas`` (the statistics per
outcome) and ``Sensitivity.to_pandas``; each calls a function here.

Examples
--------
>>> from thrustgraph import fly
>>> df = fly().to_pandas()
>>> df.index.name, df.attrs["units"]["altitude"], df["phase"].iloc[0]
('time', 'm', 'liquid thrust')
"""

from __future__ import annotations

import importlib
from typing import Any

import numpy as np

from .errors import ThrustgraphError

__all__ = ["pandas", "flight_frame", "design_frame", "statistics_frame", "sensitivity_frame"]


def pandas() -> Any:
    """The pandas module; one clear error when it is not installed."""
    try:
        return importlib.import_module("pandas")
    except ImportError:
        raise ThrustgraphError("DataFrames need pandas, which is not installed. Fix: pip install "
                               "'thrustgraph[pandas]' (or pip install pandas)") from None


def flight_frame(result: Any) -> Any:
    """A flight's time series: one row per output time (index ``time``, s), every column of the CSV export and
    the phase (categorical); units and provenance in ``attrs``."""
    pd = pandas()
    cols = result.columns()
    data = {name: np.asarray(values, dtype=float) for name, _, values in cols[1:]}
    frame = pd.DataFrame(data, index=pd.Index(np.asarray(result.t, dtype=float), name="time"))
    frame["phase"] = pd.Categorical([result.phase_at(float(t)) for t in result.t],
                                    categories=list(dict.fromkeys(p.name for p in result.phases)))
    frame.attrs["units"] = {"time": "s", **{name: unit for name, unit, _ in cols[1:]}}
    frame.attrs["provenance"] = dict(result.provenance or {})
    return frame


def design_frame(table: Any, outcome_units: dict[str, str]) -> Any:
    """A study's designs: one row per design (index ``design``): ``status``, each parameter by key path and
    each outcome (SI, in ``outcome_units``), ``note``; units and the study's description in ``attrs``."""
    pd = pandas()
    data: dict[str, Any] = {"status": pd.Categorical(np.asarray(table.status, dtype=str))}
    units: dict[str, str] = {}
    for j, p in enumerate(table.params):
        data[p.path] = np.asarray(table.x[:, j], dtype=float)
        units[p.path] = _pint(p.si)
    for k, o in enumerate(table.outputs):
        data[o] = np.asarray(table.values[:, k], dtype=float)
        units[o] = outcome_units[o]
    data["note"] = list(table.notes)
    frame = pd.DataFrame(data, index=pd.RangeIndex(len(table), name="design"))
    frame.attrs["units"] = units
    frame.attrs["info"] = {"kind": table.kind, "interrupted": table.interrupted, **dict(table.info)}
    return frame


def statistics_frame(dispersion: Any, outcome_units: dict[str, str]) -> Any:
    """Dispersion statistics: one row per outcome (index ``outcome``), columns count, mean, sd, min, p05, p50,
    p95, max (SI) and ``unit`` (from ``outcome_units``)."""
    pd = pandas()
    rows = {o: dict(s) for o, s in dispersion.stats.items()}
    frame = pd.DataFrame.from_dict(rows, orient="index")
    frame.index.name = "outcome"
    frame["unit"] = [outcome_units[o] for o in frame.index]
    frame.attrs["units"] = {o: outcome_units[o] for o in frame.index}
    frame.attrs["info"] = {"seed": dispersion.seed, **dict(dispersion.table.info)}
    return frame


def sensitivity_frame(sens: Any, outcome_units: dict[str, str]) -> Any:
    """Local sensitivities: one row per (outcome, parameter) (a two-level index): the outcome's nominal value
    and unit, the parameter's nominal value and unit (SI), the derivative (SI per SI), the elasticity, the step
    (SI) and the difference scheme."""
    pd = pandas()
    records = []
    for k, o in enumerate(sens.outputs):
        for j, p in enumerate(sens.params):
            records.append({"outcome": o, "parameter": p.path, "outcome_value": float(sens.nominal[k]),
                            "outcome_unit": outcome_units[o], "parameter_value": float(p.nominal),
                            "parameter_unit": _pint(p.si), "derivative": float(sens.derivative[k, j]),
                            "elasticity": float(sens.elasticity[k, j]), "step": float(sens.steps[j]),
                            "scheme": sens.scheme[j]})
    frame = pd.DataFrame.from_records(records).set_index(["outcome", "parameter"])
    frame.attrs["info"] = dict(sens.table.info)
    return frame


def _pint(unit: str) -> str:
    """A parameter's SI unit as the frames write it (``""`` for a plain number)."""
    return "" if unit in ("", "dimensionless") else unit
