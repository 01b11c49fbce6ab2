"""Coolant properties (explorer.cooling.coolant) against handbook tables.

Sources:
* Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, 6th ed. (2007),
  Table A.6 "Thermophysical properties of saturated water" -- values from memory.
* ASHRAE Handbook -- Fundamentals (2009), Ch. 31 "Physical properties of
  secondary coolants (brines)", aqueous ethylene glycol and propylene glycol
  tables -- values from memory, hence the wide tolerances.
"""

from __future__ import annotations

import pytest

from explorer.cooling.coolant import _properties, get_coolant
from explorer.validators import InputError


def _rel(a, b):
    return abs(a - b) / abs(b)


# Incropera & DeWitt Table A.6 (from memory): T [K] -> (rho = 1/v_f, cp, mu, k, Pr)
WATER_A6 = {
    300.0: (1 / 1.003e-3, 4179.0, 855e-6, 0.613, 5.83),
    350.0: (1 / 1.027e-3, 4195.0, 365e-6, 0.668, 2.29),
}


@pytest.mark.parametrize("T_K", sorted(WATER_A6))
def test_water_against_incropera_table_A6(T_K):
    rho, cp, mu, k, pr = WATER_A6[T_K]
    p = get_coolant("water").properties(T_K - 273.15)
    assert _rel(p.density_kg_m3, rho) < 0.003
    assert _rel(p.specific_heat_J_kgK, cp) < 0.005
    assert _rel(p.viscosity_Pa_s, mu) < 0.015
    assert _rel(p.conductivity_W_mK, k) < 0.015
    assert _rel(p.prandtl, pr) < 0.02


def test_water_at_25C_interpolated_from_table_A6():
    """Linear interpolation of Table A.6 between 295 K and 300 K (from memory):
    295 K: mu 959e-6, k 0.606, Pr 6.62; 300 K: mu 855e-6, k 0.613, Pr 5.83 ->
    at 298.15 K: mu 893.5e-6, k 0.6104, Pr 6.12 (rho 997, cp 4180)."""
    p = get_coolant("water").properties(25.0)
    f = (298.15 - 295.0) / 5.0
    assert _rel(p.viscosity_Pa_s, 959e-6 + f * (855e-6 - 959e-6)) < 0.02
    assert _rel(p.conductivity_W_mK, 0.606 + f * (0.613 - 0.606)) < 0.015
    assert _rel(p.prandtl, 6.62 + f * (5.83 - 6.62)) < 0.02
    assert _rel(p.density_kg_m3, 997.0) < 0.002
    assert _rel(p.specific_heat_J_kgK, 4180.0) < 0.005


def test_ethylene_glycol_50_mass_percent_against_ashrae():
    """50 % (mass) ethylene glycol at 25 degC, ASHRAE Fundamentals Ch. 31 (from memory):
    density about 1063 kg/m3, cp about 3.30 kJ/(kg K), viscosity about 3.4 mPa s,
    conductivity about 0.39 W/(m K). Tolerances reflect recall, not the library."""
    p = get_coolant("eg50").properties(25.0)
    assert _rel(p.density_kg_m3, 1063.0) < 0.01
    assert _rel(p.specific_heat_J_kgK, 3300.0) < 0.03
    assert _rel(p.viscosity_Pa_s, 3.4e-3) < 0.2
    assert _rel(p.conductivity_W_mK, 0.39) < 0.05
    # glycol makes a more viscous, less conductive coolant than water (common practice)
    w = get_coolant("water").properties(25.0)
    assert p.prandtl > 3 * w.prandtl


def test_freezing_points_against_ashrae():
    """Freezing points by mass fraction, ASHRAE Fundamentals Ch. 31 (from memory):
    50 % ethylene glycol about -36 to -37 degC, 30 % propylene glycol about -12.7 degC."""
    assert abs(get_coolant("eg50").min_C - (-36.5)) < 1.5
    assert abs(get_coolant("pg30").min_C - (-12.7)) < 1.0


def test_glycol_fraction_is_by_mass():
    """CoolProp's MEG mixture takes mass fractions (its AbstractState refuses volume
    fractions); 'eg50' must equal an AbstractState set to mass fraction 0.5."""
    import CoolProp.CoolProp as CP

    state = CP.AbstractState("INCOMP", "MEG")
    with pytest.raises(ValueError):
        state.set_volu_fractions([0.5])
    state.set_mass_fractions([0.5])
    state.update(CP.PT_INPUTS, 101325.0, 298.15)
    p = get_coolant("eg50").properties(25.0)
    assert _rel(p.density_kg_m3, state.rhomass()) < 1e-9
    assert get_coolant("eg50").glycol_mass_fraction == 0.5


def test_names_and_aliases():
    assert get_coolant("ethylene_glycol_50").name == "eg50"
    assert get_coolant("Propylene-Glycol 30").name == "pg30"
    assert get_coolant("PG30").fluid == "INCOMP::MPG-30%"
    assert get_coolant("water").fluid == "Water"


@pytest.mark.parametrize("bad", ["oil", "eg70", "eg", "eg0", 5, None, "eg12.5"])
def test_unknown_coolant_lists_valid_names(bad):
    with pytest.raises(InputError, match="coolant") as err:
        get_coolant(bad)
    assert "eg" in str(err.value) and "pg" in str(err.value)


@pytest.mark.parametrize("name, T", [("water", -5.0), ("water", 105.0), ("eg50", -40.0),
                                     ("pg30", -20.0), ("eg50", 150.0)])
def test_out_of_range_temperature_is_an_error(name, T):
    with pytest.raises(InputError, match=r"`inlet_C`.*between") as err:
        get_coolant(name).properties(T, what="inlet_C")
    assert name in str(err.value)


def test_properties_are_cached():
    c = get_coolant("pg30")
    c.properties(31.234)
    hits = _properties.cache_info().hits
    a = c.properties(31.2341)  # same 0.01 K bin
    assert _properties.cache_info().hits == hits + 1
    assert a is c.properties(31.234)
