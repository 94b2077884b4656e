"""Prescribed jets: a propulsive source with a given mass flow and exhaust velocity, or a thrust table.

Two programmes:

``constant-flow``
    mass flow ``mdot`` and exhaust velocity ``v_e`` constant until the
    propellant is gone (burn time m_p / mdot).
``thrust-table``
    thrust F(t) interpolated linearly in a table against the time since
    ignition; mass flow F / v_e, so the propellant mass is the table's total
    impulse divided by v_e. The table is written in the model
    (``thrust_curve``) or read from a thrust-curve file
    (``thrust_curve_file``, :mod:`tg_jets.curvefile`: a CSV table with units in
    its headers, the propellant and total mass, checked on total impulse and
    burn time); with a file, v_e = I / m_p follows from it and the casing
    (total minus propellant mass) stays with the jet.

With ``ignition = "on-trigger"`` the jet waits (mode ``waiting``) until a
trigger of the model switches it to ``burning`` (an upper stage lit after a
delay or at a condition).

The jet leaves at ambient pressure (no pressure thrust). These are the
sources used for the closed-form checks (rocket equation, constant-thrust
ascent) and for motors with a measured thrust curve.

Examples
--------
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> P = PrescribedJet.params_class()
>>> p = P(programme="constant-flow", propellant_mass=1.0, mass_flow=0.5, exhaust_velocity=1000.0,
...       thrust_curve=None, thrust_curve_file=None, direction=(-1.0, 0.0, 0.0), ignition="at-launch")
>>> PrescribedJet.burn_time(p)
2.0
"""

from __future__ import annotations

import numpy as np

from thrustgraph import hookimpl
from thrustgraph.kinds.component import ComponentKind, EventSpec, JetFns, Mode, StateVar
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, FilePath, Quantity, Table, Vector

from .curvefile import ThrustCurve, loads_thrust_curve, read_thrust_curve

__all__ = ["PrescribedJet", "ThrustCurve", "read_thrust_curve", "loads_thrust_curve"]


