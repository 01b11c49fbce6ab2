"""A cell from a data sheet (explorer.cell.from_datasheet, `python -m explorer new-cell`).

Checks
------
* Issue 11: a data-sheet cell of a demo cell's stated values reproduces that cell's capacity
  within 3 % and its 1C heat within 15 % (against explorer.simulate of the demo cell).
* Extensive scaling (common practice, and Faraday's law on the loadings): twice the capacity
  in twice the thickness at the same face is twice the layers, twice the capacity and about
  twice the heat at 1C.
* A stated DC resistance is what the built cell shows on the same pulse.
* Every value of the written file says where it came from; the file loads with load_cell.
The data sheets are invented (demo_cells/datasheets/, marked so).
"""

from __future__ import annotations

import io
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest

import explorer
from explorer.cell.datasheet import (
    PROVENANCE,
    DataSheetError,
    cmd_new_cell,
    from_datasheet,
    pulse_resistance_ohm,
    read_provenance,
)
from explorer.validators import InputError

SHEETS = Path(__file__).parents[1] / "demo_cells" / "datasheets"


def _figures(cell):
    """Charge to the lower limit (Ah) and mean heat (W) of a 1C discharge, adiabatic."""
    ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0), layout="averaged",
                           grid=(6, 6))
    assert ds.attrs["status"] == "completed"
    return float(ds["charge_delivered"][-1]), float(ds["heat_total"].mean())


def _sheet(name) -> dict:
    return tomllib.loads((SHEETS / f"{name}_sheet.toml").read_text(encoding="utf-8"))


@pytest.mark.parametrize("demo", ["van_nmc_66ah", "rack_lfp_26ah"])
def test_a_demo_cells_data_sheet_reproduces_its_capacity_and_heat(demo):
    q_demo, heat_demo = _figures(explorer.load_cell(demo))
    q, heat = _figures(from_datasheet(SHEETS / f"{demo}_sheet.toml"))
    assert q == pytest.approx(q_demo, rel=0.03)
    assert heat == pytest.approx(heat_demo, rel=0.15)


def test_the_bare_data_sheet_without_tabs_mass_or_layers_also_reproduces_it():
    raw = _sheet("van_nmc_66ah")
    for key in ("tabs", "mass"):
        raw.pop(key)
    cell = from_datasheet(raw)
    assert cell.geometry.unit_layers == 44  # derived from the thickness
    q_demo, heat_demo = _figures(explorer.load_cell("van_nmc_66ah"))
    q, heat = _figures(cell)
    assert q == pytest.approx(q_demo, rel=0.03) and heat == pytest.approx(heat_demo, rel=0.15)


def test_twice_the_capacity_in_twice_the_thickness_is_twice_the_layers_and_heat():
    raw = _sheet("van_nmc_66ah")
    raw.pop("mass")
    one = from_datasheet(raw)
    raw.update(nominal_capacity="132 Ah", thickness="17.5 mm")
    two = from_datasheet(raw)
    assert abs(two.geometry.unit_layers - 2 * one.geometry.unit_layers) <= 1
    (q1, h1), (q2, h2) = _figures(one), _figures(two)
    assert q2 == pytest.approx(2 * q1, rel=0.03)
    assert h2 == pytest.approx(2 * h1, rel=0.15)


def test_a_stated_dc_resistance_is_what_the_cell_shows():
    cell = from_datasheet(SHEETS / "pouch_lfp_50ah_sheet.toml")
    stated = tomllib.loads((SHEETS / "pouch_lfp_50ah_sheet.toml").read_text())["dc_resistance"]
    r = pulse_resistance_ohm(cell, 10.0, 0.5)
    assert r == pytest.approx(explorer.units.parse(stated, "ohm"), rel=0.02)
    prov = cell.extra["provenance"]
    assert prov["tabs.negative.weld_resistance"].startswith("fitted")


def test_every_value_of_the_written_file_says_where_it_came_from(tmp_path):
    out = tmp_path / "built.toml"
    cell = from_datasheet(SHEETS / "van_nmc_66ah_sheet.toml", out=out)
    text = out.read_text(encoding="utf-8")
    assert "A TEMPLATE CELL IS A STARTING POINT" in text
    assert "starting point" in cell.extra.get("data_note", "")
    data = tomllib.loads(text)
    prov = read_provenance(text)
    paths = []
    for table, content in data.items():
        if table == "tabs":
            paths += [f"tabs.{n}.{k}" for n, t in content.items() for k in t]
        else:
            paths += [f"{table}.{k}" for k in content]
    missing = [p for p in paths if p not in prov]
    assert not missing
    assert {v.split(":")[0] for v in prov.values()} <= set(PROVENANCE)
    assert prov["cell.nominal_capacity"] == "data sheet"
    assert prov["negative.diffusivity"] == "template"
    assert prov["negative.thickness"].startswith("derived")
    # the written file is an ordinary cell file
    again = explorer.load_cell(out)
    assert again.sha256 == cell.sha256 and again.geometry.unit_layers == 44


@pytest.mark.parametrize("change, field", [
    ({"nominal_capacity": None}, "nominal_capacity"),
    ({"chemistry": "lead_acid"}, "chemistry"),
    ({"voltage_min": "5 V"}, "voltage_min"),
    ({"thickness": "8.9"}, "thickness"),
    ({"widht": "250 mm"}, "widht"),
])
def test_bad_data_sheet_values_are_listed(change, field):
    raw = _sheet("van_nmc_66ah")
    for k, v in change.items():
        if v is None:
            raw.pop(k)
        else:
            raw[k] = v
    with pytest.raises(DataSheetError) as err:
        from_datasheet(raw)
    assert f"`{field}`" in str(err.value)


