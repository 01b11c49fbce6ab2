"""Channel correlations (explorer.cooling.channels) against published values and libraries.

Sources:
* Shah & London, *Laminar Flow Forced Convection in Ducts* (1978): fully
  developed rectangular-duct f Re, Nu_H1, Nu_T (table values from memory, as
  also reproduced in Incropera & DeWitt, *Fundamentals of Heat and Mass
  Transfer*, 6th ed. 2007, Table 8.1 -- from memory).
* Incropera & DeWitt §8.4: circular duct Nu = 4.36 (uniform flux, eq. 8.53)
  and 3.66 (uniform wall temperature, eq. 8.55), f = 64/Re (eq. 8.19).
* Reference libraries: ``ht`` (Caleb Bell, ht.conv_internal) and ``fluids``
  (fluids.friction) from the package registry.
"""

from __future__ import annotations

import fluids
import ht
import numpy as np
import pytest

from explorer.cooling import channels as ch
from explorer.cooling.coolant import CoolantProperties
from explorer.validation.reference import DUCT_TABLE_8_1 as TABLE_8_1
from explorer.validators import InputError

# TABLE_8_1: Incropera & DeWitt Table 8.1 / Shah & London (from memory), b/a -> (Nu_H, Nu_T,
# f Re); the validation report's copy of the table, one place for it


def test_reference_libraries_reproduce_the_circular_duct_values():
    """Before using ht and fluids as references: circular laminar Nu 4.36 / 3.66 and
    f = 64/Re (Incropera & DeWitt §8.4, eqs. 8.53, 8.55, 8.19)."""
    assert ht.conv_internal.laminar_Q_const() == pytest.approx(4.36, abs=0.005)
    assert ht.conv_internal.laminar_T_const() == pytest.approx(3.66, abs=0.005)
    assert fluids.friction.friction_laminar(1000.0) * 1000.0 == pytest.approx(64.0)


@pytest.mark.parametrize("ratio", sorted(TABLE_8_1))
def test_rectangular_laminar_against_table(ratio):
    nu_h, nu_t, fre = TABLE_8_1[ratio]
    aspect = 1.0 / ratio
    assert ch.nusselt_laminar_rectangular(aspect, "H1") == pytest.approx(nu_h, rel=0.01)
    assert ch.nusselt_laminar_rectangular(aspect, "T") == pytest.approx(nu_t, rel=0.01)
    assert ch.fre_laminar_rectangular(aspect) == pytest.approx(fre, rel=0.015)


def test_shah_london_exact_limits():
    """Square duct f Re = 56.91, Nu_H1 = 3.61, Nu_T = 2.98; parallel plates f Re = 96,
    Nu_H = 8.235, Nu_T = 7.541 (Shah & London 1978, from memory)."""
    assert ch.fre_laminar_rectangular(1.0) == pytest.approx(56.91, rel=1e-3)
    assert ch.fre_laminar_rectangular(0.0) == pytest.approx(96.0)
    assert ch.nusselt_laminar_rectangular(1.0) == pytest.approx(3.61, rel=2e-3)
    assert ch.nusselt_laminar_rectangular(1.0, "T") == pytest.approx(2.98, rel=2e-3)
    assert ch.nusselt_laminar_rectangular(0.5) == pytest.approx(4.12, rel=2e-3)
    assert ch.nusselt_laminar_rectangular(0.5, "T") == pytest.approx(3.39, rel=2e-3)
    assert ch.nusselt_laminar_rectangular(0.0) == pytest.approx(8.235)
    assert ch.nusselt_laminar_rectangular(0.0, "T") == pytest.approx(7.541)


def test_nu_h1_matches_ht():
    """ht.conv_internal.Nu_laminar_rectangular_Shan_London implements the same fit."""
    for a in np.linspace(0.0, 1.0, 11):
        assert ch.nusselt_laminar_rectangular(a) == pytest.approx(
            ht.conv_internal.Nu_laminar_rectangular_Shan_London(a), rel=1e-12)


