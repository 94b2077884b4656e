"""Thrust-curve files: a thrust-time table in CSV with units in its headers, its propellant and total mass.

The format (thrustgraph's own; described in docs/devices.md)::

    # notes: any line starting with '#'
    name = "demo D motor"            optional, text
    propellant_mass = "24 g"         required: the mass the burn consumes
    total_mass = "62 g"              required: the motor at ignition (casing + propellant)
    total_impulse = "40 N*s"         optional: a stated figure, checked against the table
    burn_time = "1.7 s"              optional: a stated figure, checked against the table
    time [s],thrust [N]              the header: a time column and a thrust column, units in brackets
    0,0
    0.05,48
    ...

Settings are ``key = value`` lines before the header, each value a quoted
quantity as in a model file. The table is read by
:func:`thrustgraph.measured.records.loads_record` (any time and force units, ``[s]``,
``[ms]``, ``[N]``, ``[lbf]``; ``time (s)`` works too), so errors name the file,
the column and the line.

Checks, each refused with one message naming the file:

* the table starts at t = 0 (ignition) and ends at zero thrust, with no
  negative thrust and at least three rows;
* 0 < propellant_mass < total_mass;
* the effective exhaust velocity I / m_p lies between 10 and 10 000 m/s
  (specific impulse about 1 to 1000 s: a slip of units between g and kg falls
  outside);
* a stated ``total_impulse`` within 2 % of the table's (trapezoid rule: the
  thrust is linear between rows, as the jet interpolates it);
* a stated ``burn_time`` within 5 % of the table's span (ignition to the last
  row, where the jet's burn ends) or of the time between the first and last
  instants at 5 % of the peak thrust, a common convention for stated burn
  times (common practice, no source).

A prescribed jet with ``thrust_curve_file`` uses the table as its thrust
against time since ignition, the propellant mass as what it carries, and the
effective exhaust velocity v_e = I / m_p, so that the mass flow F / v_e
consumes exactly the propellant over the burn; the casing
(total_mass - propellant_mass) stays with the jet as fixed mass.

Examples
--------
>>> c = loads_thrust_curve('''propellant_mass = "10 g"
... total_mass = "30 g"
... time [s],thrust [N]
... 0,0
... 0.1,20
... 1.0,0
... ''', source="demo.csv")
>>> round(c.total_impulse, 6), c.burn_time, round(c.exhaust_velocity, 3), round(c.casing_mass, 6)
(10.0, 1.0, 1000.0, 0.02)
"""

from __future__ import annotations

import functools
import hashlib
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from thrustgraph.base.errors import ModelError
from thrustgraph.measured.records import loads_record
from thrustgraph.base.units import to_si

__all__ = ["ThrustCurve", "loads_thrust_curve", "read_thrust_curve", "IMPULSE_TOLERANCE", "BURN_TIME_TOLERANCE"]

#: Largest relative difference between a stated total impulse and the table's.
IMPULSE_TOLERANCE = 0.02
#: Largest relative difference between a stated burn time and the table's (either convention).
BURN_TIME_TOLERANCE = 0.05
_SETTINGS = {"name": None, "propellant_mass": "kg", "total_mass": "kg", "total_impulse": "N*s", "burn_time": "s"}
_SETTING = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*=(.*)$")


