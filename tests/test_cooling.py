"""Cooling designs (explorer.cooling): hydraulics, thermal paths, Sinks, parameters, errors.

Sources:
* Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, 6th ed. (2007):
  eq. 8.34 (coolant energy balance q = m cp (T_out - T_in)), Sec. 3.6.4 eq. 3.89
  (straight fin with adiabatic tip, efficiency tanh(mL)/(mL)), Sec. 3.1 (plane
  walls and resistances in series), Table A.1 (aluminium at 300 K: k 237 W/(m K),
  rho 2702 kg/m3, cp 903 J/(kg K), from memory).
* Pump hydraulic power dp * Q / efficiency: White, *Fluid Mechanics*, 7th ed.
  (2011), Sec. 11.2 (from memory).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from explorer import cooling
from explorer.cooling.channels import channel_flow
from explorer.inplane.grid import Grid
from explorer.validators import InputError

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def cell():
    from explorer.cell import load_cell

    return load_cell(ROOT / "demo_cells" / "van_nmc_66ah.toml")


@pytest.fixture(scope="module")
def grid(cell):
    return Grid(cell.geometry.width_m, cell.geometry.height_m, 8, 12)


# -- the cold plate on its own --------------------------------------------------------
def test_cold_plate_defaults_and_describe():
    plate = cooling.cold_plate("eg50", flow_L_min=5.0, inlet_C=20.0)
    assert plate.coolant == "eg50" and plate.channels == 16 and plate.material == "aluminium"
    d = plate.describe()
    assert d["kind"] == "cold_plate" and d["flow_L_min"] == 5.0
    json.dumps(d)


def test_hydraulics_energy_balance_and_pump_power():
    """Outlet from q = m cp (T_out - T_in) (Incropera & DeWitt eq. 8.34) with cp at the
    mean bulk temperature; pump power = dp Q / efficiency (White 2011, Sec. 11.2)."""
    plate = cooling.cold_plate("water", flow_L_min=3.0, inlet_C=25.0, pump_efficiency=0.4)
    h = plate.hydraulics(heat_W=600.0)
    props = plate.fluid.properties(h["bulk_temperature_C"])
    m = 3.0 / 60000 * props.density_kg_m3
    assert h["outlet_C"] - 25.0 == pytest.approx(600.0 / (m * props.specific_heat_J_kgK), rel=1e-6)
    assert h["bulk_temperature_C"] == pytest.approx(25.0 + 0.5 * h["temperature_rise_K"], rel=1e-6)
    assert h["pump_power_W"] == pytest.approx(h["pressure_drop_Pa"] * 3.0 / 60000 / 0.4)
    for key in ("coolant", "velocity_m_s", "reynolds", "prandtl", "regime", "nusselt",
                "h_channel_W_m2K", "friction_factor", "pressure_drop_Pa", "pump_power_W",
                "outlet_C", "warnings"):
        assert key in h
    json.dumps(h)
    assert plate.hydraulics()["outlet_C"] is None


def test_plate_pressure_drop_is_one_channel_at_its_share():
    """Parallel identical channels carry equal shares, so the plate's pressure drop is one
    channel's at flow / channels (continuity; common practice)."""
    plate = cooling.cold_plate("pg30", flow_L_min=8.0, inlet_C=15.0, channels=10, bends=2,
                               length_mm=800.0)
    one = channel_flow(10e-3, 3e-3, 0.8, 8.0 / 60000 / 10, plate.fluid.properties(15.0),
                       roughness_m=1.5e-6, bends=2)
    h = plate.hydraulics()
    assert h["pressure_drop_Pa"] == pytest.approx(one.pressure_drop_Pa, rel=1e-12)
    assert h["reynolds"] == pytest.approx(one.reynolds, rel=1e-12)


def test_hydraulics_warnings():
    # about 28 L/min of water over 16 channels of 10 x 3 mm: Re near 5000, transition
    mid = cooling.cold_plate("water", flow_L_min=28.0, inlet_C=25.0).hydraulics()
    assert mid["regime"] == "transition" and any("transition" in w for w in mid["warnings"])
    low = cooling.cold_plate("eg50", flow_L_min=0.5, inlet_C=0.0).hydraulics()
    assert low["reynolds"] < 100 and any("very low Reynolds" in w for w in low["warnings"])
    hot = cooling.cold_plate("water", flow_L_min=0.2, inlet_C=40.0).hydraulics(heat_W=1e4)
    assert any("beyond the liquid range" in w for w in hot["warnings"])
    fast = cooling.cold_plate("water", flow_L_min=60.0, inlet_C=25.0, channels=4).hydraulics()
    assert any("erosion" in w for w in fast["warnings"])
    ok = cooling.cold_plate("water", flow_L_min=4.0, inlet_C=25.0).hydraulics()
    assert ok["regime"] == "laminar" and ok["warnings"] == []


