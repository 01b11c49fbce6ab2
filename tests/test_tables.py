"""Measured curves from CSV tables in cell files: interpolation, full-cell tables, errors."""

import pickle

import numpy as np
import pytest

from explorer.cell import list_demo_cells, load_cell, ocv
from explorer.materials import OCP
from explorer.materials.tables import TabulatedCurve
from explorer.validators import CellFileError

VAN = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")


def _csv(path, header, *columns, comment="# invented test table"):
    rows = [",".join(f"{v:.10g}" for v in row) for row in zip(*columns)]
    path.write_text("\n".join([comment, header, *rows]) + "\n", encoding="utf-8")
    return path.name


def _cell(folder, *edits, name="cell.toml"):
    text = VAN
    for old, new in edits:
        assert old in text, old
        text = text.replace(old, new, 1)
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def _u(x):
    # an analytic, smooth, falling test potential (invented), V
    return 4.0 - 0.6 * x - 0.15 * np.tanh((x - 0.5) / 0.1)


# ---- interpolation ------------------------------------------------------------------------


def test_table_of_an_analytic_function_gives_it_back_within_interpolation_error():
    # A piecewise cubic Hermite interpolant with PCHIP slopes converges at least as h^2 for a
    # smooth function (Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238); sampled every
    # 0.025 the error is well under a millivolt, and halving the spacing cuts it by > 3x.
    x = np.linspace(0.0, 1.0, 2001)
    errors = []
    for n in (41, 81):
        xs = np.linspace(0.0, 1.0, n)
        errors.append(np.max(np.abs(TabulatedCurve(xs, _u(xs))(x) - _u(x))))
    assert errors[0] < 1e-3
    assert errors[1] < errors[0] / 3
    # at the table's own points the curve is exact (to rounding)
    xs = np.linspace(0, 1, 41)
    assert np.allclose(TabulatedCurve(xs, _u(xs))(xs), _u(xs), rtol=0, atol=1e-12)


def test_monotone_table_gives_a_monotone_curve_without_overshoot():
    # PCHIP preserves monotonicity (Fritsch & Carlson 1980): a staircase-like table (flat
    # plateaus and sharp steps, like graphite staging) interpolates without wiggles
    xs = np.array([0.0, 0.1, 0.2, 0.21, 0.3, 0.5, 0.51, 0.7, 0.9, 1.0])
    ys = np.array([0.8, 0.22, 0.21, 0.13, 0.125, 0.12, 0.09, 0.088, 0.085, 0.08])
    f = TabulatedCurve(xs, ys)
    y = f(np.linspace(0, 1, 5001))
    assert np.all(np.diff(y) <= 0)
    assert y.max() <= ys.max() and y.min() >= ys.min()


def test_beyond_the_table_linear_or_held():
    f = TabulatedCurve([0.2, 0.4, 0.6, 0.8], [4.0, 3.8, 3.6, 3.4])
    assert float(f(0.0)) == pytest.approx(4.2)
    assert float(f(1.0)) == pytest.approx(3.2)
    g = TabulatedCurve([0.2, 0.4, 0.6, 0.8], [1e-4, 0.0, -1e-4, -2e-4], beyond="hold")
    assert float(g(0.0)) == pytest.approx(1e-4) and float(g(1.0)) == pytest.approx(-2e-4)
    assert np.ndim(f(0.5)) == 0 and f(np.array([0.3, 0.5])).shape == (2,)


# ---- per-electrode tables in a cell file --------------------------------------------------


def test_negative_ocp_table_reproduces_the_material_curve(tmp_path):
    # a "measured" table sampled from the built-in graphite curve (denser where it is steep)
    x = np.concatenate([np.geomspace(0.002, 0.1, 40)[:-1], np.linspace(0.1, 0.995, 120)])
    g = OCP["graphite"]
    name = _csv(tmp_path / "graphite.csv", "stoichiometry,ocp_V,dUdT_mV_K", x, g.potential(x),
                g.entropic(x) * 1e3)
    cell = load_cell(_cell(tmp_path, ('ocp = "graphite"', f'ocp_table = "{name}"')))
    ref = load_cell("van_nmc_66ah")
    soc = np.linspace(0, 1, 501)
    assert np.max(np.abs(ocv(cell.negative, cell.positive, soc)
                         - ocv(ref.negative, ref.positive, soc))) < 2e-3
    xs = np.linspace(0.02, 0.8, 200)
    assert np.max(np.abs(OCP[cell.negative.ocp].entropic(xs) - g.entropic(xs))) < 1e-5
    assert "graphite.csv" in OCP[cell.negative.ocp].source
    assert cell.extra["tables"]["negative.ocp_table"]["file"] == "graphite.csv"
    assert cell.sha256 != ref.sha256


