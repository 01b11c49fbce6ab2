"""``explorer.simulate``: one cell, one duty, one cooling design -> a results Dataset."""

from __future__ import annotations

import logging
import math

import numpy as np

from explorer import duty as _duty
from explorer.inplane.grid import Grid
from explorer.inplane.lumped import LumpedThermal
from explorer.inplane.sinks import Sinks
from explorer.results import to_dataset
from explorer.stepping.run import Coupling, Settings, check_output_interval, output_interval, run
from explorer.validators import InputError, check_integer

log = logging.getLogger(__name__)

ELECTROCHEMISTRY = ("spm", "spme", "dfn")
LAYOUTS = ("single", "averaged", "distributed")
CELLS_ON_GRID = 1536  # default in-plane grid size (32 x 48 on a 2:3 face)
RODS = 24  # default number of rods of the distributed layout


def simulate(cell, duty, cooling=None, electrochemistry: str = "spme", layout: str = "averaged",
             start_soc: float = 1.0, start_temperature_C: float = 25.0, *, grid=None,
             position=None, output_interval_s: float | None = None, mesh: dict | None = None,
             rods=None, progress=None):
    """Run ``duty`` on ``cell`` with ``cooling`` and return the results Dataset.

    Parameters
    ----------
    cell : Cell, or str / Path
        From :func:`explorer.load_cell`, or a cell file or demo-cell name to load.
    duty : Step or list of Step
        From :mod:`explorer.duty`.
    cooling : cooling design or None
        From :mod:`explorer.cooling`; None is an adiabatic cell.
    electrochemistry : {"spm", "spme", "dfn"}
    layout : {"single", "averaged", "distributed"}
        ``single``: one rod and a single cell temperature, no collectors;
        ``averaged``: one rod at the area-mean temperature, coupled to the 2-D
        collector and thermal fields; ``distributed``: a grid of rods coupled
        through the collector potentials and the local temperature (real
        current-density and SOC fields, about 25 times the cost).
    start_soc, start_temperature_C : float
        Initial state (uniform, at rest).
    grid : (nx, ny), optional
        In-plane grid (whole numbers); default about 1,500 near-square control
        volumes.
    position : int, optional
        Which cell along a shared cold plate to simulate (0 = first the
        coolant meets); default (None) the last, which sees the warmest coolant.
        An approximation: the cells upstream are taken to put into the
        coolant what this cell puts in (``upstream_cells`` of
        :class:`~explorer.inplane.sinks.CoolantStream`). To run every cell on
        the coolant path, coupled (and to see the cell-to-cell spread), use
        :func:`explorer.simulate_module`.
    output_interval_s : float, optional
        When given, the run is recorded on this regular time base (plus the
        exact moments steps end) and no time step is longer; it may not ask
        for more than 200,000 records over the duty's expected length. By
        default the steps follow the error control, at most about 1/120 of
        each duty step's expected length (0.5 to 60 s), and every step is
        recorded (a profile of more than 5,000 samples is recorded on a
        regular time base of about 1/5,000 of its length).
    mesh : dict, optional
        Rod mesh sizes, passed to the electrochemical model.
    rods : (mx, my), optional
        The distributed layout's grid of rods (default about 24 near-square
        patches); each rod runs at its patch's temperature and the collector
        potentials share the current among them.
    progress : callable(t_s, step_index), optional

    Returns
    -------
    xarray.Dataset
        See :mod:`explorer.results`; ``attrs["status"]`` is "completed" (every
        duty step ran to its own end), "cut_short" (a safety limit the step did
        not ask for ended it: the cell's voltage window on a profile or on a
        step with other ends of its own, or the temperature cap of 150 degC),
        "stopped" (Ctrl-C) or "failed" (the solver could not go on, or the state
        left physical bounds: a terminal voltage below 0 V or above twice the
        cell's upper limit); ``status_message`` says when and why, and
        ``duty_step_ends`` (JSON) what ended each duty step. A run that did not
        complete keeps what it computed up to that point.

    Examples
    --------
    >>> import explorer
    >>> cell = explorer.load_cell("demo_cells/van_nmc_66ah.toml")     # doctest: +SKIP
    >>> ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0))  # doctest: +SKIP
    """
    cell = _cell(cell)
    electrochemistry = _choice("electrochemistry", electrochemistry, ELECTROCHEMISTRY)
    layout = _choice("layout", layout, LAYOUTS)
    start_soc = _number("start_soc", start_soc, 0.0, 1.0)
    start_temperature_C = _number("start_temperature_C", start_temperature_C, -40.0, 80.0)
    output_interval_s = output_interval(output_interval_s)
    steps = [_duty.resolve(s, cell) for s in _duty.as_steps(duty)]
    check_output_interval(steps, output_interval_s)

    g = cell.geometry
    if layout == "single":
        the_grid = Grid.single(g.width_m, g.height_m)
    else:
        the_grid = _grid(g.width_m, g.height_m, grid)
    position = _position(cooling, position)
    sinks = _sinks(cooling, cell, the_grid, position)
    rod, thermal, coupling, r_collector, rod_grid = cell_pieces(
        cell, electrochemistry, layout, the_grid, sinks, mesh=mesh, rods=rods)
    record = run(rod, thermal, steps, start_soc=start_soc,
                 start_temperature_C=start_temperature_C, coupling=coupling,
                 settings=_settings(cell, output_interval_s), progress=progress)
    # the plate's hydraulics see the mean heat this cell puts into the coolant
    into_coolant = record.rejected_by_sink.get(sinks.coolant.name, []) if sinks.coolant else []
    mean_rejected = float(np.mean(into_coolant)) if into_coolant else 0.0
    attrs = run_attrs(cell, cooling, steps, electrochemistry=electrochemistry, layout=layout,
                      start_soc=start_soc, start_temperature_C=start_temperature_C,
                      thermal=thermal, r_collector=r_collector,
                      output_interval_s=output_interval_s, into_coolant_W=mean_rejected,
                      mesh=mesh, rod_grid=rod_grid)
    attrs["cell_position"] = position
    # cells in series on this cell's coolant path: more than one means a module verdict needs
    # explorer.simulate_module (the limits check says so)
    attrs["cells_on_coolant_path"] = _cells_on_path(cooling)
    return to_dataset(record, cell=cell, grid=the_grid, attrs=attrs)


