"""``explorer.simulate_module``: every cell on one coolant path, run as one module.

Cells that share a cold plate's coolant one after another see successively
warmer coolant, so they do not run alike: the first cell the coolant meets is
the coolest, the last the warmest. :func:`simulate_module` runs them all in
one go, coupled the way the hardware couples them:

* electrically in series: every cell carries the same current; the duty's
  current, voltage and power are per cell (a voltage hold holds the string
  at ``cells x`` the voltage, so the mean cell voltage is held; a power step
  draws ``cells x`` the power), and its voltage end conditions apply to the
  mean cell voltage (string voltage / cells); temperature end conditions
  and the stepper's temperature cap see the hottest cell;
* thermally along the coolant: cell ``k``'s coolant inlet at each time step is
  cell ``k - 1``'s outlet at that step. The coolant's transit time through a
  cell is neglected (seconds against a thermal time constant of many
  minutes), so the coolant path has no delay or storage of its own.

How it runs (see :class:`ModuleThermal` and :class:`ModuleRods`): the cells
differ only in their coolant, so they share one thermal operator (matrix and
factorisation): each implicit step is one multi-right-hand-side solve with
the outlets chained exactly (``step_series`` of the thermal models). The
rods (one per cell, each at its own cell's area-mean temperature, all at the
string current) are presented to the ordinary stepper of
:mod:`explorer.stepping.run` as one composite rod, and the cells' thermal
fields as one composite field stacked along ``y``, the way the distributed
layout presents its grid of rods. So the time stepping, end conditions,
status and energy integrals are the single-cell ones.

What is kept per cell: the temperature field and the heat flux field, and
every time series of :func:`explorer.simulate` that belongs to one cell. The
SOC and current-density fields are dropped (per-cell ``soc_mean`` stays; in
the ``single`` and ``averaged`` layouts they are uniform over a cell anyway).
The heat split by source (``heat_irreversible`` ...) and the running energy
integrals are for the whole module (summed over the cells); per-cell heat is
``heat_total``. The two fields take ``2 x cells x times x nx x ny x 8`` bytes
(12 cells, 186 times on 48 x 32: 55 MB); set ``output_interval_s`` to record
fewer times.
"""

from __future__ import annotations

import logging

import numpy as np
import xarray as xr

from explorer import duty as _duty
from explorer.inplane.grid import Grid
from explorer.results import THROUGH_VARIABLES
from explorer.rod.base import Control, RodStepError
from explorer.rod.control import solve_current
from explorer.simulate import (
    ELECTROCHEMISTRY,
    LAYOUTS,
    _cell,
    _choice,
    _grid,
    _number,
    _settings,
    cell_pieces,
    run_attrs,
)
from explorer.stepping.distributed import FieldStepResult
from explorer.stepping.run import HEAT_KEYS, check_output_interval, output_interval, run

__all__ = ["simulate_module", "ModuleThermal", "ModuleRods", "module_cells"]

log = logging.getLogger(__name__)

THROUGH_KEYS = ("hottest", "coldest", "front_max", "front_min", "back_max", "back_min",
                "through_difference")


def module_cells(cooling) -> int:
    """How many cells share the coolant path of ``cooling`` (1 without a coolant path)."""
    if cooling is None or not hasattr(cooling, "cells_in_series"):
        return 1
    return int(cooling.cells_in_series())


