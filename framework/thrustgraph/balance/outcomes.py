"""The outcome registry: every number a flight is summed up by, defined once and computed once.

:data:`OUTCOMES` holds one :class:`~thrustgraph.kinds.outcomespec.OutcomeSpec` per
core outcome: key, quantity, SI and display units, label, meaning, the
function that computes it from the integrated solution and the vehicles it
applies to. A single run (:func:`thrustgraph.flight.integrate.integrate`, whose
``result.summary`` is keyed by these keys) and a study
(:func:`thrustgraph.studies.studyflight.fly_design`) both call :func:`summarise`, so
the two report the same numbers. Component kinds add their own outcomes
(``ComponentKind.outcomes``, checked by :func:`check_kind_outcomes` when the
plugins load); they appear in a run's summary as ``COMPONENT.KEY``.

Every value comes from the segments of
:func:`~thrustgraph.flight.integrate.fly_segments` (the solver's own steps, their
dense output and the located events), never from the evenly spaced output
grid:

* event values (guide-exit speed, impact speed) are the states at the
  located events, exact to the integration tolerance;
* the peaks (``apogee``, ``max_speed``, ``peak_acceleration``,
  ``peak_thrust``) are the largest values at the solver's steps, refined
  between the neighbouring steps on the dense output by a bounded scalar
  search;
* ``total_impulse`` integrates the thrust magnitude over every powered step
  with 3-point Gauss-Legendre quadrature on the dense output (exact for
  polynomials of degree 5 on each step, and smooth in the parameters, so an
  optimiser can differentiate it), each piece checked against the 7-point
  Gauss-Kronrod rule and halved where they differ by more than rtol of the
  impulse (a kink of the thrust inside a long step: the halving, where it
  happens, moves the value by less than that);
* masses come from the integrated states: ``propellant_expelled`` is the
  launch mass less the final mass and what separations dropped;
* ``peak_vessel_pressure`` is the largest vessel pressure at the steps.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.flight.assembly import assemble
>>> from thrustgraph.flight.integrate import fly_segments
>>> system = assemble(load_model(default_model_path()))
>>> values = summarise(system, fly_segments(system), ["apogee", "burn_time"])
>>> round(values["apogee"], 3), OUTCOMES["burn_time"].label
(54.358, 'burn time')
>>> OUTCOMES["peak_acceleration"].text(117.6798)
'117.68 m/s^2 (12 g0)'
"""

from __future__ import annotations

import difflib
import math
from dataclasses import replace
from functools import cached_property
from typing import Protocol, Any, Callable, Iterable, Mapping, Sequence

import numpy as np

from .balance import Kinematics
from ..base.extremum import bounded_minimum
from ..base.errors import ModelError, PluginError
from ..kinds.outcomespec import KEY_PATTERN, OutcomeSpec
from .sampling import at_samples, dense_states
from ..base.units import Q_
from ..kinds.vehicle import KINDS, LABELS, VehicleProfile, vehicle_profile


class System(Protocol):
    """What outcomes read of an assembled vehicle (:class:`thrustgraph.flight.assembly.System`; outcomes never build
    one, so this module does not import the assembly layer)."""

    parsed: Any
    moded: tuple[str, ...]
    modes: Mapping[str, tuple]
    launch: Any
    gravity: Any
    volumes: tuple
    jets: tuple

__all__ = ["OutcomeSpec", "OUTCOMES", "G0", "Flight", "summarise", "run_summary", "output_names",
           "default_outputs", "check_outputs", "outcome", "kind_outcomes", "check_kind_outcomes", "markdown_table",
           "outputs_by_vehicle", "HOVER_WINDOW", "quadrature_nodes", "STEP_TERMS", "NODE_TERMS",
           "STATUS_OK", "STATUS_SCREENED", "STATUS_NOT_RUN"]

#: Standard gravity, m/s^2 (exact by definition; CGPM 1901): the g0 of specific impulse and of accelerations
#: shown in standard gravities.
G0 = 9.80665

STATUS_OK = "ok"
STATUS_SCREENED = "screened"
STATUS_NOT_RUN = "not run"

_GAUSS_X = np.array([-math.sqrt(0.6), 0.0, math.sqrt(0.6)])
_GAUSS_W = np.array([5.0, 8.0, 5.0]) / 9.0
#: The 7-point Gauss-Kronrod extension of the 3-point rule (A. S. Kronrod, Nodes and Weights of Quadrature
#: Formulas, 1965; values from memory, checked in tests/test_impulse_quadrature.py: exact for polynomials of degree
#: 11, not 12): the four nodes it adds, and its weights at the three Gauss nodes and at those four
_KRONROD_X = np.array([-0.960491268708020283423507092629080, -0.434243749346802558002071502844628,
                       0.434243749346802558002071502844628, 0.960491268708020283423507092629080])
_KRONROD_W_GAUSS = np.array([0.268488089868333440728569280666710, 0.450916538658474142345110087045571,
                             0.268488089868333440728569280666710])
_KRONROD_W = np.array([0.104656226026467265193823857192073, 0.401397414775962222905051818618432,
                       0.401397414775962222905051818618432, 0.104656226026467265193823857192073])
#: halvings of one quadrature piece at most (a kink inside it is then bracketed to 2^-40 of the piece)
_HALVINGS = 40


def _propulsive(system: System, modes: Sequence[int]) -> bool:
    return any(system.modes[n][modes[k]].propulsive for k, n in enumerate(system.moded))


def _refine_max(fun: Callable[[float], float], t_lo: float, t_hi: float, best: float, end: float | None = None,
                at_end: float | None = None) -> float:
    """Largest value of ``fun`` on [t_lo, t_hi] by a bounded scalar search (Brent's:
    :func:`~thrustgraph.base.extremum.bounded_minimum`), never below ``best``.

    ``end`` (``t_lo`` or ``t_hi``), where the largest of the solver's steps sits at an end of the interval, with
    its value ``at_end``: when ``fun`` still rises toward that end (one probe a millionth of the interval inside),
    the end is the largest value and no search is made. A search would only close in on the end by golden
    sections (some 30 evaluations for the same value to ~1e-8 of the interval).
    """
    if not t_hi > t_lo:
        return best
    if end is not None and at_end is not None:
        inside = end + (1e-6 if end == t_lo else -1e-6) * (t_hi - t_lo)
        if fun(inside) <= at_end:
            return max(best, at_end)
    # Brent's bounded search, scipy's minimize_scalar(method="bounded") step for step on plain floats
    _, fx, _ = bounded_minimum(lambda t: -fun(t), t_lo, t_hi, 1e-12 * max(1.0, abs(t_hi)) + 1e-9 * (t_hi - t_lo))
    return max(best, -float(fx))


