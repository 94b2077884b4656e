"""An outcome's definition: key, quantity, SI and display units, label, meaning, how it is computed, where it applies.

Every number a flight is summed up by (apogee, total impulse, a parachute's
deployment speed) is one :class:`OutcomeSpec`. The core's outcomes are the
table in :mod:`thrustgraph.balance.outcomes`; a component kind adds its own through
``ComponentKind.outcomes``. The terminal summary, the JSON export, the HTML
report, study tables, optimisation limits and plot labels all read the label
and units from the spec, so each is written once.

Units are pint-readable text: ``unit`` is the SI unit the value is held in
(``""`` for a plain number), ``display`` the unit people read it in, and
``also`` further units shown beside it (an acceleration also in standard
gravities, ``g0``: ``g`` alone is a gram to pint).

Examples
--------
>>> spec = OutcomeSpec("peak_acceleration", "acceleration", "m/s^2", "m/s^2", "peak acceleration",
...                    "largest acceleration magnitude", also=("g0",))
>>> spec.header
'peak_acceleration [m/s^2]'
>>> spec.text(98.0665)
'98.067 m/s^2 (10 g0)'
>>> spec.to_si("12 g0", where="--limit peak_acceleration")
117.6798
>>> mass = OutcomeSpec("launch_mass", "mass", "kg", "kg", "launch mass", "mass at launch")
>>> mass.text(0.068), mass.text(25.0), mass.text(25000.0)
('68 g', '25 kg', '25 t')
>>> display_unit("m", 1929.8), display_unit("m", 0.004), display_unit("Pa", 5e5, "bar")
('km', 'mm', 'bar')
>>> spec.to_si("12 g", where="--limit peak_acceleration")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: --limit peak_acceleration: expected an acceleration (unit like m/s^2), got '12 g' ([mass]). Fix: write the value with a unit of acceleration, e.g. "9.80665 m/s^2" (standard gravities are g0: g is a gram).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Callable, Mapping

from ..base.errors import ModelError
from ..base.units import Q_, to_si

__all__ = ["OutcomeSpec", "always", "KEY_PATTERN", "SCALES", "display_unit"]

#: What an outcome key looks like: lower-case words joined by underscores.
KEY_PATTERN = re.compile(r"^[a-z][a-z0-9_]*$")


#: Units people read a quantity in, smallest first, each with its size in the SI unit the family is keyed by:
#: :func:`display_unit` picks the one that suits a value's magnitude (g / kg / t, mm / m / km).
SCALES: dict[str, tuple[tuple[str, float], ...]] = {
    "kg": (("mg", 1e-6), ("g", 1e-3), ("kg", 1.0), ("t", 1e3)),
    "m": (("mm", 1e-3), ("m", 1.0), ("km", 1e3)),
    "s": (("µs", 1e-6), ("ms", 1e-3), ("s", 1.0)),
    "N": (("mN", 1e-3), ("N", 1.0), ("kN", 1e3), ("MN", 1e6)),
    "N*s": (("mN*s", 1e-3), ("N*s", 1.0), ("kN*s", 1e3), ("MN*s", 1e6)),
    "W": (("mW", 1e-3), ("W", 1.0), ("kW", 1e3), ("MW", 1e6)),
    "m^3/s": (("mL/s", 1e-6), ("L/s", 1e-3), ("m^3/s", 1.0)),
    "kg/s": (("g/s", 1e-3), ("kg/s", 1.0), ("t/s", 1e3)),
}


def display_unit(unit: str, value: float, display: str | None = None) -> str:
    """The unit to show an SI value in: the largest unit of its family (:data:`SCALES`) that keeps the number at
    1 or more (the smallest for tinier values), when ``display`` (default: ``unit``) belongs to the family;
    ``display`` itself otherwise (a pressure shown in bar stays in bar).

    The one function every summary, report and plot label picks display units with.

    >>> display_unit("kg", 0.77774), display_unit("kg", 25.0), display_unit("kg", 25000.0)
    ('g', 'kg', 't')
    >>> display_unit("s", 0.113), display_unit("s", 60.0), display_unit("s", 0.0)
    ('ms', 's', 's')
    >>> display_unit("m/s", 0.001)
    'm/s'
    """
    display = unit if display is None else display
    scale = SCALES.get(unit)
    if not scale or display not in {u for u, _ in scale}:
        return display
    v = abs(float(value))
    if not math.isfinite(v) or v == 0.0:
        return display
    best = scale[0][0]
    for u, size in scale:
        if v >= size * (1.0 - 1e-12):
            best = u
    return best


def always(_: Any) -> bool:
    """every vehicle

    The predicate of an outcome that applies to every vehicle (and is always shown).
    """
    return True


@dataclass(frozen=True)
class OutcomeSpec:
    """One outcome, defined once.

    Fields
    ------
    key : name in summaries, tables and JSON (``apogee``); a kind's outcome appears as ``COMPONENT.KEY``
    quantity : what it measures, in words (``length``, ``speed``, ``impulse``)
    unit : SI unit of the value, pint-readable (``""`` for a plain number)
    display : unit people read it in (``bar`` for a pressure held in Pa)
    label : words people read (unique across the registry)
    doc : what it is and how it is computed
    compute : ``compute(flight) -> float`` from the integrated solution
        (:class:`thrustgraph.balance.outcomes.Flight`); NaN where it did not happen.
        None for a component kind's outcome (its ``summarize`` computes it).
    applies : ``applies(profile) -> bool``: which vehicles and mounts have it, asked of the
        :class:`~thrustgraph.kinds.vehicle.VehicleProfile` of the model
        (a vehicle held on a stand has no apogee)
    also : further display units shown beside ``display`` (``g0``)
    show : ``show(values) -> bool``: whether people need to see it, given every
        outcome value of the flight (a downrange equal to the range is not
        printed twice); tables and JSON always hold it
    default : a study reports it when no outcomes are named
    """

    key: str
    quantity: str
    unit: str
    display: str
    label: str
    doc: str
    compute: Callable[[Any], float] | None = None
    applies: Callable[[Any], bool] = always
    also: tuple[str, ...] = ()
    show: Callable[[Mapping[str, float]], bool] = always
    default: bool = True

    @property
    def header(self) -> str:
        """Column header in tables: ``key [unit]`` (``[1]`` for a plain number)."""
        return f"{self.key} [{self.unit or '1'}]"

    @property
    def axis_label(self) -> str:
        """Axis label of a plot: ``label [display unit]``."""
        return f"{self.label} [{self.display}]" if self.display else self.label

    def shown(self, value: float, unit: str | None = None) -> float:
        """An SI value in the display unit (or in ``unit``)."""
        unit = self.display if unit is None else unit
        if not self.unit or unit == self.unit or not math.isfinite(value):
            return float(value)
        return float(Q_(value, self.unit).to(unit).magnitude)

    def unit_for(self, value: float) -> str:
        """The unit an SI value is shown in: ``display``, scaled to the value's magnitude (:func:`display_unit`)."""
        return display_unit(self.unit, value, self.display) if self.unit else self.display

    def text(self, value: float, digits: int = 5) -> str:
        """A value as people read it, in the unit that suits its magnitude: ``'1176.6 m/s^2 (119.98 g0)'``."""
        unit = self.unit_for(value)
        main = f"{self.shown(value, unit):.{digits}g}" + (f" {unit}" if unit else "")
        extra = ", ".join(f"{self.shown(value, u):.{digits}g} {u}" for u in self.also)
        return f"{main} ({extra})" if extra else main

    def to_si(self, value: Any, where: str) -> float:
        """A value written with a unit (``"60 g0"``, ``"6 bar"``) in this outcome's SI unit, dimension checked."""
        try:
            return float(to_si(value, self.unit, where=where))
        except ModelError as exc:
            if self.quantity == "acceleration" and exc.fix and "g0" not in exc.fix:
                raise ModelError(exc.where, exc.what, exc.fix.rstrip(".") +
                                 " (standard gravities are g0: g is a gram)") from None
            raise