def test_rib_efficiency_is_the_straight_fin_result():
    """Rib = straight fin wetted on both faces, adiabatic tip (Incropera & DeWitt eq. 3.89):
    eta = tanh(mH)/(mH), m = sqrt(2 h / (k t)); thin steel ribs are much less efficient."""
    plate = cooling.cold_plate("water", 4.0, 25.0, rib_mm=1.0, channel_height_mm=6.0)
    h = 2000.0
    m = math.sqrt(2 * h / (237.0 * 1e-3))
    assert plate.rib_efficiency(h) == pytest.approx(math.tanh(m * 6e-3) / (m * 6e-3), rel=1e-12)
    steel = plate.replace(material="stainless_steel_304")
    assert steel.rib_efficiency(h) < plate.rib_efficiency(h) < 1.0


# -- thermal paths: resistances in series ---------------------------------------------
def test_face_plate_resistances_add_in_series(cell):
    """Hand check (Incropera & DeWitt Sec. 3.1, resistances in series per unit area):
    1/U = 1/h_conv + wall/k_al + tim/k_tim, h_conv = h (w + 2 eta H) / pitch. The demo
    cell is 160 mm tall; 16 channels at 12 mm pitch (192 mm) cover it fully with flow
    along x, so the coverage is 1."""
    plate = cooling.cold_plate("water", flow_L_min=4.0, inlet_C=25.0, flow_direction="+x")
    design = cooling.face_plate(plate, face="back", tim_W_mK=2.0, tim_mm=0.8)
    h = plate.hydraulics()["h_channel_W_m2K"]
    m = math.sqrt(2 * h / (237.0 * 2e-3))
    eta = math.tanh(m * 3e-3) / (m * 3e-3)
    h_conv = h * (10e-3 + 2 * eta * 3e-3) / 12e-3
    r = 1 / h_conv + 1.5e-3 / 237.0 + 0.8e-3 / 2.0
    assert design.face_h_W_m2K(cell) == pytest.approx(1 / r, rel=1e-9)
    # a fixed-sink plate: just the TIM in series with the given coefficient
    fixed = cooling.face_plate(cooling.fixed_sink(20.0, 800.0), tim_W_mK=2.0, tim_mm=0.8)
    assert fixed.face_h_W_m2K(cell) == pytest.approx(1 / (1 / 800.0 + 0.8e-3 / 2.0))


def test_face_plate_partial_coverage(cell):
    """Flow along y: the 240 mm width across the flow; 8 channels at 12 mm cover 96 mm
    (40 %), so the plate resistance is divided by 0.4 and 40 % of the flow serves the cell."""
    plate = cooling.cold_plate("water", 4.0, 25.0, channels=8, flow_direction="+y")
    design = cooling.face_plate(plate, tim_mm=0.0)
    assert design.face_h_W_m2K(cell) == pytest.approx(0.4 * plate.surface_h_W_m2K(), rel=1e-9)
    s = design.sinks(cell, None)
    assert s.coolant.capacity_rate_W_K == pytest.approx(plate.capacity_rate_W_K(), rel=1e-9)
    assert s.coolant.direction == "+y"


def test_edge_plate_without_fin_by_hand(cell):
    """Cell edge on a TIM over its stack thickness L (8.9 mm demo cell), plate at a fixed
    temperature behind h: per metre of edge G' = 1 / (t/(k L) + 1/(h L))."""
    L = cell.geometry.stack_thickness_m
    design = cooling.edge_plate(cooling.fixed_sink(25.0, 1500.0), edge="bottom",
                                tim_W_mK=3.0, tim_mm=0.5)
    g = 1 / (0.5e-3 / (3.0 * L) + 1 / (1500.0 * L))
    s = design.sinks(cell, None)
    assert s.edges["bottom"].conductance_W_mK == pytest.approx(g, rel=1e-12)
    assert s.edges["bottom"].layer == "cell" and s.fin is None and s.coolant is None


