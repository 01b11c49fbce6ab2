"""The command line when things go wrong: one clear message, a non-zero exit code, no traceback.

Each case of the reliability issue (item 8) drives ``explorer.cli.main`` as a user would; the
closed-pipe case and the traceback-free guarantee also run ``python -m explorer`` in a
subprocess. Item 9: a huge value in an input is echoed cut short, and no message is unbounded.
"""

import errno
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from explorer import cli
from explorer.cli import main
from explorer.validators import (
    CellFileError,
    InputError,
    Problem,
    check_choice,
    check_positive,
    clip,
    short_repr,
)

DEMO_CELLS = Path(__file__).resolve().parents[1] / "demo_cells"

# A short run (single layout, SPM, two minutes of a 1C discharge): the CLI path, not physics.
QUICK = """
[scenario]
name = "quick"
cell = "van_nmc_66ah"
[model]
electrochemistry = "spm"
layout = "single"
output_interval_s = 60.0
{model_extra}
[[duty]]
{duty}
[cooling]
design = "convection"
h_W_m2K = 10.0
ambient_C = 25.0
{tail}
"""
DISCHARGE = 'step = "discharge"\nc_rate = 1.0\nend_time_s = 120'


def _scenario(folder: Path, name="quick.toml", *, model_extra="", duty=DISCHARGE, tail="",
              prefix=b"") -> Path:
    path = folder / name
    text = QUICK.format(model_extra=model_extra, duty=duty, tail=tail)
    path.write_bytes(prefix + text.encode("utf-8"))
    return path


def _clean_error(capsys, code, expected_code=2) -> str:
    """The stderr of a failed command: the expected code, an "error:" line, no traceback."""
    err = capsys.readouterr().err
    assert code == expected_code, err
    assert "Traceback" not in err
    assert err.startswith("error:"), err
    return err


def _raiser(exc):
    def fail(*args, **kwargs):
        raise exc

    return fail


# --------------------------------------------------------------------------- write errors


def test_out_naming_an_existing_file_is_refused_before_running(tmp_path, capsys):
    afile = tmp_path / "results.txt"
    afile.write_text("keep me")
    scenario = _scenario(tmp_path)
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(afile)]))
    assert "--out" in err and str(afile) in err and "folder" in err
    err = _clean_error(capsys, main(["demo", "--out", str(afile)]))
    assert str(afile) in err
    assert afile.read_text() == "keep me"


def test_out_below_a_file_names_the_path_and_the_os_reason(tmp_path, capsys):
    afile = tmp_path / "results.txt"
    afile.write_text("")
    scenario = _scenario(tmp_path)
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(afile / "sub")]))
    assert str(afile) in err


def _refuse_temp_files(monkeypatch):
    """Every writer of the tool writes through a temporary file in the target folder
    (explorer.fileio); refusing that is what a read-only folder does (also as root)."""
    def refuse(*args, dir=None, **kwargs):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(dir))

    monkeypatch.setattr(tempfile, "mkstemp", refuse)


def test_unwritable_folder_names_the_path_and_the_reason(tmp_path, capsys, monkeypatch):
    scenario = _scenario(tmp_path)
    out = tmp_path / "out"
    _refuse_temp_files(monkeypatch)
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(out)]))
    assert str(out) in err and "Permission denied" in err


def test_an_unwritable_out_folder_is_refused_before_running(tmp_path, capsys, monkeypatch):
    scenario = _scenario(tmp_path)
    monkeypatch.setattr(os, "access", lambda path, mode: False)  # what a read-only folder says
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(tmp_path / "a" / "b")]))
    assert str(tmp_path / "a" / "b") in err and "permission denied" in err
    assert not (tmp_path / "a").exists()


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0,
                    reason="root writes into read-only folders")
