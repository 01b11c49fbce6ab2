"""Sizing that knows what is cheap: declared directions, rounded answers, bounds, modules.

The search logic is checked on the INVENTED stand-in of ``test_sizing`` (a lumped cell on a
coolant stream, Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed. 2007,
§5.3) and on real runs of ``explorer.simulate``. The checks on real runs are
self-consistency of sizing (re-run at the answer meets the limits, one resolution step cheaper
does not: common practice) and one physical trend: at an edge-cooled cell a better coolant
film makes the in-plane spread larger, because the cell's own in-plane conduction then carries
more of the resistance between the far edge and the coolant (the Biot number grows; Incropera
& DeWitt §3.6 on fins and §5.2 on the Biot number).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, fields

import numpy as np
import pytest
import xarray as xr
from test_sizing import DUTY, STANDIN_CELL, Counter, StandInPlate, standin_simulate

import explorer.sizing as sizing
from explorer import cooling, duty
from explorer.limits import Limits
from explorer.sizing import (
    DESIGN_PARAMETERS,
    DesignParameter,
    SizingError,
    design_parameter,
    size_cooling,
)
from explorer.validators import InputError

# --------------------------------------------------------------------------- stand-ins (invented)


def spread_grows_with_flow(cell, duty_, cooling=None, **kw):
    """The stand-in with a spread that grows with flow (invented: 2 K + 0.2 K per L/min)."""
    ds = standin_simulate(cell, duty_, cooling, **kw)
    half = 0.5 * (2.0 + 0.2 * cooling.flow_L_min)
    mean = ds["temperature_mean"]
    return ds.assign(temperature_max=mean + half, temperature_min=mean - half,
                     temperature_core_max=mean + half)


@pytest.fixture
def positions(monkeypatch):
    """The stand-in, cell positions one at a time (no module run)."""
    counter = Counter()
    monkeypatch.setattr(sizing, "_simulate", counter)
    monkeypatch.setattr(sizing, "_module_simulator", lambda: None)
    return counter


def standin_module(cell, duty_, cooling=None, **kw):
    """A module run from the stand-in: one cell per position, stacked along ``cell``."""
    kw.pop("position", None)
    n = cooling.cells_per_plate
    runs = [standin_simulate(cell, duty_, cooling, position=k, **kw) for k in range(n)]
    per_cell = ["temperature_max", "temperature_min", "temperature_mean", "temperature_core_max",
                "heat_total", "heat_rejected", "soc_mean", "coolant_outlet"]
    ds = xr.concat([r[per_cell] for r in runs], dim="cell")
    ds = ds.assign_coords(cell=np.arange(n))
    for name in ("voltage", "current", "power"):
        ds[name] = runs[0][name]
    ds.attrs.update(runs[0].attrs, module_cells=n)
    return ds


@pytest.fixture
def module(monkeypatch):
    calls = []

    def run(*args, **kwargs):
        calls.append(kwargs.get("cooling"))
        return standin_module(*args, **kwargs)

    monkeypatch.setattr(sizing, "_simulate_module", run)
    monkeypatch.setattr(sizing, "_simulate", lambda *a, **k: pytest.fail("single-cell run"))
    return calls


# --------------------------------------------------------------------------- what is cheap


def _designs():
    """One of every cooling design, with each kind of plate (every parameter appears)."""
    plate = cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0, cells_per_plate=4)
    yield cooling.face_plate(plate)
    yield cooling.face_plate(cooling.fixed_sink(25.0, h_W_m2K=500.0), tim_mm=0.5)
    yield cooling.edge_plate(plate, fin_mm=1.0, foot_mm=5.0)
    yield cooling.edge_plate(cooling.fixed_sink(25.0, conductance_W_mK=50.0))
    yield cooling.tab_cooling()
    yield cooling.convection(10.0, 25.0)
    yield cooling.edge_plate(plate, fin_mm=1.0) + cooling.tab_cooling()


def test_every_design_parameter_has_an_entry_with_valid_default_bounds():
    for design in _designs():
        for name in design.parameters():
            entry = design_parameter(name)
            assert entry.cheaper in ("lower", "higher"), name
            assert entry.unit and entry.label and entry.resolution > 0, name
            lo, hi = entry.bounds
            assert lo < hi and entry.cheap_bound in (lo, hi)
            # the default bounds are designs the tool accepts (the app offers them)
            for end in (lo, hi):
                design.replace(**{name: end})


def test_the_named_cheap_directions():
    """Less flow, a warmer inlet, thinner fin or interface layer, fewer channels and a lower
    interface conductivity cost less (the design brief; common practice)."""
    cheap = {name: p.cheaper for name, p in DESIGN_PARAMETERS.items()}
    assert cheap["flow_L_min"] == "lower" and cheap["inlet_C"] == "higher"
    assert cheap["fin_mm"] == cheap["tim_mm"] == cheap["channels"] == "lower"
    assert cheap["tim_W_mK"] == "lower"
    assert design_parameter("flow_L_min").unit == "L/min"
    assert design_parameter("inlet_C").unit == "degC"


def test_design_parameter_names():
    prefixed = design_parameter("edge_plate.tim_mm")
    assert prefixed.name == "edge_plate.tim_mm" and prefixed.cheaper == "lower"
    with pytest.raises(InputError, match=r"no sizing entry for `coolant_colour`.*flow_L_min"):
        design_parameter("coolant_colour")
    with pytest.raises(InputError, match="cheaper"):
        DesignParameter("x", "mm", "less", (0.0, 1.0), 0.1, "x")


# --------------------------------------------------------------------------- the stand-in


def test_spread_growing_with_flow_gives_the_cheap_end(monkeypatch):
    """Every flow meets; the margin shrinks as the flow grows. The answer is the least flow,
    limited by the lower bound (the issue: it used to be the most expensive end)."""
    monkeypatch.setattr(sizing, "_simulate", spread_grows_with_flow)
    monkeypatch.setattr(sizing, "_module_simulator", lambda: None)
    lim = Limits(spread_K=10.0)
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.05, 20.0), lim)
    assert not res.increasing  # the margin falls with flow...
    assert res.value == 0.05 and res.limited_by == "lower bound" and res.feasible  # ...yet
    assert "limited by the lower bound" in res.table()
    assert "widen the bounds" in res.message
    with pytest.raises(SizingError, match="lower bound"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.05, 20.0), lim,
                     strict=True)


def test_default_bounds_units_and_resolution(positions):
    lim = Limits(temperature_max_C=40.0)
    seen = []
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", limits=lim,
                       on_evaluation=lambda v, met, m: seen.append((v, met)))
    assert res.bounds == DESIGN_PARAMETERS["flow_L_min"].bounds
    assert res.curve["value"].min() == 0.1 and res.curve["value"].max() == 20.0
    assert res.curve.attrs["resolution"] == 0.05 and res.curve.attrs["cheaper"] == "lower"
    # every evaluated value is a whole number of 0.05 L/min steps
    steps = res.curve["value"].values / 0.05
    np.testing.assert_allclose(steps, np.round(steps), atol=1e-9)
    assert len(seen) == positions.calls and {v for v, _ in seen} == set(res.curve["value"].values)
    assert "0.1 to 20 L/min, resolution 0.05 L/min" in res.table()


def test_rounded_answer_and_one_step_cheaper(positions):
    """The answer meets at every position, one step less flow fails at the worst (common
    practice: self-consistency), with a coarse resolution of 0.25 L/min."""
    lim = Limits(temperature_max_C=40.0)
    plate = StandInPlate()
    res = size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (0.25, 10.0), lim,
                       resolution=0.25)
    assert res.limited_by == "limits" and res.resolution == 0.25
    assert round(res.value / 0.25) == pytest.approx(res.value / 0.25)
    for k in plate.positions_to_check():
        assert lim.check(standin_simulate(STANDIN_CELL, DUTY, plate.replace(
            flow_L_min=res.value), position=k))["met"]
    cheaper = plate.replace(flow_L_min=res.value - 0.25)
    assert not lim.check(standin_simulate(STANDIN_CELL, DUTY, cheaper, position=res.position))[
        "met"]


def test_table_says_channels_only_and_names_the_bound(positions):
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.5, 10.0),
                       Limits(temperature_max_C=42.0))
    table = res.table()
    assert "kPa (channels only)" in table and "W (channels only)" in table
    assert "cheapest value that meets the limits" in res.message


def test_unknown_parameter_needs_its_direction(positions):
    @dataclass(frozen=True)
    class Odd(StandInPlate):
        def parameters(self):
            return {**super().parameters(), "odd_value": 1.0}

    with pytest.raises(InputError, match="no entry in DESIGN_PARAMETERS"):
        size_cooling(STANDIN_CELL, DUTY, Odd(), "odd_value", (0.5, 2.0),
                     Limits(temperature_max_C=40.0))
    with pytest.raises(InputError, match="resolution"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.5, 2.0),
                     Limits(temperature_max_C=40.0), resolution=-1)
    with pytest.raises(InputError, match="`limits` must be an explorer.Limits"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min")
    assert positions.calls == 0


def test_a_plate_that_does_not_fit_is_an_error(positions):
    @dataclass(frozen=True)
    class Short(StandInPlate):
        def check_fits(self, cell):
            if self.cells_per_plate > 3:
                raise InputError(f"plate too short for {self.cells_per_plate} cells (invented)")

    @dataclass(frozen=True)
    class ShortList(StandInPlate):
        def check_fits(self, cell):
            return ["channel length 300 mm is shorter than the cells along the flow (invented)"]

    lim = Limits(temperature_max_C=40.0)
    with pytest.raises(SizingError, match="design does not fit.*too short for 5 cells"):
        size_cooling(STANDIN_CELL, DUTY, Short(), "flow_L_min", (0.5, 4.0), lim)
    with pytest.raises(SizingError, match="channel length 300 mm"):
        size_cooling(STANDIN_CELL, DUTY, ShortList(), "flow_L_min", (0.5, 4.0), lim)
    assert positions.calls == 0
    res = size_cooling(STANDIN_CELL, DUTY, Short(cells_per_plate=3), "flow_L_min", (0.5, 4.0),
                       lim)
    assert res.feasible


# --------------------------------------------------------------------------- module runs


def test_real_plate_too_short_is_an_error(van):
    """Four van cells (240 mm each along the flow) on 300 mm channels: an error, no run."""
    plate = cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0, cells_per_plate=4,
                               length_mm=300.0)
    design = cooling.face_plate(plate)
    if not hasattr(design, "check_fits"):
        pytest.skip("the designs cannot check their fit yet")
    with pytest.raises(SizingError, match="does not fit the cells it serves.*length_mm"):
        size_cooling(van, REAL_DUTY, design, "flow_L_min", limits=Limits(temperature_max_C=45.0),
                     **REAL)
    # sizing the length itself: the short end of the bounds is named
    with pytest.raises(SizingError, match="at `length_mm` = 500 does not fit"):
        size_cooling(van, REAL_DUTY, design.replace(length_mm=1000.0), "length_mm", (500, 1500),
                     Limits(temperature_max_C=45.0), **REAL)


def test_module_sizing_judges_the_whole_module(module):
    lim = Limits(temperature_max_C=40.0)
    plate = StandInPlate()
    res = size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (0.2, 10.0), lim)
    assert res.cells == 5 and res.module is not None and res.module.sizes["cell"] == 5
    assert "cell" not in res.dataset.dims and res.position == 4  # warmest coolant, last cell
    assert len(module) == res.evaluations and res.limited_by == "limits"
    # the answer meets over the module, one step less flow does not
    assert lim.check(standin_module(STANDIN_CELL, DUTY, plate.replace(flow_L_min=res.value)))[
        "met"]
    less = plate.replace(flow_L_min=res.value - res.resolution)
    assert not lim.check(standin_module(STANDIN_CELL, DUTY, less))["met"]
    assert "module runs of 5 cells" in res.table()
    assert set(res.curve["position"].values) == {4}
    assert json.loads(res.curve.attrs["positions"]) == [None]


def test_module_positions_restrict_the_check(module):
    """`positions` (deprecated) keeps the cells it names; the first cell alone needs less."""
    lim = Limits(temperature_max_C=40.0)
    whole = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0), lim)
    first = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0), lim,
                         positions=[0])
    assert first.position == 0 and first.value < whole.value
    with pytest.raises(InputError, match="expected cells 0..4"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0), lim,
                     positions=[7])


def test_a_limit_the_runs_cannot_judge_stops_the_sizing(positions):
    """A cell-to-cell limit needs a module; one cell at a time cannot judge it."""
    if "cell_to_cell_K" not in {f.name for f in fields(Limits)}:
        pytest.skip("Limits has no cell_to_cell_K yet")
    lim = Limits(temperature_max_C=40.0, cell_to_cell_K=2.0)
    with pytest.raises(InputError, match="cell_to_cell_K"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0), lim)


# --------------------------------------------------------------------------- real runs

REAL = {"electrochemistry": "spm", "layout": "averaged", "grid": (8, 6),
        "output_interval_s": 30.0}
REAL_DUTY = duty.discharge(c_rate=2.0, end_time_s=900.0)


@pytest.fixture(scope="module")
def van():
    from explorer.cell import load_cell

    return load_cell("van_nmc_66ah")


def test_real_edge_plate_spread_grows_with_flow_and_the_answer_is_the_least_flow(van):
    """An edge plate under the van cell: more flow makes the spread larger (Biot number grows,
    see the module docstring), every flow meets the limits, and the answer is the lower bound."""
    plate = cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0, cells_per_plate=1)
    design = cooling.edge_plate(plate, edge="bottom")
    lim = Limits(temperature_max_C=45.0, spread_K=12.0)
    res = size_cooling(van, REAL_DUTY, design, "flow_L_min", (0.05, 20.0), lim, **REAL)
    curve = res.curve
    assert float(curve["spread_K"][-1]) > float(curve["spread_K"][0]) + 0.05
    assert float(curve["worst_margin"][-1]) < float(curve["worst_margin"][0])
    assert res.value == 0.05 and res.limited_by == "lower bound" and res.feasible, res.message
    assert res.evaluations == 5  # the samples only: nothing to refine


def test_real_interface_conductivity_rounded_answer(van):
    """A face plate's interface conductivity (lower is cheaper) at its default resolution of
    0.1 W/(m K): the answer meets the limit and 0.1 W/(m K) less does not (common practice)."""
    from explorer.simulate import simulate

    plate = cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0, cells_per_plate=1)
    design = cooling.face_plate(plate, face="back", tim_W_mK=3.0, tim_mm=1.0)
    lim = Limits(temperature_max_C=29.5)
    res = size_cooling(van, REAL_DUTY, design, "tim_W_mK", limits=lim, **REAL)
    assert res.limited_by == "limits" and res.resolution == 0.1, res.message

    def met(k):
        return lim.check(simulate(van, REAL_DUTY, design.replace(tim_W_mK=k), **REAL))["met"]

    assert met(res.value)
    assert not met(round(res.value - 0.1, 6))
    assert res.margins["temperature_max_C"] >= 0.0


def test_real_module_flow_sizing():
    """Four LFP cells one after another on a face plate, run as a module: the least flow that
    meets the limit over the module, and one step less does not (common practice)."""
    mod = pytest.importorskip("explorer.module")
    from explorer.cell import load_cell

    cell = load_cell("rack_lfp_26ah")
    plate = cooling.cold_plate("pg30", flow_L_min=1.0, inlet_C=35.0, cells_per_plate=4,
                               length_mm=1000.0)
    design = cooling.face_plate(plate, face="back", tim_W_mK=1.0, tim_mm=1.5)
    kw = {**REAL, "start_temperature_C": 35.0}
    d = duty.discharge(c_rate=2.0, end_time_s=900.0)
    lim = Limits(temperature_max_C=38.0)
    res = size_cooling(cell, d, design, "flow_L_min", (0.05, 2.0), lim, **kw)
    assert res.cells == 4 and res.module is not None, res.message
    if res.limited_by != "limits":
        pytest.skip(f"no boundary in the bounds for this case: {res.message}")
    assert lim.check(mod.simulate_module(cell, d, design.replace(flow_L_min=res.value), **kw))[
        "met"]
    less = design.replace(flow_L_min=round(res.value - res.resolution, 6))
    assert not lim.check(mod.simulate_module(cell, d, less, **kw))["met"]


def test_cmd_size_with_default_bounds(tmp_path, capsys):
    """A `[size]` table without `bounds` sizes over the parameter's default bounds and prints
    one line per run."""
    from explorer.scenario import cmd_size, load_scenario

    text = """
    [scenario]
    name = "default bounds (invented)"
    cell = "van_nmc_66ah"
    [model]
    electrochemistry = "spm"
    layout = "averaged"
    grid = [8, 6]
    output_interval_s = 30.0
    [[duty]]
    step = "discharge"
    c_rate = 2.0
    end_time_s = 900
    [cooling]
    design = "edge_plate"
    edge = "bottom"
    fin_mm = 0.5
    [cooling.plate]
    kind = "fixed_sink"
    temperature_C = 25.0
    conductance_W_mK = 200.0
    [limits]
    temperature_max_C = 38.0
    [size]
    vary = "fin_mm"
    resolution = 0.1
    """
    path = tmp_path / "case.toml"
    path.write_text("\n".join(line.strip() for line in text.splitlines()), encoding="utf-8")
    assert load_scenario(path).size.get("bounds") is None
    code = cmd_size(path, tmp_path)
    captured = capsys.readouterr()
    curve = xr.open_dataset(tmp_path / "case_size_curve.nc").load()
    assert code == (0 if curve.attrs["feasible"] else 1)
    assert float(curve["value"].min()) == 0.1 and float(curve["value"].max()) == 3.0
    assert "bounds 0.1 to 3 mm, resolution 0.1 mm" in captured.out
    assert captured.err.count("run: fin_mm =") == curve.sizes["value"]
    assert curve.attrs["limited_by"] in ("limits", "lower bound", "upper bound", "none met")
