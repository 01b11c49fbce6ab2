"""Single particle model with electrolyte (SPMe), asymptotically derived form.

Follows the structure of the asymptotic reduction of the DFN model in
Marquis, Sulzer, Timms, Please & Chapman, "An asymptotic derivation of a
single particle model with electrolyte", J. Electrochem. Soc. 166 (2019)
A3693: the particles see the electrode-averaged reaction (as in the SPM),
and the electrolyte enters through correction terms:

1. electrolyte concentration: ``eps dc/dt = d/dx(eps^b D_e dc/dx) + (1 - t+) a j / F``
   across negative | separator | positive with the uniform reaction
   ``a j = +-I / (A L)`` in each electrode. ``D_e(c)`` is taken at the
   start-of-step concentration, so each step stays linear (one tridiagonal
   solve) while the concentration dependence is kept as in the DFN; with the
   leading-order constant ``D_e(c0)`` instead, cold and transport-limited
   discharges deplete the salt far too early;
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

import numpy as np
from scipy.linalg.lapack import dgtsv

from explorer.rod.base import RodStepError
from explorer.rod.kinetics import exchange_current, overpotential
from explorer.rod.mesh import ThroughMesh
from explorer.rod.params import FARADAY
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
        super().__init__(params, mesh)
        self.x_mesh = xm = ThroughMesh(params, self.mesh)
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
        self._shape_per_A = xm.reaction_shape / A  # ionic current at the faces per ampere
        self._solid_drop_per_A = (n.thickness_m / (3.0 * n.solid_conductivity_eff_S_m)
                                  + p.thickness_m / (3.0 * p.solid_conductivity_eff_S_m)) / A

    def _extra_size(self) -> int:
        return ThroughMesh(self.params, self.mesh).nx

    def _fill_extra_initial(self, x):
        x[self._ce_slice] = self.params.electrolyte.initial_concentration_mol_m3

    def _activation_energies(self) -> list[float]:
        el = self.params.electrolyte
        return super()._activation_energies() + [el.conductivity_activation_J_mol,
                                                 el.diffusivity_activation_J_mol]

    def _linear_step(self, op, x, dt):
        # particles: the cached modal propagators; salt: one tridiagonal solve with the
        # diffusivity at the start-of-step concentration (two right-hand sides)
        m = 2 * self.nr
        xm = self.x_mesh
        c_old = x[self._ce_slice]
        d_eff = self.params.electrolyte.diffusivity(c_old) * op["diffusion_factor"]
        g = xm.face_harmonic(d_eff)
        diag = self._storage / dt
        rhs = np.column_stack([diag * c_old, self._source_per_A])
        diag = diag.copy()
        diag[:-1] += g
        diag[1:] += g
        off = -g
        _, _, _, sol, info = dgtsv(off, diag, off.copy(), rhs, 1, 1, 1, 1)
        if info != 0:
            raise RodStepError(f"spme: the salt-diffusion system is singular (LAPACK info {info})")
        base = np.empty(self.size - 1)
        q = np.empty(self.size - 1)
        base[:m] = op["P"] @ x[:m]
        q[:m] = op["q"]
        base[m:] = sol[:, 0]
        q[m:] = sol[:, 1]
        return base, q

    def _constants(self, T, f):
        const = super()._constants(T, f)
        const["kappa_factor"] = f[4] * self.x_mesh.transport
        const["diffusion_factor"] = f[5] * self.x_mesh.transport
        const["nu"] = self.params.electrolyte.diffusion_potential_V(T)
        return const

    def _electrolyte_terms(self, op, lin, I, cs):
        sl = self._ce_slice
        ce = lin[0][sl] + I * lin[1][sl]
        if ce.min() <= 0.0:
            return None
        xm, T = self.x_mesh, op["T"]
        etas = []
        for k, (e, cells) in enumerate(zip(self._electrodes, (xm.neg, xm.pos))):
            j0 = exchange_current(op["rate"][k], ce[cells], cs[k], e.max_concentration_mol_m3,
                                  e.charge_transfer_coefficient)
            eta = overpotential(I * self._j_per_A[k], j0, e.charge_transfer_coefficient, T)
            etas.append(float(eta.sum()) / eta.size)  # equal cells within an electrode
        kappa = self.params.electrolyte.conductivity(ce) * op["kappa_factor"]
        i_face = I * self._shape_per_A
        dphi = op["nu"] * np.diff(np.log(ce)) - i_face / xm.face_harmonic(kappa)
        # <phi>_p - <phi>_n = sum_f shape_f dphi_f (summation by parts on the mesh)
        dphi_e = float(xm.reaction_shape @ dphi)
        solid_drop = I * self._solid_drop_per_A
        ohmic_e = -self.params.area_m2 * float(i_face @ dphi)
        return etas[0], etas[1], dphi_e, solid_drop, ohmic_e, I * solid_drop

    def electrolyte_concentration(self, state) -> np.ndarray:
        """Electrolyte concentration at the cell centres (mol/m^3)."""
        return np.asarray(state, dtype=float)[self._ce_slice].copy()

    def electrolyte_lithium_mol(self, state) -> float:
        """Salt in the electrolyte of the whole cell, mol."""
        c = np.asarray(state, dtype=float)[self._ce_slice]
        return float(self._storage @ c * self.params.area_m2)