def test_a_capacity_that_does_not_fit_the_thickness_says_so():
    raw = _sheet("van_nmc_66ah")
    raw.update(nominal_capacity="400 Ah")
    with pytest.raises(InputError, match="times as thick as the template"):
        from_datasheet(raw)


def test_keywords_with_unit_suffixes():
    cell = from_datasheet(chemistry="nmc_power", nominal_capacity_Ah=12, voltage_min_V=2.8,
                          voltage_max_V=4.2, width_mm=230, height_mm=130, thickness_mm=3.5)
    assert cell.nominal_capacity_Ah == 12 and cell.geometry.width_m == pytest.approx(0.22)
    with pytest.raises(InputError, match="unknown keyword `width_m`"):
        from_datasheet(chemistry="nmc", width_m=0.2)


def test_new_cell_from_a_file_writes_beside_it(tmp_path, capsys):
    sheet = tmp_path / "sheet.toml"
    sheet.write_text((SHEETS / "rack_lfp_26ah_sheet.toml").read_text())
    assert cmd_new_cell(str(sheet), None) == 0
    assert explorer.load_cell(tmp_path / "sheet_cell.toml").nominal_capacity_Ah == 26
    assert "starting point" in capsys.readouterr().out


def test_new_cell_without_a_file_and_without_a_terminal_is_an_error(monkeypatch, tmp_path):
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))
    with pytest.raises(InputError, match="not a terminal"):
        cmd_new_cell(None, str(tmp_path / "x.toml"))


def test_new_cell_asks_for_each_value_with_defaults(monkeypatch, tmp_path):
    class Tty(io.StringIO):
        def isatty(self):
            return True

    answers = iter(["lfp", "Asked cell", "50", "", "", "180", "300", "8.5", "abc", "950", "",
                    "", "", ""])
    monkeypatch.setattr(sys, "stdin", Tty())
    monkeypatch.setattr("builtins.input", lambda prompt="": next(answers))
    out = tmp_path / "asked.toml"
    assert cmd_new_cell(None, str(out)) == 0
    cell = explorer.load_cell(out)
    assert cell.name == "Asked cell" and cell.nominal_capacity_Ah == 50
    assert cell.voltage_max_V == pytest.approx(3.65)  # the template's, as the default
    assert read_provenance(out.read_text())["cell.voltage_max"] == "data sheet"


def test_a_tab_the_data_sheet_leaves_out_comes_from_the_template():
    raw = _sheet("rack_lfp_26ah")
    raw["tabs"].pop("positive")
    raw["tabs"]["negative"]["centre"] = "60 mm"
    cell = from_datasheet(raw)
    neg, = cell.tab("negative")
    pos, = cell.tab("positive")
    assert neg.position_m == pytest.approx(0.055)  # 60 mm from the body corner, less the inset
    assert pos.edge == "top" and pos.position_m == pytest.approx(0.08)
    prov = cell.extra["provenance"]
    assert prov["tabs.positive.centre"].startswith("derived: the template's")
    assert prov["tabs.negative.edge"] == "data sheet"


def test_a_cell_with_a_measured_table_keeps_finding_it_when_written_elsewhere(tmp_path):
    """cell_data points table keys at absolute paths (contract I: a tool writing the cell file
    to another folder rewrites relative table keys); the table is invented, sampled from the
    demo graphite curve."""
    from explorer.cell.datasheet import cell_data, render
    from explorer.materials import OCP

    here, there = tmp_path / "a", tmp_path / "b"
    here.mkdir()
    there.mkdir()
    x = np.linspace(0.001, 0.999, 60)
    rows = "".join(f"{s:.5f},{u:.6f}\n" for s, u in zip(x, OCP["graphite"].potential(x)))
    (here / "graphite.csv").write_text("stoichiometry,ocp_V\n" + rows)
    text = (explorer.cell.loader.DEMO_DIR / "van_nmc_66ah.toml").read_text()
    text = text.replace('ocp = "graphite"', 'ocp_table = "graphite.csv"')
    (here / "cell.toml").write_text(text)
    cell = explorer.load_cell(here / "cell.toml")
    data, _ = cell_data(cell)
    (there / "copy.toml").write_text(render(data))
    assert explorer.load_cell(there / "copy.toml").negative.stoichiometry_0 == \
        cell.negative.stoichiometry_0


def test_a_narrower_voltage_window_moves_the_electrode_windows():
    """Upper limit 0.1 V below the template's: the full state sits where the template's OCV
    (explorer.cell.ocv) is 0.1 V below its own full state; the capacity is still the stated."""
    raw = _sheet("van_nmc_66ah")
    raw.pop("mass")
    raw["voltage_max"] = "4.1 V"
    cell = from_datasheet(raw)
    base = explorer.load_cell("van_nmc_66ah")
    full = float(explorer.cell.ocv(cell.negative, cell.positive, 1.0))
    assert full == pytest.approx(float(explorer.cell.ocv(base.negative, base.positive, 1.0))
                                 - 0.1, abs=2e-3)
    ratio = base.derived.theoretical_capacity_Ah / base.nominal_capacity_Ah
    assert cell.derived.theoretical_capacity_Ah == pytest.approx(66 * ratio, rel=0.01)
    assert cell.extra["provenance"]["positive.stoichiometry_at_full"].startswith("derived")