def test_full_cell_ocv_and_dudt_tables_drive_a_run_like_the_curves_they_came_from(tmp_path):
    # The van cell's own OCV and dU/dT sampled at 2 % SOC steps (0.5 % below 10 %, where the
    # OCV is steep, as measured tables usually are), given as full-cell tables: the rebuilt
    # positive curve must reproduce the cell at rest and in a 1C discharge.
    import explorer
    from explorer import duty

    ref = load_cell("van_nmc_66ah")
    n, p = ref.negative, ref.positive
    soc = np.concatenate([np.linspace(0, 0.1, 21), np.linspace(0.12, 1, 45)])
    xn = n.stoichiometry_0 + soc * (n.stoichiometry_100 - n.stoichiometry_0)
    xp = p.stoichiometry_0 + soc * (p.stoichiometry_100 - p.stoichiometry_0)
    dudt = OCP["nmc"].entropic(xp) - OCP["graphite"].entropic(xn)
    ocv_name = _csv(tmp_path / "ocv.csv", "soc_pct,ocv_V", soc * 100, ocv(n, p, soc))
    dudt_name = _csv(tmp_path / "dudt.csv", "soc,dUdT_V_K", soc[::5], dudt[::5])
    cell = load_cell(_cell(tmp_path, ('ocp = "nmc"\n', ""),
                           ("[geometry]", f'ocv_table = "{ocv_name}"\n'
                            f'entropic_table = "{dudt_name}"\n\n[geometry]')))
    fine = np.linspace(0, 1, 401)
    assert np.max(np.abs(ocv(cell.negative, cell.positive, fine)
                         - ocv(n, p, fine))) < 3e-3
    runs = [explorer.simulate(c, duty.discharge(1.0), None, "spm", "single") for c in (ref, cell)]
    v = [np.interp(np.linspace(0, 3000, 61), r["time"].values, r["voltage"].values)
         for r in runs]
    assert np.sqrt(np.mean((v[0] - v[1]) ** 2)) < 5e-3
    q = [float(r["charge_delivered"].values[-1]) for r in runs]
    assert q[1] == pytest.approx(q[0], rel=0.01)
    # reversible heat follows the (coarser) dU/dT table: same sign and size
    rev = [float(np.trapezoid(r["heat_reversible"].values, r["time"].values)) for r in runs]
    assert rev[1] == pytest.approx(rev[0], rel=0.15)


def test_full_cell_dudt_in_the_usual_band_and_units(tmp_path):
    # common practice: an NMC/graphite cell's dU/dT is a few tenths of a mV/K at most,
    # negative at low SOC (graphite's positive dU/dT when nearly empty dominates)
    ref = load_cell("van_nmc_66ah")
    n, p = ref.negative, ref.positive
    soc = np.linspace(0, 1, 101)
    xn = n.stoichiometry_0 + soc * (n.stoichiometry_100 - n.stoichiometry_0)
    xp = p.stoichiometry_0 + soc * (p.stoichiometry_100 - p.stoichiometry_0)
    cell_dudt = OCP["nmc"].entropic(xp) - OCP["graphite"].entropic(xn)
    assert np.max(np.abs(cell_dudt)) < 0.5e-3
    assert cell_dudt[0] < 0
    # the same table in mV/K and in V/K gives the same curve
    curves = []
    for header, scale in (("soc,dUdT_mV_K", 1e3), ("soc,dUdT_V_K", 1.0)):
        name = _csv(tmp_path / f"dudt{scale:g}.csv", header, soc[::10], cell_dudt[::10] * scale)
        c = load_cell(_cell(tmp_path, ("[geometry]", f'entropic_table = "{name}"\n\n[geometry]'),
                            name=f"c{scale:g}.toml"))
        curves.append(OCP[c.positive.ocp].entropic(xp) - OCP[c.negative.ocp].entropic(xn))
    assert np.allclose(curves[0], curves[1], rtol=0, atol=1e-12)
    assert np.allclose(curves[0][::10], cell_dudt[::10], rtol=0, atol=1e-9)


def test_table_without_dudt_takes_zero_and_warns(tmp_path):
    x = np.linspace(0.0, 1.0, 21)
    name = _csv(tmp_path / "g.csv", "stoichiometry,ocp_mV", x, OCP["graphite"].potential(x) * 1e3)
    cell = load_cell(_cell(tmp_path, ('ocp = "graphite"', f'ocp_table = "{name}"')))
    assert float(OCP[cell.negative.ocp].entropic(0.3)) == 0.0
    assert any("entropic" in w for w in cell.extra["warnings"])


