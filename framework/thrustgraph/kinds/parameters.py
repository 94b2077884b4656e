"""Typed parameter declarations for component and environment kinds.

A kind declares its parameters as a tuple of specs. Each spec knows its unit,
its bounds and its default, parses what a user wrote into SI (or an SI
``numpy`` array for tables) and names the key path in every error.

Examples
--------
>>> volume = Quantity("volume", "L", default="2 L", low=0.0, low_open=True,
...                   doc="internal volume of the vessel")
>>> round(volume.parse("500 mL", where="components.bottle.volume"), 12)
0.0005
>>> volume.parse("0 L", where="components.bottle.volume")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: components.bottle.volume: must be greater than 0 L, got '0 L'. Fix: internal volume of the vessel; give a value greater than 0 L.
"""

from __future__ import annotations

import contextvars
import dataclasses
import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from ..base.errors import ModelError, shorten
from ..base.units import Q_, REFERENCE_NOTE, finite_number, to_si

__all__ = ["Spec", "Quantity", "Number", "Choice", "Flag", "Vector", "Table", "FilePath", "MODEL_FOLDER",
           "make_params_class", "parse_params", "check_finite"]

#: The folder a model's relative file paths are read from (the model file's own), set while it is parsed.
MODEL_FOLDER: contextvars.ContextVar[Path | None] = contextvars.ContextVar("thrustgraph_model_folder", default=None)


@dataclass(frozen=True)
class Spec:
    """Common fields of every parameter declaration."""

    name: str
    doc: str = field(default="", kw_only=True)

    @property
    def required(self) -> bool:
        return getattr(self, "default", None) is None

    def parse(self, value: Any, *, where: str) -> Any:  # pragma: no cover - abstract
        raise NotImplementedError

    def describe(self) -> str:
        """One line: unit, bounds and default, for listings."""
        return self.doc


@dataclass(frozen=True)
class Quantity(Spec):
    """A physical quantity with a unit, optional bounds and default.

    Bounds are given in the declared ``unit`` and checked after conversion.
    ``default="absent"`` makes the quantity optional: left out, it is parsed as None, and the kind decides what
    that means (e.g. a density derived from pressure and temperature); ``doc`` should say so.

    >>> rho = Quantity("density", "kg/m^3", default="absent", doc="air density; absent: from p and T")
    >>> rho.parse("absent", where="environment.medium.density") is None
    True
    """

    unit: str = ""
    default: Any = field(default=None, kw_only=True)
    low: float | None = field(default=None, kw_only=True)
    high: float | None = field(default=None, kw_only=True)
    low_open: bool = field(default=False, kw_only=True)
    high_open: bool = field(default=False, kw_only=True)
    #: For a pressure: ``"gauge"`` (above the ambient pressure at launch) or ``"absolute"``. A plain unit (psi,
    #: bar) then means that, ``psig``/``barg`` or ``psia``/``bara`` must agree with it, and errors say which.
    reference: str | None = field(default=None, kw_only=True)

    def _bound_si(self, b: float) -> float:
        return float(Q_(b, self.unit).to_base_units().magnitude) if self.unit else float(b)

    def parse(self, value: Any, *, where: str) -> float | None:
        if self.default == "absent" and isinstance(value, str) and value == "absent":
            return None
        if self.reference is None:
            return self._checked(to_si(value, self.unit, where=where), value, where)  # always finite
        try:
            return self._checked(to_si(value, self.unit, where=where, reference=self.reference), value, where)
        except ModelError as exc:
            note = REFERENCE_NOTE.get(self.reference, "")
            if note and note in exc.fix:
                raise
            raise ModelError(exc.where, exc.what, f"{exc.fix.rstrip('.')} ({note})" if exc.fix else note) from None

    def _checked(self, x: float, value: Any, where: str) -> float:
        """Check an SI value against the bounds."""
        u = f" {self.unit}" if self.unit else ""
        # Written so that a NaN fails every comparison, hence every check: `ok` must be proved true.
        if self.low is not None:
            lo = self._bound_si(self.low)
            if not (x > lo if self.low_open else x >= lo):
                word = "greater than" if self.low_open else "at least"
                raise ModelError(where, f"must be {word} {self.low:g}{u}, got {shorten(value)}",
                                 f"{self.doc or self.name}; give a value {word} {self.low:g}{u}")
        if self.high is not None:
            hi = self._bound_si(self.high)
            if not (x < hi if self.high_open else x <= hi):
                word = "less than" if self.high_open else "at most"
                raise ModelError(where, f"must be {word} {self.high:g}{u}, got {shorten(value)}",
                                 f"{self.doc or self.name}; give a value {word} {self.high:g}{u}")
        return x

    def describe(self) -> str:
        u = self.unit or "-"
        if self.low is None and self.high is None:
            rng = "any finite value"
        elif self.high is None:
            rng = f"{'>' if self.low_open else '>='} {self.low:g}"
        elif self.low is None:
            rng = f"{'<' if self.high_open else '<='} {self.high:g}"
        else:
            rng = f"{'(' if self.low_open else '['}{self.low:g}, {self.high:g}{')' if self.high_open else ']'}"
        d = "required" if self.default is None else f"default {self.default}"
        ref = f" ({self.reference})" if self.reference else ""
        return f"{self.doc} [{u}{ref}] range {rng}, {d}"


