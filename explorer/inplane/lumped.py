"""The single-temperature thermal model: the whole cell at one temperature.

It meets the thermal-model contract of :mod:`explorer.inplane.base` on a
1 x 1 grid, so the stepper drives it exactly like the 2-D field. Each sink of
a :class:`~explorer.inplane.sinks.Sinks` becomes one conductance to its
(area- or length-averaged) temperature; a fin sheet is taken in series with
its contact, and its heat capacity joins the cell's (it warms with the cell); a coolant stream is met at its mean temperature along this cell,
which for a lumped cell is solved in closed form (see ``_stream_factor``). The
temperature is the through-thickness mean, as in the 2-D field: face paths
carry the mean-to-face resistance of :mod:`explorer.inplane.throughplane`.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from explorer.inplane.grid import Grid
from explorer.inplane.sinks import FACES
from explorer.inplane.throughplane import (
    core_mean_factor,
    core_surface_factor,
    face_depths,
    mean_to_face_resistance,
    slab_profile,
)
from explorer.validators import InputError, check_finite


def _mean(v) -> float:
    return float(np.mean(v))


class LumpedThermal:
    """Lumped-capacitance model of the whole cell: backward Euler, or (``fitted=True``) its
    exact solution over each step.

    Fitted, ``C dT/dt = q - sum G_i (T - T_i)`` is solved exactly over a step with the heat
    held constant (the exponential of the lumped-capacitance method, Incropera & DeWitt
    §5.2; backward Euler fitted to the one eigenvalue, Liniger & Willoughby 1970), so a rest
    cools with the body's own time constant ``C / sum G_i`` on any step size (backward
    Euler's decay rate is off by about ``dt / 2 tau``). :meth:`step` returns the heat flows
    at the new state; fitted, their mean over the step is generated less stored (exact).
    :func:`explorer.simulate` and :func:`explorer.simulate_module` use the fitted step.
    """

    # a step costs a few float operations whatever its size: nothing to reuse between steps
    # of one size, so the stepper takes the sizes its error control asks for
    factorises_per_step_size = False

    def __init__(self, cell, sinks=None, *, fitted: bool = False):
        g = cell.geometry
        self.grid = Grid.single(g.width_m, g.height_m)
        self.heat_capacity_J_per_K = cell.derived.heat_capacity_J_K
        self._C = self.heat_capacity_J_per_K  # what the one temperature stores (fin included)
        self._thickness = g.stack_thickness_m
        self._k_through = cell.derived.throughplane_conductivity_W_mK
        self._paths = []  # (sink name, conductance W/K, sink temperature degC)
        area = g.width_m * g.height_m
        edge_length = {"bottom": g.width_m, "top": g.width_m, "left": g.height_m,
                       "right": g.height_m}
        self._stream = None
        self._area = area
        self._faces_of = {}  # path name -> [(face, share of its heat flow through that face)]
        # through-plane: the lumped temperature is the stack's mean, so each face path gets
        # the mean-to-face resistance d/(3k) in series (explorer.inplane.throughplane)
        self._d = (0.0, 0.0)
        if sinks is not None:
            fin = sinks.fin
            if fin is not None:  # the fin sheet warms with the cell: its heat capacity joins in
                self._C += (fin.density_kg_m3 * fin.specific_heat_J_kgK * fin.thickness_m * area)
            u = {f: _mean(s.h_W_m2K) for f, s in sinks.faces.items()}
            fin_edges = [e for e in sinks.edges.values() if e.layer == "fin"]
            if fin is not None and fin_edges:
                u[fin.face] = u.get(fin.face, 0.0) + fin.contact_W_m2K
            self._d = tuple(float(d) for d in face_depths(
                u.get("front", 0.0), u.get("back", 0.0), self._thickness, ()))
            depth = dict(zip(FACES, self._d, strict=True))
            r_face = {f: float(mean_to_face_resistance(depth[f], self._k_through)) for f in FACES}
            for name, f in sinks.faces.items():
                h = _mean(f.h_W_m2K)
                self._paths.append((name, area / (1.0 / h + r_face[name]) if h > 0 else 0.0,
                                    _mean(f.temperature_C)))
                self._faces_of[name] = [(name, 1.0)]
            for name, e in sinks.edges.items():
                G = _mean(e.conductance_W_mK) * edge_length[name]
                if e.layer == "fin" and fin is not None:
                    G = 1.0 / (1.0 / G + (1.0 / fin.contact_W_m2K + r_face[fin.face]) / area)
                    self._faces_of[name] = [(fin.face, 1.0)]  # into the fin through its face
                self._paths.append((name, G, _mean(e.temperature_C)))
            for name, t in sinks.tabs.items():
                self._paths.append((name, t.conductance_W_K, t.temperature_C))
            self._stream = sinks.coolant
        stream = self._stream
        if stream is not None:  # the sinks on the coolant become one path to it
            on = [p for p in self._paths if p[0] in stream.sink_names]
            self._paths = [p for p in self._paths if p[0] not in stream.sink_names]
            G = sum(p[1] for p in on)
            self._paths.append((stream.name, G * _stream_factor(G, stream), stream.inlet_C))
            # one coolant temperature for all its sinks: they share its flow as their conductances
            self._faces_of[stream.name] = [(face, share * p[1] / G) for p in on if G > 0
                                           for face, share in self._faces_of.get(p[0], [])]
        self._names = [p[0] for p in self._paths]
        self._G = np.array([p[1] for p in self._paths], dtype=float)
        self._Ts = np.array([p[2] for p in self._paths], dtype=float)
        self._G_sum = float(self._G.sum())
        self._sink_terms()
        self.fitted = bool(fitted)
        self._outlet_rise_per_W = None
        if self._stream is not None:
            self._outlet_rise_per_W = (self._stream.upstream_cells + 1) / self._stream.capacity_rate_W_K

    def initial_state(self, temperature_C: float) -> np.ndarray:
        return np.array([float(temperature_C)])

    def _sink_terms(self) -> None:
        """The sinks as plain floats for :meth:`step` (called again when a sink temperature
        changes): a step costs a few float operations, where numpy's per-call cost on
        one-element arrays would be most of it."""
        self._GTs = float(self._G @ self._Ts)
        self._sink_floats = list(zip(self._names, self._G.tolist(), self._Ts.tolist(),
                                     strict=True))

    def step(self, state, heat_W, dt, tab_heat_W=None):
        if isinstance(heat_W, np.ndarray):
            q = heat_W.item() if heat_W.size == 1 else float(heat_W.sum())
        else:
            q = float(np.sum(heat_W))
        if tab_heat_W:
            q += sum(tab_heat_W.values())
        T_new = self._advance(float(state[0]), q, dt, self._GTs)
        # G (T - Ts) in floats: the same IEEE operations as on the arrays
        return np.array([T_new]), {name: G * (T_new - Ts) for name, G, Ts in self._sink_floats}

    def max_temperature_C(self, state) -> float:
        """The hottest point of the (one) mean temperature, as ``temperature_C(state).max()``."""
        return float(state[0])

    def _advance(self, T0, q, dt, GTs) -> float:
        """The temperature after ``dt`` with heat ``q``, sinks at fixed temperatures (``GTs`` =
        sum G_i T_i): backward Euler, or fitted, the exact solution."""
        C, G = self._C, self._G_sum
        if not self.fitted:
            return (C * T0 / dt + q + GTs) / (C / dt + G)
        if not G > 0.0:  # adiabatic: a straight line
            return T0 + q * dt / C
        T_eq = (q + GTs) / G
        return T_eq + (T0 - T_eq) * math.exp(-dt * G / C)

    def temperature_C(self, state) -> np.ndarray:
        return state.reshape(1, 1)

    def mean_temperature_C(self, state) -> float:
        return float(state[0])

    def stored_J(self, state) -> float:
        return self._C * float(state[0])

    def coolant_outlet_C(self, state) -> float | None:
        """Coolant leaving this cell: inlet plus what this and the upstream cells put in."""
        if self._stream is None:
            return None
        i = self._names.index(self._stream.name)
        into_stream = self._G[i] * (float(state[0]) - self._Ts[i])
        return self._stream.inlet_C + self._outlet_rise_per_W * into_stream

    def face_flux_W_m2(self, state) -> dict:
        """Heat flux leaving the cell through each face (W m-2), as 1 x 1 arrays."""
        flows = self._G * (float(state[0]) - self._Ts)
        out = {face: 0.0 for face in FACES}
        for name, w in zip(self._names, flows.tolist(), strict=True):
            for face, share in self._faces_of.get(name, []):
                out[face] += share * w / self._area
        return {face: np.full((1, 1), q) for face, q in out.items()}

    def through_settling(self) -> dict:
        """``tau_s`` and ``cooled`` for :func:`explorer.inplane.throughplane.settle_extremes`."""
        from explorer.inplane.throughplane import settling_time_s

        volume = self._area * self._thickness
        return {"tau_s": settling_time_s(max(self._d), self._k_through,
                                         self.heat_capacity_J_per_K / volume),
                "cooled": {f: d > 0.0 for f, d in zip(FACES, self._d, strict=True)}}

    def through_thickness_C(self, state, heat_W) -> dict:
        """Face temperatures and the extremes through the thickness (degC), 1 x 1 arrays.

        As :meth:`explorer.inplane.thermal.PlaneThermal.through_thickness_C`:
        the parabolic profile through the thickness from the one (mean)
        temperature and the face heat flows, the hottest point never below the
        core estimate. There is no in-plane variation to see.
        """
        flux = self.face_flux_W_m2(state)
        prof = slab_profile(self.temperature_C(state), flux["front"], flux["back"],
                            self._thickness, self._k_through)
        core = self.core_temperature_C(state, heat_W)
        return {"front": prof["front"], "back": prof["back"],
                "hottest": np.maximum(prof["max"], core), "coldest": prof["min"]}

    def _q_volumetric(self, heat_W) -> float:
        return float(np.sum(heat_W)) / (self.grid.area_m2 * self._thickness)

    def core_surface_difference_K(self, heat_W) -> np.ndarray:
        """Plane wall with uniform generation (Incropera & DeWitt §3.5): q d^2/(2k) over the
        deeper conduction depth (L/2 cooled on both faces, L on one); none if no face is cooled."""
        d_front, d_back = self._d
        return np.full((1, 1), self._q_volumetric(heat_W)
                       * float(core_surface_factor(d_front, d_back, self._k_through)))

    def core_temperature_C(self, state, heat_W) -> np.ndarray:
        """Hottest through-plane temperature: the mean plus the core-to-mean rise."""
        d_front, d_back = self._d
        rise = self._q_volumetric(heat_W) * float(
            core_mean_factor(d_front, d_back, self._thickness, self._k_through))
        return np.full((1, 1), float(state[0]) + rise)

    def recorded_figures(self, states, heat_W) -> dict:
        """What the stepper records of many states at once (as the single-state methods).

        ``states`` (m, 1), ``heat_W`` (m, 1, 1): ``temperature`` (m, 1, 1), and per state
        ``core_difference`` (K), ``hottest``, ``coldest``, ``front_max``, ``front_min``,
        ``back_max``, ``back_min`` (degC), ``through_difference`` (K), ``coolant_outlet``
        (degC, NaN without a coolant stream) and ``stored_J``.
        """
        T = np.asarray(states, dtype=float).reshape(-1)
        q = np.asarray(heat_W, dtype=float).reshape(T.size, -1).sum(axis=1)
        flux = {face: np.zeros(T.size) for face in FACES}
        for name, G, Ts in zip(self._names, self._G, self._Ts, strict=True):
            for face, share in self._faces_of.get(name, []):
                flux[face] += share * G * (T - Ts) / self._area
        prof = slab_profile(T, flux["front"], flux["back"], self._thickness, self._k_through)
        d_front, d_back = self._d
        rise = q / (self.grid.area_m2 * self._thickness) * float(
            core_mean_factor(d_front, d_back, self._thickness, self._k_through))
        hottest = np.maximum(prof["max"], T + rise)
        outlet = np.full(T.size, np.nan)
        if self._stream is not None:
            i = self._names.index(self._stream.name)
            outlet = self._stream.inlet_C + self._outlet_rise_per_W * self._G[i] * (T - self._Ts[i])
        return {"temperature": T.reshape(-1, 1, 1), "core_difference": rise,
                "hottest": hottest, "coldest": prof["min"], "front_max": prof["front"],
                "front_min": prof["front"], "back_max": prof["back"], "back_min": prof["back"],
                "through_difference": hottest - prof["min"], "coolant_outlet": outlet,
                "stored_J": self._C * T}

    # -- several cells along one coolant path (explorer.module) -----------------------------
    def _stream_index(self, what: str) -> int:
        if self._stream is None:
            raise InputError(f"`{what}` needs a coolant stream in the sinks, got none")
        if self._stream.upstream_cells:
            raise InputError(f"`{what}` needs the sinks of the first cell on the coolant "
                             f"(`upstream_cells` = 0), got {self._stream.upstream_cells}")
        return self._names.index(self._stream.name)

    def set_coolant_inlet_C(self, inlet_C: float) -> None:
        """Set the coolant temperature entering this cell for the steps that follow (degC)."""
        i = self._stream_index("set_coolant_inlet_C")
        value = check_finite("inlet_C", inlet_C, "degC")
        self._Ts[i] = value
        self._sink_terms()
        self._stream = replace(self._stream, inlet_C=value)

    def step_series(self, states, heat_W, dt, tab_heat_W=None, inlet_C=None):
        """One step (the exact solution, as :meth:`step`) of ``m`` cells like this one, one
        after another on its coolant.

        As :meth:`explorer.inplane.thermal.PlaneThermal.step_series`: cell
        ``k``'s inlet at the new time is cell ``k - 1``'s outlet at the new
        time (transit time neglected), ``inlet_C`` the first cell's (default
        this model's). ``states`` (m, 1), ``heat_W`` (m, 1, 1); returns the new
        states (m, 1) and one dict of sink heat flows per cell.
        """
        states = np.asarray(states, dtype=float).reshape(-1, 1)
        m = states.shape[0]
        heat = np.asarray(heat_W, dtype=float).reshape(m, -1).sum(axis=1)
        tabs = [None] * m if tab_heat_W is None else list(tab_heat_W)
        G = self._G
        Ts = self._Ts.copy()
        i = None
        if self._stream is not None:
            i = self._stream_index("step_series")
            t_in = Ts[i] if inlet_C is None else check_finite("inlet_C", inlet_C, "degC")
        new, rejected = np.empty((m, 1)), []
        for k in range(m):
            if i is not None:
                Ts[i] = t_in
            q = heat[k] + (sum(tabs[k].values()) if tabs[k] else 0.0)
            T_new = self._advance(float(states[k, 0]), q, dt, float(G @ Ts))
            flows = G * (T_new - Ts)
            new[k, 0] = T_new
            rejected.append(dict(zip(self._names, flows.tolist(), strict=True)))
            if i is not None:
                t_in = t_in + flows[i] / self._stream.capacity_rate_W_K
        return new, rejected


def _stream_factor(G: float, stream) -> float:
    """Effective-conductance factor of a sink whose coolant warms along the cell.

    The coolant meets this cell at ``T_in + k Q/C`` (k upstream cells like
    this one, each rejecting Q) and leaves at ``T_in + (k+1) Q/C``; taking the
    cell against the mean, ``Q = G (T - T_in - (k + 1/2) Q/C)``, so
    ``Q = G (T - T_in) / (1 + (k + 1/2) G / C)``.
    """
    return 1.0 / (1.0 + (stream.upstream_cells + 0.5) * G / stream.capacity_rate_W_K)
