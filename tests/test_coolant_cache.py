"""Coolant property tables (explorer.cooling.coolant): accuracy against CoolProp, disk cache.

Reference: CoolProp (``PropsSI`` at 1 atm) -- the property library the tables are built from,
called here directly at temperatures between the table's nodes and at the ends of the range.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from explorer.cooling import coolant as cm
from explorer.cooling.coolant import PRESSURE_PA, get_coolant, user_cache_folder


@pytest.fixture
def fresh(monkeypatch, tmp_path):
    """An empty cache folder in tmp_path and empty in-memory tables (restored afterwards)."""
    folder = tmp_path / "cache"
    monkeypatch.setenv("EXPLORER_CACHE_DIR", str(folder))
    saved = dict(cm._TABLES)
    cm._TABLES.clear()
    cm._build.cache_clear()
    cm._properties.cache_clear()
    yield folder
    cm._TABLES.clear()
    cm._TABLES.update(saved)
    cm._build.cache_clear()
    cm._properties.cache_clear()


def _forget():
    cm._TABLES.clear()
    cm._build.cache_clear()
    cm._properties.cache_clear()


def _file(folder, name):
    files = list((folder / "coolant").glob(f"{name}-*.json"))
    assert len(files) == 1, files
    return files[0]


@pytest.mark.parametrize("name", ["water", "eg50", "pg30", "eg60", "pg1"])
def test_table_within_1e6_of_coolprop(name, fresh):
    """Between the nodes and at both ends of the liquid range, every property of the table is
    within 1e-6 (relative) of CoolProp's PropsSI at the same temperature and 1 atm."""
    from CoolProp.CoolProp import PropsSI

    c = get_coolant(name)
    table = cm._TABLES[c.fluid]
    # off-node temperatures across the range, and the range's ends (outside the outer nodes)
    temps = np.concatenate([np.linspace(c.min_C, c.max_C, 97)[1:-1] + 0.0371,
                            [c.min_C, c.min_C + 0.013, c.max_C - 0.017, c.max_C]])
    temps = temps[(temps >= c.min_C) & (temps <= c.max_C)]
    got = np.array([table.at(t) for t in temps])
    kelvin = temps + 273.15
    ref = np.column_stack([PropsSI(q, "T", kelvin, "P", np.full_like(kelvin, PRESSURE_PA),
                                   c.fluid) for q in ("D", "C", "V", "L")])
    assert np.max(np.abs(got / ref - 1.0)) < 1e-6


def test_table_is_written_and_read_back_without_coolprop(fresh, monkeypatch):
    first = get_coolant("pg30").properties(31.0)
    path = _file(fresh, "pg30")
    data = json.loads(path.read_text())
    assert data["coolprop"] == cm._coolprop_version() and data["format"] == cm.TABLE_FORMAT
    assert cm._coolprop_version() in path.name
    _forget()

    def no_coolprop(*args):
        raise AssertionError("the table should come from the disk cache")

    monkeypatch.setattr(cm, "_tabulate", no_coolprop)
    again = get_coolant("pg30").properties(31.0)
    assert again == first
    assert get_coolant("pg30").min_C == pytest.approx(data["min_C"], rel=0, abs=0)


@pytest.mark.parametrize("damage", [
    b"\x00\x01garbage",
    b'{"format": 1, "name": "eg50"',  # cut short
    b"[]",
    "wrong version",
    "short column",
    "nan value",
])
def test_damaged_table_is_ignored_and_rewritten(fresh, damage):
    good = get_coolant("eg50").properties(20.0)
    path = _file(fresh, "eg50")
    if isinstance(damage, bytes):
        path.write_bytes(damage)
    else:
        data = json.loads(path.read_text())
        if damage == "wrong version":
            data["coolprop"] = "0.0.1"
        elif damage == "short column":
            data["viscosity_Pa_s"] = data["viscosity_Pa_s"][:-5]
        else:
            data["density_kg_m3"][3] = float("nan")
        path.write_text(json.dumps(data))
    _forget()
    assert get_coolant("eg50").properties(20.0) == good
    assert cm._table_problem(json.loads(path.read_text()), "eg50", "INCOMP::MEG-50%") == ""


@pytest.mark.parametrize("value", ["off", "0", "none", ""])
def test_disk_cache_can_be_turned_off(fresh, monkeypatch, tmp_path, value):
    monkeypatch.setenv("EXPLORER_CACHE_DIR", value)
    assert user_cache_folder() is None
    get_coolant("water").properties(40.0)
    assert not fresh.exists()


def test_unwritable_cache_folder_is_skipped(fresh, monkeypatch, tmp_path):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("EXPLORER_CACHE_DIR", str(blocker))
    assert get_coolant("water").properties(40.0).density_kg_m3 > 990.0


@pytest.mark.skipif(sys.platform in ("win32", "darwin"), reason="XDG folders: Linux")
def test_default_folder_is_the_user_cache(monkeypatch, tmp_path):
    monkeypatch.delenv("EXPLORER_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert user_cache_folder() == tmp_path / "pouch-thermal-explorer"


def test_a_new_process_with_a_warm_cache_does_not_import_coolprop(fresh):
    get_coolant("eg50")  # writes the table into the test's cache folder
    code = textwrap.dedent("""
        import sys
        from explorer.cooling.coolant import get_coolant
        p = get_coolant("eg50").properties(25.0)
        print(p.density_kg_m3 > 1000.0, "CoolProp" in sys.modules)
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env={**os.environ, "EXPLORER_CACHE_DIR": str(fresh)}, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["True", "False"]
