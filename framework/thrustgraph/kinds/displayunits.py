"""Units of choice: the units people read values in, chosen once for every output.

Values are SI inside thrustgraph; a :class:`UnitChoice` says what people see:
``SI`` (the outcome registry's own display units: bar for a pressure, g / kg /
t by magnitude), ``imperial`` (ft, ft/s, lb, lbf, psi...), or a mapping per
quantity on top of either, ``length=ft,speed=mph`` or
``imperial,pressure=bar``. The command line takes it as ``--units``; a model
file may set its own, ``[run] units = "imperial"``, which ``--units``
overrides.

:func:`shown` is the one function that turns an SI value into the chosen
display unit; the terminal summary, the HTML report, the plots, the exports
and the overlay table all call it (through :meth:`UnitChoice.convert`).

Examples
--------
>>> imperial = parse_units("imperial")
>>> shown(54.318, "m", imperial)
(178.2086..., 'ft')
>>> shown(5.0e5, "Pa", parse_units("SI"), display="bar")
(5.0, 'bar')
>>> shown(5.0e5, "Pa", parse_units("pressure=kPa"))
(500.0, 'kPa')
>>> parse_units("length=furlong_per_hour")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: --units length=furlong_per_hour: 'furlong_per_hour' is not a unit of length. Fix: write a unit of length, e.g. length=ft or length=m.
"""

from __future__ import annotations

import difflib
import math
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field
from typing import Any, Iterator, Mapping

import numpy as np

from ..base.errors import ModelError, shorten
from .outcomespec import display_unit
from .parameters import Spec
from ..base.units import Q_

__all__ = ["UnitChoice", "QUANTITIES", "SYSTEMS", "parse_units", "shown", "quantity_of", "SI_CHOICE", "UnitsSpec",
           "axis_scale", "using", "current", "convert_array"]

#: Every quantity a choice can name: its SI unit (what identifies it) and its unit in each system ("" in SI:
#: the registry's own display unit, scaled by magnitude).
QUANTITIES: dict[str, dict[str, str]] = {
    "length": {"si": "m", "imperial": "ft"},
    "speed": {"si": "m/s", "imperial": "ft/s"},
    "acceleration": {"si": "m/s^2", "imperial": "ft/s^2"},
    "mass": {"si": "kg", "imperial": "lb"},
    "force": {"si": "N", "imperial": "lbf"},
    "impulse": {"si": "N*s", "imperial": "lbf*s"},
    "pressure": {"si": "Pa", "imperial": "psi"},
    "mass_flow": {"si": "kg/s", "imperial": "lb/s"},
    "volume": {"si": "m^3", "imperial": "gal"},
    "volume_flow": {"si": "m^3/s", "imperial": "gal/min"},
    "density": {"si": "kg/m^3", "imperial": "lb/ft^3"},
    "temperature": {"si": "K", "imperial": "degF"},
    "area": {"si": "m^2", "imperial": "in^2"},
    "power": {"si": "W", "imperial": "hp"},
    "energy": {"si": "J", "imperial": "ft*lbf"},
    "momentum": {"si": "kg*m/s", "imperial": "lb*ft/s"},
    "time": {"si": "s", "imperial": "s"},
}
#: The unit systems a choice starts from.
SYSTEMS = ("SI", "imperial")

_DIMS: dict[object, str] = {}


def quantity_of(unit: str) -> str | None:
    """The quantity (a key of :data:`QUANTITIES`) an SI unit measures, or None.

    >>> quantity_of("m/s"), quantity_of("N*s"), quantity_of("rad")
    ('speed', 'impulse', None)
    """
    if not unit:
        return None
    if not _DIMS:
        for name, units in QUANTITIES.items():
            _DIMS.setdefault(Q_(1.0, units["si"]).dimensionality, name)
    try:
        return _DIMS.get(Q_(1.0, unit).dimensionality)
    except Exception:  # noqa: BLE001 - pint raises several types for a unit it does not know
        return None