def Number(name: str, *, default: Any = None, low: float | None = None, high: float | None = None,
           low_open: bool = False, high_open: bool = False, doc: str = "") -> Quantity:
    """A dimensionless quantity (a coefficient, a ratio, an exponent)."""
    return Quantity(name=name, doc=doc, unit="", default=default, low=low, high=high,
                    low_open=low_open, high_open=high_open)


@dataclass(frozen=True)
class Choice(Spec):
    """One of a fixed set of words."""

    options: tuple[str, ...] = field(default=(), kw_only=True)
    default: str | None = field(default=None, kw_only=True)

    def parse(self, value: Any, *, where: str) -> str:
        if not isinstance(value, str) or value not in self.options:
            close = difflib.get_close_matches(value, self.options, n=1) if isinstance(value, str) \
                and len(value) < 200 else []
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise ModelError(where, f"expected one of {', '.join(map(repr, self.options))}, got {shorten(value)}",
                             f"{hint}choose one of the listed words")
        return value

    def describe(self) -> str:
        return f"{self.doc}: one of {'/'.join(self.options)}, default {self.default}"


@dataclass(frozen=True)
class Flag(Spec):
    """A yes/no switch."""

    default: bool | None = field(default=None, kw_only=True)

    def parse(self, value: Any, *, where: str) -> bool:
        if not isinstance(value, bool):
            raise ModelError(where, f"expected true or false, got {shorten(value)}", "write true or false (no quotes)")
        return value

    def describe(self) -> str:
        return f"{self.doc} true/false, default {str(self.default).lower()}"


@dataclass(frozen=True)
class Vector(Spec):
    """A direction in the vehicle's body frame (x forward along the axis), normalised."""

    default: tuple[float, float, float] | None = field(default=None, kw_only=True)

    def parse(self, value: Any, *, where: str) -> tuple[float, float, float]:
        fix = "write e.g. [-1, 0, 0] for a jet pointing aft along the body axis"
        ok = isinstance(value, (list, tuple)) and len(value) == 3 and all(
            isinstance(c, (int, float)) and not isinstance(c, bool) for c in value)
        if not ok:
            raise ModelError(where, f"expected a direction of three numbers [x, y, z], got {shorten(value)}", fix)
        c = [finite_number(v, where=f"{where}[{k}]", example="-1") for k, v in enumerate(value)]
        # The norm is taken on components scaled by the largest, so [1e200, 0, 0] and [5e-324, 0, 0] both read
        # as the unit vector [1, 0, 0] (squaring them would overflow or underflow).
        big = max(abs(v) for v in c)
        if not big > 0.0:
            raise ModelError(where, "the direction [0, 0, 0] has no length", "give a non-zero direction")
        u = [v / big for v in c]
        n = math.sqrt(sum(v * v for v in u))
        return tuple(v / n for v in u)  # type: ignore[return-value]

    def describe(self) -> str:
        return f"{self.doc} body-frame direction [x, y, z], default {list(self.default or ())}"


