"""The US Standard Atmosphere 1976 below 86 km, computed from its defining constants.

Model
-----
The standard (NOAA/NASA/USAF, *U.S. Standard Atmosphere, 1976*, U.S.
Government Printing Office, 1976; also NASA TM-X-74335) defines, below
86 km, seven layers in which the molecular-scale temperature is linear in the
geopotential altitude H::

    T = T_b + L_b (H - H_b)

    p = p_b (T_b / T)^(g0 M0 / (R* L_b))              L_b != 0
    p = p_b exp(-g0 M0 (H - H_b) / (R* T_b))          L_b == 0

    rho = p M0 / (R* T)

    H = r0 Z / (r0 + Z)        (Z the geometric altitude above sea level)

with the defining constants g0 = 9.80665 m/s^2, M0 = 28.9644 kg/kmol,
R* = 8314.32 J/(kmol K), r0 = 6356766 m, T0 = 288.15 K, p0 = 101325 Pa and
the layer bases and lapse rates

    =====  ========  ============  =========
    layer  H_b (m)   L_b (K/km)    T_b (K)
    =====  ========  ============  =========
    0          0        -6.5        288.15
    1      11 000        0.0        216.65
    2      20 000       +1.0        216.65
    3      32 000       +2.8        228.65
    4      47 000        0.0        270.65
    5      51 000       -2.8        270.65
    6      71 000       -2.0        214.65
    top    84 852        --         186.946
    =====  ========  ============  =========

The base pressures p_b are not typed in: they are chained upward from p0 with
the formulas above, once, when this module is imported (they reproduce the
standard's 22632.06, 5474.889, 868.0187, 110.9063, 66.93887 and 3.956420 Pa).

Geometric or geopotential
-------------------------
The layers are defined in geopotential altitude. A geometric altitude Z is
converted with ``H = r0 Z / (r0 + Z)``; at Z = 11 km, H = 10 981 m. The two
scales differ enough to matter: the pressure at *geometric* 11 km is
22 699.9 Pa, at *geopotential* 11 km 22 632.1 Pa, 0.30 % less. Say which one
you mean (parameter ``altitude_type`` of the medium).

Range and what happens outside it
---------------------------------
The standard's formulas above hold from H = 0 to H = 84 852 m (geometric
86 km). Outside that range this module *extrapolates*, and says so here:

* below H = 0 the layer-0 formulas continue (the standard itself tabulates
  that layer down to -5 km; from memory, confirmed by ``ambiance`` accepting
  -5004 m); below H = -5000 m the values are held at their -5000 m values;
* above H = 84 852 m the air is continued *isothermally* at the 84 852 m
  temperature (186.946 K) with the hydrostatic pressure decay of an isothermal
  layer. This is not the standard (above 86 km it uses a different
  formulation with a rising temperature); it is a smooth, monotonic stand-in
  so that a flight that briefly pokes above 86 km does not stop. At 100 km it
  gives a density within a few per cent of the standard's (from memory).

A launch point outside 0..86 km is refused when the model is checked (see
:func:`tg_atmosphere.thrustgraph_check_model`).

Temperature: the ``T`` returned is the molecular-scale temperature T_M of the
standard, the one its pressure, density and speed of sound use
(a = sqrt(gamma R* T_M / M0)). It equals the kinetic temperature below 80 km;
between 80 and 86 km the kinetic temperature is lower by the factor M/M0 of
the standard's Table 8, down to 0.999579 at 86 km (0.042 %).

Examples
--------
>>> T, p, rho = atmosphere_1976(11000.0)           # geopotential 11 km
>>> round(T, 3), round(p, 2), round(rho, 6)
(216.65, 22632.06, 0.363918)
>>> T, p, rho = atmosphere_1976(geopotential_altitude(11000.0))   # geometric 11 km
>>> round(p, 2)
22699.96
"""

from __future__ import annotations

import math
from typing import Any

from thrustgraph.base.xp import scalar_ops

__all__ = [
    "G0", "M0", "R_STAR", "R_AIR", "R0", "T0", "P0", "LAYERS", "H_TOP", "Z_TOP", "H_LOW",
    "geopotential_altitude", "geometric_altitude", "atmosphere_1976", "in_range",
]

# Defining constants of the 1976 standard (S: crnslab.org, scipp.ucsc.edu; /work/shared/references.md section 5).
G0 = 9.80665            # m/s^2 (in the standard: m'^2/s^2 per geopotential metre)
M0 = 28.9644            # kg/kmol, sea-level mean molar mass
R_STAR = 8314.32        # J/(kmol K), the standard's gas constant
R_AIR = R_STAR / M0     # J/(kg K), 287.0531...
R0 = 6356766.0          # m, effective earth radius used for H
T0 = 288.15             # K
P0 = 101325.0           # Pa

