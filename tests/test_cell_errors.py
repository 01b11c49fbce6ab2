"""Bad cell files give one clear error that names file, field, value and expectation.

The expected behaviour is the project's own contract (preamble and DESIGN.md section 3:
validated, units checked, every problem listed at once); the physical limits checked are
textbook facts (a porosity is a volume fraction in (0, 1); a thickness is a positive
length; on charge the negative electrode fills with lithium and the positive empties).
"""

import re

import pytest

from explorer.cell import list_demo_cells, load_cell
from explorer.cell.loader import CellFileNotFoundError
from explorer.validators import (
    CellFileError,
    InputError,
    check_choice,
    check_fraction,
    check_integer,
    check_nonnegative,
    check_positive,
    check_range,
)

SRC = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")


def write(tmp_path, text, name="bad.toml"):
    f = tmp_path / name
    f.write_text(text, encoding="utf-8")
    return f


def edit(old, new, text=SRC):
    assert old in text, old
    return text.replace(old, new, 1)


def problems(tmp_path, text):
    f = write(tmp_path, text)
    with pytest.raises(CellFileError) as e:
        load_cell(f)
    err = e.value
    assert isinstance(err, ValueError) and isinstance(err, InputError)
    msg = str(err)
    # every problem line names the file
    lines = msg.splitlines()[1:]
    assert lines and all(str(f) in line for line in lines)
    assert len(lines) == len(err.problems)
    return err, msg


CASES = [
    # (description, old, new, field, fragments expected in the message)
    ("missing field", 'rate_constant = "3e-11 m^2.5/mol^0.5/s"\n', "",
     "positive.rate_constant", ["missing", "m^2.5/mol^0.5/s"]),
    ("unknown field (typo)", "transference_number = 0.38", "transferance_number = 0.38",
     "electrolyte.transferance_number", ["did you mean 'transference_number'"]),
    ("wrong dimension", 'thickness = "73 um"', 'thickness = "12 kg"',
     "positive.thickness", ["'12 kg'", "[length]", "[mass]"]),
    ("unparseable unit", 'particle_radius = "4 um"', 'particle_radius = "4 umm"',
     "positive.particle_radius", ["'4 umm'", "umm"]),
    ("no unit at all", 'particle_radius = "4 um"', "particle_radius = 4",
     "positive.particle_radius", ["with a unit", "4"]),
    ("porosity above one", "porosity = 0.30", "porosity = 1.2",
     "negative.porosity", ["1.2", "between 0 and 1"]),
    ("negative thickness", 'thickness = "14 um"', 'thickness = "-14 um"',
     "positive_collector.thickness", ["'-14 um'", "> 0"]),
    ("inverted negative window", "stoichiometry_at_full = 0.8310", "stoichiometry_at_full = 0.01",
     "negative.stoichiometry_at_full", ["0.01", "greater than", "stoichiometry_at_empty"]),
    ("inverted positive window", "stoichiometry_at_full = 0.2642", "stoichiometry_at_full = 0.95",
     "positive.stoichiometry_at_full", ["0.95", "smaller than"]),
    ("tab off the edge", 'centre = "180 mm"', 'centre = "230 mm"',
     "tabs.positive.centre", ["230 mm", "top edge", "0 to 240 mm"]),
    ("tabs overlap", 'centre = "180 mm"', 'centre = "90 mm"',
     "tabs.positive", ["overlap", "'negative'", "65..115 mm"]),
    ("unknown material", 'material = "aluminium"\nthickness = "14 um"',
     'material = "alu"\nthickness = "14 um"',
     "positive_collector.material", ["'alu'", "'aluminium'", "'copper'"]),
    ("unknown OCP", 'ocp = "nmc"', 'ocp = "nca"',
     "positive.ocp", ["'nca'", "'graphite'", "'nmc'", "'lfp'"]),
    ("unknown electrolyte function", 'conductivity = "lipf6_carbonate_conductivity"',
     'conductivity = "salt_in_water"',
     "electrolyte.conductivity", ["'salt_in_water'", "'lipf6_carbonate_conductivity'"]),
    ("bad edge name", 'edge = "top"', 'edge = "upper"',
     "tabs.negative.edge", ["'upper'", "'top'", "'bottom'"]),
    ("voltage window inverted", 'voltage_min = "2.8 V"', 'voltage_min = "4.5 V"',
     "cell.voltage_min", ["4.5", "below cell.voltage_max"]),
    ("wrong type for a count", "unit_layers = 44", 'unit_layers = "44 layers"',
     "geometry.unit_layers", ["whole number"]),
    ("unknown table", "[separator]", "[seperator]",
     "seperator", ["did you mean 'separator'"]),
    ("layers thicker than the cell", 'thickness = "8.9 mm"', 'thickness = "5 mm"',
     "geometry.thickness", ["'5 mm'", "8.72 mm"]),
    ("windows holding different charge", "stoichiometry_at_empty = 0.9078",
     "stoichiometry_at_empty = 0.6",
     "positive.stoichiometry_at_full", ["same charge", "Ah"]),
    ("fractions that cannot add up", "active_fraction = 0.65", "active_fraction = 0.8",
     "positive.active_fraction", ["porosity + active_fraction <= 1"]),
]