@pytest.mark.parametrize("re", [2500.0, 4e3, 1e4, 5e4, 2e5, 1e6, 5e6])
@pytest.mark.parametrize("ed", [0.0, 1e-5, 1e-4, 1e-3, 1e-2])
def test_colebrook_matches_fluids(re, ed):
    assert ch.colebrook(re, ed) == pytest.approx(fluids.friction.Colebrook(re, ed), rel=1e-8)


@pytest.mark.parametrize("re", [4e3, 1e4, 1e5, 1e6])
@pytest.mark.parametrize("pr", [0.7, 6.0, 30.0, 200.0])
def test_gnielinski_matches_ht(re, pr):
    f = fluids.friction.Colebrook(re, 1e-4)
    assert ch.gnielinski(re, pr, f) == pytest.approx(ht.conv_internal.turbulent_Gnielinski(re, pr, f),
                                                     rel=0.01)
    assert ch.nusselt(max(re, ch.RE_TURBULENT), pr, 0.5, 1e-4) == pytest.approx(
        ht.conv_internal.Nu_conv_internal(max(re, ch.RE_TURBULENT), pr, 1e-4, Method="Gnielinski"),
        rel=0.01)


def test_turbulent_nusselt_near_dittus_boelter():
    """Gnielinski vs Dittus-Boelter Nu = 0.023 Re^0.8 Pr^0.4 (Incropera & DeWitt eq. 8.60):
    within the latter's quoted accuracy of about 25 %."""
    for re in (2e4, 1e5):
        db = 0.023 * re**0.8 * 6.0**0.4
        assert ch.nusselt(re, 6.0, 0.5) == pytest.approx(db, rel=0.25)


def test_transition_is_continuous_and_monotone():
    """Gnielinski (1995) interpolation 2300..1e4 for Nu and the friction blend 2300..4000
    join the laminar and turbulent laws without jumps (continuity, by construction)."""
    eps = 1e-6
    for r0 in (ch.RE_LAMINAR, ch.RE_TURBULENT):
        assert ch.nusselt(r0 * (1 - eps), 7.0, 0.4) == pytest.approx(ch.nusselt(r0 * (1 + eps), 7.0, 0.4),
                                                                     rel=1e-4)
    for r0 in (ch.RE_LAMINAR, ch.RE_FRICTION_TURBULENT):
        assert ch.darcy_friction(r0 * (1 - eps), 0.4) == pytest.approx(
            ch.darcy_friction(r0 * (1 + eps), 0.4), rel=1e-4)
    res = np.linspace(2300, 1e4, 50)
    nus = [ch.nusselt(r, 7.0, 0.4) for r in res]
    assert np.all(np.diff(nus) > 0)
    assert [ch.flow_regime(r) for r in (1000, 5000, 2e4)] == ["laminar", "transition", "turbulent"]


# Water near 25 degC, values stated so the hand calculation does not depend on CoolProp.
WATER = CoolantProperties(25.0, 997.05, 4181.3, 8.900e-4, 0.6065)


def test_pressure_drop_worked_example():
    """Straight 5 mm x 5 mm channel, 1 m long, 0.5 L/min of water (rho 997.05, mu 8.900e-4):

    A = 25e-6 m2, v = (0.5/60000)/25e-6 = 0.33333 m/s, D_h = 5 mm,
    Re = 997.05 * 0.33333 * 0.005 / 8.9e-4 = 1867.1 (laminar),
    f = 56.918 / 1867.1 = 0.030484 (Shah & London square duct),
    rho v^2 / 2 = 55.392 Pa,
    dp_friction = f L / D_h * 55.392 = 0.030484 * 200 * 55.392 = 337.72 Pa,
    dp_minor = (0.5 + 1.0) * 55.392 = 83.09 Pa (sharp entrance and exit, White, Fluid
    Mechanics 2011, Sec. 6.9, from memory), total 420.8 Pa.
    h = Nu_H1 k / D_h = 3.6102 * 0.6065 / 0.005 = 437.9 W/(m2 K).
    """
    c = ch.channel_flow(5e-3, 5e-3, 1.0, 0.5 / 60000, WATER)
    assert c.regime == "laminar"
    assert c.reynolds == pytest.approx(1867.1, rel=1e-4)
    assert c.pressure_drop_friction_Pa == pytest.approx(337.72, rel=1e-4)
    assert c.pressure_drop_minor_Pa == pytest.approx(83.09, rel=1e-3)
    assert c.pressure_drop_Pa == pytest.approx(420.8, rel=1e-3)
    assert c.h_W_m2K == pytest.approx(437.9, rel=1e-3)
    assert c.warnings == ()