#: what the outcomes read of a :meth:`~thrustgraph.balance.balance.Balance.terms` snapshot at a segment's steps
#: (peaks of thrust, net thrust, side force and acceleration; the launch and final mass) and at its quadrature nodes (the impulses): a run
#: takes these of its samples' pass
STEP_TERMS = ("derivs", "thrust", "thrust_axial", "inflow", "axis", "mass")
NODE_TERMS = ("thrust", "inflow")


def quadrature_nodes(ph: Any, sol: Any, bal: Any) -> tuple[np.ndarray, np.ndarray] | None:
    """(nodes, half step widths) of the 3-point Gauss-Legendre quadrature of the impulse on a segment's steps
    (three nodes a step, in step order), or None for a segment the impulse leaves out (not powered, no dense
    output, no step of positive length)."""
    if not _propulsive(bal.system, ph.modes) and not bal.system.jets:
        return None
    if getattr(sol, "sol", None) is None:
        return None
    t = np.asarray(sol.t, dtype=float)
    a, b = t[:-1], t[1:]
    keep = b > a
    if not keep.any():
        return None
    a, b = a[keep], b[keep]
    # the thrust may change with time where the states do not (a feed's pressure ramp, a thrust table: the
    # solver's steps follow the states and may grow to tens of seconds), so a step longer than the output
    # interval is cut into equal pieces no longer than it (a hose-fed platform resting on its guide through a
    # 150 s ramp: 1.4e-3 of its impulse lost before, against the ensemble's integrated impulse)
    run = getattr(bal.system, "run", None)
    cap = float(run.output_interval) if run is not None and run.output_interval > 0.0 else math.inf
    pieces = np.maximum(1, np.ceil((b - a) / cap)).astype(int) if math.isfinite(cap) else np.ones(len(a), int)
    if int(pieces.max()) > 1:
        start = np.repeat(a, pieces)
        width = np.repeat((b - a) / pieces, pieces)
        j = np.arange(len(start)) - np.repeat(np.cumsum(pieces) - pieces, pieces)
        a, b = start + j * width, start + (j + 1) * width
    mid, half = 0.5 * (a + b), 0.5 * (b - a)
    return (mid[:, None] + half[:, None] * _GAUSS_X[None, :]).ravel(), half


