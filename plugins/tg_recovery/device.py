"""A recovery device (parachute or streamer): packed until it deploys, then a drag area that grows over an opening time.

Model
-----
The device is a body of its own mass carried by the vehicle. While packed (and
while armed) it adds no force. From deployment its drag acts on the vehicle's
velocity through the medium ``v`` (the vehicle's velocity minus the wind)::

    D = -1/2 rho (C_D A)(t) |v| v

with the drag area of the open device ``(C_D A)_open`` given directly
(``drag_area``) or as a drag coefficient times the nominal area of a canopy of
the given diameter, ``C_D pi d^2 / 4``. The drag equation is the definition of
the drag coefficient (NASA Glenn Research Center, Beginner's Guide to
Aeronautics, "The Drag Equation"). Fully open and falling steadily, the device
holds the vehicle at the terminal speed ``v_t = sqrt(2 m g / (rho (C_D A)_open))``
relative to the air, m the whole vehicle's mass.

Opening law (common practice, no single source)
    Over the opening time ``t_o`` the drag area grows as a power of the time
    since deployment::

        (C_D A)(t) = (C_D A)_open * tau^n,   tau = (t - t_deploy) / t_o  in [0, 1]

    ``n = 1`` (the default) is a drag area growing linearly in time. Power laws
    of this form are how the drag-area history is idealised in the Pflanz-type
    opening-force methods collected in T. W. Knacke, *Parachute Recovery
    Systems Design Manual*, Para Publishing, 1992, ch. 7 (from memory, not
    confirmed in a stored copy). ``opening_time = 0`` opens the device at
    once.

Deployment (``deploy``)
    ``apogee``: when the vertical speed falls through zero (the first time,
    from the launch on; strictly through -1e-9 m/s, so that a vehicle resting
    on its pad is not taken to be at apogee). ``delay-after-apogee``: ``delay`` seconds after that.
    ``altitude``: armed at apogee, then when the altitude falls through
    ``deploy_altitude`` (height above the ground datum, the model's
    ``position.z``); if the apogee is already below it the device deploys at
    apogee. ``on-trigger``: never by itself; a ``[triggers]`` entry of the
    model switches it to mode ``opening`` (or ``open``) on any condition.

States and modes
    States ``delay_timer`` (s since arming, runs only while armed) and
    ``opening`` (tau, runs only while opening). Modes ``packed`` -> ``armed``
    (delay or altitude deployment only) -> ``opening`` -> ``open``; with
    ``opening_time = 0`` the device goes from deployment straight to ``open``.

Signals
    ``NAME.drag`` (the drag vector, N, recorded by the core for every body
    force), ``NAME.drag_area`` (m^2, current C_D A), ``NAME.drag_area_ratio``
    (current over open), ``NAME.deployed`` (0 or 1), ``NAME.delay_timer`` (s).
    The deployment speed and the peak opening load are computed after the run
    by :func:`tg_recovery.summary.recovery_summary`.

Assumptions and limits
    The canopy and the vehicle move together (no riser or shock-cord
    stretch, no snatch load, no pendulum motion, no added mass of the air in
    the canopy); drag only (no lift or glide); the opening load is the
    quasi-steady drag ``1/2 rho (C_D A)(t) v^2``. A real opening shock is often
    larger, by the opening-force coefficient of the canopy type (Knacke 1992,
    ch. 5, Fig. 5-64, "Opening-Force Coefficient as a Function of Total
    Porosity"; seen in the manual's chapter as reproduced on
    mediawiki.aerodecelerator.org). C_D is constant (no Reynolds- or
    Mach-number effect, no canopy breathing).

Examples
--------
>>> from thrustgraph.kinds.component import Ambient, scalar_ops
>>> from thrustgraph.kinds.parameters import parse_params
>>> p = parse_params(RecoveryDevice.parameters, {"mass": "50 g", "drag_coefficient": 0.8, "diameter": "0.6 m",
...                  "opening_time": "0.4 s"}, where="components.chute", params_class=RecoveryDevice.params_class())
>>> round(RecoveryDevice.open_drag_area(p), 6)          # 0.8 * pi * 0.6^2 / 4
0.226195
>>> fns = RecoveryDevice.build_body(p, scalar_ops, 8, Ambient(101325.0, 288.15, 1.225))
>>> s = [0.0] * 8 + [0.0, 0.5]                          # half-way through the opening
>>> air = (1.225, 101325.0, 288.15, 0.0, 0.0, -10.0, 10.0)
>>> round(fns.force_state(1.0, s, 2, air)[2], 4)        # 1/2 rho (CdA/2) v^2, upward
6.9272
>>> fns.force_state(1.0, s, 0, air)                     # packed: no force
(0.0, 0.0, 0.0)
"""