@pytest.mark.parametrize("desc, old, new, field, fragments", CASES, ids=[c[0] for c in CASES])
def test_bad_field_reported(tmp_path, desc, old, new, field, fragments):
    err, msg = problems(tmp_path, edit(old, new))
    assert field in err.fields(), (desc, msg)
    line = next(str(p) for p in err.problems if p.field == field)
    assert f"`{field}`" in line
    for frag in fragments:
        assert frag in line, (desc, frag, line)


def test_all_problems_listed_at_once(tmp_path):
    text = SRC
    for old, new in [("porosity = 0.30", "porosity = 1.2"),
                     ('thickness = "73 um"', 'thickness = "12 kg"'),
                     ('ocp = "nmc"', 'ocp = "nca"'),
                     ("transference_number = 0.38", "transferance_number = 0.38"),
                     ('centre = "180 mm"', 'centre = "230 mm"'),
                     ("stoichiometry_at_full = 0.8310", "stoichiometry_at_full = 0.01")]:
        text = edit(old, new, text)
    err, msg = problems(tmp_path, text)
    want = {"negative.porosity", "positive.thickness", "positive.ocp",
            "electrolyte.transferance_number", "electrolyte.transference_number",
            "tabs.positive.centre", "negative.stoichiometry_at_full"}
    assert want <= set(err.fields())
    assert msg.splitlines()[0].endswith(f"has {len(err.problems)} problems:")


def test_toml_syntax_error_names_line(tmp_path):
    text = edit("[geometry]", "[geometry")
    err, msg = problems(tmp_path, text)
    assert err.fields() == ["(syntax)"]
    line_no = SRC.splitlines().index("[geometry]") + 1
    assert re.search(rf"line {line_no}\b", msg)
    assert err.__cause__ is None and err.__suppress_context__  # no library traceback chained


def test_missing_table(tmp_path):
    start = SRC.index("[separator]")
    end = SRC.index("[electrolyte]")
    err, msg = problems(tmp_path, SRC[:start] + SRC[end:])
    assert "separator" in err.fields()
    assert "missing" in msg and "[separator] table" in msg


def test_missing_tab_polarity(tmp_path):
    start = SRC.index("[tabs.positive]")
    end = SRC.index("[negative_collector]")
    err, msg = problems(tmp_path, SRC[:start] + SRC[end:])
    assert "tabs" in err.fields() and "polarity = 'positive'" in msg


