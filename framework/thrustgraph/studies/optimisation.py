"""Bounded optimisation of one outcome, with limits on others, flown in batches on any engine.

The design variables are the varied parameters scaled to their bounds,
``z = (x - low) / (high - low)`` in [0, 1]; the objective is divided by its
size at the start and each limit by its own size, so the solver sees
numbers near 1 whatever the units.

Methods
-------
``slsqp`` (the default): :func:`scipy.optimize.minimize` with method SLSQP.
    It handles the bounds and the inequality limits together and converges
    in few iterations on smooth problems (it builds a quasi-Newton model of
    the Lagrangian). Flight outcomes are smooth in the parameters to about
    the integration tolerance (event values, a Gauss quadrature of the
    thrust), so its gradients come from central differences with a step of
    1e-3 of each range (one-sided at a bound): truncation error ~1e-6,
    tolerance noise ~1e-9 / 1e-3 = 1e-6. The 2P flights of a gradient are
    one batch, which the engine flies in parallel or as one ensemble.
    SLSQP is local: it starts from the best point of a coarse grid
    (``start="grid"``, also one batch) or from the model's values
    (``start="model"``).
``differential-evolution``: :func:`scipy.optimize.differential_evolution`,
    global and derivative-free, for objectives with several optima; each
    generation is one batch (``vectorized=True``), limits as a
    ``NonlinearConstraint``. It needs one to two orders of magnitude more
    flights.

Designs that cannot fly count as worse than any flown design and violate
every limit, so the solver turns away from them. Every flown design is a
row of the result's table.

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> best = optimise(load_model(default_model_path()), ["components.bottle.fill=0.1..0.6"], "apogee",
...                 engine="serial", quiet=True)
>>> best.success, bool(0.25 < best.x[0] < 0.45)
(True, True)
"""

from __future__ import annotations

import difflib
import itertools
import math
import uuid
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
from scipy.optimize import NonlinearConstraint, differential_evolution, minimize

from ..models.designs import DesignParameter
from .engines import make_engine
from ..base.errors import ModelError
from ..models.model import Model
from ..balance.outcomes import OUTCOMES, STATUS_OK, check_outputs
from .studies import DEFAULT_OUTPUTS, DesignTable, _prepare, as_vary, choose_engine, evaluate
from .studyspec import Limit, Vary

__all__ = ["optimise", "OptimisationResult", "METHODS", "FD_STEP"]

METHODS = ("slsqp", "differential-evolution")
#: Central-difference step of the gradients, as a fraction of each parameter's range.
FD_STEP = 1e-3


@dataclass
class OptimisationResult:
    """The best design found and how it was found.

    Fields
    ------
    params, objective, maximise, limits : the problem
    x : the best design (SI); ``value`` its objective (SI); ``outcomes`` all its outcome values (SI)
    margins : per limit, how far inside it the best design is (SI, >= 0 when met)
    feasible : every limit met (within 1e-6 of its size)
    success, message : the solver's verdict
    iterations, evaluations : solver iterations and flown designs
    method : the method used
    table : every flown design, in the order flown
    history : per solver iteration, the objective of its design (SI)
    """

    params: tuple[DesignParameter, ...]
    objective: str
    maximise: bool
    limits: tuple[Limit, ...]
    x: np.ndarray
    value: float
    outcomes: dict[str, float]
    margins: dict[str, float]
    feasible: bool
    success: bool
    message: str
    iterations: int
    evaluations: int
    method: str
    table: DesignTable
    history: list[float] = field(default_factory=list)

    def report(self) -> str:
        """A few lines for people: the best design, its objective and its limits."""
        word = "maximise" if self.maximise else "minimise"
        lines = [f"Optimisation ({self.method}): {word} {self.objective}",
                 f"  {'converged' if self.success else 'did not converge'}: {self.message}",
                 f"  {self.iterations} iterations, {self.evaluations} designs flown", "", "Best design"]
        for p, v in zip(self.params, self.x):
            lines.append(f"  {p.path:<42s} {p.text(v)}")
        lines.append(f"  {self.objective:<42s} {OUTCOMES[self.objective].text(self.value, 6)}")
        for lim in self.limits:
            m = self.margins[str(lim)]
            v = self.outcomes.get(lim.output, math.nan)
            state = "met" if m >= -1e-6 * max(abs(lim.si()), 1.0) else "NOT met"
            lines.append(f"  limit {str(lim):<36s} {state}: {lim.output} = {OUTCOMES[lim.output].text(v, 6)}")
        return "\n".join(lines)