class Flight:
    """The integrated solution of one flight, as the outcome functions read it.

    Built from an assembled :class:`~thrustgraph.flight.assembly.System` and the
    :class:`~thrustgraph.flight.integrate.Segments` of its integration (with dense
    output). :meth:`value` computes an outcome once and keeps it, so an
    outcome may use another (specific impulse uses the total impulse).
    """

    def __init__(self, system: System, segs: Any, step_terms: Mapping[int, Any] | None = None,
                 node_terms: Mapping[int, Any] | None = None) -> None:
        self.system = system
        self.segments = list(segs.segments)
        self.events = list(segs.events)
        self.dropped_mass = float(segs.dropped_mass)
        self.profile: VehicleProfile = vehicle_profile(system.parsed)
        self._values: dict[str, float] = {}
        self._at_steps: dict[tuple[int, str], Any] = {}
        # the terms at each segment's steps where the caller has them already (a run's samples hold the steps)
        for j, snap in (step_terms or {}).items():
            self._at_steps[(id(self.segments[j][1]), "terms")] = snap
        # ... and at the quadrature nodes of the impulse (see quadrature_nodes)
        self._node_terms: Mapping[int, Any] = node_terms or {}

    def at_steps(self, sol: Any, bal: Any, want: str) -> Any:
        """:func:`~thrustgraph.balance.sampling.at_samples` at a segment's steps, once per segment and request
        (the peak thrust, net thrust and side force read the same snapshot)."""
        key = (id(sol), want)
        if key not in self._at_steps:
            self._at_steps[key] = at_samples(bal, sol.t, sol.y, want)
        return self._at_steps[key]

    # -- what outcome functions read ------------------------------------------
    def value(self, key: str) -> float:
        """An outcome's SI value (NaN where it does not apply or did not happen)."""
        if key not in self._values:
            spec = OUTCOMES[key]
            self._values[key] = float(spec.compute(self)) if spec.applies(self.profile) else math.nan
        return self._values[key]

    def phased(self) -> Iterable[tuple[Any, Any, Any]]:
        """(phase, solution, balance) of every segment, the balance set to the segment's phase."""
        for ph, sol, bal in self.segments:
            bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
            yield ph, sol, bal

    @property
    def t_first(self) -> float:
        return float(self.segments[0][1].t[0])

    @property
    def t_last(self) -> float:
        return float(self.segments[-1][1].t[-1])

    @property
    def y_first(self) -> np.ndarray:
        return self.segments[0][1].y[:, 0]

    @property
    def y_last(self) -> np.ndarray:
        return self.segments[-1][1].y[:, -1]

    def mass_at(self, which: int) -> float:
        """Vehicle mass at the first (0) or last (-1) state, kg (from the terms at the segment's steps where they
        were evaluated already: the same balance's number)."""
        ph, sol, bal = self.segments[which]
        snap = self._at_steps.get((id(sol), "terms"))
        if snap is not None:
            m = snap["mass"]
            return float(m[which] if isinstance(m, np.ndarray) and m.ndim == 1 and len(m) == len(sol.t) else m)
        bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
        return float(bal.evaluate(float(sol.t[which]), sol.y[:, which])["mass"])

    def event_state(self, name: str) -> np.ndarray | None:
        """The state at the first event called ``name`` (the end of the segment it closed), or None."""
        ends = {float(sol.t[-1]): sol.y[:, -1] for _, sol, _ in self.segments}
        for e in self.events:
            if e.name == name:
                return ends.get(e.t, self.y_last if e.t == self.t_last else None)
        return None

    def happened(self, name: str) -> bool:
        return any(e.name == name for e in self.events)

    def peak(self, at_steps: Callable[[Any, Any, Any], np.ndarray],
             dense: Callable[[Any, Any, Any], Callable[[float], float]]) -> float:
        """Largest value over the flight: the largest at the solver's steps of each segment, refined on the dense
        output between the neighbouring steps (a bounded scalar search).

        ``at_steps(phase, sol, balance)`` gives the values at ``sol.t``; ``dense(phase, sol, balance)`` a
        function of time inside that segment.
        """
        # the largest step is refined; when it ends or starts its segment (an event), the neighbouring segment's
        # first or last step is refined too: the peak may rise just inside it, where none of its steps shows it
        best, where, ends, values = -math.inf, [], [], []
        for j, (ph, sol, bal) in enumerate(self.phased()):
            v = np.asarray(at_steps(ph, sol, bal), dtype=float)
            values.append(v)
            k = int(np.argmax(v))
            ends.append(len(v) - 1)
            if v[k] > best:
                best, where = float(v[k]), [(j, k)]
        if where:
            j, k = where[0]
            if k == ends[j] and j + 1 < len(ends):
                where.append((j + 1, 0))
            if k == 0 and j > 0:
                where.append((j - 1, ends[j - 1]))
        if not where:
            return math.nan
        top = best
        for j, k in where:
            ph, sol, bal = self.segments[j]
            n = len(sol.t)
            if n > 1 and getattr(sol, "sol", None) is not None:
                bal.set_phase(ph.modes, ph.kin, ph.descending, ph.slide)
                lo, hi = float(sol.t[max(k - 1, 0)]), float(sol.t[min(k + 1, n - 1)])
                end = lo if k == 0 else hi if k == n - 1 else None
                top = _refine_max(dense(ph, sol, bal), lo, hi, top, end, float(values[j][k]))
        best = top
        return best

    @cached_property
    def impulses(self) -> tuple[float, float]:
        """(gross, net) impulse: the integrals of the magnitudes of the gross thrust (every opening's momentum
        flux and pressure thrust) and of the net thrust (the gross thrust plus the momentum of the fluid entering
        through sources: an inlet's ram drag, a hose's inflow) over every powered step, by 3-point
        Gauss-Legendre quadrature on the dense output. Both read the balance's own sums
        (:meth:`~thrustgraph.balance.balance.Balance.terms`: ``thrust`` and ``inflow``).

        Each piece is checked against the 7-point Gauss-Kronrod rule on the same piece: where the two differ by
        more than rtol of the segment's impulse, the piece is halved and each half integrated and checked the
        same way (:meth:`_refined`). The solver's steps follow the states; the thrust
        may change where they do not (a hose feed's flow ramp on a test stand), so a step may hold a kink of the
        thrust that the 3-point rule alone would integrate 4e-5 wrong."""
        gross = net = 0.0
        rtol = float(self.system.run.rtol)
        for j, (ph, sol, bal) in enumerate(self.phased()):
            quad = quadrature_nodes(ph, sol, bal)
            if quad is None:
                continue
            nodes, half = quad
            mag, mag_net = self._thrusts(sol, bal, nodes, self._node_terms.get(j))
            pieces = self._refined(sol, bal, nodes.reshape(-1, 3)[:, 1], half, mag.reshape(-1, 3),
                                   mag_net.reshape(-1, 3), rtol)
            gross += float(np.sum(pieces[:, 0]))
            net += float(np.sum(pieces[:, 1]))
        return gross, net

    @staticmethod
    def _thrusts(sol: Any, bal: Any, nodes: np.ndarray, snap: Any = None) -> tuple[np.ndarray, np.ndarray]:
        """The gross and net thrust magnitudes at times ``nodes`` of a segment (``snap``: the balance's terms
        there, where the caller has them)."""
        n = len(nodes)
        if snap is None:
            ys = dense_states(sol, nodes)
            snap = at_samples(bal, nodes, ys, "terms")
        if snap is not None:
            tv = [np.asarray(c, dtype=float) + np.zeros(n) for c in snap["thrust"]]
            nv = [np.asarray(c, dtype=float) + np.zeros(n) for c in snap["inflow"]]
        else:
            snaps = [bal.terms(float(nodes[q]), ys[:, q].tolist()) for q in range(n)]
            tv = [np.array([sn["thrust"][c] for sn in snaps], dtype=float) for c in range(3)]
            nv = [np.array([sn["inflow"][c] for sn in snaps], dtype=float) for c in range(3)]
        mag = np.sqrt(tv[0] * tv[0] + tv[1] * tv[1] + tv[2] * tv[2])
        net_v = [tv[c] + nv[c] for c in range(3)]
        return mag, np.sqrt(net_v[0] * net_v[0] + net_v[1] * net_v[1] + net_v[2] * net_v[2])

    def _refined(self, sol: Any, bal: Any, mid: np.ndarray, half: np.ndarray, at_gauss: np.ndarray,
                 at_gauss_net: np.ndarray, rtol: float) -> np.ndarray:
        """The (gross, net) 3-point integrals of the pieces centred at ``mid`` (half widths ``half``; the
        thrusts at their Gauss nodes, a row a piece), each checked against the 7-point Kronrod rule (four more
        nodes a piece); a piece that fails the check is replaced by the sum over its halves, refined alike. A
        piece passes where the two rules agree to rtol of the segment's impulse (the error an integrated
        impulse's step control allows a step, as the ensemble's); the 3-point value is kept, so that a flight
        whose every piece passes keeps its numbers."""
        owner = np.arange(len(mid))           # the piece each interval under check belongs to
        keep = np.zeros((len(mid), 2))        # the accepted intervals' sums, per piece
        for level in range(_HALVINGS + 1):
            t_kron = (mid[:, None] + half[:, None] * _KRONROD_X[None, :]).ravel()
            mk, mk_net = self._thrusts(sol, bal, t_kron)
            gauss = np.column_stack([half * (at_gauss @ _GAUSS_W), half * (at_gauss_net @ _GAUSS_W)])
            kron = np.column_stack([half * (at_gauss @ _KRONROD_W_GAUSS + mk.reshape(-1, 4) @ _KRONROD_W),
                                    half * (at_gauss_net @ _KRONROD_W_GAUSS + mk_net.reshape(-1, 4) @ _KRONROD_W)])
            if level == 0:
                tol = rtol * np.sum(np.abs(gauss), axis=0)
            good = np.all(np.abs(kron - gauss) <= tol, axis=1) | (half <= 1e-13 * np.maximum(np.abs(mid), 1.0)) | \
                (level == _HALVINGS)
            np.add.at(keep, owner[good], gauss[good])
            bad = ~good
            if not bad.any():
                return keep
            # the failing intervals' halves, and the thrusts at their Gauss nodes
            h2 = 0.5 * half[bad]
            mid = np.concatenate([mid[bad] - h2, mid[bad] + h2])
            owner = np.concatenate([owner[bad], owner[bad]])
            half = np.concatenate([h2, h2])
            mg, mg_net = self._thrusts(sol, bal, (mid[:, None] + half[:, None] * _GAUSS_X[None, :]).ravel())
            at_gauss, at_gauss_net = mg.reshape(-1, 3), mg_net.reshape(-1, 3)
        return keep

    @property
    def thrust_impulse(self) -> float:
        """Integral of the (gross) thrust magnitude over every powered step (see :attr:`impulses`)."""
        return self.impulses[0]

    def first_time(self, fun: Callable[[np.ndarray], float], level: float) -> float:
        """The first time ``fun(state)`` reaches ``level`` from below: the first step where it does, refined on
        the dense output between it and the step before (Brent's method); NaN when it never does."""
        for _ph, sol, _bal in self.segments:
            v = np.array([fun(sol.y[:, k]) for k in range(len(sol.t))])
            hit = np.nonzero(v >= level)[0]
            if not len(hit):
                continue
            k = int(hit[0])
            if k == 0 or getattr(sol, "sol", None) is None:
                return float(sol.t[k])
            # imported on first use, like minimize_scalar (_refine_max): scipy.optimize is slow to import
            from scipy.optimize import brentq
            return float(brentq(lambda t: fun(dense_states(sol, t)) - level, float(sol.t[k - 1]), float(sol.t[k]),
                                xtol=1e-12 * max(1.0, abs(float(sol.t[k]))), rtol=1e-13))
        return math.nan

    def window_samples(self, fraction: float, per_step: int = 8) -> tuple[np.ndarray, np.ndarray]:
        """(t, states) over the last ``fraction`` of the run: the solver's steps inside it and ``per_step`` points
        of the dense output inside each step, in time order."""
        start = self.t_last - fraction * (self.t_last - self.t_first)
        ts, ys = [], []
        for _ph, sol, _bal in self.segments:
            t = np.asarray(sol.t, dtype=float)
            if t[-1] < start:
                continue
            if getattr(sol, "sol", None) is not None and len(t) > 1:
                grid = np.concatenate([np.linspace(t[k], t[k + 1], per_step + 1)[:-1] for k in range(len(t) - 1)]
                                      + [t[-1:]])
                grid = np.concatenate([[start], grid[grid > start]]) if grid[0] < start else grid
                ts.append(grid)
                ys.append(dense_states(sol, grid))
            else:
                keep = t >= start
                ts.append(t[keep])
                ys.append(sol.y[:, keep])
        return np.concatenate(ts), np.concatenate(ys, axis=1)


