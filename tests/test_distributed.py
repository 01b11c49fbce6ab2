"""The distributed layout: a grid of rods sharing the current through the collector potentials."""

import dataclasses

import numpy as np
import pytest

import explorer
from explorer import duty

GRID, RODS = (8, 12), (2, 3)


def _with_sheet_resistance(cell, factor, tabs=True):
    """The cell with its foils' sheet resistance scaled; ``tabs=False`` also removes the tab
    and weld resistance (so no tab heat warms one edge)."""
    d = cell.derived
    derived = dataclasses.replace(
        d, negative_sheet_resistance_ohm=d.negative_sheet_resistance_ohm * factor,
        positive_sheet_resistance_ohm=d.positive_sheet_resistance_ohm * factor)
    geometry = cell.geometry
    if not tabs:
        geometry = dataclasses.replace(geometry, tabs=tuple(
            dataclasses.replace(t, free_length_m=1e-9, weld_resistance_ohm=0.0)
            for t in geometry.tabs))
    return dataclasses.replace(cell, derived=derived, geometry=geometry)


def _run(cell, layout, **kw):
    return explorer.simulate(cell, duty.discharge(c_rate=2.0, end_time_s=600), layout=layout,
                             grid=GRID, rods=RODS if layout == "distributed" else None, **kw)


@pytest.fixture(scope="module")
def van():
    return explorer.load_cell("van_nmc_66ah")


@pytest.fixture(scope="module")
def resistive(van):
    """The van cell with 30x more resistive foils, so that the current visibly crowds."""
    return _run(_with_sheet_resistance(van, 30.0), "distributed")


def test_collapses_to_averaged_with_very_conductive_collectors(van):
    """Fact of the trade (DESIGN §5): in the limit of very conductive collectors the distributed
    model collapses to the averaged one -- uniform current density, the same voltage. (Tab
    resistance is removed too: tab heat would warm the tab edge, and the warmer rods there would
    rightly take more current.)"""
    cell = _with_sheet_resistance(van, 1e-4, tabs=False)
    dist = _run(cell, "distributed", output_interval_s=10.0)
    avg = _run(cell, "averaged", output_interval_s=10.0)
    j = dist.current_density.isel(time=slice(1, None))
    assert float((j.max(("x", "y")) - j.min(("x", "y"))).max()) <= 1e-3 * float(j.mean())
    # the same regular base (each run reaches it by its own sum of steps: compare to 1 ns)
    np.testing.assert_allclose(dist.time.values, avg.time.values, rtol=0, atol=1e-9)
    # the two runs choose their own internal steps (1 mV local-error control), hence 1 mV
    assert float(np.abs(dist.voltage - avg.voltage).max()) < 1e-3


def test_current_is_conserved(resistive, van):
    """Charge conservation: the current densities over the face add up to the cell current."""
    ds = resistive
    area = van.geometry.width_m * van.geometry.height_m
    total = ds.current_density.mean(("x", "y")) * area
    np.testing.assert_allclose(total.values, ds.current.values, rtol=1e-9, atol=1e-9)


def test_current_crowds_toward_the_tabs(resistive):
    """Both tabs sit on the top edge: with resistive foils the rods nearest the tabs see the
    smallest collector drop and carry the most current (the classic current-distribution result
    for a resistive current collector; common practice)."""
    j = resistive.current_density.isel(time=10)
    top, bottom = float(j.isel(y=-1).mean()), float(j.isel(y=0).mean())
    assert top > bottom * 1.02
    soc = resistive.soc.isel(time=-1)
    assert float(soc.isel(y=-1).mean()) < float(soc.isel(y=0).mean())  # drained faster


def test_adiabatic_energy_and_lithium(resistive):
    """First law (generated heat = C dT within 0.5 %) and cyclable-lithium conservation."""
    ds = resistive
    t = ds.time.values
    generated = float(np.sum(ds.heat_total.values[1:] * np.diff(t)))
    stored = ds.attrs["heat_capacity_J_per_K"] * float(ds.temperature_mean[-1]
                                                       - ds.temperature_mean[0])
    assert generated == pytest.approx(stored, rel=5e-3)
    li = ds.lithium.values[np.isfinite(ds.lithium.values)]
    assert np.max(np.abs(li - li[0])) <= 1e-6 * li[0]


def test_bad_rod_grid(van):
    with pytest.raises(explorer.validators.InputError, match="rods"):
        explorer.simulate(van, duty.discharge(c_rate=1), layout="distributed", grid=GRID,
                          rods=(20, 3))
