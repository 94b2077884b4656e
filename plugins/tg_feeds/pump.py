"""The pump: an element in series that raises the pressure of a liquid between an inlet (or tank) and a nozzle.

Model
-----
``programme = "power"``: shaft power P at efficiency eta; the fluid receives
the hydraulic power eta P = Q dp (Q = mdot/rho the volume flow), so::

    dp = eta P / Q                for Q >= Q_k = eta P / dp_0
    dp = dp_0                     for Q <  Q_k     (shut-off)

The hyperbola alone would make dp infinite as Q -> 0; a real pump's rise is
finite at zero flow (its shut-off head). This model caps the rise at the
shut-off pressure dp_0 the user gives, so below Q_k the pump delivers
less than eta P (a closed-valve pump churns its power into heat). Above
Q_k the hydraulic power is exactly eta P. (The cap, not a fitted
curve, is this model's choice: common practice, no source.)

``programme = "head-curve"``: a measured head-flow curve H(Q) (m against
L/s), ``dp = rho g0 H(Q)`` with g0 = 9.80665 m/s^2 (head defined with
standard gravity), interpolated linearly between rows and extrapolated
linearly beyond the first and last rows (past the last row the rise falls
on with the last slope, and turns into a loss once H < 0).

The line solve finds the flow at which the downstream element passes what
the pump delivers. The pump treats the fluid as incompressible: it is a
liquid pump (a model refuses one fed with gas). ``stopped`` mode (after
``run_time``): no rise, the pump is an open passage.

Froude propulsive efficiency of the jet it drives (useful power over the
kinetic energy added): ``eta_p = 2 / (1 + V_j / V_0)``
(:func:`~tg_feeds.propulsive.froude_efficiency`).

The kind is ``vectorised``: its one definition is written against the namespace of :mod:`thrustgraph.base.xp`
and runs on floats (a single flight) and on numpy arrays of designs (an ensemble): the regimes (shut-off
cap or hyperbola; below, on or beyond the head curve; running or stopped) are chosen with ``ops.where``.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.kinds.component import scalar_ops
>>> from thrustgraph.base.xp import array_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(Pump.parameters, {"shaft_power": "1 kW", "efficiency": 0.6, "shutoff_pressure": "3 bar"},
...                  where="components.pump", params_class=Pump.params_class())
>>> f = Pump.build_flow(p, scalar_ops)
>>> up = (101325.0, 293.15, 1000.0, 1.4, 287.05, 1.0, 0.0)
>>> f.rise(up, 0.0, 0), f.rise(up, 6.0, 0)        # shut-off; 600 W into 6 L/s
(300000.0, 100000.0)
>>> fa = Pump.build_flow(p, array_ops)
>>> fa.rise(up, np.array([0.0, 6.0, 6.0]), np.array([0, 0, 1])).tolist()     # the last one stopped
[300000.0, 100000.0, 0.0]
"""

from __future__ import annotations


import numpy as np

from thrustgraph.kinds.component import ComponentKind, EventSpec, FlowFns, Mode
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.outcomespec import OutcomeSpec
from thrustgraph.kinds.parameters import Choice, Number, Quantity, Table

__all__ = ["Pump", "STANDARD_GRAVITY", "PUMP_CAUTIONS", "OPERATING_POINT"]

PUMP_CAUTIONS = [
    "A running pump and its inlet can trap hands, hair, clothing and swimmers, and its jet can injure: guard "
    "the inlet and the impeller, keep people out of the water near a running water jet, and stop the pump "
    "before you reach the boat or the inlet.",
]

#: Exact by definition (3rd CGPM, 1901); pump head is quoted with it.
STANDARD_GRAVITY = 9.80665

#: The pump's operating point, an outcome of every run (docs/fluid-devices.md).
OPERATING_POINT = (
    OutcomeSpec("volume_flow", "volume flow", "m^3/s", "L/s", "operating volume flow",
                "volume flow Q = mdot / rho at the operating point (the last output sample while it runs)"),
    OutcomeSpec("head", "length", "m", "m", "operating head",
                "head H = dp / (rho g0) at the operating point (g0 = 9.80665 m/s^2, the head's convention)"),
    OutcomeSpec("hydraulic_power", "power", "W", "W", "hydraulic power",
                "power given to the liquid, Q dp, at the operating point"),
    OutcomeSpec("shaft_power", "power", "W", "W", "shaft power", "the shaft power it runs at (programme = power)"),
    OutcomeSpec("efficiency", "efficiency", "", "", "efficiency at the operating point",
                "hydraulic over shaft power at the operating point (the given efficiency above the shut-off "
                "flow, less below it; programme = power)"),
    OutcomeSpec("operating_time", "time", "s", "s", "operating point time",
                "time of the output sample the operating point is read at"),
)


