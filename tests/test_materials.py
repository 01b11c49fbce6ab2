"""Material library checked against handbook values, published fits and physical laws."""

import math

import numpy as np
import pytest

from explorer.cell import list_demo_cells, load_cell
from explorer.materials import (
    ELECTROLYTES,
    FARADAY,
    GAS_CONSTANT,
    OCP,
    SOLIDS,
    arrhenius,
    lookup,
)
from explorer.validators import InputError

# ---- solids ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "name, k_W_mK, rho_kg_m3, cp_J_kgK",
    [
        # Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, Table A.1, 300 K
        ("copper", 401.0, 8933.0, 385.0),
        ("aluminium", 237.0, 2702.0, 903.0),
        ("nickel", 90.7, 8900.0, 444.0),
    ],
)
def test_solid_thermal_properties_match_incropera_table_a1(name, k_W_mK, rho_kg_m3, cp_J_kgK):
    s = SOLIDS[name]
    assert s.thermal_conductivity_W_mK == pytest.approx(k_W_mK, rel=0.01)
    assert s.density_kg_m3 == pytest.approx(rho_kg_m3, rel=0.01)
    assert s.specific_heat_J_kgK == pytest.approx(cp_J_kgK, rel=0.01)
    assert "Incropera" in s.source


@pytest.mark.parametrize(
    "name, resistivity_ohm_m",
    # CRC Handbook of Chemistry and Physics, electrical resistivity of the elements at 20 degC
    # (from memory): Cu 1.68e-8, Al 2.65e-8 ohm m
    [("copper", 1.68e-8), ("aluminium", 2.65e-8)],
)
def test_solid_electrical_conductivity_matches_crc(name, resistivity_ohm_m):
    assert SOLIDS[name].electrical_conductivity_S_m == pytest.approx(1 / resistivity_ohm_m,
                                                                     rel=0.03)


@pytest.mark.parametrize("name, lorenz", [("copper", 2.23e-8), ("aluminium", 2.14e-8)])
def test_wiedemann_franz_ratio_of_collector_metals(name, lorenz):
    # Wiedemann-Franz law: k / (sigma T) equals the Lorenz number; measured values at 273 K
    # from Kittel, Introduction to Solid State Physics, Table 6.5 (from memory):
    # Cu 2.23e-8, Al 2.14e-8 W ohm K^-2. An independent check of k and sigma together.
    s = SOLIDS[name]
    L = s.thermal_conductivity_W_mK / (s.electrical_conductivity_S_m * 300.0)
    assert L == pytest.approx(lorenz, rel=0.08)


# ---- theoretical specific capacities (Faraday's law) -------------------------------------


def test_graphite_specific_capacity_372_mAh_g():
    # LiC6: one Li per 6 C, M = 6 x 12.011 g/mol; textbook 372 mAh/g (e.g. Winter, Besenhard,
    # Spahr & Novak, Adv. Mater. 10 (1998) 725).
    per_gram = FARADAY / (6 * 12.011) / 3.6
    assert per_gram == pytest.approx(372.0, abs=1.0)
    # the demo cells' c_max with crystalline graphite density 2.26 g/cm^3 (CRC, from memory)
    for path in list_demo_cells().values():
        neg = load_cell(path).negative
        mAh_g = FARADAY * neg.max_concentration_mol_m3 / 2.26e6 / 3.6
        assert mAh_g == pytest.approx(372.0, rel=0.01)


def test_lfp_specific_capacity_170_mAh_g():
    # LiFePO4, M = 157.76 g/mol; theoretical ~170 mAh/g (Padhi, Nanjundaswamy & Goodenough,
    # J. Electrochem. Soc. 144 (1997) 1188). Density 3.6 g/cm^3 (from memory).
    per_gram = FARADAY / 157.76 / 3.6
    assert per_gram == pytest.approx(170.0, rel=0.01)
    pos = load_cell("rack_lfp_26ah").positive
    assert pos.ocp == "lfp"
    assert FARADAY * pos.max_concentration_mol_m3 / 3.6e6 / 3.6 == pytest.approx(170.0, rel=0.01)


