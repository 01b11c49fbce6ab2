"""Sanity of cell files: the in-plane conductance from the layers listed, the stated capacity
and mass against what the layers give (hand calculations)."""

import pytest

from explorer.cell import cell_from_text, list_demo_cells, load_cell
from explorer.cell.loader import STATED_TOLERANCE
from explorer.validators import CellFileError

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
    assert c.derived.inplane_conductivity_W_mK == pytest.approx(20.0, rel=1e-12)
    assert c.derived.computed_inplane_conductivity_W_mK == pytest.approx(
        load_cell("van_nmc_66ah").derived.inplane_conductivity_W_mK, rel=1e-12)


# ---- stated figures against the layers ----------------------------------------------------

def _van(**subs):
    text = VAN
    for old, new in subs.values():
        assert old in text
        text = text.replace(old, new)
    return cell_from_text(text, "my_cell.toml")


def test_faraday_capacity_of_the_van_loadings_by_hand():
    # Faraday's law, Q = F c_max eps_act L A N |dx| / 3600, on the van file's positive
    # coating (the smaller of the two windows): F = 96485.33 C/mol (CODATA), 48800 mol/m^3,
    # active fraction 0.65, 73 um, 240 x 160 mm, 44 layers, window 0.9078..0.2642
    by_hand = 96485.33 * 48800 * 0.65 * 73e-6 * 0.240 * 0.160 * 44 * (0.9078 - 0.2642) / 3600
    c = load_cell("van_nmc_66ah")
    assert c.derived.theoretical_capacity_Ah == pytest.approx(by_hand, rel=1e-3)
    # the stated 66 Ah is within the tolerance
    assert abs(c.nominal_capacity_Ah / by_hand - 1) < STATED_TOLERANCE


@pytest.mark.parametrize("stated", ["90 Ah", "50 Ah", "660 Ah"])
def test_stated_capacity_far_from_the_loadings_is_an_error(stated):
    with pytest.raises(CellFileError) as err:
        _van(q=('nominal_capacity = "66 Ah"', f'nominal_capacity = "{stated}"'))
    msg = str(err.value)
    assert err.value.fields() == ["cell.nominal_capacity"]
    assert "my_cell.toml" in msg and stated in msg and "67.49 Ah" in msg and "20%" in msg


@pytest.mark.parametrize("stated", ["60 Ah", "75 Ah"])
def test_stated_capacity_within_the_tolerance_loads(stated):
    assert _van(q=('nominal_capacity = "66 Ah"', f'nominal_capacity = "{stated}"'))


def test_capacity_check_catches_a_wrong_layer_count():
    # 22 layers instead of 44 halves the loadings' capacity: the stated 66 Ah is then 2x
    with pytest.raises(CellFileError, match="nominal_capacity"):
        _van(n=("unit_layers = 44", "unit_layers = 22"))


def test_stated_mass_checked_against_the_parts():
    c = _van(m=('nominal_capacity = "66 Ah"', 'nominal_capacity = "66 Ah"\nmass = "0.95 kg"'))
    assert c.mass_kg == pytest.approx(0.95)
    assert load_cell("van_nmc_66ah").mass_kg is None  # optional
    with pytest.raises(CellFileError) as err:
        _van(m=('nominal_capacity = "66 Ah"', 'nominal_capacity = "66 Ah"\nmass = "1.3 kg"'))
    msg = str(err.value)
    assert err.value.fields() == ["cell.mass"]
    assert "1300 g" in msg and "880.3 g" in msg and "my_cell.toml" in msg