class PrescribedJet(ComponentKind):
    kind = "prescribed-jet"
    role = "jet"
    summary = "given mass flow and exhaust velocity, or a thrust table against time"
    parameters = (
        Choice("programme", options=("constant-flow", "thrust-table"), default="constant-flow",
               doc="how the jet is prescribed"),
        Quantity("propellant_mass", "kg", default="0 kg", low=0.0, high=1e6,
                 doc="propellant carried (constant-flow); ignored for a thrust table"),
        Quantity("mass_flow", "kg/s", default="0 kg/s", low=0.0, high=1e6, doc="mass flow (constant-flow)"),
        Quantity("exhaust_velocity", "m/s", default="absent", low=0.0, low_open=True, high=1e8,
                 doc="exhaust velocity relative to the vehicle (left out with a thrust_curve_file: I / m_p of the file)"),
        Table("thrust_curve", columns=(("time", "s"), ("thrust", "N")), default="absent", bounds=((0.0, 1e5), (0.0, 1e8)),
              doc="thrust against time since ignition (thrust-table)"),
        FilePath("thrust_curve_file", default="absent",
                 doc="thrust-curve CSV file with the propellant and total mass (thrust-table; instead of thrust_curve)"),
        Vector("direction", default=(-1.0, 0.0, 0.0), doc="body-frame direction the jet leaves in"),
        Choice("ignition", options=("at-launch", "on-trigger"), default="at-launch",
               doc="burn from t = 0, or wait until a trigger switches the jet to mode 'burning'"),
    )
    states = (StateVar("propellant_mass", "kg", "propellant left"),
              StateVar("burn_clock", "s", "time since ignition"))
    modes = (Mode("burning", "jet thrust"), Mode("spent", "spent", propulsive=False),
             Mode("waiting", "waiting", propulsive=False))

    @classmethod
    def check(cls, p, where):
        if p.programme == "constant-flow":
            if p.mass_flow <= 0.0 or p.propellant_mass <= 0.0:
                raise ModelError(f"{where}.mass_flow", "a constant-flow jet needs a positive mass_flow and "
                                 "propellant_mass", "give both, e.g. mass_flow = \"0.1 kg/s\", propellant_mass = \"0.5 kg\"")
            if p.thrust_curve_file is not None or p.thrust_curve is not None:
                raise ModelError(f"{where}.programme", "a constant-flow jet takes no thrust table",
                                 'write programme = "thrust-table" to fly the table')
            if p.exhaust_velocity is None:
                raise ModelError(f"{where}.exhaust_velocity", "a constant-flow jet needs its exhaust velocity",
                                 'give it, e.g. exhaust_velocity = "800 m/s"')
            return
        if p.thrust_curve_file is not None:
            if p.thrust_curve is not None:
                raise ModelError(f"{where}.thrust_curve_file", "is given together with thrust_curve",
                                 "give the table once: in the model (thrust_curve) or in a file (thrust_curve_file)")
            if p.exhaust_velocity is not None:
                raise ModelError(f"{where}.exhaust_velocity", "is given with a thrust_curve_file, whose total impulse "
                                 "and propellant mass already fix it (v_e = I / m_p)",
                                 "leave exhaust_velocity out, or write the table into the model instead")
            cls._file(p, where)
            return
        if p.thrust_curve is None:
            raise ModelError(f"{where}.thrust_curve", "a thrust-table jet needs a thrust_curve or a thrust_curve_file",
                             'write thrust_curve = { units = ["s", "N"], rows = [[0, 0], [0.1, 20], [1.0, 0]] }, or '
                             'thrust_curve_file = "motor.csv" (see docs/devices.md)')
        if np.any(p.thrust_curve[:, 1] < 0):
            raise ModelError(f"{where}.thrust_curve", "thrust must not be negative", "check the thrust column")
        if p.exhaust_velocity is None:
            raise ModelError(f"{where}.exhaust_velocity", "a thrust-table jet needs its exhaust velocity (the "
                             "propellant is the table's impulse divided by it)", 'give it, e.g. exhaust_velocity = "800 m/s"')

    @classmethod
    def _file(cls, p, where: str = "") -> ThrustCurve:
        """The checked curve of ``thrust_curve_file`` (read once per file version)."""
        try:
            return read_thrust_curve(p.thrust_curve_file)
        except ModelError as exc:
            if not where:
                raise
            raise ModelError(f"{where}.thrust_curve_file: {exc.where}", exc.what, exc.fix) from None

    @classmethod
    def _table(cls, p) -> tuple:
        """(thrust table, exhaust velocity, casing mass) of a thrust-table jet."""
        if p.thrust_curve_file is not None:
            c = cls._file(p)
            return c.table(), c.exhaust_velocity, c.casing_mass
        return p.thrust_curve, p.exhaust_velocity, 0.0

    @classmethod
    def cautions(cls, p):
        return ["Rocket motors are regulated: use certified motors within their class and follow the "
                "model-rocketry or high-power code that applies (e.g. NFPA 1122 / 1127 in the US) and the "
                "aviation rules for amateur rockets (e.g. 14 CFR Part 101); keep the stand-off distances they set."]

    @classmethod
    def _propellant(cls, p) -> float:
        if p.programme == "constant-flow":
            return p.propellant_mass
        if p.thrust_curve_file is not None:
            return cls._file(p).propellant_mass
        # scipy.integrate is imported here, not with the plugin: it costs ~0.8 s to import (it imports
        # scipy.optimize), which every command would pay when the plugins load (benchmarks/cli_startup.py)
        from scipy.integrate import trapezoid

        tc = p.thrust_curve
        return float(trapezoid(tc[:, 1], tc[:, 0])) / p.exhaust_velocity

    @classmethod
    def burn_time(cls, p) -> float:
        if p.programme == "constant-flow":
            return p.propellant_mass / p.mass_flow
        return float(cls._table(p)[0][-1, 0])

    @classmethod
    def initial_state(cls, p, amb):
        return (cls._propellant(p), 0.0)

    @classmethod
    def initial_mode(cls, p, amb):
        return "waiting" if p.ignition == "on-trigger" else "burning"

    @classmethod
    def describe_mass(cls, p, amb):
        casing = cls._table(p)[2] if p.programme == "thrust-table" else 0.0
        return {"propellant": cls._propellant(p), **({"casing": casing} if casing > 0.0 else {})}

    vectorised = True

    @classmethod
    def build_jet(cls, p, i, ops, amb):
        """One definition for one design (floats) and for an ensemble (``s[k]``, ``mode`` and numeric ``p``
        fields arrays; a mode shared by every design arrives as an ``int``). The thrust table is shared by
        every design."""
        ve, casing = p.exhaust_velocity, 0.0
        if p.programme == "constant-flow":
            mdot0 = p.mass_flow

            def burning(t, s, pa):
                return (mdot0 + 0.0 * s[i], ve + 0.0 * s[i])
            burnout = EventSpec("burnout", lambda t, s, drive: s[i], -1.0, ("burning",), "spent", needs_drive=False)
        else:
            table, ve_table, casing = cls._table(p)
            ve = ve if p.thrust_curve_file is None else ve_table
            # arrays, converted once: np.interp would convert a list on every call (slow for long curves)
            tt = np.ascontiguousarray(table[:, 0], dtype=float)
            ff = np.ascontiguousarray(table[:, 1], dtype=float)
            t_last = float(tt[-1])

            def burning(t, s, pa):
                return (ops.interp(s[i + 1], tt, ff) / ve, ve + 0.0 * s[i])
            burnout = EventSpec("burnout", lambda t, s, drive: s[i + 1] - t_last, 1.0, ("burning",), "spent",
                                needs_drive=False)

        def jet(t, s, mode, pa):
            if type(mode) is int:          # every design in the same mode (always so for one design)
                if mode != 0:
                    return (0.0, 0.0, pa, 0.0)
                mdot, v = burning(t, s, pa)
                return (mdot, v, pa, 0.0)
            on = mode == 0
            mdot, v = burning(t, s, pa)
            return (ops.where(on, mdot, 0.0), ops.where(on, v, 0.0), pa, 0.0)

        if casing > 0.0:
            def mass(s):
                return casing + s[i]      # the casing of a motor from a curve file stays with the jet
        else:
            def mass(s):
                return s[i]

        def derivs(t, s, mode, mdot):
            if type(mode) is int:
                return (-mdot, 1.0 if mode == 0 else 0.0)
            return (-mdot, ops.where(mode == 0, 1.0, 0.0))

        def signals(t, s, mode):
            return {"propellant_mass": s[i], "burn_clock": s[i + 1]}

        return JetFns(mass=mass, jet=jet, derivs=derivs, signals=signals, jet_dir=p.direction, events=(burnout,))


@hookimpl
def thrustgraph_component_kinds():
    return [PrescribedJet]
