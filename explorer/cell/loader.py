"""Read a cell TOML file, check every field, and build the :class:`~explorer.cell.model.Cell`.

All problems found in a file are collected and raised together as one
:class:`~explorer.validators.CellFileError`, one line per problem, each naming
the file, the field path, the value and what was expected. The file format is
described in :mod:`explorer.cell.schema`.
"""

from __future__ import annotations

import difflib
import hashlib
import logging
import math
import tomllib
from pathlib import Path

from explorer.cell import schema
from explorer.cell.curves import resolve_curves, tables_sha256
from explorer.cell.derived import compute_derived, electrode_capacity_Ah, layers_thickness_m
from explorer.cell.model import (
    Cell,
    Collector,
    Electrode,
    Electrolyte,
    Geometry,
    Separator,
    Tab,
    ThermalOverrides,
)
from explorer.materials import TABLES
from explorer.units import UnitError, parse
from explorer.validators import MISSING, CellFileError, Problem

__all__ = ["load_cell", "cell_from_text", "cell_from_dict", "list_demo_cells", "DEMO_DIR", "CellFileNotFoundError",
           "WINDOW_MISMATCH_TOLERANCE", "STATED_TOLERANCE"]

log = logging.getLogger(__name__)

DEMO_DIR = Path(__file__).resolve().parents[2] / "demo_cells"
#: largest allowed relative difference between the two electrodes' window capacities
WINDOW_MISMATCH_TOLERANCE = 0.05
#: largest allowed relative difference of the stated capacity and mass from what the layers give
STATED_TOLERANCE = 0.20


class CellFileNotFoundError(CellFileError, FileNotFoundError):
    """The cell file does not exist (also a :class:`FileNotFoundError`)."""


def list_demo_cells() -> dict[str, Path]:
    """Bundled demo cells: name (file stem) -> path, sorted by name."""
    return {p.stem: p for p in sorted(DEMO_DIR.glob("*.toml"))}


def _is_file(p: Path) -> bool:
    """``Path.is_file`` that answers False for names the OS refuses (too long, NUL byte)."""
    try:
        return p.is_file()
    except (OSError, ValueError):
        return False


def _resolve(path) -> Path:
    if not isinstance(path, str | Path) or not str(path).strip():
        raise CellFileError(
            [Problem("", "(file)", path, "a cell file path (str or Path) or a demo cell name, "
                     f"one of {', '.join(map(repr, list_demo_cells()))}")], file=repr(path))
    p = Path(path)
    if _is_file(p):
        return p
    demos = list_demo_cells()
    if str(path) in demos:
        return demos[str(path)]
    if p.suffix == "" and _is_file(DEMO_DIR / f"{p.name}.toml") and len(p.parts) == 1:
        return DEMO_DIR / f"{p.name}.toml"
    names = ", ".join(repr(n) for n in demos) or "none found"
    close = difflib.get_close_matches(p.stem, list(demos), n=1)
    if close:
        names += f"; did you mean {close[0]!r}?"
    raise CellFileNotFoundError(
        [Problem(str(path), "(file)", str(path),
                 f"an existing cell file (.toml) or a demo cell name ({names})")],
        file=str(path),
    )


