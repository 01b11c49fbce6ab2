"""Bad cooling-design and sizing arguments raise an InputError naming the argument.

Each case was once a ``KNOWN_ISSUES`` entry of the property suite (``tests/test_properties.py``):
a public call that raised a TypeError or ValueError from deep inside, or accepted a size no
hardware has and failed later in the thermal solve. The checks are on the error's family and
on the argument and value it names, not on its wording.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import explorer
from explorer import cooling, duty
from explorer.validators import InputError


def _named(exc_info, *words):
    message = str(exc_info.value)
    for word in words:
        assert word in message, (word, message)


# ------------------------------------------------------------------- "tab-cooling-tabs"

@pytest.mark.parametrize("tabs", [0, 2.5, True, {"negative": 1}, np.array(["negative"]), [],
                                  [1], ("negative", None), b"negative"])
def test_tab_cooling_tabs_not_names(tabs):
    with pytest.raises(InputError) as info:
        cooling.tab_cooling(tabs=tabs)
    _named(info, "`tabs`", "tab name")


def test_tab_cooling_tabs_names_still_work():
    assert cooling.tab_cooling(tabs="negative").tabs == ("negative",)
    assert cooling.tab_cooling(tabs=["negative", "positive"]).tabs == ("negative", "positive")
    assert cooling.tab_cooling().tabs is None


# ------------------------------------------------------------------------ "solid-name"

@pytest.mark.parametrize("name", [[], {}, np.array([1.0, 2.0]), None, 3])
def test_cold_plate_material_not_a_name(name):
    with pytest.raises(InputError) as info:
        cooling.cold_plate(material=name)
    _named(info, "`material`", "aluminium")


@pytest.mark.parametrize("name", [[], {"a": 1}, np.array([])])
def test_edge_plate_fin_material_not_a_name(name):
    with pytest.raises(InputError) as info:
        cooling.edge_plate(cooling.cold_plate(), fin_mm=1.0, fin_material=name)
    _named(info, "`fin_material`", "aluminium")


def test_a_huge_unhashable_name_is_echoed_cut_short():
    with pytest.raises(InputError) as info:
        cooling.cold_plate(material=list(range(10_000)))
    assert len(str(info.value)) < 400


# ------------------------------------------------------------- "huge-design" (designs side)

@pytest.mark.parametrize("kwargs, name", [
    ({"fin_mm": 1e308}, "fin_mm"), ({"fin_mm": 51.0}, "fin_mm"),
    ({"tim_mm": 1e308}, "tim_mm"), ({"tim_mm": 50.5}, "tim_mm"),
    ({"foot_mm": 1e9}, "foot_mm"),
])
def test_edge_plate_layers_have_an_upper_bound(kwargs, name):
    with pytest.raises(InputError) as info:
        cooling.edge_plate(cooling.fixed_sink(25.0, conductance_W_mK=80.0), **kwargs)
    _named(info, f"`{name}`", "<= ")


def test_face_plate_tim_has_an_upper_bound():
    with pytest.raises(InputError) as info:
        cooling.face_plate(cooling.cold_plate(), tim_mm=1e300)
    _named(info, "`tim_mm`", "1e+300")


@pytest.mark.parametrize("name", ["channel_width_mm", "channel_height_mm", "rib_mm", "wall_mm",
                                  "length_mm"])
def test_plate_dimensions_have_an_upper_bound(name):
    with pytest.raises(InputError) as info:
        cooling.cold_plate(**{name: 2e4})  # 20 m
    _named(info, f"`{name}`", "20000")


def test_plate_channel_band_and_cells_have_an_upper_bound():
    with pytest.raises(InputError) as info:
        cooling.cold_plate(channels=10**6)
    _named(info, "`channels`", "1000000")
    with pytest.raises(InputError) as info:
        cooling.cold_plate(cells_per_plate=10**6)
    _named(info, "`cells_per_plate`", "1000000")


@pytest.mark.parametrize("make, name", [
    (lambda v: cooling.edge_plate(cooling.cold_plate(), tim_W_mK=v), "tim_W_mK"),
    (lambda v: cooling.edge_plate(cooling.cold_plate(), foot_mm=v), "foot_mm"),
    (lambda v: cooling.edge_plate(cooling.cold_plate(), fin_mm=v), "fin_mm"),
    (lambda v: cooling.fixed_sink(25.0, h_W_m2K=v), "h_W_m2K"),
    (lambda v: cooling.fixed_sink(25.0, conductance_W_mK=v), "conductance_W_mK"),
    (lambda v: cooling.tab_cooling(v), "conductance_W_K"),
    (lambda v: cooling.cold_plate(flow_L_min=v), "flow_L_min"),
    (lambda v: cooling.cold_plate(rib_mm=v), "rib_mm"),
    (lambda v: cooling.cold_plate(channel_width_mm=v), "channel_width_mm"),
])
def test_subnormal_sizes_and_coefficients_are_refused(make, name):
    """5e-324 (the smallest float) underflowed to 0 in the series resistances or the rib-fin
    sum and raised ZeroDivisionError/OverflowError from sinks() or hydraulics()."""
    with pytest.raises(InputError) as info:
        make(5e-324)
    _named(info, f"`{name}`", "5e-324")


def test_plate_flow_has_an_upper_bound():
    """A flow of 1e300 L/min overflowed the channel's dynamic pressure in the run."""
    with pytest.raises(InputError) as info:
        cooling.cold_plate(flow_L_min=1e300)
    _named(info, "`flow_L_min`", "1e+300")


