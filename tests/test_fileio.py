"""Atomic writes (explorer.fileio): the old file survives any failed write, no temp file stays.

No physics here: the checks are on file-system behaviour (POSIX rename
replaces the target in one step: common practice).
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
import tempfile

import numpy as np
import pytest
import xarray as xr

from explorer import fileio
from explorer.fileio import atomic_write, atomic_write_text, remove_stale_temp
from explorer.validators import InputError, OutputError


def _names(folder):
    return sorted(p.name for p in folder.iterdir())


def test_writes_and_replaces(tmp_path):
    target = tmp_path / "a.txt"
    assert atomic_write_text(target, "one\n") == target
    atomic_write_text(target, "two\n")
    assert target.read_text() == "two\n"
    atomic_write(target, lambda tmp: tmp.write_bytes(b"\x00\x01"))
    assert target.read_bytes() == b"\x00\x01"
    atomic_write(target, lambda fh: fh.write(b"three"), binary=True)
    assert target.read_bytes() == b"three"
    assert _names(tmp_path) == ["a.txt"]


def test_mode_follows_umask(tmp_path):
    old = os.umask(0o027)
    try:
        atomic_write_text(tmp_path / "m.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "m.txt").stat().st_mode) == 0o640  # 0o666 & ~0o027


def test_failure_mid_write_keeps_the_old_file(tmp_path):
    target = tmp_path / "keep.txt"
    target.write_text("old content")

    def half(tmp):
        tmp.write_text("half of the new")
        raise RuntimeError("writer broke")

    with pytest.raises(RuntimeError, match="writer broke"):
        atomic_write(target, half)
    assert target.read_text() == "old content"
    assert _names(tmp_path) == ["keep.txt"]

    def interrupted(fh):
        fh.write(b"partial")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        atomic_write(target, interrupted, binary=True)
    assert target.read_text() == "old content"
    assert _names(tmp_path) == ["keep.txt"]


def test_system_error_mid_write_is_an_output_error(tmp_path):
    target = tmp_path / "full.nc"
    target.write_text("old")

    def disk_full(tmp):
        tmp.write_text("par")
        raise OSError(28, "No space left on device")

    with pytest.raises(OutputError, match=r"full\.nc.*No space left"):
        atomic_write(target, disk_full)
    assert target.read_text() == "old"
    assert _names(tmp_path) == ["full.nc"]


def test_path_is_a_folder(tmp_path):
    folder = tmp_path / "results.nc"
    folder.mkdir()
    with pytest.raises(OutputError, match=r"results\.nc.*is a folder") as err:
        atomic_write_text(folder, "x")
    assert isinstance(err.value, InputError)
    assert str(folder) in str(err.value)


def test_missing_folder(tmp_path):
    target = tmp_path / "nowhere" / "x.txt"
    with pytest.raises(OutputError, match="does not exist"):
        atomic_write_text(target, "x")
    atomic_write_text(target, "x", parents=True)
    assert target.read_text() == "x"


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="needs POSIX permissions that apply (root writes anywhere)")
def test_read_only_folder(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    (folder / "r.txt").write_text("old")
    folder.chmod(0o555)
    try:
        with pytest.raises(OutputError, match=r"r\.txt.*ro"):
            atomic_write_text(folder / "r.txt", "new")
    finally:
        folder.chmod(0o755)
    assert (folder / "r.txt").read_text() == "old"
    assert _names(folder) == ["r.txt"]


def test_read_only_folder_refused_by_the_system(tmp_path, monkeypatch):
    """The same as above where the test runs as root: the system's refusal is simulated."""
    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(tempfile, "mkstemp", refuse)
    with pytest.raises(OutputError, match=r"r\.txt.*Permission denied") as err:
        atomic_write_text(tmp_path / "r.txt", "new")
    assert str(tmp_path / "r.txt") in str(err.value)


def test_netcdf_through_results_save(tmp_path):
    from explorer.results import save

    ds = xr.Dataset({"a": ("t", np.arange(3.0))}, attrs={"flag": True, "meta": {"k": 1}})
    path = save(ds, tmp_path / "sub" / "r.nc")  # save creates the folder
    with xr.open_dataset(path) as back:
        assert float(back["a"].sum()) == 3.0 and back.attrs["flag"] == 1
    assert _names(path.parent) == ["r.nc"]
    with pytest.raises(OutputError, match="is a folder"):
        save(ds, tmp_path / "sub")


def test_stale_temp_files_of_dead_writers_are_removed(tmp_path):
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)
    dead_pid = int(dead.stdout)
    stale = tmp_path / f".abc.nc.{dead_pid}.k2j_x9.tmp"
    legacy = tmp_path / ".old.nc.q8w7e6.part"
    mine = tmp_path / f".live.nc.{os.getpid()}.zz11.tmp"  # a writer still running: ours
    keep = tmp_path / "abc.nc"
    for p in (stale, legacy, mine, keep):
        p.write_text("x")
    assert remove_stale_temp(tmp_path) == 2
    assert _names(tmp_path) == sorted([mine.name, keep.name])
    assert remove_stale_temp(tmp_path / "missing") == 0


def test_umask_is_read_without_changing_it():
    before = os.umask(0o022)
    os.umask(before)
    assert fileio._umask() == before
    after = os.umask(0o022)
    os.umask(after)
    assert after == before
