"""Outcomes of one design: the summary numbers a study needs, computed from the integration segments alone.

:func:`thrustgraph.integrate.integrate` builds every signal and the balance
ledger on an output grid (about 4x the cost of the integration itself).
A study needs a dozen numbers per flight, so :func:`summarise` reads them
from :func:`~thrustgraph.integrate.fly_segments` directly:

* event values (apogee, guide-exit speed, impact point and speed, burn time)
  are the states at the located events, exact to the integration tolerance;
* ``max_speed`` and ``peak_acceleration`` are the largest values at the
  solver's steps, refined between the neighbouring steps on the dense output
  (a bounded scalar search) when the largest value lies inside a phase;
* ``total_impulse`` integrates the thrust magnitude over every powered step
  with 3-point Gauss-Legendre quadrature on the dense output (exact for
  polynomials of degree 5 on each step), so it is smooth in the parameters
  (an optimiser can differentiate it), unlike a trapezoid on the output grid;
* ``peak_vessel_pressure`` is the largest vessel pressure at the steps.

:data:`OUTPUTS` lists every outcome with its SI unit. :func:`fly_design`
flies one parsed model and returns an :class:`Outcome`: the values, or why
the design was screened out (a model error, no lift-off, an integration
failure), never an exception.

Examples
--------
>>> from thrustgraph.modelfile import load_model, default_model_path
>>> from thrustgraph.model import parse_model
>>> out = fly_design(parse_model(load_model(default_model_path())))
>>> out.status, round(out.values["apogee"], 3)
('ok', 54.318)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
from scipy.optimize import minimize_scalar

from .assembly import System, assemble
from .balance import Kinematics
from .errors import IntegrationError, ModelError, PluginError, ThrustgraphError
from .model import ParsedModel

__all__ = ["Output", "OUTPUTS", "output_names", "check_outputs", "Outcome", "summarise", "fly_design",
           "STATUS_OK", "STATUS_SCREENED", "STATUS_NOT_RUN"]

STATUS_OK = "ok"
STATUS_SCREENED = "screened"
STATUS_NOT_RUN = "not run"


@dataclass(frozen=True)
class Output:
    """A study outcome: name, SI unit, meaning."""

    name: str
    unit: str
    doc: str

    @property
    def header(self) -> str:
        return f"{self.name} [{self.unit or '1'}]"


OUTPUTS: dict[str, Output] = {o.name: o for o in (
    Output("apogee", "m", "highest altitude above the launch point"),
    Output("range", "m", "horizontal distance from the launch point at the end of the flight"),
    Output("impact_x", "m", "downrange (x) position at the end of the flight"),
    Output("impact_y", "m", "cross-range (y) position at the end of the flight"),
    Output("flight_time", "s", "time from launch to the end of the flight (ground impact)"),
    Output("max_speed", "m/s", "highest speed"),
    Output("peak_acceleration", "m/s^2", "largest acceleration magnitude"),
    Output("total_impulse", "N*s", "time integral of the thrust magnitude"),
    Output("burn_time", "s", "time spent in powered phases"),
    Output("propellant_expelled", "kg", "mass that left through the control surface"),
    Output("launch_mass", "kg", "mass at launch"),
    Output("peak_vessel_pressure", "Pa", "highest absolute pressure in any vessel"),
    Output("guide_exit_speed", "m/s", "speed at the end of the launch guide"),
    Output("impact_speed", "m/s", "speed at ground impact"),
)}


def output_names() -> list[str]:
    """Every outcome a study can report, in table order."""
    return list(OUTPUTS)


def check_outputs(names: Sequence[str], where: str = "outputs") -> list[str]:
    """Refuse outcome names that do not exist (with the closest name).

    >>> check_outputs(["apogee"])
    ['apogee']
    >>> check_outputs(["apogey"])
    Traceback (most recent call last):
    ...
    thrustgraph.errors.ModelError: outputs: there is no outcome 'apogey'. Fix: did you mean 'apogee'?
    """
    import difflib

    out = []
    for n in names:
        if n not in OUTPUTS:
            c = difflib.get_close_matches(str(n), list(OUTPUTS), n=1)
            hint = f"did you mean {c[0]!r}?" if c else f"outcomes: {', '.join(OUTPUTS)}"
            raise ModelError(where, f"there is no outcome {n!r}", hint)
        if n not in out:
            out.append(n)
    return out


@dataclass(frozen=True)
class Outcome:
    """What flying one design gave: ``status`` ('ok' or 'screened'), the reason, and the outcome values (SI)."""

    status: str
    message: str = ""
    values: dict[str, float] = field(default_factory=dict)


def _propulsive(system: System, modes: Sequence[int]) -> bool:
    return any(system.modes[n][modes[k]].propulsive for k, n in enumerate(system.moded))


_GAUSS_X = np.array([-math.sqrt(0.6), 0.0, math.sqrt(0.6)])
_GAUSS_W = np.array([5.0, 8.0, 5.0]) / 9.0


def _refine_max(fun, t_lo: float, t_hi: float, best: float) -> float:
    """Largest value of ``fun`` on [t_lo, t_hi] by a bounded scalar search, never below ``best``."""
    if not t_hi > t_lo:
        return best
    res = minimize_scalar(lambda t: -fun(t), bounds=(t_lo, t_hi), method="bounded",
                          options={"xatol": 1e-12 * max(1.0, abs(t_hi)) + 1e-9 * (t_hi - t_lo)})
    return max(best, -float(res.fun))


def summarise(system: System, segs: Any, outputs: Sequence[str] | None = None) -> dict[str, float]:
    """Outcome values (SI) from the segments of :func:`~thrustgraph.integrate.fly_segments`.

    Outcomes that do not apply (no guide, no impact, no vessel) are NaN.
    ``outputs`` limits the work to the outcomes asked for (the impulse
    quadrature and the peak searches cost about a tenth of the flight).
    """
    want = set(OUTPUTS if outputs is None else outputs)
    nan = math.nan
    out = {k: nan for k in OUTPUTS}
    segments = segs.segments
    if not segments:
        return {k: out[k] for k in OUTPUTS if k in want}
    first_sol = segments[0][1]
    last_ph, last_sol, last_bal = segments[-1]
    y_first, y_last = first_sol.y[:, 0], last_sol.y[:, -1]
    t_first, t_last = float(first_sol.t[0]), float(last_sol.t[-1])
    out["flight_time"] = t_last - t_first
    out["impact_x"] = float(y_last[0] - y_first[0])
    out["impact_y"] = float(y_last[1] - y_first[1])
    out["range"] = math.hypot(out["impact_x"], out["impact_y"])
    out["apogee"] = max(float(np.max(sol.y[2])) for _, sol, _ in segments) - 0.0
    ends = {float(sol.t[-1]): sol.y[:, -1] for _, sol, _ in segments}
    for e in segs.events:
        if e.name == "guide exit" and e.t in ends:
            out["guide_exit_speed"] = float(np.linalg.norm(ends[e.t][3:6]))
        elif e.name == "ground impact":
            out["impact_speed"] = float(np.linalg.norm(y_last[3:6]))
    out["burn_time"] = float(sum(sol.t[-1] - sol.t[0] for ph, sol, bal in segments
                                 if _propulsive(bal.system, ph.modes)))
    # what left through the control surface, by conservation of mass (the run carries no audit accumulators)
    bal0 = segments[0][2]
    bal0.set_phase(segments[0][0].modes, segments[0][0].kin, segments[0][0].descending, segments[0][0].slide)
    out["launch_mass"] = float(bal0.evaluate(t_first, y_first)["mass"])
    last_bal.set_phase(last_ph.modes, last_ph.kin, last_ph.descending, last_ph.slide)
    m_final = float(last_bal.evaluate(t_last, y_last)["mass"])
    out["propellant_expelled"] = out["launch_mass"] - m_final - segs.dropped_mass

    if "peak_vessel_pressure" in want:
        best = -math.inf
        for ph, sol, bal in segments:
            sysm = bal.system
            slot = {n: k for k, n in enumerate(sysm.moded)}
            for n, vf in sysm.volumes:
                mode = ph.modes[slot[n]] if n in slot else 0
                for k in range(sol.y.shape[1]):
                    p = vf.signals(sol.y[:, k].tolist(), mode).get("pressure")
                    if p is not None and p > best:
                        best = p
        if best > -math.inf:
            out["peak_vessel_pressure"] = float(best)

    if "max_speed" in want:
        best, where = -1.0, None
        for j, (ph, sol, bal) in enumerate(segments):
            sp = np.linalg.norm(sol.y[3:6], axis=0)
            k = int(np.argmax(sp))
            if sp[k] > best:
                best, where = float(sp[k]), (j, k)
        j, k = where
        sol = segments[j][1]

        def speed(t, sol=sol):
            v = sol.sol(t)[3:6]
            return float(math.sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2]))
        n = len(sol.t)
        if n > 1:
            best = _refine_max(speed, float(sol.t[max(k - 1, 0)]), float(sol.t[min(k + 1, n - 1)]), best)
        out["max_speed"] = best

    if "peak_acceleration" in want:
        best, where = -1.0, None
        accs = []
        for j, (ph, sol, bal) in enumerate(segments):
            bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
            a = np.array([bal.rhs(float(sol.t[k]), sol.y[:, k])[3:6] for k in range(len(sol.t))])
            if ph.kin == Kinematics.HELD:
                a[:] = 0.0
            am = np.linalg.norm(a, axis=1)
            accs.append(am)
            k = int(np.argmax(am))
            if am[k] > best:
                best, where = float(am[k]), (j, k)
        j, k = where
        ph, sol, bal = segments[j]
        n = len(sol.t)
        if n > 2 and 0 < k < n - 1 or (n > 1 and (k == 0 or k == n - 1)):
            bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)

            def accel(t, sol=sol, bal=bal):
                a = bal.rhs(t, sol.sol(t))
                return float(math.sqrt(a[3] * a[3] + a[4] * a[4] + a[5] * a[5]))
            best = _refine_max(accel, float(sol.t[max(k - 1, 0)]), float(sol.t[min(k + 1, n - 1)]), best)
        out["peak_acceleration"] = best

    if "total_impulse" in want:
        total = 0.0
        for ph, sol, bal in segments:
            if not _propulsive(bal.system, ph.modes) and not bal.system.jets:
                continue
            bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
            t = sol.t
            for k in range(len(t) - 1):
                a, b = float(t[k]), float(t[k + 1])
                if b <= a:
                    continue
                mid, half = 0.5 * (a + b), 0.5 * (b - a)
                nodes = mid + half * _GAUSS_X
                ys = sol.sol(nodes)
                f = 0.0
                for q in range(3):
                    tv = bal.evaluate(float(nodes[q]), ys[:, q])["thrust_vector"]
                    f += _GAUSS_W[q] * math.sqrt(tv[0] * tv[0] + tv[1] * tv[1] + tv[2] * tv[2])
                total += half * f
        out["total_impulse"] = total
    return {k: out[k] for k in OUTPUTS if k in want}


def fly_design(parsed: ParsedModel, outputs: Sequence[str] | None = None, *, rtol: float | None = None,
               atol: float | None = None) -> Outcome:
    """Fly one parsed model to its outcome values, or say why it was screened out.

    Never raises for a bad design: a model error (a parameter combination a
    kind refuses), no lift-off, or an integration failure give
    ``Outcome("screened", reason)``. A plugin that breaks the contract
    (:class:`~thrustgraph.errors.PluginError`) is not a bad design: it raises.
    """
    from .integrate import fly_segments

    try:
        system = assemble(parsed)
        segs = fly_segments(system, rtol=rtol, atol=atol, audit=False)
    except PluginError:     # a broken plugin is not a bad design: the study stops with the plugin's message
        raise
    except ModelError as exc:
        return Outcome(STATUS_SCREENED, f"model error: {exc}")
    except IntegrationError as exc:
        return Outcome(STATUS_SCREENED, f"integration failed: {exc}")
    except ThrustgraphError as exc:
        return Outcome(STATUS_SCREENED, f"error: {exc}")
    except (ArithmeticError, ValueError) as exc:
        return Outcome(STATUS_SCREENED, f"integration failed: {type(exc).__name__}: {exc}")
    if segs.status == 2:
        return Outcome(STATUS_SCREENED, "no lift-off: the thrust never exceeded the weight along the guide")
    try:
        values = summarise(system, segs, outputs)
    except (ArithmeticError, ValueError, ThrustgraphError) as exc:
        return Outcome(STATUS_SCREENED, f"summary failed: {exc}")
    if segs.message not in ("ground impact", "stopped at apogee"):
        return Outcome(STATUS_OK, segs.message, values)
    return Outcome(STATUS_OK, "", values)