def simulate_module(cell, duty, cooling, electrochemistry: str = "spme",
                    layout: str = "averaged", start_soc: float = 1.0,
                    start_temperature_C: float = 25.0, *, grid=None,
                    output_interval_s: float | None = None, mesh: dict | None = None,
                    progress=None) -> xr.Dataset:
    """Run every cell that shares the coolant path of ``cooling`` as one module.

    The cells are in series electrically (one current) and one after another
    on the coolant: cell ``k``'s coolant inlet at each time step is cell
    ``k - 1``'s outlet at that step (coolant transit time neglected). See the
    module docstring for what is per cell and what is for the whole module.

    Parameters
    ----------
    cell, duty, cooling, electrochemistry, layout, start_soc, start_temperature_C,
    grid, output_interval_s, mesh, progress
        As :func:`explorer.simulate` (the duty is per cell; every cell starts
        at the same state). The distributed layout runs a grid of rods in
        each cell (about 25 times the cost per cell).

    Returns
    -------
    xarray.Dataset
        Dimension ``cell`` (0 = the first cell the coolant meets). Shared over
        the module (time): ``voltage`` (mean cell voltage), ``current``,
        ``power`` and ``energy_delivered`` (per cell), ``charge_delivered``,
        and, summed over the cells, the heat split by source and the running
        heat integrals. Per cell (cell, time): ``temperature_max``,
        ``_min``, ``_mean``, ``_core_max``, ``_hottest``, ``_coldest``, the face
        extremes, ``through_thickness_difference``, ``heat_total``,
        ``heat_rejected``, ``heat_to_<sink>``, ``heat_stored``, ``soc_mean``,
        ``coolant_inlet``, ``coolant_outlet``; fields (cell, time, y, x):
        ``temperature``, ``heat_flux``. ``attrs["module_cells"]`` is the
        number of cells and ``attrs["status"]`` holds for the whole module.
        A design without a coolant path gives the same layout with one cell.

    Examples
    --------
    >>> plate = explorer.cooling.cold_plate("eg50", 2.0, 25.0, cells_per_plate=12)  # doctest: +SKIP
    >>> ds = explorer.simulate_module(cell, explorer.duty.discharge(c_rate=1.0),
    ...                               explorer.cooling.face_plate(plate))  # doctest: +SKIP
    >>> ds.temperature_mean.max("time")       # one peak per cell        # doctest: +SKIP
    """
    cell = _cell(cell)
    electrochemistry = _choice("electrochemistry", electrochemistry, ELECTROCHEMISTRY)
    layout = _choice("layout", layout, LAYOUTS)
    start_soc = _number("start_soc", start_soc, 0.0, 1.0)
    start_temperature_C = _number("start_temperature_C", start_temperature_C, -40.0, 80.0)
    output_interval_s = output_interval(output_interval_s, "simulate_module")
    steps = [_duty.resolve(s, cell) for s in _duty.as_steps(duty)]
    check_output_interval(steps, output_interval_s, where="simulate_module")
    g = cell.geometry
    the_grid = Grid.single(g.width_m, g.height_m) if layout == "single" else _grid(
        g.width_m, g.height_m, grid)
    cells = module_cells(cooling)
    sinks = _first_sinks(cooling, cell, the_grid)

    rod, thermal, coupling, r_collector, rod_grid = cell_pieces(
        cell, electrochemistry, layout, the_grid, sinks, mesh)
    module_thermal = ModuleThermal(thermal, cells, sinks)
    module_rod = ModuleRods.from_pieces(rod, cells, the_grid, coupling)
    record = run(module_rod, module_thermal, steps, start_soc=start_soc,
                 start_temperature_C=start_temperature_C,
                 settings=_settings(cell, output_interval_s), progress=progress)
    per_cell = module_thermal.recorded(record)
    _settle_cells(record.time, per_cell, thermal)
    attrs = run_attrs(cell, cooling, steps, electrochemistry=electrochemistry, layout=layout,
                      start_soc=start_soc, start_temperature_C=start_temperature_C,
                      thermal=thermal, r_collector=r_collector,
                      output_interval_s=output_interval_s,
                      into_coolant_W=_mean_into_coolant(per_cell), mesh=mesh, rod_grid=rod_grid)
    attrs.update({
        "module_cells": cells,
        "module_coupling": ("cells in series (one current; voltage = string voltage / cells); "
                            "cell k's coolant inlet = cell k-1's outlet at each time step "
                            "(coolant transit time neglected)"),
    })
    return _dataset(record, per_cell, cell=cell, grid=the_grid, cells=cells, attrs=attrs)


def _first_sinks(cooling, cell, grid):
    """Heat paths of the first cell on the coolant (no upstream cells)."""
    from explorer.simulate import _sinks

    return _sinks(cooling, cell, grid, 0)


def _mean_into_coolant(per_cell) -> float:
    """Mean heat one cell puts into the coolant (over cells and recorded times), W."""
    q = per_cell.get("coolant_W")
    return float(np.mean(q)) if q is not None and q.size else 0.0


