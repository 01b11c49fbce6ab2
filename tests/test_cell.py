"""Demo cells and derived properties checked against published data and first principles."""

import hashlib
import math
from pathlib import Path

import numpy as np
import pytest

from explorer.cell import list_demo_cells, load_cell, ocv
from explorer.cell.derived import foil_counts, layers_thickness_m
from explorer.materials import OCP, SOLIDS

DEMOS = sorted(list_demo_cells())


@pytest.fixture(scope="module")
def cells():
    return {name: load_cell(name) for name in DEMOS}


def test_three_demo_cells_bundled():
    assert len(DEMOS) == 3
    for path in list_demo_cells().values():
        text = Path(path).read_text(encoding="utf-8")
        # each file says at the top that it is invented
        assert "INVENTED FOR THE DEMO" in text.splitlines()[0]


def test_load_by_name_and_path_identical(cells):
    for name, path in list_demo_cells().items():
        by_path = load_cell(path)
        assert by_path == cells[name]
        assert by_path.sha256 == hashlib.sha256(Path(path).read_bytes()).hexdigest()
        assert Path(by_path.source_path) == Path(path).resolve()
        assert load_cell(str(path)).sha256 == by_path.sha256


@pytest.mark.parametrize("name", DEMOS)
def test_capacity_within_5_percent_of_nominal(cells, name):
    c = cells[name]
    assert c.derived.theoretical_capacity_Ah == pytest.approx(c.nominal_capacity_Ah, rel=0.05)


@pytest.mark.parametrize("name", DEMOS)
def test_capacity_from_faradays_law_by_hand(cells, name):
    # Q = F c_max eps_active L A N |dx| / 3600 (Faraday's law), recomputed independently
    c = cells[name]
    g = c.geometry
    for e, q in ((c.negative, c.derived.negative_capacity_Ah),
                 (c.positive, c.derived.positive_capacity_Ah)):
        by_hand = (96485.33212 * e.max_concentration_mol_m3 * e.active_fraction
                   * e.thickness_m * g.width_m * g.height_m * g.unit_layers
                   * abs(e.stoichiometry_100 - e.stoichiometry_0) / 3600)
        assert q == pytest.approx(by_hand, rel=1e-9)
    d = c.derived
    assert d.theoretical_capacity_Ah == min(d.negative_capacity_Ah, d.positive_capacity_Ah)
    # charge balance: both SOC windows hold the same charge (within 1 % for the demo cells)
    assert d.negative_capacity_Ah == pytest.approx(d.positive_capacity_Ah, rel=0.01)
    # N/P a little above one (common practice: 1.05-1.2)
    assert 1.03 < d.np_ratio < 1.25


@pytest.mark.parametrize(
    "name, lo, hi",
    [
        # full-cell OCV at 50 % SOC, common practice: NMC/graphite 3.6-3.8 V,
        # LFP/graphite 3.25-3.35 V
        ("van_nmc_66ah", 3.6, 3.8),
        ("bus_power_12ah", 3.6, 3.8),
        ("rack_lfp_26ah", 3.25, 3.35),
    ],
)
def test_ocv_at_half_soc(cells, name, lo, hi):
    c = cells[name]
    assert lo < float(ocv(c.negative, c.positive, 0.5)) < hi


@pytest.mark.parametrize("name", DEMOS)
def test_soc_window_matches_voltage_window(cells, name):
    # The SOC window is where the OCV spans the voltage window, so a slow discharge from
    # SOC 1 to the lower limit delivers the computed capacity (within 20 mV at the ends).
    c = cells[name]
    v0, v1 = ocv(c.negative, c.positive, np.array([0.0, 1.0]))
    assert v0 == pytest.approx(c.voltage_min_V, abs=0.02)
    assert c.voltage_max_V - 0.1 < v1 <= c.voltage_max_V
    assert np.all(np.diff(ocv(c.negative, c.positive, np.linspace(0, 1, 201))) > 0)


def test_lfp_stack_conductivities_near_published_measurement(cells):
    # Measured on a 20 Ah LFP pouch cell: ~0.52 W/(m K) through-plane and 26.6 W/(m K)
    # in-plane, 541 J/K for 489 g (the arXiv study "Anisotropic thermal characterisation of
    # large-format lithium-ion pouch cells", as quoted in DESIGN.md section 5).
    d = cells["rack_lfp_26ah"].derived
    assert d.computed_throughplane_conductivity_W_mK == pytest.approx(0.52, rel=0.2)
    assert d.computed_inplane_conductivity_W_mK == pytest.approx(26.6, rel=0.15)
    specific_heat = d.computed_heat_capacity_J_K / d.mass_kg
    assert specific_heat == pytest.approx(541 / 0.489, rel=0.25)


