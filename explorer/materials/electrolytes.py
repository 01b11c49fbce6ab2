"""Electrolyte transport properties as functions of salt concentration at 298.15 K.

Temperature dependence is applied by the caller with
:func:`explorer.materials.arrhenius` and the activation energy stored in the
cell file, so every entry here is a function of concentration only.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["ElectrolyteProperty", "ELECTROLYTES", "valoen_reimers_conductivity",
           "valoen_reimers_diffusivity"]

REFERENCE_K = 298.15
# The fits were made on 0-4 mol/L; clipping keeps Newton iterates that overshoot finite and
# keeps the conductivity strictly positive (it vanishes at zero concentration).
C_MIN_MOL_M3 = 1.0
C_MAX_MOL_M3 = 4000.0

_VR = "Valøen & Reimers, J. Electrochem. Soc. 152 (2005) A882"


def valoen_reimers_conductivity(c_mol_m3, temperature_K=REFERENCE_K):
    """Ionic conductivity of LiPF6 in PC/EC/DMC, S/m (Valøen & Reimers 2005, eq. for kappa).

    Parameters
    ----------
    c_mol_m3 : array_like
        Salt concentration, mol/m^3 (clipped to [1, 4000]).
    temperature_K : array_like
        Temperature; the cell models use the 298.15 K value with an Arrhenius factor.
    """
    c = np.minimum(np.maximum(np.asarray(c_mol_m3, dtype=float), C_MIN_MOL_M3), C_MAX_MOL_M3) * 1e-3  # mol/L
    T = np.asarray(temperature_K, dtype=float)
    poly = (
        -10.5 + 0.0740 * T - 6.96e-5 * T**2
        + c * (0.668 - 0.0178 * T + 2.80e-5 * T**2)
        + c**2 * (0.494 - 8.86e-4 * T)
    )
    return 0.1 * c * poly**2  # the fit gives mS/cm; 1 mS/cm = 0.1 S/m


def valoen_reimers_diffusivity(c_mol_m3, temperature_K=REFERENCE_K):
    """Salt diffusivity of LiPF6 in PC/EC/DMC, m^2/s (Valøen & Reimers 2005, eq. for D)."""
    c = np.minimum(np.maximum(np.asarray(c_mol_m3, dtype=float), C_MIN_MOL_M3), C_MAX_MOL_M3) * 1e-3
    T = np.asarray(temperature_K, dtype=float)
    return 1e-4 * 10.0 ** (-4.43 - 54.0 / (T - 229.0 - 5.0 * c) - 0.22 * c)  # cm^2/s -> m^2/s


def _conductivity_at_reference():
    """:func:`valoen_reimers_conductivity` at 298.15 K as a quadratic in c (mol/m^3), its
    temperature terms and unit factors taken once: kappa = c (k0 + k1 c + k2 c^2)^2, the same
    polynomial (0.1 (c/1000) poly(c/1000)^2 = c (poly / 100)^2) at a fraction of the cost."""
    T = REFERENCE_K
    # 0-d arrays rather than floats: numpy takes them faster with an array (no scalar
    # promotion step), and the rods call this every step
    k0 = np.array(1e-2 * (-10.5 + 0.0740 * T - 6.96e-5 * T**2))
    k1 = np.array(1e-5 * (0.668 - 0.0178 * T + 2.80e-5 * T**2))
    k2 = np.array(1e-8 * (0.494 - 8.86e-4 * T))
    lo, hi = np.array(C_MIN_MOL_M3), np.array(C_MAX_MOL_M3)

    def kappa(c_mol_m3):
        c = np.minimum(np.maximum(c_mol_m3, lo), hi)
        poly = (k2 * c + k1) * c + k0
        return c * (poly * poly)
    return kappa


@dataclass(frozen=True)
class ElectrolyteProperty:
    """A concentration-dependent electrolyte property at 298.15 K.

    Call it with the concentration in mol/m^3 (vectorised). ``unit`` is the
    unit of the result, ``source`` the citation.
    """

    name: str
    unit: str
    source: str
    _function: Callable = None
    # optional: the same function with its temperature fixed at 298.15 K beforehand (the
    # rods call it every step)
    _at_reference: Callable = None

    def __call__(self, c_mol_m3):
        if self._at_reference is not None:
            return self._at_reference(c_mol_m3)
        return self._function(c_mol_m3, REFERENCE_K)

    def at_temperature(self, c_mol_m3, temperature_K):
        """The published fit evaluated at another temperature (for checks of the Arrhenius form)."""
        return self._function(c_mol_m3, temperature_K)

    def __repr__(self) -> str:
        return f"<ElectrolyteProperty {self.name!r} [{self.unit}] at 298.15 K>"


ELECTROLYTES: dict[str, ElectrolyteProperty] = {
    "lipf6_carbonate_conductivity": ElectrolyteProperty(
        "lipf6_carbonate_conductivity", "S/m",
        f"{_VR}, conductivity fit evaluated at 298.15 K", valoen_reimers_conductivity,
        _conductivity_at_reference()),
    "lipf6_carbonate_diffusivity": ElectrolyteProperty(
        "lipf6_carbonate_diffusivity", "m^2/s",
        f"{_VR}, diffusivity fit evaluated at 298.15 K", valoen_reimers_diffusivity),
}
