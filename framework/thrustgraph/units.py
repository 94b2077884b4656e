"""The one unit registry of thrustgraph, and the parser that checks dimensions.

Quantities arrive at the edges (model files, the command line, API calls) as
strings such as ``"5 bar"`` or as pint quantities. :func:`to_si` checks the
dimension against the unit the parameter is declared in and returns a plain
SI float; nothing inside the integrator ever sees a pint object.

Examples
--------
>>> to_si("60 psi", "Pa", where="components.bottle.gauge_pressure")
413685.4...
>>> round(to_si("2 L", "m^3"), 12)
0.002
>>> to_si("1", "deg", where="launch.elevation")
Traceback (most recent call last):
...
thrustgraph.errors.ModelError: launch.elevation: expected an angle with its unit, got '1'. Fix: write the unit, e.g. "45 deg" (a bare number would be read as radians).
>>> to_si("5 kg", "Pa", where="components.bottle.gauge_pressure")
Traceback (most recent call last):
...
thrustgraph.errors.ModelError: components.bottle.gauge_pressure: expected a pressure (unit like Pa), got '5 kg' ([mass]). Fix: write the value with a unit of pressure, e.g. "5 bar" or "72 psi".
"""

from __future__ import annotations

import math
from typing import Any

import pint

from .errors import ModelError

__all__ = ["ureg", "Q_", "to_si", "si_unit", "format_quantity", "describe_dimension"]

ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
pint.set_application_registry(ureg)
Q_ = ureg.Quantity

_EXAMPLES = {
    "[mass] / [length] / [time] ** 2": ("pressure", '"5 bar" or "72 psi"'),
    "[length] ** 3": ("volume", '"2 L" or "500 mL"'),
    "[length]": ("length", '"22 mm" or "1.2 m"'),
    "[mass]": ("mass", '"150 g" or "0.2 kg"'),
    "[length] ** 2": ("area", '"3.8 cm^2"'),
    "[time]": ("time", '"0.5 s"'),
    "[length] / [time]": ("speed", '"30 m/s"'),
    "[length] / [time] ** 2": ("acceleration", '"9.80665 m/s^2"'),
    "[mass] / [time]": ("mass flow", '"0.4 kg/s"'),
    "[mass] / [length] ** 3": ("density", '"998 kg/m^3"'),
    "[temperature]": ("temperature", '"20 degC" or "293 K"'),
    "[length] * [mass] / [time] ** 2": ("force", '"12 N" or "3 lbf"'),
    "[length] * [mass] / [time]": ("impulse", '"10 N*s"'),
    "[length] ** 2 * [mass] / [time] ** 2 / [temperature] / [substance]": ("molar gas constant", '"8.314 J/mol/K"'),
    "[length] ** 2 / [time] ** 2 / [temperature]": ("specific gas constant", '"287 J/kg/K"'),
    "": ("plain number", "0.6"),
}

_SI_CACHE: dict[str, str] = {}


def describe_dimension(unit: str) -> tuple[str, str]:
    """Name the physical quantity a unit measures and give example values.

    >>> describe_dimension("kPa")
    ('pressure', '"5 bar" or "72 psi"')
    """
    if _is_angle(unit):
        return ("angle", '"45 deg"')
    dim = str(Q_(1.0, unit).dimensionality) if unit else ""
    if dim == "dimensionless":
        dim = ""
    return _EXAMPLES.get(dim, (f"quantity of dimension {dim}", f'"1 {unit}"'))


def _an(name: str) -> str:
    return ("an " if name[:1] in "aeiou" else "a ") + name


def _is_angle(unit: str) -> bool:
    """Angles are dimensionless in pint; they are told apart by their unit."""
    return bool(unit) and str(Q_(1.0, unit).units) in ("degree", "radian", "arcminute", "arcsecond", "turn")


def si_unit(unit: str) -> str:
    """Return the SI base unit string for a declared unit (cached).

    >>> si_unit("bar")
    'kilogram / meter / second ** 2'
    """
    if unit not in _SI_CACHE:
        _SI_CACHE[unit] = str(Q_(1.0, unit).to_base_units().units)
    return _SI_CACHE[unit]


def to_si(value: Any, unit: str, *, where: str = "") -> float:
    """Convert a quantity given as text, number or pint quantity to SI.

    Parameters
    ----------
    value : str, float, int or pint.Quantity
        The value as the user wrote it. A bare number is accepted only for a
        dimensionless parameter (``unit == ""``).
    unit : str
        The declared unit of the parameter; the value must have its dimension.
        The result is in the coherent SI unit of that dimension.
    where : str
        Key path named in the error message.

    Returns
    -------
    float
        The magnitude in SI base units.
    """
    name, example = describe_dimension(unit)
    if isinstance(value, bool):
        raise ModelError(where, f"expected {_an(name)}, got the flag {value!r}", f"write a value such as {example}")
    if isinstance(value, (int, float)):
        if unit:
            raise ModelError(where, f"expected {_an(name)} with a unit, got the bare number {value!r}",
                             f"write the value with its unit, e.g. {example}")
        return float(value)
    if isinstance(value, str):
        try:
            q = Q_(value)
        except Exception as exc:  # pint raises several types for bad text
            raise ModelError(where, f"cannot read {value!r} as a quantity ({type(exc).__name__})",
                             f"write a number followed by a unit, e.g. {example}") from None
    elif isinstance(value, pint.Quantity):
        q = value
    else:
        raise ModelError(where, f"expected {_an(name)}, got {type(value).__name__} {value!r}",
                         f"write a value such as {example}")
    if not isinstance(q, pint.Quantity):  # a bare number written as text
        q = Q_(float(q), "")
    if _is_angle(unit) and q.unitless:
        raise ModelError(where, f"expected an angle with its unit, got {value!r}",
                         'write the unit, e.g. "45 deg" (a bare number would be read as radians)')
    target = Q_(1.0, unit) if unit else Q_(1.0, "")
    if q.dimensionality != target.dimensionality:
        found = str(q.dimensionality)
        found = "no unit" if found == "dimensionless" else found
        expected = f"{_an(name)} (unit like {unit})" if unit else "a plain number"
        raise ModelError(where, f"expected {expected}, got {value!r} ({found})",
                         f"write the value with a unit of {name}, e.g. {example}")
    mag = float(q.to_base_units().magnitude)
    if not math.isfinite(mag):
        raise ModelError(where, f"{value!r} is not a finite number", f"write a finite value, e.g. {example}")
    return mag


def format_quantity(value: float, si: str, display: str, digits: int = 4) -> str:
    """Format an SI float in a unit people read.

    >>> format_quantity(413685.4, "Pa", "bar")
    '4.137 bar'
    """
    q = Q_(value, si).to(display)
    return f"{q.magnitude:.{digits}g} {display}"