def test_tabulated_cell_pickles_and_compares_equal(tmp_path):
    # sweeps send cells to worker processes
    x = np.linspace(0.0, 1.0, 21)
    name = _csv(tmp_path / "g.csv", "stoichiometry,ocp_V", x, OCP["graphite"].potential(x))
    path = _cell(tmp_path, ('ocp = "graphite"', f'ocp_table = "{name}"'))
    a, b = load_cell(path), load_cell(path)
    assert a == b and a.sha256 == b.sha256
    back = pickle.loads(pickle.dumps(a))
    assert float(OCP[back.negative.ocp].potential(0.5)) == float(OCP[a.negative.ocp].potential(0.5))
    # a changed table changes the cell's hash (sweep caches key on it)
    _csv(tmp_path / "g.csv", "stoichiometry,ocp_V", x, OCP["graphite"].potential(x) + 1e-3)
    assert load_cell(path).sha256 != a.sha256


# ---- errors -------------------------------------------------------------------------------

X = np.linspace(0.0, 1.0, 21)
GOOD = OCP["graphite"].potential(X)


def _bad(tmp_path, header, x, y, field="negative.ocp_table"):
    name = _csv(tmp_path / "bad.csv", header, x, y)
    with pytest.raises(CellFileError) as err:
        key = field.split(".")[1]
        keep = 'ocp = "graphite"\n' if key == "entropic_table" else ""
        load_cell(_cell(tmp_path, ('ocp = "graphite"', f'{keep}{key} = "{name}"')))
    assert field in err.value.fields()
    msg = str(err.value)
    assert "cell.toml" in msg and "bad.csv" in msg
    return msg


def test_error_potential_rising_names_line_column_value(tmp_path):
    y = GOOD.copy()
    y[10] = y[9] + 0.01  # line 13: comment, header, then rows from line 3
    msg = _bad(tmp_path, "stoichiometry,ocp_V", X, y)
    assert "line 13" in msg and "`ocp_V`" in msg and f"{y[10]:.6g}" in msg and "falling" in msg


def test_error_repeated_stoichiometry(tmp_path):
    x = X.copy()
    x[5] = x[4]
    msg = _bad(tmp_path, "stoichiometry,ocp_V", x, GOOD)
    assert "line 8" in msg and "`stoichiometry`" in msg and "repeats" in msg


def test_error_stoichiometry_out_of_range(tmp_path):
    msg = _bad(tmp_path, "stoichiometry,ocp_V", X * 1.2, GOOD)
    assert "`stoichiometry`" in msg and "1.02" in msg and "0 to 1" in msg


def test_error_too_sparse(tmp_path):
    x = np.array([0.0, 0.1, 0.2, 0.3, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0])
    msg = _bad(tmp_path, "stoichiometry,ocp_V", x, OCP["graphite"].potential(x))
    assert "too sparse" in msg and "line 7" in msg and "0.5" in msg
    x = np.linspace(0, 1, 5)
    msg = _bad(tmp_path, "stoichiometry,ocp_V", x, OCP["graphite"].potential(x))
    assert "at least 8 rows" in msg


def test_error_table_not_covering_the_window(tmp_path):
    x = np.linspace(0.1, 1.0, 19)
    msg = _bad(tmp_path, "stoichiometry,ocp_V", x, OCP["graphite"].potential(x))
    assert "covering the cell's window" in msg and "0.0147" in msg and "line 3" in msg


def test_error_dudt_unit_slip(tmp_path):
    # dU/dT written in mV/K under a V/K header: 0.2 V/K is far outside any measurement
    msg = _bad(tmp_path, "stoichiometry,dUdT_V_K", X, np.full(X.size, 0.2),
               field="negative.entropic_table")
    assert "`dUdT_V_K`" in msg and "0.2" in msg and "mV/K" in msg


def test_error_missing_column_not_a_number_and_missing_file(tmp_path):
    msg = _bad(tmp_path, "stoichiometry,potential_V", X, GOOD)
    assert "ocp_V or ocp_mV" in msg
    (tmp_path / "bad.csv").write_text("stoichiometry,ocp_V\n0,1\n0.5,abc\n1,0.1\n")
    with pytest.raises(CellFileError, match="line 3, column `ocp_V`.*'abc'|'abc'.*line 3"):
        load_cell(_cell(tmp_path, ('ocp = "graphite"', 'ocp_table = "bad.csv"')))
    with pytest.raises(CellFileError, match="nowhere.csv"):
        load_cell(_cell(tmp_path, ('ocp = "graphite"', 'ocp_table = "nowhere.csv"')))


def test_error_both_key_and_table_and_neither(tmp_path):
    name = _csv(tmp_path / "g.csv", "stoichiometry,ocp_V", X, GOOD)
    with pytest.raises(CellFileError, match="not both"):
        load_cell(_cell(tmp_path, ('ocp = "graphite"', f'ocp = "graphite"\nocp_table = "{name}"')))
    with pytest.raises(CellFileError) as err:
        load_cell(_cell(tmp_path, ('ocp = "graphite"\n', "")))
    assert err.value.fields() == ["negative.ocp"] and "ocp_table" in str(err.value)
    with pytest.raises(CellFileError, match="sets the positive"):
        load_cell(_cell(tmp_path, ("[geometry]", 'ocv_table = "g.csv"\n\n[geometry]')))
