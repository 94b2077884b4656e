"""Real-gas properties tabulated from CoolProp once per fluid and range, and kept on disk.

Why
---
The real-gas tank needs, at every right-hand-side call, the pressure, the isentropic exponent rho a^2/p, the
expansion exponent n handed to the nozzle (one CoolProp (p, s) flash, about 80 us), the energy-equation terms
and, for its dew-point event, a saturation flash. Measured on the bundled ``cold-gas-track`` (CoolProp 8.0.0,
this project's 2-core machine): ``import CoolProp`` alone costs 1.3 s of CPU (its fluid library is loaded when
the module is), and the 9,600 flashes of one run about 0.8 s more, against a 1.5 s budget for the whole command.
So the table is built from CoolProp once and stored on disk (:func:`gas_table`); a later run reads it and never
imports CoolProp.

What is tabulated
-----------------
Over the tank's range (density 0 ... rho_hi, temperature T_lo ... T_hi), at the nodes of a grid uniform in
sqrt(rho) (fine at low density, where a blowdown ends) and in T with fixed steps (:data:`GRID`), from CoolProp's HEOS backend evaluated at
(rho, T) on its gas branch, exactly as the direct path evaluates it (:mod:`tg_gastanks.gas_tank`):

* ``Z = p/(rho R T)``, ``kappa = rho a^2 / p``,
* ``n``, the expansion exponent (:func:`tg_gastanks.fluids.expansion_exponent`),
* ``(h - u - rho (du/drho)_T) / (R T)`` and ``c_v / R`` (the energy equation), and ``u / (R T)`` (the
  self-pressurising tank's vapour),

with R = R_u/M of the fluid; bicubic Hermite patches (:class:`tg_gastanks.tables.CubicTable2D`) interpolate them.
The dew line, ln p_sat against T from the triple point to the critical point (CoolProp PQ flashes), is a table
for ``ops.interp``. Errors against CoolProp are measured, not assumed: ``tests/test_gas_table.py`` checks them
over the range and docs/fluid-devices.md states them.

The disk cache
--------------
A folder (``THRUSTGRAPH_CACHE_DIR``, else ``$XDG_CACHE_HOME/thrustgraph``, else ``~/.cache/thrustgraph``; the
value ``off`` keeps tables in memory only), one ``.npz`` file per table named by a hash of its key: the table
format, CoolProp's version (read from the installed distribution's metadata, without importing it), the fluid
and the range. A file whose stored key differs, or that cannot be read, is rebuilt; writes are atomic (a
temporary file renamed), and a folder that cannot be written only costs the rebuild next time.

Examples
--------
>>> cache_key("Nitrogen", 230.0, 63.151, 310.0, "8.0.0")["fluid"]
'Nitrogen'
>>> rounded_range(212.54, 300.0)
(230.0, 310.0)
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import tempfile
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np

from .gases import UNIVERSAL_GAS_CONSTANT
from .tables import CubicTable2D

__all__ = ["GasPropertyTable", "gas_table", "build_gas_table", "cache_key", "cache_folder", "rounded_range",
           "coolprop_version", "cached", "largest", "read_table_file", "write_table_file", "TABLE_FORMAT", "GRID"]

#: Bumped whenever what a table file holds or how it is built changes.
TABLE_FORMAT = 2
#: Grid steps in sqrt(rho) ((kg/m^3)^0.5) and in T (K): the same for every range, so that the tables of two
#: ranges of one fluid share their nodes and, away from their edges, their patches (an ensemble's table, over
#: every design's range, gives each design the numbers of its own single flight). The measured errors in
#: docs/fluid-devices.md are for these steps.
GRID = (0.12, 2.0)
#: Nodes added beyond the range on each upper edge: a patch depends on the nodes within two of its cell, and the
#: edge's derivatives are one-sided, so points of the range lie in patches shared by every larger table.
PAD = 4
#: The density of the node at rho = 0 (the ideal-gas limit, evaluated just above it).
RHO_TINY = 1e-9
#: Nodes of the dew line.
SATURATION_NODES = 2000


def coolprop_version() -> str | None:
    """The installed CoolProp's version, from its distribution's metadata (no import), or None."""
    try:
        return metadata.version("CoolProp")
    except metadata.PackageNotFoundError:
        return None


def rounded_range(rho_hi: float, T_hi: float) -> tuple[float, float]:
    """The table's upper density and temperature: 5 % and 5 K above the charge, rounded up (to 10 kg/m^3 and
    10 K) so that nearby charges share one table."""
    return (math.ceil(rho_hi * 1.05 / 10.0) * 10.0, math.ceil((T_hi + 5.0) / 10.0) * 10.0)


def cache_key(fluid: str, rho_hi: float, T_lo: float, T_hi: float, version: str | None) -> dict[str, Any]:
    """What a table depends on (its file is named by this key's hash)."""
    return {"format": TABLE_FORMAT, "coolprop": version, "fluid": fluid, "rho_hi": float(rho_hi),
            "T_lo": float(T_lo), "T_hi": float(T_hi), "grid": list(GRID), "pad": PAD,
            "saturation_nodes": SATURATION_NODES}


def cache_folder() -> Path | None:
    """Where tables are kept on disk, or None when the disk cache is off."""
    value = os.environ.get("THRUSTGRAPH_CACHE_DIR")
    if value is not None:
        return None if value.strip().lower() in ("", "off") else Path(value)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "thrustgraph"


@dataclass(frozen=True)
class GasPropertyTable:
    """A fluid's tabulated gas properties over a range (see the module docstring); SI throughout."""

    fluid: str
    key: dict
    gas_constant: float
    T_floor: float
    T_critical: float
    p_critical: float
    single: CubicTable2D
    sat_T: np.ndarray
    sat_lnp: np.ndarray

    def props(self, rho: Any, T: Any, ops: Any) -> tuple[Any, Any, Any, Any, Any]:
        """(p, rho a^2/p, expansion exponent n, h - u - rho (du/drho)_T, c_v) at (rho, T): floats or arrays."""
        Z, kappa, n, work, cv, _u = self.single(ops.sqrt(rho), T, ops)
        RT = self.gas_constant * T
        return Z * rho * RT, kappa, n, work * RT, cv * self.gas_constant

    def vapour(self, rho: float, T: float) -> tuple[float, float, float, float, float, float]:
        """One point's (p, rho a^2/p, n, h - u - rho (du/drho)_T, c_v, u) (floats; the self-pressurising tank's
        superheated vapour)."""
        Z, kappa, n, work, cv, u = self.single.at(math.sqrt(rho), T)
        RT = self.gas_constant * T
        return Z * rho * RT, kappa, n, work * RT, cv * self.gas_constant, u * RT

    def dew_temperature(self, p: Any, ops: Any) -> Any:
        """The dew-point temperature at pressure p (below the critical pressure)."""
        return ops.interp(ops.log(p), self.sat_lnp, self.sat_T)

    def saturation_pressure(self, T: float) -> float:
        """The saturation pressure at T (triple point ... critical point)."""
        return float(math.exp(np.interp(T, self.sat_T, self.sat_lnp)))

    @property
    def rho_hi(self) -> float:
        """The table's upper density."""
        return float(self.key["rho_hi"])

    def density(self, p: Any, T: Any, ops: Any) -> Any:
        """The gas density at (p, T): rho = p/(Z(rho, T) R T) by fixed-point iteration from the ideal gas (it
        contracts by rho dZ/drho / Z, a few hundredths for a gas; 40 passes reach rounding)."""
        rho = p / (self.gas_constant * T)
        for _ in range(40):
            Z = self.single(ops.sqrt(rho), T, ops)[0]
            rho = p / (Z * self.gas_constant * T)
        return rho

    # --- disk ------------------------------------------------------------------------------------------------
    def save(self, path: Path) -> None:
        """Write the table to ``path`` (atomically, :func:`write_table_file`)."""
        write_table_file(path, {"key": self.key, "fluid": self.fluid, "gas_constant": self.gas_constant,
                                "T_floor": self.T_floor, "T_critical": self.T_critical, "p_critical": self.p_critical},
                         x=self.single.x, y=self.single.y, values=self.single.values, sat_T=self.sat_T,
                         sat_lnp=self.sat_lnp)

    @classmethod
    def load(cls, path: Path, key: dict) -> "GasPropertyTable | None":
        """The table in ``path`` when it holds ``key``; None when missing, unreadable or of another key."""
        read = read_table_file(path, key)
        if read is None:
            return None
        meta, z = read
        try:
            return cls(meta["fluid"], key, meta["gas_constant"], meta["T_floor"], meta["T_critical"],
                       meta["p_critical"], CubicTable2D.from_nodes(z["x"], z["y"], z["values"]), z["sat_T"],
                       z["sat_lnp"])
        except KeyError:
            return None


def largest(x: Any) -> float:
    """The largest value of a parameter over designs (itself for a float)."""
    return float(np.max(x))


def write_table_file(path: Path, meta: dict, **arrays: np.ndarray) -> None:
    """Write ``meta`` (as JSON) and ``arrays`` to the ``.npz`` file ``path`` atomically: a temporary file in the
    same folder, renamed over it (a reader never sees half a table)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=path.stem, suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            np.savez(fh, meta=np.array(json.dumps(meta)), **arrays)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def read_table_file(path: Path, key: dict) -> tuple[dict, dict[str, np.ndarray]] | None:
    """(meta, arrays) of the table file ``path`` when it holds ``key``; None when missing, unreadable, incomplete
    or of another key."""
    try:
        with np.load(path, allow_pickle=False) as z:
            meta = json.loads(str(z["meta"]))
            if meta.get("key") != key:
                return None
            return meta, {name: z[name] for name in z.files if name != "meta"}
    except (OSError, ValueError, KeyError, json.JSONDecodeError):
        return None


_MEMORY: dict[str, Any] = {}


def cached(kind: str, fluid: str, key: dict, build: Any, load: Any, before_build: Any = None) -> Any:
    """A table by its key: from memory, else from the disk cache (``load(path, key)``, None when the file is
    missing, unreadable or of another key), else ``build()`` (after ``before_build()``) and stored."""
    name = hashlib.sha256(json.dumps(key, sort_keys=True).encode()).hexdigest()[:24]
    table = _MEMORY.get(name)
    if table is not None:
        return table
    folder = cache_folder()
    path = folder / f"{kind}-{fluid}-{name}.npz" if folder is not None else None
    if path is not None and path.exists():
        table = load(path, key)
    if table is None:
        if before_build is not None:
            before_build()          # e.g. refuse clearly when CoolProp cannot be imported
        table = build()
        if path is not None:
            try:
                table.save(path)
            except OSError:
                pass                # a folder we cannot write: the table is rebuilt next time
    _MEMORY[name] = table
    return table


def gas_table(fluid: str, rho_hi: float, T_hi: float, *, before_build: Any = None) -> GasPropertyTable:
    """The table of ``fluid`` (a CoolProp name) up to density ``rho_hi`` and temperature ``T_hi`` (rounded up by
    :func:`rounded_range`), down to the fluid's triple point: from memory, else from disk, else built from CoolProp
    (and stored; ``before_build`` is called first). The lower temperature is read from the stored table's key, so
    a stored table needs no CoolProp."""
    rho_top, T_top = rounded_range(rho_hi, T_hi)
    version = coolprop_version()
    probe = cache_key(fluid, rho_top, 0.0, T_top, version)
    probe.pop("T_lo")               # the fluid's own (its triple point): stored in the file's key
    return cached("gas", fluid, probe, lambda: build_gas_table(fluid, rho_top, T_top, version),
                  lambda path, key: _load_matching(path, key), before_build)


def _load_matching(path: Path, probe: dict) -> GasPropertyTable | None:
    """The stored table when its key equals ``probe`` apart from the lower temperature (the fluid's own)."""
    try:
        with np.load(path, allow_pickle=False) as z:
            key = json.loads(str(z["meta"]))["key"]
    except (OSError, ValueError, KeyError, json.JSONDecodeError):
        return None
    if {k: v for k, v in key.items() if k != "T_lo"} != probe:
        return None
    return GasPropertyTable.load(path, key)


def build_gas_table(fluid: str, rho_hi: float, T_hi: float, version: str | None = None) -> GasPropertyTable:
    """Build the table of ``fluid`` from CoolProp (imports it): see the module docstring."""
    import CoolProp

    from .fluids import expansion_exponent, new_state

    st = new_state(fluid)
    T_lo = max(st.Ttriple(), st.Tmin())
    Tc, pc = st.T_critical(), st.p_critical()
    R = UNIVERSAL_GAS_CONSTANT / st.molar_mass()
    st.specify_phase(CoolProp.iphase_gas)
    expander = new_state(fluid)
    DT = CoolProp.DmassT_INPUTS
    iU, iD, iT = CoolProp.iUmass, CoolProp.iDmass, CoolProp.iT
    hs, hT = GRID
    ns = math.ceil(math.sqrt(rho_hi) / hs) + 1 + PAD
    nT = math.ceil((T_hi - T_lo) / hT) + 1 + PAD
    s_nodes = hs * np.arange(ns)
    T_nodes = T_lo + hT * np.arange(nT)
    values = np.full((6, ns, nT), np.nan)
    for a, s in enumerate(s_nodes):
        rho = max(s * s, RHO_TINY)
        for b, T in enumerate(T_nodes):
            try:
                st.update(DT, rho, T)
                p = st.p()
                kappa = rho * st.speed_sound() ** 2 / p
                n = expansion_exponent(expander, p, rho, st.smass(), kappa)
                work = st.hmass() - st.umass() - rho * st.first_partial_deriv(iU, iD, iT)
                values[:, a, b] = (p / (rho * R * T), kappa, n, work / (R * T), st.cvmass() / R,
                                   st.umass() / (R * T))
            except ValueError:
                pass                # inside the two-phase dome, far from any gas state: filled below
    _fill_from_above(values)
    sat = new_state(fluid)
    T_sat = np.linspace(T_lo, Tc, SATURATION_NODES)
    lnp = np.empty_like(T_sat)
    for k, T in enumerate(T_sat):
        try:
            sat.update(CoolProp.QT_INPUTS, 1.0, min(T, Tc - 1e-6))
            lnp[k] = math.log(sat.p())
        except ValueError:
            lnp[k] = np.nan
    ok = np.isfinite(lnp)
    lnp = np.interp(T_sat, T_sat[ok], lnp[ok])
    key = cache_key(fluid, rho_hi, T_lo, T_hi, version if version is not None else coolprop_version())
    return GasPropertyTable(fluid, key, R, float(st.Tmin()), float(Tc), float(pc),
                            CubicTable2D.from_nodes(s_nodes, T_nodes, values), T_sat, lnp)


def _fill_from_above(values: np.ndarray) -> None:
    """Nodes CoolProp could not evaluate (deep in the dome) take the value of the nearest node above them in
    temperature, so every patch is finite; no gas state lies in those patches' cells."""
    for q in range(values.shape[0]):
        for a in range(values.shape[1]):
            col = values[q, a]
            bad = ~np.isfinite(col)
            if bad.all():
                col[:] = 1.0
            elif bad.any():
                good = np.flatnonzero(~bad)
                col[bad] = np.interp(np.flatnonzero(bad), good, col[good])
