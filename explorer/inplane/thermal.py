"""The 2-D in-plane thermal field of a pouch cell with its heat sinks.

:class:`PlaneThermal` meets the contract of :mod:`explorer.inplane.base`.
The stack is one sheet over the coated area: in-plane conductance
``k_inplane * L`` per square (``L`` the stack thickness), areal heat capacity
``heat_capacity_J_K / electrode_area`` -- the pouch seal, the overhang and the
tabs are lumped into the coated area's heat capacity. The unknown is the
through-thickness *mean* temperature; every exchange through a face goes in
series with the mean-to-face conduction resistance of
:mod:`explorer.inplane.throughplane` (switch off with ``throughplane=False``).

Nodes of the linear system
--------------------------
* the cell sheet, ``ny * nx`` control volumes (heat capacity);
* the fin sheet when ``sinks.fin`` is set, ``ny * nx`` (heat capacity),
  under one face, coupled per unit area by ``contact_W_m2K`` (plus the
  cell's mean-to-face resistance); the face sink of that face and the
  ``layer="fin"`` edge sink attach to it;
* one node per tab at the middle of its free length (no heat capacity),
  where the tab's Joule heat is deposited: linked to the edge volumes its
  root joins through half the free length (``k A / (L_free / 2)``, shared
  over the root as parallel strips) and to its busbar through the other
  half in series with ``TabSink.conductance_W_K``. For a rod with uniform
  generation this midpoint node gives the exact heat reaching each end
  (plane wall with generation, Incropera & DeWitt §3.5);
* for a coolant stream, the coolant temperature at the boundaries of the
  strips it crosses and the mean coolant temperature each strip sees (no
  heat capacity). A strip (a row or column of the face, or the volumes of an
  edge) exchanges ``Q = m c_p (1 - exp(-NTU)) (T_wall - T_in)`` with the
  coolant (Incropera & DeWitt §8.3, eq. 8.42b form, applied strip by strip),
  and the coolant entering this cell is ``inlet_C + upstream_cells * Q_cell /
  (m c_p)``. All of that is linear, so the coolant is solved *implicitly*,
  together with the temperatures, at every step (no lag, no iteration).

Time stepping is backward Euler with the sparse LU factorisation cached per
``dt`` (a small LRU). Every heat flow reported is evaluated from the new
state, which is what the scheme moves, so stored + rejected = generated to
round-off.
"""

from __future__ import annotations

import math
from collections import OrderedDict

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from explorer.cell.model import EDGES
from explorer.inplane import throughplane as tp
from explorer.inplane.edges import edge_cells, tab_overlap
from explorer.inplane.grid import Grid
from explorer.inplane.laplace import grid_links
from explorer.inplane.sinks import FACES, FLOW_DIRECTIONS, Sinks
from explorer.inplane.tabs import tab_solid
from explorer.validators import InputError, check_choice, check_integer, check_positive

__all__ = ["PlaneThermal"]


