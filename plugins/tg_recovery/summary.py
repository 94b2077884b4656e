"""After a run: when and how fast each recovery device deployed, and its peak opening load.

The core's summary does not know recovery devices, so these numbers are read
from a finished :class:`~thrustgraph.flight.result.FlightResult`: the deployment
instant is the first sample at which the device's ``NAME.deployed`` signal is
1 (whatever deployed it: its own event or a ``[triggers]`` entry; a mode switch
always starts a new integration segment, so that sample is the exact
instant), and the device's drag signal ``NAME.drag`` from then on.

The peak opening load is the largest magnitude of the device's drag force on
the recorded samples (the solver's own steps plus the evenly spaced output
grid, ``run.output_interval``) from deployment to the end of the run. It is the
quasi-steady drag of the model; see :mod:`tg_recovery.device` for why a real
opening shock can be higher. A device opened slowly or at low speed never
carries more than about the weight it holds in steady descent (m g, reached
as the descent settles): then that is its peak load, and its time comes late
in the descent.

A device that left the vehicle with a dropped stage is reported in that
stage's own result (``result.dropped[stage]``), not in the upper stage's.

Examples
--------
>>> from thrustgraph import integrate, loads_model
>>> r = integrate(loads_model('''
... format = "thrustgraph-model"
... version = 1
... name = "drop"
... [launch]
... mount = "free"
... altitude = "100 m"
... [components.body]
... kind = "airframe"
... dry_mass = "1 kg"
... [components.chute]
... kind = "recovery-device"
... mass = "0 kg"
... drag_area = "0.5 m^2"
... deploy = "altitude"
... deploy_altitude = "80 m"
... opening_time = "0 s"
... '''))
>>> s = recovery_summary(r)["chute"]
>>> round(s["deployment_speed"], 6)                     # sqrt(2 g 20 m) = 19.80571 m/s
19.805706
>>> round(s["peak_opening_load"], 3)                    # 1/2 rho CdA v^2 at that speed
120.131
"""

from __future__ import annotations

from typing import Any

import numpy as np

from thrustgraph.kinds.outcomespec import OutcomeSpec

__all__ = ["recovery_summary", "OUTCOMES", "DEPLOY_EVENTS"]

#: Event names a recovery device logs when it deploys by itself (a trigger logs its own name).
DEPLOY_EVENTS = ("deploy at apogee", "deploy after delay", "deploy at altitude")

#: Each entry of a device's summary, defined once: they join the outcome registry as ``NAME.KEY``.
OUTCOMES = (
    OutcomeSpec("deployed", "flag", "", "", "deployed", "1 when the device deployed during the run, else 0"),
    OutcomeSpec("deployment_time", "time", "s", "s", "deployment time", "time of deployment"),
    OutcomeSpec("deployment_altitude", "length", "m", "m", "deployment altitude",
                "altitude (above the ground datum) at deployment"),
    OutcomeSpec("deployment_speed", "speed", "m/s", "m/s", "deployment speed",
                "vehicle speed over the ground at deployment"),
    OutcomeSpec("deployment_airspeed", "speed", "m/s", "m/s", "deployment airspeed",
                "speed relative to the air at deployment"),
    OutcomeSpec("peak_opening_load", "force", "N", "N", "peak opening load",
                "largest quasi-steady drag force of the device from deployment on, on the recorded samples"),
    OutcomeSpec("peak_opening_load_time", "time", "s", "s", "peak opening load time",
                "time of the peak opening load"),
    OutcomeSpec("fully_open_time", "time", "s", "s", "fully open time", "time the device reached its full drag area"),
)


def recovery_summary(result: Any, names: list[str] | None = None) -> dict[str, dict[str, float]]:
    """Deployment time, altitude, speed and airspeed, and the peak opening load of each recovery device.

    Parameters
    ----------
    result : FlightResult
        A finished run.
    names : list of str, optional
        Component names to report; default every component with a recorded
        ``NAME.drag_area`` signal (every recovery device in the model).

    Returns
    -------
    dict
        Component name -> {key: SI value} with the keys of :data:`OUTCOMES`.
        A device that never deployed reports only ``{"deployed": 0.0}``.
        With ``names`` None, a device that left the vehicle (its signals end
        in NaN) before deploying is not listed.
    """
    sig = result.signals
    listed = names is not None
    if names is None:
        names = [k[:-len(".drag_area")] for k in sig if k.endswith(".drag_area")]
    out: dict[str, dict[str, float]] = {}
    t = result.t
    for name in names:
        deployed = sig[f"{name}.deployed"]
        on = np.flatnonzero(deployed == 1.0)
        if not len(on):
            if listed or not np.isnan(deployed[-1]):
                out[name] = {"deployed": 0.0}
            continue
        k = int(on[0])                                         # the first sample of the deployed segment
        td = float(t[k])
        entry = {"deployed": 1.0, "deployment_time": float(td),
                 "deployment_altitude": float(sig["altitude"][k]),
                 "deployment_speed": float(sig["speed"][k]),
                 "deployment_airspeed": float(sig["airspeed"][k])}
        after = np.arange(len(t)) >= k
        load = np.linalg.norm(np.nan_to_num(sig[f"{name}.drag"][after]), axis=1)
        j = int(np.argmax(load))
        entry["peak_opening_load"] = float(load[j])
        entry["peak_opening_load_time"] = float(t[after][j])
        opened = [e.t for e in result.events if e.component == name and e.name == "fully open" and e.t >= td]
        entry["fully_open_time"] = float(opened[0]) if opened else float(td)
        out[name] = entry
    return out