def test_read_only_folder(tmp_path, capsys):
    scenario = _scenario(tmp_path)
    out = tmp_path / "ro"
    out.mkdir()
    out.chmod(0o555)
    try:
        err = _clean_error(capsys, main(["run", str(scenario), "--out", str(out)]))
    finally:
        out.chmod(0o755)
    assert str(out) in err and "permission denied" in err.lower()


def test_demo_that_cannot_write_says_so_and_keeps_its_figures(tmp_path, capsys, monkeypatch):
    _refuse_temp_files(monkeypatch)
    code = main(["demo", "--out", str(tmp_path / "demo"), "--c-rate", "4"])
    captured = capsys.readouterr()
    assert code == 2 and "Traceback" not in captured.err
    assert str(tmp_path / "demo") in captured.err and "Permission denied" in captured.err
    assert "peak temperature" in captured.out  # the run finished; its figures were printed


def test_report_that_cannot_be_written(tmp_path, capsys, run_file, monkeypatch):
    _refuse_temp_files(monkeypatch)
    target = tmp_path / "r.html"
    err = _clean_error(capsys, main(["report", str(run_file), "--out", str(target)]))
    assert str(target) in err
    err = _clean_error(capsys, main(["report", str(run_file), "--out", str(tmp_path)]))
    assert "folder" in err


# --------------------------------------------------------------------------- files of other kinds


@pytest.fixture(scope="module")
def tool_files(tmp_path_factory):
    """A run, a sweep and a sizing curve written by the commands themselves."""
    folder = tmp_path_factory.mktemp("kinds")
    tail = ('[limits]\ntemperature_max_C = 45.0\n[size]\nvary = "h_W_m2K"\n'
            'bounds = [5.0, 50.0]\n[sweep.axes]\nh_W_m2K = [5.0, 20.0]\n')
    scenario = _scenario(folder, "case.toml", tail=tail)
    assert main(["run", str(scenario)]) in (0, 1)
    assert main(["sweep", str(scenario), "--scheduler", "serial"]) in (0, 1)
    assert main(["size", str(scenario)]) in (0, 1)
    return {"run": folder / "case_run.nc", "sweep": folder / "case_sweep.nc",
            "curve": folder / "case_size_curve.nc"}


@pytest.fixture()
def run_file(tool_files):
    return tool_files["run"]


def test_report_of_a_run_file_works(tmp_path, capsys, run_file):
    assert main(["report", str(run_file), "--out", str(tmp_path / "r.html")]) == 0
    assert (tmp_path / "r.html").is_file()


@pytest.mark.parametrize("kind", ["sweep", "curve"])
def test_report_of_the_tools_other_files(tool_files, tmp_path, capsys, kind):
    # a sweep and a sizing curve have reports of their own (issue 13; tests/test_report_kinds.py)
    path = tool_files[kind]
    assert main(["report", str(path), "--out", str(tmp_path / "r.html")]) == 0
    assert (tmp_path / "r.html").is_file()


def test_open_results_says_what_a_file_is(tool_files):
    from explorer.results import ResultsKindError, open_results

    assert float(open_results(tool_files["run"])["time"][-1]) > 0
    with pytest.raises(ResultsKindError) as exc:
        open_results(tool_files["sweep"])
    assert exc.value.kind.startswith("a sweep results file")
    assert str(tool_files["sweep"]) in str(exc.value)


def test_report_of_a_sweep_cache_entry(tmp_path, capsys):
    # the shape of a cache entry (explorer.sweeping.run_case): summary and traces of one case
    entry = xr.Dataset({"peak_temperature_C": ((), 30.0), "voltage": ("time", [4.1, 4.0])},
                       coords={"time": [0.0, 60.0]},
                       attrs={"case_status": "completed", "case_message": ""})
    entry.to_netcdf(tmp_path / "0123abcd.nc")
    err = _clean_error(capsys, main(["report", str(tmp_path / "0123abcd.nc")]))
    assert "sweep cache entry" in err