# -- how each outcome is computed -----------------------------------------------------------------------------

def _norm3(v: Any) -> float:
    return float(math.sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2]))


_ALTITUDE, _VELOCITY = slice(2, 3), slice(3, 6)     # of the state vector


def _apogee(f: Flight) -> float:
    return f.peak(lambda ph, sol, bal: sol.y[2],
                  lambda ph, sol, bal: (lambda t: float(dense_states(sol, t, _ALTITUDE)[0]))) + 0.0


def _max_speed(f: Flight) -> float:
    return f.peak(lambda ph, sol, bal: np.linalg.norm(sol.y[3:6], axis=0),
                  lambda ph, sol, bal: (lambda t: _norm3(dense_states(sol, t, _VELOCITY))))


def _accel_steps(flight: Flight, ph: Any, sol: Any, bal: Any) -> np.ndarray:
    if ph.kin == Kinematics.HELD:
        return np.zeros(len(sol.t))
    snap = flight.at_steps(sol, bal, "terms")      # the snapshot the peak thrusts read: its derivatives
    d = snap["derivs"] if snap is not None else None
    if d is not None:
        return np.sqrt(d[3] * d[3] + d[4] * d[4] + d[5] * d[5]) + np.zeros(len(sol.t))
    return np.array([_norm3(bal.rhs(float(sol.t[k]), sol.y[:, k])[3:6]) for k in range(len(sol.t))])


def _accel_dense(ph: Any, sol: Any, bal: Any) -> Callable[[float], float]:
    if ph.kin == Kinematics.HELD:
        return lambda t: 0.0
    return lambda t: _norm3(bal.rhs(t, dense_states(sol, t))[3:6])


def _peak_acceleration(f: Flight) -> float:
    return f.peak(lambda ph, sol, bal: _accel_steps(f, ph, sol, bal), _accel_dense)


def _axial(snap: Mapping[str, Any], net: bool) -> Any:
    """The thrust along the body axis of a :meth:`~thrustgraph.balance.balance.Balance.terms` snapshot: gross (the
    openings' momentum flux and pressure thrust), or net (with the momentum of the entering fluid)."""
    if not net:
        return snap["thrust_axial"]
    tv, nv, e = snap["thrust"], snap["inflow"], snap["axis"]
    return (tv[0] + nv[0]) * e[0] + (tv[1] + nv[1]) * e[1] + (tv[2] + nv[2]) * e[2]


def _side(snap: Mapping[str, Any]) -> Any:
    """The magnitude of the gross thrust across the body axis (a sideways vent's push)."""
    tv, e = snap["thrust"], snap["axis"]
    along = snap["thrust_axial"]
    x, y, z = tv[0] - along * e[0], tv[1] - along * e[1], tv[2] - along * e[2]
    return np.sqrt(x * x + y * y + z * z)


