"""Collector-foil potentials and Joule heat (explorer.inplane.collector).

The cells here are built directly from the dataclasses with values invented
for the tests (no real product); material constants come from
``explorer.materials.SOLIDS``.
"""

from __future__ import annotations

import numpy as np
import pytest

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
from explorer.inplane.collector import CollectorNetwork, auto_refine, tab_resistance_ohm
from explorer.inplane.grid import Grid
from explorer.materials import SOLIDS
from explorer.validators import InputError

W, H = 0.2, 0.3  # invented coated area, m


def make_tab(name, polarity, edge="top", position_m=0.05, width_m=0.04, thickness_m=2e-4,
             material="copper", free_length_m=0.02, weld_resistance_ohm=5e-5):
    return Tab(name, polarity, edge, position_m, width_m, thickness_m, material, free_length_m,
               weld_resistance_ohm)


def make_cell(tabs=None, width_m=W, height_m=H, r_neg=1e-3, r_pos=2e-3):
    """An invented cell; only the fields the collector model reads matter."""
    if tabs is None:
        tabs = (make_tab("negative", "negative", position_m=0.05),
                make_tab("positive", "positive", position_m=0.15, material="aluminium"))
    geometry = Geometry(width_m, height_m, 40, 0.01, 1.5e-4, tuple(tabs))
    electrode = Electrode(7e-5, 0.3, 0.6, 5e-6, 30000.0, 0.02, 0.9, "graphite", 1e-14, 3e4,
                          1e-11, 3e4, 100.0, 1.5, 2000.0, 800.0, 1.0)
    separator = Separator(2e-5, 0.4, 1.5, 1000.0, 1900.0, 0.3)
    electrolyte = Electrolyte(1000.0, "lipf6_carbonate_conductivity",
                              "lipf6_carbonate_diffusivity", 0.36, 1.0, 1e4, 1e4, 1200.0, 1500.0)
    area = width_m * height_m
    derived = Derived(area, area * 40, 60.0, 66.0, 60.0, 1.1, 1.0, 220.0, 21, 20, r_neg, r_pos,
                      25.0, 0.6, 900.0, 25.0, 0.6, 900.0)
    return Cell("invented-test-cell", "invented for the tests", 60.0, 2.8, 4.2, -20.0, 55.0,
                geometry, Collector("copper", 1e-5), Collector("aluminium", 1.5e-5), electrode,
                electrode, separator, electrolyte, ThermalOverrides(), derived)


def whole_edge_cell(free_length_m=0.0, weld=0.0):
    """Negative tab along the whole bottom edge; positive tab anywhere (irrelevant)."""
    return make_cell((make_tab("neg", "negative", "bottom", W / 2, W, 2e-4, "copper",
                               free_length_m, weld),
                      make_tab("pos", "positive", "top", 0.1, 0.04, material="aluminium")))


def energy_total(net):
    return net.joule_map_W_per_A2.sum() + sum(net.tab_joule_W_per_A2.values())