def test_edge_plate_with_fin_and_cold_plate(cell, grid):
    """Fin foot of width L on the TIM, plate under one cell pitch (L + fin) conducting to the
    coolant: G' = 1/(t/(k L) + 1/(h_surface * pitch)). Fin properties = aluminium
    (Incropera & DeWitt Table A.1, 300 K)."""
    plate = cooling.cold_plate("eg50", flow_L_min=6.0, inlet_C=20.0, cells_per_plate=10)
    design = cooling.edge_plate(plate, edge="bottom", fin_mm=1.0, tim_W_mK=3.0, tim_mm=0.5)
    L = cell.geometry.stack_thickness_m
    pitch = L + 1e-3
    # 16 channels x 12 mm = 192 mm of the 240 mm edge: coverage 0.8, all channels under it
    g = 1 / (0.5e-3 / (3.0 * L) + 1 / (plate.surface_h_W_m2K() * 0.8 * pitch))
    s = design.sinks(cell, grid, position=3)
    assert s.edges["bottom"].conductance_W_mK == pytest.approx(g, rel=1e-12)
    assert s.edges["bottom"].layer == "fin"
    fin = s.fin
    assert (fin.edge, fin.face, fin.thickness_m) == ("bottom", "back", 1e-3)
    assert (fin.conductivity_W_mK, fin.density_kg_m3, fin.specific_heat_J_kgK) == (237.0, 2702.0, 903.0)
    c = s.coolant
    assert c.sink == "bottom" and c.direction == "+y"  # crossing the edge: through the stack
    assert c.upstream_cells == 3
    assert c.capacity_rate_W_K == pytest.approx(plate.capacity_rate_W_K(), rel=1e-12)
    assert design.positions_to_check() == [0, 4, 9]
    assert design.sinks(cell, grid).coolant.upstream_cells == 9  # default: the last cell


def test_edge_plate_with_flow_along_the_edge(cell):
    """Channels along the edge, cells side by side across them: equal flow shares, no
    upstream warming, one position to check."""
    plate = cooling.cold_plate("water", 6.0, 20.0, cells_per_plate=12, flow_direction="-x")
    design = cooling.edge_plate(plate)
    s = design.sinks(cell, None)
    assert design.positions_to_check() == [0]
    assert s.coolant.upstream_cells == 0 and s.coolant.direction == "-x"
    assert s.coolant.capacity_rate_W_K == pytest.approx(plate.capacity_rate_W_K() / 12)
    with pytest.raises(InputError, match="flow_direction"):
        cooling.edge_plate(plate.replace(flow_direction="+y"), edge="bottom")


def test_face_plate_positions_and_shares(cell):
    plate = cooling.cold_plate("water", 4.0, 25.0, cells_per_plate=5)
    design = cooling.face_plate(plate, face="front")
    assert design.positions_to_check() == [0, 2, 4]
    s0, s4 = design.sinks(cell, None, position=0), design.sinks(cell, None)
    assert (s0.coolant.upstream_cells, s4.coolant.upstream_cells) == (0, 4)
    assert set(s0.faces) == {"front"} and s0.coolant.sink == "front"
    with pytest.raises(InputError, match="position"):
        design.sinks(cell, None, position=5)
    with pytest.raises(InputError, match="flow_direction"):
        cooling.face_plate(plate.replace(flow_direction="across"))


def test_face_plate_both_faces(cell):
    """'both' with a cold plate: a sink on each face, both on one coolant stream carrying the
    two faces' share; with a fixed sink: a sink on each face and no stream."""
    plate = cooling.cold_plate("water", 4.0, 25.0)
    one = cooling.face_plate(plate, face="back", faces_per_plate=2)
    both = cooling.face_plate(plate, face="both")
    assert both.faces_per_plate == 2
    s1, s2 = one.sinks(cell, None), both.sinks(cell, None)
    assert set(s2.faces) == {"front", "back"}
    assert s2.coolant.sink_names == ("front", "back") and s2.coolant.name == "front+back"
    for f in ("front", "back"):
        assert s2.faces[f].h_W_m2K == pytest.approx(s1.faces["back"].h_W_m2K)
    assert s2.coolant.capacity_rate_W_K == pytest.approx(2 * s1.coolant.capacity_rate_W_K)
    # flow along x: 160/12 of the 16 channels pass under the 160 mm tall cell
    assert s2.coolant.capacity_rate_W_K == pytest.approx(plate.capacity_rate_W_K() * (160 / 12) / 16)
    fixed = cooling.face_plate(cooling.fixed_sink(25.0, 500.0), face="both").sinks(cell, None)
    assert set(fixed.faces) == {"front", "back"} and fixed.coolant is None


