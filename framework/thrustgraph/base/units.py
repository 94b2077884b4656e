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
thrustgraph.base.errors.ModelError: launch.elevation: expected an angle with its unit, got '1'. Fix: write the unit, e.g. "45 deg" (a bare number would be read as radians).
>>> to_si("5 kg", "Pa", where="components.bottle.gauge_pressure")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: components.bottle.gauge_pressure: expected a pressure (unit like Pa), got '5 kg' ([mass]). Fix: write the value with a unit of pressure, e.g. "5 bar" or "72 psi".
"""

from __future__ import annotations

import functools
import math
import re
from typing import Any

import numpy as np
import pint

from .errors import ModelError, shorten

__all__ = ["ureg", "Q_", "to_si", "si_unit", "format_quantity", "describe_dimension", "parse_quantity",
           "finite_number", "MAX_QUANTITY_TEXT", "split_reference", "REFERENCE_NOTE"]

# Built from pint's definitions at every start (~0.1 s of CPU, a fifth of `thrustgraph check`). pint's disk cache
# (cache_folder=":auto:") builds it in 0.02 s instead of 0.49 s (wall time, one after the other in one process, on a
# loaded machine), but it is left off: its files are written in place, unlocked, in the user's cache folder (a killed
# or concurrent start, e.g. a study's workers, can leave a file that fails every later start), and pint's tracker
# lists stale-cache failures and a registry from the cache that lacks its dimensional equivalents (pint issues 1572
# and 1746).
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


@functools.lru_cache(maxsize=256)   # a cached call costs what the dict it replaces did (63 against 57 ns, interleaved)
def si_unit(unit: str) -> str:
    """Return the SI base unit string for a declared unit (cached).

    >>> si_unit("bar")
    'kilogram / meter / second ** 2'
    """
    return str(Q_(1.0, unit).to_base_units().units)


#: Longest quantity text read (number, spaces and unit): longer text is refused before any parsing.
MAX_QUANTITY_TEXT = 100
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_UNIT_CHARS = re.compile(r"^[A-Za-z_µμΩ°%][\w µμΩ°%*/^().·-]*$")
_EXPONENT = re.compile(r"(\*\*|\^)\s*\(?\s*[-+]?\d{1,2}(\.\d{1,3})?\s*\)?")
_NUMBER_IN_UNIT = re.compile(r"(?<![A-Za-z_µμΩ°])\d")
_WORDS = re.compile(r"^\s*[-+]?(nan|inf|infinity)\b", re.IGNORECASE)


def _unit_ok(unit: str) -> bool:
    """A unit is names, products, quotients and small whole exponents: no numbers to compute."""
    # "1/s" (per second) is the one place a unit may hold a number
    rest = unit[1:].lstrip() if unit.startswith("1") and unit[1:].lstrip().startswith("/") else unit
    if not rest:
        return True
    if not _UNIT_CHARS.match(rest.lstrip("/ ")) and rest.strip():
        return False
    return not _NUMBER_IN_UNIT.search(_EXPONENT.sub("", rest))


@functools.lru_cache(maxsize=1024)
def _parse_unit(unit: str) -> Any:
    """The pint unit of a short, checked unit text (cached: model files repeat their units)."""
    if unit.startswith("/"):
        unit = "1" + unit
    return ureg.parse_units(unit) if unit else ureg.dimensionless


def parse_quantity(text: str, *, where: str = "", example: str = '"5 bar" or "2 L"') -> "pint.Quantity":
    """Read text as a number and a unit, never as arithmetic.

    The number is read by a regular expression (digits, a point, an exponent), the unit (at most
    :data:`MAX_QUANTITY_TEXT` characters in all) by the unit registry alone, so ``"9**9**9 bar"`` is refused
    at once instead of being computed. Non-finite numbers and numbers too large for a float are refused.

    >>> parse_quantity("4.5 bar")
    <Quantity(4.5, 'bar')>
    >>> parse_quantity("10**400 L", where="components.bottle.volume")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.bottle.volume: cannot read '10**400 L' as a number and a unit: the unit '**400 L' holds a number or arithmetic. Fix: write the number in decimal or e-notation followed by a unit, e.g. "5 bar" or "2 L".
    """
    fix = f"write the number in decimal or e-notation followed by a unit, e.g. {example}"
    if len(text) > MAX_QUANTITY_TEXT:
        raise ModelError(where, f"the quantity text is {len(text)} characters long, more than the "
                         f"{MAX_QUANTITY_TEXT} a number and a unit need: {shorten(text)}", fix)
    if _WORDS.match(text):
        raise ModelError(where, f"{text!r} is not a finite number", f"write a finite value, e.g. {example}")
    m = _NUMBER.match(text)
    if not m:
        raise ModelError(where, f"cannot read {text!r} as a number and a unit", fix)
    number, unit = m.group(1), m.group(2)
    mag = float(number)
    if not math.isfinite(mag):
        raise ModelError(where, f"the number in {text!r} is too large for a floating-point number "
                         "(the largest is about 1.8e308)", f"write a finite value, e.g. {example}")
    if not _unit_ok(unit):
        raise ModelError(where, f"cannot read {text!r} as a number and a unit: the unit {unit!r} holds a number "
                         "or arithmetic", fix)
    try:
        u = _parse_unit(unit)
    except Exception:  # noqa: BLE001 - pint raises several types for a bad unit
        raise ModelError(where, f"cannot read {text!r} as a number and a unit: {unit!r} is not a unit I know",
                         fix) from None
    return Q_(mag, u)


#: A pressure unit with its reference written into it, as the trade writes it: ``psig``/``barg`` (gauge, above
#: the surroundings) and ``psia``/``bara`` (absolute).
_REFERENCED = re.compile(r"^(?P<head>.*?\d\.?\s*)(?P<unit>psi|bar)(?P<ref>[ga])\s*$")

#: What a plain pressure unit means, by the parameter's declared reference: said in every error about it.
REFERENCE_NOTE = {
    "gauge": "this pressure is gauge: a plain unit (psi, bar, kPa) means above the ambient pressure at launch, "
             "and psig or barg say the same",
    "absolute": "this pressure is absolute: a plain unit (psi, bar, kPa) means above vacuum, and psia or bara "
                "say the same",
}


def split_reference(text: str) -> tuple[str, str | None]:
    """Split a trade gauge or absolute unit off a quantity text: ``"60 psig"`` -> ``("60 psi", "gauge")``.

    Text without such a unit comes back unchanged with None.

    >>> split_reference("4.5 barg"), split_reference("14.7 psia"), split_reference("5 bar")
    (('4.5 bar', 'gauge'), ('14.7 psi', 'absolute'), ('5 bar', None))
    """
    m = _REFERENCED.match(text) if isinstance(text, str) and len(text) <= MAX_QUANTITY_TEXT else None
    if not m:
        return text, None
    return m.group("head") + m.group("unit"), "gauge" if m.group("ref") == "g" else "absolute"


def _with_reference(value: Any, unit: str, reference: str | None, where: str) -> Any:
    """Check a gauge or absolute unit (psig, barg, psia, bara) against the parameter's reference; strip it."""
    text, ref = split_reference(value)
    if ref is None:
        return value
    plain = text.split()[-1] if " " in text else text.lstrip("0123456789.+-eE")
    if reference is None:
        raise ModelError(where, f"{shorten(value)} says the pressure is {ref}, but this parameter does not declare "
                         "whether it is gauge or absolute",
                         f"write the plain unit ({plain}) with the value the parameter's description asks for")
    if ref != reference:
        other = "above the surroundings" if ref == "gauge" else "above vacuum"
        raise ModelError(where, f"{shorten(value)} is {ref} ({other}), but this parameter is {reference}; "
                         "thrustgraph does not convert between them, since that needs the day's barometer reading",
                         f"give the {reference} value; {REFERENCE_NOTE[reference]}")
    return text


