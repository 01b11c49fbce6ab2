"""Sanity of cell files: the in-plane conductance from the layers listed (hand calculation)."""

import pytest

from explorer.cell import cell_from_text, list_demo_cells, load_cell

VAN = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")


def test_van_inplane_conductance_by_hand():
    # Layers side by side conduct in parallel: G = sum(k_i t_i) per square (Incropera &
    # DeWitt, Fundamentals of Heat and Mass Transfer, ch. 3, parallel conduction paths).
    # The van demo file: 44 unit layers of 91 um negative coating (1.2 W/(m K)), 16 um
    # separator (0.3), 73 um positive coating (1.0); 44 // 2 + 1 = 23 copper foils of 8 um
    # (401 W/(m K), Incropera Table A.1) and 22 aluminium foils of 14 um (237); two pouch
    # walls of 153 um laminate (0.5, the project's laminate estimate).
    by_hand = (44 * (91e-6 * 1.2 + 16e-6 * 0.3 + 73e-6 * 1.0)
               + 23 * 8e-6 * 401.0 + 22 * 14e-6 * 237.0 + 2 * 153e-6 * 0.5)
    c = load_cell("van_nmc_66ah")
    sheet = c.derived.inplane_conductivity_W_mK * c.geometry.stack_thickness_m
    assert sheet == pytest.approx(by_hand, rel=1e-9)
    # the old product (repeating-unit mean x whole stated thickness) was ~4 % stronger
    assert 0.155 < sheet < 0.1555


def test_unfilled_thickness_conducts_nothing():
    # 0.6 mm more stated thickness (gaps, swelling), same layers: same conductance per
    # square, so a lower effective conductivity over the larger thickness
    a = load_cell("van_nmc_66ah")
    b = cell_from_text(VAN.replace('thickness = "8.9 mm"', 'thickness = "9.5 mm"'))
    ga = a.derived.inplane_conductivity_W_mK * a.geometry.stack_thickness_m
    gb = b.derived.inplane_conductivity_W_mK * b.geometry.stack_thickness_m
    assert gb == pytest.approx(ga, rel=1e-12)
    assert b.derived.inplane_conductivity_W_mK < a.derived.inplane_conductivity_W_mK


def test_measured_inplane_conductivity_is_over_the_whole_thickness():
    # a [thermal] override is used as given (effective over the stated cell thickness)
    c = cell_from_text(VAN + '\n[thermal]\ninplane_conductivity = "20 W/m/K"\n')
    assert c.derived.inplane_conductivity_W_mK == 20.0
    assert c.derived.computed_inplane_conductivity_W_mK == pytest.approx(
        load_cell("van_nmc_66ah").derived.inplane_conductivity_W_mK, rel=1e-12)