def test_convection_and_tab_cooling(cell):
    s = cooling.convection(12.0, 30.0).sinks(cell, None)
    assert {f: (v.h_W_m2K, v.temperature_C) for f, v in s.faces.items()} == {
        "front": (12.0, 30.0), "back": (12.0, 30.0)}
    tabs = cooling.tab_cooling(conductance_W_K=3.0, busbar_C=35.0).sinks(cell, None).tabs
    assert set(tabs) == {t.name for t in cell.geometry.tabs}
    assert all((t.conductance_W_K, t.temperature_C) == (3.0, 35.0) for t in tabs.values())
    only = cooling.tab_cooling(tabs="positive").sinks(cell, None).tabs
    assert set(only) == {"positive"}
    with pytest.raises(InputError, match="no tab 'middle'"):
        cooling.tab_cooling(tabs=["middle"]).sinks(cell, None)


# -- combination, parameters, replace, describe ---------------------------------------
def test_combined_sinks_and_parameters(cell):
    plate = cooling.cold_plate("eg50", 5.0, 25.0, cells_per_plate=12)
    combo = cooling.edge_plate(plate, fin_mm=1.0) + cooling.tab_cooling(busbar_C=30.0)
    s = combo.sinks(cell, None, position=5)
    assert set(s.edges) == {"bottom"} and len(s.tabs) == 2 and s.fin is not None
    assert s.coolant.upstream_cells == 5
    p = combo.parameters()
    for name in ("flow_L_min", "inlet_C", "fin_mm", "tim_W_mK", "channels", "busbar_C",
                 "conductance_W_K"):
        assert name in p
    assert combo.positions_to_check() == [0, 5, 11]
    bigger = combo.replace(flow_L_min=10.0, busbar_C=40.0)
    assert bigger.parameters()["flow_L_min"] == 10.0 and bigger.parameters()["busbar_C"] == 40.0
    assert combo.parameters()["flow_L_min"] == 5.0  # frozen: the original is unchanged
    assert combo.hydraulics(heat_W=20.0)["temperature_rise_K"] > 0
    assert cooling.combine(cooling.convection(5.0, 25.0)).hydraulics() == {}
    json.dumps(combo.describe())
    # a three-part sum flattens
    three = combo + cooling.convection(5.0, 25.0)
    assert len(three.parts) == 3 and set(three.sinks(cell, None).faces) == {"front", "back"}


def test_combined_shared_names_get_prefixes(cell):
    combo = cooling.face_plate(cooling.fixed_sink(20.0, 600.0), face="front") + cooling.edge_plate(
        cooling.fixed_sink(25.0, 1500.0))
    p = combo.parameters()
    assert "face_plate.tim_W_mK" in p and "edge_plate.tim_W_mK" in p and "tim_W_mK" not in p
    new = combo.replace(**{"edge_plate.temperature_C": 18.0})
    assert new.sinks(cell, None).edges["bottom"].temperature_C == 18.0
    assert new.sinks(cell, None).faces["front"].temperature_C == 20.0
    with pytest.raises(InputError, match="edge_plate.tim_W_mK"):
        combo.replace(tim_W_mK=1.0)


def test_combined_conflicts_are_errors(cell):
    plate = cooling.cold_plate("water", 4.0, 25.0)
    with pytest.raises(InputError, match="back face"):
        (cooling.face_plate(plate) + cooling.convection(10.0, 25.0)).sinks(cell, None)
    with pytest.raises(InputError, match="coolant stream"):
        (cooling.face_plate(plate, face="front") + cooling.edge_plate(plate)).sinks(cell, None)
    with pytest.raises(InputError, match="designs"):
        cooling.combine(cooling.convection(10.0, 25.0), "fan")


def test_parameters_and_replace():
    plate = cooling.cold_plate("water", 4.0, 25.0)
    design = cooling.edge_plate(plate, fin_mm=1.5)
    assert design.replace(fin_mm=0.5).fin_mm == 0.5
    assert design.replace(channels=8.0).plate.channels == 8
    assert design.replace(coolant="pg30").plate.coolant == "pg30"
    with pytest.raises(InputError, match="channels"):
        design.replace(channels=8.5)
    with pytest.raises(InputError, match="flow_L_min") as err:
        design.replace(flowrate=3.0)
    assert "not a parameter" in str(err.value)
    assert "fin_mm" not in cooling.edge_plate(plate).parameters()
    assert set(cooling.convection(5.0, 25.0).parameters()) == {"h_W_m2K", "ambient_C"}
    fixed = cooling.face_plate(cooling.fixed_sink(20.0, 600.0))
    assert set(fixed.parameters()) == {"temperature_C", "h_W_m2K", "tim_W_mK", "tim_mm",
                                       "faces_per_plate"}
    assert fixed.hydraulics() == {}
    for d in (design, fixed, cooling.tab_cooling(tabs=("negative",))):
        json.dumps(d.describe())


