"""A complete cell file from data-sheet values and a chemistry template.

A thermal team gets a cell as a data sheet: capacity, voltage window,
dimensions, mass, a tab drawing, perhaps a DC resistance. :func:`from_datasheet`
turns those into a full cell file by scaling a chemistry template (one of the
demo cells, see :data:`TEMPLATES`) to them:

* the coated area is the cell body less an inset on every side (or the stated
  electrode size);
* the number of unit layers comes from the thickness (unless stated), and the
  coating thicknesses of both electrodes are scaled together so that the
  layers hold the stated capacity (Faraday's law on the template's loadings);
* a stated mass scales the heat capacity of the layers (the mass the layers do
  not account for -- flanges, excess electrolyte -- stores heat too);
* tabs come from the data sheet (positions measured from the body corner) or
  from the template, scaled to the width;
* a stated DC resistance sets the series (contact) resistance at the tab welds
  so that a pulse of the data sheet's length at 1C shows it (one short run);
* everything else is the template's.

Every value in the written file carries where it came from as a trailing
comment: ``# data sheet``, ``# template``, ``# derived`` (from both) or
``# fitted`` (to measured curves, see :func:`explorer.calibrate`). A template
cell is a starting point, and the file says so.

The data-sheet file (TOML) uses the cell file's conventions (quantities as
strings with units); see ``demo_cells/datasheets/`` for examples and
:data:`FIELDS` for the keys.
"""

from __future__ import annotations

import json
import logging
import math
import re
import sys
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from explorer.cell import schema
from explorer.cell.derived import foil_counts
from explorer.cell.loader import cell_from_dict, cell_from_text, list_demo_cells
from explorer.units import UnitError, parse
from explorer.validators import InputError, OutputError, Problem, clip, short_repr

__all__ = ["from_datasheet", "cmd_new_cell", "TEMPLATES", "FIELDS", "PROVENANCE",
           "DataSheetError", "render", "read_provenance", "cell_data", "set_series_resistance",
           "series_resistance_ohm", "EDGE_INSET_M", "absolute_tables"]

log = logging.getLogger(__name__)

#: chemistry key -> (demo cell used as template, what it is)
TEMPLATES = {
    "nmc": ("van_nmc_66ah", "NMC/graphite, energy type (thick coatings)"),
    "lfp": ("rack_lfp_26ah", "LFP/graphite"),
    "nmc_power": ("bus_power_12ah", "NMC/graphite, power type (thin coatings, small particles)"),
}
#: where a value came from
PROVENANCE = ("data sheet", "template", "derived", "fitted")
#: coated area inset from the cell body on each side when the electrode size is not stated
#: (common practice: seal and separator overhang take a few millimetres)
EDGE_INSET_M = 5e-3
#: coating scale outside which the template is too far from the stated cell
SCALE_BAND = (0.33, 3.0)


@dataclass(frozen=True)
class SheetField:
    key: str  # key in the data-sheet file
    kind: str  # "quantity" | "text" | "choice" | "integer" | "number"
    unit: str = ""  # SI unit the value is read in
    keyword: str = ""  # Python keyword of from_datasheet (unit suffix at the edge)
    keyword_unit: str = ""  # unit of the keyword's number
    required: bool = False
    prompt: str = ""  # question of the interactive new-cell
    example: str = ""


FIELDS = (
    SheetField("name", "text", keyword="name", prompt="Cell name", example="My cell"),
    SheetField("chemistry", "choice", keyword="chemistry", required=True,
               prompt=f"Chemistry ({', '.join(TEMPLATES)})", example="nmc"),
    SheetField("nominal_capacity", "quantity", "A*h", "nominal_capacity_Ah", "Ah", True,
               "Nominal capacity", "66 Ah"),
    SheetField("voltage_min", "quantity", "V", "voltage_min_V", "V", True,
               "Lower voltage limit", "2.8 V"),
    SheetField("voltage_max", "quantity", "V", "voltage_max_V", "V", True,
               "Upper voltage limit", "4.2 V"),
    SheetField("width", "quantity", "m", "width_mm", "mm", True,
               "Cell body width, across the face, without tabs", "250 mm"),
    SheetField("height", "quantity", "m", "height_mm", "mm", True,
               "Cell body height, along the face, without tabs", "170 mm"),
    SheetField("thickness", "quantity", "m", "thickness_mm", "mm", True,
               "Cell thickness", "8.9 mm"),
    SheetField("mass", "quantity", "kg", "mass_g", "g", False, "Cell mass", "900 g"),
    SheetField("unit_layers", "integer", keyword="unit_layers",
               prompt="Unit layers (negative + separator + positive) in the stack",
               example="44"),
    SheetField("electrode_width", "quantity", "m", "electrode_width_mm", "mm", False,
               "Coated electrode width", "240 mm"),
    SheetField("electrode_height", "quantity", "m", "electrode_height_mm", "mm", False,
               "Coated electrode height", "160 mm"),
    SheetField("temperature_min", "quantity", "degC", "temperature_min_C", "degC", False,
               "Lowest operating temperature", "-20 degC"),
    SheetField("temperature_max", "quantity", "degC", "temperature_max_C", "degC", False,
               "Highest operating temperature", "55 degC"),
    SheetField("dc_resistance", "quantity", "ohm", "dc_resistance_mohm", "mohm", False,
               "DC resistance (pulse)", "0.9 mohm"),
    SheetField("dc_resistance_pulse", "quantity", "s", "dc_resistance_pulse_s", "s", False,
               "Length of the DC-resistance pulse", "10 s"),
    SheetField("dc_resistance_soc", "number", keyword="dc_resistance_soc",
               prompt="SOC of the DC-resistance pulse (0..1)", example="0.5"),
    SheetField("description", "text", keyword="description"),
)
_BY_KEY = {f.key: f for f in FIELDS}
_BY_KEYWORD = {f.keyword: f for f in FIELDS}
TAB_KEYS = ("polarity", "edge", "centre", "width", "thickness", "material", "free_length",
            "weld_resistance")


