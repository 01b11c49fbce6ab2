"""Liquid coolant properties from CoolProp: water and glycol-water mixtures.

Names are our own short forms:

* ``"water"`` -- pure water (CoolProp's reference equation of state, ``'Water'``),
* ``"eg<NN>"`` -- ethylene glycol in water, ``NN`` percent **by mass**
  (CoolProp incompressible ``'INCOMP::MEG-NN%'``),
* ``"pg<NN>"`` -- propylene glycol in water, ``NN`` percent by mass
  (``'INCOMP::MPG-NN%'``).

CoolProp's MEG and MPG mixtures are defined on a mass-fraction basis (its
``AbstractState`` refuses volume fractions for them), with 0-60 % glycol; the
correlations come from Melinder, *Properties of Secondary Working Fluids for
Indirect Systems* (IIR, 2010). Long aliases such as ``"ethylene_glycol_50"``
are accepted too.

Properties are evaluated at a fixed system pressure of 1 atm (the coolant
loop's static pressure hardly matters for a liquid) and cached on the
temperature rounded to 0.01 K, so repeated calls are cheap. A temperature
outside the liquid range (below the freezing point or the library's fit, above
boiling or the fit's top) raises :class:`explorer.validators.InputError` --
never an extrapolation.

Property tables
    Importing CoolProp costs about two seconds (it loads every fluid), so a
    coolant is tabulated once: CoolProp evaluates its four properties at
    every 0.1 degC of its liquid range at 1 atm, and :meth:`Coolant.properties`
    interpolates the table with a cubic through the four nearest points
    (within 1e-6 of CoolProp anywhere in the range; checked in
    ``tests/test_coolant_cache.py``). The table is kept in memory and as a
    JSON file in the user's cache folder, keyed by the coolant, the CoolProp
    version and :data:`TABLE_FORMAT`, so later processes (and sweep workers)
    never import CoolProp. ``EXPLORER_CACHE_DIR`` relocates the folder; set
    it to ``off`` (or ``0``, ``none``, empty) to keep the tables in memory
    only. A damaged or foreign file is ignored and rewritten; a folder that
    cannot be written is skipped silently.

Examples
--------
>>> water = get_coolant("water")
>>> round(water.properties(25.0).density_kg_m3, 1)
997.0
"""

from __future__ import annotations

import json
import logging
import math
import os
import re
import sys
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from explorer.validators import InputError, check_finite

__all__ = ["Coolant", "CoolantProperties", "get_coolant", "COOLANT_NAMES", "PRESSURE_PA",
           "CACHE_ENV", "TABLE_FORMAT", "user_cache_folder", "warm"]

log = logging.getLogger(__name__)

PRESSURE_PA = 101325.0  # property evaluation pressure (1 atm)
_KELVIN = 273.15
_MAX_GLYCOL_PERCENT = 60  # top of CoolProp's MEG/MPG fits
# Stay this far inside the library's temperature window (K): CoolProp's water
# would happily return vapour above boiling, and the incompressible fits end at
# their freezing curve.
_EDGE_K = 0.05
# Property tables: nodes every 1/_NODES_PER_C degC; bump TABLE_FORMAT when the file layout,
# the node spacing or the evaluation pressure changes.
TABLE_FORMAT = 1
_NODES_PER_C = 10
_COLUMNS = ("density_kg_m3", "specific_heat_J_kgK", "viscosity_Pa_s", "conductivity_W_mK")
_CP_KEYS = ("D", "C", "V", "L")  # CoolProp outputs, in the order of _COLUMNS
CACHE_ENV = "EXPLORER_CACHE_DIR"  # cache folder; "off", "0", "none" or empty: no disk cache
_CACHE_OFF = ("", "0", "off", "none", "false", "no")

COOLANT_NAMES = "'water', 'eg<NN>' (ethylene glycol) or 'pg<NN>' (propylene glycol), NN = 1..60 mass percent, e.g. 'eg50', 'pg30'"

_ALIASES = {
    "ethylene_glycol": "eg",
    "ethyleneglycol": "eg",
    "meg": "eg",
    "eg": "eg",
    "propylene_glycol": "pg",
    "propyleneglycol": "pg",
    "mpg": "pg",
    "pg": "pg",
}
_CP_NAMES = {"eg": "MEG", "pg": "MPG"}
_LONG = {"eg": "ethylene glycol", "pg": "propylene glycol"}


