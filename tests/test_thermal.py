"""The 2-D in-plane thermal field (explorer.inplane.thermal).

Cells are built directly from the dataclasses with values invented for the
tests (no real product); tab metal properties come from
``explorer.materials.SOLIDS``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from explorer.cell.model import (
    Cell,
    Collector,
    Derived,
    Electrode,
    Electrolyte,
    Geometry,
    Separator,
    Tab,
    ThermalOverrides,
)
from explorer.inplane.collector import CollectorNetwork
from explorer.inplane.grid import Grid
from explorer.inplane.sinks import CoolantStream, EdgeSink, FaceSink, Fin, Sinks, TabSink
from explorer.inplane.thermal import PlaneThermal
from explorer.materials import SOLIDS
from explorer.validators import InputError

W, H, L = 0.2, 0.3, 0.01  # invented coated area and stack thickness, m


def make_tab(name, polarity, edge="top", position_m=0.05, width_m=0.04, thickness_m=2e-4,
             material="copper", free_length_m=0.02, weld_resistance_ohm=5e-5):
    return Tab(name, polarity, edge, position_m, width_m, thickness_m, material, free_length_m,
               weld_resistance_ohm)


def make_cell(tabs=None, k_in=25.0, k_through=0.6, heat_capacity_J_K=900.0, r_neg=1e-3,
              r_pos=1e-3):
    """An invented cell; only the fields the in-plane models read matter."""
    if tabs is None:
        tabs = (make_tab("negative", "negative", position_m=0.05),
                make_tab("positive", "positive", position_m=0.15))
    geometry = Geometry(W, H, 40, L, 1.5e-4, tuple(tabs))
    electrode = Electrode(7e-5, 0.3, 0.6, 5e-6, 30000.0, 0.02, 0.9, "graphite", 1e-14, 3e4,
                          1e-11, 3e4, 100.0, 1.5, 2000.0, 800.0, 1.0)
    separator = Separator(2e-5, 0.4, 1.5, 1000.0, 1900.0, 0.3)
    electrolyte = Electrolyte(1000.0, "lipf6_carbonate_conductivity",
                              "lipf6_carbonate_diffusivity", 0.36, 1.0, 1e4, 1e4, 1200.0, 1500.0)
    area = W * H
    derived = Derived(area, area * 40, 60.0, 66.0, 60.0, 1.1, 1.0, 220.0, 21, 20, r_neg, r_pos,
                      k_in, k_through, heat_capacity_J_K, k_in, k_through, heat_capacity_J_K)
    return Cell("invented-test-cell", "invented for the tests", 60.0, 2.8, 4.2, -20.0, 55.0,
                geometry, Collector("copper", 1e-5), Collector("aluminium", 1.5e-5), electrode,
                electrode, separator, electrolyte, ThermalOverrides(), derived)


def uniform(grid, total_W):
    return np.full(grid.shape, total_W / (grid.nx * grid.ny))


def test_plane_wall_with_generation():
    """Steady uniform generation, bottom edge held at T0, faces adiabatic.

    Plane wall with uniform generation, one side adiabatic (Incropera & DeWitt,
    Fundamentals of Heat and Mass Transfer, §3.5, eq. 3.42 form with half-width
    H): T_max - T_edge = q''' H**2 / (2 k); in sheet form q''' / k = q'' / (k t).
    """
    cell = make_cell()
    q_W = 30.0
    q_area = q_W / (W * H)
    k_sheet = cell.derived.inplane_conductivity_W_mK * L
    exact = q_area * H**2 / (2 * k_sheet)
    errors = []
    for ny in (12, 24, 48):
        grid = Grid(W, H, 4, ny)
        model = PlaneThermal(cell, grid, Sinks(edges={"bottom": EdgeSink(1e9, 20.0)}))
        x = model.steady_state(uniform(grid, q_W))
        T = model.temperature_C(x)
        # the top row's centre sits dy/2 below the adiabatic edge: compare the profile there
        y = grid.y
        profile = 20.0 + q_area * (H * y - y**2 / 2) / k_sheet
        assert np.allclose(T, T[:, :1])
        errors.append(np.max(np.abs(T[:, 0] - profile)) / exact)
        assert model.heat_flows_W(x)["bottom"] == pytest.approx(q_W, rel=1e-10)
    assert errors[-1] < 1e-3
    assert errors[0] / errors[-1] > 10  # second order
    # peak at the adiabatic edge, read off the converged profile
    assert T.max() - 20.0 == pytest.approx(exact, rel=2e-3)


def test_lumped_capacitance():
    """A uniformly warm cell cooling from both faces at small Biot number follows
    exp(-h A_s t / (rho V c)) (Incropera & DeWitt §5.2, eq. 5.6) within 1 %."""
    cell = make_cell(k_through=50.0)  # Bi = h (L/2) / k = 1e-3
    grid = Grid(W, H, 8, 12)
    h, T_inf, T_i = 10.0, 20.0, 45.0
    sinks = Sinks(faces={"front": FaceSink(h, T_inf), "back": FaceSink(h, T_inf)})
    model = PlaneThermal(cell, grid, sinks)
    tau = cell.derived.heat_capacity_J_K / (h * 2 * W * H)
    x = model.initial_state(T_i)
    dt, t = 2.0, 0.0
    zero = np.zeros(grid.shape)
    while t < 1.5 * tau:
        x, _ = model.step(x, zero, dt)
        t += dt
    exact = T_inf + (T_i - T_inf) * math.exp(-t / tau)
    assert model.mean_temperature_C(x) - T_inf == pytest.approx(exact - T_inf, rel=0.01)
    assert np.ptp(model.temperature_C(x)) < 1e-9


def test_slab_first_eigenvalue():
    """At Biot 0.5 the lumped result is off, but the mean-to-face resistance L/(6k)
    reproduces the slab's slowest decay rate zeta_1**2 alpha / (L/2)**2 with
    zeta_1 tan(zeta_1) = Bi (Incropera & DeWitt §5.5.1, eq. 5.39c) within 1 %."""
    k_t = 0.6
    h = 0.5 * k_t / (L / 2)  # Bi = 0.5
    cell = make_cell(k_through=k_t)
    grid = Grid(W, H, 2, 2)
    sinks = Sinks(faces={"front": FaceSink(h, 0.0), "back": FaceSink(h, 0.0)})
    zero = np.zeros(grid.shape)
    rho_c = cell.derived.heat_capacity_J_K / (W * H * L)
    zeta = brentq(lambda z: z * math.tan(z) - 0.5, 1e-6, math.pi / 2 - 1e-9)
    exact_rate = zeta**2 * (k_t / rho_c) / (L / 2) ** 2
    rates = {}
    for through in (True, False):
        model = PlaneThermal(cell, grid, sinks, throughplane=through)
        x0 = model.initial_state(10.0)
        x1, _ = model.step(x0, zero, 1e-3)  # BE with tiny dt: rate = (1 - T1/T0) / dt
        rates[through] = (1 - model.mean_temperature_C(x1) / 10.0) / 1e-3
    assert rates[True] == pytest.approx(exact_rate, rel=0.01)
    assert abs(rates[False] / exact_rate - 1) > 0.1  # without it, Bi/3 too fast


def test_symmetric_tabs_give_symmetric_field():
    """Mirror-symmetric tabs, collector heat and sinks give a mirror-symmetric field
    (symmetry of the heat equation; no outside number needed)."""
    tabs = (make_tab("negative", "negative", position_m=0.05),
            make_tab("positive", "positive", position_m=0.15))
    cell = make_cell(tabs)
    grid = Grid(W, H, 16, 24)
    net = CollectorNetwork(cell, grid)
    current = 60.0
    heat = uniform(grid, 5.0) + current**2 * net.joule_map_W_per_A2
    tab_heat = {k: current**2 * v for k, v in net.tab_joule_W_per_A2.items()}
    sinks = Sinks(edges={"bottom": EdgeSink(150.0, 20.0)},
                  tabs={"negative": TabSink(0.3, 25.0), "positive": TabSink(0.3, 25.0)})
    model = PlaneThermal(cell, grid, sinks)
    x = model.steady_state(heat, tab_heat)
    T = model.temperature_C(x)
    assert np.allclose(T, T[:, ::-1], rtol=0, atol=1e-9)
    assert np.argmax(T) // grid.nx == grid.ny - 1  # hottest at the tab edge, far from cooling


def _edge_cooled_peak(n):
    """A realistic edge-cooled 1C case with collector heat (invented cell), steady."""
    cell = make_cell(r_neg=1.0e-4, r_pos=1.5e-4)  # 20 foils of 8 um Cu, 15 um Al
    grid = Grid(W, H, n, int(1.5 * n))
    net = CollectorNetwork(cell, grid)
    current = 60.0
    heat = uniform(grid, 4.0) + current**2 * net.joule_map_W_per_A2
    tab_heat = {k: current**2 * v for k, v in net.tab_joule_W_per_A2.items()}
    sinks = Sinks(edges={"bottom": EdgeSink(300.0, 25.0)})
    model = PlaneThermal(cell, grid, sinks)
    return model.temperature_C(model.steady_state(heat, tab_heat)).max()


def test_grid_refinement_peak():
    """Peak temperature moves by less than 0.2 K when the grid is refined twice
    (grid-convergence check; common practice)."""
    peaks = [_edge_cooled_peak(n) for n in (16, 32, 64)]
    assert peaks[0] > 30.0  # a case that matters: the peak is well above the sink
    assert abs(peaks[1] - peaks[0]) < 0.2
    assert abs(peaks[2] - peaks[1]) < 0.2


def _full_sinks(upstream=2):
    return Sinks(
        faces={"front": FaceSink(8.0, 22.0),
               "back": FaceSink(np.linspace(5.0, 15.0, 12 * 8).reshape(12, 8), 24.0)},
        edges={"bottom": EdgeSink(np.linspace(100.0, 300.0, 8), 20.0, layer="fin"),
               "left": EdgeSink(5.0, np.linspace(24.0, 26.0, 12))},
        tabs={"negative": TabSink(0.4, 30.0), "positive": TabSink(0.2, 28.0)},
        fin=Fin("back", 1.0e-3, SOLIDS["aluminium"].thermal_conductivity_W_mK,
                SOLIDS["aluminium"].density_kg_m3, SOLIDS["aluminium"].specific_heat_J_kgK,
                1500.0, "bottom"),
        coolant=CoolantStream("bottom", "+x", 4.0, 18.0, upstream_cells=upstream))


def test_energy_bookkeeping_everything_on():
    """First law over a run: stored + rejected = generated within 1e-9 relative, with
    face, edge (cell and fin layers), tab sinks, a fin and a coolant stream; dt varies
    (exercises the factorisation cache)."""
    cell = make_cell()
    grid = Grid(W, H, 8, 12)
    model = PlaneThermal(cell, grid, _full_sinks(), cache_size=2)
    x = model.initial_state(25.0)
    e0 = model.stored_J(x)
    generated = rejected = 0.0
    rng = np.random.default_rng(0)
    for k in range(120):
        dt = (1.0, 5.0, 10.0)[k % 3]
        heat = rng.uniform(0.0, 0.1, grid.shape)
        tab_heat = {"negative": 0.5, "positive": 0.8}
        x, flows = model.step(x, heat, dt, tab_heat)
        assert set(flows) == {"front", "back", "bottom", "left", "negative", "positive"}
        generated += dt * (heat.sum() + sum(tab_heat.values()))
        rejected += dt * sum(flows.values())
    stored = model.stored_J(x) - e0
    assert abs(stored + rejected - generated) / generated < 1e-9
    # the coolant carries exactly what went into its sink
    C = 4.0
    outlet, inlet = model.coolant_outlet_C(x), model.coolant_inlet_C(x)
    assert C * (outlet - inlet) == pytest.approx(flows["bottom"], rel=1e-9)
    # upstream cells alike: inlet = 18 + 2 * (this cell's heat into the sink) / C
    assert inlet == pytest.approx(18.0 + 2 * flows["bottom"] / C, rel=1e-12)


def test_coolant_against_constant_wall_temperature():
    """Cell held at a uniform wall temperature (huge heat capacity, one step): the
    coolant outlet follows (T_s - T_o)/(T_s - T_i) = exp(-h A / (m c_p))
    (Incropera & DeWitt §8.3.1, eq. 8.42b), whatever the number of strips."""
    cell = make_cell(heat_capacity_J_K=1e15)
    grid = Grid(W, H, 8, 12)
    h, C, T_s, T_in = 400.0, 10.0, 40.0, 20.0
    for direction in ("+y", "-x"):
        sinks = Sinks(faces={"back": FaceSink(h, 0.0)},
                      coolant=CoolantStream("back", direction, C, T_in))
        model = PlaneThermal(cell, grid, sinks, throughplane=False)
        x, flows = model.step(model.initial_state(T_s), np.zeros(grid.shape), 1.0)
        expected = T_s - (T_s - T_in) * math.exp(-h * W * H / C)
        assert model.coolant_outlet_C(x) == pytest.approx(expected, rel=1e-9)
        assert flows["back"] == pytest.approx(C * (expected - T_in), rel=1e-9)
        profile = model.coolant_temperature_C(x)
        assert np.all(np.diff(profile) > 0)  # warms along the flow


def test_tab_node_rod_result():
    """Tab-cooled cell, everything else adiabatic, at steady state. For the tab as a
    rod with uniform generation Q_t and the cell's heat Q_c entering at its root, the
    middle of the rod sits (Q_c + Q_t)(L/(2 k A) + 1/G_sink) above the busbar (plane
    wall with generation, Incropera & DeWitt §3.5, applied to the rod's outer half)."""
    cell = make_cell()
    grid = Grid(W, H, 8, 12)
    g_sink, T_bus = 0.8, 30.0
    model = PlaneThermal(cell, grid, Sinks(tabs={"negative": TabSink(g_sink, T_bus)}))
    q_c, q_t = 3.0, 0.7
    x = model.steady_state(uniform(grid, q_c), {"negative": q_t})
    tab = cell.geometry.tabs[0]
    kA = SOLIDS["copper"].thermal_conductivity_W_mK * tab.width_m * tab.thickness_m
    expected = T_bus + (q_c + q_t) * (tab.free_length_m / (2 * kA) + 1 / g_sink)
    assert model.tab_temperature_C(x)["negative"] == pytest.approx(expected, rel=1e-10)
    assert model.heat_flows_W(x)["negative"] == pytest.approx(q_c + q_t, rel=1e-10)


class TestCoreSurface:
    """Through-plane core-to-surface estimate (Incropera & DeWitt §3.5, eq. 3.42 form)."""

    grid = Grid(W, H, 4, 6)
    heat = np.full((6, 4), 0.5)
    q3 = 0.5 / (grid.cell_area_m2 * L)

    def test_two_faces(self):
        model = PlaneThermal(make_cell(), self.grid,
                             Sinks(faces={"front": FaceSink(200.0, 20.0),
                                          "back": FaceSink(200.0, 20.0)}))
        assert np.allclose(model.core_surface_difference_K(self.heat),
                           self.q3 * L**2 / (8 * 0.6))

    def test_one_face(self):
        model = PlaneThermal(make_cell(), self.grid, Sinks(faces={"back": FaceSink(200.0, 20.0)}))
        dT = model.core_surface_difference_K(self.heat)
        assert np.allclose(dT, self.q3 * L**2 / (2 * 0.6))
        # the field is the through-thickness mean: core = mean + (core - surface) / 3
        x = model.initial_state(25.0)
        assert np.allclose(model.core_temperature_C(x, self.heat) - 25.0, dT / 3)

    def test_edge_cooled(self):
        model = PlaneThermal(make_cell(), self.grid, Sinks(edges={"bottom": EdgeSink(100.0, 20.0)}))
        assert np.all(model.core_surface_difference_K(self.heat) == 0)


def test_one_step_reuses_factorisation_and_matches_fresh_model():
    """Alternating dt with a cache of 1 must give the same states as cached stepping."""
    cell = make_cell()
    grid = Grid(W, H, 8, 12)
    heat = uniform(grid, 5.0)
    a = PlaneThermal(cell, grid, _full_sinks(0), cache_size=1)
    b = PlaneThermal(cell, grid, _full_sinks(0), cache_size=4)
    xa = a.initial_state(25.0)
    xb = b.initial_state(25.0)
    for k in range(6):
        dt = 2.0 if k % 2 else 7.0
        xa, _ = a.step(xa, heat, dt)
        xb, _ = b.step(xb, heat, dt)
    assert np.allclose(xa, xb, rtol=1e-12)


class TestBadInput:
    grid = Grid(W, H, 8, 12)

    def test_heat_shape(self):
        model = PlaneThermal(make_cell(), self.grid)
        with pytest.raises(InputError, match=r"`heat_W`.*\(12, 8\)"):
            model.step(model.initial_state(25.0), np.zeros((3, 3)), 1.0)

    def test_non_finite_heat(self):
        model = PlaneThermal(make_cell(), self.grid)
        x = model.initial_state(25.0)
        with pytest.raises(InputError, match="finite"):
            model.step(x, np.full(self.grid.shape, np.nan), 1.0)
        with pytest.raises(InputError, match=r"tab_heat_W\['negative'\]"):
            model.step(x, np.zeros(self.grid.shape), 1.0, {"negative": math.inf})

    def test_bad_dt(self):
        model = PlaneThermal(make_cell(), self.grid)
        with pytest.raises(InputError, match="`dt`"):
            model.step(model.initial_state(25.0), np.zeros(self.grid.shape), 0.0)

    def test_face_array_shape(self):
        with pytest.raises(InputError, match=r"faces\['front'\].h_W_m2K.*\(12, 8\)"):
            PlaneThermal(make_cell(), self.grid,
                         Sinks(faces={"front": FaceSink(np.ones(5), 20.0)}))

    def test_negative_h(self):
        with pytest.raises(InputError, match=">= 0"):
            PlaneThermal(make_cell(), self.grid, Sinks(faces={"front": FaceSink(-1.0, 20.0)}))

    def test_fin_layer_without_fin(self):
        with pytest.raises(InputError, match="no fin"):
            PlaneThermal(make_cell(), self.grid,
                         Sinks(edges={"bottom": EdgeSink(100.0, 20.0, layer="fin")}))

    def test_coolant_unknown_sink(self):
        with pytest.raises(InputError, match="sinks.coolant.sink"):
            PlaneThermal(make_cell(), self.grid, Sinks(
                faces={"front": FaceSink(10.0, 20.0)},
                coolant=CoolantStream("bottom", "+x", 4.0, 20.0)))

    def test_unknown_tab(self):
        with pytest.raises(InputError, match="sinks.tabs key"):
            PlaneThermal(make_cell(), self.grid, Sinks(tabs={"neg": TabSink(1.0, 20.0)}))
        model = PlaneThermal(make_cell(), self.grid)
        with pytest.raises(InputError, match="tab_heat_W key"):
            model.step(model.initial_state(25.0), np.zeros(self.grid.shape), 1.0, {"neg": 1.0})

    def test_grid_mismatch(self):
        with pytest.raises(InputError, match="grid.width_m"):
            PlaneThermal(make_cell(), Grid(0.3, H, 8, 12))

    def test_adiabatic_steady(self):
        model = PlaneThermal(make_cell(), self.grid)
        with pytest.raises(InputError, match="adiabatic"):
            model.steady_state(np.zeros(self.grid.shape))


@pytest.mark.parametrize("design", ["convection", "face plate", "edge plate", "edge plate + fin",
                                    "tabs", "edge plate + fin + tabs"])
def test_energy_with_cooling_designs(design):
    """First law (stored + rejected = generated within 1e-9) on a demo cell with the heat
    paths the cooling designs of explorer.cooling produce, cells downstream on the plate."""
    import explorer
    from explorer import cooling

    cell = explorer.load_cell("van_nmc_66ah")
    plate = cooling.cold_plate(coolant="water", flow_L_min=1.0, inlet_C=25.0, cells_per_plate=4)
    tabs = cooling.tab_cooling(conductance_W_K=0.5, busbar_C=30.0)
    designs = {
        "convection": cooling.convection(10.0, 25.0),
        "face plate": cooling.face_plate(plate, face="back"),
        "edge plate": cooling.edge_plate(plate),
        "edge plate + fin": cooling.edge_plate(plate, fin_mm=1.0),
        "tabs": tabs,
        "edge plate + fin + tabs": cooling.edge_plate(plate, fin_mm=1.0) + tabs,
    }
    grid = Grid(cell.geometry.width_m, cell.geometry.height_m, 12, 8)
    d = designs[design]
    position = max(d.positions_to_check()) if hasattr(d, "positions_to_check") else 0
    sinks = d.sinks(cell, grid, position=position) if position else d.sinks(cell, grid)
    model = PlaneThermal(cell, grid, sinks)
    net = CollectorNetwork(cell, grid)
    x = model.initial_state(25.0)
    e0, generated, rejected = model.stored_J(x), 0.0, 0.0
    current = 2 * cell.nominal_capacity_Ah
    for dt in (1.0, 2.0, 5.0, 10.0, 10.0, 30.0, 30.0, 60.0):
        heat = uniform(grid, 12.0) + current**2 * net.joule_map_W_per_A2
        tab_heat = {k: current**2 * v for k, v in net.tab_joule_W_per_A2.items()}
        x, flows = model.step(x, heat, dt, tab_heat)
        generated += dt * (heat.sum() + sum(tab_heat.values()))
        rejected += dt * sum(flows.values())
    assert abs(model.stored_J(x) - e0 + rejected - generated) / generated < 1e-9
    if model.has_coolant:
        assert model.coolant_outlet_C(x) > model.coolant_inlet_C(x) >= 25.0


class TestThroughThickness:
    """Face temperatures and the hottest/coldest point through the thickness.

    Reference: the plane wall with uniform generation and convection on its
    faces (Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, §3.5,
    eqs. 3.42-3.46 form): with half-thickness (or, one face insulated, the
    full thickness) ``d``, ``T_s = T_inf + q''' d / h`` and
    ``T(x) = T_s + q''' (d**2 - x**2) / (2 k)``, x from the adiabatic plane.
    Uniform generation and face cooling with adiabatic edges leave no in-plane
    gradient, so every point of the face is this wall.
    """

    grid = Grid(W, H, 4, 6)
    q_W = 12.0
    q3 = q_W / (W * H * L)
    h, T_inf, k = 150.0, 20.0, 0.6

    def _steady(self, faces):
        model = PlaneThermal(make_cell(k_through=self.k), self.grid, Sinks(faces=faces))
        x = model.steady_state(uniform(self.grid, self.q_W))
        return model, x, model.through_thickness_C(x, uniform(self.grid, self.q_W))

    def test_two_faces_cooled(self):
        model, x, tt = self._steady({f: FaceSink(self.h, self.T_inf) for f in ("front", "back")})
        d = L / 2
        surface = self.T_inf + self.q3 * d / self.h
        core = surface + self.q3 * d**2 / (2 * self.k)
        mean = surface + self.q3 * d**2 / (3 * self.k)  # the parabola's mean over [0, d]
        assert np.allclose(model.temperature_C(x), mean, rtol=1e-9)
        for face in ("front", "back"):
            assert np.allclose(tt[face], surface, rtol=1e-9)
        assert np.allclose(tt["hottest"], core, rtol=1e-9)
        assert np.allclose(tt["coldest"], surface, rtol=1e-9)
        flux = model.face_flux_W_m2(x)
        assert np.allclose(flux["front"], self.q3 * d, rtol=1e-9)  # half the heat each way

    def test_one_face_cooled_free_face_is_the_core(self):
        model, x, tt = self._steady({"back": FaceSink(self.h, self.T_inf)})
        surface = self.T_inf + self.q3 * L / self.h
        core = surface + self.q3 * L**2 / (2 * self.k)
        assert np.allclose(tt["back"], surface, rtol=1e-9)
        assert np.allclose(tt["front"], core, rtol=1e-9)  # the insulated face
        assert np.allclose(tt["hottest"], core, rtol=1e-9)
        assert np.allclose(tt["coldest"], surface, rtol=1e-9)
        # the same as the core estimate from the local generation
        heat = uniform(self.grid, self.q_W)
        assert np.allclose(model.core_temperature_C(x, heat), core, rtol=1e-9)

    def test_heat_entering_makes_the_faces_hottest(self):
        """A cold cell between warm sinks, no generation: the faces are warmer than the mean
        and the coldest point is inside (the parabola's vertex)."""
        model = PlaneThermal(make_cell(), self.grid,
                             Sinks(faces={f: FaceSink(self.h, 40.0) for f in ("front", "back")}))
        x, _ = model.step(model.initial_state(20.0), np.zeros(self.grid.shape), 30.0)
        tt = model.through_thickness_C(x, np.zeros(self.grid.shape))
        mean = model.temperature_C(x)
        assert np.all(tt["front"] > mean) and np.all(tt["back"] > mean)
        assert np.allclose(tt["hottest"], tt["front"])
        assert np.all(tt["coldest"] < mean)
        # symmetric parabola: mean - vertex = (face - mean) / 2 (mean of x**2 over [0, d] is d**2/3)
        assert np.allclose(mean - tt["coldest"], (tt["front"] - mean) / 2, rtol=1e-9)

    def test_face_flux_adds_up_to_the_sink_flows(self):
        """Fin on the back, coolant under the fin's edge, a face sink in front: the face
        fluxes times the area are what the model reports into the front sink, and what
        enters the fin (at steady state: what the fin's edge sink takes)."""
        model = PlaneThermal(make_cell(), Grid(W, H, 8, 12), _full_sinks(0))
        grid = model.grid
        x = model.steady_state(uniform(grid, 8.0), {"negative": 0.5, "positive": 0.8})
        flux = model.face_flux_W_m2(x)
        flows = model.heat_flows_W(x)
        area = grid.cell_area_m2
        assert flux["front"].sum() * area == pytest.approx(flows["front"], rel=1e-9)
        assert flux["back"].sum() * area == pytest.approx(flows["back"] + flows["bottom"],
                                                          rel=1e-9)

    def test_face_flux_into_a_coolant_on_both_faces(self):
        faces = {f: FaceSink(300.0, 0.0) for f in ("front", "back")}
        sinks = Sinks(faces=faces, coolant=CoolantStream(("front", "back"), "+y", 2.0, 20.0))
        model = PlaneThermal(make_cell(), self.grid, sinks)
        x = model.steady_state(uniform(self.grid, self.q_W))
        flux = model.face_flux_W_m2(x)
        total = (flux["front"] + flux["back"]).sum() * self.grid.cell_area_m2
        assert total == pytest.approx(model.heat_flows_W(x)["front+back"], rel=1e-9)
        assert total == pytest.approx(self.q_W, rel=1e-9)

    @pytest.mark.parametrize("faces", [("front", "back"), ("back",)])
    def test_lumped_model_agrees(self, faces):
        """The single-temperature model gives the same wall (a steady state by one long step)."""
        from explorer.inplane.lumped import LumpedThermal

        sinks = Sinks(faces={f: FaceSink(self.h, self.T_inf) for f in faces})
        cell = make_cell(k_through=self.k)
        lumped = LumpedThermal(cell, sinks)
        heat = np.full((1, 1), self.q_W)
        x, _ = lumped.step(lumped.initial_state(20.0), heat, 1e12)
        tt = lumped.through_thickness_C(x, heat)
        d = L / len(faces)
        surface = self.T_inf + self.q3 * d / self.h
        assert tt["coldest"][0, 0] == pytest.approx(surface, rel=1e-6)
        assert tt["hottest"][0, 0] == pytest.approx(surface + self.q3 * d**2 / (2 * self.k),
                                                    rel=1e-6)


def test_slab_profile_reproduces_its_inputs():
    """The parabola returned has the given mean and face fluxes (checked on a fine sampling
    of the profile rebuilt from the faces and the vertex)."""
    from explorer.inplane.throughplane import slab_profile

    k, Lz = 0.8, 0.012
    for T_m, qf, qb in ((30.0, 400.0, 150.0), (30.0, -200.0, 50.0), (25.0, -80.0, -120.0)):
        p = slab_profile(T_m, qf, qb, Lz, k)
        # rebuild T(z) = a + b z + c z^2 from the front face, its slope and the curvature
        c = -(qf + qb) / (2 * k * Lz)
        z = np.linspace(0.0, Lz, 20001)
        T = float(p["front"]) + qf / k * z + c * z**2
        assert np.trapezoid(T, z) / Lz == pytest.approx(T_m, abs=1e-6)
        assert T[-1] == pytest.approx(float(p["back"]), abs=1e-9)
        assert -k * (T[-1] - T[-2]) / (z[1] - z[0]) == pytest.approx(qb, rel=1e-3)
        assert float(p["max"]) == pytest.approx(T.max(), abs=1e-6)
        assert float(p["min"]) == pytest.approx(T.min(), abs=1e-6)


def test_lumped_face_flux_adds_up_to_the_sink_flows():
    """The single-temperature model: what leaves through each face is what its face sinks,
    the fin on it and the coolant under the fin's edge take."""
    from explorer.inplane.lumped import LumpedThermal

    model = LumpedThermal(make_cell(), _full_sinks(0))
    x, flows = model.step(model.initial_state(25.0), np.full((1, 1), 8.0), 50.0)
    flux = model.face_flux_W_m2(x)
    assert float(flux["front"][0, 0]) * W * H == pytest.approx(flows["front"], rel=1e-12)
    assert float(flux["back"][0, 0]) * W * H == pytest.approx(flows["back"] + flows["bottom"],
                                                              rel=1e-12)