@dataclass(frozen=True)
class Table(Spec):
    """A table of rows with a unit per column, written as
    ``{ units = ["s", "N"], rows = [[0, 0], [0.1, 12.5]] }``.

    ``default="absent"`` makes the table optional (parsed as None).

    The first column must increase strictly. The parsed value is an SI array of
    shape ``(rows, columns)``.
    """

    columns: tuple[tuple[str, str], ...] = field(default=(), kw_only=True)
    default: Any = field(default=None, kw_only=True)
    min_rows: int = field(default=2, kw_only=True)
    #: Bounds of each column, ``(low, high)`` in the column's declared unit (None: unbounded on that side).
    bounds: tuple[tuple[float | None, float | None], ...] = field(default=(), kw_only=True)
    max_rows: int = field(default=10_000, kw_only=True)

    def parse(self, value: Any, *, where: str) -> np.ndarray | None:
        if isinstance(value, str) and value == "absent":
            return None
        names = ", ".join(f"{n} [{u}]" for n, u in self.columns)
        fix = f'write {{ units = [{", ".join(repr(u) for _, u in self.columns)}], rows = [[...], ...] }} with columns {names}'
        if not isinstance(value, dict) or set(value) != {"units", "rows"}:
            raise ModelError(where, f"expected a table with keys 'units' and 'rows', got {shorten(value)}", fix)
        units, rows = value["units"], value["rows"]
        if not isinstance(units, list) or len(units) != len(self.columns) or not all(isinstance(u, str) for u in units):
            raise ModelError(f"{where}.units", f"expected {len(self.columns)} units ({names}), got {shorten(units)}", fix)
        if not isinstance(rows, list) or len(rows) < self.min_rows:
            raise ModelError(f"{where}.rows", f"expected at least {self.min_rows} rows, got {shorten(rows)}", fix)
        if len(rows) > self.max_rows:
            raise ModelError(f"{where}.rows", f"has {len(rows)} rows, more than the {self.max_rows} a table may hold",
                             "thin the table out (a curve rarely needs more than a few hundred rows)")
        scale = []
        for k, ((cname, cunit), u) in enumerate(zip(self.columns, units)):
            if u.startswith(("-", "+")) or (u.strip() and u.strip()[0].isdigit()):
                raise ModelError(f"{where}.units[{k}]", f"expected a unit, got {shorten(u)}", fix)
            scale.append(to_si(f"1 {u}".strip(), cunit, where=f"{where}.units[{k}]"))
        out = np.empty((len(rows), len(self.columns)))
        for i, row in enumerate(rows):
            if not isinstance(row, list) or len(row) != len(self.columns) or not all(
                    isinstance(c, (int, float)) and not isinstance(c, bool) for c in row):
                raise ModelError(f"{where}.rows[{i}]", f"expected {len(self.columns)} numbers, got {shorten(row)}",
                                 fix)
            vals = [finite_number(c, where=f"{where}.rows[{i}][{k}]") * s for k, (c, s) in enumerate(zip(row, scale))]
            if not all(math.isfinite(v) for v in vals):
                raise ModelError(f"{where}.rows[{i}]", f"{shorten(row)} overflows in SI units", fix)
            out[i] = vals
        for k, (lo, hi) in enumerate(self.bounds):
            cname, cunit = self.columns[k]
            lo_si = None if lo is None else to_si(f"{lo!r} {cunit}".strip(), cunit)
            hi_si = None if hi is None else to_si(f"{hi!r} {cunit}".strip(), cunit)
            col = out[:, k]
            bad = np.flatnonzero(~((col >= (-np.inf if lo_si is None else lo_si))
                                   & (col <= (np.inf if hi_si is None else hi_si))))
            if len(bad):
                i = int(bad[0])
                rng = f"from {lo:g}" if hi is None else (f"up to {hi:g}" if lo is None else f"from {lo:g} to {hi:g}")
                raise ModelError(f"{where}.rows[{i}]", f"the {cname} {shorten(rows[i][k])} is outside the range "
                                 f"{rng} {cunit}".rstrip(), f"give {cname} values {rng} {cunit}".rstrip())
        if np.any(np.diff(out[:, 0]) <= 0):
            i = int(np.argmax(np.diff(out[:, 0]) <= 0)) + 1
            raise ModelError(f"{where}.rows[{i}]", f"the {self.columns[0][0]} column must increase strictly",
                             "sort the rows and remove duplicates")
        out.setflags(write=False)
        return out

    def describe(self) -> str:
        return f"{self.doc} table with columns " + ", ".join(f"{n} [{u}]" for n, u in self.columns)