@dataclass(frozen=True)
class CoolantProperties:
    """Thermophysical properties of a coolant at one temperature (SI)."""

    temperature_C: float
    density_kg_m3: float
    specific_heat_J_kgK: float
    viscosity_Pa_s: float  # dynamic viscosity
    conductivity_W_mK: float

    @property
    def prandtl(self) -> float:
        return self.viscosity_Pa_s * self.specific_heat_J_kgK / self.conductivity_W_mK

    @property
    def kinematic_viscosity_m2_s(self) -> float:
        return self.viscosity_Pa_s / self.density_kg_m3


@dataclass(frozen=True)
class Coolant:
    """A named coolant and its valid liquid temperature window.

    Attributes
    ----------
    name : str
        Our canonical short name (``"water"``, ``"eg50"``, ...).
    fluid : str
        The CoolProp fluid string.
    glycol_mass_fraction : float
        0 for water.
    min_C, max_C : float
        Valid liquid range at 1 atm (freezing point / fit limits and boiling /
        fit top, with a small margin).
    description : str
        Plain words for reports.
    """

    name: str
    fluid: str
    glycol_mass_fraction: float
    min_C: float
    max_C: float
    description: str

    def properties(self, temperature_C: float, *, what: str = "coolant temperature") -> CoolantProperties:
        """Properties at ``temperature_C`` (degC); out of range raises InputError.

        ``what`` names the temperature in the error (e.g. ``"inlet_C"``).
        """
        t = check_finite(what, temperature_C, "degC")
        if not (self.min_C <= t <= self.max_C):
            raise InputError(
                f"`{what}`: expected a temperature between {self.min_C:.1f} and {self.max_C:.1f} degC "
                f"for coolant {self.name!r} ({self.description}: liquid range of the property data at 1 atm), "
                f"got {temperature_C!r}"
            )
        return _properties(self.fluid, round(t + _KELVIN, 2))


@lru_cache(maxsize=4096)
def _properties(fluid: str, temperature_K: float) -> CoolantProperties:
    t = temperature_K - _KELVIN
    return CoolantProperties(t, *_table_of_fluid(fluid).at(t))


# --------------------------------------------------------------------------- property tables


@dataclass(frozen=True)
class _Table:
    """A coolant's properties at the nodes ``first_node / _NODES_PER_C + i / _NODES_PER_C`` degC."""

    name: str
    fluid: str
    min_C: float
    max_C: float
    first_node: int
    columns: tuple  # one tuple of floats per entry of _COLUMNS

    def at(self, t_C: float) -> tuple:
        """The four properties at ``t_C``: a cubic through the four nearest nodes.

        Near the ends of the range (less than one node spacing) the outermost
        four nodes are used.
        """
        x = t_C * _NODES_PER_C - self.first_node
        n = len(self.columns[0])
        i = min(max(math.floor(x) - 1, 0), n - 4)
        u = x - i
        # Lagrange weights of the nodes i..i+3 at u (exact 0/1 on a node)
        w = (-(u - 1.0) * (u - 2.0) * (u - 3.0) / 6.0, u * (u - 2.0) * (u - 3.0) / 2.0,
             -u * (u - 1.0) * (u - 3.0) / 2.0, u * (u - 1.0) * (u - 2.0) / 6.0)
        return tuple(w[0] * c[i] + w[1] * c[i + 1] + w[2] * c[i + 2] + w[3] * c[i + 3]
                     for c in self.columns)


_TABLES: dict[str, _Table] = {}  # fluid string -> table, for this process


def _table_of_fluid(fluid: str) -> _Table:
    table = _TABLES.get(fluid)
    if table is None:
        m = re.fullmatch(r"INCOMP::(MEG|MPG)-(\d+)%", fluid)
        if fluid == "Water":
            table = _table("water", 0)
        elif m:
            table = _table({"MEG": "eg", "MPG": "pg"}[m.group(1)], int(m.group(2)))
        else:
            raise InputError(f"`coolant`: unknown property-library fluid {fluid!r}; expected one "
                             f"of {COOLANT_NAMES}")
    return table