def _field(name: str, value, shape, *, allow_inf: bool = False, nonnegative: bool = True):
    """``value`` as a float array of ``shape`` (a scalar is broadcast), with a clear error."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"`{name}`: expected a number or an array of numbers, "
                         f"got {value!r}") from None
    if arr.ndim == 0:
        arr = np.full(shape, float(arr))
    if arr.shape != tuple(shape):
        raise InputError(f"`{name}`: expected a scalar or an array of shape {tuple(shape)}, "
                         f"got shape {arr.shape}")
    if np.any(np.isnan(arr)) or (not allow_inf and not np.all(np.isfinite(arr))):
        raise InputError(f"`{name}`: expected finite values{' (or inf)' if allow_inf else ''}, "
                         f"got NaN or inf")
    if nonnegative and np.any(arr < 0):
        raise InputError(f"`{name}`: expected values >= 0, got minimum {arr.min():g}")
    return arr


# what a sparse factorisation raises on a singular or broken matrix
THERMAL_SOLVE_ERRORS = (RuntimeError, ArithmeticError, ValueError)


def _factorise(A):
    """Sparse LU of a thermal matrix.

    The matrix is structurally symmetric (and numerically so but for the
    coolant rows), so a minimum-degree ordering on A + A^T with diagonal
    pivoting keeps the fill about half that of the default column ordering.
    """
    return splu(sp.csc_matrix(A), permc_spec="MMD_AT_PLUS_A", options={"SymmetricMode": True})


def _recip(a: np.ndarray) -> np.ndarray:
    """1 / a with 1 / inf = 0 and 1 / 0 = inf, without warnings."""
    with np.errstate(divide="ignore"):
        return 1.0 / a


class _System:
    """Triplets of the steady conductance matrix ``K`` and the fixed source ``s``.

    ``K @ x = s + q`` at steady state; rows are energy balances (W) for nodes
    with heat capacity and tab nodes, or algebraic relations for coolant nodes.
    """

    def __init__(self):
        self.rows, self.cols, self.vals = [], [], []
        self.n = 0
        self.s_terms = []  # (node index, value)

    def nodes(self, count: int) -> np.ndarray:
        out = np.arange(self.n, self.n + count)
        self.n += count
        return out

    def add(self, r, c, v):
        r, c, v = np.broadcast_arrays(np.asarray(r), np.asarray(c), np.asarray(v, dtype=float))
        self.rows.append(r.ravel())
        self.cols.append(c.ravel())
        self.vals.append(v.ravel())

    def link(self, a, b, G):
        """Conductance ``G`` between nodes ``a`` and ``b`` (both energy balances)."""
        self.add(a, a, G)
        self.add(b, b, G)
        self.add(a, b, -np.asarray(G))
        self.add(b, a, -np.asarray(G))

    def to_fixed(self, a, G, T):
        """Conductance ``G`` from node ``a`` to a fixed temperature ``T``."""
        self.add(a, a, G)
        self.s_terms.append((np.asarray(a).ravel(), np.broadcast_to(G * T, np.shape(a)).ravel()))

    def build(self):
        K = sp.csr_matrix((np.concatenate(self.vals),
                           (np.concatenate(self.rows), np.concatenate(self.cols))),
                          shape=(self.n, self.n))
        s = np.zeros(self.n)
        for idx, v in self.s_terms:
            np.add.at(s, idx, v)
        return K.tocsc(), s


class _SinkFlow:
    """How the heat flow into one sink follows from the state vector ``x``.

    flow = G . x[nodes] - const - Gm . x[m_nodes]
    """

    __slots__ = ("name", "nodes", "G", "const", "m_nodes", "Gm")

    def __init__(self, name, nodes, G, const=0.0, m_nodes=None, Gm=None):
        self.name = name
        self.nodes = np.asarray(nodes)
        self.G = np.asarray(G, dtype=float)
        self.const = float(const)
        self.m_nodes = np.asarray(m_nodes if m_nodes is not None else [], dtype=int)
        self.Gm = np.asarray(Gm if Gm is not None else [], dtype=float)


class PlaneThermal:
    """Transient 2-D in-plane temperature of one cell, lumped through its thickness.

    Parameters
    ----------
    cell : explorer.cell.model.Cell
    grid : Grid
        Spans the coated area (``cell.geometry`` width and height).
    sinks : Sinks, optional
        The heat paths (default: adiabatic). Read once here.
    throughplane : bool, default True
        Put the mean-to-face conduction resistance ``d / (3 k_through)`` in
        series with every face exchange (see :mod:`explorer.inplane.throughplane`).
    cache_size : int, default 4
        How many factorisations (one per distinct ``dt``) to keep.
    fitted : bool, default False
        Step with exponentially fitted backward Euler (Liniger & Willoughby, SIAM J. Numer.
        Anal. 7 (1970) 47, the idea of fitting the scheme to one eigenvalue): the step is
        backward Euler over the stretched step ``tau (exp(dt / tau) - 1)``, ``tau`` the
        slowest time constant of the field (the cell cooling as a whole), so that mode decays
        exactly on any step (plain backward Euler's decay rate is off by about
        ``dt / 2 tau``); faster modes stay strongly damped. :meth:`step` returns the heat
        flows at the new state; their mean over the step is generated less stored (exact
        for that mode). :func:`explorer.simulate` and :func:`explorer.simulate_module` use
        it (:meth:`step_series` steps the same way).

    Examples
    --------
    >>> model = PlaneThermal(cell, grid, sinks)               # doctest: +SKIP
    >>> x = model.initial_state(25.0)                         # doctest: +SKIP
    >>> x, rejected = model.step(x, heat_W, 10.0)             # doctest: +SKIP
    """

    # one sparse factorisation per step size (cached): the stepper keeps to a ladder of sizes
    factorises_per_step_size = True

    def __init__(self, cell, grid: Grid, sinks: Sinks | None = None, *,
                 throughplane: bool = True, cache_size: int = 4, fitted: bool = False):
        sinks = Sinks() if sinks is None else sinks
        g, d = cell.geometry, cell.derived
        for name, a, b in (("width_m", grid.width_m, g.width_m),
                           ("height_m", grid.height_m, g.height_m)):
            if not math.isclose(a, b, rel_tol=1e-9):
                raise InputError(f"`grid.{name}`: expected the coated {name[:-2]} of cell "
                                 f"{cell.name!r}, {b:g} m, got {a:g} m")
        self.grid = grid
        self.cell_name = cell.name
        self.heat_capacity_J_per_K = check_positive("cell.derived.heat_capacity_J_K",
                                                    d.heat_capacity_J_K, "J/K")
        self.thickness_m = check_positive("cell.geometry.stack_thickness_m",
                                          g.stack_thickness_m, "m")
        self.k_inplane_W_mK = check_positive("cell.derived.inplane_conductivity_W_mK",
                                             d.inplane_conductivity_W_mK, "W/(m K)")
        self.k_through_W_mK = check_positive("cell.derived.throughplane_conductivity_W_mK",
                                             d.throughplane_conductivity_W_mK, "W/(m K)")
        self._cache_size = check_integer("cache_size", cache_size, 1)
        self._lu = OrderedDict()
        self._steady_lu = None
        self.fitted = bool(fitted)
        self._tau_slow = None  # slowest time constant (s), found on the first fitted step

        self.throughplane = bool(throughplane)
        self._N = grid.nx * grid.ny
        self._flows: list[_SinkFlow] = []
        self._attach = {}  # face/edge sink name -> (kind, nodes, G, sink temperature)
        # what each cell face exchanges with, per cell volume: face -> (G W/K, other node
        # indices or None, fixed temperature or None); for the surface temperatures
        self._face_links = {}
        sys = _System()
        self._cell_nodes = sys.nodes(self._N)
        capacity = [np.full(self._N, self.heat_capacity_J_per_K / self._N)]
        a, b, G = grid_links(grid, self.k_inplane_W_mK * self.thickness_m)
        sys.link(a, b, G)

        face_h, face_u = self._face_paths(sinks)
        self._fin_nodes = None
        if sinks.fin is not None:
            capacity.append(self._add_fin(sys, sinks.fin, face_u))
        self._add_faces(sinks, face_h)
        self._add_edges(sinks)
        self._coolant = None
        if sinks.coolant is not None:
            self._coolant = self._add_coolant(sys, sinks.coolant)
        for name, (_kind, nodes, G, T) in self._attach.items():
            if self._coolant is None or name not in self._coolant["sinks"]:
                sys.to_fixed(nodes, G, T)
                self._flows.append(_SinkFlow(name, nodes, G, const=float(G @ T)))
        self._add_tabs(sys, cell, sinks)

        self._n = sys.n
        self._c = np.concatenate(capacity + [np.zeros(sys.n - sum(c.size for c in capacity))])
        self._K, self._s = sys.build()
        self._has_sink = bool(self._flows)
        self._F, self._F0 = self._flow_matrix()
        self._flow_names = [f.name for f in self._flows]

    # -- assembly ---------------------------------------------------------------------
    def _face_paths(self, sinks: Sinks):
        """Face h maps, each face's conductance per area for the depth split, and the
        mean-to-face resistances and core factors that follow from it."""
        shape, L, k = self.grid.shape, self.thickness_m, self.k_through_W_mK
        for face in sinks.faces:
            check_choice("sinks.faces key", face, FACES)
        fin = sinks.fin
        if fin is not None:
            check_choice("sinks.fin.face", fin.face, FACES)
            check_choice("sinks.fin.edge", fin.edge, EDGES)
        face_h, face_u = {}, {}
        for face in FACES:
            if face in sinks.faces:
                face_h[face] = _field(f"sinks.faces[{face!r}].h_W_m2K",
                                      sinks.faces[face].h_W_m2K, shape, allow_inf=True)
            if fin is not None and fin.face == face:
                face_u[face] = _field("sinks.fin.contact_W_m2K", fin.contact_W_m2K, shape,
                                      allow_inf=True)
            else:
                face_u[face] = face_h.get(face, np.zeros(shape))
        d_front, d_back = tp.face_depths(face_u["front"], face_u["back"], L, shape)
        self._depth_max = float(np.max(np.maximum(d_front, d_back)))
        volume = self.grid.cell_area_m2 * L
        self._core_surface = tp.core_surface_factor(d_front, d_back, k) / volume
        self._core_mean = tp.core_mean_factor(d_front, d_back, L, k) / volume
        self._r_face = {f: (tp.mean_to_face_resistance(d, k) if self.throughplane
                            else np.zeros(shape))
                        for f, d in (("front", d_front), ("back", d_back))}
        return face_h, face_u

    def _face_conductance(self, name: str, u, r) -> np.ndarray:
        """Conductance of each control volume through a face: dA / (1/u + r)."""
        G = self.grid.cell_area_m2 / (_recip(u) + r)
        if not np.all(np.isfinite(G)):
            raise InputError(f"`{name}`: expected a finite face conductance (an infinite "
                             f"value needs throughplane=True), got inf")
        return G.ravel()

    def _add_fin(self, sys: _System, fin, face_u) -> np.ndarray:
        """Fin sheet nodes, in-plane links and contact to the cell; returns their capacity."""
        for f in ("thickness_m", "conductivity_W_mK", "density_kg_m3", "specific_heat_J_kgK"):
            check_positive(f"sinks.fin.{f}", getattr(fin, f))
        self._fin_nodes = sys.nodes(self._N)
        a, b, G = grid_links(self.grid, fin.conductivity_W_mK * fin.thickness_m)
        sys.link(self._fin_nodes[a], self._fin_nodes[b], G)
        Gc = self._face_conductance("sinks.fin.contact_W_m2K", face_u[fin.face],
                                    self._r_face[fin.face])
        sys.link(self._cell_nodes, self._fin_nodes, Gc)
        self._face_links[fin.face] = (Gc, self._fin_nodes, None)
        rho_c_t = fin.density_kg_m3 * fin.specific_heat_J_kgK * fin.thickness_m
        return np.full(self._N, rho_c_t * self.grid.cell_area_m2)

    def _add_faces(self, sinks: Sinks, face_h) -> None:
        """Face sinks: on the fin's outer side where the fin covers that face."""
        fin = sinks.fin
        for face, fs in sinks.faces.items():
            T = _field(f"sinks.faces[{face!r}].temperature_C", fs.temperature_C,
                       self.grid.shape, nonnegative=False).ravel()
            on_fin = fin is not None and fin.face == face
            nodes = self._fin_nodes if on_fin else self._cell_nodes
            r = np.zeros(self.grid.shape) if on_fin else self._r_face[face]
            G = self._face_conductance(f"sinks.faces[{face!r}].h_W_m2K", face_h[face], r)
            self._attach[face] = ("face", nodes, G, T)
            if not on_fin:
                self._face_links[face] = (G, None, T)

    def _add_edges(self, sinks: Sinks) -> None:
        """Edge sinks, in series with the half control volume next to the edge."""
        fin = sinks.fin
        for edge, es in sinks.edges.items():
            check_choice("sinks.edges key", edge, EDGES)
            layer = check_choice(f"sinks.edges[{edge!r}].layer", es.layer, ("cell", "fin"))
            ec = edge_cells(self.grid, edge)
            per_len = _field(f"sinks.edges[{edge!r}].conductance_W_mK", es.conductance_W_mK,
                             (ec.size,), allow_inf=True)
            T = _field(f"sinks.edges[{edge!r}].temperature_C", es.temperature_C, (ec.size,),
                       nonnegative=False)
            if layer == "fin":
                if fin is None:
                    raise InputError(f"`sinks.edges[{edge!r}].layer`: expected 'cell' "
                                     f"(the sinks have no fin), got 'fin'")
                if fin.edge != edge:
                    raise InputError(f"`sinks.edges[{edge!r}].layer`: the fin bends onto the "
                                     f"{fin.edge!r} edge, so a fin edge sink must be on "
                                     f"{fin.edge!r}, got {edge!r}")
                nodes, sheet = self._fin_nodes[ec.index], fin.conductivity_W_mK * fin.thickness_m
            else:
                nodes, sheet = self._cell_nodes[ec.index], self.k_inplane_W_mK * self.thickness_m
            G = ec.length_m / (_recip(per_len) + ec.half_m / sheet)
            self._attach[edge] = ("edge", nodes, G, T)

    def _add_tabs(self, sys: _System, cell, sinks: Sinks) -> None:
        """One node per tab at mid free length, linked to its root cells and its busbar."""
        grid = self.grid
        k_sheet = self.k_inplane_W_mK * self.thickness_m
        tabs = cell.geometry.tabs
        for name in sinks.tabs:
            check_choice("sinks.tabs key", name, [t.name for t in tabs])
        self._tab_nodes = {}
        for tab in tabs:
            k_tab = tab_solid(tab).thermal_conductivity_W_mK
            idx, length = tab_overlap(grid, tab)
            half_cell = 0.5 * (grid.dy if tab.edge in ("bottom", "top") else grid.dx)
            half_tab = 0.5 * tab.free_length_m
            node = sys.nodes(1)[0]
            self._tab_nodes[tab.name] = node
            # the root as parallel strips: half control volume, then half the free length
            G_root = length / (half_cell / k_sheet + half_tab / (k_tab * tab.thickness_m))
            sys.link(np.full(idx.size, node), self._cell_nodes[idx], G_root)
            ts = sinks.tabs.get(tab.name)
            if ts is None:
                continue
            where = f"sinks.tabs[{tab.name!r}]"
            g_sink = _field(f"{where}.conductance_W_K", ts.conductance_W_K, (), allow_inf=True)
            T_bus = float(_field(f"{where}.temperature_C", ts.temperature_C, (),
                                 nonnegative=False))
            R = half_tab / (k_tab * tab.width_m * tab.thickness_m) + _recip(g_sink)
            if R <= 0:
                raise InputError(f"`{where}.conductance_W_K`: expected a finite value for a "
                                 f"tab with zero free length, got inf")
            Gt = float(1.0 / R)
            if Gt > 0:
                sys.to_fixed(node, Gt, T_bus)
                self._flows.append(_SinkFlow(tab.name, [node], [Gt], const=Gt * T_bus))

    def _flow_matrix(self):
        """Every sink's heat flow as one sparse product: flows = F @ x - F0."""
        rows, cols, vals = [np.zeros(0, int)], [np.zeros(0, int)], [np.zeros(0)]
        for k, f in enumerate(self._flows):
            for idx, G in ((f.nodes, f.G), (f.m_nodes, -f.Gm)):
                rows.append(np.full(idx.size, k))
                cols.append(idx)
                vals.append(G)
        F = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                          shape=(len(self._flows), self._n))
        return F, np.array([f.const for f in self._flows])

    # -- coolant ----------------------------------------------------------------
    def _add_coolant(self, sys: _System, stream) -> dict:
        """Coolant nodes and relations for ``stream`` (see the module docstring)."""
        names = stream.sink_names
        for name in names:
            if name not in self._attach:
                valid = ", ".join(repr(k) for k in self._attach) or "none"
                raise InputError(f"`sinks.coolant.sink`: expected the name of a face or edge "
                                 f"sink ({valid}), got {name!r}")
        kinds = {self._attach[n][0] for n in names}
        if len(names) > 1 and kinds != {"face"}:
            raise InputError(f"`sinks.coolant.sink`: several sinks may share one coolant only "
                             f"when they are faces, got {names!r}")
        check_choice("sinks.coolant.direction", stream.direction, FLOW_DIRECTIONS)
        C = check_positive("sinks.coolant.capacity_rate_W_K", stream.capacity_rate_W_K, "W/K")
        inlet = _field("sinks.coolant.inlet_C", stream.inlet_C, (), nonnegative=False)
        n_up = check_integer("sinks.coolant.upstream_cells", stream.upstream_cells, 0)
        kind = kinds.pop()
        nodes = np.concatenate([self._attach[n][1] for n in names])
        G = np.concatenate([self._attach[n][2] for n in names])
        nx, ny = self.grid.nx, self.grid.ny
        axis, sign = stream.direction[1], stream.direction[0]
        if kind == "face":  # each face's nodes run over the grid in order
            j, i = np.divmod(np.tile(np.arange(nx * ny), len(names)), nx)
            pos, S = (i, nx) if axis == "x" else (j, ny)
        else:
            along = "x" if names[0] in ("bottom", "top") else "y"
            if axis == along:
                pos, S = np.arange(nodes.size), nodes.size
            else:  # the coolant crosses the edge: one strip at one mean temperature
                pos, S = np.zeros(nodes.size, dtype=int), 1
                sign = "+"
        strip = pos if sign == "+" else (S - 1 - pos)
        Gk = np.bincount(strip, G, S)
        ntu = Gk / C
        with np.errstate(invalid="ignore", divide="ignore"):
            phi = np.where(ntu > 1e-8, -np.expm1(-ntu) / ntu, 1.0 - 0.5 * ntu)
        m = sys.nodes(S)
        bnd = sys.nodes(S + 1)
        # cells: G_i (T_i - m_k)
        sys.add(nodes, nodes, G)
        sys.add(nodes, m[strip], -G)
        # m_k = (1 - phi_k) sum(G_i T_i) / G_k + phi_k b_k
        sys.add(m, m, 1.0)
        w = np.where(Gk[strip] > 0, G / np.where(Gk[strip] > 0, Gk[strip], 1.0), 0.0)
        sys.add(m[strip], nodes, -(1.0 - phi[strip]) * w)
        sys.add(m, bnd[:-1], -phi)
        # b_{k+1} = b_k + (sum(G_i T_i) - G_k m_k) / C
        sys.add(bnd[1:], bnd[1:], 1.0)
        sys.add(bnd[1:], bnd[:-1], -1.0)
        sys.add(bnd[1:][strip], nodes, -G / C)
        sys.add(bnd[1:], m, Gk / C)
        # b_0 = inlet + n_up (b_S - b_0)
        sys.add(bnd[0], bnd[0], 1.0 + n_up)
        if n_up:
            sys.add(bnd[0], bnd[-1], -float(n_up))
        sys.s_terms.append((np.array([bnd[0]]), np.array([float(inlet)])))
        self._flows.append(_SinkFlow(stream.name, nodes, G, m_nodes=m, Gm=Gk))
        if kind == "face":  # a cell face on the coolant exchanges with its strip's coolant
            for k, name in enumerate(names):
                link = self._face_links.get(name)
                if link is not None and link[1] is None:
                    self._face_links[name] = (link[0], m[strip[k * self._N:(k + 1) * self._N]],
                                              None)
        return {"sink": stream.name, "sinks": names, "strip_nodes": m, "boundary_nodes": bnd,
                "capacity_rate_W_K": C, "direction": stream.direction}

    # -- contract -----------------------------------------------------------------
    def initial_state(self, temperature_C: float) -> np.ndarray:
        """Uniform state at ``temperature_C``, with tab and coolant nodes consistent with it."""
        T0 = _field("temperature_C", temperature_C, (), nonnegative=False)
        x = np.full(self._n, float(T0))
        alg = np.flatnonzero(self._c == 0)
        if alg.size:
            dif = np.flatnonzero(self._c > 0)
            K = self._K
            Kaa = K[alg][:, alg].tocsc()
            rhs = self._s[alg] - K[alg][:, dif] @ x[dif]
            x[alg] = splu(Kaa).solve(rhs)
        return x

    def _factor(self, dt: float):
        entry = self._lu.get(dt)
        if entry is None:
            c_dt = self._c / dt
            entry = (_factorise(self._K + sp.diags(c_dt)), c_dt)
            self._lu[dt] = entry
            if len(self._lu) > self._cache_size:
                self._lu.popitem(last=False)
        else:
            self._lu.move_to_end(dt)
        return entry

    def _source(self, heat_W, tab_heat_W) -> np.ndarray:
        heat = np.asarray(heat_W, dtype=float)
        if heat.shape != self.grid.shape:
            raise InputError(f"`heat_W`: expected an array of shape {self.grid.shape}, "
                             f"got shape {heat.shape}")
        if not np.isfinite(heat).all():
            raise InputError("`heat_W`: expected finite heat per grid cell, got NaN or inf")
        q = self._s.copy()
        q[: self._N] += heat.ravel()
        if tab_heat_W:
            for name, value in tab_heat_W.items():
                node = self._tab_nodes.get(name)
                if node is None:
                    check_choice("tab_heat_W key", name, tuple(self._tab_nodes))
                if not math.isfinite(value):
                    raise InputError(f"`tab_heat_W[{name!r}]`: expected a finite heat in W, "
                                     f"got {value!r}")
                q[node] += value
        return q

    def step(self, state, heat_W, dt, tab_heat_W=None):
        """One backward-Euler step (fitted when built with ``fitted=True``); see
        :mod:`explorer.inplane.base`.

        Returns
        -------
        new_state : ndarray
        rejected_W : dict
            Heat flow into each sink (W) at the new state: for backward Euler also the mean
            over the step (stored + rejected = generated to round-off); for the fitted scheme
            the step's mean is generated less stored (exact for its slowest mode).
        """
        dt = float(dt)
        if not (dt > 0 and math.isfinite(dt)):
            raise InputError(f"`dt`: expected a time step > 0 s, got {dt!r}")
        lu, c_dt = self._factor(self._stretched(dt))
        rhs = self._source(heat_W, tab_heat_W)
        rhs += c_dt * state
        new = lu.solve(rhs)
        return new, self.heat_flows_W(new)

    # -- exponential fitting ------------------------------------------------------------
    def slowest_time_constant_s(self) -> float:
        """The field's slowest time constant ``tau`` (s): ``K v = (1 / tau) C v`` for the
        smallest eigenvalue, by power iteration on ``K^-1 C`` (nonnegative, so its dominant
        eigenvalue is real with a positive eigenvector, Perron-Frobenius); inf for a cell
        with no heat path."""
        if self._tau_slow is not None:
            return self._tau_slow
        tau = math.inf
        try:
            if self._has_sink and self._steady_lu is None:
                self._steady_lu = _factorise(self._K)
        except THERMAL_SOLVE_ERRORS:  # no steady state to iterate on: plain backward Euler
            pass
        if self._has_sink and self._steady_lu is not None:
            v = (self._c > 0).astype(float)
            for _ in range(100):  # the slowest mode dominates fast: a few iterations
                w = self._steady_lu.solve(self._c * v)
                new = float(w @ (self._c * v)) / float(v @ (self._c * v))
                v = w / np.abs(w).max()
                done = math.isfinite(tau) and abs(new - tau) <= 1e-7 * tau
                tau = new
                if done:
                    break
            if not (math.isfinite(tau) and tau > 0):
                tau = math.inf  # no usable estimate: plain backward Euler
        self._tau_slow = tau
        return tau

    def _stretched(self, dt: float) -> float:
        """The backward-Euler step that makes the slowest mode decay exactly over ``dt``."""
        if not self.fitted:
            return dt
        tau = self.slowest_time_constant_s()
        if not math.isfinite(tau):
            return dt
        return tau * math.expm1(min(dt / tau, 700.0))

    def heat_flows_W(self, state) -> dict:
        """Heat flow into every sink (W) at ``state``."""
        flows = self._F @ state - self._F0
        return dict(zip(self._flow_names, flows.tolist(), strict=True))

    def steady_state(self, heat_W, tab_heat_W=None) -> np.ndarray:
        """The steady state for constant generation (needs at least one sink)."""
        if not self._has_sink:
            raise InputError(f"cell {self.cell_name!r}: an adiabatic cell has no steady "
                             f"state; expected sinks with at least one heat path")
        if self._steady_lu is None:
            self._steady_lu = _factorise(self._K)
        return self._steady_lu.solve(self._source(heat_W, tab_heat_W))

    def temperature_C(self, state) -> np.ndarray:
        """Cell-sheet temperature (through-thickness mean), ``grid.shape``."""
        return state[: self._N].reshape(self.grid.shape)

    def mean_temperature_C(self, state) -> float:
        return float(np.mean(state[: self._N]))

    def stored_J(self, state) -> float:
        """Heat stored relative to 0 degC, fin included (J)."""
        return float(self._c @ state)

    def fin_temperature_C(self, state):
        """Fin-sheet temperature, ``grid.shape`` (None without a fin)."""
        if self._fin_nodes is None:
            return None
        return state[self._fin_nodes].reshape(self.grid.shape)

    def tab_temperature_C(self, state) -> dict:
        """Temperature of each tab node (middle of its free length)."""
        return {name: float(state[n]) for name, n in self._tab_nodes.items()}

    def core_surface_difference_K(self, heat_W) -> np.ndarray:
        """Through-plane core - surface estimate per grid cell (K).

        ``q''' d**2 / (2 k_through)`` with ``d`` the deeper conduction depth;
        symmetric two-face cooling gives ``q''' L**2 / (8 k)``, one face
        cooled ``q''' L**2 / (2 k)``, no face path 0 (see
        :mod:`explorer.inplane.throughplane`). Note the field itself is the
        mean temperature: the core is :meth:`core_temperature_C`.
        """
        return np.asarray(heat_W, dtype=float) * self._core_surface

    def core_temperature_C(self, state, heat_W) -> np.ndarray:
        """Core (hottest through-plane) temperature per grid cell: mean + core - mean."""
        return self.temperature_C(state) + np.asarray(heat_W, dtype=float) * self._core_mean

    def face_flux_W_m2(self, state) -> dict:
        """Heat flux leaving the cell through each face (W m-2), ``grid.shape`` arrays.

        Into the face sink, the fin sheet or the coolant, from ``state``; zero
        where a face has no heat path.
        """
        T = state[: self._N]
        out = {}
        for face in FACES:
            link = self._face_links.get(face)
            if link is None:
                out[face] = np.zeros(self.grid.shape)
                continue
            G, other, fixed = link
            T_other = state[other] if other is not None else fixed
            out[face] = (G * (T - T_other) / self.grid.cell_area_m2).reshape(self.grid.shape)
        return out

    def through_settling(self) -> dict:
        """``tau_s`` (the through-plane profile's settling time,
        :func:`explorer.inplane.throughplane.settling_time_s`) and ``cooled`` (face -> whether it
        has a heat path): what :func:`~explorer.inplane.throughplane.settle_extremes` needs."""
        rho_c = self.heat_capacity_J_per_K / (self.grid.width_m * self.grid.height_m
                                              * self.thickness_m)
        return {"tau_s": tp.settling_time_s(getattr(self, "_depth_max", 0.0),
                                            self.k_through_W_mK, rho_c),
                "cooled": {f: f in self._face_links for f in FACES}}

    def through_thickness_C(self, state, heat_W) -> dict:
        """Temperatures through the thickness at each point of the face (degC).

        ``front`` and ``back``: the face temperatures; ``hottest`` and
        ``coldest``: the extremes through the thickness, faces included. The
        faces follow from the mean field and the face heat flows with the
        parabolic profile of :func:`explorer.inplane.throughplane.slab_profile`;
        ``hottest`` also takes in the core estimate of
        :meth:`core_temperature_C` (from the local generation), whichever is
        higher, so the hottest point never reads below the core estimate.
        """
        flux = self.face_flux_W_m2(state)
        prof = tp.slab_profile(self.temperature_C(state), flux["front"], flux["back"],
                               self.thickness_m, self.k_through_W_mK)
        core = self.core_temperature_C(state, heat_W)
        return {"front": prof["front"], "back": prof["back"],
                "hottest": np.maximum(prof["max"], core), "coldest": prof["min"]}

    def recorded_figures(self, states, heat_W) -> dict:
        """What the stepper records of many states at once (as the single-state methods).

        ``states`` (m, n), ``heat_W`` (m, ny, nx): ``temperature`` (m, ny, nx), and per state
        ``core_difference`` (K, hottest core less hottest mean), ``hottest``, ``coldest``,
        ``front_max``, ``front_min``, ``back_max``, ``back_min`` (degC),
        ``through_difference`` (K), ``coolant_outlet`` (degC, NaN without a coolant stream)
        and ``stored_J``; also ``core_max`` (degC, the hottest core) and ``coolant_inlet``
        (degC, NaN without a coolant stream), which :mod:`explorer.module` keeps per cell.
        """
        x = np.asarray(states, dtype=float)
        heat = np.asarray(heat_W, dtype=float)
        m = x.shape[0]
        T = x[:, : self._N]
        flux = {}
        for face in FACES:
            link = self._face_links.get(face)
            if link is None:
                flux[face] = np.zeros_like(T)
                continue
            G, other, fixed = link
            T_other = x[:, other] if other is not None else fixed
            flux[face] = G * (T - T_other) / self.grid.cell_area_m2
        prof = tp.slab_profile(T, flux["front"], flux["back"], self.thickness_m,
                               self.k_through_W_mK)
        core = T + heat.reshape(m, -1) * self._core_mean.ravel()
        hottest = np.maximum(prof["max"], core)
        ends = self._coolant["boundary_nodes"][[0, -1]] if self._coolant is not None else None
        inlet, outlet = (x[:, ends].T if ends is not None else np.full((2, m), np.nan))
        return {"temperature": T.reshape(m, *self.grid.shape),
                "core_difference": core.max(axis=1) - T.max(axis=1),
                "hottest": hottest.max(axis=1), "coldest": prof["min"].min(axis=1),
                "front_max": prof["front"].max(axis=1), "front_min": prof["front"].min(axis=1),
                "back_max": prof["back"].max(axis=1), "back_min": prof["back"].min(axis=1),
                "through_difference": (hottest - prof["min"]).max(axis=1),
                "coolant_outlet": outlet, "stored_J": x @ self._c,
                "core_max": core.max(axis=1), "coolant_inlet": inlet}

    # -- coolant outputs --
    @property
    def has_coolant(self) -> bool:
        return self._coolant is not None

    def coolant_outlet_C(self, state):
        """Coolant temperature leaving this cell (degC), None without a coolant stream."""
        if self._coolant is None:
            return None
        return float(state[self._coolant["boundary_nodes"][-1]])

    def coolant_inlet_C(self, state):
        """Coolant temperature reaching this cell (inlet plus upstream cells' heat)."""
        if self._coolant is None:
            return None
        return float(state[self._coolant["boundary_nodes"][0]])

    def coolant_temperature_C(self, state):
        """Mean coolant temperature seen by each strip, in flow order (None without stream)."""
        if self._coolant is None:
            return None
        return state[self._coolant["strip_nodes"]].copy()

    # -- several cells along one coolant path (explorer.module) -----------------------------
    def set_coolant_inlet_C(self, inlet_C: float) -> None:
        """Set the coolant temperature entering this cell for the steps that follow (degC).

        For an inlet that changes in time (an upstream cell's outlet history).
        The inlet is only a source term, so the cached factorisations stay valid.
        """
        b0 = self._inlet_node("set_coolant_inlet_C")
        self._s[b0] = float(_field("inlet_C", inlet_C, (), nonnegative=False))

    def _inlet_node(self, what: str) -> int:
        if self._coolant is None:
            raise InputError(f"cell {self.cell_name!r}: `{what}` needs a coolant stream in the "
                             f"sinks, got none")
        checked = getattr(self, "_first_cell_inlet", None)
        if checked is not None:  # the matrix never changes: one (slow) sparse look-up
            return checked
        b0, bS = self._coolant["boundary_nodes"][[0, -1]]
        if self._K[b0, bS] != 0:
            raise InputError(f"cell {self.cell_name!r}: `{what}` needs the sinks of the first "
                             f"cell on the coolant (`upstream_cells` = 0)")
        self._first_cell_inlet = int(b0)
        return int(b0)

    def step_series(self, states, heat_W, dt, tab_heat_W=None, inlet_C=None):
        """One backward-Euler step of ``m`` cells like this one, one after another on its coolant.

        Cell ``k``'s coolant inlet at the new time is cell ``k - 1``'s outlet at
        the new time (transit time neglected); the first cell's is ``inlet_C``
        (default this model's inlet). The cells share this model's matrix, so
        one factorisation serves them all: the system is block lower-triangular
        through the inlets only, and by linearity each cell's new state is its
        state at zero inlet plus the inlet times the response to a unit inlet
        (one solve per ``dt``, cached). The zero-inlet states come from one
        multi-right-hand-side solve (``m`` columns); the outlets are then
        chained exactly, cell after cell. Needs sinks with ``upstream_cells`` = 0.

        Parameters
        ----------
        states : array (m, n)
            Each cell's state.
        heat_W : array (m, ny, nx)
            Heat generated per grid cell, W, for each cell.
        dt : float
        tab_heat_W : None or sequence of m dicts (tab name -> W)
        inlet_C : float, optional

        Returns
        -------
        new_states : array (m, n)
        rejected_W : list of m dicts, as :meth:`step`
        """
        dt = float(dt)
        if not (dt > 0 and math.isfinite(dt)):
            raise InputError(f"`dt`: expected a time step > 0 s, got {dt!r}")
        states = np.asarray(states, dtype=float)
        if states.ndim != 2 or states.shape[1] != self._n:
            raise InputError(f"`states`: expected an array of shape (cells, {self._n}), "
                             f"got shape {states.shape}")
        m = states.shape[0]
        heat = np.asarray(heat_W, dtype=float)
        if heat.shape != (m, *self.grid.shape):
            raise InputError(f"`heat_W`: expected an array of shape {(m, *self.grid.shape)}, "
                             f"got shape {heat.shape}")
        if not np.isfinite(heat).all():
            raise InputError("`heat_W`: expected finite heat per grid cell, got NaN or inf")
        tabs = [None] * m if tab_heat_W is None else list(tab_heat_W)
        if len(tabs) != m:
            raise InputError(f"`tab_heat_W`: expected one dict per cell ({m}), got {len(tabs)}")
        dt_lu = self._stretched(dt)
        lu, c_dt = self._factor(dt_lu)
        rhs = np.empty((self._n, m), order="F")
        rhs[:] = self._s[:, None]
        rhs[: self._N] += heat.reshape(m, self._N).T
        for k, tab in enumerate(tabs):
            for name, value in (tab or {}).items():
                node = self._tab_nodes.get(name)
                if node is None:
                    check_choice("tab_heat_W key", name, tuple(self._tab_nodes))
                rhs[node, k] += value
        rhs += c_dt[:, None] * states.T
        if self._coolant is None:
            new = lu.solve(rhs)
        else:
            b0 = self._inlet_node("step_series")
            bS = self._coolant["boundary_nodes"][-1]
            if inlet_C is None:
                t_in = float(self._s[b0])
            elif type(inlet_C) is float and math.isfinite(inlet_C):  # checked cheaply: per step
                t_in = inlet_C
            else:
                t_in = float(_field("inlet_C", inlet_C, (), nonnegative=False))
            rhs[b0] = 0.0
            zero, unit = lu.solve(rhs), self._unit_inlet_response(dt_lu, lu, b0)
            inlets = np.empty(m)
            for k in range(m):
                inlets[k] = t_in
                t_in = zero[bS, k] + unit[bS] * t_in
            new = zero + np.multiply.outer(inlets, unit).T  # laid out as ``zero`` (columns)
        flows = (self._F @ new).T - self._F0
        names = self._flow_names
        return (np.ascontiguousarray(new.T),
                [dict(zip(names, row.tolist(), strict=True)) for row in flows])

    def _unit_inlet_response(self, dt, lu, b0) -> np.ndarray:
        """The state's response to a unit coolant inlet (1 degC, nothing else), per ``dt``."""
        cache = getattr(self, "_inlet_responses", None)
        if cache is None:
            cache = self._inlet_responses = OrderedDict()
        unit = cache.get(dt)
        if unit is None:
            e = np.zeros(self._n)
            e[b0] = 1.0
            unit = cache[dt] = lu.solve(e)
            if len(cache) > self._cache_size:
                cache.popitem(last=False)
        return unit

    def through_thickness_series(self, states, heat_W) -> dict:
        """:meth:`through_thickness_C` for several cells at once: ``states`` (m, n) and
        ``heat_W`` (m, ny, nx) give arrays (m, ny, nx), plus ``core`` (as
        :meth:`core_temperature_C`). One profile evaluation for all."""
        states = np.asarray(states, dtype=float)
        heat = np.asarray(heat_W, dtype=float)
        flux = [self.face_flux_W_m2(x) for x in states]
        T = states[:, : self._N].reshape(heat.shape)
        prof = tp.slab_profile(T, np.stack([f["front"] for f in flux]),
                               np.stack([f["back"] for f in flux]),
                               self.thickness_m, self.k_through_W_mK)
        core = T + heat * self._core_mean
        return {"front": prof["front"], "back": prof["back"],
                "hottest": np.maximum(prof["max"], core), "coldest": prof["min"], "core": core}

    def __repr__(self) -> str:
        names = ", ".join(f.name for f in self._flows) or "adiabatic"
        return (f"<PlaneThermal {self.cell_name!r} {self.grid.nx}x{self.grid.ny}"
                f"{' + fin' if self._fin_nodes is not None else ''}: {names}>")