def test_report_of_files_this_tool_did_not_write(tmp_path, capsys):
    foreign = tmp_path / "ocean.nc"
    xr.Dataset({"salinity": ("depth", np.arange(3.0))}).to_netcdf(foreign)
    err = _clean_error(capsys, main(["report", str(foreign)]))
    assert str(foreign) in err and "did not write" in err
    text = tmp_path / "notes.nc"
    text.write_text("not netCDF at all")
    err = _clean_error(capsys, main(["report", str(text)]))
    assert str(text) in err and "not a results file" in err
    err = _clean_error(capsys, main(["report", str(tmp_path)]))
    assert "is a folder" in err


# --------------------------------------------------------------------------- bad input files


def test_profile_with_a_latin1_byte(tmp_path, capsys):
    # "5 °C" saved as Latin-1: the degree sign is the single byte 0xB0, not UTF-8
    (tmp_path / "profile.csv").write_bytes(b"time_s,current_A\n0,10\n60,20\n120,5 \xb0C\n")
    scenario = _scenario(tmp_path, duty='step = "profile_csv"\npath = "profile.csv"')
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(tmp_path / "out")]))
    assert "profile.csv" in err and "UTF-8" in err


def test_position_last_is_a_clear_error(tmp_path, capsys):
    scenario = _scenario(tmp_path, model_extra='position = "last"')
    err = _clean_error(capsys, main(["run", str(scenario), "--out", str(tmp_path / "out")]))
    assert "position" in err and "'last'" in err


def test_byte_order_mark_in_a_scenario_file(tmp_path, capsys):
    # Windows editors start UTF-8 files with EF BB BF; the file is otherwise fine
    scenario = _scenario(tmp_path, prefix=b"\xef\xbb\xbf")
    code = main(["run", str(scenario), "--out", str(tmp_path / "out")])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "Traceback" not in captured.err


def test_byte_order_mark_in_a_cell_file(tmp_path, capsys):
    cell = tmp_path / "bom_cell.toml"
    cell.write_bytes(b"\xef\xbb\xbf" + (DEMO_CELLS / "rack_lfp_26ah.toml").read_bytes())
    code = main(["show", str(cell)])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "26 Ah nominal" in captured.out


def test_a_huge_value_is_echoed_cut_short(tmp_path, capsys):
    text = (DEMO_CELLS / "rack_lfp_26ah.toml").read_text(encoding="utf-8")
    big = "q" * 5_000_000
    cell = tmp_path / "huge.toml"
    cell.write_text(text.replace("[geometry]", f'[geometry]\nshape = "{big}"', 1),
                    encoding="utf-8")
    err = _clean_error(capsys, main(["show", str(cell)]))
    assert "(5000000 characters)" in err and len(err) < 1000


# --------------------------------------------------------------------------- the guard itself


