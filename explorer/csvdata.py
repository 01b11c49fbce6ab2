"""The one CSV reader for curves: load profiles and measured test curves.

A curve file is UTF-8 text (a byte-order mark is fine). Lines starting with ``#``
are comments; ``# key = value`` comments above the header are settings of the
file (see :func:`read_settings`). The first other line is the header; every
column we read names its quantity and its unit as a suffix:

========================  ==============================================
``time_s``                also ``time_min``, ``time_h``, ``time_ms``
``current_A``             also ``current_mA``; positive on discharge
``power_W``               also ``power_kW``, ``power_mW``; positive on discharge
``voltage_V``             also ``voltage_mV``
``temperature_C``         also ``temperature_degC``, ``temperature_K``
========================  ==============================================

Names are case-blind (``Time_s``), units are not (``mA`` is not ``MA``).
Columns of other quantities (``step``, ``cycle``...) are ignored. Headers with
the unit in brackets (``time [s]``) are still read, with a
:class:`FutureWarning` naming the suffix form to use instead.

Examples
--------
>>> import pathlib, tempfile
>>> p = pathlib.Path(tempfile.mkdtemp()) / "load.csv"
>>> _ = p.write_text("time_min,current_A\\n0,5\\n1,10\\n")
>>> read_curves(p, required=("time_s", "current_A"))["time_s"]
array([ 0., 60.])
"""

from __future__ import annotations

import csv
import logging
import os
import re
import warnings
from pathlib import Path

import numpy as np

from explorer.validators import InputError, short_repr

__all__ = ["read_curves", "read_settings", "UNITS", "SI_NAMES", "check_path"]

log = logging.getLogger(__name__)

#: quantity -> {unit text: (scale, offset)} to the SI unit; value_SI = value * scale + offset
UNITS = {
    "time": {"s": (1.0, 0.0), "ms": (1e-3, 0.0), "min": (60.0, 0.0), "h": (3600.0, 0.0)},
    "current": {"A": (1.0, 0.0), "mA": (1e-3, 0.0)},
    "power": {"W": (1.0, 0.0), "kW": (1e3, 0.0), "mW": (1e-3, 0.0)},
    "voltage": {"V": (1.0, 0.0), "mV": (1e-3, 0.0)},
    # temperatures come out in degC (the unit of every temperature at the package's edges)
    "temperature": {"C": (1.0, 0.0), "degC": (1.0, 0.0), "K": (1.0, -273.15)},
}
#: quantity -> the name its column has in the returned dict
SI_NAMES = {"time": "time_s", "current": "current_A", "power": "power_W",
            "voltage": "voltage_V", "temperature": "temperature_C"}
_BY_SI_NAME = {v: k for k, v in SI_NAMES.items()}
_WORDS = {1: "one", 2: "two", 3: "three", 4: "four", 5: "five"}
_SETTING = re.compile(r"^#\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*(.*?)\s*$")


def check_path(path, where: str) -> Path:
    """``path`` as a Path: a non-empty str or os.PathLike without a NUL character."""
    text = os.fspath(path) if isinstance(path, str | os.PathLike) else None
    if not isinstance(text, str):
        raise InputError(f"{where}: `path` must be a file path (str or pathlib.Path), "
                         f"got {type(path).__name__} {short_repr(path)}")
    if not text.strip():
        raise InputError(f"{where}: `path` is empty ({short_repr(text)}); expected the path of "
                         "a CSV file")
    if "\x00" in text:
        raise InputError(f"{where}: `path` {short_repr(text)} contains a NUL character; "
                         "expected the path of a CSV file")
    return Path(text)


def read_text(path: Path, what: str = "file") -> str:
    """The file as text: UTF-8, a leading byte-order mark dropped; anything else is an
    InputError naming the file and the line of the first byte that is not UTF-8."""
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(f"{path}: cannot read the {what} ({exc.strerror or exc})") from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputError(f"{path}: the {what} is UTF-16 text; save it as UTF-8 (plain CSV)")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise InputError(f"{path}, line {line}: byte 0x{raw[exc.start]:02x} is not UTF-8 text "
                         f"(the file is probably Latin-1 or Windows-1252); save the {what} as "
                         "UTF-8") from None


def read_settings(path, *, where: str = "csvdata.read_settings") -> dict[str, str]:
    """The ``# key = value`` comment lines of a curve file, as text (keys lower-cased).

    Test files use them for the rig conditions (``# ambient_C = 25``); the caller
    converts and checks the values it knows.
    """
    path = check_path(path, where)
    out = {}
    for line in read_text(path).splitlines():
        m = _SETTING.match(line.strip())
        if m:
            out[m.group(1).lower()] = m.group(2)
    return out


def _parse_header(path, head: str):
    """(quantity, unit, bracketed) of one header cell; quantity is lower case."""
    h = head.strip()
    if "[" in h and h.endswith("]"):
        name, unit = h[:-1].split("[", 1)
        return name.strip().lower(), unit.strip(), True
    name, sep, unit = h.rpartition("_")
    if sep and name.strip() and unit:
        return name.strip().lower(), unit, False
    return h.lower(), "", False


