"""Where the edges of the grid are, and which edge cells a tab joins.

Both in-plane models attach things along the four edges of the cell-centred
grid (tabs, edge sinks). This module holds that geometry once: the flat
indices of the control volumes along an edge, their length along the edge
and the distance from their centre to the edge.

Flat indices follow ``array.ravel()`` of a ``(ny, nx)`` array: ``j * nx + i``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from explorer.cell.model import EDGES
from explorer.inplane.grid import Grid
from explorer.validators import InputError, check_choice


@dataclass(frozen=True)
class EdgeCells:
    """The control volumes along one edge, in increasing coordinate along it."""

    edge: str
    index: np.ndarray  # flat indices into a (ny, nx) array
    length_m: float  # length of each control volume along the edge
    half_m: float  # distance from a control-volume centre to the edge
    start_m: np.ndarray  # coordinate along the edge where each control volume starts

    @property
    def size(self) -> int:
        return self.index.size


def edge_cells(grid: Grid, edge: str) -> EdgeCells:
    """The control volumes of ``grid`` that touch ``edge``.

    Parameters
    ----------
    grid : Grid
    edge : {"bottom", "top", "left", "right"}

    Examples
    --------
    >>> e = edge_cells(Grid(0.2, 0.3, 4, 6), "top")
    >>> e.index.tolist(), e.length_m, e.half_m
    ([20, 21, 22, 23], 0.05, 0.025)
    """
    check_choice("edge", edge, EDGES)
    nx, ny = grid.nx, grid.ny
    if edge in ("bottom", "top"):
        j = 0 if edge == "bottom" else ny - 1
        index = j * nx + np.arange(nx)
        return EdgeCells(edge, index, grid.dx, 0.5 * grid.dy, np.arange(nx) * grid.dx)
    i = 0 if edge == "left" else nx - 1
    index = np.arange(ny) * nx + i
    return EdgeCells(edge, index, grid.dy, 0.5 * grid.dx, np.arange(ny) * grid.dy)


def edge_length_m(grid: Grid, edge: str) -> float:
    """Length of ``edge`` (width for bottom/top, height for left/right)."""
    check_choice("edge", edge, EDGES)
    return grid.width_m if edge in ("bottom", "top") else grid.height_m


def tab_overlap(grid: Grid, tab) -> tuple[np.ndarray, np.ndarray]:
    """Edge control volumes a tab joins and the length of tab root on each.

    Parameters
    ----------
    grid : Grid
    tab : explorer.cell.model.Tab

    Returns
    -------
    index : ndarray of int
        Flat indices of the joined control volumes.
    length_m : ndarray
        Overlap of the tab root with each of them; sums to ``tab.width_m``.

    Raises
    ------
    InputError
        When the tab's edge is unknown or the tab does not lie on its edge.
    """
    check_choice(f"tab {tab.name!r} edge", tab.edge, EDGES)
    cells = edge_cells(grid, tab.edge)
    lo = tab.position_m - 0.5 * tab.width_m
    hi = tab.position_m + 0.5 * tab.width_m
    length = edge_length_m(grid, tab.edge)
    tol = 1e-9 * length
    if not (tab.width_m > 0) or lo < -tol or hi > length + tol:
        raise InputError(
            f"tab {tab.name!r}: expected the tab (centre {tab.position_m:g} m, width "
            f"{tab.width_m:g} m) to lie on the {tab.edge} edge [0, {length:g}] m")
    a = cells.start_m
    b = a + cells.length_m
    overlap = np.clip(np.minimum(b, hi) - np.maximum(a, lo), 0.0, None)
    keep = overlap > 1e-12 * length
    return cells.index[keep], overlap[keep]