def test_keyboard_interrupt_is_one_line_and_130(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell", _raiser(KeyboardInterrupt()))
    assert main(["show", "van_nmc_66ah"]) == 130
    err = capsys.readouterr().err
    assert err.strip() == "error: interrupted"


def test_an_unexpected_error_is_one_line_unless_verbose(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell", _raiser(RuntimeError("boom\nsecond line")))
    assert main(["show", "van_nmc_66ah"]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("internal error: RuntimeError: boom second line")
    assert "run with -v for the traceback" in err
    assert main(["show", "van_nmc_66ah", "-v"]) == 1  # -v after the command works too
    err = capsys.readouterr().err
    assert "Traceback" in err and "internal error: RuntimeError" in err
    assert "run with -v" not in err


def test_verbose_prints_the_traceback_of_an_input_error(tmp_path, capsys):
    assert main(["-v", "show", str(tmp_path / "missing.toml")]) == 2
    err = capsys.readouterr().err
    assert "Traceback" in err and "error:" in err and "missing.toml" in err


def test_os_error_outside_the_writers(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell",
                        _raiser(PermissionError(errno.EACCES, "Permission denied", "/x/c.toml")))
    err = _clean_error(capsys, main(["show", "c.toml"]))
    assert err.strip() == "error: /x/c.toml: Permission denied"


def test_an_undecodable_file_from_a_reader_that_does_not_name_it(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell",
                        _raiser(UnicodeDecodeError("utf-8", b"\xb0", 0, 1, "invalid start byte")))
    err = _clean_error(capsys, main(["show", "c.toml"]))
    assert "not UTF-8 text" in err and "0xb0" in err


def test_every_printed_message_is_capped(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell", _raiser(InputError("z" * 100_000)))
    err = _clean_error(capsys, main(["show", "van_nmc_66ah"]))
    assert len(err) < 2100 and "(100000 characters)" in err


def test_a_huge_command_line_argument_is_echoed_cut_short(capsys):
    with pytest.raises(SystemExit) as exit_:
        main(["x" * 100_000])
    assert exit_.value.code == 2
    err = capsys.readouterr().err
    assert "invalid choice" in err and len(err) < 2500 and "Traceback" not in err


def test_broken_pipe_in_process_is_quiet(capsys, monkeypatch):
    monkeypatch.setattr("explorer.cell.load_cell", _raiser(BrokenPipeError(errno.EPIPE, "")))
    assert main(["show", "van_nmc_66ah"]) == cli.EXIT_BROKEN_PIPE
    assert capsys.readouterr().err == ""


# --------------------------------------------------------------------------- real processes


def _explorer(*args, **kwargs):
    return subprocess.run([sys.executable, "-m", "explorer", *args], capture_output=True,
                          text=True, **kwargs)


def test_closed_pipe_exits_quietly():
    # the reader is gone before the command writes anything: every write is a broken pipe
    proc = subprocess.Popen([sys.executable, "-m", "explorer", "show", "van_nmc_66ah"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait() == cli.EXIT_BROKEN_PIPE
    assert err == ""


def test_show_piped_into_head():
    proc = subprocess.run(f"'{sys.executable}' -m explorer show van_nmc_66ah | head -1",
                          shell=True, capture_output=True, text=True)
    assert proc.stdout.startswith("Van module NMC 66 Ah") and proc.stdout.count("\n") == 1
    assert proc.stderr == ""


def test_no_traceback_from_a_real_process(tmp_path):
    foreign = tmp_path / "ocean.nc"
    xr.Dataset({"salinity": ("depth", np.arange(3.0))}).to_netcdf(foreign)
    scenario = _scenario(tmp_path, model_extra='position = "last"')
    for args in (["show", str(tmp_path / "missing.toml")], ["report", str(foreign)],
                 ["run", str(scenario), "--out", str(tmp_path / "out")]):
        proc = _explorer(*args)
        assert proc.returncode == 2, proc.stderr
        assert "Traceback" not in proc.stderr and proc.stderr.startswith("error:")


# --------------------------------------------------------------------------- the capping helper


def test_clip_and_short_repr():
    assert clip("short") == "short"
    assert clip("a" * 81) == "a" * 80 + "... (81 characters)"
    assert short_repr(2.5) == "2.5" and short_repr("ab") == "'ab'"
    assert short_repr("b" * 1000) == repr("b" * 80) + "... (1000 characters)"
    assert short_repr(list(range(1000))).endswith("characters)")
    assert len(short_repr(b"\x00" * 10**6)) < 400


def test_checks_and_problems_echo_values_cut_short():
    big = "v" * 50_000_000
    for check in (lambda: check_positive("flow_L_min", big),
                  lambda: check_choice("layout", big, ("single", "averaged"))):
        with pytest.raises(InputError) as exc:
            check()
        assert len(str(exc.value)) < 300 and "(50000000 characters)" in str(exc.value)
    problem = Problem("cell.toml", "k" * 10_000, big, "a number")
    message = str(CellFileError([problem], "cell.toml"))
    assert len(message) < 500 and "(50000000 characters)" in message
    assert "(10000 characters)" in message