# -- bad inputs ----------------------------------------------------------------------
@pytest.mark.parametrize("kwargs, match", [
    ({"coolant": "oil"}, r"`coolant`.*'water'"),
    ({"coolant": "eg50", "inlet_C": -40.0}, r"`inlet_C`.*-35\.9"),
    ({"coolant": "water", "inlet_C": -2.0}, r"`inlet_C`"),
    ({"flow_L_min": 0.0}, r"`flow_L_min`.*> 0"),
    ({"flow_L_min": -3.0}, r"`flow_L_min`"),
    ({"channel_width_mm": -1.0}, r"`channel_width_mm`"),
    ({"wall_mm": 0.0}, r"`wall_mm`"),
    ({"channels": 0}, r"`channels`"),
    ({"channels": 2.5}, r"`channels`.*whole number"),
    ({"material": "unobtainium"}, r"`material`.*'aluminium'"),
    ({"flow_direction": "up"}, r"`flow_direction`.*'\+x'"),
    ({"pump_efficiency": 1.5}, r"`pump_efficiency`"),
    ({"roughness_um": 5000.0}, r"`roughness_um`"),
])
def test_cold_plate_bad_inputs(kwargs, match):
    args = {"coolant": "water", "flow_L_min": 4.0, "inlet_C": 25.0}
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        cooling.cold_plate(**args)


def test_design_bad_inputs():
    plate = cooling.cold_plate("water", 4.0, 25.0)
    cases = [
        (lambda: cooling.face_plate(plate, face="top"), r"`face`.*'both'"),
        (lambda: cooling.face_plate("plate"), r"`plate`"),
        (lambda: cooling.face_plate(plate, tim_W_mK=0.0), r"`tim_W_mK`"),
        (lambda: cooling.face_plate(plate, tim_mm=-0.1), r"`tim_mm`"),
        (lambda: cooling.edge_plate(plate, edge="middle"), r"`edge`.*'bottom'"),
        (lambda: cooling.edge_plate(plate, fin_mm=0.0), r"`fin_mm`"),
        (lambda: cooling.edge_plate(plate, fin_mm=1.0, fin_material="wood"), r"`fin_material`"),
        (lambda: cooling.convection(-5.0, 25.0), r"`h_W_m2K`"),
        (lambda: cooling.convection(5.0, float("nan")), r"`ambient_C`"),
        (lambda: cooling.fixed_sink(25.0, 0.0), r"`h_W_m2K`"),
        (lambda: cooling.tab_cooling(conductance_W_K=0.0), r"`conductance_W_K`"),
    ]
    for build, match in cases:
        with pytest.raises(InputError, match=match):
            build()


# -- with the in-plane thermal model ---------------------------------------------------
@pytest.mark.parametrize("kind", ["edge", "face"])
def test_coolant_energy_balance_in_the_thermal_model(cell, grid, kind):
    """Steady state with the real thermal model: the coolant leaving the cell is warmer than
    the coolant reaching it by (heat into the sink) / (m cp) (Incropera & DeWitt eq. 8.34),
    upstream cells add their heat, and the last cell on the plate runs hottest."""
    from explorer.inplane.thermal import PlaneThermal

    plate = cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0, cells_per_plate=8)
    if kind == "edge":
        design, sink = cooling.edge_plate(plate, fin_mm=1.0) + cooling.tab_cooling(busbar_C=30.0), "bottom"
    else:
        design = cooling.face_plate(plate.replace(flow_direction="-y"), face="both")
        sink = "front+back"
    heat = np.full(grid.shape, 25.0 / grid.nx / grid.ny)
    peaks = []
    for k in design.positions_to_check():
        sinks = design.sinks(cell, grid, position=k)
        model = PlaneThermal(cell, grid, sinks)
        state = model.steady_state(heat)
        q = model.heat_flows_W(state)[sink]
        C = sinks.coolant.capacity_rate_W_K
        assert model.coolant_outlet_C(state) - model.coolant_inlet_C(state) == pytest.approx(q / C, rel=1e-9)
        assert model.coolant_inlet_C(state) == pytest.approx(25.0 + k * q / C, rel=1e-9)
        peaks.append(model.temperature_C(state).max())
    assert np.all(np.diff(peaks) > 0)


