"""The command line: help, the demo main job, cell listing and errors."""

import subprocess
import sys

import pytest

import explorer
from explorer.cli import main


def test_help_lists_the_commands(capsys):
    with pytest.raises(SystemExit) as exit_:
        main(["--help"])
    assert exit_.value.code == 0
    out = capsys.readouterr().out
    for command in ("demo", "run", "size", "sweep", "report", "cells", "show"):
        assert command in out


def test_demo_writes_results_and_report(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    for figure in ("peak temperature", "largest in-cell spread", "time to temperature limit",
                   "energy delivered", "heat generated / rejected", "Caution"):
        assert figure in out
    nc = list(tmp_path.glob("*.nc"))
    html = list(tmp_path.glob("*.html"))
    assert len(nc) == 1 and len(html) == 1
    ds = explorer.open_results(nc[0])
    assert ds.attrs["layout"] == "averaged" and ds.attrs["status"] == "completed"
    assert ds.sizes["x"] > 1 and ds.sizes["y"] > 1
    assert float(ds.current.max()) == pytest.approx(2 * 66.0, rel=1e-6)  # 2C on 66 Ah


def test_cells_and_show(capsys):
    assert main(["cells"]) == 0
    assert "van_nmc_66ah" in capsys.readouterr().out
    assert main(["show", "rack_lfp_26ah"]) == 0
    assert "26 Ah nominal" in capsys.readouterr().out


def test_bad_cell_is_a_clear_error_not_a_traceback(tmp_path, capsys):
    assert main(["show", str(tmp_path / "missing.toml")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and "missing.toml" in err


def test_module_entry_point():
    out = subprocess.run([sys.executable, "-m", "explorer", "--help"], capture_output=True,
                         text=True, check=True).stdout
    assert "python -m explorer" in out


def test_show_names_the_curves_the_data_note_and_plain_tabs(capsys):
    # a tab named by its polarity is not repeated ("negative (negative)"); the electrode
    # curves and the file's data note are what an engineer checks first
    assert main(["show", "van_nmc_66ah"]) == 0
    out = capsys.readouterr().out
    assert "(negative)" not in out and "negative on top" in out
    assert "potentials       negative graphite; positive nmc" in out
    assert "data note        invented" in out
    assert "coated area 240 x 160 mm, 8.9 mm thick" in out  # not a 240 x 160 x 8.9 mm box
