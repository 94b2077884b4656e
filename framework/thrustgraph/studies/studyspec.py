"""What a study varies, spreads and limits: one text form for the command line and the model's ``[study]`` table.

Varied parameters (:class:`Vary`)
    ``PATH=LOW..HIGH in N``  N evenly spaced values from LOW to HIGH (a sweep),
    ``PATH=V1, V2, V3``      a list of values,
    ``PATH=LOW..HIGH``       bounds only (an optimisation),
    ``PATH``                 the model's value (a sensitivity).
    Values are written as in a model file: ``0.3``, ``"4.5 bar"``, ``"80 deg"``.

Spread parameters (:class:`Spread`, for a dispersion)
    ``PATH=normal(mean=0 m/s, sd=2 m/s)`` (``mean`` defaults to the model's value),
    ``PATH=uniform(LOW, HIGH)``, ``PATH=triangular(LOW, MODE, HIGH)``.

Limits (:class:`Limit`, constraints of an optimisation)
    ``OUTPUT <= VALUE`` or ``OUTPUT >= VALUE`` with the output's dimension:
    ``peak_acceleration <= 60 g0`` (``g0`` is standard gravity; ``g`` is a
    gram), ``guide_exit_speed >= 12 m/s``, ``peak_vessel_pressure <= 6 bar``.

The ``[study]`` table (docs/studies.md) holds one sub-table per study kind (read by
:func:`thrustgraph.studies.studykinds.read_study`)::

    [study.sweep]
    vary = { "components.bottle.fill" = "0.1 .. 0.6 in 11", "components.bottle.gauge_pressure" = ["3 bar", "5 bar"] }

Examples
--------
>>> Vary.parse("components.bottle.fill=0.1..0.6 in 6")
Vary(path='components.bottle.fill', values=None, low=0.1, high=0.6, count=6)
>>> Vary.parse("components.bottle.gauge_pressure=3 bar, 4 bar").values
('3 bar', '4 bar')
>>> Spread.parse("environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)").args
(('mean', '0 m/s'), ('sd', '2 m/s'))
>>> Limit.parse("peak_acceleration <= 60 g0")
Limit(output='peak_acceleration', sense='<=', value='60 g0')
"""

from __future__ import annotations

import difflib
import re
import tomllib
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from ..models.designs import DesignParameter, bounds_text, resolve
from ..base.errors import ModelError, shorten
from ..base.limits import MAX_DESIGNS, check_count
from ..models.model import ParsedModel
from ..balance.outcomes import check_outputs, outcome
from ..base.units import Q_, parse_quantity, to_si

__all__ = ["Vary", "Spread", "Limit", "StudyDefinition", "DISTRIBUTIONS", "LEVELS", "display_unit", "literal"]

#: Probability levels of a dispersion's footprint ellipses, unless the study names others.
LEVELS = (0.5, 0.95)
DISTRIBUTIONS = {"normal": ("mean", "sd"), "uniform": ("low", "high"), "triangular": ("low", "mode", "high")}


def literal(text: str) -> Any:
    """A value as written on the command line: a TOML number stays a number, anything else stays text.

    >>> literal("0.3"), literal("4.5 bar"), literal('"80 deg"')
    (0.3, '4.5 bar', '80 deg')
    """
    text = text.strip()
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def display_unit(values: Sequence[Any]) -> str | None:
    """The unit the first value with a unit is written in (None when all are plain numbers).

    >>> display_unit(["3 bar", "4 bar"]), display_unit([0.1, 0.2])
    ('bar', None)
    """
    for v in values:
        if isinstance(v, str):
            try:
                q = parse_quantity(v)
            except ModelError:  # a bad value is reported where it is converted
                continue
            if hasattr(q, "units") and str(q.units) != "dimensionless":
                return format(q.units, "~")
    return None


def _split_path(text: str, what: str, example: str) -> tuple[str, str | None]:
    if "=" not in text:
        return text.strip(), None
    path, rest = text.split("=", 1)
    path = path.strip()
    if not path:
        raise ModelError(f"{what} {text!r}", "has no key path before '='", f"write e.g. {example}")
    return path, rest.strip()