class _Problem:
    """Flies batches of scaled designs through one engine and caches what it flew."""

    def __init__(self, model, parsed, params, lo, hi, objective, maximise, limits, outputs, run) -> None:
        self.model, self.parsed, self.params = model, parsed, params
        self.lo, self.span = lo, hi - lo
        self.objective, self.sign = objective, (1.0 if maximise else -1.0)
        self.limits = limits
        self.lim_si = [lim.si("limit") for lim in limits]
        self.lim_scale = [max(abs(v), 1e-30) if v != 0.0 else 1.0 for v in self.lim_si]
        self.outputs = outputs
        self.run = dict(run)
        self.cache: dict[bytes, tuple[str, np.ndarray]] = {}
        self.rows: list[tuple[np.ndarray, str, str, np.ndarray]] = []
        self.scale = 1.0
        self.worst = None
        self.interrupted = False

    def x_of(self, z: np.ndarray) -> np.ndarray:
        return self.lo + np.clip(z, 0.0, 1.0) * self.span

    def fly(self, zs: Sequence[np.ndarray]) -> None:
        todo, seen = [], set()
        for z in zs:
            k = np.asarray(z, dtype=float).tobytes()
            if k not in self.cache and k not in seen:
                seen.add(k)
                todo.append(np.asarray(z, dtype=float))
        if not todo:
            return
        X = np.array([self.x_of(z) for z in todo])
        table = evaluate(self.model, self.params, X, self.outputs, parsed=self.parsed, kind="optimise",
                         **self.run)
        for z, i in zip(todo, range(len(X))):
            self.cache[z.tobytes()] = (str(table.status[i]), table.values[i])
            self.rows.append((X[i], str(table.status[i]), table.notes[i], table.values[i]))
            if table.status[i] == STATUS_OK:
                f = self._f_raw(table.values[i])
                self.worst = f if self.worst is None else max(self.worst, f)
        if table.interrupted:
            self.interrupted = True
            raise KeyboardInterrupt

    def _f_raw(self, values: np.ndarray) -> float:
        return -self.sign * float(values[self.outputs.index(self.objective)]) / self.scale

    def f(self, z: np.ndarray) -> float:
        self.fly([z])
        st, v = self.cache[np.asarray(z, dtype=float).tobytes()]
        if st != STATUS_OK or not math.isfinite(v[self.outputs.index(self.objective)]):
            return (self.worst if self.worst is not None else 0.0) + 1.0
        return self._f_raw(v)

    def g(self, z: np.ndarray) -> np.ndarray:
        self.fly([z])
        st, v = self.cache[np.asarray(z, dtype=float).tobytes()]
        out = np.empty(len(self.limits))
        for k, lim in enumerate(self.limits):
            y = v[self.outputs.index(lim.output)]
            if st != STATUS_OK or not math.isfinite(y):
                out[k] = -1.0
            else:
                m = self.lim_si[k] - y if lim.sense == "<=" else y - self.lim_si[k]
                out[k] = m / self.lim_scale[k]
        return out

    def neighbours(self, z: np.ndarray) -> list[tuple[np.ndarray, np.ndarray, float]]:
        out = []
        for i in range(len(z)):
            up, down = z.copy(), z.copy()
            up[i] = min(z[i] + FD_STEP, 1.0)
            down[i] = max(z[i] - FD_STEP, 0.0)
            out.append((up, down, up[i] - down[i]))
        return out

    def grad(self, fun, z: np.ndarray) -> np.ndarray:
        nb = self.neighbours(np.asarray(z, dtype=float))
        self.fly([p for up, down, _ in nb for p in (up, down)])
        cols = [(np.asarray(fun(up)) - np.asarray(fun(down))) / d for up, down, d in nb]
        return np.array(cols).T


