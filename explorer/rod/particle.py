"""Spherical particle diffusion: conservative finite volumes, implicit in time.

Discretisation
--------------
The particle of radius ``R`` is cut into ``n`` shells of EQUAL RADIAL WIDTH
``dr = R / n``; the unknowns are the shells' volume-averaged concentrations.
Equal widths are chosen over equal volumes because equal-volume shells make
the centre shell ``n**(1/3)`` times wider than average, so after a pulse the
relaxing profile is resolved worst exactly where it is steepest in time, and
the strongly graded mesh makes the truncation error uneven; equal widths give
a uniform second-order flux stencil and a surface shell as thin as any other.

Shell ``i`` balances

    V_i dc_i/dt = S_{i+1/2} D (c_{i+1} - c_i)/dr - S_{i-1/2} D (c_i - c_{i-1})/dr,

with the outermost face carrying the reaction flux ``N`` (mol m^-2 s^-1,
positive out of the particle) instead of a diffusive flux, so the particle's
lithium changes by exactly ``-4 pi R^2 N dt`` per step (conservative).
Backward Euler in time (L-stable, so any step from 1e-3 s to minutes is
acceptable; the caller controls accuracy through ``dt``).

The surface concentration is extrapolated from the outer shell's average,
which is the value at the shell's volume centroid ``r_c``, with the exact
surface gradient ``dc/dr = -N / D`` given by the boundary condition:

    c_surf = c_{n-1} - N (R - r_c) / D.

Because the step is linear in the old state and in ``N`` (``D`` is held at
the step's temperature), it is precomputed as a propagator

    c_new = P c_old + q N,   c_surf_new = s . c_old + s_q N,

with ``P = (W/dt + D K / R^2)^-1 W / dt``, built from the generalised
eigen-decomposition of the stencil (:class:`ModalEuler`, once per mesh), so a
new ``dt`` or temperature costs one small matrix product; ``P`` and ``q`` are
also cached per ``(D, R, dt)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.linalg import eigh

# step operators kept per (diffusivity, radius, dt): enough for a grid of rods at different
# temperatures (the distributed layout) evaluated a few times per step
CACHE_SIZE = 64

__all__ = ["SphereShells", "Propagator", "ModalEuler", "tridiagonal_stiffness"]


def tridiagonal_stiffness(g):
    """Symmetric stiffness matrix of a chain of cells joined by face conductances ``g``."""
    n = len(g) + 1
    K = np.zeros((n, n))
    i = np.arange(n - 1)
    K[i, i] += g
    K[i + 1, i + 1] += g
    K[i, i + 1] = -g
    K[i + 1, i] = -g
    return K


class ModalEuler:
    """Backward Euler for ``W dc/dt = -s K c + b u`` by the generalised eigenproblem of (K, W).

    ``W`` is diagonal and positive (cell volumes), ``K`` symmetric positive
    semi-definite (the diffusion stencil), ``s`` a positive scalar (the
    diffusivity's size, which is the only thing temperature changes). With
    ``K V = W V diag(lam)`` and ``V' W V = I``, one step is

        c_new = V diag(1 / (1 + dt s lam)) V' W c_old + V diag(dt / (1 + dt s lam)) V' b u,

    so a new ``dt`` or temperature costs one small matrix product instead of a
    factorisation. The zero eigenvalue (the constant mode) passes through
    unchanged, which keeps the scheme conservative.
    """

    @classmethod
    def of(cls, K, w) -> ModalEuler:
        """The decomposition of ``(K, w)``, shared between the rods built on the same mesh
        and materials (nothing in it changes after it is made): a run builds its rod anew."""
        K, w = np.ascontiguousarray(K, dtype=float), np.ascontiguousarray(w, dtype=float)
        key = (K.shape, K.tobytes(), w.tobytes())
        hit = _MODAL.get(key)
        if hit is None:
            if len(_MODAL) >= CACHE_SIZE:
                _MODAL.clear()
            hit = _MODAL[key] = cls(K, w)
        return hit

    def __init__(self, K, w):
        lam, V = eigh(K, np.diag(w))
        self.lam = np.clip(lam, 0.0, None)  # round-off can make the zero mode slightly negative
        self.V = V
        self._VtW = V.T * w

    def operator(self, s: float, dt: float, b):
        """``(P, q)`` with ``c_new = P @ c_old + q * u`` for forcing vector ``b``."""
        d = 1.0 / (1.0 + dt * s * self.lam)
        P = (self.V * d) @ self._VtW
        q = self.V @ (dt * d * (self.V.T @ b))
        return P, q


_MODAL: dict = {}  # ModalEuler.of


@dataclass(frozen=True)
class Propagator:
    """One backward-Euler step of particle diffusion, linear in state and flux.

    ``new = old @ P.T + outer(N, q)``; ``surface = old @ s + N * s_q``.
    """

    P: np.ndarray  # (n, n)
    q: np.ndarray  # (n,) response to a unit outward flux N = 1 mol/m^2/s
    s: np.ndarray  # (n,) surface concentration from the old state
    s_q: float  # surface concentration per unit N


class SphereShells:
    """Equal-width shell mesh of a sphere, in units of the radius.

    Parameters
    ----------
    n : int
        Number of shells (at least 3).

    Attributes
    ----------
    weights : ndarray
        Shell volume fractions (sum to 1): the particle average is ``weights @ c``.
    """

    def __init__(self, n: int):
        if int(n) != n or n < 3:
            raise ValueError(f"`shells`: expected an integer of at least 3, got {n!r}")
        self.n = n = int(n)
        edges = np.linspace(0.0, 1.0, n + 1)
        self.edges = edges
        self.weights = edges[1:] ** 3 - edges[:-1] ** 3
        # conductance of the internal faces per D/R^2, in volume-fraction units:
        # (4 pi R^2 rho^2) / (4/3 pi R^3) / (R drho) = 3 rho^2 / (R^2 drho)
        drho = 1.0 / n
        self._g = 3.0 * edges[1:-1] ** 2 / drho
        outer = edges[-2]
        centroid = 0.75 * (1.0 - outer ** 4) / (1.0 - outer ** 3)
        self.surface_distance = 1.0 - centroid  # (R - r_c) / R
        self._modal = ModalEuler(tridiagonal_stiffness(self._g), self.weights)
        self._cache: dict = {}

    @staticmethod
    @lru_cache(maxsize=16)
    def of(n: int) -> SphereShells:
        """The mesh of ``n`` shells, shared (its propagators are cached per diffusivity,
        radius and step, so sharing one between rods is safe)."""
        return SphereShells(n)

    def mean(self, c):
        """Volume average over the last axis."""
        return c @ self.weights

    def propagator(self, diffusivity: float, radius: float, dt: float) -> Propagator:
        """The step operator for these values (cached; a few entries are kept)."""
        key = (diffusivity, radius, dt)
        hit = self._cache.get(key)
        if hit is not None:
            return hit
        n = self.n
        force = np.zeros(n)
        force[n - 1] = -3.0 / radius  # outer-face flux term (4 pi R^2) / (4/3 pi R^3)
        P, q = self._modal.operator(diffusivity / radius ** 2, dt, force)
        s_q = q[n - 1] - radius * self.surface_distance / diffusivity
        prop = Propagator(P, q, P[n - 1].copy(), float(s_q))
        if len(self._cache) >= CACHE_SIZE:
            self._cache.clear()
        self._cache[key] = prop
        return prop

    def step(self, c_old, flux, diffusivity, radius, dt):
        """Advance concentrations ``c_old`` (..., n) by ``dt`` under outward flux ``flux`` (...).

        Returns ``(c_new, c_surface_new)``.
        """
        pr = self.propagator(diffusivity, radius, dt)
        flux = np.asarray(flux, dtype=float)
        c_new = c_old @ pr.P.T + flux[..., None] * pr.q
        return c_new, c_old @ pr.s + flux * pr.s_q