@pytest.mark.parametrize("name", DEMOS)
def test_stack_conductivity_composite_wall(cells, name):
    # Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, section 3.1 (composite
    # wall): layers in series add L/k; layers side by side add k L. Repeating unit: half a
    # negative foil, negative coating, separator, positive coating, half a positive foil.
    c = cells[name]
    k_cu = SOLIDS[c.negative_collector.material].thermal_conductivity_W_mK
    k_al = SOLIDS[c.positive_collector.material].thermal_conductivity_W_mK
    layers = [(c.negative_collector.thickness_m / 2, k_cu),
              (c.negative.thickness_m, c.negative.thermal_conductivity_W_mK),
              (c.separator.thickness_m, c.separator.thermal_conductivity_W_mK),
              (c.positive.thickness_m, c.positive.thermal_conductivity_W_mK),
              (c.positive_collector.thickness_m / 2, k_al)]
    total = sum(t for t, _ in layers)
    series = total / sum(t / k for t, k in layers)
    d = c.derived
    assert d.computed_throughplane_conductivity_W_mK == pytest.approx(series, rel=1e-12)
    # in plane, every listed layer of the whole cell side by side (the foils actually built,
    # two pouch walls); the effective conductivity is over the stated cell thickness
    g, n = c.geometry, c.geometry.unit_layers
    n_neg, n_pos = foil_counts(n)
    sheet = (n * sum(t * k for t, k in layers[1:4]) + n_neg * layers[0][0] * 2 * k_cu
             + n_pos * layers[4][0] * 2 * k_al
             + 2 * g.pouch_foil_thickness_m * SOLIDS["pouch_laminate"].thermal_conductivity_W_mK)
    assert d.computed_inplane_conductivity_W_mK * g.stack_thickness_m == pytest.approx(
        sheet, rel=1e-12)
    # trade fact: foils make a pouch stack far more conductive in-plane than through it
    assert d.inplane_conductivity_W_mK > 10 * d.throughplane_conductivity_W_mK


@pytest.mark.parametrize("name", DEMOS)
def test_foils_and_sheet_resistance(cells, name):
    c = cells[name]
    n = c.geometry.unit_layers
    d = c.derived
    # negatives outermost: one more negative foil than positive for an even layer count
    assert (d.negative_foils, d.positive_foils) == foil_counts(n)
    assert 2 * d.positive_foils >= n and 2 * (d.negative_foils - 1) >= n - 1
    # sheet resistance of n foils in parallel: R_s = 1 / (sigma t n)
    sig = SOLIDS[c.negative_collector.material].electrical_conductivity_S_m
    assert d.negative_sheet_resistance_ohm == pytest.approx(
        1 / (sig * c.negative_collector.thickness_m * d.negative_foils))
    # collectors conduct far better than the electrodes (trade fact, DESIGN.md section 5)
    assert sig > 1e4 * c.negative.solid_conductivity_S_m


def test_foil_counts_construction():
    assert foil_counts(2) == (2, 1)  # N-P-N
    assert foil_counts(44) == (23, 22)
    assert foil_counts(3) == (2, 2)  # N-P-N-P


@pytest.mark.parametrize(
    "name, lo, hi",
    [
        # gravimetric energy of pouch cells, common practice: high-energy NMC 230-300 Wh/kg,
        # power NMC 140-230 Wh/kg, LFP 140-200 Wh/kg
        ("van_nmc_66ah", 230, 300),
        ("bus_power_12ah", 140, 230),
        ("rack_lfp_26ah", 140, 200),
    ],
)
def test_specific_energy_plausible(cells, name, lo, hi):
    d = cells[name].derived
    assert lo < d.energy_Wh / d.mass_kg < hi


@pytest.mark.parametrize("name", DEMOS)
def test_energy_is_ocv_integral(cells, name):
    c = cells[name]
    soc = np.linspace(0, 1, 20001)
    v = ocv(c.negative, c.positive, soc)
    mean = float(np.sum(0.5 * (v[1:] + v[:-1]) * np.diff(soc)))
    assert c.derived.energy_Wh == pytest.approx(c.derived.theoretical_capacity_Ah * mean,
                                                rel=1e-5)


@pytest.mark.parametrize("name", DEMOS)
def test_geometry_consistent(cells, name):
    c = cells[name]
    g = c.geometry
    stack = layers_thickness_m(g, c.negative_collector, c.positive_collector, c.negative,
                               c.positive, c.separator)
    assert 0.85 * g.stack_thickness_m < stack <= 1.02 * g.stack_thickness_m
    # a pouch cell is much thinner than it is wide or tall (trade fact)
    assert g.stack_thickness_m < 0.1 * min(g.width_m, g.height_m)
    assert {t.polarity for t in g.tabs} == {"negative", "positive"}
    assert c.derived.active_area_m2 == pytest.approx(g.width_m * g.height_m * g.unit_layers)


def test_tab_layouts_as_specified(cells):
    van = cells["van_nmc_66ah"].geometry.tabs
    assert {t.edge for t in van} == {"top"}
    rack = cells["rack_lfp_26ah"]
    assert {rack.tab("negative")[0].edge, rack.tab("positive")[0].edge} == {"bottom", "top"}
    bus = cells["bus_power_12ah"]
    for t in bus.geometry.tabs:
        edge_len = bus.geometry.height_m if t.edge in ("left", "right") else bus.geometry.width_m
        assert t.width_m > 0.6 * edge_len  # wide tabs


