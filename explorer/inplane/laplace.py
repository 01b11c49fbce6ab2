"""The two-point-flux conductance matrix of a uniform sheet on the structured grid."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from explorer.inplane.grid import Grid


def grid_links(grid: Grid, conductance_per_square: float):
    """Neighbour pairs of the grid and the conductance of each link.

    A sheet of conductance ``s`` per square (S, or W/K for heat) links
    x-neighbours by ``s * dy / dx`` and y-neighbours by ``s * dx / dy``.

    Returns
    -------
    a, b : ndarray of int
        Flat indices (``j * nx + i``) of the two ends of every link.
    G : ndarray
        Conductance of every link.
    """
    nx, ny = grid.nx, grid.ny
    idx = np.arange(nx * ny).reshape(ny, nx)
    ax, bx = idx[:, :-1].ravel(), idx[:, 1:].ravel()
    ay, by = idx[:-1, :].ravel(), idx[1:, :].ravel()
    gx = conductance_per_square * grid.dy / grid.dx
    gy = conductance_per_square * grid.dx / grid.dy
    a = np.concatenate([ax, ay])
    b = np.concatenate([bx, by])
    G = np.concatenate([np.full(ax.size, gx), np.full(ay.size, gy)])
    return a, b, G


def link_matrix(a: np.ndarray, b: np.ndarray, G: np.ndarray, n: int) -> sp.csr_matrix:
    """Symmetric conductance (graph Laplacian) matrix of the links, ``n`` x ``n``."""
    rows = np.concatenate([a, b, a, b])
    cols = np.concatenate([a, b, b, a])
    vals = np.concatenate([G, G, -G, -G])
    return sp.csr_matrix((vals, (rows, cols)), shape=(n, n))


def sheet_laplacian(grid: Grid, conductance_per_square: float):
    """Conductance matrix of a uniform sheet with insulated edges, and its links.

    Returns
    -------
    matrix : scipy.sparse.csr_matrix
        ``(nx*ny) x (nx*ny)``; ``matrix @ u`` is the net flow out of each volume.
    links : tuple
        ``(a, b, G)`` from :func:`grid_links`, for heat and flux evaluation.
    """
    a, b, G = grid_links(grid, conductance_per_square)
    return link_matrix(a, b, G, grid.nx * grid.ny), (a, b, G)
