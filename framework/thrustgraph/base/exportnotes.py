"""The notes a saved result carries: what produced it (provenance) and its outcomes, one line each.

Every export of a flight (CSV, JSON, Parquet) carries the same notes: the
CSV as its ``#`` lines, the Parquet file in its schema metadata, the JSON
file as its ``provenance`` and ``summary`` objects, from which the record
reader (:func:`thrustgraph.measured.records.read_record`) writes the same
lines again. The first line, ``thrustgraph VERSION``, marks a file as a saved
prediction; an outcome line, ``outcome KEY [UNIT] = VALUE``, holds an SI value
as the ``repr`` of its float (which reads back to the same float).
These two functions are the one place the lines are written.

Examples
--------
>>> provenance_notes({"thrustgraph": "0.1.0", "plugins": {"tg_water": "0.1.0"}, "model_name": "demo",
...                   "model_sha256": "ab12"})
['thrustgraph 0.1.0', 'plugins: tg_water = 0.1.0', 'model: demo', 'model sha256: ab12']
>>> outcome_note("apogee", "m", 54.25), outcome_note("specific_impulse", "", float("nan"))
('outcome apogee [m] = 54.25', 'outcome specific_impulse [1] = nan')
"""

from __future__ import annotations

from typing import Any, Mapping

__all__ = ["provenance_notes", "outcome_note"]


def provenance_notes(provenance: Mapping[str, Any] | None) -> list[str]:
    """What produced a result, one line each: tool version, plugin versions, model name and hash (``?`` where
    the provenance does not say)."""
    prov = provenance or {}
    plugins = prov.get("plugins") or {}
    return [f"thrustgraph {prov.get('thrustgraph', '?')}",
            "plugins: " + ("; ".join(f"{k} = {v}" for k, v in plugins.items()) or "(none)"),
            f"model: {prov.get('model_name', '?')}",
            f"model sha256: {prov.get('model_sha256', '?')}"]


def outcome_note(key: str, unit: str, value: float) -> str:
    """One outcome as a line ``outcome KEY [UNIT] = VALUE``: SI value, ``[1]`` for a pure number."""
    return f"outcome {key} [{unit or '1'}] = {float(value)!r}"