def optimise(model: Model | str | None, vary: Sequence[Vary | str], objective: str = "apogee", *,
             maximise: bool = True, limits: Sequence[Limit | str] = (), method: str = "slsqp",
             start: str = "grid", tol: float = 1e-8, max_iterations: int = 100, seed: int = 0,
             outputs: Sequence[str] | None = None, **run: Any) -> OptimisationResult:
    """Maximise (or minimise) one outcome over bounded parameters, subject to limits on outcomes.

    Parameters
    ----------
    model : a model, a model file, or None for the bundled bottle rocket
    vary : parameters with bounds, e.g. ``"components.bottle.fill=0.1..0.6"``
    objective : an outcome name (apogee, range, max_speed, flight_time, total_impulse, ...)
    maximise : False to minimise
    limits : e.g. ``"peak_acceleration <= 60 g0"``, ``"guide_exit_speed >= 10 m/s"``
    method : ``slsqp`` (local, gradients from batched central differences) or ``differential-evolution``
    start : ``grid`` (best of a coarse grid, one batch) or ``model`` (the model's values) for SLSQP
    tol : the solver's tolerance on the scaled objective
    max_iterations : solver iterations (SLSQP) or generations (differential evolution)
    seed : seed of differential evolution
    outputs : outcome columns of the table (default: all)
    run : options of :func:`thrustgraph.studies.studies.evaluate` (engine, flights, workers, scheduler, quiet, ...)
    """
    model, parsed = _prepare(model)
    vary = [as_vary(v) for v in vary]
    limits = _checked(vary, objective, limits, method, start)
    params = [v.resolve(parsed, where=f"optimise {v.path}") for v in vary]
    bounds = [v.si_bounds(p, where=f"optimise {v.path}") for v, p in zip(vary, params)]
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    outs = list(check_outputs(outputs if outputs is not None else DEFAULT_OUTPUTS))
    for name in [objective] + [lim.output for lim in limits]:
        if name not in outs:
            outs.append(name)
    engine, own, run = _engine_for(parsed, run)
    # one task name for every batch, so a process pool started for the first batch serves them all
    prob = _Problem(model, parsed, params, lo, hi, objective, maximise, limits, tuple(outs),
                    dict(run, engine=engine, token=uuid.uuid4().hex))
    trace = _Trace(prob)
    message = ""
    success = False
    try:
        z0 = _start(prob, method, start)
        if method == "slsqp":
            z_best, success, message = _slsqp(prob, z0, trace, tol, max_iterations)
        else:
            z_best, success, message = _evolve(prob, trace, tol, max_iterations, seed)
        z_best = _feasible_best(prob, z_best)
    except KeyboardInterrupt:
        message = "interrupted: the best design flown so far is reported"
        cands = [np.frombuffer(k_) for k_ in prob.cache]
        z_best = _best(prob, cands) if cands else np.zeros(len(params))
    finally:
        if own:
            engine.close()
    return _result(prob, z_best, success, message, trace.iterations, trace.history, method,
                   getattr(engine, "name", ""), str(run.get("flights", "")))


def _checked(vary: Sequence[Vary], objective: str, limits: Sequence[Limit | str], method: str, start: str
             ) -> tuple[Limit, ...]:
    """Refuse a problem that cannot be posed; the limits, read."""
    if not vary:
        raise ModelError("optimise", "varies no parameter", 'add --vary "components.bottle.fill=0.1..0.6"')
    check_outputs([objective], where="objective")
    limits = tuple(lim if isinstance(lim, Limit) else Limit.parse(str(lim)) for lim in limits)
    if method not in METHODS:
        c = difflib.get_close_matches(str(method), METHODS, n=1)
        raise ModelError("--method", f"unknown optimisation method {method!r}",
                         f"did you mean {c[0]!r}?" if c else f"choose one of {', '.join(METHODS)}")
    if start not in ("grid", "model"):
        raise ModelError("start", f"expected \"grid\" or \"model\", got {start!r}", "write start = \"grid\"")
    return limits


