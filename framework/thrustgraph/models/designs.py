"""Design parameters for studies: key paths resolved against a parsed model, values held in SI.

A study changes numbers of a model by key path (``components.bottle.fill``,
``environment.medium.wind_x``, ``launch.elevation``). Each path is resolved
once against the parsed model: its typed spec (unit, bounds), its value in
the model and the unit the study shows it in. Designs are then rows of SI
floats, checked against the declared bounds in one vectorised pass, and
applied to the parsed model directly (:func:`apply`): parsing a model file
costs about 14 ms, far more than assembling it (20 µs), so a study parses
once and varies many.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.models.model import parse_model
>>> parsed = parse_model(load_model(default_model_path()))
>>> fill = resolve(parsed, "components.bottle.fill")
>>> fill.nominal, fill.unit
(0.33, '')
>>> pressure = resolve(parsed, "components.bottle.gauge_pressure", unit="bar")
>>> pressure.si_value("5 bar"), pressure.shown(450000.0)
(500000.0, 4.5)
>>> new = apply(parsed, [fill, pressure], [0.4, 500000.0])
>>> new.params["bottle"].fill, new.params["bottle"].gauge_pressure
(0.4, 500000.0)
"""

from __future__ import annotations

import dataclasses
import difflib
import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from ..base.errors import ModelError
from .model import LAUNCH_SPECS, ParsedModel, check_static_friction
from ..kinds.parameters import Quantity
from ..base.units import Q_, parse_quantity, si_unit, to_si
from ..base.xp import scalar_ops

__all__ = ["DesignParameter", "resolve", "apply", "within_bounds", "bounds_text", "with_values", "SECTIONS"]

#: Sections of a model whose numbers a study may vary.
SECTIONS = ("components", "environment", "launch")


@dataclass(frozen=True)
class DesignParameter:
    """One varied number of a model.

    Fields
    ------
    path : key path, e.g. ``components.bottle.fill``
    section : ``components``, ``environment`` or ``launch``
    owner : component name or environment slot ('' for launch)
    name : the parameter's name in its kind
    spec : its typed declaration (unit, bounds)
    si : SI unit text of its values ('' for a plain number)
    unit : unit the study shows its values in ('' for a plain number)
    nominal : its value in the model, SI
    """

    path: str
    section: str
    owner: str
    name: str
    spec: Quantity
    si: str
    unit: str
    nominal: float

    @property
    def header(self) -> str:
        """Column header of this parameter in a study table, ``path [unit]`` (``[1]`` for a plain number)."""
        return f"{self.path} [{self.unit or '1'}]"

    def si_value(self, value: Any, where: str | None = None) -> float:
        """A value as written (text with a unit, or a number for a plain number) in SI, bounds checked."""
        return float(self.spec.parse(value, where=where or self.path))

    def si_delta(self, value: Any, where: str | None = None) -> float:
        """A difference or spread (e.g. a standard deviation) in SI: offset units count by their size only.

        >>> from thrustgraph.kinds.parameters import Quantity
        >>> p = DesignParameter("x", "launch", "", "x", Quantity("t", "K"), "kelvin", "degC", 288.15)
        >>> round(p.si_delta("2 degC"), 12)
        2.0
        """
        where = where or self.path
        if not self.spec.unit:
            return float(to_si(value, "", where=where))
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            raise ModelError(where, f"expected a {self.spec.unit} difference with a unit, got the bare number "
                             f"{value!r}", f"write it with a unit, e.g. \"1 {self.unit or self.spec.unit}\"")
        try:
            q = parse_quantity(value) if isinstance(value, str) else value
            mag, unit = float(q.magnitude), q.units
        except Exception:  # noqa: BLE001 - pint raises several types; to_si gives the clear message
            return float(to_si(value, self.spec.unit, where=where))
        # size of one unit, without the offset of degC or degF
        one = float(Q_(1.0, unit).to_base_units().magnitude) - float(Q_(0.0, unit).to_base_units().magnitude)
        to_si(f"1 {unit}", self.spec.unit, where=where)  # dimension check with the usual message
        return mag * one

    def shown(self, x: Any) -> Any:
        """SI value(s) in the unit the study shows (floats or an array)."""
        if not self.unit or self.unit == self.si:
            return x
        out = Q_(np.asarray(x, dtype=float), self.si).to(self.unit).magnitude
        return float(out) if np.ndim(out) == 0 else out

    def text(self, x: float) -> str:
        """One SI value as text in the study's unit, e.g. ``'4.5 bar'``."""
        v = self.shown(x)
        return f"{v:.6g} {self.unit}" if self.unit else f"{v:.6g}"


