"""The saturation properties of a liquefied gas tabulated from CoolProp against temperature, kept on disk.

The self-pressurising tank (:mod:`tg_gastanks.saturated`) needs at every right-hand-side call, while its
contents are two-phase, the saturated liquid's and vapour's densities, internal energies, enthalpies and their
derivatives along the saturation line, the saturation pressure, the vapour's rho a^2/p and the expansion
exponent n of the vapour drawn (a (p, s) flash): all functions of the temperature alone. Measured on the bundled
``gas-cartridge-cart`` (CoolProp 8.0.0): ``import CoolProp`` costs 1.3 s of CPU against a 1.5 s budget for the
whole command. So they are tabulated once, from CoolProp's two-phase equilibrium (QT flashes and
``first_saturation_deriv``, exactly the calls of the direct path), at nodes 0.05 K apart from just above the
triple point, and interpolated by cubic Hermite pieces (:class:`tg_gastanks.tables.CubicTable1D`); the
superheated vapour after the liquid is gone comes from the gas table (:mod:`tg_gastanks.gastable`). Stored like
the gas table (:func:`tg_gastanks.gastable.cached`), keyed by the table format, CoolProp's version, the fluid and
the upper temperature. The measured errors against CoolProp are in ``tests/test_gas_table.py`` and
docs/fluid-devices.md.

Quantities, in this order (SI): ln p_sat, rho_l, rho_v, u_l, u_v, h_l, h_v, dv_l/dT, dv_v/dT, du_l/dT, du_v/dT,
rho_v a_v^2 / p, n of the saturated vapour.

Examples
--------
>>> QUANTITIES[:3]
('ln_p', 'rho_l', 'rho_v')
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .gastable import PAD, cached, coolprop_version, read_table_file, write_table_file
from .tables import CubicTable1D

__all__ = ["SaturationTable", "saturation_table", "build_saturation_table", "QUANTITIES", "STEP", "SAT_FORMAT"]

SAT_FORMAT = 1
#: Node spacing in temperature, K.
STEP = 0.05
QUANTITIES = ("ln_p", "rho_l", "rho_v", "u_l", "u_v", "h_l", "h_v", "dv_l_dT", "dv_v_dT", "du_l_dT", "du_v_dT",
              "kappa_v", "n_v")


@dataclass(frozen=True)
class SaturationTable:
    """A fluid's saturation line from its triple point (+0.01 K) up to T_hi (at most 0.01 K below the critical
    temperature), with its fixed points."""

    fluid: str
    key: dict
    T_triple: float
    T_critical: float
    table: CubicTable1D

    def at(self, T: float) -> tuple[float, ...]:
        """The quantities of :data:`QUANTITIES` at T (floats; ln p_sat is returned as p_sat)."""
        q = self.table.at(T)
        return (math.exp(q[0]),) + q[1:]

    def rho_v(self, T: float) -> float:
        """The saturated vapour's density at T."""
        return self.table.at(T)[2]

    def rho_l(self, T: float) -> float:
        """The saturated liquid's density at T."""
        return self.table.at(T)[1]

    def save(self, path: Path) -> None:
        """Write the table to ``path`` (atomically, :func:`tg_gastanks.gastable.write_table_file`)."""
        write_table_file(path, {"key": self.key, "fluid": self.fluid, "T_triple": self.T_triple,
                                "T_critical": self.T_critical}, x=self.table.x, values=self.table.values)

    @classmethod
    def load(cls, path: Path, key: dict) -> "SaturationTable | None":
        """The table in ``path`` when it holds ``key``; None when missing, unreadable or of another key."""
        read = read_table_file(path, key)
        if read is None:
            return None
        meta, z = read
        try:
            return cls(meta["fluid"], key, meta["T_triple"], meta["T_critical"],
                       CubicTable1D.from_nodes(z["x"], z["values"]))
        except KeyError:
            return None


def saturation_table(fluid: str, T_hi: float, *, before_build: Any = None) -> SaturationTable:
    """The saturation table of ``fluid`` (a CoolProp name) up to ``T_hi`` (rounded up to 10 K, 5 K above it):
    from memory, else from disk, else built from CoolProp (after ``before_build()``) and stored."""
    T_top = math.ceil((T_hi + 5.0) / 10.0) * 10.0
    version = coolprop_version()
    key = {"format": SAT_FORMAT, "coolprop": version, "fluid": fluid, "T_hi": T_top, "step": STEP, "pad": PAD}
    return cached("saturation", fluid, key, lambda: build_saturation_table(fluid, T_top, key),
                  SaturationTable.load, before_build)


def build_saturation_table(fluid: str, T_hi: float, key: dict) -> SaturationTable:
    """Build the table from CoolProp (imports it): see the module docstring."""
    import CoolProp

    from .fluids import expansion_exponent, new_state

    liq, vap, expander = new_state(fluid), new_state(fluid), new_state(fluid)
    t_tp, t_c = liq.Ttriple(), liq.T_critical()
    t_lo, t_top = t_tp + 0.01, t_c - 0.01
    n = math.ceil((min(T_hi, t_top) - t_lo) / STEP) + 1 + PAD
    T_nodes = t_lo + STEP * np.arange(n)
    QT = CoolProp.QT_INPUTS
    iU, iD, iT = CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT
    values = np.empty((len(QUANTITIES), n))
    for k, T in enumerate(T_nodes):
        T = min(T, t_top)        # nodes past the critical point repeat its neighbourhood (the tank clamps there)
        liq.update(QT, 0.0, T)
        vap.update(QT, 1.0, T)
        rl, rv = liq.rhomass(), vap.rhomass()
        pr = vap.p()
        kv = rv * vap.speed_sound() ** 2 / pr
        values[:, k] = (math.log(pr), rl, rv, liq.umass(), vap.umass(), liq.hmass(), vap.hmass(),
                        -liq.first_saturation_deriv(iD, iT) / (rl * rl), -vap.first_saturation_deriv(iD, iT) / (rv * rv),
                        liq.first_saturation_deriv(iU, iT), vap.first_saturation_deriv(iU, iT), kv,
                        expansion_exponent(expander, pr, rv, vap.smass(), kv))
    return SaturationTable(fluid, key, float(t_tp), float(t_c), CubicTable1D.from_nodes(T_nodes, values))