@dataclass(frozen=True)
class UnitChoice:
    """The units people read values in.

    Fields
    ------
    system : ``"SI"`` or ``"imperial"``
    chosen : quantity -> unit named one by one (over the system's)
    text : the choice as written (for messages and provenance)
    """

    system: str = "SI"
    chosen: Mapping[str, str] = field(default_factory=dict)
    text: str = "SI"

    def unit_for(self, si: str, value: float = math.nan, display: str | None = None) -> str:
        """The unit to show a value held in SI unit ``si``: the one chosen for its quantity, else the system's,
        else ``display`` (the registry's display unit, scaled to the value's magnitude in SI)."""
        q = quantity_of(si)
        if q is not None and q in self.chosen:
            return self.chosen[q]
        if q is not None and self.system == "imperial" and q != "time":
            return QUANTITIES[q]["imperial"]
        return _scaled(si, value, si if display is None else display)

    def fixed_unit(self, si: str) -> str:
        """The unit a column of values held in ``si`` is exported in: the chosen or the system's unit, else the SI
        unit itself (exports are never scaled by magnitude)."""
        q = quantity_of(si)
        if q is not None and q in self.chosen:
            return self.chosen[q]
        if q is not None and self.system == "imperial":
            return QUANTITIES[q]["imperial"]
        return si

    def convert(self, value: float, si: str, display: str | None = None) -> tuple[float, str]:
        """``(value, unit)`` shown: see :func:`shown`."""
        return shown(value, si, self, display=display)

    @property
    def is_si(self) -> bool:
        """True when nothing differs from the registry's own display units."""
        return self.system == "SI" and not self.chosen


#: The default: the registry's own display units.
SI_CHOICE = UnitChoice()

_CURRENT: ContextVar[UnitChoice] = ContextVar("thrustgraph_display_units", default=SI_CHOICE)


@contextmanager
def using(choice: UnitChoice | None) -> Iterator[UnitChoice]:
    """Show everything drawn or written inside the block in ``choice`` (None: SI): the plots of the plot
    registry and the files of the export registry read it with :func:`current`, so their functions keep their
    one-argument signatures.

    >>> with using(parse_units("imperial")):
    ...     shown(1.0, "m")
    (3.2808398950131235, 'ft')
    >>> shown(1.0, "m")
    (1.0, 'm')
    """
    token = _CURRENT.set(SI_CHOICE if choice is None else choice)
    try:
        yield _CURRENT.get()
    finally:
        _CURRENT.reset(token)


def current() -> UnitChoice:
    """The unit choice in force (:func:`using`; SI outside any)."""
    return _CURRENT.get()


def _scaled(si: str, value: float, display: str) -> str:
    """The display unit, scaled to the value's magnitude by the outcome layer (g / kg / t)."""
    return display_unit(si, value, display) if si else display


def shown(value: float, si: str, choice: UnitChoice | None = None, *, display: str | None = None
          ) -> tuple[float, str]:
    """An SI value (held in unit ``si``) as people read it: ``(number, unit)`` in the chosen unit.

    The one conversion every output uses. ``display`` is the unit the registry shows the value in by default
    (``bar`` for a vessel pressure); a pure number (``si == ""``) is shown as it is.

    >>> value, unit = shown(98.0665, "m/s^2", parse_units("acceleration=g0"))
    >>> round(value, 12), unit
    (10.0, 'g0')
    >>> shown(0.5, "", parse_units("imperial"))
    (0.5, '')
    """
    choice = current() if choice is None else choice
    if not si:
        return float(value), ""
    unit = choice.unit_for(si, value, display)
    if unit == si or not math.isfinite(value):
        return float(value), unit
    return float(Q_(value, si).to(unit).magnitude), unit