def to_si(value: Any, unit: str, *, where: str = "", reference: str | None = None) -> float:
    """Convert a quantity given as text, number or pint quantity to SI.

    Parameters
    ----------
    value : str, float, int or pint.Quantity
        The value as the user wrote it. A bare number is accepted only for a
        dimensionless parameter (``unit == ""``). Text is read by
        :func:`parse_quantity` (a number and a unit, never arithmetic).
    unit : str
        The declared unit of the parameter; the value must have its dimension.
        The result is in the coherent SI unit of that dimension.
    where : str
        Key path named in the error message.
    reference : str, optional
        For a pressure: ``"gauge"`` (above the ambient pressure) or ``"absolute"``, what the parameter holds.
        A value written in ``psig``/``barg`` (gauge) or ``psia``/``bara`` (absolute) must match it; a plain
        unit means what the parameter holds, and errors say so.

    Returns
    -------
    float
        The magnitude in SI base units, always finite.

    Examples
    --------
    >>> to_si(float("nan"), "", where="components.bottle.fill")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.bottle.fill: nan is not a finite number. Fix: write a finite value, e.g. 0.6.
    >>> to_si("1e308 km", "m", where="components.airframe.reference_diameter")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.airframe.reference_diameter: '1e308 km' is too large: it overflows in SI units. Fix: write a finite value, e.g. "22 mm" or "1.2 m".
    >>> to_si("60 psig", "bar", where="components.bottle.gauge_pressure", reference="gauge")
    413685.4...
    >>> to_si("60 psig", "Pa", where="environment.medium.pressure", reference="absolute")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: environment.medium.pressure: '60 psig' is gauge (above the surroundings), but this parameter is absolute; thrustgraph does not convert between them, since that needs the day's barometer reading. Fix: give the absolute value; this pressure is absolute: a plain unit (psi, bar, kPa) means above vacuum, and psia or bara say the same.
    """
    if reference is not None or isinstance(value, str):
        value = _with_reference(value, unit, reference, where)
    name, example = describe_dimension(unit)
    if isinstance(value, bool):
        raise ModelError(where, f"expected {_an(name)}, got the flag {value!r}", f"write a value such as {example}")
    if isinstance(value, (int, float)):
        if unit:
            raise ModelError(where, f"expected {_an(name)} with a unit, got the bare number {shorten(value)}",
                             f"write the value with its unit, e.g. {example}")
        return finite_number(value, where=where, example=example)
    if isinstance(value, str):
        q = parse_quantity(value, where=where, example=example)
    elif isinstance(value, pint.Quantity):
        q = value
        if not np.all(np.isfinite(np.asarray(q.magnitude, dtype=float))):
            raise ModelError(where, f"{shorten(value)} is not a finite number", f"write a finite value, e.g. {example}")
    else:
        raise ModelError(where, f"expected {_an(name)}, got {type(value).__name__} {shorten(value)}",
                         f"write a value such as {example}")
    if _is_angle(unit) and q.unitless:
        raise ModelError(where, f"expected an angle with its unit, got {shorten(value)}",
                         'write the unit, e.g. "45 deg" (a bare number would be read as radians)')
    target = Q_(1.0, unit) if unit else Q_(1.0, "")
    if q.dimensionality != target.dimensionality:
        found = str(q.dimensionality)
        found = "no unit" if found == "dimensionless" else found
        expected = f"{_an(name)} (unit like {unit})" if unit else "a plain number"
        raise ModelError(where, f"expected {expected}, got {shorten(value)} ({found})",
                         f"write the value with a unit of {name}, e.g. {example}")
    try:
        mag = float(q.to_base_units().magnitude)
    except (OverflowError, ZeroDivisionError, ValueError):
        mag = math.inf
    if not math.isfinite(mag):
        raise ModelError(where, f"{shorten(value)} is too large: it overflows in SI units",
                         f"write a finite value, e.g. {example}")
    return mag


