"""Open-circuit potentials and entropic coefficients of the electrode materials.

Each entry of :data:`OCP` is an :class:`OpenCircuitPotential` with
``potential(sto)`` (V vs Li/Li+ at 298.15 K) and ``entropic(sto)`` (dU/dT in
V/K), both numpy-vectorised, smooth and finite on the open interval (0, 1).
The stoichiometry is clipped internally to [1e-6, 1 - 1e-6] so that Newton
iterations that step slightly outside the interval stay finite.

The functions are cheap closed forms (exponentials and tanh only); they are
called inside Newton loops.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["OpenCircuitPotential", "OCP", "STO_CLIP"]

STO_CLIP = 1e-6


def _clip(sto):
    # minimum/maximum rather than np.clip: the same result at a fraction of the call overhead,
    # which matters inside the rods' per-step evaluations
    return np.minimum(np.maximum(np.asarray(sto, dtype=float), STO_CLIP), 1.0 - STO_CLIP)


@dataclass(frozen=True)
class OpenCircuitPotential:
    """An electrode material's equilibrium potential and its temperature coefficient.

    Attributes
    ----------
    name : str
        Key in :data:`OCP`.
    description : str
        What material the fit describes.
    source : str
        Citation of the potential fit and of the entropic curve.
    """

    name: str
    description: str
    source: str
    _potential: Callable = None
    _entropic: Callable = None

    def potential(self, sto):
        """Open-circuit potential in V vs Li/Li+ at 298.15 K, vectorised over ``sto``."""
        return self._potential(_clip(sto))

    def entropic(self, sto):
        """Entropic coefficient dU/dT in V/K, vectorised over ``sto``."""
        return self._entropic(_clip(sto))

    def __call__(self, sto, temperature_K=298.15):
        """Potential at ``temperature_K`` by the linear entropic correction U + dU/dT (T - 298.15)."""
        return self.potential(sto) + self.entropic(sto) * (np.asarray(temperature_K) - 298.15)

    def __repr__(self) -> str:
        return f"<OpenCircuitPotential {self.name!r}: {self.description}>"


# --- graphite -----------------------------------------------------------------------------
# Potential: the fit for a graphite(-SiOx) negative electrode of Chen, Planella, O'Regan,
# Gastol, Widanage & Kendrick, "Development of experimental techniques for parameterization
# of multi-scale lithium-ion battery models", J. Electrochem. Soc. 167 (2020) 080534,
# coefficients from memory of that paper.
def _graphite_u(x):
    return (
        1.9793 * np.exp(-39.3631 * x)
        + 0.2482
        - 0.0909 * np.tanh(29.8538 * (x - 0.1234))
        - 0.04478 * np.tanh(14.9159 * (x - 0.2769))
        - 0.0205 * np.tanh(30.4444 * (x - 0.6103))
    )


# Entropic coefficient: shape and magnitude from memory of the graphite measurements in
# Reynier, Yazami & Fultz, J. Electrochem. Soc. 151 (2004) A422 (positive, a few tenths of
# mV/K, at low lithiation; negative, about -0.1 mV/K, through the stage-2 region; near zero
# when full). Coefficients invented for the demo.
def _graphite_dudt(x):
    return (
        3.0e-4 * np.exp(-x / 0.07)
        - 1.0e-4 * 0.5 * (np.tanh((x - 0.17) / 0.04) - np.tanh((x - 0.55) / 0.05))
        - 2.0e-5 * 0.5 * (1.0 + np.tanh((x - 0.7) / 0.05))
    )


# --- NMC (layered Li(Ni,Mn,Co)O2) ---------------------------------------------------------
# Potential: the NMC811 fit of Chen et al., J. Electrochem. Soc. 167 (2020) 080534 (as above),
# coefficients from memory of that paper. The two large tanh terms nearly cancel by design of
# the fit; tanh saturates, so the sum stays well conditioned.
def _nmc_u(x):
    return (
        -0.8090 * x
        + 4.4875
        - 0.0428 * np.tanh(18.5138 * (x - 0.5542))
        - 17.7326 * np.tanh(15.7890 * (x - 0.3117))
        + 17.5842 * np.tanh(15.9308 * (x - 0.3120))
    )


# Entropic coefficient: magnitude (within about +-0.1 mV/K, going negative as the
# electrode fills) from memory of the layered-oxide measurements in Viswanathan, Choi, Wang,
# Xiao, Liu & Zhang, J. Power Sources 195 (2010) 3720. Coefficients invented for the demo.
def _nmc_dudt(x):
    return 6.0e-5 - 1.4e-4 * x + 5.0e-5 * np.exp(-((x - 0.45) / 0.12) ** 2)


# --- LFP (LiFePO4) ------------------------------------------------------------------------
# Potential: shape from memory of published LiFePO4 equilibrium curves (a flat two-phase
# plateau near 3.43 V vs Li/Li+, a steep rise as the electrode empties and a steep fall as it
# fills), e.g. Safari & Delacourt, J. Electrochem. Soc. 158 (2011) A562. Invented
# coefficients, for the demo.
def _lfp_u(x):
    return (
        3.428
        - 0.025 * (x - 0.5)
        + 0.30 * np.exp(-x / 0.025)
        + 0.04 * np.exp(-x / 0.12)
        - 0.60 * np.exp(-(1.0 - x) / 0.018)
        - 0.05 * np.exp(-(1.0 - x) / 0.08)
    )


# Entropic coefficient: small on the plateau (a few tens of uV/K), larger at the ends;
# magnitude from memory of Forgez, Do, Friedrich, Morcrette & Delacourt, J. Power Sources
# 195 (2010) 2961. Coefficients invented for the demo.
def _lfp_dudt(x):
    return -3.0e-5 + 1.5e-4 * np.exp(-x / 0.05) - 1.5e-4 * np.exp(-(1.0 - x) / 0.05)


OCP: dict[str, OpenCircuitPotential] = {
    "graphite": OpenCircuitPotential(
        "graphite",
        "graphite negative electrode",
        "potential: Chen et al., J. Electrochem. Soc. 167 (2020) 080534 (graphite-SiOx fit, "
        "coefficients from memory); dU/dT: shape from memory of Reynier, Yazami & Fultz, "
        "J. Electrochem. Soc. 151 (2004) A422, invented coefficients, for the demo",
        _graphite_u,
        _graphite_dudt,
    ),
    "nmc": OpenCircuitPotential(
        "nmc",
        "layered nickel-manganese-cobalt oxide positive electrode (Ni-rich)",
        "potential: Chen et al., J. Electrochem. Soc. 167 (2020) 080534 (NMC811 fit, "
        "coefficients from memory); dU/dT: magnitude from memory of Viswanathan et al., "
        "J. Power Sources 195 (2010) 3720, invented coefficients, for the demo",
        _nmc_u,
        _nmc_dudt,
    ),
    "lfp": OpenCircuitPotential(
        "lfp",
        "lithium iron phosphate positive electrode",
        "potential: shape from memory of Safari & Delacourt, J. Electrochem. Soc. 158 (2011) "
        "A562, invented coefficients, for the demo; dU/dT: magnitude from memory of Forgez "
        "et al., J. Power Sources 195 (2010) 2961, invented coefficients, for the demo",
        _lfp_u,
        _lfp_dudt,
    ),
}