@dataclass(frozen=True)
class Vary:
    """A parameter a study varies: a list of values, or LOW..HIGH with an optional count."""

    path: str
    values: tuple[Any, ...] | None = None
    low: Any = None
    high: Any = None
    count: int | None = None

    @classmethod
    def parse(cls, text: str, where: str = "--vary") -> "Vary":
        """Read ``PATH=LOW..HIGH in N``, ``PATH=V1, V2``, ``PATH=LOW..HIGH`` or ``PATH``."""
        path, rest = _split_path(text, where, '"components.bottle.fill=0.1..0.6 in 11"')
        if rest is None:   # just PATH: a sensitivity's parameter
            return cls(path)
        if rest == "":
            raise ModelError(f"{where} {text.strip()}", "gives no values after '='",
                             'write values, e.g. "components.bottle.fill=0.1..0.6 in 11" or "...=0.2, 0.3", or '
                             "just the path (no '=') for a sensitivity")
        return cls.from_entry(path, rest, where=f"{where} {path}")

    @classmethod
    def from_entry(cls, path: str, value: Any, where: str) -> "Vary":
        """From a ``[study]`` entry: text as on the command line, a list of values, or {low, high, count}."""
        fix = ('write "LOW..HIGH in N" (e.g. "3 bar..6 bar in 4"), a list of values, or '
               '{ low = ..., high = ..., count = N }')
        if isinstance(value, dict):
            unknown = set(value) - {"low", "high", "count", "values"}
            if unknown:
                raise ModelError(f"{where}.{sorted(unknown)[0]}", "unknown key", fix)
            if "values" in value:
                return cls.from_entry(path, value["values"], where)
            if "low" not in value or "high" not in value:
                raise ModelError(where, "needs both low and high", fix)
            count = value.get("count")
            if count is not None and (not isinstance(count, int) or isinstance(count, bool) or count < 1):
                raise ModelError(f"{where}.count", f"must be a whole number of at least 1, got {shorten(count)}", fix)
            if count is not None:
                check_count(count, MAX_DESIGNS, where=f"{where}.count", what="values")
            return cls(path, low=value["low"], high=value["high"], count=count)
        if isinstance(value, list):
            if not value:
                raise ModelError(where, "the list of values is empty", fix)
            check_count(len(value), MAX_DESIGNS, where=where, what="values")
            return cls(path, values=tuple(value))
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return cls(path, values=(value,))
        if not isinstance(value, str):
            raise ModelError(where, f"cannot read {value!r} as values", fix)
        text = value.strip()
        if ".." in text:
            lo, rest = text.split("..", 1)
            count = None
            m = re.match(r"^(.*?)\s+in\s+(\S+)(\s+(steps|values|points))?\s*$", rest)
            if m:
                rest = m.group(1)
                try:
                    count = int(m.group(2))
                except ValueError:
                    raise ModelError(where, f"the count {m.group(2)!r} is not a whole number", fix) from None
                if count < 1:
                    raise ModelError(where, f"the count must be at least 1, got {count}", fix)
                check_count(count, MAX_DESIGNS, where=where, what="values")
            if not lo.strip() or not rest.strip():
                raise ModelError(where, f"{text!r} lacks a bound on one side of '..'", fix)
            return cls(path, low=literal(lo), high=literal(rest), count=count)
        values = tuple(literal(v) for v in text.split(",") if v.strip())
        if not values:
            raise ModelError(where, f"{text!r} holds no value", fix)
        return cls(path, values=values)

    @property
    def unit(self) -> str | None:
        """The unit the values are written in (None for plain numbers)."""
        vals = self.values if self.values is not None else (self.low, self.high)
        return display_unit([v for v in vals if v is not None])

    def resolve(self, parsed: ParsedModel, where: str | None = None) -> DesignParameter:
        return resolve(parsed, self.path, unit=self.unit, where=where or self.path)

    def si_values(self, param: DesignParameter, where: str | None = None) -> np.ndarray:
        """The values of a sweep in SI, each checked against the parameter's bounds."""
        where = where or self.path
        if self.values is not None:
            return np.array([param.si_value(v, where=where) for v in self.values])
        if self.low is None:
            return np.array([param.nominal])
        lo, hi = self.si_bounds(param, where)
        n = self.count
        if n is None:
            raise ModelError(where, f"gives bounds {self.low}..{self.high} but not how many values",
                             f"add a count, e.g. \"{self.low}..{self.high} in 11\"")
        if n == 1:
            return np.array([lo])
        if param.unit and param.unit != param.si:
            # evenly spaced in the unit the values are written in (3 bar .. 6 bar gives 3, 4, 5, 6 bar exactly)
            shown = np.linspace(float(param.shown(lo)), float(param.shown(hi)), n)
            si = Q_(shown, param.unit).to(param.si).magnitude
            si[0], si[-1] = lo, hi
            return np.asarray(si, dtype=float)
        return np.linspace(lo, hi, n)

    def si_bounds(self, param: DesignParameter, where: str | None = None) -> tuple[float, float]:
        """LOW and HIGH in SI, each within the parameter's declared bounds, LOW < HIGH."""
        where = where or self.path
        if self.low is None or self.high is None:
            raise ModelError(where, "has no bounds", f"write {self.path}=LOW..HIGH, e.g. "
                             f"\"{param.text(param.nominal * 0.8)}..{param.text(param.nominal * 1.2)}\"")
        try:
            lo = param.si_value(self.low, where=f"{where} (low)")
            hi = param.si_value(self.high, where=f"{where} (high)")
        except ModelError as exc:
            raise ModelError(exc.where, f"{exc.what} (the parameter must be {bounds_text(param)})",
                             "keep the range within the parameter's bounds") from None
        if not lo < hi:
            raise ModelError(where, f"the low end {self.low!r} is not below the high end {self.high!r}",
                             "write LOW..HIGH with LOW < HIGH")
        return lo, hi


