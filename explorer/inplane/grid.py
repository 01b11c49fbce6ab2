"""The structured cell-centred grid over the pouch face shared by the in-plane models."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Grid:
    """``nx`` x ``ny`` equal control volumes over a ``width_m`` x ``height_m`` face.

    Arrays on the grid have shape ``(ny, nx)``: row index along y, column along x.
    """

    width_m: float
    height_m: float
    nx: int
    ny: int

    @property
    def shape(self) -> tuple[int, int]:
        return (self.ny, self.nx)

    @property
    def dx(self) -> float:
        return self.width_m / self.nx

    @property
    def dy(self) -> float:
        return self.height_m / self.ny

    @property
    def x(self) -> np.ndarray:
        """Cell-centre x coordinates (m)."""
        return (np.arange(self.nx) + 0.5) * self.dx

    @property
    def y(self) -> np.ndarray:
        """Cell-centre y coordinates (m)."""
        return (np.arange(self.ny) + 0.5) * self.dy

    @property
    def cell_area_m2(self) -> float:
        return self.dx * self.dy

    @property
    def area_m2(self) -> float:
        return self.width_m * self.height_m

    @classmethod
    def single(cls, width_m: float, height_m: float) -> Grid:
        return cls(width_m, height_m, 1, 1)