class TestDistributedLoad:
    r"""A foil fed along one whole edge and drained uniformly.

    Classic distributed-load result (derived here; the same as a resistive
    line with uniform leakage, e.g. any electrical-engineering text on
    distributed loads). In 1-D along y with the tab at y = 0, sheet resistance
    ``R_s``, drain ``J = I / (W H)``:  ``d2V/dy2 = -J R_s`` with ``V(0) = 0``,
    ``V'(H) = 0``, so ``V(y) = J R_s (H y - y**2 / 2)``. The Joule heat
    ``P = int J V W dy = J**2 R_s W H**3 / 3 = I**2 R_s H / (3 W)``: the
    heat-equivalent resistance is one third of the end-to-end ``R_s H / W``.
    """

    def test_one_third_and_grid_convergence(self):
        cell = whole_edge_cell()
        r_s = cell.derived.negative_sheet_resistance_ohm
        exact = r_s * H / (3 * W)
        errors = []
        for ny in (6, 12, 24, 48):
            net = CollectorNetwork(cell, Grid(W, H, 4, ny), refine=1)
            errors.append(abs(net.foil_joule_W_per_A2["negative"].sum() - exact) / exact)
            assert net.tab_joule_W_per_A2["neg"] == pytest.approx(0.0, abs=1e-15)
        assert errors[-1] < 1e-3
        # second order: each halving of dy cuts the error about four times
        rates = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
        assert np.all(rates > 1.8)

    def test_potential_profile(self):
        cell = whole_edge_cell()
        r_s = cell.derived.negative_sheet_resistance_ohm
        grid = Grid(W, H, 4, 60)
        net = CollectorNetwork(cell, grid, refine=2)
        current = 50.0
        u = -net.potentials(current)["negative"]  # drop below the terminal
        j = current / (W * H)
        y = grid.y
        exact = j * r_s * (H * y - y**2 / 2)
        assert np.allclose(u, exact[:, None], rtol=0, atol=2e-3 * exact.max())
        assert np.allclose(u, u[:, :1])  # no variation across x

    def test_tab_resistance_adds_in_series(self):
        """Uniform current along the root: the tab adds ``rho L / (w t) + R_weld``."""
        cell = whole_edge_cell(free_length_m=0.015, weld=2e-5)
        tab = cell.geometry.tabs[0]
        r_tab = 0.015 / (SOLIDS["copper"].electrical_conductivity_S_m * W * 2e-4) + 2e-5
        assert tab_resistance_ohm(tab) == pytest.approx(r_tab, rel=1e-12)
        net = CollectorNetwork(cell, Grid(W, H, 4, 48), refine=2)
        assert net.tab_joule_W_per_A2["neg"] == pytest.approx(r_tab, rel=1e-9)
        r_s = cell.derived.negative_sheet_resistance_ohm
        assert net.resistance_by_polarity_ohm["negative"] == pytest.approx(
            r_s * H / (3 * W) + r_tab, rel=2e-4)


LAYOUTS = {
    "same edge": (make_tab("n", "negative", "top", 0.04, 0.03),
                  make_tab("p", "positive", "top", 0.16, 0.03, material="aluminium")),
    "opposite edges": (make_tab("n", "negative", "top", 0.04, 0.03),
                       make_tab("p", "positive", "bottom", 0.16, 0.03, material="aluminium")),
    "side edges, two per polarity": (
        make_tab("n1", "negative", "left", 0.05, 0.03), make_tab("n2", "negative", "left", 0.25, 0.03),
        make_tab("p1", "positive", "right", 0.05, 0.03, material="aluminium"),
        make_tab("p2", "positive", "right", 0.25, 0.03, material="aluminium")),
}


@pytest.mark.parametrize("layout", list(LAYOUTS))
def test_energy_consistency(layout):
    """Foil + tab Joule heat per A**2 equals the terminal resistance (first law)."""
    cell = make_cell(LAYOUTS[layout])
    grid = Grid(W, H, 8, 12)
    net = CollectorNetwork(cell, grid)
    assert energy_total(net) == pytest.approx(net.resistance_ohm, rel=1e-9)
    assert sum(net.tab_current_share.values()) == pytest.approx(2.0, rel=1e-9)
    # the general solver agrees with the uniform solution and closes its own balance
    current = 80.0
    out = net.solve(np.full(grid.shape, current / grid.area_m2))
    assert out["terminal_drop_V"] == pytest.approx(current * net.resistance_ohm, rel=1e-9)
    pot = net.potentials(current)
    assert np.allclose(out["positive"], pot["positive"], rtol=1e-9)
    assert np.allclose(out["negative"], pot["negative"], rtol=1e-9)
    assert np.all(pot["positive"] >= 0) and np.all(pot["negative"] <= 0)
    # sum(J * drop * dA) is the heat (discrete Tellegen)
    j = np.full(grid.shape, current / grid.area_m2)
    heat = out["joule_W"].sum() + sum(out["tab_joule_W"].values())
    assert np.sum(j * out["drop_V"]) * grid.cell_area_m2 == pytest.approx(heat, rel=1e-9)


