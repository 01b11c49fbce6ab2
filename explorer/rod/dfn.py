"""Doyle-Fuller-Newman (pseudo-two-dimensional, P2D) porous-electrode model.

Doyle, Fuller & Newman, J. Electrochem. Soc. 140 (1993) 1526; Fuller, Doyle &
Newman, J. Electrochem. Soc. 141 (1994) 1. Through one unit layer
(negative | separator | positive) on the cell-centred mesh of
:class:`explorer.rod.mesh.ThroughMesh`, with a spherical particle
(:mod:`explorer.rod.particle`) at every electrode cell:

* salt:     eps dc/dt = d/dx(eps^b D_e(c) dc/dx) + (1 - t+) a j / F
* ionic current:   d i_e/dx = a j,
  i_e = -eps^b kappa(c) [d phi_e/dx - 2 R T (1 - t+) TDF / F  d ln c/dx]
* electronic current:  d i_s/dx = -a j,  i_s = -sigma (1 - eps)^b d phi_s/dx,
  i_s = I/A at both collectors and 0 at the separator
* Butler-Volmer at each electrode cell with the concentration-dependent
  exchange current (:mod:`explorer.rod.kinetics`),
  eta = phi_s - phi_e - U(c_surf / c_max)
* particle diffusion driven by j / F.

Time: backward Euler for the salt and the particles, the potentials and the
reaction algebraic at the end of the step (a DAE of index one).

Solution: within a step the particles are linear in ``j`` (``D_s`` is held at
the step's temperature), so each particle's surface concentration is exactly
``c_surf = a_k + b j_k`` with ``a_k, b`` from the particle propagator. That
eliminates the particle unknowns without approximation and leaves, per cell,
``(c_e, phi_e)`` and in the electrodes ``(phi_s, j)``. The Butler-Volmer
equation enters in its inverse form ``phi_s - phi_e - U = eta(j, j0)``, a
potential balance that is close to linear in ``j`` and keeps Newton from the
overshoots of the exponential form; each update is also held a fraction
inside the physical range (surfaces in (0, c_max), salt > 0). Unknowns are interleaved
cell by cell, so the analytic Jacobian is banded; it is assembled from a
fixed sparsity pattern into LAPACK band storage (one ``bincount``) and solved
by a banded LU. For power and voltage control the cell current is one more
unknown, handled by bordering (two right-hand sides on the same factors).
The ionic-current equation of the first cell is replaced by ``phi_e = 0``
there (the potentials are defined up to a constant and one charge balance is
implied by the others).

State layout: ``[c_e (nx), c_s negative (nn * shells), c_s positive (np * shells),
phi_e (nx), phi_s (nn + np), j (nn + np), I]``; the algebraic entries are the
last step's solution, used as the Newton starting point.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import solve_banded

from explorer.rod.base import RodModel, RodStepError, StepResult
from explorer.rod.control import check_control
from explorer.rod.heat import heat_split
from explorer.rod.kinetics import butler_volmer, overpotential
from explorer.rod.mesh import RodMesh, ThroughMesh
from explorer.rod.params import FARADAY, GAS_CONSTANT, RodParameters
from explorer.rod.particle import SphereShells
from explorer.rod.spm import check_step_inputs
from explorer.validators import InputError

__all__ = ["DFN"]

_H_STO = 1e-7  # finite-difference step for dU/dsto
_H_C = 1e-6  # relative finite-difference step for the electrolyte functions


class DFN(RodModel):
    """Doyle-Fuller-Newman model; see the module docstring.

    Parameters
    ----------
    params : RodParameters
    mesh : None, RodMesh or dict, optional
        ``shells`` per particle and cells across ``negative``, ``separator``, ``positive``.
    """

    name = "dfn"
    max_newton = 25
    tolerance = 1e-8  # on the scaled Newton update

    def __init__(self, params: RodParameters, mesh=None):
        if not isinstance(params, RodParameters):
            raise InputError(f"`params`: expected RodParameters, got {type(params).__name__}")
        self.params = p = params
        self.mesh = RodMesh.coerce(mesh)
        self.shells = SphereShells(self.mesh.shells)
        self.nr = nr = self.mesh.shells
        self.xm = xm = ThroughMesh(params, self.mesh)
        nx, nn, np_ = xm.nx, xm.nn, xm.np_
        self.ne = ne = nn + np_
        self.enode = np.concatenate([np.arange(nn), np.arange(nn + xm.ns, nx)])
        self._electrodes = (p.negative, p.positive)
        self._eslices = (slice(0, nn), slice(nn, ne))
        A = p.area_m2
        el = p.electrolyte

        def per_e(attr):
            return np.concatenate([np.full(nn, getattr(p.negative, attr)),
                                   np.full(np_, getattr(p.positive, attr))])

        self._cmax = per_e("max_concentration_mol_m3")
        self._a = np.concatenate([np.full(nn, p.negative.surface_area_m2_m3),
                                  np.full(np_, p.positive.surface_area_m2_m3)])
        self._adx = self._a * xm.dx[self.enode]
        self._src = (1.0 - el.transference_number) * self._adx / FARADAY
        self._storage = xm.porosity * xm.dx
        self._solid_m3 = np.concatenate([np.full(nn, p.negative.active_fraction),
                                         np.full(np_, p.positive.active_fraction)]) \
            * xm.dx[self.enode] * A
        # solid conductances between neighbouring electrode cells (within one electrode)
        sig = [e.solid_conductivity_eff_S_m for e in self._electrodes]
        dxn, dxp = xm.dx[0], xm.dx[-1]
        self._sL = np.concatenate([np.arange(nn - 1), nn + np.arange(np_ - 1)])
        self._sR = self._sL + 1
        self._S = np.concatenate([np.full(nn - 1, sig[0] / dxn), np.full(np_ - 1, sig[1] / dxp)])
        # collector half-cell resistances (per unit area) in the terminal voltage
        self._r_edge = (0.5 * dxn / sig[0] + 0.5 * dxp / sig[1]) / A
        self.current_1C_A = p.capacity_Ah
        self._j_uniform_per_A = np.concatenate([
            np.full(nn, 1.0 / (A * p.negative.surface_area_m2_m3 * p.negative.thickness_m)),
            np.full(np_, -1.0 / (A * p.positive.surface_area_m2_m3 * p.positive.thickness_m))])
        self._j_scale = p.capacity_Ah / (A * min(e.surface_area_m2_m3 * e.thickness_m
                                                 for e in self._electrodes))
        # state layout
        self._o_cs = nx
        self._o_phie = nx + ne * nr
        self._o_phis = self._o_phie + nx
        self._o_j = self._o_phis + ne
        self.size = self._o_j + ne + 1
        self._build_pattern()

    # ---- sparsity pattern ----------------------------------------------------------------
    def _build_pattern(self):
        xm = self.xm
        nx = xm.nx
        is_e = np.zeros(nx, bool)
        is_e[self.enode] = True
        nvar = np.where(is_e, 4, 2)
        base = np.concatenate([[0], np.cumsum(nvar)[:-1]])
        self.n_unknowns = n = int(nvar.sum())
        ic, ip = base, base + 1
        is_ = base[self.enode] + 2
        ij = base[self.enode] + 3
        self._ic, self._ip, self._is, self._ij = ic, ip, is_, ij
        L = np.arange(nx - 1)
        R = L + 1
        sL, sR = self._sL, self._sR
        en = self.enode
        blocks = [
            (ic, ic),
            (ic[L], ic[L]), (ic[L], ic[R]), (ic[R], ic[L]), (ic[R], ic[R]),
            (ic[en], ij),
            (ip[L], ip[L]), (ip[L], ip[R]), (ip[R], ip[L]), (ip[R], ip[R]),
            (ip[L], ic[L]), (ip[L], ic[R]), (ip[R], ic[L]), (ip[R], ic[R]),
            (ip[en], ij),
            (is_[sL], is_[sL]), (is_[sL], is_[sR]), (is_[sR], is_[sL]), (is_[sR], is_[sR]),
            (is_, ij),
            (ij, ij), (ij, is_), (ij, ip[en]), (ij, ic[en]),
            (ip[:1], ip[:1]),
        ]
        rows = np.concatenate([b[0] for b in blocks])
        cols = np.concatenate([b[1] for b in blocks])
        keep = (rows != ip[0]).astype(float)
        keep[-1] = 1.0  # the pin phi_e(0) = 0
        self._keep = keep
        self._lower = int(max(0, (rows - cols).max()))
        self._upper = int(max(0, (cols - rows).max()))
        self._flat = (self._upper + rows - cols) * n + cols
        self._band_size = (self._lower + self._upper + 1) * n
        # scales of the unknowns for the convergence test
        vt = GAS_CONSTANT * 298.15 / FARADAY
        scale = np.empty(n)
        scale[ic] = self.params.electrolyte.initial_concentration_mol_m3
        scale[ip] = vt
        scale[is_] = vt
        scale[ij] = self._j_scale
        self._scale = scale
        # column of the Jacobian with respect to the cell current
        col = np.zeros(n)
        col[is_[0]] = -1.0 / self.params.area_m2
        col[is_[-1]] = 1.0 / self.params.area_m2
        self._dR_dI = col

    # ---- state helpers -------------------------------------------------------------------
    def _check_state(self, state):
        x = np.asarray(state, dtype=float)
        if x.shape != (self.size,):
            raise InputError(f"`state`: expected a dfn state of length {self.size}, got shape {x.shape}")
        return x

    def _particles(self, x):
        return x[self._o_cs:self._o_phie].reshape(self.ne, self.nr)

    def initial_state(self, soc: float, temperature_K: float) -> np.ndarray:
        soc = float(soc)
        if not math.isfinite(soc):
            raise InputError(f"`soc`: expected a number, got {soc!r}")
        p = self.params
        stos = p.stoichiometry_at(soc)
        for e, sto in zip(self._electrodes, stos):
            if not 0.0 < sto < 1.0:
                raise InputError(f"`soc`: {soc!r} puts the {e.name} electrode at stoichiometry "
                                 f"{sto:.4f}, outside (0, 1); expected a SOC inside the cell's window")
        x = np.zeros(self.size)
        x[:self.xm.nx] = p.electrolyte.initial_concentration_mol_m3
        cs = self._particles(x)
        for k, e in enumerate(self._electrodes):
            cs[self._eslices[k]] = stos[k] * e.max_concentration_mol_m3
            x[self._o_phis:self._o_j][self._eslices[k]] = float(e.potential(stos[k], temperature_K))
        return x

    def soc(self, state) -> float:
        x = self._check_state(state)
        sto = self.shells.mean(self._particles(x)[self._eslices[0]]).mean() \
            / self.params.negative.max_concentration_mol_m3
        return float(self.params.soc_from_negative(sto))

    def lithium_by_electrode(self, state) -> dict[str, float]:
        """Lithium in each electrode's solid phase, mol."""
        x = self._check_state(state)
        per_cell = self.shells.mean(self._particles(x)) * self._solid_m3
        return {"negative": float(per_cell[self._eslices[0]].sum()),
                "positive": float(per_cell[self._eslices[1]].sum())}

    def lithium_mol(self, state) -> float:
        li = self.lithium_by_electrode(state)
        return li["negative"] + li["positive"]

    def electrolyte_concentration(self, state) -> np.ndarray:
        return np.asarray(state, dtype=float)[:self.xm.nx].copy()

    def electrolyte_lithium_mol(self, state) -> float:
        c = np.asarray(state, dtype=float)[:self.xm.nx]
        return float(self._storage @ c * self.params.area_m2)

    # ---- the nonlinear system ------------------------------------------------------------
    def _prepare(self, x, dt, T):
        p, el = self.params, self.params.electrolyte
        cs_old = self._particles(x)
        A_surf = np.empty(self.ne)
        B_surf = np.empty(self.ne)
        props = []
        for k, e in enumerate(self._electrodes):
            pr = self.shells.propagator(e.diffusivity(T), e.particle_radius_m, dt)
            sl = self._eslices[k]
            A_surf[sl] = cs_old[sl] @ pr.s
            B_surf[sl] = pr.s_q / FARADAY
            props.append(pr)
        rate = np.concatenate([np.full(self.xm.nn, p.negative.rate(T)),
                               np.full(self.xm.np_, p.positive.rate(T))])
        return {
            "T": T, "dt": dt, "c_old": x[:self.xm.nx], "cs_old": cs_old, "props": props,
            "A_surf": A_surf, "B_surf": B_surf, "jf0": FARADAY * rate,
            "fD": el.diffusion_factor(T) * self.xm.transport,
            "fk": el.kappa_factor(T) * self.xm.transport,
            "nu": el.diffusion_potential_V(T),
        }

    def _system(self, u, current, pre, jacobian=True):
        """Residual (and Jacobian values) at unknowns ``u`` and cell current ``current``."""
        xm, el = self.xm, self.params.electrolyte
        c = u[self._ic]
        phi = u[self._ip]
        s = u[self._is]
        j = u[self._ij]
        en = self.enode
        if c.min() <= 0.0:
            return None
        cs = pre["A_surf"] + pre["B_surf"] * j
        if np.any(cs <= 0.0) or np.any(cs >= self._cmax):
            return None
        # --- salt diffusion
        D = el.diffusivity(c) * pre["fD"]
        hl, hr = xm.half_left, xm.half_right
        cL, cR = c[:-1], c[1:]
        Tf = 1.0 / (hl / D[:-1] + hr / D[1:])
        G = Tf * (cR - cL)
        Gp = np.concatenate([[0.0], G, [0.0]])
        r_c = self._storage * (c - pre["c_old"]) / pre["dt"] - np.diff(Gp)
        r_c[en] -= self._src * j
        # --- ionic current
        kap = el.conductivity(c) * pre["fk"]
        K = 1.0 / (hl / kap[:-1] + hr / kap[1:])
        lnc = np.log(c)
        B = pre["nu"] * np.diff(lnc) - np.diff(phi)
        i_e = K * B
        ip_ = np.concatenate([[0.0], i_e, [0.0]])
        r_p = np.diff(ip_)
        r_p[en] -= self._adx * j
        r_p[0] = phi[0]
        # --- electronic current
        sL, sR = self._sL, self._sR
        i_s = self._S * (s[sL] - s[sR])
        faces = np.zeros(self.ne + 1)  # face e sits between electrode cells e-1 and e
        faces[sR] = i_s
        r_s = self._adx * j + np.diff(faces)
        Ia = current / self.params.area_m2
        r_s[0] -= Ia
        r_s[-1] += Ia
        # --- Butler-Volmer
        T = pre["T"]
        U = np.empty(self.ne)
        dU = np.empty(self.ne)
        sto = cs / self._cmax
        for k, e in enumerate(self._electrodes):
            sl = self._eslices[k]
            U[sl] = e.potential(sto[sl], T)
            if jacobian:
                dU[sl] = (e.potential(sto[sl] + _H_STO, T) - e.potential(sto[sl] - _H_STO, T)) \
                    / (2 * _H_STO)
        ce = c[en]
        j0 = np.empty(self.ne)
        eta = np.empty(self.ne)
        aa = np.empty(self.ne)
        for k, e in enumerate(self._electrodes):
            sl = self._eslices[k]
            alpha = e.charge_transfer_coefficient
            aa[sl] = alpha
            j0[sl] = pre["jf0"][sl] * (ce[sl] * (self._cmax[sl] - cs[sl])) ** alpha \
                * cs[sl] ** (1.0 - alpha)
            eta[sl] = overpotential(j[sl], j0[sl], alpha, T)
        # Butler-Volmer in its inverse form (a potential balance, in volts): far better
        # conditioned for Newton than j - j0 g(eta), whose exponentials overshoot
        r_j = s - phi[en] - U - eta
        r = np.empty(self.n_unknowns)
        r[self._ic] = r_c
        r[self._ip] = r_p
        r[self._is] = r_s
        r[self._ij] = r_j
        out = {"r": r, "cs": cs, "U": U, "eta": eta, "i_e": i_e, "i_s": i_s, "sto": sto}
        if not jacobian:
            return out
        if not np.all(np.isfinite(r)):
            return None
        # --- Jacobian values in the order of _build_pattern
        h = _H_C
        dD = (el.diffusivity(c * (1 + h)) - el.diffusivity(c * (1 - h))) / (2 * h * c) * pre["fD"]
        dTL = Tf * Tf * hl * dD[:-1] / D[:-1] ** 2
        dTR = Tf * Tf * hr * dD[1:] / D[1:] ** 2
        dG_L = -Tf + (cR - cL) * dTL
        dG_R = Tf + (cR - cL) * dTR
        dk = (el.conductivity(c * (1 + h)) - el.conductivity(c * (1 - h))) / (2 * h * c) * pre["fk"]
        dKL = K * K * hl * dk[:-1] / kap[:-1] ** 2
        dKR = K * K * hr * dk[1:] / kap[1:] ** 2
        di_cL = dKL * B - K * pre["nu"] / cL
        di_cR = dKR * B + K * pre["nu"] / cR
        Bs = pre["B_surf"]
        dj0_dcs = j0 * (-aa / (self._cmax - cs) + (1.0 - aa) / cs)
        g = np.empty(self.ne)
        gp = np.empty(self.ne)
        for k, e in enumerate(self._electrodes):
            sl = self._eslices[k]
            g[sl], gp[sl] = butler_volmer(eta[sl], e.charge_transfer_coefficient, T)
        deta_dj = 1.0 / (j0 * gp)  # from j = j0 g(eta): d eta = (dj - g dj0) / (j0 g')
        deta_dj0 = -g * deta_dj
        S = self._S
        vals = np.concatenate([
            self._storage / pre["dt"],
            -dG_L, -dG_R, dG_L, dG_R,
            -self._src,
            K, -K, -K, K,
            di_cL, di_cR, -di_cL, -di_cR,
            -self._adx,
            S, -S, -S, S,
            self._adx,
            -dU * Bs / self._cmax - deta_dj - deta_dj0 * dj0_dcs * Bs,
            np.ones(self.ne),
            -np.ones(self.ne),
            -deta_dj0 * aa * j0 / ce,
            [1.0],
        ])
        ab = np.bincount(self._flat, weights=vals * self._keep, minlength=self._band_size)
        out["ab"] = ab.reshape(self._lower + self._upper + 1, self.n_unknowns)
        return out

    def _room(self, u, du, pre):
        """Largest step fraction keeping surfaces in (0, c_max) and the salt positive."""
        cs = pre["A_surf"] + pre["B_surf"] * u[self._ij]
        dcs = pre["B_surf"] * du[self._ij]
        c, dc = u[self._ic], du[self._ic]
        with np.errstate(divide="ignore", invalid="ignore"):
            room = np.concatenate([np.where(dcs > 0, (self._cmax - cs) / dcs, np.inf),
                                   np.where(dcs < 0, -cs / dcs, np.inf),
                                   np.where(dc < 0, -c / dc, np.inf)])
        return float(room.min())

    def _terminal(self, u, current, R):
        s = u[self._is]
        v_rod = s[-1] - s[0] - current * self._r_edge
        return v_rod, v_rod - current * R

    # ---- stepping ------------------------------------------------------------------------
    def solve_step(self, state, dt, temperature_K, control, series_resistance_ohm=0.0) -> StepResult:
        kind, value = check_control(control)
        dt, T, R = check_step_inputs(dt, temperature_K, series_resistance_ohm)
        x = self._check_state(state)
        pre = self._prepare(x, dt, T)
        n = self.n_unknowns
        u = np.empty(n)
        nx, ne = self.xm.nx, self.ne
        u[self._ic] = x[:nx]
        u[self._ip] = x[self._o_phie:self._o_phie + nx]
        u[self._is] = x[self._o_phis:self._o_phis + ne]
        u[self._ij] = x[self._o_j:self._o_j + ne]
        I_old = x[-1]
        if kind == "current":
            current = value
        elif kind == "power":
            v_old = self._terminal(u, I_old, R)[1]
            current = I_old if I_old != 0.0 else value / v_old
        else:
            current = I_old
        # scale the reaction guess to the new current (uniform when starting from rest)
        if abs(I_old) > 1e-9 * self.current_1C_A:
            u[self._ij] *= current / I_old
        else:
            u[self._ij] = current * self._j_uniform_per_A
        bordered = kind != "current"
        l_u = (self._lower, self._upper)
        sys_ = self._system(u, current, pre)
        if sys_ is None:
            raise RodStepError("dfn: the starting point of the step is outside the physical range")
        iterations = 0
        while True:
            iterations += 1
            if iterations > self.max_newton:
                raise RodStepError(f"dfn: Newton did not converge in {self.max_newton} iterations "
                                   f"(dt = {dt:g} s, {kind} = {value:g})")
            r = sys_["r"]
            if bordered:
                v_rod, v_term = self._terminal(u, current, R)
                dv_dI = -self._r_edge - R
                if kind == "voltage":
                    r_I = v_term - value
                    gs, gI = 1.0, dv_dI
                else:
                    r_I = current * v_term - value
                    gs, gI = current, v_term + current * dv_dI
                rhs = np.column_stack([-r, self._dR_dI])
                try:
                    sol = solve_banded(l_u, sys_["ab"], rhs, check_finite=False)
                except (np.linalg.LinAlgError, ValueError) as exc:
                    raise RodStepError(f"dfn: singular Jacobian ({exc})") from None
                y, z = sol[:, 0], sol[:, 1]
                gy = gs * (y[self._is[-1]] - y[self._is[0]])
                gz = gs * (z[self._is[-1]] - z[self._is[0]])
                denom = gI - gz
                if denom == 0.0 or not math.isfinite(denom):
                    raise RodStepError(f"dfn: {kind} control lost its sensitivity to the current")
                dI = (-r_I - gy) / denom
                du = y - z * dI
            else:
                try:
                    du = solve_banded(l_u, sys_["ab"], -r, check_finite=False)
                except (np.linalg.LinAlgError, ValueError) as exc:
                    raise RodStepError(f"dfn: singular Jacobian ({exc})") from None
                dI = 0.0
            if not np.all(np.isfinite(du)) or not math.isfinite(dI):
                raise RodStepError("dfn: Newton update is not finite")
            # damped update: stay a fraction inside the physical range (particle surfaces
            # in (0, c_max), salt > 0), then halve until the trial point is admissible
            lam = min(1.0, 0.9 * self._room(u, du, pre))
            for _ in range(30):
                u_new = u + lam * du
                I_new = current + lam * dI
                trial = self._system(u_new, I_new, pre)
                if trial is not None:
                    break
                lam *= 0.5
            else:
                raise RodStepError("dfn: every Newton trial left the physical range "
                                   "(particle surface empty/full or salt depleted)")
            err = lam * max(float(np.max(np.abs(du) / self._scale)),
                            abs(dI) / self.current_1C_A)
            u, current, sys_ = u_new, I_new, trial
            if err < self.tolerance and lam == 1.0:
                break
        return self._result(u, current, pre, R, sys_, iterations)

    def _result(self, u, current, pre, R, sys_, iterations):
        nx, ne, T = self.xm.nx, self.ne, pre["T"]
        j = u[self._ij]
        new = np.empty(self.size)
        new[:nx] = u[self._ic]
        cs_new = self._particles(new)
        for k in range(2):
            sl = self._eslices[k]
            pr = pre["props"][k]
            cs_new[sl] = pre["cs_old"][sl] @ pr.P.T + (j[sl] / FARADAY)[:, None] * pr.q
        new[self._o_phie:self._o_phie + nx] = u[self._ip]
        new[self._o_phis:self._o_phis + ne] = u[self._is]
        new[self._o_j:self._o_j + ne] = j
        new[-1] = current
        v_rod, v_term = self._terminal(u, current, R)
        A = self.params.area_m2
        s, phi = u[self._is], u[self._ip]
        sto = sys_["sto"]
        dudt = np.empty(ne)
        ocv = 0.0
        for k, e in enumerate(self._electrodes):
            sl = self._eslices[k]
            dudt[sl] = e.entropic(sto[sl])
            ocv -= e.sign * float(e.potential(sto[sl].mean(), T))
        aj = self._adx * j
        Ia = current / A
        edge = Ia * Ia * self._r_edge * A  # Joule heat of the two collector half cells, per area
        heat = heat_split(
            irreversible=A * float(aj @ sys_["eta"]),
            reversible=A * T * float(aj @ dudt),
            ohmic_electrolyte=A * float(sys_["i_e"] @ -np.diff(phi)),
            ohmic_solid=A * (float(sys_["i_s"] @ (s[self._sL] - s[self._sR])) + edge),
        )
        return StepResult(state=new, current_A=float(current), voltage_V=float(v_term),
                          ocv_V=ocv, soc=self.soc(new), heat_W=heat, iterations=iterations)