# ---------------------------------------------------------------------------------------
class ModuleThermal:
    """The thermal fields of ``cells`` identical cells on one coolant path, as one model.

    Meets the thermal-model contract of :mod:`explorer.inplane.base` for the
    stepper: its grid is the cells' grids stacked along ``y`` (cell ``k`` in
    rows ``k ny .. (k + 1) ny - 1``), its state one row per cell. A step is
    ``model.step_series`` (one factorisation for all cells, outlets chained).

    Per-cell figures are kept under a fingerprint of the stacked temperature
    field: the heat flows (which come with the step) for every state a step
    produces, the rest (core, faces, hottest and coldest, coolant in and out,
    stored heat) when the stepper asks for the recorded states' figures: all
    at once when the run ends (:meth:`recorded_figures`, vectorised over cells
    and states for the 2-D field), or one state at a time through
    :meth:`core_temperature_C` (a stepper without the batched path).
    :meth:`recorded` looks the stepper's recorded fields up, so the per-cell
    figures are those of exactly the recorded states.
    """

    # per-cell figures a model's batched ``recorded_figures`` gives (besides the coolant)
    _CELL_KEYS = ("core_max", "hottest", "coldest", "front_max", "front_min", "back_max",
                  "back_min", "through_difference", "stored_J")
    # state values per call of the model's ``recorded_figures``: its temporaries then stay
    # in the processor's cache (larger calls ran slower, 48 x 32 grid)
    _BATCH_VALUES = 40_000

    def __init__(self, model, cells: int, sinks):
        self.model = model
        self.cells = int(cells)
        g = model.grid
        self.cell_grid = g
        self.grid = Grid(g.width_m, g.height_m * self.cells, g.nx, g.ny * self.cells)
        self.heat_capacity_J_per_K = self.cells * model.heat_capacity_J_per_K
        self.stream = sinks.coolant
        self.inlet_C = None if self.stream is None else float(self.stream.inlet_C)
        self._flows, self._through_figures, self._through_parts = {}, {}, []
        self._last_through = None
        self._sheet = None  # whether a cell's field is the first nx ny values of its state
        n = g.nx * g.ny * self.cells
        self._probe = np.unique(np.linspace(0, n - 1, min(n, 97)).astype(int))

    # -- the contract ------------------------------------------------------------------
    @property
    def factorises_per_step_size(self) -> bool:
        """As the cell's own model (the stepper keeps the steps on a ladder of sizes if so)."""
        return getattr(self.model, "factorises_per_step_size", True)

    def initial_state(self, temperature_C: float) -> np.ndarray:
        """Every cell at ``temperature_C``; each cell's coolant nodes fed by the one before."""
        m = self.model
        if self.stream is None:
            states = [m.initial_state(temperature_C)] * self.cells
        else:
            states, t_in = [], self.inlet_C
            try:
                for _ in range(self.cells):
                    m.set_coolant_inlet_C(t_in)
                    states.append(m.initial_state(temperature_C))
                    t_in = m.coolant_outlet_C(states[-1])
            finally:
                m.set_coolant_inlet_C(self.inlet_C)
        x = np.array(states, dtype=float)
        self._keep_flows(x, np.zeros(self.cells), None)
        return x

    def step(self, state, heat_W, dt, tab_heat_W=None):
        heat = self._blocks(heat_W)
        tabs = None
        if tab_heat_W:
            tabs = [{} for _ in range(self.cells)]
            for (k, name), w in tab_heat_W.items():
                tabs[k][name] = w
        new, rejected = self.model.step_series(state, heat, dt, tabs, inlet_C=self.inlet_C)
        total = {}
        for flows in rejected:
            for name, w in flows.items():
                total[name] = total.get(name, 0.0) + w
        generated = heat.sum(axis=(1, 2))
        if tabs:
            generated += [sum(t.values()) for t in tabs]
        self._keep_flows(new, generated, rejected)
        return new, total

    def temperature_C(self, state) -> np.ndarray:
        state = np.asarray(state)
        if self._sheet is None:  # asked once: the 2-D field's state starts with its sheet
            probe = np.arange(state.shape[1], dtype=float)
            size = self.cell_grid.nx * self.cell_grid.ny
            self._sheet = bool(np.array_equal(np.ravel(self.model.temperature_C(probe)),
                                              probe[:size]))
        if self._sheet:  # the same values as the cells' fields stacked, in one slice
            return np.array(state[:, : self.cell_grid.nx * self.cell_grid.ny],
                            dtype=float).reshape(self.grid.shape)
        return np.concatenate([self.model.temperature_C(x) for x in state], axis=0)

    def mean_temperature_C(self, state) -> float:
        return float(np.mean([self.model.mean_temperature_C(x) for x in state]))

    def stored_J(self, state) -> float:
        return float(sum(self.model.stored_J(x) for x in state))

    def _blocks(self, heat_W):
        return np.asarray(heat_W, dtype=float).reshape(self.cells, *self.cell_grid.shape)

    def core_surface_difference_K(self, heat_W) -> np.ndarray:
        return np.concatenate([self.model.core_surface_difference_K(h)
                               for h in self._blocks(heat_W)], axis=0)

    def core_temperature_C(self, state, heat_W) -> np.ndarray:
        """Every cell's core estimate, stacked. The stepper asks for it once per recorded
        state: the per-cell through-thickness figures are taken here, for :meth:`recorded`."""
        return self._record_through(state, heat_W)["core"]

    def through_thickness_C(self, state, heat_W) -> dict:
        """Face temperatures and the through-thickness extremes, every cell stacked."""
        tt = self._record_through(state, heat_W)
        return {k: v for k, v in tt.items() if k != "core"}

    def recorded_figures(self, states, heat_W) -> dict:
        """The stepper's figures of many recorded states at once (contract item 7 of
        :mod:`explorer.inplane.base`), as the single-state members give them; each state's
        per-cell figures are kept by fingerprint for :meth:`recorded`.

        ``states`` (m, cells x n): each recorded module state flattened; ``heat_W``
        (m, cells ny, nx). Every figure depends on the state alone: each cell's coolant
        inlet and outlet are read from that state (the 2-D field holds them as nodes) or,
        for a model without coolant nodes, chained from the module's inlet, which does not
        change during a run.
        """
        x = np.asarray(states, dtype=float)
        m = x.shape[0]
        x = x.reshape(m, self.cells, -1)
        heat = np.asarray(heat_W, dtype=float).reshape(m, self.cells, *self.cell_grid.shape)
        per, T = self._cell_figures(x, heat)
        self._keep_through([self._key(t) for t in T], per)
        outlet = per["outlet"][:, -1] if self.stream is not None else np.full(m, np.nan)
        return {"temperature": T,
                "core_difference": per["core_max"].max(axis=1) - T.reshape(m, -1).max(axis=1),
                "hottest": per["hottest"].max(axis=1), "coldest": per["coldest"].min(axis=1),
                "front_max": per["front_max"].max(axis=1),
                "front_min": per["front_min"].min(axis=1),
                "back_max": per["back_max"].max(axis=1), "back_min": per["back_min"].min(axis=1),
                "through_difference": per["through_difference"].max(axis=1),
                "coolant_outlet": outlet, "stored_J": per["stored_J"].sum(axis=1)}

    def _cell_figures(self, x, heat):
        """Per-cell figures of ``m`` module states, name -> (m, cells), and the stacked
        temperature fields (m, cells ny, nx): in one vectorised pass where the cell's model
        has a batched ``recorded_figures`` and holds its coolant in its state (the 2-D
        field), else state by state as :meth:`core_temperature_C` takes them."""
        model = self.model
        m, cells = x.shape[:2]
        if (getattr(type(model), "recorded_figures", None) is not None
                and hasattr(model, "coolant_inlet_C")):
            rows, q = x.reshape(m * cells, -1), heat.reshape(m * cells, *heat.shape[2:])
            n = max(1, self._BATCH_VALUES // rows.shape[1])
            parts = [model.recorded_figures(rows[i:i + n], q[i:i + n])
                     for i in range(0, m * cells, n)]
            if all("core_max" in p for p in parts):
                def joined(key):
                    return np.concatenate([p[key] for p in parts])

                per = {k: joined(k).reshape(m, cells) for k in self._CELL_KEYS}
                if self.stream is not None:
                    per["inlet"] = joined("coolant_inlet").reshape(m, cells)
                    per["outlet"] = joined("coolant_outlet").reshape(m, cells)
                return per, joined("temperature").reshape(m, -1, self.grid.nx)
        figures = [self._state_figures(s, h)[1] for s, h in zip(x, heat, strict=True)]
        per = {k: np.stack([f[k] for f in figures]) for k in figures[0]}
        return per, np.stack([self.temperature_C(s) for s in x])

    def _record_through(self, state, heat_W) -> dict:
        """The stacked through-thickness fields of ``state`` (kept for the last state asked
        about, which the stepper asks twice) and its per-cell extremes (kept by fingerprint)."""
        key = self._key(self.temperature_C(state))
        heat = self._blocks(heat_W)
        last = self._last_through
        if last is not None and last[0] == key and np.array_equal(last[1], heat):
            return last[2]
        tt, figures = self._state_figures(state, heat)
        self._keep_through([key], {k: v[None] for k, v in figures.items()})
        ny, nx = self.cell_grid.shape
        stacked = {k: v.reshape(self.cells * ny, nx) for k, v in tt.items()}
        self._last_through = (key, heat, stacked)
        return stacked

    def _state_figures(self, state, heat):
        """One module state's through-thickness fields (cells, ny, nx) and its per-cell
        figures (name -> (cells,)): the single-state path."""
        tt = self._through(state, heat)
        if "core" not in tt:
            tt["core"] = np.stack([self.model.core_temperature_C(x, h)
                                   for x, h in zip(state, heat, strict=True)])
        figures = {
            "stored_J": np.array([self.model.stored_J(x) for x in state]),
            **dict(zip(("inlet", "outlet"), self._coolant(state) if self.stream else ())),
            "core_max": tt["core"].max(axis=(1, 2)),
            "hottest": tt["hottest"].max(axis=(1, 2)),
            "coldest": tt["coldest"].min(axis=(1, 2)),
            "front_max": tt["front"].max(axis=(1, 2)),
            "front_min": tt["front"].min(axis=(1, 2)),
            "back_max": tt["back"].max(axis=(1, 2)),
            "back_min": tt["back"].min(axis=(1, 2)),
            "through_difference": (tt["hottest"] - tt["coldest"]).max(axis=(1, 2)),
        }
        return tt, figures

    def _keep_through(self, keys, per) -> None:
        """Keep per-cell figures (name -> (len(keys), cells)) under the states' fingerprints."""
        part = len(self._through_parts)
        self._through_parts.append(per)
        for j, key in enumerate(keys):
            self._through_figures[key] = (part, j)

    def coolant_outlet_C(self, state):
        """Coolant leaving the module (the last cell)."""
        if self.stream is None:
            return None
        return float(self._coolant(state)[1][-1])

    # -- per-cell figures --------------------------------------------------------------
    def _through(self, state, heat) -> dict:
        """(cells, ny, nx) arrays of the face temperatures and through-thickness extremes."""
        m = self.model
        one = getattr(m, "through_thickness_C", None)
        batched = getattr(m, "through_thickness_series", None)
        if batched is not None and one is not None:
            return batched(state, heat)
        parts = []
        for x, h in zip(state, heat, strict=True):
            if one is not None:
                parts.append(one(x, h))
            else:  # a model without surfaces: the mean field and the core
                T = m.temperature_C(x)
                parts.append({"front": T, "back": T, "coldest": T,
                              "hottest": np.maximum(T, m.core_temperature_C(x, h))})
        return {k: np.stack([p[k] for p in parts]) for k in parts[0]}

    def _coolant(self, state):
        """(inlets, outlets) per cell: the coolant nodes where the state holds them, else
        (the lumped model) each outlet from the inlet and the cell's state."""
        m, cells = self.model, len(state)
        inlets, outlets = np.empty(cells), np.empty(cells)
        if hasattr(m, "coolant_inlet_C"):
            for k, x in enumerate(state):
                inlets[k], outlets[k] = m.coolant_inlet_C(x), m.coolant_outlet_C(x)
            return inlets, outlets
        t_in = self.inlet_C
        try:
            for k, x in enumerate(state):
                m.set_coolant_inlet_C(t_in)
                inlets[k], outlets[k] = t_in, m.coolant_outlet_C(x)
                t_in = outlets[k]
        finally:
            m.set_coolant_inlet_C(self.inlet_C)
        return inlets, outlets

    def _key(self, field) -> bytes:
        """Fingerprint of a stacked field: 97 spread values and the sum of all."""
        flat = np.asarray(field, dtype=float).ravel()
        return flat[self._probe].tobytes() + flat.sum().tobytes()

    def _keep_flows(self, state, generated, rejected) -> None:
        """The heat flows of a state a step produced (they come with the step, free)."""
        cells = len(state)
        fig = {"generated_W": np.asarray(generated, dtype=float), "rejected_W": np.zeros(cells)}
        sinks = {}
        for k, flows in enumerate(rejected or ()):
            fig["rejected_W"][k] = sum(flows.values())
            for name, w in flows.items():
                sinks.setdefault(name, np.zeros(cells))[k] = w
        fig["sinks"] = sinks
        self._flows[self._key(self.temperature_C(state))] = fig

    def recorded(self, record) -> dict:
        """Per-cell figures at the record's times: name -> array (cells, time); the mean
        field's extremes from the recorded fields themselves."""
        rows, where = [], []
        for T in record.temperature:
            key = self._key(T)
            flows, through = self._flows.get(key), self._through_figures.get(key)
            if flows is None or through is None:
                raise RuntimeError("module: a recorded temperature field matches no state the "
                                   "module's thermal steps produced and recorded (has the "
                                   "stepper's contract changed?)")
            rows.append(flows)
            where.append(through)
        parts = self._through_parts
        self._flows, self._through_figures, self._through_parts = {}, {}, []
        self._last_through = None
        out = {k: np.stack([r[k] for r in rows], axis=1) for k in rows[0] if k != "sinks"}
        start = np.cumsum([0] + [len(p["stored_J"]) for p in parts])
        at = [start[p] + j for p, j in where]
        for k in parts[0]:  # every recorded state's row, in the record's order
            out[k] = np.concatenate([p[k] for p in parts])[at].T
        fields = np.stack(record.temperature).reshape(len(rows), self.cells, -1)
        out["max"], out["min"] = fields.max(axis=2).T, fields.min(axis=2).T
        out["mean"] = fields.mean(axis=2).T
        zero = np.zeros(self.cells)
        names = sorted({n for r in rows for n in r["sinks"]})
        out["sinks"] = {n: np.stack([r["sinks"].get(n, zero) for r in rows], axis=1)
                        for n in names}
        if self.stream is not None:
            out["coolant_W"] = out["sinks"].get(self.stream.name, np.zeros_like(out["max"]))
        return out


# ---------------------------------------------------------------------------------------
class ModuleRods:
    """One rod per cell, all at the string current, presented to the stepper as one rod.

    Each cell's rod runs at its own cell's area-mean temperature (from the
    stacked field the stepper passes, ``field_temperature``) or, for grids of
    rods, on its own cell's field. A current step drives every rod at that
    current; a voltage or power step finds the one current at which the mean
    cell voltage (or current x mean voltage) meets the control. The result
    carries the stacked heat map, every cell's tab heat (keyed ``(cell,
    tab)``) and a stacked SOC map, one value per cell. One plain rod model
    serving every cell steps them all in one vectorised call where it has one
    (``solve_current_batch``, the SPM and SPMe), else rod by rod.
    """

    field_temperature = True

    def __init__(self, rods, cell_grid, series_resistance_ohm=0.0, joule_map_W_per_A2=None,
                 tab_joule_W_per_A2=None):
        self.rods = list(rods)
        self.cells = len(self.rods)
        self.cell_grid = cell_grid
        self.name = f"{self.rods[0].name} x {self.cells} cells"
        self.R = float(series_resistance_ohm)
        self.joule = (np.zeros(cell_grid.shape) if joule_map_W_per_A2 is None
                      else np.asarray(joule_map_W_per_A2, dtype=float))
        self.joule_total = float(self.joule.sum())
        self.tab_joule = dict(tab_joule_W_per_A2 or {})
        first = self.rods[0]
        self.scale = float(getattr(first, "current_1C_A", None)
                           or getattr(getattr(first, "rod", None), "current_1C_A", 1.0))
        self._last_current = 0.0
        # one plain rod model for every cell (it keeps no per-cell memory) that steps many
        # states at once: every cell's step at a current in one call
        self._batch = (getattr(first, "solve_current_batch", None)
                       if all(r is first for r in self.rods) else None)

    @classmethod
    def from_pieces(cls, rod, cells, cell_grid, coupling):
        """From :func:`explorer.simulate.cell_pieces`: a plain rod serves every cell (it keeps
        no per-cell memory); a grid of rods is copied per cell (it keeps its secant slopes)."""
        import copy

        if getattr(rod, "field_temperature", False):
            rods = [rod] + [copy.copy(rod) for _ in range(cells - 1)]
        else:
            rods = [rod] * cells
        return cls(rods, cell_grid, coupling.series_resistance_ohm, coupling.joule_map_W_per_A2,
                   coupling.tab_joule_W_per_A2)

    # -- the rod contract -------------------------------------------------------------
    def initial_state(self, soc, temperature_K) -> np.ndarray:
        return np.array([r.initial_state(soc, temperature_K) for r in self.rods])

    def soc(self, state) -> float:
        return float(np.mean([r.soc(x) for r, x in zip(self.rods, state, strict=True)]))

    def lithium_mol(self, state) -> float:
        """Cyclable lithium of the whole module."""
        return float(sum(r.lithium_mol(x) for r, x in zip(self.rods, state, strict=True)))

    def _temperatures(self, temperature_C):
        T = np.asarray(temperature_C, dtype=float)
        ny, nx = self.cell_grid.shape
        if T.ndim == 0:
            T = np.full((self.cells * ny, nx), float(T))
        blocks = T.reshape(self.cells, ny, nx)
        means = (blocks.mean(axis=(1, 2)) + 273.15).tolist()  # one call, not one per cell
        return [b if getattr(r, "field_temperature", False) else t
                for r, b, t in zip(self.rods, blocks, means, strict=True)]

    def _at(self, state, dt, temps, current):
        """Every cell's step at ``current``: a list of the rods' results, or one batch of
        arrays (:meth:`_batched`) where the rod model steps many states at once."""
        if self._batch is not None:
            return self._batched(state, dt, temps, float(current))
        control = Control("current", float(current))
        return [r.solve_step(x, dt, T, control, self.R)
                for r, x, T in zip(self.rods, state, temps, strict=True)]

    def _batched(self, state, dt, temps, current):
        """One vectorised step of every cell; the series resistance's drop taken off the
        voltages here (the batch has none), as the rod's own step takes it off."""
        out = self._batch(state, dt, np.asarray(temps, dtype=float),
                          np.full(self.cells, current))
        out.voltage_V = out.voltage_V - current * self.R
        return out

    def _voltages(self, results) -> np.ndarray:
        if isinstance(results, list):
            return np.array([r.voltage_V for r in results])
        return results.voltage_V

    def _mean_voltage(self, state, dt, temps, current) -> float:
        try:
            results = self._at(state, dt, temps, current)
        except RodStepError:
            return float("nan")
        return float(np.mean(self._voltages(results)))

    def solve_step(self, state, dt, temperature_C, control, series_resistance_ohm=0.0):
        temps = self._temperatures(temperature_C)
        if control.kind == "current":
            current = float(control.value)
        else:
            current = solve_current(lambda i: self._mean_voltage(state, dt, temps, i),
                                    control.kind, float(control.value), self._last_current,
                                    self.scale)
        results = self._at(state, dt, temps, current)
        self._last_current = current
        return self._combine(results, current)

    def _combine(self, results, current) -> FieldStepResult:
        if not isinstance(results, list):
            return self._combine_batch(results, current)
        ny, nx = self.cell_grid.shape
        I2 = current * current
        fields = getattr(results[0], "heat_map_W", None) is not None  # grids of rods
        soc = np.array([r.soc for r in results])
        if fields:
            heat_map = np.concatenate([r.heat_map_W for r in results], axis=0)
            soc_map = np.concatenate([r.soc_map for r in results], axis=0)
            tabs = {(k, n): w for k, r in enumerate(results) for n, w in r.tab_heat_W.items()}
            collector = float(sum(r.collector_W for r in results))
        else:
            q = np.array([sum(r.heat_W.get(h, 0.0) for h in HEAT_KEYS) for r in results])
            heat_map = (q[:, None, None] / (ny * nx) + I2 * self.joule).reshape(self.cells * ny,
                                                                                nx)
            # one value per cell, as a view: the stepper only keeps it for the record
            soc_map = np.broadcast_to(np.repeat(soc, ny)[:, None], (self.cells * ny, nx))
            tabs = {(k, n): I2 * v for k in range(self.cells) for n, v in self.tab_joule.items()}
            collector = self.cells * I2 * self.joule_total
        heat = {h: float(sum(r.heat_W.get(h, 0.0) for r in results)) for h in HEAT_KEYS}
        return FieldStepResult(
            state=np.array([r.state for r in results]), current_A=float(current),
            voltage_V=float(np.mean([r.voltage_V for r in results])),
            ocv_V=float(np.mean([r.ocv_V for r in results])),
            soc=float(soc.mean()), heat_W=heat,
            iterations=max(r.iterations for r in results),
            heat_map_W=heat_map, tab_heat_W=tabs, collector_W=collector, soc_map=soc_map)

    def _combine_batch(self, out, current) -> FieldStepResult:
        """As :meth:`_combine` for plain rods, from one batch of arrays (the same sums, in
        the same order)."""
        ny, nx = self.cell_grid.shape
        I2 = current * current
        parts = [out.heat_W.get(h) for h in HEAT_KEYS]
        q = sum(p if p is not None else 0.0 for p in parts)  # per cell, keys in order
        heat_map = (q[:, None, None] / (ny * nx) + I2 * self.joule).reshape(self.cells * ny, nx)
        soc = np.asarray(out.soc, dtype=float)
        soc_map = np.broadcast_to(np.repeat(soc, ny)[:, None], (self.cells * ny, nx))
        tabs = {(k, n): I2 * v for k in range(self.cells) for n, v in self.tab_joule.items()}
        heat = {h: 0.0 if p is None else float(sum(p.tolist())) for h, p in zip(HEAT_KEYS, parts)}
        return FieldStepResult(
            state=np.asarray(out.states), current_A=float(current),
            voltage_V=float(np.mean(out.voltage_V)), ocv_V=float(np.mean(out.ocv_V)),
            soc=float(soc.mean()), heat_W=heat, iterations=1, heat_map_W=heat_map,
            tab_heat_W=tabs, collector_W=self.cells * I2 * self.joule_total, soc_map=soc_map)


# ---------------------------------------------------------------------------------------
def _var(dims, data, units, long_name):
    return xr.Variable(dims, np.asarray(data, dtype=float), {"units": units,
                                                              "long_name": long_name})


# per-cell time series: name -> (figure key, units, long_name)
_PER_CELL = {
    "temperature_max": ("max", "degC",
                        "hottest point of the through-thickness-mean field over the face"),
    "temperature_min": ("min", "degC",
                        "coldest point of the through-thickness-mean field over the face"),
    "temperature_mean": ("mean", "degC", "area-mean of the through-thickness-mean temperature"),
    "temperature_core_max": ("core_max", "degC", "hottest through-plane (core) temperature "
                             "estimate from the local generation"),
    **THROUGH_VARIABLES,  # the through-thickness figures, named as in a single run
    "heat_total": ("generated_W", "W", "total generated heat of the cell"),
    "heat_rejected": ("rejected_W", "W", "heat from the cell into all its sinks"),
    "heat_stored": ("stored_J", "J", "heat stored in the cell (and fin) relative to 0 degC"),
    "coolant_inlet": ("inlet", "degC", "coolant temperature reaching this cell"),
    "coolant_outlet": ("outlet", "degC", "coolant temperature leaving this cell"),
}
# shared time series that are sums over the cells (their long_name says so)
_SUMMED = ("heat_irreversible", "heat_reversible", "heat_ohmic_electrolyte", "heat_ohmic_solid",
           "heat_collector", "heat_tab", "heat_generated_energy", "heat_rejected_energy",
           "lithium")
_RELABEL = {
    "voltage": "terminal voltage per cell (string voltage / cells)",
    "power": "terminal power per cell (string power / cells; positive on discharge)",
    "ocv": "open-circuit voltage, mean over the cells",
    "energy_delivered": "electrical energy delivered per cell since the start (string / cells)",
}


def _settle_cells(time_s, per_cell: dict, thermal) -> None:
    """Each cell's through-thickness figures with the slab's settling lag, as in a single run
    (:func:`explorer.inplane.throughplane.settle_extremes`)."""
    from explorer.inplane.throughplane import settle_extremes

    settling = getattr(thermal, "through_settling", None)
    if settling is None or not len(time_s):
        return
    info = settling()
    if info["tau_s"] <= 0.0:
        return
    for c in range(per_cell["max"].shape[0]):
        figures = {k: per_cell[k][c] for k in THROUGH_KEYS}
        figures["core_difference"] = per_cell["core_max"][c] - per_cell["max"][c]
        settled = settle_extremes(time_s, per_cell["max"][c], per_cell["min"][c], figures,
                                  info["tau_s"], info["cooled"])
        for k in THROUGH_KEYS:
            per_cell[k][c] = settled[k]
        per_cell["core_max"][c] = per_cell["max"][c] + settled["core_difference"]


def _record_grid(ds: xr.Dataset, grid) -> None:
    """Write the cells' own in-plane grid into the recorded inputs (JSON attr or dict)."""
    import json

    inputs = ds.attrs.get("inputs")
    text = isinstance(inputs, str)
    data = json.loads(inputs) if text else inputs
    if not isinstance(data, dict):
        return
    data.setdefault("model", {})["grid"] = [int(grid.nx), int(grid.ny)]
    ds.attrs["inputs"] = json.dumps(data) if text else data


def _dataset(record, per_cell, *, cell, grid, cells, attrs) -> xr.Dataset:
    """The module Dataset: the stepper's shared series plus the per-cell figures and fields."""
    import copy

    from explorer.results import to_dataset

    nt = len(record.time)
    ny, nx = grid.shape
    T = np.stack(record.temperature).reshape(nt, cells, ny, nx).transpose(1, 0, 2, 3)
    Q = np.stack(record.heat_map).reshape(nt, cells, ny, nx).transpose(1, 0, 2, 3)
    soc = np.array([np.full(cells, s) if m is None else  # a record without the rods' result
                    np.asarray(m).reshape(cells, ny, nx).mean(axis=(1, 2))
                    for m, s in zip(record.soc_map, record.soc, strict=True)]).T
    # the shared series through the one Record -> Dataset function, on a 1 x 1 stand-in grid
    slim = copy.copy(record)
    slim.temperature = [np.full((1, 1), t.max()) for t in record.temperature]
    slim.heat_map = [np.full((1, 1), q.sum()) for q in record.heat_map]
    slim.soc_map = [None] * nt
    slim.current_density = [None] * nt
    slim.rejected_by_sink = {}
    shared = to_dataset(slim, cell=cell, grid=Grid.single(grid.width_m, grid.height_m),
                        attrs=attrs)
    _record_grid(shared, grid)  # the stand-in grid above is not the module's
    per_cell_names = set(_PER_CELL) | {"heat_flux", "soc_mean", "heat_total", "heat_rejected"}
    drop = [v for v in shared.data_vars
            if shared[v].dims != ("time",) or v.startswith("temperature") or v in per_cell_names
            or v.startswith("heat_to_") or v == "coolant_outlet" or v == "through_thickness_difference"]
    shared = shared.drop_vars(drop).drop_vars(["x", "y"])
    for name in _SUMMED:
        if name in shared:
            shared[name].attrs["long_name"] += " (sum over the cells)"
    for name, text in _RELABEL.items():
        if name in shared:
            shared[name].attrs["long_name"] = text
    data = {
        "temperature": _var(("cell", "time", "y", "x"), T, "degC",
                            "cell temperature (through-thickness mean)"),
        "heat_flux": _var(("cell", "time", "y", "x"), Q / grid.cell_area_m2, "W m-2",
                          "generated heat per unit face area"),
        "soc_mean": _var(("cell", "time"), soc, "1", "state of charge of the cell"),
    }
    for name, (key, units, long_name) in _PER_CELL.items():
        if key in per_cell:
            data[name] = _var(("cell", "time"), per_cell[key], units, long_name)
    for name, w in per_cell["sinks"].items():
        data[f"heat_to_{name}"] = _var(("cell", "time"), w, "W", f"heat into the {name} sink")
    coords = {
        "cell": ("cell", np.arange(cells), {"units": "1", "long_name":
                                            "cell position along the coolant path (0 = first "
                                            "the coolant meets)"}),
        "x": ("x", grid.x, {"units": "m", "long_name": "position across the electrode width"}),
        "y": ("y", grid.y, {"units": "m", "long_name": "position along the electrode height"}),
    }
    out = xr.Dataset(data, coords=coords).merge(shared)
    out.attrs = dict(shared.attrs)
    out.attrs["grid_nx"], out.attrs["grid_ny"] = nx, ny
    return out