def test_same_versus_opposite_edges():
    """Each foil's resistance depends only on its own tab, but opposite-edge tabs even out
    the local drop (common practice in pouch-cell tab design; follows from superposing the
    two foil solutions)."""
    same = CollectorNetwork(make_cell(LAYOUTS["same edge"]), Grid(W, H, 8, 12))
    opposite = CollectorNetwork(make_cell(LAYOUTS["opposite edges"]), Grid(W, H, 8, 12))
    assert same.resistance_ohm == pytest.approx(opposite.resistance_ohm, rel=1e-6)
    spread = [np.ptp(n.drop_map_V_per_A()) for n in (same, opposite)]
    assert spread[1] < spread[0]


def test_two_tabs_share_and_lower_resistance():
    """Two equal negative tabs placed symmetrically carry half the current each (symmetry)."""
    one = make_cell((make_tab("n", "negative", "top", 0.1, 0.03),
                     make_tab("p", "positive", "bottom", 0.1, 0.03, material="aluminium")))
    two = make_cell((make_tab("n1", "negative", "top", 0.03, 0.03),
                     make_tab("n2", "negative", "top", 0.17, 0.03),
                     make_tab("p", "positive", "bottom", 0.1, 0.03, material="aluminium")))
    grid = Grid(W, H, 10, 12)
    a, b = CollectorNetwork(one, grid), CollectorNetwork(two, grid)
    assert b.tab_current_share["n1"] == pytest.approx(0.5, rel=1e-9)
    assert b.resistance_by_polarity_ohm["negative"] < a.resistance_by_polarity_ohm["negative"]
    u = b.potentials(1.0)["negative"]
    assert np.allclose(u, u[:, ::-1], rtol=1e-9, atol=1e-15)


def test_refinement_converges():
    """Resistance with narrow off-centre tabs converges as the potential grid is refined;
    the default refinement is within 2 % of the Richardson-extrapolated limit
    (Richardson extrapolation with the observed order, e.g. Roache, "Verification and
    Validation in Computational Science and Engineering", 1998)."""
    cell = make_cell((make_tab("n", "negative", "top", 0.035, 0.02),
                      make_tab("p", "positive", "top", 0.15, 0.025, material="aluminium")))
    grid = Grid(W, H, 8, 12)
    r = [CollectorNetwork(cell, grid, refine=k).resistance_ohm for k in (4, 8, 16)]
    d1, d2 = r[0] - r[1], r[1] - r[2]
    assert 0 < d2 < 0.5 * d1
    order = np.log2(d1 / d2)
    limit = r[2] - d2 / (2**order - 1)
    auto = CollectorNetwork(cell, grid).resistance_ohm
    assert auto == pytest.approx(limit, rel=0.02)


def _fem_cell_means(cell, polarity, grid, per_cell=5):
    """Independent finite-element solution with scikit-fem (Gustafsson & McBain,
    "scikit-fem: A Python package for finite element assembly", JOSS 5 (2020) 2369): the
    validation report's solver (:func:`explorer.validation.reference.fem_sheet_potential`),
    quadratic triangles with ``per_cell`` intervals per thermal cell and the same Robin tab
    condition, g = 1 / ((R_tab + R_weld) w). Returns the cell means of u over the thermal grid
    and the compliance int J u (= the heat-equivalent resistance for 1 A)."""
    pytest.importorskip("skfem")
    from explorer.validation.reference import fem_sheet_potential

    sigma = 1.0 / getattr(cell.derived, f"{polarity}_sheet_resistance_ohm")
    tabs = []
    for t in cell.tab(polarity):
        assert t.edge == "top"
        tabs.append((t.position_m - t.width_m / 2, t.position_m + t.width_m / 2,
                     tab_resistance_ohm(t)))
    return fem_sheet_potential(sigma, W, H, tabs, grid.nx, grid.ny, per_cell=per_cell)