def _peak_of(f: Flight, of: Callable[[Mapping[str, Any]], Any]) -> float:
    # the balance's snapshot without the ledger (its sums are the numbers evaluate() records), over the arrays of
    # a segment's steps where the vehicle allows it (thrustgraph.balance.sampling)
    def at_steps(ph: Any, sol: Any, bal: Any) -> Any:
        snap = f.at_steps(sol, bal, "terms")
        if snap is not None:
            return np.asarray(of(snap), dtype=float) + np.zeros(len(sol.t))
        return [of(bal.terms(float(sol.t[k]), sol.y[:, k].tolist())) for k in range(len(sol.t))]
    return f.peak(at_steps, lambda ph, sol, bal: (lambda t: float(of(bal.terms(t, dense_states(sol, t).tolist())))))


def _peak_thrust(f: Flight) -> float:
    return _peak_of(f, lambda snap: _axial(snap, False))


def _peak_net_thrust(f: Flight) -> float:
    return _peak_of(f, lambda snap: _axial(snap, True))


def _peak_side_force(f: Flight) -> float:
    # a thrust along the body axis leaves only its rounding across it (~1e-16 of the thrust): when the solver's
    # steps show no more than 1e-9 of the largest thrust, their largest value is the answer (a search between the
    # steps would chase rounding); a sideways opening's push is refined like any peak
    side = thrust = 0.0
    for _ph, sol, bal in f.phased():
        snap = f.at_steps(sol, bal, "terms")
        if snap is None:
            return _peak_of(f, _side)
        side = max(side, float(np.max(np.asarray(_side(snap), dtype=float))))
        thrust = max(thrust, float(np.max(np.abs(np.asarray(snap["thrust_axial"], dtype=float)))))
    if side <= 1e-9 * thrust:
        return side
    return _peak_of(f, _side)


def _peak_vessel_pressure(f: Flight) -> float:
    best = -math.inf
    for ph, sol, bal in f.segments:
        sysm = bal.system
        if not sysm.volumes:
            continue
        slot = {n: k for k, n in enumerate(sysm.moded)}
        states = sol.y.T.tolist()
        for n, vf in sysm.volumes:
            mode = ph.modes[slot[n]] if n in slot else 0
            for s in states:
                p = vf.signals(s, mode).get("pressure")
                if p is not None and p > best:
                    best = p
    return float(best) if best > -math.inf else math.nan


def _azimuth_frame(f: Flight) -> tuple[float, float]:
    """(downrange, drift) of the end point: along the launch azimuth and across it (to its left)."""
    dx, dy = f.value("impact_x"), f.value("impact_y")
    az = f.system.launch.azimuth
    return dx * math.cos(az) + dy * math.sin(az), -dx * math.sin(az) + dy * math.cos(az)


def _guide_exit_speed(f: Flight) -> float:
    y = f.event_state("guide exit")
    return _norm3(y[3:6]) if y is not None else math.nan


def _impact_speed(f: Flight) -> float:
    return _norm3(f.y_last[3:6]) if f.happened("ground impact") else math.nan


def _burn_time(f: Flight) -> float:
    return float(sum(sol.t[-1] - sol.t[0] for ph, sol, bal in f.segments if _propulsive(bal.system, ph.modes)))


def _specific_impulse(f: Flight) -> float:
    m = f.value("propellant_expelled")
    return f.value("total_impulse") / m / G0 if m > 1e-12 else math.nan


def _distance(f: Flight) -> float:
    u = f.system.guide_dir
    d = f.y_last[:3] - f.y_first[:3]
    return float(d[0] * u[0] + d[1] * u[1] + d[2] * u[2])


def _time_to_90(f: Flight) -> float:
    top = f.value("top_speed")
    if not top > 0.0:
        return math.nan
    return f.first_time(lambda y: _norm3(y[3:6]), 0.9 * top) - f.t_first


#: The stretch of a hover rig's run its mean height and oscillation are taken over: the last quarter of the run
#: (after the start-up, when the run is long enough to settle; common practice for a settled record, no source).
HOVER_WINDOW = 0.25


def _mean_height(f: Flight) -> float:
    t, y = f.window_samples(HOVER_WINDOW)
    if len(t) < 2 or not t[-1] > t[0]:
        return float(y[2, -1])
    from scipy.integrate import trapezoid      # on first use (scipy.integrate is slow to import)
    return float(trapezoid(y[2], t) / (t[-1] - t[0]))


def _height_oscillation(f: Flight) -> float:
    _, y = f.window_samples(HOVER_WINDOW)
    return 0.5 * float(np.max(y[2]) - np.min(y[2]))


def _differs_from_range(values: Mapping[str, float]) -> bool:
    """Downrange and drift add nothing when the flight stayed in the launch plane (drift within 1e-9 of range)."""
    drift, rng = values.get("drift", math.nan), values.get("range", math.nan)
    return not (math.isfinite(drift) and abs(drift) <= 1e-9 * max(abs(rng), 1.0))


def _differs(key: str, other: str) -> Callable[[Mapping[str, float]], bool]:
    def show(values: Mapping[str, float]) -> bool:
        a, b = values.get(key, math.nan), values.get(other, math.nan)
        return not (math.isfinite(a) and math.isfinite(b) and abs(a - b) <= 1e-9 * max(abs(a), abs(b), 1e-30))
    show.__doc__ = f"shown when it differs from {other}"
    return show


def _side_matters(values: Mapping[str, float]) -> bool:
    """A side force is shown when it is more than 1e-6 of the largest thrust (a vent that points sideways), not
    when it is the rounding of an axial thrust."""
    side = values.get("peak_side_force", math.nan)
    big = max(abs(values.get("peak_thrust", 0.0) or 0.0), abs(side) if math.isfinite(side) else 0.0)
    return math.isfinite(side) and side > 1e-6 * big and side > 0.0


def _never(_: Any) -> bool:
    return False


def _moves(v: VehicleProfile) -> bool:
    """every vehicle but one held on a test stand"""
    return v.moves


def _airborne(v: VehicleProfile) -> bool:
    """flying vehicles and hover rigs"""
    return v.airborne


