"""Prescribed jets: a propulsive source with a given mass flow and exhaust velocity, or a thrust table.

Two programmes:

``constant-flow``
    mass flow ``mdot`` and exhaust velocity ``v_e`` constant until the
    propellant is gone (burn time m_p / mdot).
``thrust-table``
    thrust F(t) interpolated linearly in a table against the time since
    ignition; mass flow F / v_e, so the propellant mass is the table's total
    impulse divided by v_e.

With ``ignition = "on-trigger"`` the jet waits (mode ``waiting``) until a
trigger of the model switches it to ``burning`` (an upper stage lit after a
delay or at a condition).

The jet leaves at ambient pressure (no pressure thrust). These are the
sources used for the closed-form checks (rocket equation, constant-thrust
ascent) and for motors with a measured thrust curve.

Examples
--------
>>> from thrustgraph.component import Ambient, scalar_ops
>>> P = PrescribedJet.params_class()
>>> p = P(programme="constant-flow", propellant_mass=1.0, mass_flow=0.5, exhaust_velocity=1000.0,
...       thrust_curve=None, direction=(-1.0, 0.0, 0.0), ignition="at-launch")
>>> PrescribedJet.burn_time(p)
2.0
"""

from __future__ import annotations

import numpy as np

from thrustgraph import hookimpl
from thrustgraph.component import ComponentKind, EventSpec, JetFns, Mode, StateVar
from thrustgraph.errors import ModelError
from thrustgraph.parameters import Choice, Quantity, Table, Vector

__all__ = ["PrescribedJet"]


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
        Quantity("exhaust_velocity", "m/s", low=0.0, low_open=True, high=1e8, doc="exhaust velocity relative to the vehicle"),
        Table("thrust_curve", columns=(("time", "s"), ("thrust", "N")), default="absent", bounds=((0.0, 1e5), (0.0, 1e8)),
              doc="thrust against time since ignition (thrust-table)"),
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
        else:
            if p.thrust_curve is None:
                raise ModelError(f"{where}.thrust_curve", "a thrust-table jet needs a thrust_curve",
                                 'write thrust_curve = { units = ["s", "N"], rows = [[0, 0], [0.1, 20], [1.0, 0]] }')
            if np.any(p.thrust_curve[:, 1] < 0):
                raise ModelError(f"{where}.thrust_curve", "thrust must not be negative", "check the thrust column")

    @classmethod
    def cautions(cls, p):
        return ["Rocket motors are regulated: use certified motors within their class and follow the "
                "model-rocketry or high-power code that applies (e.g. NFPA 1122 / 1127 in the US) and the "
                "aviation rules for amateur rockets (e.g. 14 CFR Part 101); keep the stand-off distances they set."]

    @classmethod
    def _propellant(cls, p) -> float:
        if p.programme == "constant-flow":
            return p.propellant_mass
        # scipy.integrate is imported here, not with the plugin: it costs ~0.8 s to import (it imports
        # scipy.optimize), which every command would pay when the plugins load (benchmarks/cli_startup.py)
        from scipy.integrate import trapezoid

        tc = p.thrust_curve
        return float(trapezoid(tc[:, 1], tc[:, 0])) / p.exhaust_velocity

    @classmethod
    def burn_time(cls, p) -> float:
        if p.programme == "constant-flow":
            return p.propellant_mass / p.mass_flow
        return float(p.thrust_curve[-1, 0])

    @classmethod
    def initial_state(cls, p, amb):
        return (cls._propellant(p), 0.0)

    @classmethod
    def initial_mode(cls, p, amb):
        return "waiting" if p.ignition == "on-trigger" else "burning"

    @classmethod
    def describe_mass(cls, p, amb):
        return {"propellant": cls._propellant(p)}

    vectorised = True

    @classmethod
    def build_jet(cls, p, i, ops, amb):
        """One definition for one design (floats) and for an ensemble (``s[k]``, ``mode`` and numeric ``p``
        fields arrays; a mode shared by every design arrives as an ``int``). The thrust table is shared by
        every design."""
        ve = p.exhaust_velocity
        if p.programme == "constant-flow":
            mdot0 = p.mass_flow

            def burning(t, s, pa):
                return (mdot0 + 0.0 * s[i], ve + 0.0 * s[i])
            burnout = EventSpec("burnout", lambda t, s, drive: s[i], -1.0, ("burning",), "spent", needs_drive=False)
        else:
            # arrays, converted once: np.interp would convert a list on every call (slow for long curves)
            tt = np.ascontiguousarray(p.thrust_curve[:, 0], dtype=float)
            ff = np.ascontiguousarray(p.thrust_curve[:, 1], dtype=float)
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