def test_hydraulics_of_designs_scale_with_cells_and_check_fit(cell):
    """The plate takes one cell's heat times the cells on its coolant (energy balance,
    Incropera & DeWitt eq. 8.34); with the cell given, plates that do not fit are named."""
    plate = cooling.cold_plate("water", 4.0, 25.0, cells_per_plate=6, channels=8,
                               flow_direction="+y", length_mm=300.0)
    face = cooling.face_plate(plate)
    h = face.hydraulics(heat_W=20.0)
    assert h["cell_heat_W"] == 20.0 and h["plate_heat_W"] == pytest.approx(120.0)
    assert h["temperature_rise_K"] == pytest.approx(120.0 / plate.capacity_rate_W_K(
        h["bulk_temperature_C"]), rel=1e-9)
    shared = cooling.face_plate(plate, faces_per_plate=2).hydraulics(heat_W=20.0)
    assert shared["plate_heat_W"] == pytest.approx(240.0)
    assert cooling.face_plate(plate, face="both").hydraulics(heat_W=20.0)["plate_heat_W"] == \
        pytest.approx(120.0)
    warned = face.hydraulics(heat_W=20.0, cell=cell)["warnings"]
    # 8 x 12 mm of the 240 mm width; 6 cells x 160 mm = 960 mm of path in a 300 mm channel
    assert any("cover only 40%" in w for w in warned)
    assert any("shorter than cells along the flow (960 mm)" in w for w in warned)
    fits = cooling.edge_plate(cooling.cold_plate("water", 4.0, 25.0, cells_per_plate=6))
    assert fits.hydraulics(heat_W=20.0, cell=cell)["warnings"] == []


def test_fixed_sink_by_edge_conductance(cell):
    """An edge plate given by its conductance per metre of edge: the TIM over the contact
    width L adds in series, G' = 1/(t/(k L) + 1/G'_sink) (resistances in series)."""
    L = cell.geometry.stack_thickness_m
    design = cooling.edge_plate(cooling.fixed_sink(22.0, conductance_W_mK=15.0), edge="left",
                                tim_W_mK=2.0, tim_mm=0.3)
    s = design.sinks(cell, None)
    assert s.edges["left"].conductance_W_mK == pytest.approx(1 / (0.3e-3 / (2.0 * L) + 1 / 15.0))
    assert s.edges["left"].temperature_C == 22.0
    assert set(design.parameters()) >= {"temperature_C", "conductance_W_mK"}
    assert design.replace(conductance_W_mK=30.0).plate.conductance_W_mK == 30.0
    with pytest.raises(InputError, match="exactly one"):
        cooling.fixed_sink(22.0)
    with pytest.raises(InputError, match="exactly one"):
        cooling.fixed_sink(22.0, h_W_m2K=100.0, conductance_W_mK=5.0)
    with pytest.raises(InputError, match="edge plates"):
        cooling.face_plate(cooling.fixed_sink(22.0, conductance_W_mK=5.0))


def test_entry_lengths_reported():
    """Laminar entry lengths x_h = 0.05 Re D_h and x_t = 0.05 Re Pr D_h (Incropera & DeWitt
    eqs. 8.3, 8.23); glycol at low Re is thermally developing over a 500 mm channel."""
    h = cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=25.0).hydraulics()
    dh = h["hydraulic_diameter_mm"]
    assert h["entry_length_hydraulic_mm"] == pytest.approx(0.05 * h["reynolds"] * dh)
    assert h["entry_length_thermal_mm"] == pytest.approx(0.05 * h["reynolds"] * h["prandtl"] * dh)
    assert any("conservative" in n for n in h["notes"])
    turbulent = cooling.cold_plate("water", flow_L_min=80.0, inlet_C=25.0).hydraulics()
    assert turbulent["regime"] == "turbulent" and turbulent["entry_length_thermal_mm"] is None


def test_combined_replace_of_non_numeric_inputs(cell):
    combo = cooling.edge_plate(cooling.cold_plate("water", 4.0, 25.0)) + cooling.tab_cooling()
    assert combo.replace(coolant="eg50").parts[0].plate.coolant == "eg50"
    assert combo.replace(edge="top").sinks(cell, None).edges.keys() == {"top"}
    with pytest.raises(InputError, match="not a parameter"):
        combo.replace(colour="red")
