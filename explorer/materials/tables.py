"""Measured curves from CSV tables: electrode potentials, full-cell OCV, entropic coefficients.

A cell file can name tables instead of (or besides) the built-in material curves of
:mod:`explorer.materials.ocp` (the keys are listed in :mod:`explorer.cell.schema`). A table is
UTF-8 CSV: ``#`` lines are comments, the first other line is the header, one row per point.
Columns (names case-blind, units as suffixes, case as written):

=======================  ====================================================================
``stoichiometry``        lithium fraction of one electrode, 0..1 (per-electrode tables)
``soc``, ``soc_pct``     state of charge of the cell, 0..1 or 0..100 (full-cell tables)
``ocp_V``, ``ocp_mV``    electrode potential vs Li/Li+ (per-electrode)
``ocv_V``, ``ocv_mV``    full-cell open-circuit voltage
``dUdT_V_K``,            entropic coefficient dU/dT at the same points
``dUdT_mV_K``
=======================  ====================================================================

Rows may run either way along the first column. The curves are interpolated by monotone
piecewise cubics (:class:`scipy.interpolate.PchipInterpolator`: no overshoot between points,
so a monotone table gives a monotone curve). Beyond the table a potential continues along
its end slope and a dU/dT holds its end value.

Checks (each failure is a :class:`TableError` naming the file, line, column and value): the
first column strictly monotone and inside its range; a potential that falls as the electrode
fills (an OCV that rises with SOC), ties allowed; at least :data:`MIN_ROWS` rows, no gap wider
than :data:`MAX_GAP`; the table covering the cell's window (within :data:`COVER_TOLERANCE`);
dU/dT within +-:data:`DUDT_LIMIT_V_K` (measured values are a few tenths of a mV/K; a larger
one is almost always a unit slip).
"""

from __future__ import annotations

import csv
import hashlib
from bisect import bisect_right
from dataclasses import dataclass

import numpy as np

from explorer.csvdata import check_path, read_text
from explorer.validators import InputError, short_repr

__all__ = ["TabulatedCurve", "CurveTable", "TableError", "read_table", "check_table",
           "MIN_ROWS", "MAX_GAP", "COVER_TOLERANCE", "DUDT_LIMIT_V_K"]

#: fewest rows: a potential (its shape matters between points) and a dU/dT table
MIN_ROWS = {"potential": 8, "entropic": 5}
#: widest allowed step of the first column between neighbouring rows (stoichiometry or SOC)
MAX_GAP = {"potential": 0.1, "entropic": 0.25}
#: how far inside the cell's window a table may start or end (in the first column's units)
COVER_TOLERANCE = {"potential": 0.02, "entropic": 0.1}
#: largest |dU/dT| accepted, V/K
DUDT_LIMIT_V_K = 3e-3

_X_COLUMNS = {"stoichiometry": ("stoichiometry", 1.0), "soc": ("soc", 1.0),
              "soc_pct": ("soc", 0.01)}
_Y_COLUMNS = {"ocp_v": ("ocp", 1.0), "ocp_mv": ("ocp", 1e-3), "ocv_v": ("ocv", 1.0),
              "ocv_mv": ("ocv", 1e-3), "dudt_v_k": ("dudt", 1.0), "dudt_mv_k": ("dudt", 1e-3)}
_COLUMN_NAMES = {"stoichiometry": "stoichiometry", "soc": "soc or soc_pct",
                 "ocp": "ocp_V or ocp_mV", "ocv": "ocv_V or ocv_mV",
                 "dudt": "dUdT_V_K or dUdT_mV_K"}


class TableError(InputError):
    """A curve table that cannot be used; names the file, line, column and value."""

    def __init__(self, file, line, column, value, expected: str):
        self.file, self.line, self.column, self.value = str(file), line, column, value
        self.expected = expected
        where = f"{self.file}, line {line}" if line else self.file
        col = f", column `{column}`" if column else ""
        got = "" if value is None else f", got {short_repr(value)}"
        super().__init__(f"{where}{col}: expected {expected}{got}")