def finite_number(value: Any, *, where: str = "", example: str = "0.6") -> float:
    """A plain number (int or float) as a finite float; NaN, infinities and integers beyond 64 bits are refused.

    >>> finite_number(3, where="x")
    3.0
    >>> finite_number(10 ** 400, where="components.bottle.fill")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.bottle.fill: a whole number of 401 digits is beyond the 64-bit range of model files. Fix: write a value such as 0.6.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ModelError(where, f"expected a number, got {shorten(value)}", f"write a value such as {example}")
    if isinstance(value, int) and not -2**63 <= value < 2**63:
        digits = len(str(abs(value))) if abs(value) < 10**4000 else "over 4000"
        raise ModelError(where, f"a whole number of {digits} digits is beyond the 64-bit range of model files",
                         f"write a value such as {example}")
    x = float(value)
    if not math.isfinite(x):
        raise ModelError(where, f"{x!r} is not a finite number", f"write a finite value, e.g. {example}")
    return x


def format_quantity(value: float, si: str, display: str, digits: int = 4) -> str:
    """Format an SI float in a unit people read.

    >>> format_quantity(413685.4, "Pa", "bar")
    '4.137 bar'
    """
    q = Q_(value, si).to(display)
    return f"{q.magnitude:.{digits}g} {display}"
