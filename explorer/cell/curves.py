"""Measured curves named in a cell file, turned into the electrodes' potential objects.

Keys (see :mod:`explorer.cell.schema`; tables are read by :mod:`explorer.materials.tables`):

* ``[negative]`` / ``[positive]``: ``ocp = "<material key>"`` or ``ocp_table = "file.csv"``
  (columns ``stoichiometry``, ``ocp_V``, optional ``dUdT_V_K``), and optionally
  ``entropic_table = "file.csv"`` (``stoichiometry``, ``dUdT_V_K``) replacing the dU/dT.
* ``[cell]``: ``ocv_table = "file.csv"`` (``soc``, ``ocv_V``, optional ``dUdT_V_K``), the
  full-cell OCV; ``entropic_table = "file.csv"`` (``soc``, ``dUdT_V_K``), the full-cell dU/dT.

A full-cell table keeps the negative electrode's curve and sets the positive one so that the
cell follows the table at rest: ``U_p(x_p) = OCV(soc) + U_n(x_n(soc))`` and ``dU_p/dT =
dU_cell/dT + dU_n/dT``, with both stoichiometries moving linearly across the file's windows.
Paths are relative to the cell file's folder (to the current folder for cells built from text
or a mapping).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from explorer.materials import OCP
from explorer.materials.ocp import OpenCircuitPotential
from explorer.materials.tables import TableError, TabulatedCurve, check_table, read_table
from explorer.validators import MISSING, InputError, clip

__all__ = ["resolve_curves", "CURVE_KEYS"]

#: table -> the keys this module reads (popped from the values before the dataclasses)
CURVE_KEYS = {"cell": ("ocv_table", "entropic_table"),
              "electrode": ("ocp_table", "entropic_table")}


class _Zero:
    """dU/dT of zero (no measured entropic coefficient given)."""

    def __call__(self, x):
        return np.zeros_like(np.asarray(x, dtype=float))[()]

    def __eq__(self, other):
        return isinstance(other, _Zero)

    def __hash__(self):
        return hash("_Zero")


class _FromCell:
    """A positive-electrode curve from a full-cell curve and the negative electrode's curve:
    ``cell(soc) + negative(x_n(soc))`` with ``soc`` from ``x_p`` (linear windows)."""

    def __init__(self, cell_curve, negative_curve, neg_window, pos_window):
        self.cell_curve, self.negative_curve = cell_curve, negative_curve
        self.n0, self.n1 = neg_window
        self.p0, self.p1 = pos_window

    def __call__(self, x_p):
        soc = (self.p0 - np.asarray(x_p, dtype=float)) / (self.p0 - self.p1)
        x_n = self.n0 + soc * (self.n1 - self.n0)
        return self.cell_curve(soc) + self.negative_curve(x_n)

    def __eq__(self, other):
        return isinstance(other, _FromCell) and vars(self) == vars(other)

    def __hash__(self):
        return hash((self.n0, self.n1, self.p0, self.p1))


def _path(text: str, base_dir: Path) -> Path:
    if not text.strip() or "\x00" in text:
        raise InputError("the name of a CSV file (no NUL character, not empty)")
    p = Path(text)
    return p if p.is_absolute() else base_dir / p


def _is_file(p: Path) -> bool:
    """``Path.is_file`` that answers False for names the OS refuses (too long, NUL byte)."""
    try:
        return p.is_file()
    except (OSError, ValueError):
        return False


def resolve_curves(r, values: dict, base_dir: Path | None) -> dict:
    """Turn the curve keys of ``values`` (the loader's per-table field values) into the
    electrodes' ``ocp`` entries: a material key stays a key; tables become an
    :class:`~explorer.materials.ocp.OpenCircuitPotential`. Problems go to ``r.add``.

    Returns ``{"tables": {field: {"file", "path" (absolute), "sha256"}}, "warnings": [...]}``
    (a tool that writes the cell file elsewhere rewrites the table keys from "path").
    """
    base_dir = Path.cwd() if base_dir is None else Path(base_dir)
    info = {"tables": {}, "warnings": []}
    cellv = values["cell"]
    cell_keys = {k: cellv.pop(k, None) for k in CURVE_KEYS["cell"]}
    elec_keys = {name: {k: values[name].pop(k, None) for k in CURVE_KEYS["electrode"]}
                 for name in ("negative", "positive")}

    def read(field, text, x_name, wanted, optional=()):
        try:
            path = _path(text, base_dir)
            if not _is_file(path):
                raise InputError(f"a CSV file (looked for {clip(str(path), 200)})")
            t = read_table(path, x_name, wanted, optional)
        except TableError as exc:
            r.add(field, exc.value, f"in {text}, line {exc.line}, column `{exc.column}`: "
                  f"{exc.expected}" if exc.line else f"in {text}: {exc.expected}")
            return None
        except InputError as exc:
            r.add(field, text, str(exc))
            return None
        info["tables"][field] = {"file": Path(text).name, "path": str(path.resolve()),
                                 "sha256": t.sha256}
        return t

    def check(field, text, table, kind, window, falling=None):
        try:
            check_table(table, kind, window, falling)
            return True
        except TableError as exc:
            at = f"line {exc.line}, " if exc.line else ""
            r.add(field, exc.value, f"in {text}, {at}column `{exc.column}`: {exc.expected}")
            return False

    curves = {}  # electrode -> [potential, entropic, description parts]
    for name in ("negative", "positive"):
        e, keys = values[name], elec_keys[name]
        key, table = e.get("ocp"), keys["ocp_table"]
        window = (e.get("stoichiometry_0"), e.get("stoichiometry_100"))
        if name == "positive" and cell_keys["ocv_table"] is not None:
            if key is not None or table is not None:
                r.add("positive.ocp_table" if table is not None else "positive.ocp",
                      table if table is not None else key,
                      "no positive curve: the full-cell cell.ocv_table sets the positive "
                      "electrode's potential (remove one of the two)")
            continue
        if key is not None and table is not None:
            r.add(f"{name}.ocp_table", table, f"either {name}.ocp (a material key) or "
                  f"{name}.ocp_table (a measured table), not both; {name}.ocp is {key!r}")
            continue
        if key is None and table is None:
            if e and not any(p.field == f"{name}.ocp" for p in r.problems):
                r.add(f"{name}.ocp", MISSING, "a material key (one of "
                      f"{', '.join(map(repr, OCP))}) or {name}.ocp_table = \"file.csv\" "
                      "(columns stoichiometry, ocp_V)")
            continue
        if key is not None:
            m = OCP[key]
            curves[name] = [m.potential, m.entropic, [f"{key} (material)"]]
        else:
            t = read(f"{name}.ocp_table", table, "stoichiometry", ("ocp",), ("dudt",))
            if t is None or None in window:
                continue
            if not check(f"{name}.ocp_table", table, t, "potential", window, falling=True):
                continue
            pot, ent = TabulatedCurve(t.x, t.columns["ocp"]), None
            parts = [f"potential: measured table {Path(table).name}"]
            if "dudt" in t.columns:
                if not check(f"{name}.ocp_table", table, t, "entropic", window):
                    continue
                ent = TabulatedCurve(t.x, t.columns["dudt"], beyond="hold")
                parts.append(f"dU/dT: {Path(table).name}")
            curves[name] = [pot, ent, parts]
        etable = keys["entropic_table"]
        if etable is not None and name in curves:
            if table is not None and curves[name][1] is not None:
                r.add(f"{name}.entropic_table", etable, f"one dU/dT source: {table} has a "
                      "dU/dT column already (remove one)")
                continue
            t = read(f"{name}.entropic_table", etable, "stoichiometry", ("dudt",))
            if t is None or None in window:
                continue
            if check(f"{name}.entropic_table", etable, t, "entropic", window):
                curves[name][1] = TabulatedCurve(t.x, t.columns["dudt"], beyond="hold")
                curves[name][2].append(f"dU/dT: measured table {Path(etable).name}")

    _full_cell(r, values, cell_keys, elec_keys, curves, read, check, info)
    if r.problems:
        return info
    for name, (pot, ent, parts) in curves.items():
        if ent is None:
            ent = _Zero()
            info["warnings"].append(
                f"{name} electrode: its measured table gives no dU/dT, so its entropic "
                f"(reversible) heat is taken as zero; add {name}.entropic_table or a dUdT_V_K "
                "column")
            parts.append("dU/dT: none given, taken as zero")
        key = values[name].get("ocp")
        if isinstance(key, str) and len(parts) == 1:
            continue  # a plain material key
        values[name]["ocp"] = OpenCircuitPotential(
            name=f"{name} (measured tables)", description=f"{name} electrode from measured "
            "tables named in the cell file", source="; ".join(parts),
            _potential=pot, _entropic=ent)
    return info


def _full_cell(r, values, cell_keys, elec_keys, curves, read, check, info) -> None:
    """The [cell] ocv_table / entropic_table: set the positive curve from the full cell's."""
    ocv_text, dudt_text = cell_keys["ocv_table"], cell_keys["entropic_table"]
    if ocv_text is None and dudt_text is None:
        return
    neg, pos = values["negative"], values["positive"]
    nw = (neg.get("stoichiometry_0"), neg.get("stoichiometry_100"))
    pw = (pos.get("stoichiometry_0"), pos.get("stoichiometry_100"))
    if "negative" not in curves or None in nw or None in pw:
        return  # the negative curve or a window is wrong: reported already
    n_pot, n_ent, _ = curves["negative"]
    n_ent = n_ent if n_ent is not None else _Zero()
    cell_dudt = None
    if ocv_text is not None:
        t = read("cell.ocv_table", ocv_text, "soc", ("ocv",), ("dudt",))
        if t is None or not check("cell.ocv_table", ocv_text, t, "potential", (0.0, 1.0),
                                  falling=False):
            return
        ocv = TabulatedCurve(t.x, t.columns["ocv"])
        parts = [f"potential: full-cell OCV table {Path(ocv_text).name} plus the negative "
                 "curve"]
        if "dudt" in t.columns:
            if not check("cell.ocv_table", ocv_text, t, "entropic", (0.0, 1.0)):
                return
            cell_dudt = TabulatedCurve(t.x, t.columns["dudt"], beyond="hold")
            parts.append(f"dU/dT: {Path(ocv_text).name} plus the negative's")
        curves["positive"] = [_FromCell(ocv, n_pot, nw, pw), None, parts]
        x = np.linspace(min(pw), max(pw), 401)
        rising = np.diff(curves["positive"][0](x)) > 1e-4
        if rising.any():
            soc = float((pw[0] - x[int(np.argmax(rising))]) / (pw[0] - pw[1]))
            info["warnings"].append(
                f"cell.ocv_table: the positive potential it implies with the negative curve "
                f"rises with lithiation near SOC {soc:.2f} (the OCV table and the negative "
                "curve disagree there; a measured negative ocp_table helps)")
    if dudt_text is not None:
        if cell_dudt is not None:
            r.add("cell.entropic_table", dudt_text, f"one full-cell dU/dT source: {ocv_text} "
                  "has a dU/dT column already (remove one)")
            return
        pos_parts = curves.get("positive", [None, None, []])[2]
        if ocv_text is None and any(p.startswith("dU/dT") for p in pos_parts):
            r.add("cell.entropic_table", dudt_text, "either the full-cell dU/dT or the "
                  "positive electrode's measured dU/dT (positive.entropic_table or a dUdT "
                  "column of positive.ocp_table), not both")
            return
        t = read("cell.entropic_table", dudt_text, "soc", ("dudt",))
        if t is None or not check("cell.entropic_table", dudt_text, t, "entropic", (0.0, 1.0)):
            return
        cell_dudt = TabulatedCurve(t.x, t.columns["dudt"], beyond="hold")
        if "positive" in curves:
            curves["positive"][2].append(f"dU/dT: full-cell table {Path(dudt_text).name} plus "
                                         "the negative's")
    if "positive" not in curves:
        return
    if cell_dudt is not None:
        curves["positive"][1] = _FromCell(cell_dudt, n_ent, nw, pw)
    elif ocv_text is not None:
        # no full-cell dU/dT: the positive follows the negative, the cell's dU/dT is zero
        curves["positive"][1] = _FromCell(_Zero(), n_ent, nw, pw)
        curves["positive"][2].append("dU/dT: none given, the cell's taken as zero")
        info["warnings"].append(
            "cell.ocv_table gives no dU/dT: the cell's entropic (reversible) heat is taken as "
            "zero; add cell.entropic_table or a dUdT_V_K column")


def tables_sha256(file_sha: str, info: dict) -> str:
    """The cell's SHA-256 when it names tables: over the file's hash and each table's."""
    if not info["tables"]:
        return file_sha
    h = hashlib.sha256(file_sha.encode())
    for field in sorted(info["tables"]):
        h.update(f"{field}={info['tables'][field]['sha256']}".encode())
    return h.hexdigest()