def test_against_scikit_fem():
    """Off-centre narrow tabs: FV potentials within 1 % of the maximum drop of a fine
    finite-element solution (scikit-fem) of the same problem and tab condition."""
    cell = make_cell((make_tab("n", "negative", "top", 0.035, 0.02, free_length_m=0.01,
                               weld_resistance_ohm=2e-5),
                      make_tab("p", "positive", "top", 0.15, 0.025, material="aluminium",
                               free_length_m=0.01, weld_resistance_ohm=2e-5)))
    grid = Grid(W, H, 16, 24)
    net = CollectorNetwork(cell, grid)
    assert net.refine == auto_refine(cell, grid) >= 8
    for polarity in ("negative", "positive"):
        fem, compliance = _fem_cell_means(cell, polarity, grid)
        fv = abs(net.potentials(1.0)[polarity])
        assert np.max(np.abs(fv - fem)) < 0.01 * fem.max()
        assert net.resistance_by_polarity_ohm[polarity] == pytest.approx(compliance, rel=0.01)


class TestBadInput:
    def test_tab_off_edge(self):
        cell = make_cell((make_tab("n", "negative", "top", 0.19, 0.04),
                          make_tab("p", "positive", "top", 0.1, 0.03, material="aluminium")))
        with pytest.raises(InputError, match="tab 'n'.*top edge"):
            CollectorNetwork(cell, Grid(W, H, 8, 12))

    def test_missing_polarity(self):
        cell = make_cell((make_tab("n", "negative", "top", 0.05, 0.04),))
        with pytest.raises(InputError, match="positive tab"):
            CollectorNetwork(cell, Grid(W, H, 8, 12))

    def test_unknown_material(self):
        cell = make_cell((make_tab("n", "negative", "top", 0.05, 0.04, material="unobtainium"),
                          make_tab("p", "positive", "top", 0.15, 0.03, material="aluminium")))
        with pytest.raises(InputError, match="unobtainium.*|.*copper"):
            CollectorNetwork(cell, Grid(W, H, 8, 12))

    def test_solve_shape(self):
        net = CollectorNetwork(make_cell(), Grid(W, H, 8, 12))
        with pytest.raises(InputError, match=r"current_density_A_m2.*\(12, 8\)"):
            net.solve(np.ones((3, 3)))
        with pytest.raises(InputError, match="finite"):
            net.solve(np.full((12, 8), np.nan))

    def test_refine(self):
        with pytest.raises(InputError, match="refine"):
            CollectorNetwork(make_cell(), Grid(W, H, 8, 12), refine=0)


def test_reciprocity_of_point_drains():
    """The drop at patch a for 1 A drawn at patch b equals the drop at b for 1 A drawn at
    a: the reciprocity theorem of passive linear resistive networks (e.g. Desoer & Kuh,
    "Basic Circuit Theory", 1969, from memory). Also linearity: the response to a sum of
    drains is the sum of responses, and a charge current flips every sign."""
    cell = make_cell(LAYOUTS["opposite edges"])
    grid = Grid(W, H, 8, 12)
    net = CollectorNetwork(cell, grid)
    a, b = (2, 1), (9, 6)

    def point(rc):
        j = np.zeros(grid.shape)
        j[rc] = 1.0 / grid.cell_area_m2
        return j

    sa, sb = net.solve(point(a)), net.solve(point(b))
    assert sa["drop_V"][b] == pytest.approx(sb["drop_V"][a], rel=1e-9)
    both = net.solve(point(a) + point(b))
    assert np.allclose(both["drop_V"], sa["drop_V"] + sb["drop_V"], rtol=1e-10, atol=0)
    charge = net.solve(-point(a))
    assert np.allclose(charge["negative"], -sa["negative"])
    assert np.allclose(charge["joule_W"], sa["joule_W"])
    assert charge["terminal_drop_V"] == pytest.approx(-sa["terminal_drop_V"])