from __future__ import annotations

import math
from typing import Any

from thrustgraph.kinds.component import BodyFns, ComponentKind, EventSpec, Mode, StateVar
from thrustgraph.base.errors import ModelError
from thrustgraph.kinds.parameters import Choice, Number, Quantity

from .summary import OUTCOMES, recovery_summary

__all__ = ["RecoveryDevice", "DEPLOY_OPTIONS", "APOGEE_SPEED", "RECOVERY_CAUTION", "RANGE_CAUTION", "MECHANISM_CAUTION"]

DEPLOY_OPTIONS = ("apogee", "delay-after-apogee", "altitude", "on-trigger")

#: Apogee is detected when the vertical speed falls through -APOGEE_SPEED (m/s): 1 nm/s, so that a vehicle
#: at rest on its pad or stand, whose vertical speed is exactly 0, is not taken to be at apogee. The detection
#: comes APOGEE_SPEED / g (about 1e-10 s) after the true apogee.
APOGEE_SPEED = 1e-9

# Mode indices, in the order of RecoveryDevice.modes.
_PACKED, _ARMED, _OPENING, _OPEN = 0, 1, 2, 3

RECOVERY_CAUTION = (
    "A recovery device only slows the vehicle if it deploys in time and survives opening: a late deployment (a "
    "long delay, a low deployment altitude, a vehicle that arcs over and is already falling fast) brings it down "
    "at nearly ballistic speed, and a fast deployment can tear the canopy, break the shock cord or pull the "
    "airframe apart. The predicted descent speed and opening load are quasi-steady estimates (a real opening "
    "shock is often higher); they are not a safe landing speed or a strength rating: test the system on the "
    "ground and in flight as your club or code requires.")
RANGE_CAUTION = (
    "Fly only over a clear range, away from people, roads, buildings, power lines and airports, within the "
    "wind limits of your rules; keep spectators back and never try to catch a descending vehicle. Follow the "
    "codes that apply where you fly (in the US NFPA 1122 model rocketry or NFPA 1127 high-power rocketry, and "
    "FAA 14 CFR Part 101) and your club's safety code; the predicted drift is not a safety distance.")
MECHANISM_CAUTION = (
    "Deployment mechanisms store energy (ejection charges, springs, pressurised gas): wear eye protection, arm "
    "them only at the launcher as the rules and the maker's instructions allow, and keep your face and hands "
    "clear of the airframe's open end.")


