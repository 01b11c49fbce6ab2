"""Open-circuit potentials and entropic coefficients of the electrode materials.

Each entry of :data:`OCP` is an :class:`OpenCircuitPotential` with
``potential(sto)`` (V vs Li/Li+ at 298.15 K) and ``entropic(sto)`` (dU/dT in
V/K), both numpy-vectorised, smooth and finite on the open interval (0, 1).
The stoichiometry is clipped internally to [1e-6, 1 - 1e-6] so that Newton
iterations that step slightly outside the interval stay finite.

The functions are cheap closed forms (exponentials and tanh only); they are
called inside Newton loops.

All three potentials are curves of the project's own, INVENTED FOR THE DEMO cells (the
graphite and NMC ones fitted to invented control points, :data:`GRAPHITE_POINTS` and
:data:`NMC_POINTS`); they describe no measured material. Real curves belong in a cell file
as measured tables.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["OpenCircuitPotential", "OCP", "STO_CLIP", "GRAPHITE_POINTS", "NMC_POINTS"]

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
    # optional: sto (a float, clipped) -> (U, dU/dT) as floats, the same curves evaluated with
    # the math module (the rods call them once per step: numpy costs far more on one number)
    _scalar: Callable = None

    def potential(self, sto):
        """Open-circuit potential in V vs Li/Li+ at 298.15 K, vectorised over ``sto``."""
        return self._potential(_clip(sto))

    def entropic(self, sto):
        """Entropic coefficient dU/dT in V/K, vectorised over ``sto``."""
        return self._entropic(_clip(sto))

    def at(self, sto: float) -> tuple[float, float]:
        """``(potential V, dU/dT V/K)`` at one stoichiometry, as Python floats (clipped as
        :meth:`potential` clips)."""
        sto = float(sto)
        x = STO_CLIP if sto < STO_CLIP else 1.0 - STO_CLIP if sto > 1.0 - STO_CLIP else sto
        if self._scalar is not None:
            return self._scalar(x)
        return float(self._potential(x)), float(self._entropic(x))

    def __call__(self, sto, temperature_K=298.15):
        """Potential at ``temperature_K`` by the linear entropic correction U + dU/dT (T - 298.15)."""
        return self.potential(sto) + self.entropic(sto) * (np.asarray(temperature_K) - 298.15)

    def __repr__(self) -> str:
        return f"<OpenCircuitPotential {self.name!r}: {self.description}>"


# --- graphite -----------------------------------------------------------------------------
# Potential: INVENTED FOR THE DEMO. The project's own curve of the usual graphite shape (a
# steep rise as the electrode empties, then the staging plateaus near 0.2, 0.12 and 0.09 V vs
# Li/Li+), drawn as the control points below and fitted by a sum of monotone terms (falling
# exponentials and falling tanh steps), every amplitude positive so the curve falls
# everywhere. Coefficients: scipy.optimize.least_squares on GRAPHITE_POINTS, rounded to four
# significant figures; within 5 mV of every point (tests/test_materials.py checks both).
GRAPHITE_POINTS = np.array([
    # stoichiometry, V vs Li/Li+ -- invented control points, describe no measured material
    (0.002, 1.20), (0.01, 0.85), (0.02, 0.63), (0.03, 0.49), (0.045, 0.37), (0.07, 0.27),
    (0.10, 0.222), (0.15, 0.195), (0.20, 0.178), (0.25, 0.145), (0.30, 0.127), (0.40, 0.119),
    (0.48, 0.112), (0.55, 0.094), (0.62, 0.089), (0.70, 0.087), (0.80, 0.085), (0.90, 0.082),
    (0.96, 0.075), (0.99, 0.060)])


def _fall(x, centre, width, m=np):
    """A smooth step from 1 to 0 across ``centre`` (falling in x)."""
    return 0.5 * (1.0 - m.tanh((x - centre) / width))


# Each curve takes ``m``, the module whose exp and tanh it uses: numpy (arrays) by default,
# :mod:`math` for the one-number evaluations of OpenCircuitPotential.at.
def _graphite_u(x, m=np):
    return (
        0.1031
        + 0.2884 * m.exp(-x / 0.006068)
        + 0.8506 * m.exp(-x / 0.02799)
        + 0.07242 * _fall(x, 0.2281, 0.05698, m)
        + 0.02508 * _fall(x, 0.5095, 0.04417, m)
        - 0.02288 * x
        - 0.03057 * m.exp((x - 1.0) / 0.02494)
    )


# Entropic coefficient: shape and magnitude from memory of the graphite measurements in
# Reynier, Yazami & Fultz, J. Electrochem. Soc. 151 (2004) A422 (positive, a few tenths of
# mV/K, at low lithiation; negative, about -0.1 mV/K, through the stage-2 region; near zero
# when full). Coefficients invented for the demo.
def _graphite_dudt(x, m=np):
    return (
        3.0e-4 * m.exp(-x / 0.07)
        - 1.0e-4 * 0.5 * (m.tanh((x - 0.17) / 0.04) - m.tanh((x - 0.55) / 0.05))
        - 2.0e-5 * 0.5 * (1.0 + m.tanh((x - 0.7) / 0.05))
    )


# --- NMC (layered Li(Ni,Mn,Co)O2) ---------------------------------------------------------
# Potential: INVENTED FOR THE DEMO. The project's own curve of the usual layered-oxide shape
# (sloping from about 4.4 V when delithiated to about 3.6 V, then falling steeply as the
# lattice fills), drawn as the control points below and fitted by a falling line and two
# exponentials (all terms falling). Coefficients: scipy.optimize.least_squares on NMC_POINTS,
# rounded to four significant figures; within 5 mV of every point.
NMC_POINTS = np.array([
    # stoichiometry, V vs Li/Li+ -- invented control points, describe no measured material
    (0.15, 4.52), (0.20, 4.40), (0.25, 4.29), (0.30, 4.20), (0.35, 4.12), (0.40, 4.05),
    (0.45, 3.98), (0.50, 3.92), (0.55, 3.87), (0.60, 3.82), (0.65, 3.775), (0.70, 3.735),
    (0.75, 3.695), (0.80, 3.655), (0.85, 3.61), (0.90, 3.54), (0.93, 3.47), (0.96, 3.33),
    (0.98, 3.15)])


def _nmc_u(x, m=np):
    return (
        4.054
        - 0.5576 * x
        - 0.6645 * m.exp((x - 1.0) / 0.03591)
        + 0.9655 * m.exp(-x / 0.2666)
    )


# Entropic coefficient: magnitude (within about +-0.1 mV/K, going negative as the
# electrode fills) from memory of the layered-oxide measurements in Viswanathan, Choi, Wang,
# Xiao, Liu & Zhang, J. Power Sources 195 (2010) 3720. Coefficients invented for the demo.
def _nmc_dudt(x, m=np):
    return 6.0e-5 - 1.4e-4 * x + 5.0e-5 * m.exp(-((x - 0.45) / 0.12) ** 2)


# --- LFP (LiFePO4) ------------------------------------------------------------------------
# Potential: shape from memory of published LiFePO4 equilibrium curves (a flat two-phase
# plateau near 3.43 V vs Li/Li+, a steep rise as the electrode empties and a steep fall as it
# fills), e.g. Safari & Delacourt, J. Electrochem. Soc. 158 (2011) A562. Invented
# coefficients, for the demo.
def _lfp_u(x, m=np):
    return (
        3.428
        - 0.025 * (x - 0.5)
        + 0.30 * m.exp(-x / 0.025)
        + 0.04 * m.exp(-x / 0.12)
        - 0.60 * m.exp(-(1.0 - x) / 0.018)
        - 0.05 * m.exp(-(1.0 - x) / 0.08)
    )


# Entropic coefficient: small on the plateau (a few tens of uV/K), larger at the ends;
# magnitude from memory of Forgez, Do, Friedrich, Morcrette & Delacourt, J. Power Sources
# 195 (2010) 2961. Coefficients invented for the demo.
def _lfp_dudt(x, m=np):
    return -3.0e-5 + 1.5e-4 * m.exp(-x / 0.05) - 1.5e-4 * m.exp(-(1.0 - x) / 0.05)


def _scalar(potential, entropic):
    """The one-number form of a curve pair (math instead of numpy)."""
    return lambda x: (potential(x, math), entropic(x, math))


class _MaterialCurves(dict):
    """Material key -> curve. A curve object built from a cell file's measured tables (see
    :mod:`explorer.cell.curves`) stands for itself, so ``OCP[electrode.ocp]`` works for both
    kinds of electrode (a key or a measured curve) wherever the curve is looked up."""

    def __contains__(self, key):
        return isinstance(key, OpenCircuitPotential) or super().__contains__(key)

    def __getitem__(self, key):
        if isinstance(key, OpenCircuitPotential):
            return key
        return super().__getitem__(key)

    def get(self, key, default=None):
        return self[key] if key in self else default


OCP: dict[str, OpenCircuitPotential] = _MaterialCurves({
    "graphite": OpenCircuitPotential(
        "graphite",
        "graphite negative electrode",
        "potential: invented for the demo (the project's own fit to invented control points "
        "of the usual staging shape); dU/dT: shape from memory of Reynier, Yazami & Fultz, "
        "J. Electrochem. Soc. 151 (2004) A422, invented coefficients, for the demo",
        _graphite_u,
        _graphite_dudt,
        _scalar(_graphite_u, _graphite_dudt),
    ),
    "nmc": OpenCircuitPotential(
        "nmc",
        "layered nickel-manganese-cobalt oxide positive electrode",
        "potential: invented for the demo (the project's own fit to invented control points "
        "of the usual sloping shape); dU/dT: magnitude from memory of Viswanathan et al., "
        "J. Power Sources 195 (2010) 3720, invented coefficients, for the demo",
        _nmc_u,
        _nmc_dudt,
        _scalar(_nmc_u, _nmc_dudt),
    ),
    "lfp": OpenCircuitPotential(
        "lfp",
        "lithium iron phosphate positive electrode",
        "potential: shape from memory of Safari & Delacourt, J. Electrochem. Soc. 158 (2011) "
        "A562, invented coefficients, for the demo; dU/dT: magnitude from memory of Forgez "
        "et al., J. Power Sources 195 (2010) 2961, invented coefficients, for the demo",
        _lfp_u,
        _lfp_dudt,
        _scalar(_lfp_u, _lfp_dudt),
    ),
})