def _close(name: str, options: Sequence[str]) -> str:
    c = difflib.get_close_matches(name, list(options), n=1)
    return f"did you mean {c[0]!r}?" if c else f"choose one of: {', '.join(options)}"


def resolve(parsed: ParsedModel, path: str, *, unit: str | None = None, where: str | None = None) -> DesignParameter:
    """Resolve a key path against a parsed model.

    Parameters
    ----------
    parsed : the parsed model
    path : ``components.NAME.PARAMETER``, ``environment.SLOT.PARAMETER`` or ``launch.PARAMETER``
    unit : unit to show values in; by default the unit the model file writes the value in, else the declared one
    where : text naming the study entry in error messages (default: the path)

    Raises
    ------
    ModelError
        The path names no number of the model (with the closest name), or the unit does not fit.
    """
    where = where or path
    parts = path.split(".")
    if parts[0] == "components" and len(parts) == 3:
        owner, name = parts[1], parts[2]
        if owner not in parsed.kinds:
            raise ModelError(where, f"the model has no component {owner!r}", _close(owner, list(parsed.kinds)))
        specs = parsed.kinds[owner].parameters
        value_of = lambda: getattr(parsed.params[owner], name)  # noqa: E731
        what = f"component {owner!r} ({parsed.kinds[owner].kind})"
        raw_table = parsed.model.components.get(owner, {})
    elif parts[0] == "environment" and len(parts) == 3:
        owner, name = parts[1], parts[2]
        if owner not in parsed.env_kinds:
            raise ModelError(where, f"no environment section {owner!r}", _close(owner, list(parsed.env_kinds)))
        specs = parsed.env_kinds[owner].parameters
        value_of = lambda: getattr(parsed.env_params[owner], name)  # noqa: E731
        what = f"environment {owner!r} ({parsed.env_kinds[owner].kind})"
        raw_table = parsed.model.environment.get(owner, {})
    elif parts[0] == "launch" and len(parts) == 2:
        owner, name = "", parts[1]
        specs = LAUNCH_SPECS
        value_of = lambda: getattr(parsed.launch, name)  # noqa: E731
        what = "the launch settings"
        raw_table = parsed.model.launch
    else:
        raise ModelError(where, "does not name a number of the model",
                         "use components.NAME.PARAMETER, environment.medium.PARAMETER, environment.gravity.PARAMETER "
                         "or launch.PARAMETER")
    names = [s.name for s in specs]
    if name not in names:
        raise ModelError(where, f"{what} has no parameter {name!r}", _close(name, names))
    spec = specs[names.index(name)]
    if not isinstance(spec, Quantity):
        raise ModelError(where, f"is a {type(spec).__name__.lower()} setting, not a number, so a study cannot vary it",
                         "vary quantities and plain numbers only; set it for the whole study with --set")
    si = si_unit(spec.unit) if spec.unit else ""
    shown = unit
    if shown is None:
        shown = spec.unit
        raw = raw_table.get(name) if isinstance(raw_table, dict) else None
        if isinstance(raw, str):
            try:
                q = parse_quantity(raw)
                if hasattr(q, "units") and str(q.units) != "dimensionless":
                    shown = format(q.units, "~")
            except Exception:  # noqa: BLE001 - the model parsed, so this only picks a display unit
                pass
    elif spec.unit:
        to_si(f"1 {shown}", spec.unit, where=f"{where} (unit)")
    elif shown:
        raise ModelError(f"{where} (unit)", f"is a plain number, so it has no unit (got {shown!r})",
                         "leave the unit out")
    if value_of() is None:
        raise ModelError(where, f"is left out of the model, so {what} derives it ({spec.doc})",
                         f"vary what it is derived from, or give {name} in the model to vary it")
    return DesignParameter(path=path, section=parts[0], owner=owner, name=name, spec=spec, si=si,
                           unit=shown or "", nominal=float(value_of()))


def _bounds_si(spec: Quantity) -> tuple[float, float]:
    lo = spec._bound_si(spec.low) if spec.low is not None else -math.inf
    hi = spec._bound_si(spec.high) if spec.high is not None else math.inf
    return lo, hi