def test_sizes_at_the_bounds_are_accepted():
    """The bounds keep every plausible design (the sizing defaults lie far inside)."""
    plate = cooling.cold_plate(length_mm=10_000.0, channel_width_mm=100.0, channels=50)
    design = cooling.edge_plate(plate, fin_mm=50.0, tim_mm=50.0, foot_mm=500.0)
    assert design.parameters()["fin_mm"] == 50.0
    assert cooling.face_plate(plate, tim_mm=0.0).tim_mm == 0.0


# ---------------------------------------------------- "sizing-vary" and search settings

@pytest.fixture(scope="module")
def sizing_case():
    """The property suite's cheap case: a fixed-sink edge plate, one minute, single layout."""
    cell = explorer.load_cell("van_nmc_66ah")
    design = cooling.edge_plate(cooling.fixed_sink(25.0, conductance_W_mK=80.0), fin_mm=1.0)

    def size(**kwargs):
        args = {"vary": "fin_mm", "bounds": (0.2, 2.0), "samples": 3, "max_evaluations": 4,
                **kwargs}
        return explorer.size_cooling(cell, duty.discharge(c_rate=2.0, end_time_s=60.0), design,
                                     limits=explorer.Limits(temperature_max_C=40.0),
                                     layout="single", **args)
    return size


@pytest.mark.parametrize("vary", [["fin_mm"], {"fin_mm": 1}, np.array(["fin_mm"]), None, 0])
def test_size_cooling_vary_not_a_name(sizing_case, vary):
    with pytest.raises(InputError) as info:
        sizing_case(vary=vary)
    _named(info, "`vary`", "fin_mm")


WILD = [np.array([1.0, 2.0]), np.array([]), None, math.nan, 0, -1, ":", [3], {}, 1 + 2j]


@pytest.mark.parametrize("name", ["strict", "cheaper", "spacing", "samples", "max_evaluations",
                                  "resolution", "positions", "module", "on_evaluation"])
@pytest.mark.parametrize("value", WILD, ids=[repr(v)[:12] for v in WILD])
def test_size_cooling_wild_search_setting(sizing_case, name, value):
    """Every wild search setting: an InputError naming that argument, or a clean result."""
    try:
        res = sizing_case(**{name: value})
    except InputError as exc:
        assert f"`{name}`" in str(exc), str(exc)
        return
    # None is a valid choice for the optional settings; `strict=0`/`module=0` are not
    assert value is None and name not in ("strict", "samples", "max_evaluations", "spacing")
    assert res.value is None or math.isfinite(res.value)


@pytest.mark.parametrize("name, value", [
    ("samples", 2), ("samples", 2.5), ("samples", True), ("samples", 10**9),
    ("max_evaluations", 0), ("max_evaluations", math.inf), ("max_evaluations", "x"),
    ("resolution", True), ("resolution", math.inf), ("strict", "yes"), ("strict", 1),
    ("module", "no"), ("positions", 0), ("positions", [5]), ("positions", [-1]),
    ("positions", [0.5]), ("positions", []), ("positions", [[0]]), ("positions", "0"),
])
def test_size_cooling_search_setting_named(sizing_case, name, value):
    with pytest.raises(InputError) as info:
        sizing_case(**{name: value})
    _named(info, f"`{name}`")


def test_size_cooling_positions_numbers_of_any_kind(sizing_case):
    """Whole numbers as numpy integers or floats are cells (the design has one: cell 0)."""
    for positions in ([0], (0,), np.array([0]), [np.int64(0)], [0.0]):
        res = sizing_case(positions=positions)
        assert res.value is None or math.isfinite(res.value)


def test_size_cooling_numpy_flags(monkeypatch):
    """numpy's booleans are flags: module=np.False_ runs the cells one at a time."""
    from explorer import sizing

    def no_module(*args, **kwargs):
        raise AssertionError("module run despite module=np.False_")

    monkeypatch.setattr(sizing, "_simulate_module", no_module)
    plate = cooling.cold_plate("eg50", 3.0, 25.0, cells_per_plate=3, length_mm=2000.0)
    res = explorer.size_cooling(explorer.load_cell("van_nmc_66ah"),
                                duty.discharge(c_rate=2.0, end_time_s=60.0),
                                cooling.edge_plate(plate, fin_mm=1.0), "fin_mm", (0.2, 2.0),
                                explorer.Limits(temperature_max_C=40.0), samples=3,
                                max_evaluations=4, module=np.False_, strict=np.False_,
                                layout="single")
    assert res.module is None and res.cells is None
