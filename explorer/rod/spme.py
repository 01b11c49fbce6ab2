"""Single particle model with electrolyte (SPMe), asymptotically derived form.

Follows the structure of the asymptotic reduction of the DFN model in
Marquis, Sulzer, Timms, Please & Chapman, "An asymptotic derivation of a
single particle model with electrolyte", J. Electrochem. Soc. 166 (2019)
A3693: the particles see the electrode-averaged reaction (as in the SPM),
and the electrolyte enters through correction terms:

1. electrolyte concentration: ``eps dc/dt = d/dx(eps^b D_e dc/dx) + (1 - t+) a j / F``
   across negative | separator | positive with the uniform reaction
   ``a j = +-I / (A L)`` in each electrode; linear, with ``D_e`` at the
   initial concentration and the step's temperature, as at leading order in
   the asymptotic expansion (a version with ``D_e`` at the start-of-step
   concentration was tried: it changed the 25 degC error against the DFN by
   less than 0.05 mV, did not prevent salt depletion in the cold cases where
   the SPMe is out of its depth anyway, and cost a solve per step);
2. electrolyte potential from the known ionic current ``i_e(x)`` (linear in
   the electrodes, ``I/A`` in the separator)::

       dphi_e/dx = -i_e / kappa_eff(c_e) + 2 R T (1 - t+) TDF / F  d ln c_e/dx,

   integrated on the finite-volume mesh with the local conductivity, and
   averaged over each electrode: ``dphi_e = <phi_e>_p - <phi_e>_n`` holds both
   the electrolyte Ohmic loss and the concentration overpotential;
3. reaction overpotentials averaged over each electrode, each node using its
   local ``c_e`` in the exchange current and the particle's surface value;
4. solid-phase Ohmic loss of the linear solid current, ``I/A (L_n/(3 sigma_n) + L_p/(3 sigma_p))``.

    V_rod = U_p - U_n + <eta>_p - <eta>_n + dphi_e - solid drop.

State layout: ``[c_n shells, c_p shells, c_e cells, I]``.
"""

from __future__ import annotations

import math

import numpy as np

from explorer.rod.kinetics import exchange_current, overpotential
from explorer.rod.mesh import ThroughMesh
from explorer.rod.params import FARADAY, GAS_CONSTANT
from explorer.rod.particle import ModalEuler, tridiagonal_stiffness
from explorer.rod.spm import SPM

__all__ = ["SPMe"]