class RecoveryDevice(ComponentKind):
    """A parachute or streamer that deploys at apogee, after a delay, or at an altitude (see the module docstring)."""

    kind = "recovery-device"
    role = "body"
    signal_units = {"drag_area": "m^2", "drag_area_ratio": "", "deployed": "", "delay_timer": "s"}
    outcomes = OUTCOMES
    summary = ("parachute or streamer: own mass and drag area, deploys at apogee, after a delay or at an altitude, "
               "opens over an opening time")
    parameters = (
        Choice("device", options=("parachute", "streamer"), default="parachute",
               doc="what the device is (a streamer's drag is given as drag_area)"),
        Quantity("mass", "kg", low=0.0, high=1e4, doc="mass of the device (canopy or streamer, lines, shock cord)"),
        Quantity("drag_area", "m^2", default="0 m^2", low=0.0, high=1e4,
                 doc="drag coefficient times reference area of the open device (or give drag_coefficient and "
                     "diameter)"),
        Number("drag_coefficient", default=0.0, low=0.0, high=5.0,
               doc="drag coefficient of the open parachute on the nominal area pi d^2 / 4 (with diameter)"),
        Quantity("diameter", "m", default="0 m", low=0.0, high=100.0, doc="nominal diameter of the parachute canopy"),
        Choice("deploy", options=DEPLOY_OPTIONS, default="apogee",
               doc="when the device deploys: at apogee, a delay after apogee, at an altitude on the way down, or "
                   "when a [triggers] entry switches it to mode 'opening'"),
        Quantity("delay", "s", default="0 s", low=0.0, high=1e5, doc="time from apogee to deployment (delay-after-apogee)"),
        Quantity("deploy_altitude", "m", default="0 m", low=0.0, high=1e6,
                 doc="height above the ground datum at which it deploys on the way down (altitude)"),
        Quantity("opening_time", "s", low=0.0, high=1e4,
                 doc="time from deployment to the fully open drag area (0 opens at once)"),
        Number("opening_exponent", default=1.0, low=0.0, low_open=True, high=10.0,
               doc="n in (C_D A)(t) = (C_D A)_open (t / t_open)^n during the opening (1: linear in time)"),
    )
    states = (StateVar("delay_timer", "s", "time since the device was armed at apogee"),
              StateVar("opening", "", "time since deployment divided by the opening time (0 to 1)"))
    modes = (Mode("packed", "packed", propulsive=False), Mode("armed", "armed", propulsive=False),
             Mode("opening", "opening", propulsive=False), Mode("open", "open", propulsive=False))

    # --- validation ----------------------------------------------------------
    @classmethod
    def summarize(cls, name, p, result):
        """Deployment time, altitude, speed and airspeed, peak opening load (see :func:`recovery_summary`)."""
        return recovery_summary(result, [name]).get(name, {})

    @classmethod
    def check(cls, p: Any, where: str) -> None:
        if p.drag_area > 0.0 and (p.drag_coefficient > 0.0 or p.diameter > 0.0):
            raise ModelError(f"{where}.drag_area", "is given together with drag_coefficient or diameter",
                             "give either drag_area (C_D times area) or drag_coefficient and diameter, not both")
        if p.device == "streamer" and p.diameter > 0.0:
            raise ModelError(f"{where}.diameter", "a streamer has no canopy diameter",
                             "give drag_area: the streamer's drag coefficient times its length times its width")
        if p.drag_area == 0.0:
            if p.drag_coefficient > 0.0 and p.diameter == 0.0:
                raise ModelError(f"{where}.diameter", "drag_coefficient is given without the canopy diameter",
                                 "add diameter = \"...\" (the nominal diameter the coefficient refers to)")
            if p.diameter > 0.0 and p.drag_coefficient == 0.0:
                raise ModelError(f"{where}.drag_coefficient", "diameter is given without a drag coefficient",
                                 "add drag_coefficient = ... (on the nominal area pi d^2 / 4), or give drag_area")
            if p.diameter == 0.0:
                raise ModelError(f"{where}.drag_area", "the device has no drag area",
                                 "give drag_area = \"...\" (C_D times area), or drag_coefficient and diameter")
        if p.deploy != "delay-after-apogee" and p.delay > 0.0:
            raise ModelError(f"{where}.delay", f"a delay is given but deploy = {p.deploy!r}",
                             "set deploy = \"delay-after-apogee\" to use the delay, or remove delay")
        if p.deploy == "delay-after-apogee" and p.delay == 0.0:
            raise ModelError(f"{where}.delay", "deploy = 'delay-after-apogee' needs a delay greater than 0 s",
                             "give delay = \"...\" (e.g. \"2 s\"), or set deploy = \"apogee\"")
        if p.deploy != "altitude" and p.deploy_altitude > 0.0:
            raise ModelError(f"{where}.deploy_altitude", f"a deployment altitude is given but deploy = {p.deploy!r}",
                             "set deploy = \"altitude\" to use it, or remove deploy_altitude")
        if p.deploy == "altitude" and p.deploy_altitude == 0.0:
            raise ModelError(f"{where}.deploy_altitude", "deploy = 'altitude' needs a deployment altitude above "
                             "the ground datum (0 m would deploy at impact)",
                             "give deploy_altitude = \"...\" (e.g. \"150 m\"), or choose deploy = \"apogee\"")
        if p.opening_time == 0.0 and p.opening_exponent != 1.0:
            raise ModelError(f"{where}.opening_exponent", "has no effect with opening_time = 0 s (the device opens "
                             "at once)", "give an opening_time greater than 0 s, or remove opening_exponent")

    @classmethod
    def cautions(cls, p: Any) -> list[str]:
        out = [RECOVERY_CAUTION, RANGE_CAUTION, MECHANISM_CAUTION]
        if p.deploy == "delay-after-apogee":
            out.append("The model counts the recovery delay from its own predicted apogee; a motor's ejection delay "
                       "is timed from burnout and varies from motor to motor: choose it so the device deploys near "
                       "the real apogee, not after the vehicle has started to fall fast.")
        if p.deploy == "on-trigger":
            out.append("A device deployed by a trigger deploys only if the trigger's condition is met in flight: "
                       "check in the event log that it does, early enough, in every case you fly.")
        if p.deploy == "altitude":
            out.append("With deployment at an altitude the model deploys when it falls through that height (at apogee "
                       "if the apogee is lower); a real altimeter or timer has its own logic, sensing lag and "
                       "failure modes: check how yours behaves, and carry a back-up deployment where the rules ask "
                       "for one.")
        return out

    # --- properties ---------------------------------------------------------
    @classmethod
    def open_drag_area(cls, p: Any) -> float:
        """C_D A of the fully open device, m^2."""
        if p.drag_area > 0.0:
            return p.drag_area
        return p.drag_coefficient * math.pi * p.diameter ** 2 / 4.0

    @classmethod
    def initial_state(cls, p: Any, amb: Any) -> tuple[float, float]:
        return (0.0, 0.0)

    @classmethod
    def describe_mass(cls, p: Any, amb: Any) -> dict[str, float]:
        return {"recovery device": p.mass}

    # --- builder --------------------------------------------------------------
    vectorised = True   # one definition for floats and arrays (thrustgraph.base.xp)

    @classmethod
    def build_body(cls, p: Any, ops: Any, i: int = -1, amb: Any = None) -> BodyFns:
        k_open = 0.5 * cls.open_drag_area(p)
        cda_open = cls.open_drag_area(p)
        n = p.opening_exponent
        t_open = p.opening_time
        slow = t_open > 0.0
        if ops.any(slow) and not ops.all(slow):
            raise ModelError(f"{cls.kind}.opening_time", "some designs open the device at once (0 s) and others "
                             "over a time", "vary opening_time within positive values, or keep it at 0 s")
        rate = ops.where(slow, 1.0 / ops.where(slow, t_open, 1.0), 0.0)
        i_timer, i_open = i, i + 1
        deployed_mode = "opening" if ops.all(slow) else "open"

        # One definition for floats and arrays (thrustgraph.base.xp): a mode shared by every design arrives as an int.
        def ratio(s: list, mode: Any) -> Any:
            tau = ops.clip(s[i_open], 0.0, 1.0)
            if type(mode) is int:
                return 1.0 if mode == _OPEN else (tau ** n if mode == _OPENING else 0.0)
            return ops.where(mode == _OPEN, 1.0, ops.where(mode == _OPENING, tau ** n, 0.0))

        def force_state(t: float, s: list, mode: Any, air: tuple) -> tuple:
            if type(mode) is int and mode < _OPENING:
                return (0.0, 0.0, 0.0)
            c = -k_open * ratio(s, mode) * air[0] * air[6]
            return (c * air[3], c * air[4], c * air[5])

        def derivs(t: float, s: list, mode: Any, air: tuple) -> tuple:
            if type(mode) is int:
                return (1.0 if mode == _ARMED else 0.0, rate if mode == _OPENING else 0.0)
            return (ops.where(mode == _ARMED, 1.0, 0.0), ops.where(mode == _OPENING, rate, 0.0))

        def signals(t: float, s: list, mode: Any) -> dict:
            r = ratio(s, mode)
            deployed = (1.0 if mode >= _OPENING else 0.0) if type(mode) is int else ops.where(mode >= _OPENING, 1.0, 0.0)
            return {"drag_area": cda_open * r, "drag_area_ratio": r, "deployed": deployed, "delay_timer": s[i_timer]}

        def vertical_speed(t, s, drive):
            # falls through -APOGEE_SPEED: a vehicle resting on its pad (vertical speed exactly 0 over whole steps)
            # is not at apogee
            return s[5] + APOGEE_SPEED

        events = []
        if p.deploy == "apogee":
            events.append(EventSpec("deploy at apogee", vertical_speed, -1.0, ("packed",), deployed_mode,
                                    needs_drive=False))
        elif p.deploy == "on-trigger":
            pass                      # a [triggers] entry switches the mode
        else:
            events.append(EventSpec("armed at apogee", vertical_speed, -1.0, ("packed",), "armed",
                                    needs_drive=False))
            if p.deploy == "delay-after-apogee":
                delay = p.delay
                events.append(EventSpec("deploy after delay", lambda t, s, d: s[i_timer] - delay, 1.0, ("armed",),
                                        deployed_mode, needs_drive=False))
            else:
                h = p.deploy_altitude
                events.append(EventSpec("deploy at altitude", lambda t, s, d: s[2] - h, -1.0, ("armed",),
                                        deployed_mode, needs_drive=False))
        if t_open > 0.0:
            events.append(EventSpec("fully open", lambda t, s, d: s[i_open] - 1.0, 1.0, ("opening",), "open",
                                    needs_drive=False))
        return BodyFns(mass=p.mass, force_name="drag", force_state=force_state, derivs=derivs, signals=signals,
                       events=tuple(events))