class DataSheetError(InputError):
    """Everything wrong with one set of data-sheet values, one problem per line."""

    def __init__(self, problems, source: str = ""):
        self.problems = list(problems)
        head = f"data sheet {clip(source, 160)} has " if source else "data-sheet values have "
        n = len(self.problems)
        lines = [f"{head}{n} problem{'s' if n != 1 else ''}:"] + [f"  - {p}" for p in
                                                                  self.problems]
        super().__init__("\n".join(lines))


# ------------------------------------------------------------------------------------------
# TOML text with provenance comments


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise InputError(f"cannot write the non-finite number {v!r} into a cell file")
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v).replace("\x7f", "\\u007f")
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise InputError(f"cannot write {type(v).__name__} {short_repr(v)} into a cell file")


def _toml_key(k: str) -> str:
    return k if re.fullmatch(r"[A-Za-z0-9_-]+", k) else json.dumps(k)


_ORDER = ("cell", "geometry", "tabs", "negative_collector", "positive_collector", "negative",
          "positive", "separator", "electrolyte", "thermal")


def render(data: dict, provenance: dict | None = None, header: str = "") -> str:
    """TOML text of a cell mapping, each value followed by its provenance comment.

    ``provenance`` maps dotted paths (``"geometry.width"``, ``"tabs.negative.centre"``)
    to ``"<kind>"`` or ``"<kind>: <note>"``; ``header`` is written as ``#`` comments.
    """
    provenance = provenance or {}
    out = [f"# {ln}".rstrip() for ln in header.splitlines()] if header else []
    tables = sorted(data, key=lambda k: (_ORDER.index(k) if k in _ORDER else len(_ORDER), k))

    def emit(path: str, table: dict):
        scalars = {k: v for k, v in table.items() if not isinstance(v, dict)}
        subs = {k: v for k, v in table.items() if isinstance(v, dict)}
        if scalars or not subs:
            out.append("")
            out.append(f"[{'.'.join(_toml_key(p) for p in path.split('.'))}]")
            width = min(40, max((len(_toml_key(k)) + 3 + len(_toml_value(v)) for k, v in
                                 scalars.items()), default=0))
            for k, v in scalars.items():
                line = f"{_toml_key(k)} = {_toml_value(v)}"
                note = provenance.get(f"{path}.{k}")
                out.append(f"{line.ljust(width)}  # {note}" if note else line)
        for k, v in subs.items():
            emit(f"{path}.{k}", v)

    for name in tables:
        if isinstance(data[name], dict):
            emit(name, data[name])
        else:  # a stray top-level value: keep it (the loader will name it)
            out.insert(0, f"{_toml_key(name)} = {_toml_value(data[name])}")
    return "\n".join(out).lstrip("\n") + "\n"


_PROV_COMMENT = re.compile(r"\s#\s*((?:data sheet|template|derived|fitted)(?::.*)?)$")
_TABLE = re.compile(r"^\[([^\[\]]+)\]\s*(#.*)?$")
_KEY = re.compile(r"^([A-Za-z0-9_-]+)\s*=")


def read_provenance(text: str) -> dict[str, str]:
    """The provenance comments of a cell file written by :func:`render` (path -> note)."""
    out, table = {}, ""
    for line in text.splitlines():
        s = line.strip()
        m = _TABLE.match(s)
        if m:
            table = m.group(1).strip()
            continue
        k = _KEY.match(s)
        p = _PROV_COMMENT.search(s)
        if k and p:
            out[f"{table}.{k.group(1)}"] = p.group(1).strip()
    return out


# ------------------------------------------------------------------------------------------
# a Cell back to a mapping of the file format


def _fmt(v: float, unit: str) -> str:
    """A quantity string in a readable unit for the schema unit ``unit``."""
    if unit == "m":
        return f"{v * 1e3:.7g} mm" if abs(v) >= 1e-3 else f"{v * 1e6:.7g} um"
    if unit == "A*h":
        return f"{v:.7g} Ah"
    if unit == "J/mol":
        return f"{v / 1e3:.7g} kJ/mol"
    if unit == "kg/m^3":
        return f"{v / 1e3:.7g} g/cm^3"
    if unit == "ohm":
        return f"{v * 1e6:.7g} uohm" if abs(v) < 1e-3 else f"{v * 1e3:.7g} mohm"
    if unit == "kg":
        return f"{v * 1e3:.7g} g"
    return f"{v:.7g} {unit}"


def _field_value(f: schema.Field, v):
    if v is None:
        return None
    if f.kind == "quantity":
        return _fmt(float(v), f.unit)
    if f.kind == "number":
        return float(v)
    if f.kind == "integer":
        return int(v)
    return str(v)


def cell_data(cell) -> tuple[dict, dict]:
    """The file-format mapping of ``cell`` and the provenance notes it carried.

    A cell built here or read from a file that is unchanged since it was read
    gives back that file's own mapping (keys the schema may add later included);
    otherwise the mapping is rebuilt from the Cell's fields.
    """
    text = cell.extra.get("cell_file_text")
    if text is None and cell.source_path:
        text = _unchanged_file_text(cell)
    if text is not None:
        data = tomllib.loads(text)
        absolute_tables(data, cell)
        return data, read_provenance(text)
    return _rebuild(cell), {}


def _unchanged_file_text(cell) -> str | None:
    """The text of the file ``cell`` was read from, if it (and its tables) still give the
    same cell (same hash); else None."""
    from explorer.cell.loader import load_cell

    p = Path(cell.source_path)
    try:
        text = p.read_bytes().decode("utf-8-sig")
        same = load_cell(p).sha256 == cell.sha256
    except (OSError, ValueError, UnicodeDecodeError):  # InputError is a ValueError
        return None
    return text if same else None


