"""Potentials and Joule heat in the current-collector foils of a pouch cell.

Each polarity's foils form one conducting sheet over the coated area: all
foils of a polarity in parallel, sheet resistance ``R_s`` (ohm per square,
``cell.derived.<polarity>_sheet_resistance_ohm``). The electrodes draw (or
feed) current through the faces of the sheet, ``J`` per unit face area, and
the tabs collect it along part of an edge. With ``u`` the potential drop of the
sheet from its terminal (``u >= 0`` on discharge for both polarities), charge
conservation in the sheet reads

    -div( (1 / R_s) grad u ) = J            over the coated area,
    -(1 / R_s) du/dn = g u                  along a tab root,
    du/dn = 0                               along the rest of the boundary,

with ``g = 1 / ((R_tab + R_weld) w)`` the conductance per unit root length of a
tab of width ``w``: every strip of a tab carries its current straight to the
busbar (no sideways flow inside the tab), which reproduces the tab's
resistance ``R_tab = rho L_free / (w t)`` exactly for a uniform root current
and is conservative otherwise. All tabs of one polarity share one terminal.

The problem is linear, so it is solved once per polarity for 1 A drawn
uniformly and the results scale with ``I`` (and ``I**2`` for heat). Discretised
with cell-centred finite volumes (two-point fluxes, tab links in series with
the half control volume next to the edge), the discrete Joule heat of every
link adds up exactly to ``sum(J u dA)``, so the energy bookkeeping closes to
round-off. The potential problem is solved on a grid refined ``refine`` times
in each direction over the thermal grid (tab crowding needs it), and the
results are summed (heat) or averaged (potential) back onto the thermal grid.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from explorer.cell.model import POLARITIES
from explorer.inplane.edges import tab_overlap
from explorer.inplane.grid import Grid
from explorer.inplane.laplace import sheet_laplacian
from explorer.inplane.tabs import tab_resistance_ohm
from explorer.validators import InputError, check_integer

__all__ = ["CollectorNetwork", "tab_resistance_ohm", "auto_refine"]

#: Fewest fine control volumes across the width and the height.
_MIN_FINE = 32
#: Fewest fine control volumes across the narrowest tab root (current crowds at the
#: tab ends; the resistance converges about linearly in the fine spacing there, and
#: 12 puts it within about 1 % for a tab a tenth of the edge wide; see the tests).
_MIN_PER_TAB = 12
#: Most fine control volumes per sheet (keeps the factorisation cheap).
_MAX_FINE = 40_000


def auto_refine(cell, grid: Grid) -> int:
    """Refinement factor of the potential grid over ``grid`` (see module docstring).

    The smallest integer that puts at least ``_MIN_FINE`` control volumes across
    each direction and ``_MIN_PER_TAB`` across the narrowest tab, capped so a
    sheet has at most ``_MAX_FINE`` control volumes.
    """
    need = max(_MIN_FINE / grid.nx, _MIN_FINE / grid.ny)
    for tab in cell.geometry.tabs:
        d = grid.dx if tab.edge in ("bottom", "top") else grid.dy
        need = max(need, _MIN_PER_TAB * d / tab.width_m)
    cap = math.sqrt(_MAX_FINE / (grid.nx * grid.ny))
    return max(1, min(math.ceil(need - 1e-9), math.floor(cap)))


class _Sheet:
    """One polarity's sheet: the factorised conductance matrix and its tab links."""

    def __init__(self, cell, fine: Grid, polarity: str):
        self.polarity = polarity
        r_s = getattr(cell.derived, f"{polarity}_sheet_resistance_ohm")
        if not (r_s > 0 and math.isfinite(r_s)):
            raise InputError(f"`cell.derived.{polarity}_sheet_resistance_ohm`: expected a "
                             f"value > 0, got {r_s!r}")
        self.sigma = 1.0 / r_s  # sheet conductance, S per square
        tabs = cell.tab(polarity)
        if not tabs:
            raise InputError(f"cell {cell.name!r}: expected at least one {polarity} tab, got none")
        n = fine.nx * fine.ny
        lap, self.links = sheet_laplacian(fine, self.sigma)
        diag = np.zeros(n)
        self.tabs = []  # (name, fine indices, link conductance, foil part of link resistance)
        for tab in tabs:
            idx, length = tab_overlap(fine, tab)
            half = 0.5 * (fine.dy if tab.edge in ("bottom", "top") else fine.dx)
            r_foil = half / (self.sigma * length)  # half control volume next to the root
            r_tab = tab_resistance_ohm(tab) * tab.width_m / length  # the tab strip on this root
            G = 1.0 / (r_foil + r_tab)
            np.add.at(diag, idx, G)
            self.tabs.append((tab.name, idx, G, r_foil))
        # symmetric positive definite: symmetric mode keeps the fill (and the time) low
        self.lu = splu((lap + sp.diags(diag)).tocsc(), permc_spec="MMD_AT_PLUS_A",
                       options={"SymmetricMode": True})

    def drop(self, source_A: np.ndarray) -> np.ndarray:
        """Drop from the terminal (V) for the current ``source_A`` leaving each fine volume."""
        return self.lu.solve(source_A)

    def heat(self, u: np.ndarray) -> tuple[np.ndarray, dict, dict]:
        """Joule heat (W) per fine volume, per tab, and the tab currents (A) for drop ``u``."""
        a, b, G = self.links
        q = G * (u[a] - u[b]) ** 2
        foil = 0.5 * (np.bincount(a, q, u.size) + np.bincount(b, q, u.size))
        tab_heat, tab_current = {}, {}
        for name, idx, Gt, r_foil in self.tabs:
            i_link = Gt * u[idx]
            foil += np.bincount(idx, i_link**2 * r_foil, u.size)
            tab_heat[name] = float(np.sum(i_link**2 / Gt - i_link**2 * r_foil))
            tab_current[name] = float(np.sum(i_link))
        return foil, tab_heat, tab_current