def test_file_not_found():
    with pytest.raises(CellFileNotFoundError) as e:
        load_cell("/nonexistent/dir/cell.toml")
    assert isinstance(e.value, FileNotFoundError) and isinstance(e.value, CellFileError)
    msg = str(e.value)
    assert "/nonexistent/dir/cell.toml" in msg and "van_nmc_66ah" in msg
    with pytest.raises(CellFileNotFoundError, match="did you mean 'van_nmc_66ah'"):
        load_cell("van_nmc")


def test_not_utf8(tmp_path):
    f = tmp_path / "latin.toml"
    f.write_bytes(SRC.encode("utf-8").replace("Valøen".encode(), "Val\xf8en".encode("latin-1")))
    with pytest.raises(CellFileError, match="UTF-8"):
        load_cell(f)


# ---- the shared validators ---------------------------------------------------------------


def test_validators_return_cleaned_values():
    assert check_positive("h_W_m2K", 10) == 10.0
    assert isinstance(check_positive("h_W_m2K", 10), float)
    assert check_nonnegative("x", 0) == 0.0
    assert check_fraction("porosity", 0.3) == 0.3
    assert check_range("inlet_C", 25, -40, 90, "degC") == 25.0
    assert check_integer("nx", 12.0, low=1) == 12
    assert check_choice("layout", "single", ("single", "averaged")) == "single"


@pytest.mark.parametrize(
    "call, fragments",
    [
        (lambda: check_positive("flow_L_min", -2, "L/min"),
         ["`flow_L_min`", "expected a value > 0 (in L/min)", "got -2"]),
        (lambda: check_positive("flow_L_min", float("nan")), ["`flow_L_min`", "finite"]),
        (lambda: check_positive("flow_L_min", "fast"), ["`flow_L_min`", "number", "'fast'"]),
        (lambda: check_nonnegative("fin_mm", -1), ["`fin_mm`", ">= 0", "got -1"]),
        (lambda: check_fraction("soc", 1.5), ["`soc`", "[0, 1]", "got 1.5"]),
        (lambda: check_fraction("eps", 0.0, open_low=True), ["(0, 1]", "got 0.0"]),
        (lambda: check_range("inlet_C", 120, -40, 90, "degC"),
         ["`inlet_C`", "-40 <= value <= 90", "got 120"]),
        (lambda: check_range("t", 0, low=0, inclusive=False), ["a value > 0", "got 0"]),
        (lambda: check_integer("nx", 2.5), ["`nx`", "whole number", "got 2.5"]),
        (lambda: check_integer("nx", 0, low=1), ["1 <= value", "got 0"]),
        (lambda: check_choice("layout", "avg", ("single", "averaged", "distributed")),
         ["`layout`", "'single', 'averaged', 'distributed'", "got 'avg'"]),
        (lambda: check_choice("layout", "averagd", ("single", "averaged")),
         ["did you mean 'averaged'"]),
    ],
)
def test_validators_messages(call, fragments):
    with pytest.raises(InputError) as e:
        call()
    assert isinstance(e.value, ValueError)
    for frag in fragments:
        assert frag in str(e.value), (frag, str(e.value))


def test_random_corruptions_only_raise_cell_file_error():
    # Project contract (no traceback from inside a library): a seeded random edit of a
    # valid file either loads or raises CellFileError, nothing else.
    import random

    from explorer.cell import cell_from_text

    rng = random.Random(7)
    tokens = ["0", "-1", "1e400", "nan", '"x"', '"5 kg"', '"5"', "true", "[1, 2]", "{a = 1}",
              '"-3 mm"', '"0 um"', '"3 um/"', '"1 degC"', '""']
    lines = SRC.splitlines()
    for _ in range(200):
        edited = list(lines)
        for _ in range(rng.randint(1, 3)):
            i = rng.randrange(len(edited))
            if "=" in edited[i] and rng.random() < 0.8:
                edited[i] = f"{edited[i].split('=')[0]}= {rng.choice(tokens)}"
            else:
                del edited[i]
        try:
            cell_from_text("\n".join(edited), "corrupted")
        except CellFileError as e:
            assert str(e).startswith("cell file corrupted has")