@dataclass(frozen=True)
class Spread:
    """A parameter spread for a dispersion: a distribution name and its arguments (as written)."""

    path: str
    distribution: str
    args: tuple[tuple[str, Any], ...] = ()

    @classmethod
    def parse(cls, text: str, where: str = "--spread") -> "Spread":
        """Read ``PATH=normal(mean=M, sd=S)``, ``PATH=uniform(LOW, HIGH)``, ``PATH=triangular(LOW, MODE, HIGH)``."""
        path, rest = _split_path(text, where, '"environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)"')
        if not rest:
            raise ModelError(f"{where} {path}", "has no distribution", 'write e.g. "PATH=normal(sd=1 deg)"')
        return cls.from_entry(path, rest, where=f"{where} {path}")

    @classmethod
    def from_entry(cls, path: str, value: Any, where: str) -> "Spread":
        fix = ("write normal(mean=M, sd=S) (mean defaults to the model's value), uniform(LOW, HIGH) or "
               "triangular(LOW, MODE, HIGH); or a table { distribution = \"normal\", sd = \"1 deg\" }")
        if isinstance(value, dict):
            name = value.get("distribution")
            args = tuple((k, v) for k, v in value.items() if k != "distribution")
        elif isinstance(value, str):
            m = re.match(r"^\s*([A-Za-z_-]+)\s*\((.*)\)\s*$", value)
            if not m:
                raise ModelError(where, f"cannot read {value!r} as a distribution", fix)
            name = m.group(1)
            body = m.group(2).strip()
            items = [s.strip() for s in body.split(",")] if body else []
            pos = DISTRIBUTIONS.get(name, ())
            args_l: list[tuple[str, Any]] = []
            for k, item in enumerate(items):
                if "=" in item:
                    key, v = item.split("=", 1)
                    args_l.append((key.strip(), literal(v)))
                elif k < len(pos):
                    args_l.append((pos[k], literal(item)))
                else:
                    raise ModelError(where, f"too many values in {value!r}", fix)
            args = tuple(args_l)
        else:
            raise ModelError(where, f"cannot read {value!r} as a distribution", fix)
        if name not in DISTRIBUTIONS:
            c = difflib.get_close_matches(str(name), list(DISTRIBUTIONS), n=1)
            raise ModelError(where, f"unknown distribution {name!r}",
                             f"did you mean {c[0]!r}?" if c else f"use one of {', '.join(DISTRIBUTIONS)}")
        allowed = DISTRIBUTIONS[name]
        keys = [k for k, _ in args]
        for k in keys:
            if k not in allowed:
                raise ModelError(where, f"a {name} distribution has no argument {k!r}",
                                 f"its arguments are {', '.join(allowed)}")
        need = [k for k in allowed if k not in keys and not (name == "normal" and k == "mean")]
        if need:
            raise ModelError(where, f"the {name} distribution needs {', '.join(need)}", fix)
        return cls(path, str(name), args)

    @property
    def unit(self) -> str | None:
        return display_unit([v for _, v in self.args])

    def resolve(self, parsed: ParsedModel, where: str | None = None) -> DesignParameter:
        return resolve(parsed, self.path, unit=self.unit, where=where or self.path)

    def sample(self, param: DesignParameter, rng: np.random.Generator, n: int, where: str | None = None) -> np.ndarray:
        """``n`` SI samples drawn from ``rng`` (the caller fixes the order of draws, hence reproducibility)."""
        where = where or f"spread {self.path}"
        a = dict(self.args)
        if self.distribution == "normal":
            mean = param.nominal if "mean" not in a else float(to_si(a["mean"], param.spec.unit,
                                                                     where=f"{where} (mean)"))
            sd = param.si_delta(a["sd"], where=f"{where} (sd)")
            if not sd >= 0.0:
                raise ModelError(f"{where} (sd)", f"the standard deviation must not be negative, got {a['sd']!r}",
                                 "give a positive spread")
            return rng.normal(mean, sd, n)
        vals = [float(to_si(a[k], param.spec.unit, where=f"{where} ({k})")) for k in DISTRIBUTIONS[self.distribution]]
        if self.distribution == "uniform":
            lo, hi = vals
            if not lo < hi:
                raise ModelError(where, f"low {a['low']!r} is not below high {a['high']!r}", "write uniform(LOW, HIGH)")
            return rng.uniform(lo, hi, n)
        lo, mode, hi = vals
        if not (lo <= mode <= hi and lo < hi):
            raise ModelError(where, "needs LOW <= MODE <= HIGH with LOW < HIGH", "write triangular(LOW, MODE, HIGH)")
        return rng.triangular(lo, mode, hi, n)