def test_minor_loss_coefficients_match_fluids():
    """Sharp entrance 0.5 and exit 1.0 are the Crane values in fluids.fittings."""
    assert ch.K_ENTRANCE == pytest.approx(fluids.fittings.entrance_sharp(method="Crane"))
    assert ch.K_EXIT == pytest.approx(fluids.fittings.exit_normal())
    with_bends = ch.channel_flow(5e-3, 5e-3, 1.0, 0.5 / 60000, WATER, bends=2)
    assert with_bends.minor_loss_coefficient == pytest.approx(0.5 + 1.0 + 2 * 1.5)


def test_turbulent_pressure_drop_against_fluids():
    """A turbulent case: friction factor against fluids.friction.friction_factor (Colebrook)
    and the friction loss against the Darcy-Weisbach form in fluids.core.dP_from_K."""
    c = ch.channel_flow(4e-3, 2e-3, 0.5, 3.0 / 60000, WATER, roughness_m=1.5e-6)
    assert c.regime == "turbulent"
    ed = 1.5e-6 / c.hydraulic_diameter_m
    f = fluids.friction.friction_factor(c.reynolds, eD=ed, Method="Colebrook")
    assert c.friction_factor == pytest.approx(f, rel=1e-6)
    k = f * 0.5 / c.hydraulic_diameter_m
    assert c.pressure_drop_friction_Pa == pytest.approx(
        fluids.core.dP_from_K(k, WATER.density_kg_m3, c.velocity_m_s), rel=1e-9)


def test_warnings_for_low_re_transition_and_range():
    low = ch.channel_flow(10e-3, 3e-3, 0.5, 0.01 / 60000, WATER)
    assert low.reynolds < 100 and any("very low Reynolds" in w for w in low.warnings)
    mid = ch.channel_flow(5e-3, 5e-3, 1.0, 1.5 / 60000, WATER)
    assert mid.regime == "transition" and any("transition" in w for w in mid.warnings)
    huge = ch.channel_flow(5e-3, 5e-3, 1.0, 3000.0 / 60000, WATER)
    assert any("beyond the Gnielinski range" in w for w in huge.warnings)


@pytest.mark.parametrize("kwargs, field", [
    ({"width_m": -1e-3}, "channel_width_mm"),
    ({"height_m": 0.0}, "channel_height_mm"),
    ({"length_m": 0.0}, "length_mm"),
    ({"flow_m3_s": 0.0}, "flow per channel"),
    ({"roughness_m": -1e-6}, "roughness_um"),
])
def test_bad_geometry_is_a_clear_error(kwargs, field):
    args = {"width_m": 5e-3, "height_m": 5e-3, "length_m": 1.0, "flow_m3_s": 1e-5, "props": WATER}
    args.update(kwargs)
    with pytest.raises(InputError, match=field):
        ch.channel_flow(**args)


def test_bad_aspect_and_boundary():
    with pytest.raises(InputError, match="aspect"):
        ch.fre_laminar_rectangular(1.5)
    with pytest.raises(InputError, match="boundary"):
        ch.nusselt_laminar_rectangular(0.5, "H2")
