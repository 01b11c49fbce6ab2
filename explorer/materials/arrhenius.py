"""Arrhenius temperature factor shared by all temperature-dependent properties."""

from __future__ import annotations

import numpy as np

__all__ = ["arrhenius", "GAS_CONSTANT", "FARADAY"]

GAS_CONSTANT = 8.314462618  # J/(mol K), CODATA 2018 exact value
FARADAY = 96485.33212  # C/mol, CODATA 2018 exact value


def arrhenius(activation_J_mol, temperature_K, reference_K=298.15):
    """Factor ``exp(Ea / R * (1/T_ref - 1/T))`` that scales a property from ``reference_K``.

    Vectorised over all arguments; equals 1 at ``temperature_K == reference_K``.

    Examples
    --------
    >>> float(arrhenius(30e3, 298.15))
    1.0
    """
    T = np.asarray(temperature_K, dtype=float)
    return np.exp(np.asarray(activation_J_mol, dtype=float) / GAS_CONSTANT
                  * (1.0 / reference_K - 1.0 / T))