def test_physical_constants_codata():
    # CODATA 2018 exact values
    assert FARADAY == pytest.approx(96485.33212, rel=1e-10)
    assert GAS_CONSTANT == pytest.approx(8.314462618, rel=1e-10)


# ---- electrolyte -------------------------------------------------------------------------


def test_electrolyte_conductivity_near_1_S_m_at_1M_25C():
    # Valøen & Reimers, J. Electrochem. Soc. 152 (2005) A882: about 1 S/m (10 mS/cm) at
    # 1 mol/L and 25 degC, maximum near 1 mol/L (their conductivity figure, from memory).
    kappa = ELECTROLYTES["lipf6_carbonate_conductivity"]
    assert 0.9 < float(kappa(1000.0)) < 1.3
    c = np.linspace(100, 3000, 300)
    c_peak = c[np.argmax(kappa(c))]
    assert 800 < c_peak < 1300
    assert "Valøen" in kappa.source


def test_electrolyte_diffusivity_order_of_magnitude():
    # Valøen & Reimers 2005: D about 3e-10 m^2/s at 1 mol/L, 25 degC, falling with c
    # (from memory of their diffusivity figure).
    D = ELECTROLYTES["lipf6_carbonate_diffusivity"]
    assert 2e-10 < float(D(1000.0)) < 4.5e-10
    assert np.all(np.diff(D(np.linspace(100, 3000, 50))) < 0)


def test_electrolyte_functions_vectorised_and_finite_outside_range():
    for prop in ELECTROLYTES.values():
        c = np.array([[-50.0, 0.0], [1000.0, 9000.0]])
        out = prop(c)
        assert out.shape == c.shape and np.all(np.isfinite(out)) and np.all(out > 0)


def test_demo_activation_energies_reproduce_valoen_reimers_temperature_dependence():
    # The Arrhenius energies in the demo files must reproduce the temperature dependence of
    # the Valøen & Reimers (2005) fits themselves between 15 and 35 degC at 1 mol/L, within
    # 5 % (their diffusivity has a Vogel-Tammann-Fulcher form that no single Arrhenius
    # energy follows exactly).
    el = load_cell("van_nmc_66ah").electrolyte
    for key, Ea in ((el.conductivity, el.conductivity_activation_J_mol),
                    (el.diffusivity, el.diffusivity_activation_J_mol)):
        prop = ELECTROLYTES[key]
        for T in (288.15, 308.15):
            ratio = prop.at_temperature(1000.0, T) / prop(1000.0)
            assert float(arrhenius(Ea, T)) == pytest.approx(float(ratio), rel=0.05)


def test_arrhenius_factor():
    # exp(Ea/R (1/Tref - 1/T)): unity at the reference, closed form elsewhere
    assert float(arrhenius(50e3, 298.15)) == pytest.approx(1.0, rel=1e-12)
    expect = math.exp(50e3 / 8.314462618 * (1 / 298.15 - 1 / 308.15))
    assert float(arrhenius(50e3, 308.15)) == pytest.approx(expect, rel=1e-12)
    assert arrhenius(30e3, np.array([280.0, 300.0, 320.0])).shape == (3,)


# ---- open-circuit potentials -------------------------------------------------------------

X = np.linspace(1e-4, 1 - 1e-4, 2001)


@pytest.mark.parametrize("key", ["graphite", "nmc", "lfp"])
def test_ocp_smooth_finite_monotone(key):
    o = OCP[key]
    u = o.potential(X)
    assert np.all(np.isfinite(u))
    # intercalation thermodynamics: the potential falls as the host fills (dU/dx < 0)
    assert np.all(np.diff(u) < 0)
    # finite (clipped) at and beyond the ends, as Newton iterates may step there
    ends = o.potential(np.array([-0.1, 0.0, 1.0, 1.1]))
    assert np.all(np.isfinite(ends))
    assert np.all(np.isfinite(o.entropic(np.array([0.0, 1.0]))))
    assert np.ndim(o.potential(0.5)) == 0
    assert o.source