@dataclass(frozen=True)
class ThrustCurve:
    """A checked thrust curve, SI: ``time`` (s, from 0) and ``thrust`` (N) arrays, the masses (kg)."""

    source: str
    sha256: str
    name: str
    time: np.ndarray
    thrust: np.ndarray
    propellant_mass: float
    total_mass: float

    @property
    def total_impulse(self) -> float:
        """The table's total impulse, N s (trapezoid rule)."""
        # the trapezoid rule written out: scipy is not imported when the plugins load (benchmarks/cli_startup.py)
        return float(np.sum(np.diff(self.time) * 0.5 * (self.thrust[1:] + self.thrust[:-1])))

    @property
    def burn_time(self) -> float:
        """Ignition to the last row (thrust back at zero), s: where the jet's burn ends."""
        return float(self.time[-1])

    @property
    def exhaust_velocity(self) -> float:
        """Effective exhaust velocity I / m_p, m/s."""
        return self.total_impulse / self.propellant_mass

    @property
    def casing_mass(self) -> float:
        """What stays after the burn: total mass minus propellant, kg."""
        return self.total_mass - self.propellant_mass

    def table(self) -> np.ndarray:
        """(rows, 2) array of time and thrust, read-only: the jet's ``thrust_curve``."""
        out = np.column_stack([self.time, self.thrust])
        out.setflags(write=False)
        return out


def _span_above(t: np.ndarray, f: np.ndarray, level: float) -> float:
    """Time between the first and the last instants the linearly interpolated thrust reaches ``level``."""
    above = np.flatnonzero(f >= level)
    i, j = int(above[0]), int(above[-1])
    t0 = t[i] if i == 0 else t[i - 1] + (level - f[i - 1]) / (f[i] - f[i - 1]) * (t[i] - t[i - 1])
    t1 = t[j] if j == len(t) - 1 else t[j] + (f[j] - level) / (f[j] - f[j + 1]) * (t[j + 1] - t[j])
    return float(t1 - t0)