def _not_airborne(v: VehicleProfile) -> bool:
    """vehicles on a track, on a stand, or free of gravity"""
    return not v.airborne


def _flies(v: VehicleProfile) -> bool:
    """flying vehicles (guide and free launches under gravity, not fed from outside)"""
    return v.kind == "flying"


def _hovers(v: VehicleProfile) -> bool:
    """hover rigs (flying under gravity, fed from outside)"""
    return v.kind == "hovering"


def _on_track(v: VehicleProfile) -> bool:
    """vehicles on a track or a water lane"""
    return v.kind == "track"


def _free_moving(v: VehicleProfile) -> bool:
    """moving vehicles not on a track"""
    return v.moves and v.kind != "track"


def _ranged(v: VehicleProfile) -> bool:
    """flying vehicles and platforms free of gravity"""
    return v.kind in ("flying", "weightless")


def _on_guide(v: VehicleProfile) -> bool:
    """guide launches with a guide longer than 0 (a zero-length pad has no guide exit)"""
    return v.guided


def _has_vessels(v: VehicleProfile) -> bool:
    """vehicles with a vessel"""
    return v.vessels


def _carries_propellant(v: VehicleProfile) -> bool:
    """vehicles not fed from outside (they expel what they carry)"""
    return not v.fed


def _fed(v: VehicleProfile) -> bool:
    """vehicles fed from outside (an inlet, a hose)"""
    return v.fed


def _staged(v: VehicleProfile) -> bool:
    """models with stages"""
    return v.staged


_O = OutcomeSpec

#: Every core outcome, in the order people read them.
OUTCOMES: dict[str, OutcomeSpec] = {o.key: o for o in (
    _O("flight_time", "time", "s", "s", "flight time",
       "time from launch to the end of the flight (ground impact, or the end time)",
       lambda f: f.t_last - f.t_first, applies=_airborne),
    _O("run_time", "time", "s", "s", "run time",
       "time from the start to the end of the run (coming to rest, the propulsion spent on a stand, or the end "
       "time)", lambda f: f.t_last - f.t_first, applies=_not_airborne),
    _O("burn_time", "time", "s", "s", "burn time",
       "time spent in powered phases (a mode a component declares propulsive)", _burn_time,
       applies=_carries_propellant),
    _O("powered_time", "time", "s", "s", "powered time",
       "time spent in powered phases (a pump running, a feed on) of a vehicle fed from outside", _burn_time,
       applies=_fed, default=False),
    _O("launch_mass", "mass", "kg", "kg", "launch mass", "vehicle mass at launch, from the initial state",
       lambda f: f.mass_at(0)),
    _O("final_mass", "mass", "kg", "kg", "final mass",
       "vehicle mass at the end of the flight, from the final state (shown when it differs from the launch mass)",
       lambda f: f.mass_at(-1), show=_differs("final_mass", "launch_mass"), default=False),
    _O("propellant_expelled", "mass", "kg", "kg", "propellant expelled",
       "mass that left through the control surface: launch mass less final mass and the stages dropped",
       lambda f: f.value("launch_mass") - f.value("final_mass") - f.dropped_mass, applies=_carries_propellant),
    _O("dropped_mass", "mass", "kg", "kg", "mass dropped at separations", "mass of the stages dropped",
       lambda f: f.dropped_mass, applies=_staged, default=False),
    _O("peak_thrust", "force", "N", "N", "peak thrust (gross)",
       "largest gross thrust along the body axis: the momentum flux and pressure thrust of every opening and "
       "prescribed jet, at the steps, refined inside the step where it peaks",
       _peak_thrust, default=False),
    _O("peak_net_thrust", "force", "N", "N", "peak thrust (net)",
       "largest net thrust along the body axis: the gross thrust plus the momentum of the fluid entering through "
       "sources (an inlet's ram drag, a hose's inflow), the force the flow puts on the vehicle (shown when it "
       "differs from the gross)", _peak_net_thrust, show=_differs("peak_net_thrust", "peak_thrust"),
       default=False),
    _O("peak_side_force", "force", "N", "N", "peak side force",
       "largest gross thrust across the body axis (an opening that points sideways; shown when not zero)",
       _peak_side_force, show=_side_matters, default=False),
    _O("total_impulse", "impulse", "N*s", "N*s", "total impulse (gross)",
       "time integral of the gross thrust magnitude over the powered phases (those of the burn time; every phase "
       "of a vehicle with a prescribed jet): 3-point Gauss-Legendre quadrature of the dense solution on every step "
       "(cut into pieces no longer than the output interval)",
       lambda f: f.impulses[0]),
    _O("net_impulse", "impulse", "N*s", "N*s", "total impulse (net)",
       "time integral of the net thrust magnitude (gross thrust plus the entering fluid's momentum) over the "
       "same phases and by the same quadrature as the total impulse (shown when it differs from the gross)",
       lambda f: f.impulses[1], show=_differs("net_impulse", "total_impulse"), default=False),
    _O("specific_impulse", "time", "s", "s", "specific impulse",
       "total impulse per unit weight (g0) of propellant expelled; none when nothing was expelled",
       _specific_impulse, applies=_carries_propellant, default=False),
    _O("peak_acceleration", "acceleration", "m/s^2", "m/s^2", "peak acceleration",
       "largest acceleration magnitude: at the steps, refined inside the step where it peaks",
       _peak_acceleration, applies=_moves, also=("g0",)),
    _O("max_speed", "speed", "m/s", "m/s", "maximum speed",
       "largest speed: at the steps, refined inside the step where it peaks", _max_speed, applies=_free_moving),
    _O("top_speed", "speed", "m/s", "m/s", "top speed",
       "largest speed along the track (the steady speed where thrust and resistance balance, when the run is "
       "long enough to reach it): at the steps, refined inside the step where it peaks", _max_speed,
       applies=_on_track, default=False),
    _O("time_to_90_percent_speed", "time", "s", "s", "time to 90 % of top speed",
       "time from the start until the speed first reaches 90 % of the top speed, located on the dense output",
       _time_to_90, applies=_on_track, default=False),
    _O("distance", "length", "m", "m", "distance along the track",
       "distance along the track from the start point to the end point", _distance, applies=_on_track,
       default=False),
    _O("guide_exit_speed", "speed", "m/s", "m/s", "guide exit speed", "speed at the end of the launch guide",
       _guide_exit_speed, applies=_on_guide),
    _O("apogee", "length", "m", "m", "apogee",
       "highest altitude (above the ground datum): at the steps (the apogee event is one), refined inside the "
       "step where it peaks", _apogee, applies=_flies),
    _O("max_height", "length", "m", "m", "highest point",
       "highest altitude of a hover rig (above the ground datum): at the steps, refined inside the step where it "
       "peaks", _apogee, applies=_hovers, default=False),
    _O("mean_height", "length", "m", "m", "mean height",
       "time-averaged altitude over the last quarter of the run (trapezoids on the dense output, 8 points a "
       "step)", _mean_height, applies=_hovers, default=False),
    _O("height_oscillation", "length", "m", "m", "height oscillation (amplitude)",
       "half the difference of the highest and lowest altitude over the last quarter of the run",
       _height_oscillation, applies=_hovers, default=False),
    _O("range", "length", "m", "m", "range", "horizontal distance from the launch point at the end of the flight",
       lambda f: math.hypot(f.value("impact_x"), f.value("impact_y")), applies=_ranged),
    _O("downrange", "length", "m", "m", "downrange distance",
       "horizontal distance along the launch azimuth at the end of the flight (shown when it differs from the "
       "range)", lambda f: _azimuth_frame(f)[0], applies=_ranged, show=_differs_from_range, default=False),
    _O("drift", "length", "m", "m", "drift across the azimuth",
       "horizontal distance across the launch azimuth (to its left) at the end of the flight, e.g. under a "
       "cross wind (shown when not zero)", lambda f: _azimuth_frame(f)[1], applies=_ranged,
       show=_differs_from_range, default=False),
    _O("impact_x", "length", "m", "m", "end point x", "x position at the end of the flight, from the launch point",
       lambda f: float(f.y_last[0] - f.y_first[0]), applies=_moves, show=_never),
    _O("impact_y", "length", "m", "m", "end point y", "y position at the end of the flight, from the launch point",
       lambda f: float(f.y_last[1] - f.y_first[1]), applies=_moves, show=_never),
    _O("impact_speed", "speed", "m/s", "m/s", "impact speed", "speed at ground impact", _impact_speed,
       applies=_airborne),
    _O("peak_vessel_pressure", "pressure", "Pa", "bar", "peak vessel pressure (absolute)",
       "highest absolute pressure in any vessel, at the steps; a prediction, never a rating",
       _peak_vessel_pressure, applies=_has_vessels),
)}