class TabulatedCurve:
    """``y(x)`` through a table by monotone piecewise-cubic (PCHIP) interpolation.

    Parameters
    ----------
    x, y : array_like
        Strictly increasing ``x``; ``y`` at those points (SI).
    beyond : {"linear", "hold"}
        Past the ends, continue along the end slope (potentials) or hold the end value
        (dU/dT, where extrapolating a measured trend is not safe).

    Examples
    --------
    >>> f = TabulatedCurve([0.0, 0.5, 1.0], [1.0, 0.5, 0.0])
    >>> float(f(0.25)), float(f(1.5))
    (0.75, -0.5)
    """

    def __init__(self, x, y, *, beyond: str = "linear"):
        self.x = np.asarray(x, dtype=float).copy()
        self.y = np.asarray(y, dtype=float).copy()
        if beyond not in ("linear", "hold"):
            raise InputError(f"`beyond`: expected 'linear' or 'hold', got {beyond!r}")
        self.beyond = beyond
        # imported here: scipy.interpolate loads scipy.optimize and .spatial (~0.2 s)
        from scipy.interpolate import PchipInterpolator

        pp = PchipInterpolator(self.x, self.y, extrapolate=False)
        slope = pp.derivative()(self.x[[0, -1]])
        self._slopes = (float(slope[0]), float(slope[1])) if beyond == "linear" else (0.0, 0.0)
        # the cubic pieces, evaluated here directly (Horner): a scipy call costs several times
        # more for the scalar calls the rods make every step
        self._c = [np.ascontiguousarray(row) for row in pp.c]
        self._last = self.x.size - 2
        self._lists = (self.x.tolist(), *(row.tolist() for row in self._c))

    def __call__(self, x):
        if isinstance(x, float | int) or (isinstance(x, np.ndarray | np.generic)
                                          and np.ndim(x) == 0):
            return np.float64(self._scalar(float(x)))
        x = np.asarray(x, dtype=float)
        lo, hi = self.x[0], self.x[-1]
        xc = np.minimum(np.maximum(x, lo), hi)
        i = np.minimum(np.searchsorted(self.x, xc, side="right") - 1, self._last)
        t = xc - self.x[i]
        c3, c2, c1, c0 = self._c
        y = ((c3[i] * t + c2[i]) * t + c1[i]) * t + c0[i]
        if self.beyond == "linear":
            d0, d1 = self._slopes
            y = y + np.minimum(x - lo, 0.0) * d0 + np.maximum(x - hi, 0.0) * d1
        return y[()] if y.ndim == 0 else y

    def _scalar(self, v: float) -> float:
        """The same as ``__call__`` for one Python float (no array overhead)."""
        xs, c3, c2, c1, c0 = self._lists
        lo, hi = xs[0], xs[-1]
        xc = lo if v < lo else hi if v > hi else v
        i = min(bisect_right(xs, xc) - 1, self._last)
        t = xc - xs[i]
        y = ((c3[i] * t + c2[i]) * t + c1[i]) * t + c0[i]
        if v < lo:
            y += (v - lo) * self._slopes[0]
        elif v > hi:
            y += (v - hi) * self._slopes[1]
        return y

    def __eq__(self, other):
        return (isinstance(other, TabulatedCurve) and self.beyond == other.beyond
                and np.array_equal(self.x, other.x) and np.array_equal(self.y, other.y))

    def __hash__(self):
        return hash((self.beyond, self.x.tobytes(), self.y.tobytes()))

    def __repr__(self) -> str:
        return (f"<TabulatedCurve {self.x.size} points, x {self.x[0]:g}..{self.x[-1]:g}, "
                f"beyond: {self.beyond}>")


@dataclass(frozen=True, eq=False)
class CurveTable:
    """A table as read: the first column (increasing), the named curves in SI, file lines."""

    path: str
    x_name: str  # "stoichiometry" or "soc"
    x_header: str  # the first column's header as written ("soc_pct" means percent)
    x: np.ndarray
    columns: dict  # "ocp" / "ocv" / "dudt" -> values in V or V/K, rows in x order
    headers: dict  # the same keys -> the column header as written
    lines: np.ndarray  # file line of each row, in x order
    sha256: str

    def line_of(self, i: int) -> int:
        return int(self.lines[i])


