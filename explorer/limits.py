"""Design limits and how a run's figures measure against them.

A :class:`Limits` states what the cooling must achieve: the hottest point of
the cell, the largest spread within it, the spread between the cells of a
module, and optionally the core temperature, the coolant outlet temperature,
the plate pressure drop and the pump power. :meth:`Limits.check` reads a
results Dataset (one cell, or a module with a ``cell`` dimension) and the
design's hydraulics and gives each figure, its margin (positive when met) and
a verdict: "met", "not met" or "not evaluated" (with the reason) -- the
verdict rules of the design (DESIGN.md §3):

* ``temperature_max_C`` is held against the hottest point anywhere in the
  cell: the through-plane core estimate and the face surfaces included, not
  only the through-thickness-mean field;
* ``spread_K`` is held against the in-cell spread: hottest minus coldest
  point anywhere in the cell at one time, over the face and through the
  thickness. On ``layout="single"`` (one temperature over the face) the
  spread over the face cannot be seen: the limit is "not evaluated", unless
  the through-thickness difference the lumped model does see already
  exceeds it (a lower bound of the spread), which is "not met";
* ``cell_to_cell_K`` needs a module Dataset (see ``explorer.simulate_module``);
  on one cell it is "not evaluated";
* a module is judged by its worst cell.

>>> from explorer import Limits
>>> limits = Limits(temperature_max_C=45.0, spread_K=5.0)
>>> limits.names()
('temperature_max_C', 'spread_K')
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from explorer.validators import InputError

# Limits on a temperature (degC): their margins are kelvin and are compared as they are.
_TEMPERATURES = ("temperature_max_C", "core_temperature_max_C", "coolant_outlet_C")
# Limits on a temperature difference (K): margins in kelvin too.
_DIFFERENCES = ("spread_K", "cell_to_cell_K")
# Plausible band for a limit in degC; outside it the user most likely typed kelvin.
_TEMPERATURE_BAND_C = (-60.0, 200.0)
UNITS = {
    "temperature_max_C": "degC",
    "spread_K": "K",
    "cell_to_cell_K": "K",
    "core_temperature_max_C": "degC",
    "coolant_outlet_C": "degC",
    "pressure_drop_kPa": "kPa",
    "pump_power_W": "W",
}
#: What each limit's figure is, in words (the labels of tables and printouts).
LONG_NAMES = {
    "temperature_max_C": "hottest point anywhere in the cell (core estimate and faces included)",
    "spread_K": "largest in-cell spread, hottest minus coldest point anywhere in the cell at one "
                "time (over the face and through the thickness)",
    "cell_to_cell_K": "largest difference between the cells' mean temperatures at one time",
    "core_temperature_max_C": "hottest core temperature estimate (from the local generation)",
    "coolant_outlet_C": "hottest coolant outlet",
    "pressure_drop_kPa": "plate pressure drop",
    "pump_power_W": "pump power",
}
#: Figures reported beside the limits' own (no limit of their own).
FIGURE_UNITS = {"face_spread_K": "K", "through_thickness_K": "K", "mean_field_max_C": "degC"}
FIGURE_LONG_NAMES = {
    "face_spread_K": "largest spread of the through-thickness-mean field over the face",
    "through_thickness_K": "largest difference through the thickness at one point of the face",
    "mean_field_max_C": "hottest point of the through-thickness-mean field",
}
VERDICTS = ("met", "not met", "not evaluated")


@dataclass(frozen=True)
class Limits:
    """Design limits; every field is optional but at least one must be set.

    Parameters
    ----------
    temperature_max_C : float, optional
        Hottest point anywhere in the cell over the whole duty (the core
        estimate and the faces included), degC.
    spread_K : float, optional
        Largest in-cell spread: hottest minus coldest point anywhere in the
        cell at one time, over the face and through the thickness, K.
    cell_to_cell_K : float, optional
        Largest difference between the cells' mean temperatures at one time,
        over a module (a Dataset with a ``cell`` dimension), K.
    core_temperature_max_C : float, optional
        Hottest core (mid-thickness) temperature estimate, degC.
    coolant_outlet_C : float, optional
        Hottest coolant outlet temperature of the simulated cell, degC.
    pressure_drop_kPa : float, optional
        Plate pressure drop from the design's hydraulics, kPa.
    pump_power_W : float, optional
        Pump power from the design's hydraulics, W.

    Notes
    -----
    Limits come from the cell maker's data sheet and the applicable standards;
    a met limit in this model informs the design, it does not certify it.
    """

    temperature_max_C: float | None = None
    spread_K: float | None = None
    cell_to_cell_K: float | None = None
    core_temperature_max_C: float | None = None
    coolant_outlet_C: float | None = None
    pressure_drop_kPa: float | None = None
    pump_power_W: float | None = None

    def __post_init__(self):
        given = 0
        for f in fields(self):
            value = getattr(self, f.name)
            if value is None:
                continue
            given += 1
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise InputError(f"Limits: `{f.name}` must be a number in {UNITS[f.name]}, "
                                 f"got {value!r}")
            value = float(value)
            if not math.isfinite(value):
                raise InputError(f"Limits: `{f.name}` must be finite, got {value!r}")
            if f.name in _TEMPERATURES:
                lo, hi = _TEMPERATURE_BAND_C
                if not lo <= value <= hi:
                    hint = " (it looks like kelvin; give degC)" if value > 200 else ""
                    raise InputError(f"Limits: `{f.name}` must be within {lo:g}..{hi:g} degC, "
                                     f"got {value!r}{hint}")
            elif value <= 0:
                raise InputError(f"Limits: `{f.name}` must be > 0 {UNITS[f.name]}, got {value!r}")
            object.__setattr__(self, f.name, value)
        if not given:
            names = ", ".join(f"`{f.name}`" for f in fields(self))
            raise InputError(f"Limits: give at least one limit ({names})")

    def names(self) -> tuple[str, ...]:
        """Names of the limits that are set, in field order."""
        return tuple(f.name for f in fields(self) if getattr(self, f.name) is not None)

    def as_dict(self) -> dict:
        """The limits that are set, name -> value."""
        return {name: getattr(self, name) for name in self.names()}

    def check_reachable(self, sink_C: float, where: str = "") -> None:
        """Raise when a temperature limit is not above the coldest sink temperature.

        A cell that generates heat cannot be cooled below its coolant or
        ambient, so such a limit can never be met.
        """
        for name in _TEMPERATURES:
            value = getattr(self, name)
            if value is not None and value <= sink_C:
                prefix = f"{where}: " if where else ""
                raise InputError(
                    f"{prefix}limits below the inlet temperature: `{name}` = {value:g} degC is "
                    f"not above the coldest coolant inlet/ambient {sink_C:g} degC; expected a "
                    "limit above it (no cooling can take the cell below its sink)")

    def check(self, ds, hydraulics: dict | None = None) -> dict:
        """Figures of a run, their margins and verdicts against these limits.

        Parameters
        ----------
        ds : xarray.Dataset
            A results Dataset (see :mod:`explorer.results`), of one cell or of
            a module (a ``cell`` dimension: the figures are the worst cell's).
        hydraulics : dict, optional
            ``cooling.hydraulics()`` of the design that was run; needed for the
            pressure-drop and pump-power limits.

        Returns
        -------
        dict
            ``figures`` (every figure, name -> value, None where the run cannot
            give it), ``margins`` (limit name -> limit minus figure, positive =
            met; None when not evaluated), ``verdicts`` (limit name -> "met",
            "not met" or "not evaluated"), ``reasons`` (limit name -> why it was
            not evaluated, or what a verdict rests on), ``bounds`` (limit name
            -> a lower bound of a figure the run sees only in part), ``met``
            (True only when every set limit was evaluated and met),
            ``not_evaluated`` (names), ``worst`` and ``worst_margin`` (the
            evaluated limit with the smallest scaled margin; None when none
            was evaluated -- ``met`` is the verdict, a positive ``worst_margin``
            with ``met`` False means a limit was not evaluated), ``cells``
            (figure name -> the worst cell of a module, else None),
            ``worst_cell`` and ``warnings`` (what every verdict on this run must
            carry: a duty that ended early, figures the run cannot see).

        Raises
        ------
        InputError
            A hydraulic or coolant limit set for a design without a plate or a
            coolant stream (or called without its hydraulics).
        """
        ev = _evaluate(ds, hydraulics)
        figures = ev["figures"]
        margins, verdicts, reasons, bounds = {}, {}, {}, {}
        for name in self.names():
            limit = getattr(self, name)
            value = figures.get(name)
            if value is not None:
                margins[name] = limit - value
                verdicts[name] = "met" if margins[name] >= 0.0 else "not met"
                continue
            if name not in ev["reasons"]:
                raise InputError(f"Limits: `{name}` is set but the run has no such figure "
                                 f"({_missing_reason(name)})")
            bound = ev["bounds"].get(name)
            if bound is not None and bound[0] > limit:  # even the part it sees is over
                margins[name] = limit - bound[0]
                verdicts[name] = "not met"
                bounds[name] = bound[0]
                reasons[name] = (f"{bound[1]} ({bound[0]:.3g} K) already exceeds the limit; "
                                 f"{ev['reasons'][name]}")
            else:
                margins[name] = None
                verdicts[name] = "not evaluated"
                reasons[name] = ev["reasons"][name]
                if bound is not None:
                    bounds[name] = bound[0]
                    reasons[name] += (f"; {bound[1]} alone is {bound[0]:.3g} K, a lower bound "
                                      "only")
        scaled = self.scaled_margins(margins)
        worst = min(scaled, key=scaled.get) if scaled else None
        not_evaluated = tuple(n for n, v in verdicts.items() if v == "not evaluated")
        met = not not_evaluated and all(v == "met" for v in verdicts.values())
        cells = ev["cells"]
        worst_cell = cells.get(worst) if worst is not None else None
        return {"figures": figures, "margins": margins, "verdicts": verdicts,
                "reasons": reasons, "bounds": bounds, "met": met,
                "not_evaluated": not_evaluated, "worst": worst,
                "worst_margin": scaled[worst] if worst is not None else None,
                "cells": cells, "worst_cell": worst_cell, "warnings": ev["warnings"]}

    def scaled_margins(self, margins: dict) -> dict:
        """Margins on one scale for comparison: kelvin for temperatures and temperature
        differences, fraction of the limit for the hydraulic ones. The sign (met or not) is
        unchanged; limits not evaluated (margin None) are left out."""
        out = {}
        for name, m in margins.items():
            if m is None:
                continue
            kelvin = name in _TEMPERATURES or name in _DIFFERENCES
            out[name] = m if kelvin else m / getattr(self, name)
        return out


def run_figures(ds, hydraulics: dict | None = None) -> dict:
    """The figures limits are checked against, from a results Dataset and hydraulics.

    Missing inputs and figures the run cannot see give ``None`` (e.g. no coolant
    stream, no hydraulics, the spread of a ``single`` layout, the cell-to-cell
    spread of one cell). A module Dataset gives its worst cell's figures.
    """
    return _evaluate(ds, hydraulics)["figures"]


def _evaluate(ds, hydraulics) -> dict:
    """Figures, the worst cell of each, and why a figure is missing or only bounded."""
    from explorer import results as res

    hot, cold = res.hottest_anywhere(ds), res.coldest_anywhere(ds)
    face = res.per_cell(ds, "temperature_max") - res.per_cell(ds, "temperature_min")
    lumped = res.is_lumped(ds)
    figures, cells, reasons, bounds = {}, {}, {}, {}

    def worst(name, values):  # values (cells, time): the largest, and in which cell
        if values is None or not values.size or np.isnan(values).all():
            figures[name], cells[name] = None, None
            return
        per = np.nanmax(values, axis=1)
        row = int(np.nanargmax(per))
        figures[name] = float(per[row])
        cells[name] = res._cell_label(ds, row) if res.is_module(ds) else None

    worst("temperature_max_C", hot)
    worst("mean_field_max_C", res.per_cell(ds, "temperature_max"))
    worst("spread_K", hot - cold)
    worst("face_spread_K", face)
    worst("through_thickness_K", res.per_cell(ds, "through_thickness_difference")
          if "through_thickness_difference" in ds else None)
    worst("core_temperature_max_C", _series(ds, "temperature_core_max"))
    worst("coolant_outlet_C", _series(ds, "coolant_outlet"))
    if lumped:
        why = ("layout 'single' has one temperature over the face, so the spread over the "
               "face is not seen; run layout 'averaged' or 'distributed'")
        figures["spread_K"] = figures["face_spread_K"] = None
        cells["spread_K"] = cells["face_spread_K"] = None
        reasons["spread_K"] = why
        if figures["through_thickness_K"] is not None:
            bounds["spread_K"] = (figures["through_thickness_K"],
                                  "the through-thickness difference the lumped model sees")
    if res.is_module(ds) and ds.sizes["cell"] > 1:
        mean = res.per_cell(ds, "temperature_mean")
        figures["cell_to_cell_K"] = float(np.nanmax(mean.max(axis=0) - mean.min(axis=0)))
    else:
        figures["cell_to_cell_K"] = None
        reasons["cell_to_cell_K"] = ("one cell was run, so there is no cell-to-cell spread to "
                                     "see; run the module (explorer.simulate_module)")
    cells["cell_to_cell_K"] = None
    figures["pressure_drop_kPa"] = figures["pump_power_W"] = None
    if hydraulics:
        if hydraulics.get("pressure_drop_Pa") is not None:
            figures["pressure_drop_kPa"] = float(hydraulics["pressure_drop_Pa"]) / 1e3
        if hydraulics.get("pump_power_W") is not None:
            figures["pump_power_W"] = float(hydraulics["pump_power_W"])
    return {"figures": figures, "cells": cells, "reasons": reasons, "bounds": bounds,
            "warnings": _warnings(ds, lumped)}


def _series(ds, name):
    from explorer.results import per_cell

    return per_cell(ds, name) if name in ds else None


def _warnings(ds, lumped: bool) -> list[str]:
    """What every verdict on this run must carry."""
    try:
        from explorer.results import run_warnings
    except ImportError:  # until the run-status warnings land: the status in words
        status = str(ds.attrs.get("status", "completed"))
        out = ([] if status == "completed" else
               [f"the run did not complete ({status}): {ds.attrs.get('status_message', '')}"])
    else:
        out = list(run_warnings(ds))
    if "temperature_hottest" not in ds:
        out.append("this Dataset has no temperatures through the thickness (made by an older "
                   "version): the hottest point is the higher of the mean field and the core "
                   "estimate, and the spread spans the mean field over the face only")
    if lumped:
        out.append("layout 'single': one temperature over the face; figures over the face are "
                   "not seen")
    from explorer.results import is_module

    path = int(float(ds.attrs.get("cells_on_coolant_path", 1) or 1))
    if path > 1 and not is_module(ds):
        out.append(f"one cell (position {ds.attrs.get('cell_position', '?')}) of the {path} on "
                   "its coolant path was run, its upstream cells taken as equal to it; the "
                   "module's worst cell and cell-to-cell difference need "
                   "explorer.simulate_module")
    return out


def _missing_reason(name: str) -> str:
    if name == "coolant_outlet_C":
        return "the cooling has no coolant stream"
    if name in ("pressure_drop_kPa", "pump_power_W"):
        return "the cooling has no hydraulics (not a cold plate)"
    return "the results Dataset lacks the variable"


def figure_and_margin(figure: float, margin: float, digits: int = 4) -> tuple[str, str]:
    """A limit's figure to ``digits`` significant figures and its margin to the same decimal
    places (at most three), so that the shown margin is the shown limit minus the shown figure
    (22.01 K against 5 K: margin -17.01, not -17)."""
    shown = f"{figure:.{digits}g}"
    if "e" in shown:
        return shown, f"{margin:+.3g}"
    places = min(len(shown.split(".")[1]) if "." in shown else 0, 3)
    return shown, f"{margin:+.{places}f}"


def figure_text(name: str, value) -> str:
    """A figure with its unit for printouts, e.g. ``55.41 degC`` (``-`` when missing)."""
    unit = UNITS.get(name) or FIGURE_UNITS.get(name, "")
    return "-" if value is None else f"{value:.4g} {unit}".rstrip()


def verdict_lines(limits: Limits, check: dict) -> list[str]:
    """One line per set limit -- verdict, margin, the figure and what it spans -- then the
    overall verdict and the run's warnings; for printouts (CLI, demo)."""
    lines = []
    for name in limits.names():
        verdict = check["verdicts"][name]
        unit = UNITS[name].replace("degC", "K")
        limit = f"limit {getattr(limits, name):g} {UNITS[name]}"
        if verdict == "not evaluated":
            lines.append(f"{name}: not evaluated ({limit}): {check['reasons'][name]}")
            continue
        figure = check["figures"].get(name)
        shown = (figure_text(name, figure) if figure is not None
                 else f">= {figure_text(name, check['bounds'][name])}")
        cell = check.get("cells", {}).get(name)
        where = f" in cell {cell}" if cell is not None else ""
        margin = check["margins"][name]
        margin_text = (figure_and_margin(figure, margin)[1] if figure is not None
                       else f"{margin:+.4g}")  # to the shown figure's decimals
        text = (f"{name}: {'met' if verdict == 'met' else 'NOT met'}, margin "
                f"{margin_text} {unit}: {LONG_NAMES[name]} {shown}{where} ({limit})")
        if name in check["reasons"]:
            text += f"; {check['reasons'][name]}"
        lines.append(text)
    if check["met"]:
        lines.append("overall: every limit met")
    elif check["not_evaluated"] and all(check["verdicts"][n] != "not met"
                                        for n in limits.names()):
        lines.append("overall: NOT shown to be met (not evaluated: "
                     f"{', '.join(check['not_evaluated'])})")
    else:
        failed = [n for n in limits.names() if check["verdicts"][n] == "not met"]
        lines.append(f"overall: NOT met ({', '.join(failed)})")
    lines += [f"warning: {w}" for w in check.get("warnings", [])]
    return lines
