"""A small table of common gases as ideal gases: ratio of specific heats and molar mass.

Sources
-------
* Molar masses: from the IUPAC standard atomic weights (values from memory);
  air from the US Standard Atmosphere 1976 (M0 = 28.9644 kg/kmol). The tests
  check every entry against CoolProp's molar masses (relative 1e-4).
* Ratios of specific heats gamma = cp/cv of the ideal gas near 300 K: handbook
  values (e.g. the ideal-gas heat capacities of the NIST Chemistry WebBook;
  quoted from memory). The tests check every entry against CoolProp's
  ideal-gas cp0/cv0 at 300 K (within 0.5 %).
* Universal gas constant R = 8.314462618 J/(mol K) (CODATA 2018, exact since
  the 2019 SI).

The ``coolprop`` column names the fluid in CoolProp for the real-gas option.

Examples
--------
>>> g = IDEAL_GASES["nitrogen"]
>>> g.gamma, round(g.gas_constant, 3)
(1.4, 296.803)
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["IdealGas", "IDEAL_GASES", "UNIVERSAL_GAS_CONSTANT", "lookup_gas"]

#: J/(mol K), exact (CODATA 2018).
UNIVERSAL_GAS_CONSTANT = 8.314462618


@dataclass(frozen=True)
class IdealGas:
    """One row of the table: name, gamma (ideal gas, ~300 K), molar mass (kg/mol), CoolProp name."""

    name: str
    gamma: float
    molar_mass: float
    coolprop: str

    @property
    def gas_constant(self) -> float:
        """Specific gas constant R = R_u / M, J/(kg K)."""
        return UNIVERSAL_GAS_CONSTANT / self.molar_mass


IDEAL_GASES: dict[str, IdealGas] = {g.name: g for g in (
    IdealGas("air", 1.400, 28.9644e-3, "Air"),
    IdealGas("nitrogen", 1.400, 28.0134e-3, "Nitrogen"),
    IdealGas("oxygen", 1.395, 31.9988e-3, "Oxygen"),
    IdealGas("argon", 5.0 / 3.0, 39.948e-3, "Argon"),
    IdealGas("helium", 5.0 / 3.0, 4.002602e-3, "Helium"),
    IdealGas("neon", 5.0 / 3.0, 20.1797e-3, "Neon"),
    IdealGas("krypton", 5.0 / 3.0, 83.798e-3, "Krypton"),
    IdealGas("hydrogen", 1.405, 2.01588e-3, "Hydrogen"),
    IdealGas("carbon-dioxide", 1.289, 44.0095e-3, "CarbonDioxide"),
    IdealGas("methane", 1.303, 16.0425e-3, "Methane"),
)}


def lookup_gas(name: str) -> IdealGas | None:
    """The table row for ``name`` (its table name or its CoolProp name, any case), or None.

    >>> lookup_gas("CarbonDioxide").name
    'carbon-dioxide'
    """
    key = name.strip().lower()
    for g in IDEAL_GASES.values():
        if key in (g.name, g.coolprop.lower()):
            return g
    return None