class SPMe(SPM):
    """SPM with electrolyte; see the module docstring.

    ``mesh`` sets the particle ``shells`` and the cells across ``negative``,
    ``separator`` and ``positive``.
    """

    name = "spme"
    has_electrolyte = True

    def __init__(self, params, mesh=None):
        super().__init__(params, mesh)  # makes self.x_mesh (_extra_size)
        xm = self.x_mesh
        A = params.area_m2
        n, p = params.negative, params.positive
        el = params.electrolyte
        self._ce_slice = slice(2 * self.nr, 2 * self.nr + xm.nx)
        # electrolyte source per ampere: (1 - t+) a j dx / F with a j = +-I / (A L)
        src = np.zeros(xm.nx)
        src[xm.neg] = xm.dx[xm.neg] / (A * n.thickness_m)
        src[xm.pos] = -xm.dx[xm.pos] / (A * p.thickness_m)
        self._source_per_A = (1.0 - el.transference_number) * src / FARADAY
        self._storage = xm.porosity * xm.dx
        # salt-diffusion stencil per unit bulk diffusivity: D_e(c0) at the step's temperature
        # scales it, so new steps and temperatures cost one small matrix product
        self._de0 = float(el.diffusivity(el.initial_concentration_mol_m3))  # at 298.15 K
        self._e_modal = ModalEuler.of(tridiagonal_stiffness(xm.face_harmonic(xm.transport)),
                                      self._storage)
        self._shape_per_A = xm.reaction_shape / A  # ionic current at the faces per ampere
        self._solid_drop_per_A = (n.thickness_m / (3.0 * n.solid_conductivity_eff_S_m)
                                  + p.thickness_m / (3.0 * p.solid_conductivity_eff_S_m)) / A
        self._hl_i = xm.half_left * self._shape_per_A  # i_f / K_f = I (hl/kL + hr/kR) shape/A
        self._hr_i = xm.half_right * self._shape_per_A
        # per electrode cell (negative cells, then positive) for the vectorised kinetics
        nn, np_ = xm.nn, xm.np_
        self._ecells = np.concatenate([np.arange(nn), np.arange(xm.nx - np_, xm.nx)])
        self._pick_n = np.concatenate([np.ones(nn), np.zeros(np_)])
        self._pick_p = 1.0 - self._pick_n
        self._faraday_n, self._faraday_p = FARADAY * self._pick_n, FARADAY * self._pick_p
        self._cmax_cells = (self._pick_n * n.max_concentration_mol_m3
                            + self._pick_p * p.max_concentration_mol_m3)
        self._half_j_cells = 0.5 * (self._pick_n * self._j_per_A[0] + self._pick_p * self._j_per_A[1])
        self._average = np.vstack([self._pick_n / nn, self._pick_p / np_])
        self._symmetric = (n.charge_transfer_coefficient == 0.5
                           and p.charge_transfer_coefficient == 0.5)
        # the per-step sums over the cells (see _electrolyte_terms): sum_f shape_f (ln c_R -
        # ln c_L) and sum_f shape_f (hl_f / (eps^b kappa)_L + hr_f / (eps^b kappa)_R) per ampere
        shape = xm.reaction_shape
        self._ln_weights = np.zeros(xm.nx)
        self._ln_weights[1:] += shape
        self._ln_weights[:-1] -= shape
        self._resistive_weights = np.zeros(xm.nx)
        self._resistive_weights[:-1] += shape * self._hl_i / xm.transport[:-1]
        self._resistive_weights[1:] += shape * self._hr_i / xm.transport[1:]
        self._conductivity = el.conductivity
        self._nu_per_K = el.diffusion_potential_V(1.0)  # the coefficient is R T (...) / F
        # the electrode averages over all cells (zero weight in the separator)
        self._average_cells = np.zeros((2, xm.nx))
        self._average_cells[0, xm.neg] = 1.0 / nn
        self._average_cells[1, xm.pos] = 1.0 / np_
        self._half_j = (0.5 * self._j_per_A[0], 0.5 * self._j_per_A[1])
        self._cell_counts = (xm.nx, xm.nn, xm.pos.start)

    def _extra_size(self) -> int:
        self.x_mesh = ThroughMesh(self.params, self.mesh)
        return self.x_mesh.nx

    def _fill_extra_initial(self, x):
        x[self._ce_slice] = self.params.electrolyte.initial_concentration_mol_m3

    def _activation_energies(self) -> list[float]:
        el = self.params.electrolyte
        return super()._activation_energies() + [el.conductivity_activation_J_mol,
                                                 el.diffusivity_activation_J_mol]

    def _modal_blocks(self):
        return super()._modal_blocks() + [(self._ce_slice, self._e_modal, self._source_per_A)]

    def _rates(self, f):
        return super()._rates(f) + [self._de0 * f[5]]

    def _fill_constants(self, at):
        super()._fill_constants(at)
        at.kappa_f = at.f[4]
        at.nu = self._nu_per_K * at.T

    def _reaction_overpotentials(self, at, ce, I, cs_n, cs_p):
        """Electrode-averaged overpotentials (eta_n, eta_p) with the local salt in j0."""
        if self._symmetric:
            # alpha = 1/2 in both: j0 = F k sqrt(c_e (c_max - c_s) c_s) factors into the
            # electrode's surface part (a number) and sqrt(c_e) per cell, so the closed-form
            # inverse runs over all cells at once (zero in the separator)
            nx, nn, pos = self._cell_counts
            arg = np.empty(nx)
            cmax_n, cmax_p = self._cmax_f
            arg[:nn] = I * self._half_j[0] / (at.gF[0] * math.sqrt((cmax_n - cs_n) * cs_n))
            arg[nn:pos] = 0.0
            arg[pos:] = I * self._half_j[1] / (at.gF[1] * math.sqrt((cmax_p - cs_p) * cs_p))
            eta_n, eta_p = self._average_cells.dot(np.arcsinh(arg / np.sqrt(ce))).tolist()
            return at.two_over_f * eta_n, at.two_over_f * eta_p
        xm, T = self.x_mesh, at.T
        etas = []
        for k, (e, cells, cs) in enumerate(zip(self._electrodes, (xm.neg, xm.pos), (cs_n, cs_p))):
            j0 = exchange_current(at.rate[k], ce[cells], cs, e.max_concentration_mol_m3,
                                  e.charge_transfer_coefficient)
            eta = overpotential(I * self._j_per_A[k], j0, e.charge_transfer_coefficient, T)
            etas.append(float(eta.sum()) / eta.size)  # equal cells within an electrode
        return etas[0], etas[1]

    def _electrolyte_terms(self, at, I, cs_n, cs_p, ce):
        if ce.min() <= 0.0:
            return None
        eta_n, eta_p = self._reaction_overpotentials(at, ce, I, cs_n, cs_p)
        # <phi>_p - <phi>_n = sum_f shape_f dphi_f (summation by parts on the mesh), with
        # dphi_f = phi_R - phi_L across face f: the diffusion potential nu (ln c_R - ln c_L)
        # less i_f / K_f (the face conductance K_f of its two half cells in series); both
        # sums are taken per cell (weights made once, :meth:`__init__`), kappa_eff = f(T)
        # eps^b kappa(c)
        diffusion = float(self._ln_weights.dot(np.log(ce)))
        ohmic = float(self._resistive_weights.dot(np.reciprocal(self._conductivity(ce))))
        dphi_e = at.nu * diffusion - I * ohmic / at.kappa_f
        solid_drop = I * self._solid_drop_per_A
        # Joule heat A sum_f i_f (phi_L - phi_R) = -I dphi_e by the same summation by parts
        return eta_n, eta_p, dphi_e, solid_drop, -I * dphi_e, I * solid_drop

    def _electrolyte_batch(self, T, f, base, q, I, cs):
        """:meth:`_electrolyte_terms` for a group of rods (arrays over the rods)."""
        sl = self._ce_slice
        ce = base[:, sl] + I[:, None] * q[:, sl]
        if ce.min() <= 0.0:
            return None
        n, p = self._electrodes
        rate_n, rate_p = n.rate_constant * f[:, 2], p.rate_constant * f[:, 3]
        two_over_f = 2.0 * GAS_CONSTANT * T / FARADAY
        if self._symmetric:
            cse = self._pick_n * cs[:, :1] + self._pick_p * cs[:, 1:]
            jf = self._faraday_n * rate_n[:, None] + self._faraday_p * rate_p[:, None]
            j0 = jf * np.sqrt(ce[:, self._ecells] * (self._cmax_cells - cse) * cse)
            eta = two_over_f[:, None] * np.arcsinh(I[:, None] * self._half_j_cells / j0)
            eta_n, eta_p = (eta @ self._average.T).T
        else:
            xm = self.x_mesh
            etas = []
            for k, (e, cells, rate) in enumerate(zip(self._electrodes, (xm.neg, xm.pos),
                                                     (rate_n, rate_p), strict=True)):
                j0 = exchange_current(rate[:, None], ce[:, cells], cs[:, k:k + 1],
                                      e.max_concentration_mol_m3, e.charge_transfer_coefficient)
                eta = overpotential((I * self._j_per_A[k])[:, None], j0,
                                    e.charge_transfer_coefficient, T[:, None])
                etas.append(eta.mean(axis=1))
            eta_n, eta_p = etas
        kappa = self.params.electrolyte.conductivity(ce) * (f[:, 4:5] * self.x_mesh.transport)
        lc = np.log(ce)
        nu = self.params.electrolyte.diffusion_potential_V(T)
        dphi = (nu[:, None] * (lc[:, 1:] - lc[:, :-1])
                - I[:, None] * (self._hl_i / kappa[:, :-1] + self._hr_i / kappa[:, 1:]))
        dphi_e = dphi @ self.x_mesh.reaction_shape
        solid_drop = I * self._solid_drop_per_A
        return eta_n, eta_p, dphi_e, solid_drop, -I * dphi_e, I * solid_drop

    def electrolyte_concentration(self, state) -> np.ndarray:
        """Electrolyte concentration at the cell centres (mol/m^3)."""
        return np.asarray(state, dtype=float)[self._ce_slice].copy()

    def electrolyte_lithium_mol(self, state) -> float:
        """Salt in the electrolyte of the whole cell, mol."""
        c = np.asarray(state, dtype=float)[self._ce_slice]
        return float(self._storage @ c * self.params.area_m2)