def _table(kind: str, percent: int) -> _Table:
    """The table of a coolant: from this process, else the disk cache, else CoolProp."""
    fluid = "Water" if kind == "water" else f"INCOMP::{_CP_NAMES[kind]}-{percent}%"
    table = _TABLES.get(fluid)
    if table is not None:
        return table
    name = "water" if kind == "water" else f"{kind}{percent}"
    path = _cache_path(name)
    table = _read_table(path, name, fluid) if path is not None else None
    if table is None:
        table = _tabulate(name, fluid, kind)
        if path is not None:
            _write_table(path, table)
    _TABLES[fluid] = table
    return table


def _tabulate(name: str, fluid: str, kind: str) -> _Table:
    """Evaluate the coolant's liquid range and its properties at every node with CoolProp."""
    import numpy as np
    from CoolProp.CoolProp import PropsSI

    if kind == "water":
        # Triple point to boiling at 1 atm.
        lo = PropsSI("Tmin", "T", 300.0, "P", PRESSURE_PA, "Water")
        hi = PropsSI("T", "P", PRESSURE_PA, "Q", 0.0, "Water")
    else:
        t_min = PropsSI("Tmin", "T", 300.0, "P", PRESSURE_PA, fluid)
        t_freeze = PropsSI("T_freeze", "T", 300.0, "P", PRESSURE_PA, fluid)
        lo = max(t_min, t_freeze)
        hi = PropsSI("Tmax", "T", 300.0, "P", PRESSURE_PA, fluid)
    min_C, max_C = lo - _KELVIN + _EDGE_K, hi - _KELVIN - _EDGE_K
    first = math.ceil(min_C * _NODES_PER_C)
    nodes_C = np.arange(first, math.floor(max_C * _NODES_PER_C) + 1) / _NODES_PER_C
    temperature_K = nodes_C + _KELVIN
    pressure = np.full_like(temperature_K, PRESSURE_PA)
    columns = tuple(tuple(float(v) for v in PropsSI(q, "T", temperature_K, "P", pressure, fluid))
                    for q in _CP_KEYS)
    return _Table(name, fluid, float(min_C), float(max_C), first, columns)


@lru_cache(maxsize=1)
def _coolprop_version() -> str:
    """CoolProp's version, read from its installed metadata (importing it costs seconds)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("CoolProp")
    except PackageNotFoundError:  # pragma: no cover - a dependency; e.g. a frozen install
        return "unknown"


def user_cache_folder() -> Path | None:
    """The tool's cache folder, or None when ``EXPLORER_CACHE_DIR`` turns the disk cache off.

    ``EXPLORER_CACHE_DIR`` names the folder itself; otherwise the platform's
    user cache folder (``$XDG_CACHE_HOME`` or ``~/.cache`` on Linux,
    ``~/Library/Caches`` on macOS, ``%LOCALAPPDATA%`` on Windows) with a
    ``pouch-thermal-explorer`` folder in it.
    """
    env = os.environ.get(CACHE_ENV)
    if env is not None:
        return None if env.strip().lower() in _CACHE_OFF else Path(env).expanduser()
    home = Path.home()
    if sys.platform == "win32":
        base = Path(os.environ.get("LOCALAPPDATA") or home / "AppData" / "Local")
    elif sys.platform == "darwin":
        base = home / "Library" / "Caches"
    else:
        base = Path(os.environ.get("XDG_CACHE_HOME") or home / ".cache")
    return base / "pouch-thermal-explorer"


def _cache_path(name: str) -> Path | None:
    folder = user_cache_folder()
    if folder is None:
        return None
    version = re.sub(r"[^A-Za-z0-9._-]", "_", _coolprop_version())
    return folder / "coolant" / f"{name}-coolprop-{version}-format-{TABLE_FORMAT}.json"


def _read_table(path: Path, name: str, fluid: str) -> _Table | None:
    """The table stored at ``path``, or None when there is none or it is not sound."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (OSError, ValueError) as exc:
        log.info("coolant table %s unreadable (%s); rebuilt from CoolProp", path, exc)
        return None
    problem = _table_problem(data, name, fluid)
    if problem:
        log.info("coolant table %s %s; rebuilt from CoolProp", path, problem)
        return None
    columns = tuple(tuple(float(v) for v in data[c]) for c in _COLUMNS)
    return _Table(name, fluid, float(data["min_C"]), float(data["max_C"]),
                  int(data["first_node"]), columns)