class CollectorNetwork:
    """Both collector sheets and their tabs, factorised once.

    Parameters
    ----------
    cell : explorer.cell.model.Cell
    grid : Grid
        The thermal grid; results come back on it, shape ``(ny, nx)``.
    refine : int, optional
        Control volumes of the potential grid per thermal control volume in
        each direction (default: :func:`auto_refine`).

    Attributes
    ----------
    resistance_ohm : float
        Terminal-to-terminal series resistance of both sheets, tabs and welds
        for a uniform through-cell current density: the terminal drop is
        ``I * resistance_ohm`` against the area-mean electrode voltage, and the
        collector and tab Joule heat is ``I**2 * resistance_ohm``.
    joule_map_W_per_A2 : ndarray (ny, nx)
        Foil Joule heat per thermal control volume divided by ``I**2``.
    foil_joule_W_per_A2 : dict
        ``{"negative": (ny, nx), "positive": (ny, nx)}``, same per sheet.
    tab_joule_W_per_A2 : dict
        ``{tab name: float}``, tab plus weld Joule heat divided by ``I**2``.
    tab_current_share : dict
        ``{tab name: float}``, the share of the current each tab carries.

    Examples
    --------
    >>> net = CollectorNetwork(cell, Grid(cell.geometry.width_m, cell.geometry.height_m, 8, 12))
    ... # doctest: +SKIP
    >>> v = net.potentials(50.0)["positive"]  # doctest: +SKIP
    """

    def __init__(self, cell, grid: Grid, refine: int | None = None):
        self.grid = grid
        r = auto_refine(cell, grid) if refine is None else check_integer("refine", refine, 1)
        self.refine = r
        self.fine_grid = Grid(grid.width_m, grid.height_m, grid.nx * r, grid.ny * r)
        self._sheets = {p: _Sheet(cell, self.fine_grid, p) for p in POLARITIES}
        self.area_m2 = grid.area_m2

        fine_area = self.fine_grid.cell_area_m2
        unit = np.full(self.fine_grid.nx * self.fine_grid.ny, fine_area / self.area_m2)
        self._unit_drop = {}
        self.foil_joule_W_per_A2 = {}
        self.tab_joule_W_per_A2 = {}
        self.tab_current_share = {}
        for p, sheet in self._sheets.items():
            u = sheet.drop(unit)
            foil, tabs, currents = sheet.heat(u)
            self._unit_drop[p] = self._coarse_mean(u)
            self.foil_joule_W_per_A2[p] = self._coarse_sum(foil)
            self.tab_joule_W_per_A2.update(tabs)
            self.tab_current_share.update(currents)
        # Energy-equivalent resistance: sum(J u dA) for 1 A; equals the heat sum.
        self.resistance_by_polarity_ohm = {
            p: float(np.sum(self._unit_drop[p]) * grid.cell_area_m2 / self.area_m2)
            for p in POLARITIES}
        self.resistance_ohm = float(sum(self.resistance_by_polarity_ohm.values()))
        self.joule_map_W_per_A2 = (self.foil_joule_W_per_A2["negative"]
                                   + self.foil_joule_W_per_A2["positive"])

    # -- grid transfer -------------------------------------------------------
    def _coarse_sum(self, fine: np.ndarray) -> np.ndarray:
        g, r = self.grid, self.refine
        return fine.reshape(g.ny, r, g.nx, r).sum(axis=(1, 3))

    def _coarse_mean(self, fine: np.ndarray) -> np.ndarray:
        return self._coarse_sum(fine) / self.refine**2

    def _to_fine(self, coarse: np.ndarray) -> np.ndarray:
        r = self.refine
        return np.repeat(np.repeat(coarse, r, axis=0), r, axis=1).ravel()

    # -- public ----------------------------------------------------------------
    def potentials(self, current_A: float) -> dict:
        """Foil potentials relative to each terminal for a uniform current density (V).

        Parameters
        ----------
        current_A : float
            Cell current, positive on discharge.

        Returns
        -------
        dict
            ``{"negative": (ny, nx), "positive": (ny, nx)}``: the negative foil
            sits below its terminal and the positive foil above its terminal on
            discharge (``phi_foil - phi_terminal``; signs flip on charge).
        """
        current = float(current_A)
        return {"negative": -current * self._unit_drop["negative"],
                "positive": current * self._unit_drop["positive"]}

    def drop_map_V_per_A(self) -> np.ndarray:
        """Local collector drop per ampere for a uniform current density, (ny, nx).

        The terminal voltage is the local electrode voltage minus ``I`` times
        this map; its area mean is :attr:`resistance_ohm`.
        """
        return self._unit_drop["negative"] + self._unit_drop["positive"]

    def solve(self, current_density_A_m2) -> dict:
        """Potentials and Joule heat for a general (non-uniform) current density.

        Parameters
        ----------
        current_density_A_m2 : array_like (ny, nx) or scalar
            Current through the stack per unit face area (A m-2), positive on
            discharge, constant over each thermal control volume.

        Returns
        -------
        dict with keys
            ``"negative"``, ``"positive"`` -- foil potential relative to its
            terminal (V, (ny, nx), signs as in :meth:`potentials`);
            ``"drop_V"`` -- the local collector drop, (ny, nx): terminal voltage
            = local electrode voltage - drop;
            ``"joule_W"`` -- foil Joule heat per control volume, (ny, nx);
            ``"foil_joule_W"`` -- the same per sheet; ``"tab_joule_W"`` and
            ``"tab_current_A"`` -- per tab; ``"current_A"`` -- total current;
            ``"terminal_drop_V"`` -- energy-equivalent drop, all collector and
            tab heat divided by the current (0 at zero current).
        """
        g = self.grid
        j = np.asarray(current_density_A_m2, dtype=float)
        if j.ndim == 0:
            j = np.full(g.shape, float(j))
        if j.shape != g.shape:
            raise InputError(f"`current_density_A_m2`: expected a scalar or an array of shape "
                             f"{g.shape}, got shape {j.shape}")
        if not np.all(np.isfinite(j)):
            raise InputError("`current_density_A_m2`: expected finite values, got NaN or inf")
        source = self._to_fine(j) * self.fine_grid.cell_area_m2
        out = {"foil_joule_W": {}, "tab_joule_W": {}, "tab_current_A": {}}
        for p, sheet in self._sheets.items():
            u = sheet.drop(source)
            foil, tabs, currents = sheet.heat(u)
            sign = -1.0 if p == "negative" else 1.0
            out[p] = sign * self._coarse_mean(u)
            out["foil_joule_W"][p] = self._coarse_sum(foil)
            out["tab_joule_W"].update(tabs)
            out["tab_current_A"].update(currents)
        out["drop_V"] = out["positive"] - out["negative"]
        out["joule_W"] = out["foil_joule_W"]["negative"] + out["foil_joule_W"]["positive"]
        current = float(np.sum(j) * g.cell_area_m2)
        heat = float(np.sum(out["joule_W"]) + sum(out["tab_joule_W"].values()))
        out["current_A"] = current
        out["terminal_drop_V"] = heat / current if current != 0 else 0.0
        return out

    def patch_solver(self, patch: np.ndarray, cells: np.ndarray):
        """:meth:`solve` for current densities uniform over patches of the grid, fast.

        ``patch`` (ny, nx) gives each control volume's patch (0..M-1) and ``cells`` (M,)
        the control volumes per patch. The potentials are linear in the patch currents, so
        each sheet's response to 1 A drawn uniformly from each patch is solved once here;
        the returned ``solve_patches(currents_A)`` (M,) then costs a matrix product and the
        Joule sums, and gives what :meth:`solve` gives for the same current density.
        """
        patch = np.asarray(patch)
        cells = np.asarray(cells, dtype=float)
        M = cells.size
        unit = np.zeros((self.grid.ny, self.grid.nx, M))
        unit[np.arange(self.grid.ny)[:, None], np.arange(self.grid.nx)[None, :], patch] = 1.0
        j = unit / (cells * self.grid.cell_area_m2)  # 1 A over each patch, A m-2
        r = self.refine
        source = np.repeat(np.repeat(j, r, axis=0), r, axis=1).reshape(-1, M)
        source = np.asfortranarray(source * self.fine_grid.cell_area_m2)
        basis = {p: sheet.lu.solve(source) for p, sheet in self._sheets.items()}

        def solve_patches(currents_A) -> dict:
            current = np.asarray(currents_A, dtype=float)
            out = {"foil_joule_W": {}, "tab_joule_W": {}, "tab_current_A": {}}
            for p, sheet in self._sheets.items():
                u = basis[p] @ current
                foil, tabs, tab_currents = sheet.heat(u)
                out[p] = (-1.0 if p == "negative" else 1.0) * self._coarse_mean(u)
                out["foil_joule_W"][p] = self._coarse_sum(foil)
                out["tab_joule_W"].update(tabs)
                out["tab_current_A"].update(tab_currents)
            out["drop_V"] = out["positive"] - out["negative"]
            out["joule_W"] = out["foil_joule_W"]["negative"] + out["foil_joule_W"]["positive"]
            total = float(current.sum())
            heat = float(np.sum(out["joule_W"]) + sum(out["tab_joule_W"].values()))
            out["current_A"] = total
            out["terminal_drop_V"] = heat / total if total != 0 else 0.0
            return out

        return solve_patches

    def __repr__(self) -> str:
        return (f"<CollectorNetwork {self.grid.nx}x{self.grid.ny} (x{self.refine} for "
                f"potentials): {self.resistance_ohm * 1e3:.4g} mOhm>")
