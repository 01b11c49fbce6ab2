"""The distributed layout: a grid of rods coupled through the collector potentials.

The pouch face is split into ``mx`` x ``my`` patches, each carried by one rod
at the mean temperature of its patch. The collectors are linear, so the
local collector drop over patch ``k`` is ``sum_m A_km I_m`` with ``A`` the
patch transfer-resistance matrix (the mean drop over patch k per ampere
drawn uniformly from patch m), built once from the factorised collector
network. Every rod sees the same terminal voltage::

    V_k(I_k) - sum_m A_km I_m = V_terminal,      k = 1..M

closed by the step's control (total current, terminal voltage or terminal
power). The rods are nonlinear in ``I_k``; the system is solved by Newton
with each rod's differential resistance ``-dV_k/dI_k`` taken by a secant from
the previous iterate (finite difference at the first step), which converges
in two or three iterations because the rods are nearly linear over one step.

The group presents itself to the stepper as one rod model (same contract as
:mod:`explorer.rod.base`) whose results also carry the fields: heat per grid
cell (rods' heat on their patches plus the collector Joule map for the actual
current distribution), tab Joule heat, SOC and current density.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from explorer.rod.base import Control, RodStepError, StepResult
from explorer.validators import InputError

HEAT_KEYS = ("irreversible", "reversible", "ohmic_electrolyte", "ohmic_solid")


@dataclass
class FieldStepResult(StepResult):
    """A step result that also carries the in-plane fields, all on the thermal grid."""

    heat_map_W: np.ndarray | None = None  # all generated heat per grid cell (incl. collector)
    tab_heat_W: dict = field(default_factory=dict)
    collector_W: float = 0.0
    soc_map: np.ndarray | None = None
    current_density_map: np.ndarray | None = None  # A m-2 through the stack, per face area


def patch_index(grid, mx: int, my: int) -> np.ndarray:
    """The rod patch (0..mx*my-1) each grid cell belongs to, shape (ny, nx)."""
    ix = (np.arange(grid.nx) * mx) // grid.nx
    iy = (np.arange(grid.ny) * my) // grid.ny
    return iy[:, None] * mx + ix[None, :]


class DistributedRods:
    """``mx`` x ``my`` rods of one model on the patches of ``grid``, coupled by ``network``."""

    field_temperature = True  # the stepper passes the temperature field, not its mean

    def __init__(self, rod, network, grid, rods=(4, 6)):
        try:
            mx, my = (int(v) for v in rods)
        except (TypeError, ValueError):
            raise InputError(f"simulate: `rods` must be (mx, my), got {rods!r}") from None
        if not (1 <= mx <= grid.nx and 1 <= my <= grid.ny) or mx * my < 2:
            raise InputError(f"simulate: `rods` {rods!r} must have 1 <= mx <= nx = {grid.nx}, "
                             f"1 <= my <= ny = {grid.ny} and at least two rods")
        self.rod, self.network, self.grid = rod, network, grid
        self.name = f"{rod.name} x {mx * my}"
        self.M = mx * my
        self.patch = patch_index(grid, mx, my)
        flat = self.patch.ravel()
        self._cells = np.bincount(flat, minlength=self.M)  # grid cells per patch
        self._share = self._cells / flat.size  # area fraction of each patch
        self._flat = flat
        # the collector fields for a current per patch: a matrix product (the network's
        # responses to each patch solved once) where the network offers it
        patch_solver = getattr(network, "patch_solver", None)
        self._collector = (patch_solver(self.patch, self._cells) if patch_solver is not None
                           else self._collector_by_solve)
        self.A = self._transfer_matrix()
        self._size = None
        self._r = None  # differential resistance of each rod, ohm (positive)

    def _collector_by_solve(self, currents) -> dict:
        """The collector fields for ``currents`` (A per patch), uniform over each patch."""
        j = (currents / (self._cells * self.grid.cell_area_m2))[self.patch]
        return self.network.solve(j)

    def _transfer_matrix(self) -> np.ndarray:
        """Mean collector drop over patch k per ampere drawn uniformly from patch m."""
        A = np.empty((self.M, self.M))
        for m in range(self.M):
            drop = self._collector(np.eye(self.M)[m])["drop_V"].ravel()
            A[:, m] = np.bincount(self._flat, drop, self.M) / self._cells
        return A

    # -- the rod-model contract -----------------------------------------------------------
    def initial_state(self, soc, temperature_K) -> np.ndarray:
        one = self.rod.initial_state(soc, temperature_K)
        self._size = one.size
        currents = np.zeros(self.M)
        return np.concatenate([np.tile(one, self.M), currents])

    def _split(self, state):
        """(rod states as rows (M, n), the currents (M,)) -- views of ``state``."""
        n = self._size
        return state[:self.M * n].reshape(self.M, n), state[self.M * n:]

    def soc(self, state) -> float:
        rods, _ = self._split(state)
        return float(np.dot(self._share, [self.rod.soc(s) for s in rods]))

    def lithium_mol(self, state) -> float:
        rods, _ = self._split(state)
        return float(sum(w * self.rod.lithium_mol(s) for w, s in zip(self._share, rods)))

    def _patch_temperatures_K(self, temperature_C) -> np.ndarray:
        T = np.asarray(temperature_C, dtype=float)
        if T.ndim == 0:
            return np.full(self.M, float(T) + 273.15)
        return np.bincount(self._flat, T.ravel(), self.M) / self._cells + 273.15

    def _rods_at(self, rods, dt, T_K, currents):
        """Each rod model stands for a whole cell: patch k carrying ``I_k`` is the rod at the
        whole-cell current ``I_k / share_k`` (same current density); its heat and lithium
        scale back by ``share_k``. One vectorised step for the whole group where the model
        has one (``solve_current_batch``), else rod by rod."""
        whole = currents / self._share
        batch = getattr(self.rod, "solve_current_batch", None)
        if batch is not None:
            out = batch(rods, dt, T_K, whole)
        else:
            out = _stack([self.rod.solve_step(s, dt, T_K[k], Control("current", float(whole[k])),
                                              0.0) for k, s in enumerate(rods)])
        return out, out.voltage_V

    def solve_step(self, state, dt, temperature_C, control, series_resistance_ohm=0.0):
        """Advance every rod by ``dt`` with the currents that meet the control.

        ``temperature_C`` is the thermal field (ny, nx) in degC (or a scalar).
        """
        rods, I0 = self._split(state)
        T_K = self._patch_temperatures_K(temperature_C)
        kind, value = control.kind, float(control.value)
        total0 = float(I0.sum())
        target = value if kind == "current" else None
        # starting distribution: the previous one scaled to the new total (uniform from rest)
        if kind == "current" and abs(total0) > 1e-12:
            I = I0 * (value / total0)
        elif kind == "current":
            I = value * self._share
        else:
            I = I0.copy()
        res, V = self._rods_at(rods, dt, T_K, I)
        r = self._r
        if r is None or kind != "current" or abs(total0) < 1e-12:
            eps = max(1e-3 * abs(I).max(), 1e-3 * self.rod_scale())
            _, V2 = self._rods_at(rods, dt, T_K, I + eps)
            r = np.maximum((V - V2) / eps, 1e-9)
        Vt = float(np.mean(V - self.A @ I))
        for iteration in range(1, 13):  # noqa: B007 (reported as the iteration count)
            if kind == "power":
                target = value / max(Vt, 1e-3)
            F = V - self.A @ I - Vt  # each rod's voltage mismatch
            total_miss = 0.0 if kind == "voltage" else float(I.sum() - target)
            if kind == "voltage":
                total_miss = Vt - value
            if np.max(np.abs(F)) < 1e-7 and abs(total_miss) < 1e-9 * max(1.0, abs(target or 1.0)):
                break
            J = np.zeros((self.M + 1, self.M + 1))
            J[:self.M, :self.M] = -np.diag(r) - self.A
            J[:self.M, self.M] = -1.0
            if kind == "voltage":
                J[self.M, self.M] = 1.0
            else:
                J[self.M, :self.M] = 1.0
            rhs = -np.concatenate([F, [total_miss]])
            try:
                delta = np.linalg.solve(J, rhs)
            except np.linalg.LinAlgError:
                raise RodStepError("distributed rods: singular coupling system") from None
            I_new = I + delta[:self.M]
            Vt += float(delta[self.M])
            res_new, V_new = self._rods_at(rods, dt, T_K, I_new)
            dI = I_new - I
            moved = np.abs(dI) > 1e-9 * max(1.0, np.abs(I_new).max())
            r = np.where(moved, np.maximum(-(V_new - V) / np.where(moved, dI, 1.0), 1e-9), r)
            I, V, res = I_new, V_new, res_new
        else:
            raise RodStepError("distributed rods: the current distribution did not converge "
                               "in 12 iterations")
        self._r = r
        return self._result(res, I, V, Vt, iteration)

    def rod_scale(self) -> float:
        return float(getattr(self.rod, "current_1C_A", 1.0))

    def _result(self, res, I, V, Vt, iterations) -> FieldStepResult:
        g = self.grid
        cell_area = g.cell_area_m2
        j = (I / (self._cells * cell_area))[self.patch]
        col = self._collector(I)
        q_rod = self._share * sum(res.heat_W[k] for k in HEAT_KEYS)
        heat_map = (q_rod / self._cells)[self.patch] + col["joule_W"]
        soc_k = np.asarray(res.soc, dtype=float)
        heat = {k: float(self._share @ res.heat_W[k]) for k in HEAT_KEYS}
        state = np.concatenate([res.states.ravel(), I])
        current = float(I.sum())
        ocv = float(self._share @ res.ocv_V)
        if not math.isfinite(Vt):
            raise RodStepError("distributed rods: non-finite terminal voltage")
        return FieldStepResult(
            state=state, current_A=current, voltage_V=Vt, ocv_V=ocv,
            soc=float(np.dot(self._share, soc_k)), heat_W=heat, iterations=iterations,
            heat_map_W=heat_map, tab_heat_W=dict(col["tab_joule_W"]),
            collector_W=float(np.sum(col["joule_W"])), soc_map=soc_k[self.patch],
            current_density_map=j)


def _stack(results):
    """Rod-by-rod step results as one batch (the fields of ``RodBatch``)."""
    from explorer.rod.spm import RodBatch

    return RodBatch(states=np.array([r.state for r in results]),
                    voltage_V=np.array([r.voltage_V for r in results]),
                    ocv_V=np.array([r.ocv_V for r in results]),
                    soc=np.array([r.soc for r in results]),
                    heat_W={k: np.array([r.heat_W.get(k, 0.0) for r in results])
                            for k in HEAT_KEYS})