def outcome(key: str) -> OutcomeSpec:
    """The spec of a core outcome; a clear error with the closest key when there is none."""
    return OUTCOMES[check_outputs([key])[0]]


def output_names() -> list[str]:
    """Every core outcome, in table order."""
    return list(OUTCOMES)


def default_outputs() -> tuple[str, ...]:
    """The outcomes a study reports when none are named."""
    return tuple(k for k, o in OUTCOMES.items() if o.default)


def check_outputs(names: Sequence[str], where: str = "outputs") -> list[str]:
    """Refuse outcome names that do not exist (with the closest name).

    >>> check_outputs(["apogee"])
    ['apogee']
    >>> check_outputs(["apogey"])
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: outputs: there is no outcome 'apogey'. Fix: did you mean 'apogee'?
    """
    out = []
    for n in names:
        if n not in OUTCOMES:
            c = difflib.get_close_matches(str(n), list(OUTCOMES), n=1)
            hint = f"did you mean {c[0]!r}?" if c else f"outcomes: {', '.join(OUTCOMES)}"
            raise ModelError(where, f"there is no outcome {n!r}", hint)
        if n not in out:
            out.append(n)
    return out


def markdown_table(specs: Iterable[OutcomeSpec] | None = None) -> str:
    """The registry as a Markdown table (docs/studies.md holds it; a test checks it is current).

    >>> print(markdown_table([OUTCOMES["apogee"]]).splitlines()[2][:52])
    | `apogee` | m | m | apogee | flying vehicles (guide
    """
    rows = ["| key | SI unit | shown in | label | applies to | what it is and how it is computed |",
            "| --- | --- | --- | --- | --- | --- |"]
    for o in (OUTCOMES.values() if specs is None else specs):
        shown = ", ".join((o.display or "1",) + o.also)
        where = (o.applies.__doc__ or "").strip().splitlines()[0]
        rows.append(f"| `{o.key}` | {o.unit or '1'} | {shown} | {o.label} | {where} | {o.doc}"
                    f"{'' if o.default else ' (in a study only when named)'} |")
    return "\n".join(rows) + "\n"


#: What varies within a class of vehicle and changes its outcomes: each a field of the profile set one way and
#: the words that say so.
_VARIANTS = (("vessels", True, "with a vessel"), ("staged", True, "with stages"),
             ("guide_length", 1.0, "on a guide longer than 0"), ("fed", True, "fed from outside"))


def outputs_by_vehicle() -> str:
    """Which core outcomes a run's summary shows for each class of vehicle (:mod:`thrustgraph.kinds.vehicle`), as
    Markdown (docs/outputs.md holds it; a test checks it is current). An outcome is also left out when it did
    not happen (no impact) or adds nothing (a net thrust equal to the gross).

    >>> print(outputs_by_vehicle().splitlines()[2])
    | `flight_time` | flight time | yes | yes | - | - | - |
    """
    mounts = {"flying": "guide", "hovering": "guide", "track": "track", "stand": "held", "weightless": "free"}
    rows = ["| key | label | " + " | ".join(LABELS[k] for k in KINDS) + " |",
            "| --- | --- |" + " --- |" * len(KINDS)]
    for o in OUTCOMES.values():
        if o.show is _never:
            continue
        cells = []
        for kind in KINDS:
            base = VehicleProfile(kind=kind, mount=mounts[kind], fed=kind == "hovering")
            changed = []
            for field, value, words in _VARIANTS:
                if field == "fed" and kind in ("flying", "hovering"):
                    continue         # fed from outside, a flying vehicle is a hover rig: its own class
                if field == "guide_length" and mounts[kind] != "guide":
                    continue
                if o.applies(replace(base, **{field: value})) != o.applies(base):
                    changed.append(words)
            if o.applies(base):
                cells.append("yes" + (", unless " + ", ".join(changed) if changed else ""))
            else:
                cells.append(", ".join(changed) if changed else "-")
        rows.append(f"| `{o.key}` | {o.label} | " + " | ".join(cells) + " |")
    return "\n".join(rows) + "\n"