def read_table(path, x_name: str, wanted: tuple, optional: tuple = ()) -> CurveTable:
    """Read a curve table; rows sorted to increasing first column.

    Parameters
    ----------
    path : str or Path
    x_name : {"stoichiometry", "soc"}
        The first column's quantity (``soc`` also accepts ``soc_pct``).
    wanted, optional : tuple of {"ocp", "ocv", "dudt"}
        Curves that must be / may be in the file.

    Raises
    ------
    TableError
        Header without the wanted columns, a cell that is not a finite number, a first
        column that is not strictly monotone or outside 0..1, too few rows.
    """
    path = check_path(path, "curve table")
    text = read_text(path, "curve table")
    numbered = [(n, ln) for n, ln in enumerate(text.splitlines(), start=1)
                if ln.strip() and not ln.lstrip().startswith("#")]
    if not numbered:
        raise TableError(path, None, None, None, "a header line and rows of numbers")
    rows = list(csv.reader(ln for _, ln in numbered))
    head_line, header = numbered[0][0], [h.strip() for h in rows[0]]
    cols = _header_columns(path, head_line, header, x_name, wanted + optional)
    for need in (x_name, *wanted):
        if need not in cols:
            raise TableError(path, head_line, None, ",".join(header),
                             f"a column {_COLUMN_NAMES[need]} in the header")
    data = {}
    for q, (j, head, scale) in cols.items():
        data[q] = _numbers(path, numbered[1:], rows[1:], j, head) * scale
    lines = np.array([n for n, _ in numbered[1:]])
    x = data.pop(x_name)
    x_head = cols[x_name][1]
    if x.size >= 2 and x[0] > x[-1]:  # rows may run either way; store increasing
        x, lines = x[::-1], lines[::-1]
        data = {k: v[::-1] for k, v in data.items()}
    steps = np.diff(x)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        raise TableError(path, int(lines[i]), x_head, _shown(x_head, x[i]),
                         f"values that only rise (or only fall) down the column, without "
                         f"repeats; the row before has {_shown(x_head, x[i - 1])}")
    bad = (x < 0) | (x > 1)
    if bad.any():
        i = int(np.argmax(bad))
        span = "0 to 100" if x_head.lower() == "soc_pct" else "0 to 1"
        raise TableError(path, int(lines[i]), x_head, _shown(x_head, x[i]),
                         f"a value from {span}")
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    headers = {q: cols[q][1] for q in data}
    return CurveTable(str(path), x_name, x_head, x, data, headers, lines, sha)


def _shown(head: str, value: float):
    """A first-column value as the file writes it (percent for soc_pct)."""
    return float(f"{value * (100.0 if head.lower() == 'soc_pct' else 1.0):.6g}")


def _header_columns(path, line, header, x_name, quantities) -> dict:
    """quantity -> (column index, header as written, scale to SI) for the columns we read."""
    found = {}
    for j, head in enumerate(header):
        key = head.lower()
        if key in _X_COLUMNS and _X_COLUMNS[key][0] == x_name:
            q, scale = _X_COLUMNS[key]
        elif key in _Y_COLUMNS and _Y_COLUMNS[key][0] in quantities:
            q, scale = _Y_COLUMNS[key]
            unit = head.split("_", 1)[1]
            if unit not in ("V", "mV", "V_K", "mV_K"):  # units are case-sensitive
                raise TableError(path, line, head, head,
                                 f"the unit written as V, mV, V_K or mV_K ({_COLUMN_NAMES[q]})")
        else:
            continue
        if q in found:
            raise TableError(path, line, head, ",".join(header),
                             f"one {_COLUMN_NAMES[q]} column (also `{found[q][1]}`)")
        found[q] = (j, head, scale)
    return found


