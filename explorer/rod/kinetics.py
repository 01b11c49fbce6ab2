"""Butler-Volmer kinetics of an insertion electrode.

Interfacial current density ``j`` (A per m^2 of particle surface) is positive
for oxidation (lithium leaving the solid):

    j = j0 [exp(aa f eta) - exp(-ac f eta)],   f = F / (R T),
    j0 = F k c_e^aa (c_max - c_s)^aa c_s^ac,    aa = alpha, ac = 1 - alpha,

with ``eta = phi_s - phi_e - U(c_s / c_max)`` (Newman & Thomas-Alyea,
*Electrochemical Systems*, 3rd ed. 2004, ch. 8, insertion-electrode form; for
alpha = 0.5 it is the familiar square-root exchange current).
"""

from __future__ import annotations

import numpy as np

from explorer.materials import FARADAY, GAS_CONSTANT

__all__ = ["exchange_current", "overpotential", "butler_volmer"]


def exchange_current(rate, c_e, c_s, c_max, alpha):
    """Exchange current density j0 in A/m^2 (vectorised)."""
    if alpha == 0.5:
        return FARADAY * rate * np.sqrt(c_e * (c_max - c_s) * c_s)
    return FARADAY * rate * (c_e * (c_max - c_s)) ** alpha * c_s ** (1.0 - alpha)


def overpotential(j, j0, alpha, temperature_K):
    """Reaction overpotential that drives ``j`` against ``j0`` (inverse Butler-Volmer)."""
    f = FARADAY / (GAS_CONSTANT * temperature_K)
    eta = 2.0 / f * np.arcsinh(j / (2.0 * j0))
    if alpha == 0.5:
        return eta
    ac = 1.0 - alpha
    for _ in range(50):  # Newton from the symmetric estimate; monotone, converges fast
        ea, ec = np.exp(alpha * f * eta), np.exp(-ac * f * eta)
        r = j0 * (ea - ec) - j
        d = j0 * f * (alpha * ea + ac * ec)
        step = r / d
        eta = eta - step
        if np.all(np.abs(step) < 1e-13):
            break
    return eta


def butler_volmer(eta, alpha, temperature_K):
    """``(g, dg/deta)`` with j = j0 g(eta)."""
    f = FARADAY / (GAS_CONSTANT * temperature_K)
    ea = np.exp(alpha * f * eta)
    ec = np.exp(-(1.0 - alpha) * f * eta)
    return ea - ec, f * (alpha * ea + (1.0 - alpha) * ec)
