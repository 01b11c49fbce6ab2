"""Liquid coolant properties from CoolProp: water and glycol-water mixtures.

Names are our own short forms:

* ``"water"`` -- pure water (CoolProp's reference equation of state, ``'Water'``),
* ``"eg<NN>"`` -- ethylene glycol in water, ``NN`` percent **by mass**
  (CoolProp incompressible ``'INCOMP::MEG-NN%'``),
* ``"pg<NN>"`` -- propylene glycol in water, ``NN`` percent by mass
  (``'INCOMP::MPG-NN%'``).

CoolProp's MEG and MPG mixtures are defined on a mass-fraction basis (its
``AbstractState`` refuses volume fractions for them), with 0-60 % glycol; the
correlations come from Melinder, *Properties of Secondary Working Fluids for
Indirect Systems* (IIR, 2010). Long aliases such as ``"ethylene_glycol_50"``
are accepted too.

Properties are evaluated at a fixed system pressure of 1 atm (the coolant
loop's static pressure hardly matters for a liquid) and cached on the
temperature rounded to 0.01 K, so repeated calls are cheap. A temperature
outside the liquid range (below the freezing point or the library's fit, above
boiling or the fit's top) raises :class:`explorer.validators.InputError` --
never an extrapolation.

Examples
--------
>>> water = get_coolant("water")
>>> round(water.properties(25.0).density_kg_m3, 1)
997.0
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

from explorer.validators import InputError, check_finite

__all__ = ["Coolant", "CoolantProperties", "get_coolant", "COOLANT_NAMES", "PRESSURE_PA"]

PRESSURE_PA = 101325.0  # property evaluation pressure (1 atm)
_KELVIN = 273.15
_MAX_GLYCOL_PERCENT = 60  # top of CoolProp's MEG/MPG fits
# Stay this far inside the library's temperature window (K): CoolProp's water
# would happily return vapour above boiling, and the incompressible fits end at
# their freezing curve.
_EDGE_K = 0.05

COOLANT_NAMES = "'water', 'eg<NN>' (ethylene glycol) or 'pg<NN>' (propylene glycol), NN = 1..60 mass percent, e.g. 'eg50', 'pg30'"

_ALIASES = {
    "ethylene_glycol": "eg",
    "ethyleneglycol": "eg",
    "meg": "eg",
    "eg": "eg",
    "propylene_glycol": "pg",
    "propyleneglycol": "pg",
    "mpg": "pg",
    "pg": "pg",
}
_CP_NAMES = {"eg": "MEG", "pg": "MPG"}
_LONG = {"eg": "ethylene glycol", "pg": "propylene glycol"}


@dataclass(frozen=True)
class CoolantProperties:
    """Thermophysical properties of a coolant at one temperature (SI)."""

    temperature_C: float
    density_kg_m3: float
    specific_heat_J_kgK: float
    viscosity_Pa_s: float  # dynamic viscosity
    conductivity_W_mK: float

    @property
    def prandtl(self) -> float:
        return self.viscosity_Pa_s * self.specific_heat_J_kgK / self.conductivity_W_mK

    @property
    def kinematic_viscosity_m2_s(self) -> float:
        return self.viscosity_Pa_s / self.density_kg_m3


@dataclass(frozen=True)
class Coolant:
    """A named coolant and its valid liquid temperature window.

    Attributes
    ----------
    name : str
        Our canonical short name (``"water"``, ``"eg50"``, ...).
    fluid : str
        The CoolProp fluid string.
    glycol_mass_fraction : float
        0 for water.
    min_C, max_C : float
        Valid liquid range at 1 atm (freezing point / fit limits and boiling /
        fit top, with a small margin).
    description : str
        Plain words for reports.
    """

    name: str
    fluid: str
    glycol_mass_fraction: float
    min_C: float
    max_C: float
    description: str

    def properties(self, temperature_C: float, *, what: str = "coolant temperature") -> CoolantProperties:
        """Properties at ``temperature_C`` (degC); out of range raises InputError.

        ``what`` names the temperature in the error (e.g. ``"inlet_C"``).
        """
        t = check_finite(what, temperature_C, "degC")
        if not (self.min_C <= t <= self.max_C):
            raise InputError(
                f"`{what}`: expected a temperature between {self.min_C:.1f} and {self.max_C:.1f} degC "
                f"for coolant {self.name!r} ({self.description}: liquid range of the property data at 1 atm), "
                f"got {temperature_C!r}"
            )
        return _properties(self.fluid, round(t + _KELVIN, 2))


@lru_cache(maxsize=4096)
def _properties(fluid: str, temperature_K: float) -> CoolantProperties:
    from CoolProp.CoolProp import PropsSI

    args = ("T", temperature_K, "P", PRESSURE_PA, fluid)
    rho, cp, mu, k = (PropsSI(q, *args) for q in ("D", "C", "V", "L"))
    return CoolantProperties(temperature_K - _KELVIN, rho, cp, mu, k)


def _parse(name) -> tuple[str, int]:
    """('eg', 50) style key from a user name; ('water', 0) for water."""
    if not isinstance(name, str):
        raise InputError(f"`coolant`: expected one of {COOLANT_NAMES}, got {name!r}")
    key = name.strip().lower().replace("-", "_").replace(" ", "_")
    if key in ("water", "h2o"):
        return "water", 0
    m = re.fullmatch(r"([a-z_]+?)_?(\d+(?:\.\d+)?)_?%?", key)
    if m and m.group(1).rstrip("_") in _ALIASES:
        pct = float(m.group(2))
        if pct != int(pct) or not 1 <= pct <= _MAX_GLYCOL_PERCENT:
            raise InputError(
                f"`coolant`: glycol content must be a whole mass percent from 1 to "
                f"{_MAX_GLYCOL_PERCENT} (range of the property data); expected one of "
                f"{COOLANT_NAMES}, got {name!r}"
            )
        return _ALIASES[m.group(1).rstrip("_")], int(pct)
    raise InputError(f"`coolant`: expected one of {COOLANT_NAMES}, got {name!r}")


@lru_cache(maxsize=64)
def _build(kind: str, percent: int) -> Coolant:
    from CoolProp.CoolProp import PropsSI

    if kind == "water":
        # Triple point to boiling at 1 atm.
        lo = PropsSI("Tmin", "T", 300.0, "P", PRESSURE_PA, "Water")
        hi = PropsSI("T", "P", PRESSURE_PA, "Q", 0.0, "Water")
        return Coolant("water", "Water", 0.0, lo - _KELVIN + _EDGE_K, hi - _KELVIN - _EDGE_K, "water")
    fluid = f"INCOMP::{_CP_NAMES[kind]}-{percent}%"
    t_min = PropsSI("Tmin", "T", 300.0, "P", PRESSURE_PA, fluid)
    t_max = PropsSI("Tmax", "T", 300.0, "P", PRESSURE_PA, fluid)
    t_freeze = PropsSI("T_freeze", "T", 300.0, "P", PRESSURE_PA, fluid)
    lo = max(t_min, t_freeze) - _KELVIN + _EDGE_K
    hi = t_max - _KELVIN - _EDGE_K
    return Coolant(
        f"{kind}{percent}", fluid, percent / 100.0, lo, hi, f"{percent} % (mass) {_LONG[kind]} in water"
    )


def get_coolant(name) -> Coolant:
    """The :class:`Coolant` for a user name such as ``"water"``, ``"eg50"`` or ``"pg30"``.

    Raises
    ------
    InputError
        Unknown name (the message lists the valid forms) or glycol content
        outside 1-60 % by mass.
    """
    if isinstance(name, Coolant):
        return name
    return _build(*_parse(name))