def absolute_tables(data: dict, cell) -> None:
    """Point the measured-curve keys (``ocp_table = "file.csv"``...) at their absolute paths,
    so that a cell file written to another folder still finds its tables."""
    for field, info in (cell.extra.get("tables") or {}).items():
        table, _, key = field.partition(".")
        if isinstance(data.get(table), dict) and key in data[table]:
            data[table][key] = str(info["path"])


def _rebuild(cell) -> dict:
    objs = {"cell": cell, "geometry": cell.geometry, "negative_collector":
            cell.negative_collector, "positive_collector": cell.positive_collector,
            "negative": cell.negative, "positive": cell.positive, "separator": cell.separator,
            "electrolyte": cell.electrolyte, "thermal": cell.thermal}
    data = {}
    for name, fields in schema.SECTIONS.items():
        obj, table = objs[name], {}
        for f in fields:
            if name == "cell" and f.attr == "data_note":
                v = cell.extra.get("data_note", "")
            else:
                v = getattr(obj, f.attr, None)
            if f.kind == "key" and v is not None and not isinstance(v, str):
                raise InputError(f"cannot write the cell {cell.name!r} to a file: its "
                                 f"`{name}.{f.key}` is a measured curve, not a key; build it "
                                 "from its cell file")
            v = _field_value(f, v)
            if v is not None:
                table[f.key] = v
        if table or name not in schema.OPTIONAL_SECTIONS:
            data[name] = table
    tabs = {}
    for t in cell.geometry.tabs:
        tabs[t.name] = {f.key: _field_value(f, getattr(t, f.attr)) for f in schema.TAB_FIELDS}
    data["tabs"] = tabs
    return data


# ------------------------------------------------------------------------------------------
# series (contact) resistance at the tab welds


def series_resistance_ohm(data: dict) -> float:
    """Weld resistance in series with the cell: each polarity's welds in parallel, summed."""
    total = 0.0
    for pol in ("negative", "positive"):
        g = [parse(t["weld_resistance"], "ohm") for n, t in data["tabs"].items()
             if t.get("polarity", n) == pol]
        total += 1.0 / sum(1.0 / max(r, 1e-12) for r in g) if g else 0.0
    return total


def set_series_resistance(data: dict, total_ohm: float) -> None:
    """Set the tab welds so that their series resistance is ``total_ohm``: half on each
    polarity, shared equally by that polarity's tabs (in parallel)."""
    tabs = data["tabs"]
    for pol in ("negative", "positive"):
        names = [n for n, t in tabs.items() if t.get("polarity", n) == pol]
        for n in names:
            tabs[n]["weld_resistance"] = _fmt(0.5 * total_ohm * len(names), "ohm")


# ------------------------------------------------------------------------------------------
# reading the data-sheet values