def read_curves(path, required=("time_s",), optional=(), *,
                where: str = "csvdata.read_curves", what: str = "file",
                min_rows: int = 2, increasing_time: bool = True) -> dict[str, np.ndarray]:
    """Read the named columns of a curve CSV file, converted to SI (temperatures in degC).

    Parameters
    ----------
    path : str or Path
    required, optional : sequence of str
        Columns wanted, by their SI names (``"time_s"``, ``"current_A"``,
        ``"power_W"``, ``"voltage_V"``, ``"temperature_C"``); any unit of the
        same quantity in the file is converted. A missing required column is
        an error; a missing optional one is left out of the result.
    where : str
        Prefix of the errors about the ``path`` argument itself (the caller's name).
    what : str
        What the file is, for messages ("profile", "test curve").
    min_rows : int
        Fewest data rows accepted.
    increasing_time : bool
        Times must increase strictly (checked when ``time_s`` is read).

    Returns
    -------
    dict
        SI name -> float array, one value per data row.

    Raises
    ------
    InputError
        Naming the file, and for bad content the line, column and value.

    Warns
    -----
    FutureWarning
        For headers with the unit in brackets (``time [s]``), naming the suffix
        form (``time_s``) to write instead.
    """
    path = check_path(path, where)
    wanted = list(required) + [c for c in optional if c not in required]
    for name in wanted:
        if name not in _BY_SI_NAME:
            raise InputError(f"{where}: unknown column name {name!r}; expected one of "
                             f"{', '.join(SI_NAMES.values())}")
    text = read_text(path, what)
    numbered = [(n, ln) for n, ln in enumerate(text.splitlines(), start=1)
                if ln.strip() and not ln.lstrip().startswith("#")]
    line_no = [n for n, _ in numbered]  # file line of each row, for the messages
    rows = list(csv.reader(ln for _, ln in numbered))
    if len(rows) < 1 + min_rows:
        count = _WORDS.get(min_rows, str(min_rows))
        raise InputError(f"{path}: a {what} needs a header and at least {count} rows, "
                         f"found {len(rows)} line(s)")
    columns, bracketed = _columns(path, rows[0], {_BY_SI_NAME[n] for n in wanted})
    if bracketed:
        new = ", ".join(f"`{h.strip()}` -> `{q}_{u}`" for h, q, u in bracketed)
        warnings.warn(f"{path}: headers with the unit in brackets are read for now; write the "
                      f"unit as a suffix instead ({new})", FutureWarning, stacklevel=3)
    missing = [n for n in required if _BY_SI_NAME[n] not in columns]
    if missing:
        want = " and ".join(f"`{n}`" for n in missing)
        raise InputError(f"{path}: header {short_repr(rows[0])} has no {want} column "
                         f"(a column named by its quantity and unit, e.g. `{missing[0]}`)")
    out = {}
    for name in wanted:
        q = _BY_SI_NAME[name]
        if q in columns:
            col, head, unit = columns[q]
            out[name] = _column(path, rows, line_no, col, head, q, unit)
    if increasing_time and "time_s" in out:
        steps = np.diff(out["time_s"])
        if np.any(steps <= 0):
            i = int(np.argmax(steps <= 0))  # data rows i and i+1
            raise InputError(f"{path}, line {line_no[i + 2]}: times must increase strictly; "
                             f"found {out['time_s'][i]:g} then {out['time_s'][i + 1]:g} s")
    return out


def _columns(path, header, quantities):
    """quantity -> (column index, header text, unit) for the quantities asked for, and the
    bracketed headers seen ``(header, quantity, unit)``."""
    columns, bracketed = {}, []
    for i, head in enumerate(header):
        q, unit, in_brackets = _parse_header(path, head)
        if q not in quantities:
            continue
        if not unit:
            raise InputError(
                f"{path}: header {head.strip()!r} must state its unit as a suffix, e.g. "
                f"`{SI_NAMES[q]}` (the older form with the unit in brackets, "
                f"`{q} [{SI_NAMES[q].rpartition('_')[2]}]`, is read too)")
        if unit not in UNITS[q]:
            raise InputError(f"{path}: column `{head.strip()}` has unknown unit {unit!r}; "
                             f"expected one of {sorted(UNITS[q])}")
        if q in columns:
            raise InputError(f"{path}: header has two `{q}` columns ({columns[q][1]!r} and "
                             f"{head.strip()!r}); keep one")
        columns[q] = (i, head.strip(), unit)
        if in_brackets:
            bracketed.append((head, q, unit))
    return columns, bracketed


def _column(path, rows, line_no, col, head, quantity, unit) -> np.ndarray:
    """One column as SI floats; the first bad cell is an error naming line, column, value."""
    cells = [r[col] if col < len(r) else None for r in rows[1:]]
    try:
        if any(c is None for c in cells):
            raise ValueError
        values = np.array(cells, dtype=float)  # fast path; errors are located below
    except ValueError:
        for line, c in zip(line_no[1:], cells):
            try:
                float(c)
            except (TypeError, ValueError):
                shown = "(missing)" if c is None else short_repr(c)
                raise InputError(f"{path}, line {line}: column `{head}` value {shown} is not "
                                 "a number") from None
        raise  # not reached: a cell float() accepts but numpy refused
    bad = ~np.isfinite(values)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(f"{path}, line {line_no[i + 1]}: column `{head}` is "
                         f"{short_repr(cells[i])}; expected a finite number")
    scale, offset = UNITS[quantity][unit]
    if scale != 1.0 or offset != 0.0:
        values = values * scale + offset
    if quantity == "temperature" and np.any(values < -273.15):
        i = int(np.argmax(values < -273.15))
        raise InputError(f"{path}, line {line_no[i + 1]}: column `{head}` is "
                         f"{short_repr(cells[i])}, below absolute zero")
    log.debug("%s: read %d values of %s [%s]", path, len(values), quantity, unit)
    return values