def _engine_for(parsed: Any, run: dict[str, Any]) -> tuple[Any, bool, dict[str, Any]]:
    """The engine every batch flies on (opened here, and then closed here, when named), whether it was opened
    here, and the run options left for :func:`~thrustgraph.studies.studies.evaluate`."""
    engine = run.pop("engine", "auto")
    own = isinstance(engine, str)
    if own:
        name, _ = choose_engine(64, parsed, engine, run.get("flights", "auto"))
        engine = make_engine(name, workers=run.get("workers"), scheduler=run.get("scheduler"),
                             timeout=run.get("timeout", 10.0))
    run = {k: v for k, v in run.items() if k not in ("workers", "scheduler", "timeout")}
    run.setdefault("flights", "single")
    return engine, own, run


class _Trace:
    """The solver's iterations, and the objective of each iteration's design (the solver's callback)."""

    def __init__(self, prob: _Problem) -> None:
        self.prob = prob
        self.iterations = 0
        self.history: list[float] = []

    def __call__(self, zk: Any, *args: Any, **kwargs: Any) -> None:
        if hasattr(zk, "x"):          # scipy's intermediate_result form
            zk = zk.x
        self.iterations += 1
        st_, vals = self.prob.cache.get(np.asarray(zk, dtype=float).tobytes(), (None, None))
        if st_ == STATUS_OK:
            self.history.append(float(vals[self.prob.outputs.index(self.prob.objective)]))


def _start(prob: _Problem, method: str, start: str) -> np.ndarray:
    """The starting point (the model's values, or for SLSQP from a grid the best of a coarse grid, one batch),
    flown; the objective's scale and the worst value flown set from it."""
    P = len(prob.params)
    z0 = np.clip((np.array([p.nominal for p in prob.params]) - prob.lo) / prob.span, 0.0, 1.0)
    if method == "slsqp" and start == "grid":
        k = 5 if P <= 2 else (3 if P <= 4 else 1)
        if k > 1:
            grid = [np.array(c) for c in itertools.product(*[np.linspace(0.0, 1.0, k)] * P)]
            prob.fly(grid + [z0])
            z0 = _best(prob, grid + [z0])
    prob.fly([z0])
    st, v = prob.cache[z0.tobytes()]
    y0 = v[prob.outputs.index(prob.objective)] if st == STATUS_OK else math.nan
    prob.scale = abs(y0) if math.isfinite(y0) and y0 != 0.0 else 1.0
    prob.worst = None
    for x_, st_, _n, vals in prob.rows:
        if st_ == STATUS_OK:
            f = prob._f_raw(vals)
            prob.worst = f if prob.worst is None else max(prob.worst, f)
    return z0


def _slsqp(prob: _Problem, z0: np.ndarray, trace: _Trace, tol: float, max_iterations: int
           ) -> tuple[np.ndarray, bool, str]:
    cons = []
    if prob.limits:
        cons.append({"type": "ineq", "fun": prob.g, "jac": lambda z: prob.grad(prob.g, z)})
    res = minimize(prob.f, z0, jac=lambda z: prob.grad(prob.f, z), method="SLSQP",
                   bounds=[(0.0, 1.0)] * len(prob.params), constraints=cons, callback=trace,
                   options={"ftol": tol, "maxiter": max_iterations})
    return np.clip(res.x, 0.0, 1.0), bool(res.success), str(res.message)


