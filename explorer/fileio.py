"""Atomic file writes: every file the tool writes goes through :func:`atomic_write`.

The content is written to a temporary file in the target's folder and renamed
over the target only when the write succeeded, so a reader (or a re-run after a
crash, Ctrl-C or SIGKILL) sees either the old file or the complete new one,
never half a file. The temporary file is removed on any failure; one left by a
killed process carries its process id in its name and
:func:`remove_stale_temp` clears it on the next start.

Examples
--------
>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp())
>>> atomic_write_text(folder / "note.txt", "hello\\n").read_text()
'hello\\n'
"""

from __future__ import annotations

import logging
import os
import re
import tempfile
from collections.abc import Callable
from pathlib import Path

from explorer.validators import OutputError

__all__ = ["atomic_write", "atomic_write_text", "remove_stale_temp"]

log = logging.getLogger(__name__)

TEMP_SUFFIX = ".tmp"
# ".<target name>.<pid>.<mkstemp letters>.tmp"; the legacy writers used ".part"/".tmp"
# without a pid.
_TEMP_NAME = re.compile(r"^\.(?P<target>.+?)\.(?:(?P<pid>\d+)\.)?[A-Za-z0-9_]+\.(?:tmp|part)$")


def atomic_write(path, write: Callable, *, binary: bool = False, parents: bool = False) -> Path:
    """Write ``path`` through a temporary file in its folder; return the path.

    Parameters
    ----------
    path : str or Path
        The file to (re)write.
    write : callable
        ``write(tmp_path)`` writes the whole content to ``tmp_path`` (a
        :class:`~pathlib.Path`; writers that take a file name, such as
        ``Dataset.to_netcdf``). With ``binary=True`` it is called with the
        temporary file open for binary writing instead.
    binary : bool
        Hand ``write`` an open binary file rather than the path.
    parents : bool
        Create the folder (and its parents) when missing; by default a missing
        folder is an error.

    Raises
    ------
    OutputError
        The path names a folder, its folder is missing or not writable, or the
        system refused the write (disk full, ...). The message names the path.
        Other exceptions of ``write`` (bad content) pass through unchanged;
        either way the old file is left as it was and no temporary file stays.
    """
    path = Path(path)
    folder = _folder(path, parents)
    try:
        fd, name = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=TEMP_SUFFIX,
                                    dir=folder)
    except OSError as exc:
        raise OutputError(f"{path}: cannot write into the folder {str(folder)!r} "
                          f"({_reason(exc)})") from None
    tmp = Path(name)
    try:
        if binary:
            with os.fdopen(fd, "wb") as fh:
                write(fh)
                fh.flush()
                os.fsync(fh.fileno())
        else:
            os.close(fd)
            write(tmp)
            _fsync(tmp)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes it private; our files are shared
        os.replace(tmp, path)
    except OSError as exc:
        _discard(tmp)
        raise OutputError(f"{path}: cannot write the file ({_reason(exc)})") from None
    except BaseException:
        _discard(tmp)
        raise
    return path


def atomic_write_text(path, text: str, *, parents: bool = False) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically; see :func:`atomic_write`."""
    data = text.encode("utf-8")
    return atomic_write(path, lambda fh: fh.write(data), binary=True, parents=parents)


def remove_stale_temp(folder) -> int:
    """Remove temporary files of writes that never finished; return how many.

    A temporary file is stale when the process named in it is no longer
    running (killed mid-write), or when it has no process id (left by an older
    version). Files of writers still running are left alone.
    """
    folder = Path(folder)
    removed = 0
    try:
        entries = list(folder.iterdir())
    except OSError:
        return 0
    for entry in entries:
        match = _TEMP_NAME.match(entry.name)
        if match is None or not entry.is_file():
            continue
        pid = match.group("pid")
        if pid is not None and _alive(int(pid)):
            continue
        try:
            entry.unlink()
            removed += 1
        except OSError as exc:  # not ours to remove, or gone already: leave it
            log.debug("could not remove stale temporary file %s: %s", entry, exc)
    if removed:
        log.info("removed %d unfinished temporary file(s) from %s", removed, folder)
    return removed


def _folder(path: Path, parents: bool) -> Path:
    if path.is_dir():
        raise OutputError(f"{path}: is a folder; expected a file name")
    folder = path.parent if str(path.parent) else Path(".")
    if parents:
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise OutputError(f"{path}: cannot create the folder {str(folder)!r} "
                              f"({_reason(exc)})") from None
    if not folder.is_dir():
        raise OutputError(f"{path}: the folder {str(folder)!r} does not exist; create it first "
                          "or choose another path")
    return folder


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc) or type(exc).__name__


def _fsync(path: Path) -> None:
    """Flush a file written by name to the disk before it replaces the old one."""
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _discard(tmp: Path) -> None:
    try:
        tmp.unlink(missing_ok=True)
    except OSError as exc:  # pragma: no cover - the folder went away or turned read-only
        log.warning("could not remove the temporary file %s: %s", tmp, exc)


def _umask() -> int:
    """The process umask; read from /proc where possible (os.umask sets it, racing threads)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _alive(pid: int) -> bool:
    """Whether process ``pid`` runs on this machine (a zombie counts as dead)."""
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # someone else's process
        return True
    except OSError:
        return True
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):
        return True