def within_bounds(param: DesignParameter, x: Any) -> np.ndarray:
    """True where SI value(s) lie within the parameter's declared bounds (open or closed as declared).

    >>> from thrustgraph.kinds.parameters import Number
    >>> p = DesignParameter("f", "components", "t", "fill", Number("fill", low=0.0, high=1.0, high_open=True),
    ...                     "", "", 0.3)
    >>> within_bounds(p, [0.0, 0.5, 1.0, -0.1]).tolist()
    [True, True, False, False]
    """
    x = np.asarray(x, dtype=float)
    lo, hi = _bounds_si(param.spec)
    ok = np.isfinite(x)
    ok &= (x > lo) if param.spec.low_open else (x >= lo)
    ok &= (x < hi) if param.spec.high_open else (x <= hi)
    return ok


def bounds_text(param: DesignParameter) -> str:
    """The declared bounds in words, e.g. ``'at least 0 and less than 1'``."""
    s = param.spec
    u = f" {s.unit}" if s.unit else ""
    parts = []
    if s.low is not None:
        parts.append(f"{'greater than' if s.low_open else 'at least'} {s.low:g}{u}")
    if s.high is not None:
        parts.append(f"{'less than' if s.high_open else 'at most'} {s.high:g}{u}")
    return " and ".join(parts) or "any finite value"


def with_values(p: Any, changes: dict[str, Any]) -> Any:
    """A copy of a frozen parameter object with some fields changed, without ``dataclasses.replace``'s cost
    (about 1 µs against 7 µs: ensembles make one per design and component to ask kinds for checks and modes).

    >>> from thrustgraph.kinds.parameters import make_params_class, Quantity
    >>> P = make_params_class("demo", [Quantity("fill", ""), Quantity("volume", "L")])
    >>> with_values(P(fill=0.3, volume=0.002), {"fill": 0.5})
    demo_params(fill=0.5, volume=0.002)
    """
    q = object.__new__(type(p))
    q.__dict__.update(p.__dict__)
    q.__dict__.update(changes)
    return q


def apply(parsed: ParsedModel, params: Sequence[DesignParameter], x: Sequence[float]) -> ParsedModel:
    """A parsed model with the parameters set to SI values ``x``: bounds, kind checks and model checks run.

    Raises
    ------
    ModelError
        A value outside its bounds, or a combination the component kind or a plugin check refuses.
    """
    comp: dict[str, dict[str, float]] = {}
    env: dict[str, dict[str, float]] = {}
    launch: dict[str, float] = {}
    for p, v in zip(params, x):
        v = float(v)
        if not within_bounds(p, v):
            raise ModelError(p.path, f"the value {p.text(v)} lies outside the bounds ({bounds_text(p)})",
                             "keep the study's values within the parameter's bounds")
        if p.section == "components":
            comp.setdefault(p.owner, {})[p.name] = v
        elif p.section == "environment":
            env.setdefault(p.owner, {})[p.name] = v
        else:
            launch[p.name] = v
    new_params = dict(parsed.params)
    for owner, changes in comp.items():
        pn = dataclasses.replace(parsed.params[owner], **changes)
        parsed.kinds[owner].check(pn, f"components.{owner}")
        new_params[owner] = pn
    new_env = dict(parsed.env_params)
    for slot, changes in env.items():
        pn = dataclasses.replace(parsed.env_params[slot], **changes)
        parsed.env_kinds[slot].check(pn, f"environment.{slot}")
        new_env[slot] = pn
    new_launch = dataclasses.replace(parsed.launch, **launch) if launch else parsed.launch
    if launch:
        check_static_friction(new_launch.friction, new_launch.static_friction)
    ambient = parsed.ambient
    if "medium" in env or "altitude" in launch:
        from ..kinds.component import Ambient

        medium = parsed.env_kinds["medium"].build(new_env["medium"], scalar_ops)
        rho, pa, Ta, *_ = medium(new_launch.altitude, 0.0)
        ambient = Ambient(pressure=pa, temperature=Ta, density=rho)
    new = dataclasses.replace(parsed, params=new_params, env_params=new_env, launch=new_launch, ambient=ambient)
    problems = [m for group in parsed.plugin_manager.hook.thrustgraph_check_model(model=new) for m in (group or ())]
    if problems:
        raise ModelError("model", problems[0], "change the design")
    return new