@dataclass(frozen=True)
class Limit:
    """A constraint on an outcome: ``OUTPUT <= VALUE`` or ``OUTPUT >= VALUE``."""

    output: str
    sense: str
    value: Any

    @classmethod
    def parse(cls, text: str, where: str = "--limit") -> "Limit":
        m = re.match(r"^\s*([A-Za-z_][\w]*)\s*(<=|>=|<|>|=<|=>)\s*(.+?)\s*$", str(text))
        if not m:
            raise ModelError(f"{where} {text!r}", "cannot read the limit",
                             'write OUTPUT <= VALUE or OUTPUT >= VALUE, e.g. "peak_acceleration <= 60 g0"')
        sense = {"<": "<=", "=<": "<=", ">": ">=", "=>": ">="}.get(m.group(2), m.group(2))
        lim = cls(m.group(1), sense, literal(m.group(3)))
        lim.si(where)
        return lim

    def si(self, where: str = "--limit") -> float:
        """The limit in the outcome's SI unit (refuses an unknown outcome or a value in the wrong units)."""
        check_outputs([self.output], where=f"{where} {self.output}")
        return outcome(self.output).to_si(self.value, where=f"{where} {self.output}")

    def margin(self, value: float, where: str = "--limit") -> float:
        """How far inside the limit a value is (>= 0 satisfied), in SI."""
        lim = self.si(where)
        return lim - value if self.sense == "<=" else value - lim

    def __str__(self) -> str:
        return f"{self.output} {self.sense} {self.value}"


@dataclass(frozen=True)
class StudyDefinition:
    """One study, as read from the ``[study]`` table (and completed from the command line)."""

    kind: str
    vary: tuple[Vary, ...] = ()
    combine: str = "grid"
    spreads: tuple[Spread, ...] = ()
    samples: int = 1000
    seed: int = 0
    objective: str | None = None
    maximise: bool = True
    limits: tuple[Limit, ...] = ()
    method: str = "slsqp"
    step: float = 1e-3
    outputs: tuple[str, ...] | None = None
    start: str = "grid"
    levels: tuple[float, ...] = LEVELS