def summarise(system: System, segs: Any, outputs: Sequence[str] | None = None) -> dict[str, float]:
    """Outcome values (SI) from the segments of :func:`~thrustgraph.flight.integrate.fly_segments`, in table order.

    Outcomes that do not apply or did not happen (no guide, no impact, no
    vessel) are NaN. ``outputs`` limits the work to the outcomes asked for
    (the impulse quadrature and the peak searches cost about a tenth of the
    flight).
    """
    want = set(OUTCOMES if outputs is None else check_outputs(outputs))
    if not segs.segments:
        return {k: math.nan for k in OUTCOMES if k in want}
    flight = Flight(system, segs)
    return {k: flight.value(k) for k in OUTCOMES if k in want}


def run_summary(system: System, segs: Any, step_terms: Mapping[int, Any] | None = None,
                node_terms: Mapping[int, Any] | None = None) -> dict[str, float]:
    """The summary of a single run: every core outcome that applies to the vehicle and happened (finite).

    ``step_terms`` and ``node_terms``: segment index -> the :meth:`~thrustgraph.balance.balance.Balance.terms`
    snapshot at its steps and at its :func:`quadrature_nodes`, where the caller evaluated them already (a run
    evaluates them in the same pass as its output samples)."""
    flight = Flight(system, segs, step_terms, node_terms)
    out = {}
    for k, spec in OUTCOMES.items():
        if spec.applies(flight.profile):
            v = flight.value(k)
            if math.isfinite(v):
                out[k] = v
    return out


# -- outcomes of component kinds ------------------------------------------------------------------------------

def check_kind_outcomes(kind: type, plugin: str, seen: dict[str, tuple[OutcomeSpec, str, str]]) -> None:
    """Check the outcomes a component kind declares; ``seen`` holds (spec, kind, plugin) of every key so far.

    Raises :class:`~thrustgraph.base.errors.PluginError` naming the plugin and what to change: a key declared twice
    by one kind, a key two kinds define differently, a key of the core, a label used twice, a unit pint
    cannot read, or the old ``summary_units`` table.
    """
    name = getattr(kind, "kind", kind.__name__)
    if "summary_units" in vars(kind):
        raise PluginError(f"plugin {plugin!r}: kind {name!r} sets summary_units, which thrustgraph no longer reads. "
                          "Fix: declare outcomes = (OutcomeSpec(key, quantity, unit, display, label, doc), ...) "
                          "instead (thrustgraph.kinds.outcomespec)")
    keys: set[str] = set()
    labels: set[str] = set()
    for spec in getattr(kind, "outcomes", ()):
        if not isinstance(spec, OutcomeSpec):
            raise PluginError(f"plugin {plugin!r}: kind {name!r} declares outcome {spec!r}, which is not an "
                              "OutcomeSpec. Fix: declare outcomes = (OutcomeSpec(...), ...)")
        if not KEY_PATTERN.match(spec.key):
            raise PluginError(f"plugin {plugin!r}: kind {name!r} declares outcome key {spec.key!r}. Fix: use lower "
                              "case words joined by underscores (the summary names it COMPONENT.KEY)")
        if spec.key in keys:
            raise PluginError(f"plugin {plugin!r}: kind {name!r} declares outcome {spec.key!r} twice. Fix: declare "
                              "each outcome once in its outcomes tuple")
        if spec.label in labels:
            raise PluginError(f"plugin {plugin!r}: kind {name!r} gives two outcomes the label {spec.label!r}. Fix: "
                              "give each outcome its own label")
        if spec.key in OUTCOMES:
            raise PluginError(f"plugin {plugin!r}: kind {name!r} declares outcome {spec.key!r}, a core outcome "
                              f"({OUTCOMES[spec.key].label}). Fix: give the kind's outcome its own key")
        for u in (spec.unit, spec.display, *spec.also):
            try:
                Q_(1.0, u).to(spec.unit) if u else None
            except Exception as exc:  # noqa: BLE001 - pint raises several types
                raise PluginError(f"plugin {plugin!r}: kind {name!r} outcome {spec.key!r}: unit {u!r} is not a "
                                  f"unit of {spec.unit or 'a plain number'!r} ({type(exc).__name__}). Fix: write a "
                                  "pint unit of the outcome's dimension") from None
        if spec.key in seen and seen[spec.key][0] != spec:
            other, okind, oplugin = seen[spec.key]
            raise PluginError(f"outcome {spec.key!r} is declared by kind {okind!r} (plugin {oplugin!r}) as "
                              f"{other.label!r} [{other.unit}] and by kind {name!r} (plugin {plugin!r}) as "
                              f"{spec.label!r} [{spec.unit}]. Fix: rename one of them, or have both kinds declare "
                              "the same OutcomeSpec object")
        keys.add(spec.key)
        labels.add(spec.label)
        seen.setdefault(spec.key, (spec, name, plugin))


def kind_outcomes(parsed_kinds: Mapping[str, type]) -> dict[str, OutcomeSpec]:
    """The outcomes the components of a model add: ``COMPONENT.KEY`` -> spec labelled ``COMPONENT label``.

    >>> class Chute:
    ...     outcomes = (OutcomeSpec("deployment_speed", "speed", "m/s", "m/s", "deployment speed", "at deployment"),)
    >>> spec = kind_outcomes({"drogue": Chute})["drogue.deployment_speed"]
    >>> spec.label, spec.header
    ('drogue deployment speed', 'drogue.deployment_speed [m/s]')
    """
    out = {}
    for comp, cls in parsed_kinds.items():
        for spec in getattr(cls, "outcomes", ()):
            out[f"{comp}.{spec.key}"] = replace(spec, key=f"{comp}.{spec.key}", label=f"{comp} {spec.label}",
                                                default=False)
    return out