def run_attrs(cell, cooling, steps, *, electrochemistry, layout, start_soc, start_temperature_C,
              thermal, r_collector, output_interval_s, into_coolant_W, mesh, rod_grid) -> dict:
    """The model settings a results Dataset carries (shared by a single run and a module),
    with its inputs and data notes (contract G: :func:`explorer.results.data_attrs`)."""
    from explorer.results import data_attrs, run_inputs

    return {
        **data_attrs(cell, steps),
        "inputs": run_inputs(cell, steps, _describe(cooling), electrochemistry=electrochemistry,
                             layout=layout, start_soc=start_soc,
                             start_temperature_C=start_temperature_C,
                             output_interval_s=output_interval_s, rod_grid=rod_grid, mesh=mesh),
        "electrochemistry": electrochemistry,
        "layout": layout,
        "start_soc": start_soc,
        "start_temperature_C": start_temperature_C,
        "heat_capacity_J_per_K": thermal.heat_capacity_J_per_K,
        "collector_resistance_ohm": r_collector,
        "output_interval_s": output_interval_s or "auto",
        "duty": [s.step.describe() for s in steps],
        "cooling": _describe(cooling),
        "hydraulics": _hydraulics(cooling, into_coolant_W, cell),
        "rod_mesh": mesh or {},
        "rods": list(rod_grid) if rod_grid is not None else [1, 1],
    }


def _settings(cell, output_interval_s) -> Settings:
    """Stepper settings; a terminal voltage outside 0 V .. twice the cell's upper limit is a
    non-physical state that fails the run."""
    return Settings(output_interval_s=output_interval_s,
                    voltage_band_V=(0.0, 2.0 * cell.voltage_max_V))


def _cell(cell):
    """A Cell as given, or loaded from a cell file path or demo-cell name."""
    from pathlib import Path

    from explorer.cell import load_cell
    from explorer.cell.model import Cell

    if isinstance(cell, Cell):
        return cell
    if isinstance(cell, (str, Path)):
        return load_cell(cell)
    raise InputError(f"simulate: `cell` must be a Cell from explorer.load_cell (or a cell file "
                     f"path or demo-cell name), got {type(cell).__name__} {cell!r:.60}")


def _choice(name, value, choices):
    if not isinstance(value, str) or value.lower() not in choices:
        raise InputError(f"simulate: `{name}` must be one of {', '.join(map(repr, choices))}; "
                         f"got {value!r}")
    return value.lower()


def _number(name, value, lo, hi):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"simulate: `{name}` must be a number, got {value!r}") from None
    if not (math.isfinite(v) and lo <= v <= hi):
        raise InputError(f"simulate: `{name}` must be within {lo:g}..{hi:g}, got {value!r}")
    return v


