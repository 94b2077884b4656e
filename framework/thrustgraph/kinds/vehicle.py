"""What sort of vehicle a model is, as its outputs need to know: flying, hovering, on a track, on a stand, free of
gravity.

The outcome registry (:mod:`thrustgraph.balance.outcomes`) says for each outcome which vehicles it applies to; it asks
the :class:`VehicleProfile` of the model, read once from the checked model (its mount, its gravity at the launch
point, the roles of its components). The same profile serves a single run and an ensemble of designs, so both
paths report the same outcomes. The core knows roles, never devices: a vehicle fed from outside (a component
of role ``source``) that flies under gravity is taken to hover on its feed (a hose-fed rig).

========================  ==========================================================================
class                     what it is
========================  ==========================================================================
``flying``                guide or free launch under gravity, carrying what it expels (a rocket)
``hovering``              guide or free launch under gravity, fed from outside (a hose-fed rig)
``track``                 runs along a track or a water lane (a cart, a boat)
``stand``                 held on a test stand
``weightless``            free launch with no gravity (a platform in a drop tower or in orbit)
========================  ==========================================================================

Examples
--------
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> from thrustgraph.models.model import parse_model
>>> p = vehicle_profile(parse_model(load_model(default_model_path())))
>>> p.kind, p.label, p.guided
('flying', 'flying vehicle', True)
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..base.xp import scalar_ops

__all__ = ["VehicleProfile", "vehicle_profile", "KINDS", "LABELS"]

#: The classes of vehicle, in the order the docs list them.
KINDS = ("flying", "hovering", "track", "stand", "weightless")
#: What each class is called in text.
LABELS = {"flying": "flying vehicle", "hovering": "hover rig", "track": "vehicle on a track or water lane",
          "stand": "vehicle on a test stand", "weightless": "platform free of gravity"}


@dataclass(frozen=True)
class VehicleProfile:
    """The facts about a vehicle that decide which outcomes, events and plots fit it.

    Fields
    ------
    kind : one of :data:`KINDS`
    mount : the launch mount (``held``, ``guide``, ``free``, ``track``)
    guide_length : length of the launch guide, m (0 for a pad, and for every other mount)
    vessels : it has a vessel (a component of role ``volume``)
    fed : it is fed from outside (a component of role ``source``: an inlet, a hose)
    jets : it has a prescribed jet
    staged : it has stages
    in_liquid : it moves through a liquid (the medium is denser than 100 kg/m^3 at the launch point)
    """

    kind: str
    mount: str
    guide_length: float = 0.0
    vessels: bool = False
    fed: bool = False
    jets: bool = False
    staged: bool = False
    in_liquid: bool = False

    @property
    def label(self) -> str:
        """The class in words (``hover rig``)."""
        return LABELS[self.kind]

    @property
    def airborne(self) -> bool:
        """Flies under gravity (flying or hovering): it has a height to report."""
        return self.kind in ("flying", "hovering")

    @property
    def moves(self) -> bool:
        """Not held on a stand."""
        return self.kind != "stand"

    @property
    def guided(self) -> bool:
        """Leaves a launch guide of some length (a zero-length pad has no guide exit to report)."""
        return self.mount == "guide" and self.guide_length > 0.0


def vehicle_profile(parsed: Any) -> VehicleProfile:
    """The :class:`VehicleProfile` of a checked model (a :class:`~thrustgraph.models.model.ParsedModel`, or anything
    with its ``launch``, ``kinds``, ``env_kinds``, ``env_params``, ``stages`` and ``ambient``)."""
    launch = parsed.launch
    mount = str(launch.mount)
    g = float(parsed.env_kinds["gravity"].build(parsed.env_params["gravity"], scalar_ops)(float(launch.altitude)))
    roles = {cls.role for cls in parsed.kinds.values()}
    fed = "source" in roles
    if mount == "held":
        kind = "stand"
    elif mount == "track":
        kind = "track"
    elif g <= 0.0:
        kind = "weightless"
    else:
        kind = "hovering" if fed else "flying"
    return VehicleProfile(kind=kind, mount=mount,
                          guide_length=float(launch.guide_length) if mount == "guide" else 0.0,
                          vessels="volume" in roles, fed=fed, jets="jet" in roles, staged=bool(parsed.stages),
                          in_liquid=float(parsed.ambient.density) > 100.0)
