"""How cold a gas tank gets: the lowest temperature of its contents and of its wall, and the caution about cold.

A tank that blows down adiabatically (or boils its liquefied gas) cools, sometimes far below freezing. The
tank kinds report, as outcomes of the run:

``lowest_temperature``
    the lowest temperature of the tank's contents (gas, or liquid and vapour) over the run, at the output
    samples and the solver's steps;
``wall_temperature``
    the temperature of the wall the model holds fixed for the wall heat transfer (reported when the heat
    transfer is on): the model has no wall of its own, so a real thin wall, its valves and the nozzle in the
    cold gas's path cool toward the gas, and their lowest temperature lies between the two.

When the contents fall below 0 °C the run's cautions add one about cold embrittlement: carbon steels lose
their toughness below about -29 °C (-20 °F, the usual lowest temperature at which carbon steel is used without
impact testing: ASME B31.3 and BPVC Section VIII Div. 1 UCS-66, from memory: common practice, no source checked
here), and many plastics and elastomer seals stiffen and crack when cold.

Examples
--------
>>> [o.key for o in COLD_OUTCOMES]
['lowest_temperature', 'wall_temperature']
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from thrustgraph.kinds.outcomespec import OutcomeSpec

__all__ = ["COLD_OUTCOMES", "cold_summary", "cold_cautions", "FREEZING", "CARBON_STEEL_LIMIT"]

#: 0 °C in K: below it the run's cautions speak of cold.
FREEZING = 273.15
#: About -29 °C (-20 °F): the usual lowest temperature for carbon steel without impact testing (from memory:
#: ASME B31.3, BPVC VIII Div. 1 UCS-66; common practice).
CARBON_STEEL_LIMIT = 244.15

COLD_OUTCOMES = (
    OutcomeSpec("lowest_temperature", "temperature", "K", "K", "lowest temperature",
                "lowest temperature of the tank's contents over the run (output samples and solver steps)",
                also=("degC",)),
    OutcomeSpec("wall_temperature", "temperature", "K", "K", "wall temperature (held)",
                "the wall temperature the model holds fixed for the wall heat transfer (only with the heat "
                "transfer on; a real wall cools toward the contents)", also=("degC",)),
)


def _wall(p: Any) -> float:
    """The wall temperature the model holds, or NaN when the wall heat transfer is off."""
    if not p.wall_heat_transfer_coefficient > 0.0:
        return math.nan
    return p.wall_temperature if p.wall_temperature > 0.0 else p.temperature


def cold_summary(name: str, p: Any, result: Any) -> dict[str, float]:
    """The tank's outcomes from a finished run."""
    T = result.signals.get(f"{name}.temperature")
    out = {}
    if T is not None and np.any(np.isfinite(T)):
        out["lowest_temperature"] = float(np.nanmin(T))
    if math.isfinite(_wall(p)):
        out["wall_temperature"] = _wall(p)
    return out


def cold_cautions(name: str, p: Any, result: Any, what: str) -> list[str]:
    """The caution about cold, when the contents fell below 0 °C."""
    low = cold_summary(name, p, result).get("lowest_temperature", math.nan)
    if not low < FREEZING:
        return []
    wall = _wall(p)
    held = (f"The model holds the tank wall at {wall:.4g} K ({wall - FREEZING:.3g} °C) for its heat transfer; a "
            "real thin wall" if math.isfinite(wall) else "The model does not follow the wall's temperature: the "
            "wall")
    verb = "cool" if what == "contents" else "cools"
    return [f"components.{name}: the {what} {verb} to {low:.4g} K ({low - FREEZING:.3g} °C) in this run. Cold "
            "embrittlement: carbon steels lose their toughness below about -29 °C (-20 °F, the usual lowest "
            "temperature for carbon steel without impact testing), and many plastics and elastomer seals stiffen "
            f"and crack when cold (common practice, values from memory). {held}, the valves and the nozzle in the "
            "cold gas's path cool toward the gas. Use a tank, valves and seals rated for the lowest temperature, "
            "keep hands off frosted parts, and let them warm before recharging."]