def _read_values(raw: dict, source: str) -> tuple[dict, dict]:
    """SI values of the data-sheet mapping ``raw`` (file keys) and its tabs; all problems
    at once."""
    problems, out = [], {}
    known = set(_BY_KEY) | {"tabs"}
    for key in raw:
        if key not in known:
            import difflib

            close = difflib.get_close_matches(key, list(known), n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            problems.append(Problem(source, key, raw[key],
                                    f"one of the data-sheet keys {', '.join(sorted(known))}"
                                    f"{hint}"))
    for f in FIELDS:
        v = raw.get(f.key)
        if v is None or (isinstance(v, str) and not v.strip() and not f.required):
            if f.required:
                problems.append(Problem(source, f.key, _missing(),
                                        f"a value, e.g. {f.key} = {f.example!r}"))
            continue
        try:
            out[f.key] = _convert(f, v)
        except InputError as exc:
            problems.append(Problem(source, f.key, v, _expected(exc, f)))
    tabs = {}
    rt = raw.get("tabs", {})
    if not isinstance(rt, dict):
        problems.append(Problem(source, "tabs", rt, "[tabs.<name>] tables"))
        rt = {}
    for name, tab in rt.items():
        if not isinstance(tab, dict):
            problems.append(Problem(source, f"tabs.{name}", tab, "a [tabs.<name>] table"))
            continue
        bad = [k for k in tab if k not in TAB_KEYS]
        for k in bad:
            problems.append(Problem(source, f"tabs.{name}.{k}", tab[k],
                                    f"one of the tab keys {', '.join(TAB_KEYS)}"))
        tabs[name] = dict(tab)
    if problems:
        raise DataSheetError(problems, source)
    _check_values(out, source)
    return out, tabs


def _missing():
    from explorer.validators import MISSING

    return MISSING


def _expected(exc: InputError, f: SheetField) -> str:
    text = getattr(exc, "expected", None) or str(exc)
    return text if f.kind != "quantity" else f"{text} (e.g. {f.example!r})"


def _convert(f: SheetField, v):
    if f.kind == "text":
        if not isinstance(v, str):
            raise InputError("text in quotes")
        return v
    if f.kind == "choice":
        if not isinstance(v, str) or v.strip().lower() not in TEMPLATES:
            raise InputError(f"one of {', '.join(map(repr, TEMPLATES))}")
        return v.strip().lower()
    if f.kind == "integer":
        if isinstance(v, str) and v.strip().isdigit():
            v = int(v.strip())
        if isinstance(v, bool) or not isinstance(v, int) or not 1 <= v <= 10000:
            raise InputError("a whole number between 1 and 10000")
        return v
    if f.kind == "number":
        try:
            x = float(v) if not isinstance(v, bool) else math.nan
        except (TypeError, ValueError):
            x = math.nan
        if not math.isfinite(x):
            raise InputError("a plain number")
        return x
    if isinstance(v, int | float) and not isinstance(v, bool):
        raise InputError(f"a string with a unit, e.g. {f.example!r}")
    try:
        x = parse(v, f.unit)
    except UnitError as exc:
        raise exc from None
    if not math.isfinite(x):
        raise InputError("a finite value")
    return x


def _check_values(v: dict, source: str) -> None:
    problems = []

    def need(cond, key, expected, shown=None):
        if not cond:
            problems.append(Problem(source, key, v.get(key) if shown is None else shown,
                                    expected))

    for key in ("nominal_capacity", "voltage_min", "voltage_max", "width", "height",
                "thickness", "mass", "electrode_width", "electrode_height", "dc_resistance",
                "dc_resistance_pulse"):
        if key in v:
            band = schema.PLAUSIBLE.get(f"cell.{key}") or schema.PLAUSIBLE.get(
                f"geometry.{key.removeprefix('electrode_')}")
            if key == "mass":
                band = (1e-4, 1e3)
            if key in ("dc_resistance",):
                band = (1e-6, 10.0)
            if key == "dc_resistance_pulse":
                band = (0.1, 600.0)
            lo, hi = band if band else (0.0, math.inf)
            f = _BY_KEY[key]
            k = parse(f"1 {f.keyword_unit}", f.unit)  # shown in the unit the prompt uses
            need(v[key] > 0 and lo <= v[key] <= hi, key,
                 f"a value between {lo / k:g} and {hi / k:g} {f.keyword_unit}",
                 f"{v[key] / k:g} {f.keyword_unit}")
    if "voltage_min" in v and "voltage_max" in v:
        need(v["voltage_min"] < v["voltage_max"], "voltage_min",
             f"a value below voltage_max ({v['voltage_max']:g} V)")
    if "temperature_min" in v and "temperature_max" in v:
        need(v["temperature_min"] < v["temperature_max"], "temperature_min",
             f"a value below temperature_max ({v['temperature_max']:g} degC)")
    if "dc_resistance_soc" in v:
        need(0.05 <= v["dc_resistance_soc"] <= 0.95, "dc_resistance_soc",
             "a state of charge between 0.05 and 0.95")
    for k in ("electrode_width", "electrode_height"):
        body = k.removeprefix("electrode_")
        if k in v and body in v:
            need(v[k] <= v[body], k, f"at most the body {body} ({v[body] * 1e3:g} mm)")
    if problems:
        raise DataSheetError(problems, source)


# ------------------------------------------------------------------------------------------
# building the cell


def from_datasheet(datasheet=None, /, *, out=None, **values):
    """Build a complete cell from data-sheet values and a chemistry template.

    Parameters
    ----------
    datasheet : str, Path or dict, optional
        A data-sheet TOML file, or a mapping with its keys (``chemistry``,
        ``nominal_capacity = "66 Ah"``, ...; see :data:`FIELDS`).
    out : str or Path, optional
        Write the cell file there (atomically); the returned cell's
        ``source_path`` is then that file.
    **values
        Data-sheet values as keywords with the unit in the name, e.g.
        ``chemistry="nmc", nominal_capacity_Ah=66, voltage_min_V=2.8,
        voltage_max_V=4.2, width_mm=250, height_mm=170, thickness_mm=8.9,
        mass_g=900`` (they override the file's). ``tabs`` takes a mapping of tab
        tables in the file's form (``{"negative": {"edge": "top", "centre":
        "65 mm", "width": "50 mm", ...}}``), positions from the body's corner.

    Returns
    -------
    Cell
        Validated by the cell loader. ``cell.extra["cell_file_text"]`` holds the
        file's text, ``cell.extra["provenance"]`` the provenance of each value.

    Raises
    ------
    DataSheetError
        Listing every bad or missing data-sheet value (an :class:`InputError`).
    InputError
        When the template cannot be scaled to the stated cell (the stated
        capacity does not fit the thickness, say).

    Examples
    --------
    >>> cell = from_datasheet(chemistry="lfp", nominal_capacity_Ah=50, voltage_min_V=2.5,
    ...                       voltage_max_V=3.65, width_mm=180, height_mm=240,
    ...                       thickness_mm=9.0)                       # doctest: +SKIP
    """
    raw, source = _gather(datasheet, values)
    sheet, tabs = _read_values(raw, source)
    text, prov = build_text(sheet, tabs, source)
    cell = cell_from_text(text, source=str(out) if out is not None else "<data sheet>")
    if out is not None:
        from explorer.fileio import atomic_write_text

        path = atomic_write_text(Path(out), text)
        from explorer.cell.loader import load_cell

        cell = load_cell(path)
    cell.extra["cell_file_text"] = text
    cell.extra["provenance"] = prov
    return cell


def _gather(datasheet, values) -> tuple[dict, str]:
    raw, source = {}, "<values>"
    if datasheet is not None:
        if isinstance(datasheet, dict):
            raw = dict(datasheet)
        elif isinstance(datasheet, str | Path):
            source = str(datasheet)
            raw = _read_sheet(Path(datasheet))
        else:
            raise InputError(f"from_datasheet: `datasheet` must be a data-sheet file path or a "
                             f"mapping, got {type(datasheet).__name__} {short_repr(datasheet)}")
    for kw, v in values.items():
        if kw == "tabs":
            raw["tabs"] = v
            continue
        f = _BY_KEYWORD.get(kw)
        if f is None:
            import difflib

            close = difflib.get_close_matches(kw, list(_BY_KEYWORD) + ["tabs"], n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise InputError(f"from_datasheet: unknown keyword `{kw}`; expected one of "
                             f"{', '.join(list(_BY_KEYWORD) + ['tabs'])}{hint}")
        if v is None:
            continue
        if f.kind == "quantity":
            if isinstance(v, bool) or not isinstance(v, int | float):
                raise InputError(f"from_datasheet: `{kw}` must be a number (in "
                                 f"{f.keyword_unit}), got {short_repr(v)}")
            v = f"{float(v)!r} {f.keyword_unit}"
        raw[f.key] = v
    return raw, source


def _read_sheet(path: Path) -> dict:
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except OSError as exc:
        raise InputError(f"{path}: cannot read the data sheet ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: the data sheet is not UTF-8 text; save it as UTF-8") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None


def _template(chemistry: str) -> tuple[str, dict, object]:
    from explorer.cell.loader import load_cell

    name = TEMPLATES[chemistry][0]
    path = list_demo_cells()[name]
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    cell = load_cell(path)
    absolute_tables(data, cell)
    return name, data, cell


def build_text(sheet: dict, tabs: dict, source: str = "<values>") -> tuple[str, dict]:
    """The cell file text and the provenance map for validated data-sheet values."""
    tname, data, tcell = _template(sheet["chemistry"])
    prov = {}

    def setv(path: str, value, kind: str, note: str = ""):
        table, _, key = path.rpartition(".")
        d = data
        for part in table.split("."):
            d = d.setdefault(part, {})
        d[key] = value
        prov[path] = f"{kind}: {note}" if note else kind

    for table, content in data.items():  # everything starts as the template's
        if table == "tabs":
            for n, t in content.items():
                for k in t:
                    prov[f"tabs.{n}.{k}"] = "template"
        elif isinstance(content, dict):
            for k in content:
                prov[f"{table}.{k}"] = "template"
    data.get("thermal", {}).pop("heat_capacity", None)  # the template's whole-cell value

    name = sheet.get("name", "Cell from data sheet")
    setv("cell.name", name, "data sheet" if "name" in sheet else "derived")
    setv("cell.description", sheet.get("description", (
        f"Built from data-sheet values on the {TEMPLATES[sheet['chemistry']][1]} template "
        f"{tname!r}")), "data sheet" if "description" in sheet else "derived")
    setv("cell.data_note", (
        f"built from data-sheet values on the template {tname!r} (invented demo data): a "
        "starting point, not a measured cell; calibrate it to test curves before relying "
        "on its voltage or heat"), "derived")
    setv("cell.nominal_capacity", _fmt(sheet["nominal_capacity"], "A*h"), "data sheet")
    setv("cell.voltage_min", _fmt(sheet["voltage_min"], "V"), "data sheet")
    setv("cell.voltage_max", _fmt(sheet["voltage_max"], "V"), "data sheet")
    for k in ("temperature_min", "temperature_max"):
        if k in sheet:
            setv(f"cell.{k}", _fmt(sheet[k], "degC"), "data sheet")

    span, notes = _window(sheet, tcell, setv)
    notes += _geometry(sheet, data, tcell, setv, span)
    _tabs(sheet, tabs, data, tcell, setv, prov)

    # mass: the heat capacity of the layers scaled to the stated mass
    draft = cell_from_dict(data, source)
    if "mass" in sheet:
        from explorer.cell import loader

        m = draft.derived.mass_kg
        ratio = sheet["mass"] / m
        tolerance = getattr(loader, "STATED_TOLERANCE", 0.2)
        if any(f.key == "mass" for f in schema.CELL):
            if abs(ratio - 1) <= tolerance:
                setv("cell.mass", _fmt(sheet["mass"], "kg"), "data sheet")
            else:
                notes.append(f"The stated mass ({sheet['mass'] * 1e3:.4g} g) is {ratio:.2f} "
                             f"times what the layers account for ({m * 1e3:.4g} g), beyond the "
                             f"{tolerance:.0%} a cell file may state; it is left out of [cell] "
                             "and only scales the heat capacity.")
        c = draft.derived.computed_heat_capacity_J_K * ratio
        setv("thermal.heat_capacity", f"{c:.5g} J/K", "derived",
             f"the layers' {draft.derived.computed_heat_capacity_J_K:.4g} J/K scaled to the "
             f"stated mass ({sheet['mass'] * 1e3:.4g} g against {m * 1e3:.4g} g of layers, "
             "foils, electrolyte and pouch)")
        if not 0.7 <= ratio <= 1.5:
            notes.append("Check the mass, the dimensions and the chemistry: a mass this far "
                         "from the layers' suggests another construction than the template's.")
    if "dc_resistance" in sheet:
        notes += _match_dc_resistance(sheet, data, setv, source)

    header = _header(tname, sheet["chemistry"], notes)
    return render(data, prov, header), prov


def _header(tname: str, chemistry: str, notes: list[str]) -> str:
    import textwrap

    paragraphs = [
        "Cell file built by explorer.cell.from_datasheet (`python -m explorer new-cell`).",
        f"A TEMPLATE CELL IS A STARTING POINT. Values not on the data sheet come from the "
        f"template {tname!r} ({TEMPLATES[chemistry][1]}; invented demo data) or are derived "
        "from both. Calibrate the cell to measured curves (`python -m explorer calibrate`) "
        "before relying on its voltage or heat.",
        'Each value says where it came from: "data sheet", "template", "derived" (computed '
        'from the data sheet and the template) or "fitted" (to measured curves or to a stated '
        'resistance). Units: every dimensional value is a string "<number> <unit>".',
    ]
    lines = []
    for text in paragraphs:
        lines += textwrap.wrap(text, 95) + [""]
    if notes:
        lines += ["Notes:"]
        for n in notes:
            lines += textwrap.wrap(n, 95, initial_indent="- ", subsequent_indent="  ")
    return "\n".join(lines).rstrip()


def _geometry(sheet, data, tcell, setv, span: float = 1.0) -> list[str]:
    """Coated area, layer count and coating thicknesses; returns notes for the header."""
    notes = []
    ew = sheet.get("electrode_width", sheet["width"] - 2 * EDGE_INSET_M)
    eh = sheet.get("electrode_height", sheet["height"] - 2 * EDGE_INSET_M)
    inset_note = (f"the body less {EDGE_INSET_M * 1e3:g} mm on each side (common practice; "
                  "state electrode_{0} to override)")
    for key, v in (("width", ew), ("height", eh)):
        if v <= 0:
            raise DataSheetError([Problem("", key, _fmt(sheet[key], "m"),
                                          f"more than twice the {EDGE_INSET_M * 1e3:g} mm inset "
                                          "of the coated area, or state electrode_" + key)])
        given = f"electrode_{key}" in sheet
        setv(f"geometry.{key}", _fmt(v, "m"), "data sheet" if given else "derived",
             "" if given else inset_note.format(key))
    setv("geometry.thickness", _fmt(sheet["thickness"], "m"), "data sheet")

    g, d, neg, pos, sep = tcell.geometry, tcell.derived, tcell.negative, tcell.positive, \
        tcell.separator
    t_ccn, t_ccp = tcell.negative_collector.thickness_m, tcell.positive_collector.thickness_m
    pouch = g.pouch_foil_thickness_m
    # capacity per unit layer and m^2 at the template's loadings, and the window the
    # template's nominal capacity is of its theoretical one
    q_area = d.theoretical_capacity_Ah / d.active_area_m2 * span
    q_target = sheet["nominal_capacity"] * d.theoretical_capacity_Ah / tcell.nominal_capacity_Ah
    fill = tcell.extra["layers_thickness_m"] / g.stack_thickness_m
    area = ew * eh
    coat = neg.thickness_m + pos.thickness_m

    def layers_m(n, s):
        nn, npos = foil_counts(n)
        return n * (s * coat + sep.thickness_m) + nn * t_ccn + npos * t_ccp + 2 * pouch

    def scale(n):
        return q_target / (q_area * area * n)

    if "unit_layers" in sheet:
        n = sheet["unit_layers"]
        setv("geometry.unit_layers", n, "data sheet")
    else:
        target = fill * sheet["thickness"]
        best = min(range(1, 5001), key=lambda k: abs(layers_m(k, scale(k)) - target))
        n = best
        setv("geometry.unit_layers", n, "derived",
             f"the number that fills the stated thickness as the template's layers fill its "
             f"own ({fill:.0%})")
    s = scale(n)
    if not SCALE_BAND[0] <= s <= SCALE_BAND[1]:
        n1 = max(1, round(q_target / (q_area * area)))
        raise InputError(
            f"data sheet: {sheet['nominal_capacity']:g} Ah over {n} unit layers of "
            f"{ew * 1e3:.0f} x {eh * 1e3:.0f} mm needs coatings {s:.2f} times as thick as the "
            f"template {tcell.name!r}'s (accepted {SCALE_BAND[0]:g} to {SCALE_BAND[1]:g}); at "
            f"the template's coatings it takes about {n1} layers, "
            f"{layers_m(n1, 1.0) / fill * 1e3:.1f} mm thick. Check the capacity, the "
            "dimensions and the thickness, state unit_layers, or pick another chemistry")
    stack = layers_m(n, s)
    if stack > sheet["thickness"] * 1.02:
        raise InputError(
            f"data sheet: {n} unit layers holding {sheet['nominal_capacity']:g} Ah add up to "
            f"{stack * 1e3:.2f} mm, more than the stated thickness "
            f"{sheet['thickness'] * 1e3:.2f} mm; check unit_layers and the thickness")
    note = (f"the template's coating scaled by {s:.4f} so that {n} layers hold the stated "
            "capacity")
    setv("negative.thickness", _fmt(neg.thickness_m * s, "m"), "derived", note)
    setv("positive.thickness", _fmt(pos.thickness_m * s, "m"), "derived", note)
    if abs(s - 1) > 0.5:
        notes.append(f"The coatings are {s:.2f} times the template's thickness; rate "
                     "capability and heat scale with it only roughly.")
    return notes


def _window(sheet, tcell, setv) -> tuple[float, list[str]]:
    """Move the template's electrode windows to the data-sheet voltage window.

    The ends move by the template's own open-circuit voltage: the new full (empty) state is
    where the OCV differs from the template's at SOC 1 (0) by as much as the data sheet's
    upper (lower) limit differs from the template's. A window equal to the template's leaves
    the stoichiometries as they are. Returns the window's share of the template's (the
    capacity per layer scales with it) and notes for the header.
    """
    from explorer.cell.derived import ocv

    d_hi = sheet["voltage_max"] - tcell.voltage_max_V
    d_lo = sheet["voltage_min"] - tcell.voltage_min_V
    if abs(d_hi) < 1e-9 and abs(d_lo) < 1e-9:
        return 1.0, []
    neg, pos = tcell.negative, tcell.positive

    def sto(e, soc):
        return e.stoichiometry_0 + soc * (e.stoichiometry_100 - e.stoichiometry_0)

    grid = np.linspace(-0.5, 1.5, 4001)
    ok = np.ones_like(grid, dtype=bool)
    for e in (neg, pos):  # stay inside both electrodes' stoichiometry range
        x = sto(e, grid)
        ok &= (x > 0.002) & (x < 0.998)
    soc = grid[ok]
    with np.errstate(all="ignore"):
        u = np.maximum.accumulate(np.nan_to_num(ocv(neg, pos, soc), nan=-np.inf))
    u0, u1 = float(np.interp(0.0, soc, u)), float(np.interp(1.0, soc, u))
    s0 = float(np.interp(u0 + d_lo, u, soc))
    s1 = float(np.interp(u1 + d_hi, u, soc))
    notes = []
    if s1 - s0 < 0.2:
        raise InputError(f"data sheet: the voltage window {sheet['voltage_min']:g}-"
                         f"{sheet['voltage_max']:g} V leaves only {s1 - s0:.0%} of the "
                         f"template's window; check the limits or pick another chemistry")
    for end, s_end, target in (("upper", s1, u1 + d_hi), ("lower", s0, u0 + d_lo)):
        if not u[0] < target < u[-1]:
            notes.append(f"The {end} voltage limit lies beyond the template's electrode "
                         f"curves; the window stops at SOC {s_end:+.2f} of the template's.")
    note = (f"the template's window moved to the data-sheet voltage window (SOC "
            f"{s0:+.3f}..{s1:.3f} of the template's)")
    for name, e in (("negative", neg), ("positive", pos)):
        setv(f"{name}.stoichiometry_at_empty", round(float(sto(e, s0)), 6), "derived", note)
        setv(f"{name}.stoichiometry_at_full", round(float(sto(e, s1)), 6), "derived", note)
    return s1 - s0, notes


def _tabs(sheet, tabs, data, tcell, setv, prov) -> None:
    """Tabs from the data sheet (positions from the body corner) or the template's."""
    g = data["geometry"]
    ew, eh = parse(g["width"], "m"), parse(g["height"], "m")
    inset = {"top": (sheet["width"] - ew) / 2, "bottom": (sheet["width"] - ew) / 2,
             "left": (sheet["height"] - eh) / 2, "right": (sheet["height"] - eh) / 2}
    length = {"top": ew, "bottom": ew, "left": eh, "right": eh}
    tw, th = tcell.geometry.width_m, tcell.geometry.height_m
    given = {raw.get("polarity", n) for n, raw in tabs.items()}
    template_raw = data.pop("tabs")
    data["tabs"] = {}
    for t in tcell.geometry.tabs:  # polarities the data sheet leaves out: the template's, scaled
        if t.polarity in given:
            continue
        data["tabs"][t.name] = dict(template_raw[t.name])
        ratio = (ew / tw) if t.edge in ("top", "bottom") else (eh / th)
        note = "the template's tab scaled to the edge length"
        setv(f"tabs.{t.name}.centre", _fmt(t.position_m * ratio, "m"), "derived", note)
        setv(f"tabs.{t.name}.width", _fmt(t.width_m * ratio, "m"), "derived", note)
    if not tabs:
        return
    template_tabs = {t.polarity: t for t in tcell.geometry.tabs}
    for k in list(prov):
        if k.startswith("tabs.") and k.split(".")[1] not in data["tabs"]:
            del prov[k]
    problems = []
    for name, raw in tabs.items():
        pol = raw.get("polarity", name)
        if pol not in ("negative", "positive"):
            problems.append(Problem("", f"tabs.{name}.polarity", pol,
                                    "'negative' or 'positive' (or a table named after it)"))
            continue
        base = template_tabs[pol]
        entry = {"polarity": pol}
        data["tabs"][name] = entry
        setv(f"tabs.{name}.polarity", pol, "data sheet" if "polarity" in raw else "derived",
             "" if "polarity" in raw else "the table's name")
        edge = raw.get("edge", base.edge)
        if edge not in length:
            problems.append(Problem("", f"tabs.{name}.edge", edge,
                                    "one of 'bottom', 'top', 'left', 'right'"))
            continue
        setv(f"tabs.{name}.edge", edge, "data sheet" if "edge" in raw else "template")
        try:
            width = parse(raw["width"], "m") if "width" in raw else base.width_m
            if "centre" in raw:
                centre = parse(raw["centre"], "m") - inset[edge]
            else:
                centre = base.position_m * length[edge] / (
                    tcell.geometry.width_m if edge in ("top", "bottom")
                    else tcell.geometry.height_m)
            thick = parse(raw["thickness"], "m") if "thickness" in raw else base.thickness_m
            free = parse(raw["free_length"], "m") if "free_length" in raw else \
                base.free_length_m
            weld = parse(raw["weld_resistance"], "ohm") if "weld_resistance" in raw else \
                base.weld_resistance_ohm
        except UnitError as exc:
            problems.append(Problem("", f"tabs.{name}", raw, exc.expected))
            continue
        if width > length[edge]:
            problems.append(Problem("", f"tabs.{name}.width", raw.get("width"),
                                    f"at most the coated {edge} edge ({length[edge] * 1e3:g} "
                                    "mm)"))
            continue
        moved = min(max(centre, width / 2), length[edge] - width / 2)
        setv(f"tabs.{name}.width", _fmt(width, "m"), "data sheet" if "width" in raw
             else "template")
        setv(f"tabs.{name}.centre", _fmt(moved, "m"), "derived",
             "the data sheet's position less the inset of the coated area" if "centre" in raw
             else "the template's position scaled to the edge")
        setv(f"tabs.{name}.thickness", _fmt(thick, "m"),
             "data sheet" if "thickness" in raw else "template")
        setv(f"tabs.{name}.material", raw.get("material", base.material),
             "data sheet" if "material" in raw else "template")
        setv(f"tabs.{name}.free_length", _fmt(free, "m"),
             "data sheet" if "free_length" in raw else "template")
        setv(f"tabs.{name}.weld_resistance", _fmt(weld, "ohm"),
             "data sheet" if "weld_resistance" in raw else "template")
    if problems:
        raise DataSheetError(problems, "")


def _match_dc_resistance(sheet, data, setv, source) -> list[str]:
    """Set the series resistance at the tab welds so that the model shows the data sheet's
    DC resistance on a 1C discharge pulse (one short run of the averaged layout)."""
    pulse = sheet.get("dc_resistance_pulse", 10.0)
    soc = sheet.get("dc_resistance_soc", 0.5)
    cell = cell_from_dict(data, source)
    r_model = pulse_resistance_ohm(cell, pulse, soc)
    delta = sheet["dc_resistance"] - r_model
    what = (f"{sheet['dc_resistance'] * 1e3:.3g} mohm, {pulse:g} s pulse at 1C from "
            f"{soc:.0%} SOC, 25 degC")
    if delta < 0:
        return [f"The template already shows {r_model * 1e3:.3g} mohm on the data sheet's DC "
                f"resistance pulse ({what}); the welds are left as they are. Calibrate the "
                "cell to measured curves."]
    total = series_resistance_ohm(data) + delta
    set_series_resistance(data, total)
    for name in data["tabs"]:
        setv(f"tabs.{name}.weld_resistance", data["tabs"][name]["weld_resistance"], "fitted",
             f"series contact resistance matching the data-sheet DC resistance ({what})")
    log.info("dc resistance: model %.3g mohm, sheet %.3g mohm", r_model * 1e3,
             sheet["dc_resistance"] * 1e3)
    return []


def pulse_resistance_ohm(cell, pulse_s: float = 10.0, soc: float = 0.5) -> float:
    """(rest voltage - voltage at the end of a 1C discharge pulse) / current, averaged
    layout on a coarse grid at 25 degC (collector resistance does not depend on the grid
    here: it is the tabs and foils in series)."""
    import explorer

    duty = explorer.duty.discharge(c_rate=1.0, end_time_s=pulse_s)
    ds = explorer.simulate(cell, duty, layout="averaged", grid=(4, 4), start_soc=soc,
                           start_temperature_C=25.0)
    rest = float(ds["ocv"].isel(time=0))
    return (rest - float(ds["voltage"].isel(time=-1))) / float(ds["current"].isel(time=-1))


# ------------------------------------------------------------------------------------------
# command line


def cmd_new_cell(datasheet: str | None, out: str | None) -> int:
    """``python -m explorer new-cell [datasheet.toml] [--out FILE]``: write the cell file.

    Without a data-sheet file the values are asked for one by one (with the template's
    values as defaults); that needs a terminal, so with input from a pipe or a file it
    is an error saying to give a data-sheet file.
    """
    if datasheet is None:
        if not _interactive():
            raise InputError(
                "new-cell: no data-sheet file given, and the input is not a terminal, so the "
                "values cannot be asked for; give a data-sheet TOML file (examples in "
                "demo_cells/datasheets/), e.g. `python -m explorer new-cell my_sheet.toml`")
        raw = ask_values()
        source = "<answers>"
        target = Path(out) if out else Path(f"{_slug(raw.get('name', 'my_cell'))}.toml")
    else:
        source = datasheet
        raw = _read_sheet(Path(datasheet))
        p = Path(datasheet)
        target = Path(out) if out else p.with_name(f"{p.stem}_cell.toml")
        if target.resolve() == p.resolve():
            raise OutputError(f"`--out` {out}: is the data sheet itself; choose another file")
    cell = from_datasheet(raw if datasheet is None else source, out=target)
    prov = cell.extra["provenance"]
    counts = {k: sum(1 for v in prov.values() if v.split(":")[0] == k) for k in PROVENANCE}
    print(f"wrote {target}")
    print(f"  {cell!r}")
    print("  values: " + ", ".join(f"{n} {k}" for k, n in counts.items() if n))
    print("  a template cell is a starting point: calibrate it to measured curves with "
          "`python -m explorer calibrate`")
    return 0


def _interactive() -> bool:
    try:
        return sys.stdin is not None and sys.stdin.isatty()
    except (AttributeError, ValueError):
        return False


def _slug(name: str) -> str:
    s = re.sub(r"[^A-Za-z0-9]+", "_", name).strip("_").lower()
    return s or "my_cell"


def ask_values(ask=None, say=None) -> dict:
    """Ask for each data-sheet value (defaults from the template); returns the file-form
    mapping. ``ask``/``say`` are the prompt and print functions (default input and print)."""
    ask = ask or (lambda prompt: input(prompt))
    say = say or print
    say("New cell from data-sheet values. Press Enter to take the [default]; leave optional "
        "values empty when the data sheet does not give them.")
    raw = {}
    chem = _ask_one(ask, say, _BY_KEY["chemistry"], "nmc")
    raw["chemistry"] = chem
    tname, _, tcell = _template(chem)
    g = tcell.geometry
    defaults = {
        "name": "My cell",
        "nominal_capacity": f"{tcell.nominal_capacity_Ah:g} Ah",
        "voltage_min": f"{tcell.voltage_min_V:g} V",
        "voltage_max": f"{tcell.voltage_max_V:g} V",
        "width": f"{(g.width_m + 2 * EDGE_INSET_M) * 1e3:g} mm",
        "height": f"{(g.height_m + 2 * EDGE_INSET_M) * 1e3:g} mm",
        "thickness": f"{g.stack_thickness_m * 1e3:g} mm",
        "temperature_min": f"{tcell.temperature_min_C:g} degC",
        "temperature_max": f"{tcell.temperature_max_C:g} degC",
    }
    for key in ("name", "nominal_capacity", "voltage_min", "voltage_max", "width", "height",
                "thickness", "mass", "unit_layers", "temperature_min", "temperature_max",
                "dc_resistance"):
        v = _ask_one(ask, say, _BY_KEY[key], defaults.get(key))
        if v is not None:
            raw[key] = v
    return raw


def _ask_one(ask, say, f: SheetField, default):
    unit = f" [{f.keyword_unit}]" if f.keyword_unit else ""
    shown = f" (default {default})" if default is not None else " (optional)"
    for _ in range(5):
        try:
            answer = ask(f"{f.prompt}{unit}{shown}: ").strip()
        except EOFError:
            raise InputError(f"new-cell: the input ended before `{f.key}` was given") from None
        if not answer:
            if default is None:
                return None
            answer = default
        if f.kind == "quantity" and re.fullmatch(r"[-+]?[\d.]+(e[-+]?\d+)?", answer, re.I):
            answer = f"{answer} {f.keyword_unit}"  # a bare number is in the prompt's unit
        try:
            value = _convert(f, answer)
            if f.kind == "quantity":
                _check_values({f.key: value}, "")
        except InputError as exc:
            say(f"  not accepted: {getattr(exc, 'expected', None) or exc}")
            continue
        return answer if f.kind != "integer" else value
    raise InputError(f"new-cell: no acceptable value for `{f.key}` after 5 tries")