def loads_thrust_curve(text: str, *, source: str = "<text>", sha256: str | None = None) -> ThrustCurve:
    """Read and check a thrust curve from the text of a curve file (see the module docstring)."""
    if sha256 is None:
        sha256 = hashlib.sha256(text.encode("utf-8")).hexdigest()
    settings: dict[str, tuple[object, int]] = {}
    table_lines: list[str] = []
    in_table = False
    for no, line in enumerate(text.splitlines(), start=1):
        m = _SETTING.match(line)
        if not in_table and m and not line.lstrip().startswith("#"):
            key, raw = m.group(1), m.group(2).strip()
            where = f"{source}: line {no}, {key}"
            if key not in _SETTINGS:
                raise ModelError(where, "is not a setting of a thrust-curve file",
                                 f"use {', '.join(_SETTINGS)} (text and quantities in quotes)")
            if key in settings:
                raise ModelError(where, "is given twice", "give each setting once")
            try:
                value = tomllib.loads(f"v = {raw}")["v"]
            except tomllib.TOMLDecodeError:
                raise ModelError(where, f"cannot read {raw!r}", 'quote the value, e.g. propellant_mass = "24 g"') \
                    from None
            settings[key] = (value, no)
            table_lines.append("#")          # keep the line numbers of the table as in the file
            continue
        if line.strip() and not line.lstrip().startswith("#"):
            in_table = True
        table_lines.append(line)
    values: dict[str, float] = {}
    for key, unit in _SETTINGS.items():
        if key not in settings:
            continue
        value, no = settings[key]
        where = f"{source}: line {no}, {key}"
        if unit is None:
            if not isinstance(value, str):
                raise ModelError(where, f"expected text, got {value!r}", 'write name = "..." in quotes')
            continue
        values[key] = to_si(value, unit, where=where)
    for key in ("propellant_mass", "total_mass"):
        if key not in values:
            raise ModelError(source, f"the curve file has no {key}",
                             f'add a line {key} = "..." before the header (e.g. propellant_mass = "24 g", '
                             'total_mass = "62 g": the motor at ignition)')
    rec = loads_record("\n".join(table_lines), source=source, sha256=sha256)
    forces = [c for c in rec.columns if rec.dimension(c) == "force"]
    if len(rec.columns) != 1 or not forces:
        found = ", ".join(f"{c} [{rec.units[c] or '1'}]" for c in rec.columns)
        raise ModelError(source, f"a thrust curve has one column besides the time, a force; found {found}",
                         'write the header "time [s],thrust [N]"')
    t, f = rec.time, rec.columns[forces[0]]
    if len(t) < 3:
        raise ModelError(source, f"the table has {len(t)} rows", "give at least three: ignition, the burn, burnout")
    if t[0] != 0.0:
        raise ModelError(f"{source}: first row", f"starts at {t[0]:.6g} s, not at ignition (t = 0)",
                         "shift the times so that the first row is at 0 s")
    if np.any(f < 0.0):
        k = int(np.argmax(f < 0.0))
        raise ModelError(f"{source}: row {k + 1}", f"has a negative thrust ({f[k]:.6g} N)",
                         "a motor pushes one way: check the sign of the load cell")
    if f[-1] != 0.0:
        raise ModelError(f"{source}: last row", f"ends at {f[-1]:.6g} N, not at zero thrust",
                         "add a last row where the thrust has fallen to 0 (burnout)")
    mp, mt = values["propellant_mass"], values["total_mass"]
    if not 0.0 < mp < mt:
        raise ModelError(f"{source}: propellant_mass", f"{mp * 1e3:.6g} g must be above 0 and below the total mass "
                         f"({mt * 1e3:.6g} g)", "total_mass is the motor at ignition, casing and propellant together")
    curve = ThrustCurve(source=source, sha256=sha256, name=str(settings.get("name", (Path(source).stem, 0))[0]),
                        time=t, thrust=f, propellant_mass=mp, total_mass=mt)
    impulse = curve.total_impulse
    if not impulse > 0.0:
        raise ModelError(source, "the table's total impulse is 0", "give the measured thrust")
    ve = curve.exhaust_velocity
    if not 10.0 <= ve <= 10_000.0:
        raise ModelError(f"{source}: propellant_mass", f"the total impulse {impulse:.6g} N s over {mp * 1e3:.6g} g of "
                         f"propellant means an effective exhaust velocity of {ve:.6g} m/s (specific impulse "
                         f"{ve / 9.80665:.4g} s), outside 10 .. 10 000 m/s",
                         "check the units of the thrust, the time and the masses")
    if "total_impulse" in values:
        stated = values["total_impulse"]
        if not abs(impulse - stated) <= IMPULSE_TOLERANCE * stated:
            raise ModelError(f"{source}: total_impulse", f"the file states {stated:.6g} N s, the table gives "
                             f"{impulse:.6g} N s ({(impulse / stated - 1) * 100:+.3g} %, more than "
                             f"{IMPULSE_TOLERANCE * 100:g} %)", "check the table and the stated figure (and their units)")
    if "burn_time" in values:
        stated = values["burn_time"]
        span, span5 = curve.burn_time, _span_above(t, f, 0.05 * float(f.max()))
        if not min(abs(span - stated), abs(span5 - stated)) <= BURN_TIME_TOLERANCE * stated:
            raise ModelError(f"{source}: burn_time", f"the file states {stated:.6g} s; the table lasts {span:.6g} s "
                             f"from ignition to burnout, {span5:.6g} s above 5 % of its peak thrust (more than "
                             f"{BURN_TIME_TOLERANCE * 100:g} % from either)",
                             "check the table and the stated figure (and their units)")
    return curve


@functools.lru_cache(maxsize=32)
def _read(path: str, mtime_ns: int, size: int) -> ThrustCurve:
    data = Path(path).read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ModelError(path, f"is not UTF-8 text ({exc.reason} at byte {exc.start})",
                         "save the curve as a UTF-8 (or plain ASCII) CSV file") from None
    return loads_thrust_curve(text, source=path, sha256=hashlib.sha256(data).hexdigest())


def read_thrust_curve(path: str | Path) -> ThrustCurve:
    """Read and check a curve file; read once per file version (a study assembles the jet many times)."""
    p = Path(path)
    if not p.is_file():
        raise ModelError(str(path), "no such thrust-curve file", "check the path (relative to the model file)")
    st = p.stat()
    return _read(str(p), st.st_mtime_ns, st.st_size)
