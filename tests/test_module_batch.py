"""The module's recorded figures taken all at once (``ModuleThermal.recorded_figures``).

The stepper takes a thermal model's figures in one batched call when the model's class
has ``recorded_figures`` (contract item 7 of :mod:`explorer.inplane.base`). For a module
that call must give what the single-state members give, state by state. The check is
between the project's two paths (no physics value of its own): the same module run both
ways, every variable of the Dataset equal to round-off (1e-9 of its scale). The physics
(energy balance, coolant chaining, settling) is held by tests/test_module.py.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import explorer
import explorer.module as module
from explorer import cooling
from explorer import duty as duties

ROOT = Path(__file__).resolve().parents[1]
# odd sizes: the stacked fields' rows do not fall on round memory offsets
GRID = (7, 5)
CELLS = 3
# a load that changes (discharge, rest, charge, a held voltage), so the coolant inlet of
# each cell moves in time and the recorded states differ in more than their time
DUTY = [duties.discharge(c_rate=2.0, end_time_s=600.0), duties.rest(300.0),
        duties.charge(c_rate=1.0, end_time_s=300.0),
        duties.hold_voltage(3.9, end_time_s=200.0)]


class _PerState(module.ModuleThermal):
    """The module's thermal model without the batched path: the stepper then asks the
    single-state members at every record (core_temperature_C, through_thickness_C ...)."""

    recorded_figures = None


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell(ROOT / "demo_cells" / "van_nmc_66ah.toml")


def _design(cell):
    along_mm = cell.geometry.width_m * 1e3
    plate = cooling.cold_plate("water", flow_L_min=1.0, inlet_C=25.0, channels=13,
                               cells_per_plate=CELLS, length_mm=CELLS * along_mm)
    return cooling.face_plate(plate, face="back")


def _run(cell, layout, *, per_state, monkeypatch):
    with monkeypatch.context() as m:
        if per_state:
            m.setattr(module, "ModuleThermal", _PerState)
        else:  # the batched path must not fall back on the single-state members
            def refuse(*_args, **_kw):
                raise AssertionError("the batched path asked for a single state's figures")

            m.setattr(module.ModuleThermal, "core_temperature_C", refuse)
            m.setattr(module.ModuleThermal, "through_thickness_C", refuse)
        return explorer.simulate_module(cell, DUTY, _design(cell), layout=layout, grid=GRID)


@pytest.mark.parametrize("layout", ["averaged", "single"])
def test_batched_figures_equal_the_per_state_ones(cell, layout, monkeypatch):
    batched = _run(cell, layout, per_state=False, monkeypatch=monkeypatch)
    single = _run(cell, layout, per_state=True, monkeypatch=monkeypatch)
    assert batched.attrs["status"] == single.attrs["status"] == "completed"
    assert set(batched.data_vars) == set(single.data_vars)
    assert batched.sizes == single.sizes
    for name in single.data_vars:
        a, b = batched[name].values, single[name].values
        scale = float(np.nanmax(np.abs(b))) if b.size else 0.0
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * scale, err_msg=name)


def test_each_cell_inlet_is_that_record_s_upstream_outlet(cell, monkeypatch):
    """Per record, cell k's coolant inlet is cell k-1's outlet of the same state (the
    module's coupling, transit time neglected), the first cell's the plate's inlet."""
    ds = _run(cell, "averaged", per_state=False, monkeypatch=monkeypatch)
    inlet, outlet = ds["coolant_inlet"].values, ds["coolant_outlet"].values
    np.testing.assert_allclose(inlet[1:], outlet[:-1], rtol=0, atol=1e-9)
    np.testing.assert_allclose(inlet[0], 25.0, rtol=0, atol=1e-9)
    # the inlets move with the load: the figures are not those of one state
    assert np.ptp(inlet[-1]) > 1e-3


def test_module_thermal_takes_the_batched_path():
    """The stepper looks the batched figures up on the class (explorer.stepping.run)."""
    assert getattr(module.ModuleThermal, "recorded_figures", None) is not None
    assert getattr(_PerState, "recorded_figures", None) is None