@pytest.mark.parametrize("name", DEMOS)
def test_mass_includes_all_parts(cells, name):
    # mass by hand: coatings + separators + electrolyte in pores + foils (lower bound: no
    # pouch, no tabs) and an upper bound adding a generous 30 %
    c = cells[name]
    g = c.geometry
    A, n = g.width_m * g.height_m, g.unit_layers
    core = A * n * (c.negative.thickness_m * c.negative.density_kg_m3
                    + c.positive.thickness_m * c.positive.density_kg_m3
                    + c.separator.thickness_m * c.separator.density_kg_m3)
    pores = A * n * (c.negative.thickness_m * c.negative.porosity
                     + c.positive.thickness_m * c.positive.porosity
                     + c.separator.thickness_m * c.separator.porosity)
    nf, pf = foil_counts(n)
    foils = A * (nf * c.negative_collector.thickness_m * 8933
                 + pf * c.positive_collector.thickness_m * 2702)
    lower = core + pores * c.electrolyte.density_kg_m3 + foils
    assert lower < c.derived.mass_kg < 1.3 * lower
    assert c.derived.heat_capacity_J_K == c.derived.computed_heat_capacity_J_K


def test_overrides_replace_used_values_and_keep_computed(tmp_path):
    src = list_demo_cells()["rack_lfp_26ah"].read_text(encoding="utf-8")
    text = src + ('\n[thermal]\ninplane_conductivity = "26.6 W/m/K"\n'
                  'throughplane_conductivity = "0.52 W/m/K"\nheat_capacity = "541 J/K"\n')
    f = tmp_path / "measured.toml"
    f.write_text(text, encoding="utf-8")
    c, base = load_cell(f), load_cell("rack_lfp_26ah")
    d = c.derived
    assert d.inplane_conductivity_W_mK == 26.6
    assert d.throughplane_conductivity_W_mK == 0.52
    assert d.heat_capacity_J_K == 541.0
    assert d.computed_heat_capacity_J_K == base.derived.computed_heat_capacity_J_K
    assert d.computed_inplane_conductivity_W_mK == base.derived.inplane_conductivity_W_mK
    assert c.sha256 != base.sha256


def test_units_are_converted_to_si(tmp_path):
    src = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")
    text = (src.replace('thickness = "91 um"', 'thickness = "0.091 mm"')
            .replace('width = "240 mm"', 'width = "24 cm"')
            .replace('porosity = 0.30', 'porosity = "30 %"')
            .replace('temperature_max = "55 degC"', 'temperature_max = "328.15 K"'))
    f = tmp_path / "units.toml"
    f.write_text(text, encoding="utf-8")
    a, b = load_cell(f), load_cell("van_nmc_66ah")
    assert a.negative.thickness_m == pytest.approx(b.negative.thickness_m, rel=1e-12)
    assert a.geometry.width_m == pytest.approx(0.24, rel=1e-12)
    assert a.negative.porosity == pytest.approx(0.30, rel=1e-12)
    assert a.temperature_max_C == pytest.approx(55.0, abs=1e-9)
    assert b.negative.thickness_m == 91e-6
    assert math.isclose(b.derived.theoretical_capacity_Ah, a.derived.theoretical_capacity_Ah,
                        rel_tol=1e-9)


def test_electrode_functions_resolve(cells):
    for c in cells.values():
        for e in (c.negative, c.positive):
            assert e.ocp in OCP


def test_cell_from_text_and_dict_match_file():
    import tomllib

    from explorer.cell import cell_from_dict, cell_from_text

    path = list_demo_cells()["bus_power_12ah"]
    text = path.read_text(encoding="utf-8")
    a, b = load_cell(path), cell_from_text(text, source="pasted")
    assert a.derived == b.derived and a.geometry == b.geometry
    assert b.sha256 == a.sha256 and b.source_path == "pasted"
    c = cell_from_dict(tomllib.loads(text))
    assert c.derived == a.derived and len(c.sha256) == 64


def test_summary_rows(cells, tmp_path):
    from explorer.cell import summary, summary_text

    c = cells["van_nmc_66ah"]
    rows = {r["key"]: r for r in summary(c)}
    assert rows["mass"]["value"] == pytest.approx(c.derived.mass_kg * 1e3)
    assert rows["mass"]["unit"] == "g"
    assert "computed_heat capacity" not in rows  # no override, no extra row
    assert "Van module NMC 66 Ah" in summary_text(c)
    src = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")
    f = tmp_path / "o.toml"
    f.write_text(src + '\n[thermal]\nheat_capacity = "800 J/K"\n', encoding="utf-8")
    rows = {r["key"]: r for r in summary(load_cell(f))}
    assert rows["heat_capacity"]["value"] == 800.0
    assert rows["computed_heat capacity"]["value"] == pytest.approx(
        c.derived.computed_heat_capacity_J_K)