def parse_units(text: str | None, *, where: str = "--units") -> UnitChoice:
    """Read a choice: ``SI``, ``imperial``, ``QUANTITY=UNIT`` items, or a system then items, comma separated.

    >>> c = parse_units("imperial,pressure=bar")
    >>> c.system, dict(c.chosen)
    ('imperial', {'pressure': 'bar'})
    """
    if text is None or not str(text).strip():
        return SI_CHOICE
    system = "SI"
    chosen: dict[str, str] = {}
    for k, item in enumerate(p.strip() for p in str(text).split(",")):
        if not item:
            continue
        if "=" not in item:
            names = {s.lower(): s for s in SYSTEMS}
            if k > 0 or item.lower() not in names:
                close = difflib.get_close_matches(item, list(SYSTEMS) + list(QUANTITIES), n=1)
                hint = f"did you mean {close[0]!r}? " if close else ""
                raise ModelError(f"{where} {text}", f"{item!r} is neither a unit system ({', '.join(SYSTEMS)}, "
                                 "first) nor QUANTITY=UNIT", f"{hint}write e.g. imperial, or length=ft,speed=mph")
            system = names[item.lower()]
            continue
        q, unit = (s.strip() for s in item.split("=", 1))
        if q not in QUANTITIES:
            close = difflib.get_close_matches(q, list(QUANTITIES), n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"quantities: {', '.join(QUANTITIES)}"
            raise ModelError(f"{where} {item}", f"there is no quantity {q!r}", hint)
        si = QUANTITIES[q]["si"]
        try:
            Q_(1.0, si).to(unit)
        except Exception:  # noqa: BLE001 - pint raises several types
            example = QUANTITIES[q]["imperial"]
            raise ModelError(f"{where} {item}", f"{unit!r} is not a unit of {q.replace('_', ' ')}",
                             f"write a unit of {q.replace('_', ' ')}, e.g. {q}={example} or {q}={si}") from None
        chosen[q] = unit
    return UnitChoice(system=system, chosen=chosen, text=str(text).strip())


def axis_scale(si: str, values: Any, choice: UnitChoice | None = None, display: str | None = None) -> tuple[float, str]:
    """``(factor, unit)`` that turns the SI values of a plot's axis into the chosen unit (picked for the largest
    magnitude): plot ``values * factor`` and label the axis ``[unit]``. Only for units without an offset (a
    temperature axis in degF is not a scale of K).

    >>> axis_scale("m", [0.0, 54.3], parse_units("imperial"))
    (3.2808398950131235, 'ft')
    >>> axis_scale("Pa", [1e5, 5e5], display="bar")
    (1e-05, 'bar')
    """
    arr = np.asarray(values, dtype=float)
    big = float(np.nanmax(np.abs(arr))) if arr.size and np.any(np.isfinite(arr)) else math.nan
    if not si:
        return 1.0, ""
    unit = (current() if choice is None else choice).unit_for(si, big, display)
    return (1.0 if unit == si else float(Q_(1.0, si).to(unit).magnitude)), unit


def convert_array(values: Any, si: str, unit: str) -> np.ndarray:
    """SI values in another unit of the same quantity (offset units such as degF included).

    >>> convert_array([273.15, 373.15], "K", "degC").tolist()
    [0.0, 100.0]
    """
    arr = np.asarray(values, dtype=float)
    if unit == si or not si:
        return arr
    return np.asarray(Q_(arr, si).to(unit).magnitude, dtype=float)


@dataclass(frozen=True)
class UnitsSpec(Spec):
    """The ``[run] units`` setting: the units people read this model's results in (:func:`parse_units`)."""

    default: str | None = field(default="SI", kw_only=True)

    def parse(self, value: Any, *, where: str) -> UnitChoice:
        if isinstance(value, UnitChoice):
            return value
        if not isinstance(value, str):
            raise ModelError(where, f"expected a unit choice as text, got {shorten(value)}",
                             'write e.g. units = "imperial" or units = "length=ft,speed=mph"')
        return parse_units(value, where=where)

    def describe(self) -> str:
        return f"{self.doc}: SI, imperial or QUANTITY=UNIT,..., default {self.default}"