def _rods(width, height, rods):
    """Default rod grid of the distributed layout: about RODS near-square patches."""
    if rods is not None:
        return _pair("rods", rods, "(mx, my)")
    mx = max(1, round(math.sqrt(RODS * width / height)))
    return (mx, max(1, round(RODS / mx)))


def _grid(width, height, grid) -> Grid:
    if grid is None:
        nx = max(4, round(math.sqrt(CELLS_ON_GRID * width / height)))
        ny = max(4, round(CELLS_ON_GRID / nx))
        return Grid(width, height, nx, ny)
    nx, ny = _pair("grid", grid, "(nx, ny)")
    if nx < 2 or ny < 2 or nx * ny > 200_000:
        raise InputError(f"simulate: `grid` needs 2 <= nx, ny and nx*ny <= 200000, got {grid!r}")
    return Grid(width, height, nx, ny)


def _pair(name, value, form) -> tuple[int, int]:
    """Two whole numbers (a grid or rod count): 2.7 is refused, not truncated to 2."""
    try:
        pair = tuple(value)
    except TypeError:
        pair = ()
    if len(pair) != 2:
        raise InputError(f"simulate: `{name}` must be {form}, two whole numbers; got {value!r}")
    try:
        return tuple(check_integer(name, v, low=1) for v in pair)
    except InputError:
        raise InputError(f"simulate: `{name}` must be {form}, two whole numbers >= 1; got "
                         f"{value!r}") from None


def _position(cooling, position):
    positions = list(getattr(cooling, "positions_to_check", lambda: [0])()) if cooling else [0]
    if position is None:
        return int(max(positions))
    try:
        return check_integer("position", position, low=0)
    except InputError:
        raise InputError(f"simulate: `position` must be a whole number >= 0 (0 = the first cell "
                         f"the coolant meets), or None for the last cell; got {position!r}"
                         ) from None


def _cells_on_path(cooling) -> int:
    positions = getattr(cooling, "positions_to_check", None) if cooling is not None else None
    return int(max(positions())) + 1 if positions else 1


def _sinks(cooling, cell, grid, position) -> Sinks:
    if cooling is None:
        return Sinks()
    if isinstance(cooling, Sinks):
        return cooling
    if not hasattr(cooling, "sinks"):
        raise InputError("simulate: `cooling` must be None or a design from explorer.cooling, got "
                         f"{type(cooling).__name__}")
    try:
        return cooling.sinks(cell, grid, position=position)
    except TypeError:
        return cooling.sinks(cell, grid)


def _describe(cooling) -> dict:
    if cooling is None:
        return {"kind": "adiabatic"}
    if isinstance(cooling, Sinks):
        return {"kind": "sinks"}
    return cooling.describe()


def _hydraulics(cooling, heat_W, cell) -> dict:
    fn = getattr(cooling, "hydraulics", None)
    if fn is None:
        return {}
    return fn(heat_W=heat_W, cell=cell) or {}


def cell_pieces(cell, electrochemistry, layout, the_grid, sinks, mesh=None, rods=None):
    """The per-cell pieces :func:`simulate` builds, for callers that run cells themselves.

    Arguments already checked (as in :func:`simulate`). Returns ``(rod, thermal,
    coupling, collector_resistance_ohm, rod_grid)``; ``rod`` is the grid of rods
    for the distributed layout, ``rod_grid`` None otherwise. Used by :func:`simulate` and
    :mod:`explorer.module`.
    """
    from explorer.rod import RodParameters, shared_rod

    rod = shared_rod(electrochemistry, RodParameters.from_cell(cell), mesh=mesh)
    if layout == "single":
        return rod, LumpedThermal(cell, sinks, fitted=True), Coupling(), 0.0, None
    from explorer.inplane.collector import CollectorNetwork
    from explorer.inplane.thermal import PlaneThermal

    network = CollectorNetwork(cell, the_grid)
    thermal = PlaneThermal(cell, the_grid, sinks, fitted=True)
    if layout == "averaged":
        coupling = Coupling(network.resistance_ohm, network.joule_map_W_per_A2,
                            dict(network.tab_joule_W_per_A2))
        return rod, thermal, coupling, network.resistance_ohm, None
    from explorer.stepping.distributed import DistributedRods

    g = cell.geometry
    rod_grid = _rods(g.width_m, g.height_m, rods)
    return (DistributedRods(rod, network, the_grid, rod_grid), thermal, Coupling(),
            network.resistance_ohm, rod_grid)
