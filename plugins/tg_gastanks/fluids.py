"""Fluid names and the optional real-fluid property library (CoolProp).

CoolProp (Bell, Wronski, Quoilin & Lemort, "Pure and pseudo-pure fluid
thermophysical property evaluation and the open-source thermophysical
property library CoolProp", Ind. Eng. Chem. Res. 53, 2014) evaluates the
reference equations of state (Helmholtz-energy form: Span et al. 2000 for
nitrogen, Span & Wagner 1996 for CO2, Lemmon et al. 2000 for air; citations
from memory). It is an optional extra of thrustgraph (``pip install
'thrustgraph[realgas]'``): the ideal-gas tank needs none of it.

Everything here runs at load and assembly time. A built ``AbstractState`` is
reused inside the right-hand side: every call sets its state completely
before reading it, so no value carries over from one call to the next.

Examples
--------
>>> resolve_fluid("nitrogen", where="components.tank.gas", device="gas tank 'tank'")
'Nitrogen'
>>> resolve_fluid("unobtainium", where="components.tank.gas", device="gas tank 'tank'")
Traceback (most recent call last):
...
thrustgraph.base.errors.ModelError: components.tank.gas: CoolProp does not know the fluid 'unobtainium' (gas tank 'tank'). Fix: give a fluid name CoolProp knows, e.g. Nitrogen, Air, CarbonDioxide, Helium, Argon (the full list is CoolProp's FluidsList).
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from typing import Any

from thrustgraph.base.errors import ModelError, shorten
from thrustgraph.kinds.parameters import Spec

from .gases import IDEAL_GASES, lookup_gas

__all__ = ["FluidName", "require_coolprop", "resolve_fluid", "new_state", "expansion_exponent", "wall_heat_specs"]


@dataclass(frozen=True)
class FluidName(Spec):
    """A fluid named in words (``"nitrogen"``, ``"CarbonDioxide"``); checked by the kind that uses it."""

    default: str | None = field(default=None, kw_only=True)

    def parse(self, value: Any, *, where: str) -> str | None:
        if self.default == "absent" and isinstance(value, str) and value == "absent":
            return None          # left out: the kind decides (the gas tank: nitrogen, or a gas given by gamma)
        if not isinstance(value, str) or not value.strip():
            raise ModelError(where, f"expected the name of a fluid in quotes, got {shorten(value)}",
                             f"write e.g. {self.name} = \"nitrogen\"")
        return value.strip()

    def describe(self) -> str:
        return f"{self.doc} fluid name, default {self.default}"


def require_coolprop(where: str, device: str, fix: str) -> Any:
    """Import CoolProp or refuse the model with a message naming the device and what to change."""
    try:
        import CoolProp  # noqa: F401
        from CoolProp import CoolProp as CP  # noqa: F401
    except ImportError:
        raise ModelError(where, f"{device} needs the real-fluid property library CoolProp, which is not "
                         "installed", f"install it (pip install 'thrustgraph[realgas]' or pip install "
                         f"CoolProp), or {fix}") from None
    return CoolProp


def resolve_fluid(name: str, *, where: str, device: str,
                  fix: str = "set equation_of_state = \"ideal\" to use the built-in gas table") -> str:
    """The CoolProp name of ``name`` (a table name or any name CoolProp knows), or a clear ModelError."""
    CoolProp = require_coolprop(where, device, fix)
    row = lookup_gas(name)
    candidate = row.coolprop if row is not None else name
    try:
        state = CoolProp.AbstractState("HEOS", candidate)
    except ValueError:
        from CoolProp import CoolProp as CP

        known = CP.get_global_param_string("FluidsList").split(",") + list(IDEAL_GASES)
        close = difflib.get_close_matches(name, known, n=1, cutoff=0.75)
        hint = f"did you mean {close[0]!r}? " if close else ""
        raise ModelError(where, f"CoolProp does not know the fluid {name!r} ({device})",
                         f"{hint}give a fluid name CoolProp knows, e.g. Nitrogen, Air, CarbonDioxide, Helium, "
                         "Argon (the full list is CoolProp's FluidsList)") from None
    return state.name()


def new_state(fluid: str) -> Any:
    """A fresh CoolProp HEOS ``AbstractState`` for a resolved fluid name."""
    import CoolProp

    return CoolProp.AbstractState("HEOS", fluid)


#: Bounds of the expansion exponent handed to a nozzle: its perfect-gas formulas divide by (n - 1).
EXPONENT_RANGE = (1.05, 1.99)


def expansion_exponent(expander: Any, p0: float, rho0: float, s0: float, kappa0: float) -> float:
    """The isentropic expansion exponent n of a real fluid from its stagnation state to the sonic throat.

    n is the secant exponent of the isentrope, ``p rho^-n`` equal at the stagnation state (p0, rho0, s0)
    and at the pressure p1 = p0 (2/(k+1))^(k/(k-1)) that a perfect gas of exponent k = kappa0 = rho0 a0^2/p0
    would have at its throat: one CoolProp (p, s) flash with ``expander``. A perfect-gas nozzle given n and
    R_eff = p0/(rho0 T0) then passes the choked mass flux Gamma(n) sqrt(p0 rho0) of the polytrope through both
    states (nitrogen at 200 bar and 300 K: within 0.3 % of the real-gas maximum of rho sqrt(2 (h0 - h)) along
    the isentrope, against +2.6 % with kappa0 itself and -5.1 % for the ideal gas; tests/test_gas_tanks.py).
    Clipped to :data:`EXPONENT_RANGE`; kappa0 (clipped) when the flash fails.
    """
    import math

    import CoolProp

    k = min(max(kappa0, EXPONENT_RANGE[0]), EXPONENT_RANGE[1])
    p1 = p0 * (2.0 / (k + 1.0)) ** (k / (k - 1.0))
    try:
        expander.update(CoolProp.PSmass_INPUTS, p1, s0)
        n = math.log(p0 / p1) / math.log(rho0 / expander.rhomass())
    except ValueError:
        return k
    return min(max(n, EXPONENT_RANGE[0]), EXPONENT_RANGE[1])


def wall_heat_specs(what: str, note: str = "") -> tuple:
    """Parameters of Newton wall heat transfer, Q = h A (T_wall - T), shared by the tank kinds.

    >>> [s.name for s in wall_heat_specs("the gas")]
    ['wall_heat_transfer_coefficient', 'wall_area', 'wall_temperature']
    """
    from thrustgraph.kinds.parameters import Quantity

    return (
        Quantity("wall_heat_transfer_coefficient", "W/m^2/K", default="0 W/m^2/K", low=0.0, high=1e6,
                 doc=f"film coefficient between {what} and the wall{note}"),
        Quantity("wall_area", "m^2", default="0 m^2", low=0.0, high=10_000.0, doc="inner wall area for the heat transfer"),
        Quantity("wall_temperature", "K", default="0 K", low=0.0, high=5000.0,
                 doc=f"wall temperature; 0 K means the temperature of {what} at launch"),
    )