def _numbers(path, numbered, rows, j, head) -> np.ndarray:
    out = np.empty(len(rows))
    for i, ((line, _), row) in enumerate(zip(numbered, rows)):
        cell = row[j].strip() if j < len(row) else None
        try:
            out[i] = float(cell)
        except (TypeError, ValueError):
            raise TableError(path, line, head, "(missing)" if cell is None else cell,
                             "a number") from None
        if not np.isfinite(out[i]):
            raise TableError(path, line, head, cell, "a finite number")
    return out


# ---- checks against the cell's window ------------------------------------------------------


def check_table(table: CurveTable, kind: str, window: tuple[float, float],
                falling: bool | None = None) -> None:
    """Check a table read by :func:`read_table` for its use.

    ``kind`` is "potential" (the ocp/ocv column) or "entropic" (the dudt column); ``window``
    the range of the first column the cell uses; ``falling`` True when the potential must
    fall along the first column (electrode potential vs stoichiometry), False when it must
    rise (OCV vs SOC).
    """
    x, path, head_x = table.x, table.path, table.x_header
    q = "dudt" if kind == "entropic" else next(k for k in ("ocp", "ocv") if k in table.columns)
    y, head = table.columns[q], table.headers[q]
    if x.size < MIN_ROWS[kind]:
        raise TableError(path, None, head_x, f"{x.size} rows",
                         f"at least {MIN_ROWS[kind]} rows for a {'dU/dT' if q == 'dudt' else q} "
                         "table (too sparse to follow the curve)")
    gaps = np.diff(x)
    if gaps.max() > MAX_GAP[kind] * (1 + 1e-9):
        i = int(np.argmax(gaps))
        raise TableError(path, table.line_of(i + 1), head_x, _shown(head_x, x[i + 1]),
                         f"rows no further apart than {_shown(head_x, MAX_GAP[kind])} in "
                         f"{head_x} (too sparse: the row on line {table.line_of(i)} has "
                         f"{_shown(head_x, x[i])})")
    lo, hi = sorted(window)
    tol = COVER_TOLERANCE[kind]
    if x[0] > lo + tol or x[-1] < hi - tol:
        i = 0 if x[0] > lo + tol else x.size - 1
        raise TableError(path, table.line_of(i), head_x, _shown(head_x, x[i]),
                         f"a table covering the cell's window, {head_x} "
                         f"{_shown(head_x, lo)} to {_shown(head_x, hi)} (within "
                         f"{_shown(head_x, tol)}); this one runs {_shown(head_x, x[0])} to "
                         f"{_shown(head_x, x[-1])}")
    if kind == "entropic":
        bad = np.abs(y) > DUDT_LIMIT_V_K
        if bad.any():
            i = int(np.argmax(bad))
            scale = 1e3 if head.lower().endswith("mv_k") else 1.0
            raise TableError(path, table.line_of(i), head, float(f"{y[i] * scale:.6g}"),
                             f"an entropic coefficient within +-{DUDT_LIMIT_V_K * 1e3:g} mV/K "
                             "(measured values are a few tenths of a mV/K; check the column's "
                             "unit)")
        return
    scale = 1e3 if head.lower().endswith("mv") else 1.0
    bad = (y <= 0) | (y > 6.0)
    if bad.any():
        i = int(np.argmax(bad))
        raise TableError(path, table.line_of(i), head, float(f"{y[i] * scale:.6g}"),
                         "a potential between 0 and 6 V")
    steps = np.diff(y)
    wrong = steps > 0 if falling else steps < 0
    if wrong.any():
        i = int(np.argmax(wrong)) + 1
        how = ("falling (or level) as the stoichiometry rises: an electrode's potential falls "
               "as it fills with lithium" if falling else
               "rising (or level) as the SOC rises")
        raise TableError(path, table.line_of(i), head, float(f"{y[i] * scale:.6g}"),
                         f"a potential {how}; the row before ({_shown(head_x, x[i - 1])}) has "
                         f"{y[i - 1] * scale:.6g}; smooth the measured curve")
