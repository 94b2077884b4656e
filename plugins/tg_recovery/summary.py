"""After a run: when and how fast each recovery device deployed, and its peak opening load.

The core's summary does not know recovery devices, so these numbers are read
from a finished :class:`~thrustgraph.result.FlightResult`: the deployment
event in the event log, the states at that instant, and the device's drag
signal ``NAME.drag`` from the deployment on.

The peak opening load is the largest magnitude of the device's drag force on
the recorded samples (the solver's own steps plus the evenly spaced output
grid, ``run.output_interval``) from deployment to the end of the run. It is the
quasi-steady drag of the model; see :mod:`tg_recovery.device` for why a real
opening shock can be higher.

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

__all__ = ["recovery_summary", "SUMMARY_UNITS", "DEPLOY_EVENTS"]

#: Event names a recovery device logs when it deploys.
DEPLOY_EVENTS = ("deploy at apogee", "deploy after delay", "deploy at altitude")

#: SI unit of each entry of a device's summary.
SUMMARY_UNITS = {"deployment_time": "s", "deployment_altitude": "m", "deployment_speed": "m/s",
                 "deployment_airspeed": "m/s", "peak_opening_load": "N", "peak_opening_load_time": "s",
                 "fully_open_time": "s"}


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
        Component name -> {key: SI value} with the keys of :data:`SUMMARY_UNITS`.
        A device that never deployed reports only ``{"deployed": 0.0}``.
    """
    sig = result.signals
    if names is None:
        names = [k[:-len(".drag_area")] for k in sig if k.endswith(".drag_area")]
    out: dict[str, dict[str, float]] = {}
    t = result.t
    for name in names:
        dep = [e for e in result.events if e.component == name and e.name in DEPLOY_EVENTS]
        if not dep:
            out[name] = {"deployed": 0.0}
            continue
        td = dep[0].t
        k = int(np.searchsorted(t, td, side="right")) - 1     # the sample at the deployment instant
        entry = {"deployed": 1.0, "deployment_time": float(td),
                 "deployment_altitude": float(sig["altitude"][k]),
                 "deployment_speed": float(sig["speed"][k]),
                 "deployment_airspeed": float(sig["airspeed"][k])}
        after = t >= td
        load = np.linalg.norm(np.nan_to_num(sig[f"{name}.drag"][after]), axis=1)
        j = int(np.argmax(load))
        entry["peak_opening_load"] = float(load[j])
        entry["peak_opening_load_time"] = float(t[after][j])
        opened = [e.t for e in result.events if e.component == name and e.name == "fully open"]
        entry["fully_open_time"] = float(opened[0]) if opened else float(td)
        out[name] = entry
    return out