def _table_problem(data, name: str, fluid: str) -> str:
    """Why ``data`` (a parsed table file) is not the sound table of the coolant ('' if it is)."""
    if not isinstance(data, dict):
        return "is not a table"
    expected = {"format": TABLE_FORMAT, "name": name, "fluid": fluid, "pressure_Pa": PRESSURE_PA,
                "nodes_per_C": _NODES_PER_C, "coolprop": _coolprop_version()}
    for key, value in expected.items():
        if data.get(key) != value:
            return f"has {key} {data.get(key)!r}, not {value!r}"
    try:
        lo, hi, first = float(data["min_C"]), float(data["max_C"]), data["first_node"]
        n = math.floor(hi * _NODES_PER_C) - first + 1
        if not (math.isfinite(lo) and math.isfinite(hi) and isinstance(first, int)
                and first == math.ceil(lo * _NODES_PER_C) and n >= 4):
            return "has a bad temperature range"
        for c in _COLUMNS:
            col = data[c]
            if not (isinstance(col, list) and len(col) == n
                    and all(isinstance(v, float) and math.isfinite(v) and v > 0 for v in col)):
                return f"has a bad column {c!r}"
    except (KeyError, TypeError, ValueError, OverflowError):
        return "is incomplete"
    return ""


def _write_table(path: Path, table: _Table) -> None:
    """Store ``table`` at ``path`` atomically; a folder that cannot be written is skipped."""
    from explorer.fileio import atomic_write_text, remove_stale_temp

    data = {"format": TABLE_FORMAT, "name": table.name, "fluid": table.fluid,
            "pressure_Pa": PRESSURE_PA, "nodes_per_C": _NODES_PER_C,
            "coolprop": _coolprop_version(), "source": "CoolProp PropsSI at 1 atm",
            "min_C": table.min_C, "max_C": table.max_C, "first_node": table.first_node,
            **dict(zip(_COLUMNS, (list(c) for c in table.columns)))}
    try:
        atomic_write_text(path, json.dumps(data), parents=True)
        remove_stale_temp(path.parent)
    except (InputError, OSError) as exc:  # OutputError is an InputError
        log.debug("coolant table not cached at %s (%s)", path, exc)


def warm(names=("water",)) -> None:
    """Load the property tables of the coolants ``names`` (e.g. in a sweep worker at start)."""
    for name in names:
        _table_of_fluid(get_coolant(name).fluid)


def _parse(name) -> tuple[str, int]:
    """('eg', 50) style key from a user name; ('water', 0) for water."""
    if not isinstance(name, str):
        raise InputError(f"`coolant`: expected one of {COOLANT_NAMES}, got {name!r}")
    key = name.strip().lower().replace("-", "_").replace(" ", "_")
    if key in ("water", "h2o"):
        return "water", 0
    m = re.fullmatch(r"([a-z_]+?)_?(\d+(?:\.\d+)?)_?%?", key)
    if m and m.group(1).rstrip("_") in _ALIASES:
        pct = float(m.group(2))
        if pct != int(pct) or not 1 <= pct <= _MAX_GLYCOL_PERCENT:
            raise InputError(
                f"`coolant`: glycol content must be a whole mass percent from 1 to "
                f"{_MAX_GLYCOL_PERCENT} (range of the property data); expected one of "
                f"{COOLANT_NAMES}, got {name!r}"
            )
        return _ALIASES[m.group(1).rstrip("_")], int(pct)
    raise InputError(f"`coolant`: expected one of {COOLANT_NAMES}, got {name!r}")


@lru_cache(maxsize=64)
def _build(kind: str, percent: int) -> Coolant:
    table = _table(kind, percent)
    if kind == "water":
        return Coolant("water", table.fluid, 0.0, table.min_C, table.max_C, "water")
    return Coolant(f"{kind}{percent}", table.fluid, percent / 100.0, table.min_C, table.max_C,
                   f"{percent} % (mass) {_LONG[kind]} in water")


def get_coolant(name) -> Coolant:
    """The :class:`Coolant` for a user name such as ``"water"``, ``"eg50"`` or ``"pg30"``.

    Raises
    ------
    InputError
        Unknown name (the message lists the valid forms) or glycol content
        outside 1-60 % by mass.
    """
    if isinstance(name, Coolant):
        return name
    return _build(*_parse(name))