# (base geopotential altitude H_b [m], lapse rate L_b [K/m]) of the seven layers.
_BASES = ((0.0, -0.0065), (11000.0, 0.0), (20000.0, 0.001), (32000.0, 0.0028),
          (47000.0, 0.0), (51000.0, -0.0028), (71000.0, -0.002))
H_TOP = 84852.0          # m, top of layer 6 (geopotential), the standard's 84.852 km
H_LOW = -5000.0          # m, below this the values are held constant (extrapolation)

_GMR = G0 * M0 / R_STAR  # K/m, the hydrostatic constant (34.163195 K/km)


def _layer_pressure(pb: float, Tb: float, L: float, dH: float) -> tuple[float, float]:
    T = Tb + L * dH
    if L == 0.0:
        return T, pb * math.exp(-_GMR * dH / Tb)
    return T, pb * (Tb / T) ** (_GMR / L)


def _chain() -> tuple[tuple[float, float, float, float], ...]:
    """(H_b, L_b, T_b, p_b) of each layer, chained from the sea-level values."""
    out = []
    Tb, pb = T0, P0
    for k, (Hb, L) in enumerate(_BASES):
        out.append((Hb, L, Tb, pb))
        Htop = _BASES[k + 1][0] if k + 1 < len(_BASES) else H_TOP
        Tb, pb = _layer_pressure(pb, Tb, L, Htop - Hb)
    out.append((H_TOP, 0.0, Tb, pb))  # the isothermal extrapolation above the top
    return tuple(out)


LAYERS = _chain()
"""(H_b [m], L_b [K/m], T_b [K], p_b [Pa]) of layers 0-6, then the top (84 852 m) with L = 0."""

_HB = [row[0] for row in LAYERS]


def geopotential_altitude(Z: float) -> float:
    """Geopotential altitude H (m) of a geometric altitude Z (m) above sea level: H = r0 Z / (r0 + Z).

    >>> round(geopotential_altitude(11000.0), 3)
    10980.998
    """
    return R0 * Z / (R0 + Z)


def geometric_altitude(H: float) -> float:
    """Geometric altitude Z (m) of a geopotential altitude H (m): Z = r0 H / (r0 - H).

    >>> round(geometric_altitude(11000.0), 2)
    11019.07
    """
    return R0 * H / (R0 - H)


Z_TOP = 86000.0
"""Geometric top of the range, m (H = 84 852.05 m; the standard's 86 km)."""


def in_range(H: float) -> bool:
    """Whether a geopotential altitude lies where the standard's formulas hold (0 to 86 km geometric).

    >>> in_range(0.0), in_range(84852.0), in_range(-1.0)
    (True, True, False)
    """
    return 0.0 <= H <= geopotential_altitude(Z_TOP)


_LB = [row[1] for row in LAYERS]
_TB = [row[2] for row in LAYERS]
_PB = [row[3] for row in LAYERS]


def atmosphere_1976(H: Any, ops: Any = scalar_ops) -> tuple[Any, Any, Any]:
    """Temperature (K), pressure (Pa) and density (kg/m^3) at geopotential altitude H (m).

    Exact to the standard from H = 0 to 84 852 m; outside, the stated
    extrapolation of the module docstring. One definition for floats and for arrays of designs (``ops``:
    :mod:`thrustgraph.base.xp`).

    >>> T, p, rho = atmosphere_1976(0.0)
    >>> T, p, round(rho, 5)
    (288.15, 101325.0, 1.225)
    """
    H = ops.maximum(H, H_LOW)
    k = ops.layer(H, _HB)      # below sea level: layer 0 continues
    Hb, L, Tb, pb = ops.take(_HB, k), ops.take(_LB, k), ops.take(_TB, k), ops.take(_PB, k)
    dH = H - Hb
    T = Tb + L * dH
    p = ops.branch(L == 0.0, _isothermal, _gradient, pb, Tb, T, L, dH, ops)
    return T, p, p / (R_AIR * T)


def _isothermal(pb, Tb, T, L, dH, ops):
    return pb * ops.exp(-_GMR * dH / Tb)


def _gradient(pb, Tb, T, L, dH, ops):
    return pb * (Tb / T) ** (_GMR / ops.where(L == 0.0, 1.0, L))