def _evolve(prob: _Problem, trace: _Trace, tol: float, max_iterations: int, seed: int
            ) -> tuple[np.ndarray, bool, str]:
    """Differential evolution, each generation one batch."""
    def rows(Z):
        Z = np.asarray(Z, dtype=float)
        return [np.ascontiguousarray(z) for z in (Z.T if Z.ndim == 2 else Z[None, :])]

    def fv(Z):
        Z = rows(Z)
        prob.fly(Z)
        return np.array([prob.f(z) for z in Z])

    def gv(Z):
        Z = rows(Z)
        prob.fly(Z)
        return np.array([prob.g(z) for z in Z]).T

    kw: dict[str, Any] = dict(bounds=[(0.0, 1.0)] * len(prob.params), vectorized=True, seed=seed, polish=False,
                              maxiter=max_iterations, tol=tol, callback=trace)
    if prob.limits:
        kw["constraints"] = NonlinearConstraint(gv, 0.0, np.inf)
    res = differential_evolution(fv, **kw)
    trace.iterations = int(getattr(res, "nit", trace.iterations))
    return np.clip(res.x, 0.0, 1.0), bool(res.success), str(res.message)


def _feasible_best(prob: _Problem, z_best: np.ndarray) -> np.ndarray:
    """The solver's answer, or a flown design that scores better when the answer did not fly or breaks a limit."""
    prob.fly([z_best])
    if prob.cache[z_best.tobytes()][0] != STATUS_OK or np.any(prob.g(z_best) < -1e-6):
        z_alt = _best(prob, [np.frombuffer(k_) for k_ in prob.cache])
        if _score(prob, z_alt) < _score(prob, z_best):
            return z_alt
    return z_best


def _result(prob: _Problem, z_best: np.ndarray, success: bool, message: str, iterations: int,
            history: list[float], method: str, engine: str, flights: str) -> OptimisationResult:
    limits, objective, maximise = prob.limits, prob.objective, prob.sign > 0
    st, vals = prob.cache.get(z_best.tobytes(), ("not run", np.full(len(prob.outputs), np.nan)))
    outcomes = {o: float(vals[k]) for k, o in enumerate(prob.outputs)}
    margins = {}
    for lim in limits:
        y = outcomes.get(lim.output, math.nan)
        margins[str(lim)] = lim.margin(y) if math.isfinite(y) else -math.inf
    feasible = st == STATUS_OK and all(m >= -1e-6 * max(abs(lim.si()), 1.0) for lim, m in zip(limits, margins.values()))
    table = _table_of(prob, prob.parsed, objective, maximise, method)
    table.engine, table.flights = engine, flights
    table.interrupted = prob.interrupted or message.startswith("interrupted")
    return OptimisationResult(params=tuple(prob.params), objective=objective, maximise=maximise, limits=limits,
                              x=prob.x_of(z_best), value=outcomes.get(objective, math.nan), outcomes=outcomes,
                              margins=margins, feasible=feasible, success=success and st == STATUS_OK,
                              message=message, iterations=iterations, evaluations=len(prob.rows), method=method,
                              table=table, history=history)


def _score(prob: _Problem, z: np.ndarray) -> tuple[float, float]:
    """(total limit violation, scaled objective to minimise): lower is better."""
    st, _ = prob.cache.get(np.asarray(z, dtype=float).tobytes(), (None, None))
    if st != STATUS_OK:
        return (math.inf, math.inf)
    viol = float(np.sum(np.maximum(-prob.g(z), 0.0))) if prob.limits else 0.0
    return (viol, prob.f(z))


def _best(prob: _Problem, zs: Sequence[np.ndarray]) -> np.ndarray:
    return min((np.asarray(z, dtype=float) for z in zs), key=lambda z: _score(prob, z))


def _table_of(prob: _Problem, parsed, objective: str, maximise: bool, method: str) -> DesignTable:
    rows = prob.rows
    n = len(rows)
    X = np.array([r[0] for r in rows]).reshape(n, len(prob.params))
    V = np.array([r[3] for r in rows]).reshape(n, len(prob.outputs))
    info = {"model": parsed.model.name, "study": "optimise",
            "objective": f"{'maximise' if maximise else 'minimise'} {objective}", "method": method,
            "limits": "; ".join(str(lim) for lim in prob.limits) or "none"}
    return DesignTable(kind="optimise", params=tuple(prob.params), outputs=tuple(prob.outputs), x=X, values=V,
                       status=np.array([r[1] for r in rows], dtype=str), notes=[r[2] for r in rows], info=info)