class Pump(ComponentKind):
    """Liquid pump in series: shaft power and efficiency with a shut-off cap, or a head-flow curve."""

    kind = "pump"
    role = "flow"
    summary = "liquid pump in series: shaft power and efficiency (capped at shut-off) or a head-flow curve"
    parameters = (
        Choice("programme", options=("power", "head-curve"), default="power",
               doc="power: shaft power and efficiency; head-curve: a measured head against flow"),
        Quantity("shaft_power", "W", default="0 W", low=0.0, high=1e9, doc="shaft power (programme = power)"),
        # Small centrifugal and axial pumps run at 0.5-0.8 (common practice, no source).
        Number("efficiency", default=0.7, low=0.0, low_open=True, high=1.0,
               doc="hydraulic power over shaft power (programme = power)"),
        Quantity("shutoff_pressure", "bar", default="0 bar", low=0.0, high=10_000.0,
                 doc="pressure rise at zero flow, the cap of eta P / Q (programme = power)"),
        Table("head_curve", columns=(("volume_flow", "L/s"), ("head", "m")), default="absent", bounds=((0.0, 1e6), (-1e5, 1e5)),
              doc="head against volume flow (programme = head-curve)"),
        Quantity("run_time", "s", default="0 s", low=0.0, high=1e6, doc="stop the pump after this time; 0 s: never"),
    )
    modes = (Mode("running", "pump thrust"), Mode("stopped", "pump stopped", propulsive=False))
    signal_units = {"density": "kg/m^3"}
    outcomes = OPERATING_POINT

    @classmethod
    def cautions(cls, p):
        return list(PUMP_CAUTIONS)

    @classmethod
    def summarize(cls, name, p, result):
        """The operating point: the last output sample while the pump runs (just before it stops, or at the end
        of the run): for a boat that had time to reach its top speed, the steady operating point."""
        mdot = result.signals.get(f"{name}.mass_flow")
        rise = result.signals.get(f"{name}.pressure_rise")
        rho = result.signals.get(f"{name}.density")
        if mdot is None or rise is None or rho is None:
            return {}
        running = result.t < p.run_time if p.run_time > 0.0 else np.ones(len(result.t), dtype=bool)
        running &= np.isfinite(mdot) & np.isfinite(rise) & np.isfinite(rho)
        if not running.any():
            return {}
        k = int(np.nonzero(running)[0][-1])
        q, dp = float(mdot[k] / rho[k]), float(rise[k])
        out = {"volume_flow": q, "head": dp / (float(rho[k]) * STANDARD_GRAVITY), "hydraulic_power": q * dp}
        if p.programme == "power":
            out["shaft_power"] = p.shaft_power
            out["efficiency"] = q * dp / p.shaft_power
        out["operating_time"] = float(result.t[k])
        return out

    @classmethod
    def check(cls, p, where):
        if p.programme == "power":
            if p.shaft_power <= 0.0:
                raise ModelError(f"{where}.shaft_power", "a power pump needs its shaft power",
                                 "give shaft_power = \"1.5 kW\", or use programme = \"head-curve\"")
            if p.shutoff_pressure <= 0.0:
                raise ModelError(f"{where}.shutoff_pressure", "a power pump needs its shut-off pressure (the rise at "
                                 "zero flow), or its rise eta P / Q would be infinite there",
                                 "give shutoff_pressure = \"4 bar\" (the shut-off head times rho g)")
        else:
            if p.head_curve is None:
                raise ModelError(f"{where}.head_curve", "a head-curve pump needs its head-flow curve",
                                 'write head_curve = { units = ["L/s", "m"], rows = [[0, 40], [5, 35], [10, 20]] }')
            if p.head_curve[0, 0] < 0.0:
                raise ModelError(f"{where}.head_curve.rows[0]", "volume flows start at 0 or more",
                                 "start the curve at zero flow (the shut-off head)")

    vectorised = True

    @classmethod
    def build_flow(cls, p, ops):
        """One definition for floats and arrays: ``up``, ``mdot``, ``mode`` and the power programme's parameters
        may be arrays over designs (the head curve, a table, is shared by every design)."""
        g0 = STANDARD_GRAVITY
        power = p.programme == "power"
        if power:
            wh = p.efficiency * p.shaft_power
            dp0 = p.shutoff_pressure
            qk = wh / dp0

            def lift(q):
                # the shut-off cap below Q_k, the hyperbola above (its divisor kept >= Q_k: finite at Q = 0)
                return ops.where(q <= qk, dp0, wh / ops.maximum(q, qk))
        else:
            qs = [float(v) for v in p.head_curve[:, 0]]
            hs = [float(v) for v in p.head_curve[:, 1]]
            q0, q1, h0, h1 = qs[0], qs[-1], hs[0], hs[-1]
            s0 = (hs[1] - h0) / (qs[1] - q0)
            s1 = (h1 - hs[-2]) / (q1 - qs[-2])
            # tuples for floats (a bisection, no numpy call per evaluation), arrays for numpy.interp
            xq, xh = (np.array(qs), np.array(hs)) if ops.arrays else (tuple(qs), tuple(hs))

            def lift(q):
                head = ops.where(q <= q0, h0 + s0 * (q - q0),
                                 ops.where(q >= q1, h1 + s1 * (q - q1), ops.interp(q, xq, xh)))
                return head * g0

        def rise(up, mdot, mode=0):
            rho = up[2]
            dp = lift(mdot / rho)
            if not power:
                dp = rho * dp
            return ops.where(mode == 1, 0.0 * dp, dp)        # stopped: an open passage

        # the event is there whatever the run time (a model's events must not depend on its values: an ensemble
        # evaluates them for any subset of its designs); a design whose run_time is 0 never stops (its stop time
        # is beyond any flight: the event function stays below zero)
        tr = ops.where(p.run_time > 0.0, p.run_time, 1e300)
        events = (EventSpec("pump stopped", lambda t, s, drive: t - tr, 1.0, ("running",), "stopped",
                            needs_drive=False),)
        def signals(up, p_down, mode=0):
            # the density of the liquid it pumps: with the mass flow and the pressure rise, the operating point
            return {"density": up[2]}

        return FlowFns(rise=rise, events=events, signals=signals)
