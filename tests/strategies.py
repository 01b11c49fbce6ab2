"""Hypothesis strategies for the property suite: mutated input files and wild argument values.

Every file mutation starts from a real file of the repository (a demo cell, a bundled scenario,
the bundled load profile, the app's inputs file) and damages it the way files get damaged in
practice: a key dropped or repeated, a value of the wrong type, a missing or wrong unit, a
negative/zero/NaN/infinite/huge number, odd characters, a truncated file, Latin-1 bytes, a
byte-order mark, an empty file. Argument values mix plausible values (so that some calls get
through and run) with values of every wrong kind.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[1]
DEMO_CELLS = sorted((ROOT / "demo_cells").glob("*.toml"))
SCENARIOS = sorted((ROOT / "demo_cells" / "scenarios").glob("*.toml"))
PROFILES = sorted((ROOT / "demo_cells" / "profiles").glob("*.csv"))

# ---------------------------------------------------------------------------------- values

#: numbers that break naive code: signs, zeros, NaN, infinities, the float extremes
EDGE_NUMBERS = (0, 0.0, -0.0, -1, -1e-300, 1e-300, 5e-324, 1e300, -1e300, 1.7976931348623157e308,
                math.nan, math.inf, -math.inf, 2**63, -(2**63) - 1, 10**30)
#: words of the project's vocabularies, so a mutated value is sometimes valid somewhere else
DOMAIN_WORDS = ("discharge", "charge", "rest", "hold_voltage", "profile_csv", "repeat",
                "cc_cv_charge", "convection", "face_plate", "edge_plate", "tab_cooling",
                "cold_plate", "fixed_sink", "water", "eg50", "pg30", "eg0", "pg99", "brine",
                "single", "averaged", "distributed", "spm", "spme", "dfn", "SPMe", "bottom",
                "top", "left", "right", "back", "front", "both", "across", "+x", "-y",
                "aluminium", "copper", "graphite", "nmc", "lfp", "van_nmc_66ah", "rack_lfp_26ah",
                "flow_L_min", "inlet_C", "fin_mm", "tim_W_mK", "h_W_m2K", "cells_per_plate",
                "negative", "positive", "unobtainium", "")
#: unit texts: right ones for some fields, wrong dimension for others, unknown, malformed
UNITS = ("mm", "um", "m", "Ah", "mAh", "V", "mV", "degC", "degF", "K", "delta_degC", "kelvin",
         "mol/m^3", "mol/L", "m^2/s", "kJ/mol", "J/mol", "S/m", "g/cm^3", "kg/m^3", "J/kg/K",
         "W/m/K", "uohm", "ohm", "m^2.5/mol^0.5/s", "%", "s", "kg", "furlong", "m/", "**", "1/0",
         "µm", "m m", "")
#: odd strings: control characters, right-to-left marks, NUL, non-breaking space, emoji
ODD_TEXT = ("\x00", "\x7f", "\u202e", "\u00a0", "\ufeff", "\U0001f50b", "\\", "'", '"',
            "1,5", "0x10", "1_000", "--1", "+-1", ".", "e5", "1e", "NaN", "inf", "-inf",
            "None", "null", "true", " ", "\t", "Ä", "∞", "½")

finite_floats = st.floats(allow_nan=False, allow_infinity=False)
any_floats = st.floats(allow_nan=True, allow_infinity=True)


def wild_values():
    """Any Python value a user might pass by mistake (and a few no one would)."""
    return st.one_of(
        st.sampled_from(EDGE_NUMBERS),
        any_floats,
        st.integers(min_value=-(10**6), max_value=10**6),
        st.none(),
        st.booleans(),
        st.text(max_size=8),
        st.sampled_from(ODD_TEXT + DOMAIN_WORDS),
        st.lists(finite_floats, max_size=3),
        st.tuples(st.integers(-5, 5), st.integers(-5, 5)),
        st.dictionaries(st.text(max_size=3), st.integers(), max_size=2),
        st.sampled_from([np.float64("nan"), np.float32(2.5), np.int64(3), np.array(1.0),
                         np.array([1.0, 2.0]), np.array([]), 1 + 2j, b"1.0", object()]),
    )


def weighted(*pairs):
    """``(weight, strategy)`` pairs: one strategy drawn with those odds (``st.one_of`` would
    treat a repeated strategy as one branch)."""
    table = [strategy for weight, strategy in pairs for _ in range(weight)]
    return st.integers(0, len(table) - 1).flatmap(lambda k: table[k])


def maybe(plausible, wild=None):
    """Plausible values three times in four, wild ones otherwise."""
    return weighted((3, plausible), (1, wild if wild is not None else wild_values()))


# ------------------------------------------------------------------------------ TOML literals

def _toml_float(x: float) -> str:
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    text = repr(float(x))
    return text if any(c in text for c in ".en") else text + ".0"


def _toml_string(s: str) -> str:
    return json.dumps(s)  # a JSON string is a valid TOML basic string


def _number_text():
    return st.one_of(
        st.sampled_from(["0", "-0", "-1", "1e400", "-1e400", "1e-400", "nan", "inf", "3", "0.5",
                         "1e300", "12", "240", "0.000001", ".5", "5.", "1e3"]),
        finite_floats.map(lambda x: f"{x:g}"),
    )


def toml_literals():
    """A TOML value of any type, as text (valid TOML syntax, except where noted)."""
    quantity = st.builds(lambda n, u: _toml_string(f"{n} {u}".strip()), _number_text(),
                         st.sampled_from(UNITS))
    return weighted(
        (4, quantity),
        (1, any_floats.map(_toml_float)),
        (1, st.sampled_from(EDGE_NUMBERS).map(lambda v: _toml_float(v) if isinstance(v, float)
                                              else str(v))),
        (1, st.integers(min_value=-(2**70), max_value=2**70).map(str)),
        (1, st.sampled_from(["true", "false", "[]", "[1, 2]", "[1, 2, 3]", '["a"]', "[0, 0]",
                             "[-4, 4]", "[4.5, 4]", "[100000, 100000]", "{}", "{ a = 1 }",
                             "1979-05-27", "07:32:00", '""', "[[1], [2]]", "[nan, 1]"])),
        (2, st.sampled_from(DOMAIN_WORDS + ODD_TEXT).map(_toml_string)),
        (1, st.text(max_size=10).map(_toml_string)),
        (1, st.sampled_from(["", "=", "\"unterminated", "[1, ", "'lit", "x y"])),  # bad TOML
    )


# ------------------------------------------------------------------------------ TOML mutations

_KEY_LINE = re.compile(r"^(?P<indent>\s*)(?P<key>[A-Za-z0-9_\-]+)\s*=\s*(?P<value>.*)$")
_QUANTITY = re.compile(r'^"(?P<num>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?P<unit>[^"]*)"')


def key_line_indices(lines: list[str]) -> list[int]:
    return [i for i, ln in enumerate(lines) if _KEY_LINE.match(ln)]


def header_line_indices(lines: list[str]) -> list[int]:
    return [i for i, ln in enumerate(lines) if ln.lstrip().startswith("[")]


#: factors that keep a value's type and unit but move it to the edge of (or out of) reason
SCALE_FACTORS = (0.0, -1.0, 1e-300, 1e-9, 1e-3, 0.1, 0.5, 0.9, 1.1, 2.0, 10.0, 1e3, 1e9, 1e200,
                 1e308)


def _scaled(value: str):
    """The same kind of value, scaled: a quantity keeps its unit, a number stays a number."""
    value = value.split("#")[0].strip()
    q = _QUANTITY.match(value)
    factor = st.sampled_from(SCALE_FACTORS)
    if q is not None:
        unit = q.group("unit")
        return factor.map(lambda f: _toml_string(f"{float(q.group('num')) * f:g} {unit}".strip()))
    if re.fullmatch(r"[-+]?\d+", value):
        return st.sampled_from(["0", "1", "2", "3", "10000", "10001", "-1", str(int(value) * 2)])
    try:
        number = float(value)
    except ValueError:
        return toml_literals()
    return st.one_of(factor.map(lambda f: _toml_float(number * f)),
                     st.sampled_from(["0.001", "0.999", "0.5", "1e-12", "0.999999"]))


@st.composite
def _line_mutation(draw, lines: list[str]) -> list[str]:
    """One edit of the lines of a TOML file."""
    lines = list(lines)
    keys = key_line_indices(lines)
    kind = draw(st.sampled_from(("scale",) * 6 + ("value",) * 3 + (
        "drop", "duplicate", "rename", "strip_unit", "wrong_unit", "drop_header",
        "duplicate_header", "append")))
    if kind == "drop_header" or kind == "duplicate_header":
        heads = header_line_indices(lines)
        if heads:
            i = draw(st.sampled_from(heads))
            if kind == "drop_header":
                del lines[i]
            else:
                lines.append(lines[i])
        return lines
    if kind == "append":
        head = draw(st.sampled_from(["[extra]", "stray", "cell", "[cell]"]))
        lines.append(head + draw(st.sampled_from(["", " = 1", ' = "x"'])))
        return lines
    if not keys:
        return lines
    i = draw(st.sampled_from(keys))
    m = _KEY_LINE.match(lines[i])
    indent, key, value = m["indent"], m["key"], m["value"]
    if kind == "scale":
        lines[i] = f"{indent}{key} = {draw(_scaled(value))}"
    elif kind == "value":
        lines[i] = f"{indent}{key} = {draw(toml_literals())}"
    elif kind == "drop":
        del lines[i]
    elif kind == "duplicate":
        lines.insert(i + 1, f"{indent}{key} = {draw(toml_literals())}")
    elif kind == "rename":
        new = draw(st.sampled_from([key + "s", key[:-1] or "x", key.upper(), "x" + key,
                                    key.replace("_", "-"), "unknown_key"]))
        lines[i] = f"{indent}{new} = {value}"
    else:
        q = _QUANTITY.match(value)
        if q is None:
            lines[i] = f"{indent}{key} = {draw(toml_literals())}"
        elif kind == "strip_unit":
            num = q["num"]
            lines[i] = f"{indent}{key} = {draw(st.sampled_from([num, _toml_string(num)]))}"
        else:
            unit = draw(st.sampled_from(UNITS))
            text = f"{q.group('num')} {unit}".strip()
            lines[i] = f"{indent}{key} = {_toml_string(text)}"
    return lines


@st.composite
def _byte_mutation(draw, data: bytes) -> bytes:
    """One damage to the bytes of a file."""
    kind = draw(st.sampled_from(("truncate", "latin1", "bom", "empty", "odd_bytes", "crlf",
                                 "nul")))
    if kind == "truncate":
        return data[:draw(st.integers(0, max(0, len(data) - 1)))]
    if kind == "latin1":
        pos = draw(st.integers(0, len(data)))
        return data[:pos] + draw(st.sampled_from(["Ä", "é", "°C", "µm", "ø"])).encode("latin-1") \
            + data[pos:]
    if kind == "bom":
        return b"\xef\xbb\xbf" + data
    if kind == "empty":
        return draw(st.sampled_from([b"", b" ", b"\n", b"\xef\xbb\xbf", b"\r\n\r\n"]))
    if kind == "crlf":
        return data.replace(b"\n", b"\r\n")
    if kind == "nul":
        return data.replace(b"\n", b"\n\x00", 1)
    pos = draw(st.integers(0, len(data)))
    return data[:pos] + draw(st.binary(min_size=1, max_size=6)) + data[pos:]


@st.composite
def mutated_text_file(draw, text: str, line_edits=_line_mutation, damage=True) -> bytes:
    """``text`` with 1-2 line edits, then (with ``damage``) sometimes one byte-level damage."""
    lines = text.splitlines()
    for _ in range(draw(st.integers(1, 2))):
        lines = draw(line_edits(lines))
    data = ("\n".join(lines) + "\n").encode("utf-8")
    if damage and draw(st.integers(0, 3)) == 0:
        data = draw(_byte_mutation(data))
    return data


def mutated_toml(text: str):
    return mutated_text_file(text)


@st.composite
def _scale_only(draw, lines: list[str]) -> list[str]:
    lines = list(lines)
    i = draw(st.sampled_from(key_line_indices(lines)))
    m = _KEY_LINE.match(lines[i])
    lines[i] = f"{m['indent']}{m['key']} = {draw(_scaled(m['value']))}"
    return lines


def scaled_toml(text: str):
    """``text`` with one or two values scaled (same type, same unit): files that parse."""
    return mutated_text_file(text, line_edits=_scale_only, damage=False)


# ------------------------------------------------------------------------------- CSV mutations

CSV_CELLS = ("", " ", "nan", "inf", "-inf", "1e400", "-5", "0", "abc", "1,5", "1e308", "-1e308",
             "1e-320", "12.5", '"7"', "0x1A", "\x00", "Ä", "1 s", "--1")
CSV_HEADERS = ("time [s]", "time [min]", "time [h]", "time [ms]", "time", "current [A]",
               "current [mA]", "current [kA]", "power [W]", "power [kW]", "power [hp]",
               "power", "voltage [V]", "Time [S]", " time [ s ] ", "time [s", "[s]", "")


@st.composite
def _csv_line_mutation(draw, lines: list[str]) -> list[str]:
    lines = list(lines)
    data_rows = [i for i, ln in enumerate(lines) if ln and not ln.startswith("#")]
    if not data_rows:
        return lines
    head = data_rows[0]
    body = data_rows[1:]
    kind = draw(st.sampled_from(("cell", "cell", "header", "drop_row", "swap_rows", "dup_row",
                                 "drop_column", "extra_column", "separator", "keep_few")))
    if kind == "header":
        cols = lines[head].split(",")
        j = draw(st.integers(0, len(cols) - 1))
        cols[j] = draw(st.sampled_from(CSV_HEADERS))
        lines[head] = ",".join(cols)
    elif kind == "keep_few":
        n = draw(st.integers(0, 3))
        lines = [ln for i, ln in enumerate(lines) if i <= head or i in body[:n]]
    elif not body:
        return lines
    elif kind == "cell":
        i = draw(st.sampled_from(body))
        cols = lines[i].split(",")
        j = draw(st.integers(0, len(cols) - 1))
        cols[j] = draw(st.one_of(st.sampled_from(CSV_CELLS), finite_floats.map(repr)))
        lines[i] = ",".join(cols)
    elif kind == "drop_row":
        del lines[draw(st.sampled_from(body))]
    elif kind == "swap_rows" and len(body) > 1:
        a, b = draw(st.sampled_from(body[:-1])), None
        b = body[body.index(a) + 1]
        lines[a], lines[b] = lines[b], lines[a]
    elif kind == "dup_row":
        i = draw(st.sampled_from(body))
        lines.insert(i, lines[i])
    elif kind == "drop_column":
        j = draw(st.integers(0, 1))
        lines = [ln if i < head else ",".join(c for k, c in enumerate(ln.split(",")) if k != j)
                 for i, ln in enumerate(lines)]
    elif kind == "extra_column":
        lines = [ln if i < head else ln + ",1" for i, ln in enumerate(lines)]
    elif kind == "separator":
        lines = [ln.replace(",", draw(st.sampled_from([";", "\t", ", ", " "])))
                 for ln in lines]
    return lines


def mutated_csv(text: str):
    return mutated_text_file(text, line_edits=_csv_line_mutation)


#: load values (W or A) that parse but push the cell: huge, negative (charging), tiny, zero
LOADS = ("0", "-1e4", "1e4", "1e6", "1e-300", "-5", "5000", "1e300", "-1e300", "250", "-250")


@st.composite
def _csv_load_edit(draw, lines: list[str]) -> list[str]:
    lines = list(lines)
    rows = [i for i, ln in enumerate(lines) if ln[:1].isdigit()]
    head = rows[0] - 1
    if draw(st.integers(0, 4)) == 0:
        unit = draw(st.sampled_from(["[kW]", "[mW]", "[W]"]))
        lines[head] = lines[head].replace("[W]", unit)
    else:
        i = draw(st.sampled_from(rows))
        t, _ = lines[i].split(",", 1)
        lines[i] = f"{t},{draw(st.sampled_from(LOADS))}"
    return lines


def scaled_csv(text: str):
    """The profile with one or two loads (or the load unit) changed: files that parse."""
    return mutated_text_file(text, line_edits=_csv_load_edit, damage=False)


# ------------------------------------------------------------------------------- JSON mutations

@st.composite
def mutated_json(draw, doc: dict) -> bytes:
    """The app's JSON inputs file with fields dropped, retyped or added, or its bytes damaged."""
    doc = json.loads(json.dumps(doc))
    inputs = doc["inputs"]
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(("value", "value", "drop", "unknown", "format", "version",
                                     "inputs")))
        name = draw(st.sampled_from(sorted(inputs) or ["cell"]))
        if kind == "value":
            inputs[name] = draw(json_values())
        elif kind == "drop":
            inputs.pop(name, None)
        elif kind == "unknown":
            inputs[draw(st.sampled_from(["x", name + "_", "flow"]))] = draw(json_values())
        elif kind in ("format", "version"):
            doc[kind] = draw(json_values())
        else:
            doc["inputs"] = draw(json_values())
            break
    data = json.dumps(doc, allow_nan=True).encode("utf-8")
    if draw(st.integers(0, 3)) == 0:
        data = draw(_byte_mutation(data))
    return data


def json_values():
    return st.one_of(
        st.sampled_from(EDGE_NUMBERS), any_floats, st.integers(), st.none(), st.booleans(),
        st.text(max_size=8), st.sampled_from(ODD_TEXT + DOMAIN_WORDS),
        st.lists(st.integers(), max_size=2), st.dictionaries(st.text(max_size=2), st.integers(),
                                                             max_size=1),
    )