@pytest.mark.parametrize(
    "key, lo_x, hi_x, lo_V, hi_V",
    [
        # graphite staging plateaus ~0.08-0.25 V vs Li (common practice)
        ("graphite", 0.2, 0.95, 0.05, 0.25),
        # layered NMC over its usual window ~3.5-4.3 V vs Li (common practice)
        ("nmc", 0.27, 0.93, 3.45, 4.35),
        # LiFePO4 two-phase plateau at ~3.4-3.45 V vs Li (Padhi et al. 1997)
        ("lfp", 0.1, 0.9, 3.38, 3.47),
    ],
)
def test_ocp_ranges(key, lo_x, hi_x, lo_V, hi_V):
    u = OCP[key].potential(np.linspace(lo_x, hi_x, 100))
    assert u.min() > lo_V and u.max() < hi_V


@pytest.mark.parametrize("key", ["graphite", "nmc", "lfp"])
def test_entropic_magnitudes_of_published_measurements(key):
    # measured dU/dT of intercalation electrodes: tens to a few hundred uV/K
    # (e.g. Reynier, Yazami & Fultz, J. Electrochem. Soc. 151 (2004) A422, graphite)
    d = OCP[key].entropic(X)
    assert np.all(np.isfinite(d))
    assert np.max(np.abs(d)) < 5e-4
    assert np.max(np.abs(d)) > 1e-5


@pytest.mark.parametrize("key, points", [("graphite", "GRAPHITE_POINTS"), ("nmc", "NMC_POINTS")])
def test_demo_potentials_follow_their_invented_control_points(key, points):
    # The graphite and NMC potentials are the project's own curves, invented for the demo:
    # fits to invented control points (explorer/materials/ocp.py). Within 5 mV of each point.
    import explorer.materials.ocp as ocp

    pts = getattr(ocp, points)
    assert np.max(np.abs(OCP[key].potential(pts[:, 0]) - pts[:, 1])) < 5e-3
    assert "invented for the demo" in OCP[key].source


def test_graphite_and_nmc_make_a_full_cell_of_the_usual_shape():
    # common practice: an NMC/graphite cell's OCV rises monotonically from about 3.0-3.4 V
    # near empty to about 4.1-4.2 V when full, with the graphite plateaus giving gentle
    # steps; this uses the van demo cell's windows
    c = load_cell("van_nmc_66ah")
    soc = np.linspace(0, 1, 401)
    from explorer.cell import ocv

    v = ocv(c.negative, c.positive, soc)
    assert np.all(np.diff(v) > 0)
    assert 3.3 < float(np.interp(0.1, soc, v)) < 3.6
    assert 4.1 < v[-1] < 4.2


def test_ocp_callable_applies_entropic_correction():
    o = OCP["graphite"]
    assert float(o(0.5, 308.15)) == pytest.approx(
        float(o.potential(0.5) + 10 * o.entropic(0.5)), rel=1e-12)


# ---- lookup ------------------------------------------------------------------------------


def test_lookup_returns_entry_and_lists_valid_keys():
    assert lookup("SOLIDS", "copper") is SOLIDS["copper"]
    assert lookup("ocp", "lfp") is OCP["lfp"]
    with pytest.raises(InputError) as e:
        lookup("OCP", "nca", where="x.toml: positive.ocp")
    msg = str(e.value)
    assert "x.toml: positive.ocp" in msg and "'nca'" in msg
    assert "'graphite'" in msg and "'nmc'" in msg and "'lfp'" in msg
    with pytest.raises(InputError, match="table_name"):
        lookup("METALS", "copper")