@dataclass(frozen=True)
class FilePath(Spec):
    """A file the kind reads (a thrust curve), written as a path relative to the model file's folder.

    The parsed value is the absolute path as text; a file that does not exist is refused.
    ``default="absent"`` makes it optional (parsed as None).

    >>> FilePath("curve_file", default="absent").parse("absent", where="components.motor.curve_file") is None
    True
    """

    default: str | None = field(default=None, kw_only=True)

    def parse(self, value: Any, *, where: str) -> str | None:
        if self.default == "absent" and isinstance(value, str) and value == "absent":
            return None
        if not isinstance(value, str) or not value.strip() or len(value) > 1000:
            raise ModelError(where, f"expected the path of a file in quotes, got {shorten(value)}",
                             'write e.g. "motors/demo-motor.csv" (relative to the model file)')
        p = Path(value)
        if not p.is_absolute():
            base = MODEL_FOLDER.get()
            p = base / p if base is not None else p
        if not p.is_file():
            raise ModelError(where, f"no such file {shorten(value)} (looked for {shorten(str(p), 200)})",
                             "give the path relative to the model file's folder")
        return str(p)

    def describe(self) -> str:
        d = "required" if self.default is None else f"default {self.default}"
        return f"{self.doc} [file path, relative to the model file], {d}"


def make_params_class(kind: str, specs: Sequence[Spec]) -> type:
    """Build the frozen dataclass that holds one component's SI parameter values.

    >>> P = make_params_class("demo", [Quantity("volume", "L", default="1 L")])
    >>> P(volume=0.001)
    demo_params(volume=0.001)
    """
    fields = [(s.name, Any, field()) for s in specs]
    return dataclasses.make_dataclass(f"{kind.replace('-', '_')}_params", fields, frozen=True)


def parse_params(specs: Sequence[Spec], raw: dict[str, Any], *, where: str,
                 params_class: type | None = None) -> Any:
    """Parse a raw mapping of user values against specs, filling defaults.

    Unknown keys are refused with the closest valid name suggested.
    """
    names = [s.name for s in specs]
    for key in raw:
        if key not in names:
            close = difflib.get_close_matches(key, names, n=1)
            hint = f"did you mean {close[0]!r}?" if close else f"valid names: {', '.join(names) or '(none)'}"
            raise ModelError(f"{where}.{key}", "unknown parameter", hint)
    values = {}
    for s in specs:
        if s.name in raw:
            values[s.name] = check_finite(s.parse(raw[s.name], where=f"{where}.{s.name}"), where=f"{where}.{s.name}")
        elif getattr(s, "default", None) is not None:
            values[s.name] = s.parse(s.default, where=f"{where}.{s.name} (default)")
        else:
            raise ModelError(f"{where}.{s.name}", "is required but missing",
                             f"add {s.name} = ... ({s.describe()})")
    cls = params_class or make_params_class("params", specs)
    return cls(**values)


def check_finite(value: Any, *, where: str) -> Any:
    """Refuse a parsed value holding a NaN or an infinity, whatever spec (built in or a plugin's) produced it.

    Every spec refuses non-finite input itself; this is the net under them all, applied by :func:`parse_params`.

    >>> check_finite((1.0, 2.0), where="x")
    (1.0, 2.0)
    >>> check_finite(float("nan"), where="components.bottle.fill")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: components.bottle.fill: is not a finite number (nan). Fix: give a finite value.
    """
    if isinstance(value, (float, int)) and not isinstance(value, bool):
        if not math.isfinite(value):
            raise ModelError(where, f"is not a finite number ({value!r})", "give a finite value")
    elif isinstance(value, np.ndarray) and value.dtype.kind in "fc":
        if not np.all(np.isfinite(value)):
            raise ModelError(where, "holds a value that is not finite", "give finite values")
    elif isinstance(value, (tuple, list)):
        for v in value:
            check_finite(v, where=where)
    return value