class _Reader:
    """Walks the parsed TOML, converting values and collecting problems."""

    def __init__(self, file: str):
        self.file = file
        self.problems: list[Problem] = []

    def add(self, field: str, value, expected: str) -> None:
        self.problems.append(Problem(self.file, field, value, expected))

    def unknown_keys(self, data: dict, known, prefix: str) -> None:
        for key in data:
            if key not in known:
                close = difflib.get_close_matches(key, list(known), n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                self.add(f"{prefix}{key}", data[key],
                         f"one of the known keys {', '.join(known)}{hint}")

    def table(self, data: dict, name: str, required: bool = True) -> dict | None:
        sec = data.get(name, MISSING)
        if sec is MISSING:
            if required:
                self.add(name, MISSING, f"a [{name}] table")
            return None
        if not isinstance(sec, dict):
            self.add(name, sec, f"a [{name}] table")
            return None
        return sec

    def fields(self, sec: dict | None, fields, prefix: str) -> dict:
        """Read ``fields`` of table ``sec``; returns attr -> value (None where bad)."""
        out = {}
        if sec is None:
            return out
        self.unknown_keys(sec, [f.key for f in fields], prefix)
        for f in fields:
            out[f.attr] = self.value(sec, f, prefix)
        return out

    def value(self, sec: dict, f: schema.Field, prefix: str):
        path = f"{prefix}{f.key}"
        raw = sec.get(f.key, MISSING)
        if raw is MISSING:
            if f.required:
                self.add(path, MISSING, _describe(f))
            return f.default
        if f.kind == "text":
            if not isinstance(raw, str):
                self.add(path, raw, "text in quotes")
                return None
            return raw
        if f.kind == "choice":
            if not isinstance(raw, str) or raw not in f.choices:
                self.add(path, raw, f"one of {', '.join(map(repr, f.choices))}")
                return None
            return raw
        if f.kind == "key":
            table = TABLES[f.table]
            if not isinstance(raw, str) or raw not in table:
                self.add(path, raw, _key_list(f.table))
                return None
            return raw
        if f.kind == "integer":
            if isinstance(raw, bool) or not isinstance(raw, int):
                self.add(path, raw, "a whole number")
                return None
            return self.bounded(path, raw, f)
        # quantity or number
        if f.kind == "quantity":
            if not isinstance(raw, str):
                self.add(path, raw, f"a string with a unit, e.g. {f.example!r}")
                return None
            try:
                v = parse(raw, f.unit)
            except UnitError as exc:
                self.add(path, raw, exc.expected)
                return None
        else:
            if isinstance(raw, bool):
                self.add(path, raw, "a number")
                return None
            if isinstance(raw, str):
                try:
                    v = parse(raw, "")
                except UnitError as exc:
                    self.add(path, raw, f"a plain number ({exc.expected})")
                    return None
            elif isinstance(raw, int | float):
                v = float(raw)
            else:
                self.add(path, raw, "a number")
                return None
        return self.bounded(path, raw, f, v)

    def bounded(self, path, raw, f: schema.Field, v=None):
        v = raw if v is None else v
        if not math.isfinite(v):
            self.add(path, raw, "a finite value")
            return None
        unit = f" {f.unit}" if f.unit and f.unit != "degC" else (" degC" if f.unit else "")
        if f.check == "positive" and not v > 0:
            self.add(path, raw, f"a value > 0{unit}")
            return None
        if f.check == "nonnegative" and v < 0:
            self.add(path, raw, f"a value >= 0{unit}")
            return None
        if f.check == "fraction" and not 0 < v < 1:
            self.add(path, raw, "a fraction strictly between 0 and 1")
            return None
        if f.check == "range" and not f.low <= v <= f.high:
            self.add(path, raw, f"a value between {f.low:g} and {f.high:g}{unit}")
            return None
        band = schema.plausible_band(path)
        if band is not None and not band[0] <= v <= band[1]:
            self.add(path, raw, f"a value between {band[0]:g} and {band[1]:g}{unit} (no real "
                     "pouch cell lies outside; check the number and its unit)")
            return None
        return v


def _describe(f: schema.Field) -> str:
    if f.kind == "quantity":
        return f"a value with a unit, e.g. {f.key} = {f.example!r}"
    if f.kind == "key":
        return _key_list(f.table)
    if f.kind == "choice":
        return f"one of {', '.join(map(repr, f.choices))}"
    if f.kind == "integer":
        return "a whole number"
    if f.kind == "text":
        return "text in quotes"
    return "a number"


def _key_list(table: str) -> str:
    return (f"a key of explorer.materials.{table}, one of "
            f"{', '.join(map(repr, TABLES[table]))}")


def load_cell(path) -> Cell:
    """Load, validate and complete a cell definition.

    Parameters
    ----------
    path : str or Path
        A cell TOML file, or the bare name of a bundled demo cell (see
        :func:`list_demo_cells`), e.g. ``"van_nmc_66ah"``.

    Returns
    -------
    Cell
        With SI fields, :class:`~explorer.cell.model.Derived` properties filled,
        ``source_path`` and the SHA-256 of the file's bytes.

    Raises
    ------
    CellFileError
        Listing every problem in the file (missing or unknown keys, wrong units,
        impossible values, tabs off the edge or overlapping, unknown materials,
        TOML syntax). :class:`CellFileNotFoundError` when the file is missing.

    Examples
    --------
    >>> cell = load_cell("van_nmc_66ah")
    >>> round(cell.derived.theoretical_capacity_Ah)
    67
    """
    file = _resolve(path)
    try:
        raw_bytes = file.read_bytes()
    except OSError as exc:
        raise CellFileError([Problem(str(file), "(file)", str(file),
                                     f"a readable file ({exc.strerror or exc})")],
                            str(file)) from None
    return _from_bytes(raw_bytes, str(file), str(file.resolve()), file.resolve().parent)


def cell_from_text(text: str, source: str = "<text>") -> Cell:
    """Build a cell from the text of a cell TOML file (same checks as :func:`load_cell`).

    ``source`` names the text in error messages and becomes ``Cell.source_path``;
    ``Cell.sha256`` is the hash of the UTF-8 encoded text.

    Examples
    --------
    >>> text = list_demo_cells()["rack_lfp_26ah"].read_text(encoding="utf-8")
    >>> cell_from_text(text.replace('unit_layers = 30', 'unit_layers = 28')).geometry.unit_layers
    28
    """
    if not isinstance(text, str):
        raise CellFileError([Problem(str(source), "(file)", type(text).__name__,
                                     "the text of a cell file (str)")], str(source))
    try:
        raw_bytes = text.encode("utf-8")
    except UnicodeEncodeError as exc:  # lone surrogates, e.g. from undecodable file names
        raise CellFileError([Problem(str(source), "(file)", f"character {exc.start}",
                                     "text that can be written as UTF-8")], str(source)) from None
    return _from_bytes(raw_bytes, source, source)


def cell_from_dict(data: dict, source: str = "<dict>") -> Cell:
    """Build a cell from an already parsed TOML mapping (same checks as :func:`load_cell`).

    ``Cell.sha256`` is the hash of the mapping's canonical JSON form.
    """
    import json

    if not isinstance(data, dict):
        raise CellFileError([Problem(source, "(file)", type(data).__name__,
                                     "a mapping of tables")], source)
    sha = hashlib.sha256(json.dumps(data, sort_keys=True, default=str).encode()).hexdigest()
    return _build(data, source, source, sha)


def _from_bytes(raw_bytes: bytes, fname: str, source_path: str, base_dir=None) -> Cell:
    sha = hashlib.sha256(raw_bytes).hexdigest()
    try:
        data = tomllib.loads(raw_bytes.decode("utf-8-sig"))  # a leading BOM is harmless
    except UnicodeDecodeError as exc:
        raise CellFileError([Problem(fname, "(file)", f"byte {exc.start}", "UTF-8 text")],
                            fname) from None
    except tomllib.TOMLDecodeError as exc:
        raise CellFileError([Problem(fname, "(syntax)", str(exc), "valid TOML")], fname) from None
    return _build(data, fname, source_path, sha, base_dir)


def _build(data: dict, fname: str, source_path: str, sha: str, base_dir=None) -> Cell:
    r = _Reader(fname)
    known = list(schema.SECTIONS) + ["tabs"]
    r.unknown_keys(data, known, "")
    values = {}
    for name, fields in schema.SECTIONS.items():
        sec = r.table(data, name, required=name not in schema.OPTIONAL_SECTIONS)
        values[name] = r.fields(sec, fields, f"{name}.")
    tabs = _read_tabs(r, data)

    _cross_checks(r, values, tabs)
    curves = resolve_curves(r, values, base_dir)  # measured tables -> electrode curves
    if r.problems:
        raise CellFileError(r.problems, fname)
    sha = tables_sha256(sha, curves)

    cellv, geo = values["cell"], values["geometry"]
    tab_objs = tuple(Tab(name=n, **v) for n, v in tabs.items())
    geometry = Geometry(tabs=tab_objs, **geo)
    neg_cc = Collector(**values["negative_collector"])
    pos_cc = Collector(**values["positive_collector"])
    negative = Electrode(**values["negative"])
    positive = Electrode(**values["positive"])
    separator = Separator(**values["separator"])
    electrolyte = Electrolyte(**values["electrolyte"])
    thermal = ThermalOverrides(**values.get("thermal", {}))

    _physical_checks(r, geometry, neg_cc, pos_cc, negative, positive, separator)
    if r.problems:
        raise CellFileError(r.problems, fname)

    derived = compute_derived(geometry, neg_cc, pos_cc, negative, positive, separator,
                              electrolyte, thermal)
    _stated_checks(r, cellv, derived)
    if r.problems:
        raise CellFileError(r.problems, fname)
    log.debug("loaded %s: %.2f Ah computed", fname, derived.theoretical_capacity_Ah)
    return Cell(
        name=cellv["name"],
        description=cellv["description"],
        nominal_capacity_Ah=cellv["nominal_capacity_Ah"],
        voltage_min_V=cellv["voltage_min_V"],
        voltage_max_V=cellv["voltage_max_V"],
        temperature_min_C=cellv["temperature_min_C"],
        temperature_max_C=cellv["temperature_max_C"],
        geometry=geometry,
        negative_collector=neg_cc,
        positive_collector=pos_cc,
        negative=negative,
        positive=positive,
        separator=separator,
        electrolyte=electrolyte,
        thermal=thermal,
        derived=derived,
        source_path=source_path,
        sha256=sha,
        mass_kg=cellv.get("mass_kg"),
        extra={**({"tables": curves["tables"]} if curves["tables"] else {}),
               **({"warnings": curves["warnings"]} if curves["warnings"] else {}),
               "data_note": cellv["data_note"],
               "layers_thickness_m": layers_thickness_m(geometry, neg_cc, pos_cc, negative,
                                                        positive, separator)},
    )


def _read_tabs(r: _Reader, data: dict) -> dict[str, dict]:
    sec = r.table(data, "tabs")
    out: dict[str, dict] = {}
    if sec is None:
        return out
    keys = [f.key for f in schema.TAB_FIELDS]
    for name, tab in sec.items():
        prefix = f"tabs.{name}."
        if not isinstance(tab, dict):
            r.add(f"tabs.{name}", tab, "a [tabs.<name>] table with " + ", ".join(keys))
            continue
        if "polarity" not in tab and name in ("negative", "positive"):
            tab = {**tab, "polarity": name}  # a tab table named after its polarity
        out[name] = r.fields(tab, schema.TAB_FIELDS, prefix)
    for pol in ("negative", "positive"):
        if sec and not any(v.get("polarity") == pol for v in out.values()):
            r.add("tabs", sorted(sec), f"at least one tab with polarity = {pol!r}")
    return out


def _cross_checks(r: _Reader, values: dict, tabs: dict) -> None:
    """Relations between fields that are each valid on their own."""
    c = values["cell"]
    if c.get("voltage_min_V") is not None and c.get("voltage_max_V") is not None:
        if c["voltage_min_V"] >= c["voltage_max_V"]:
            r.add("cell.voltage_min", c["voltage_min_V"],
                  f"a value below cell.voltage_max ({c['voltage_max_V']:g} V)")
    if c.get("temperature_min_C") is not None and c.get("temperature_max_C") is not None:
        if c["temperature_min_C"] >= c["temperature_max_C"]:
            r.add("cell.temperature_min", c["temperature_min_C"],
                  f"a value below cell.temperature_max ({c['temperature_max_C']:g} degC)")

    for name, want in (("negative", "greater"), ("positive", "smaller")):
        e = values[name]
        s0, s100 = e.get("stoichiometry_0"), e.get("stoichiometry_100")
        if s0 is not None and s100 is not None:
            ok = s100 > s0 if want == "greater" else s100 < s0
            if not ok:
                r.add(f"{name}.stoichiometry_at_full", s100,
                      f"a value {want} than {name}.stoichiometry_at_empty ({s0:g}): the "
                      f"{name} electrode {'fills' if want == 'greater' else 'empties'} "
                      "with lithium on charge")
        eps, act = e.get("porosity"), e.get("active_fraction")
        if eps is not None and act is not None and eps + act > 1:
            r.add(f"{name}.active_fraction", act,
                  f"porosity + active_fraction <= 1 (porosity is {eps:g})")

    el = values["electrolyte"]
    if el.get("conductivity") is not None and not el["conductivity"].endswith("conductivity"):
        r.add("electrolyte.conductivity", el["conductivity"], "a conductivity function key")
    if el.get("diffusivity") is not None and not el["diffusivity"].endswith("diffusivity"):
        r.add("electrolyte.diffusivity", el["diffusivity"], "a diffusivity function key")

    geo = values["geometry"]
    width, height = geo.get("width_m"), geo.get("height_m")
    by_edge: dict[str, list] = {}
    for name, t in tabs.items():
        edge, pos, w = t.get("edge"), t.get("position_m"), t.get("width_m")
        if None in (edge, pos, w):
            continue
        length = width if edge in ("bottom", "top") else height
        if length is None:
            continue
        lo, hi = pos - w / 2, pos + w / 2
        if lo < -1e-12 or hi > length + 1e-12:
            r.add(f"tabs.{name}.centre", f"{pos * 1e3:g} mm",
                  f"a tab of width {w * 1e3:g} mm lying within the {edge} edge "
                  f"(0 to {length * 1e3:g} mm), so its centre between {w / 2 * 1e3:g} and "
                  f"{(length - w / 2) * 1e3:g} mm")
        for other, olo, ohi in by_edge.get(edge, []):
            if lo < ohi and olo < hi:
                r.add(f"tabs.{name}", f"{lo * 1e3:g}..{hi * 1e3:g} mm on the {edge} edge",
                      f"no overlap with tab {other!r} ({olo * 1e3:g}..{ohi * 1e3:g} mm)")
        by_edge.setdefault(edge, []).append((name, lo, hi))


def _physical_checks(r, geometry, neg_cc, pos_cc, negative, positive, separator) -> None:
    """Checks that need the assembled parts (layer stack, electrode balance)."""
    stack = layers_thickness_m(geometry, neg_cc, pos_cc, negative, positive, separator)
    if stack > geometry.stack_thickness_m * 1.02:
        r.add("geometry.thickness", f"{geometry.stack_thickness_m * 1e3:g} mm",
              f"at least the {stack * 1e3:.2f} mm the layers add up to (unit_layers x "
              "(coatings + separator) + foils + two pouch walls)")
    area = geometry.width_m * geometry.height_m
    q_n = electrode_capacity_Ah(negative, area, geometry.unit_layers)
    q_p = electrode_capacity_Ah(positive, area, geometry.unit_layers)
    mismatch = abs(q_n - q_p) / max(q_n, q_p)
    if mismatch > WINDOW_MISMATCH_TOLERANCE:
        r.add("positive.stoichiometry_at_full", positive.stoichiometry_100,
              f"SOC windows holding the same charge in both electrodes (within "
              f"{WINDOW_MISMATCH_TOLERANCE:.0%}); the negative window holds {q_n:.2f} Ah, "
              f"the positive {q_p:.2f} Ah")


def _stated_checks(r: _Reader, cellv: dict, derived) -> None:
    """Data-sheet figures against what the listed layers give (a typo or a wrong layer count
    shows up here before it shows up as a strange run)."""
    tol = STATED_TOLERANCE
    q, q_layers = cellv["nominal_capacity_Ah"], derived.theoretical_capacity_Ah
    if abs(q - q_layers) > tol * q_layers:
        r.add("cell.nominal_capacity", f"{q:g} Ah",
              f"a capacity within {tol:.0%} of the {q_layers:.4g} Ah the electrode loadings "
              "hold (Faraday's law: coating volume x active_fraction x max_concentration x "
              "stoichiometry window x F, the smaller electrode); check the capacity, the "
              "coating thicknesses, unit_layers, width x height and the stoichiometry windows")
    m = cellv.get("mass_kg")
    if m is not None and abs(m - derived.mass_kg) > tol * derived.mass_kg:
        r.add("cell.mass", f"{m * 1e3:g} g",
              f"a mass within {tol:.0%} of the {derived.mass_kg * 1e3:.4g} g the listed parts "
              "weigh (coatings, separators, electrolyte in the pores, foils, pouch, tab free "
              "lengths); check the mass, the dimensions, unit_layers and the densities")
