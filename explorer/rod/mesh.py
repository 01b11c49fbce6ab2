"""Mesh sizes of the rod models and the through-thickness finite-volume mesh.

The through-thickness coordinate ``x`` runs from the negative collector
(x = 0) through the negative coating, the separator and the positive coating
to the positive collector. Each region is cut into equal cells; unknowns sit
at cell centres. Faces between cells of different regions use the harmonic
mean of the two half-cells' effective properties (series resistances), which
keeps the flux continuous across the coating|separator interfaces.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from explorer.validators import InputError, check_integer, short_repr

__all__ = ["RodMesh", "ThroughMesh"]

# Most cells per region (or shells) a mesh may ask for: far finer than any run needs, and it
# keeps a mistyped size from allocating without end.
MAX_MESH_CELLS = 1000


@dataclass(frozen=True)
class RodMesh:
    """Mesh sizes: particle ``shells`` and cells across each region of one unit layer."""

    shells: int = 10
    negative: int = 10
    separator: int = 6
    positive: int = 10

    @classmethod
    def coerce(cls, mesh) -> RodMesh:
        """Accept ``None`` (defaults), a :class:`RodMesh` or a dict of some of its fields."""
        if mesh is None:
            return cls()
        if isinstance(mesh, RodMesh):
            return mesh
        if not isinstance(mesh, dict):
            raise InputError(f"`mesh`: expected None, a RodMesh or a dict with keys "
                             f"{[f.name for f in fields(cls)]}, got {short_repr(mesh)}")
        valid = {f.name for f in fields(cls)}
        unknown = [k for k in mesh if k not in valid]
        if unknown:
            raise InputError(f"`mesh`: unknown key(s) {short_repr(sorted(map(repr, unknown)))}; "
                             f"valid keys: {sorted(valid)}")
        # a whole number (1000.0 is fine), e.g. `mesh.shells`: a whole number 3 <= value <= 1000
        return cls(**{k: check_integer(f"mesh.{k}", v, 3 if k == "shells" else 1,
                                       MAX_MESH_CELLS) for k, v in mesh.items()})


class ThroughMesh:
    """Cell-centred mesh across negative | separator | positive of one unit layer.

    Attributes
    ----------
    dx : (nx,) cell widths, m
    porosity, transport : (nx,) electrolyte volume fraction and Bruggeman factor eps**b
    neg, pos : slices of the electrode cells; ``nn``, ``ns``, ``np_`` counts
    half_left, half_right : (nx-1,) half-cell widths on each side of each internal face
    reaction_shape : (nx-1,) electrolyte current at each internal face per unit
        current density for a uniform reaction in each electrode (x/L_n, 1, (L-x)/L_p)
    """

    def __init__(self, params, mesh: RodMesh):
        n, s, p = params.negative, params.separator, params.positive
        self.nn, self.ns, self.np_ = mesh.negative, mesh.separator, mesh.positive
        self.nx = self.nn + self.ns + self.np_
        self.dx = np.concatenate([np.full(self.nn, n.thickness_m / self.nn),
                                  np.full(self.ns, s.thickness_m / self.ns),
                                  np.full(self.np_, p.thickness_m / self.np_)])
        counts = (self.nn, self.ns, self.np_)
        self.porosity = np.repeat([n.porosity, s.porosity, p.porosity], counts)
        self.transport = np.repeat([n.electrolyte_transport, s.electrolyte_transport,
                                    p.electrolyte_transport], counts)
        self.neg = slice(0, self.nn)
        self.sep = slice(self.nn, self.nn + self.ns)
        self.pos = slice(self.nn + self.ns, self.nx)
        self.half_left = 0.5 * self.dx[:-1]
        self.half_right = 0.5 * self.dx[1:]
        edges = np.concatenate([[0.0], np.cumsum(self.dx)])
        self.edges = edges
        self.centres = 0.5 * (edges[1:] + edges[:-1])
        xf = edges[1:-1]
        L_n, L_s, L = n.thickness_m, s.thickness_m, params.total_thickness_m
        shape = np.ones(self.nx - 1)
        shape = np.where(xf < L_n * (1 - 1e-12), xf / L_n, shape)
        shape = np.where(xf > (L_n + L_s) * (1 + 1e-12), (L - xf) / p.thickness_m, shape)
        self.reaction_shape = shape

    def face_harmonic(self, values):
        """Face conductances of ``values`` (per-cell coefficient) by series half cells."""
        return 1.0 / (self.half_left / values[:-1] + self.half_right / values[1:])
