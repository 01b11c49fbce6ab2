"""Design limits and how a run's figures measure against them.

A :class:`Limits` states what the cooling must achieve: the hottest point of
the face, the largest spread across it, and optionally the core temperature,
the coolant outlet temperature, the plate pressure drop and the pump power.
:meth:`Limits.check` reads a results Dataset (and the design's hydraulics)
and returns each figure and its margin, positive when the limit is met.

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

# Limits on a temperature (degC) or a temperature difference (K): their margins
# are kelvin and are compared as they are.
_TEMPERATURES = ("temperature_max_C", "core_temperature_max_C", "coolant_outlet_C")
# Plausible band for a limit in degC; outside it the user most likely typed kelvin.
_TEMPERATURE_BAND_C = (-60.0, 200.0)
UNITS = {
    "temperature_max_C": "degC",
    "spread_K": "K",
    "core_temperature_max_C": "degC",
    "coolant_outlet_C": "degC",
    "pressure_drop_kPa": "kPa",
    "pump_power_W": "W",
}
LONG_NAMES = {
    "temperature_max_C": "hottest point of the face",
    "spread_K": "largest spread across the face",
    "core_temperature_max_C": "hottest core temperature estimate",
    "coolant_outlet_C": "hottest coolant outlet",
    "pressure_drop_kPa": "plate pressure drop",
    "pump_power_W": "pump power",
}


@dataclass(frozen=True)
class Limits:
    """Design limits; every field is optional but at least one must be set.

    Parameters
    ----------
    temperature_max_C : float, optional
        Hottest point of the face over the whole duty, degC.
    spread_K : float, optional
        Largest difference hottest minus coldest point of the face at any time, K.
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
        """Figures of a run and their margins against these limits.

        Parameters
        ----------
        ds : xarray.Dataset
            A results Dataset (see :mod:`explorer.results`).
        hydraulics : dict, optional
            ``cooling.hydraulics()`` of the design that was run; needed for the
            pressure-drop and pump-power limits.

        Returns
        -------
        dict
            ``figures`` (every figure available, name -> value), ``margins``
            (limit name -> limit minus figure, positive = met), ``met`` (bool)
            and ``worst`` (the limit with the smallest scaled margin).
        """
        figures = run_figures(ds, hydraulics)
        margins = {}
        for name in self.names():
            if figures.get(name) is None:
                raise InputError(f"Limits: `{name}` is set but the run has no such figure "
                                 f"({_missing_reason(name)})")
            margins[name] = getattr(self, name) - figures[name]
        scaled = self.scaled_margins(margins)
        worst = min(scaled, key=scaled.get)
        return {"figures": figures, "margins": margins, "met": scaled[worst] >= 0.0,
                "worst": worst, "worst_margin": scaled[worst]}

    def scaled_margins(self, margins: dict) -> dict:
        """Margins on one scale for comparison: kelvin for temperatures, fraction of the limit
        for the hydraulic ones. The sign (met or not) is unchanged."""
        out = {}
        for name, m in margins.items():
            out[name] = m if name in _TEMPERATURES or name == "spread_K" else m / getattr(self, name)
        return out


def run_figures(ds, hydraulics: dict | None = None) -> dict:
    """The figures limits are checked against, from a results Dataset and hydraulics.

    Missing inputs give ``None`` (e.g. no coolant stream, no hydraulics).
    """
    t_max = ds["temperature_max"].values
    t_min = ds["temperature_min"].values
    figures = {
        "temperature_max_C": float(t_max.max()),
        "spread_K": float((t_max - t_min).max()),
        "core_temperature_max_C": _peak(ds, "temperature_core_max"),
        "coolant_outlet_C": _peak(ds, "coolant_outlet"),
        "pressure_drop_kPa": None,
        "pump_power_W": None,
    }
    if hydraulics:
        if hydraulics.get("pressure_drop_Pa") is not None:
            figures["pressure_drop_kPa"] = float(hydraulics["pressure_drop_Pa"]) / 1e3
        if hydraulics.get("pump_power_W") is not None:
            figures["pump_power_W"] = float(hydraulics["pump_power_W"])
    return figures


def _peak(ds, name):
    if name not in ds:
        return None
    values = np.asarray(ds[name].values, dtype=float)
    if not values.size or np.isnan(values).all():
        return None
    return float(np.nanmax(values))


def _missing_reason(name: str) -> str:
    if name == "coolant_outlet_C":
        return "the cooling has no coolant stream"
    if name in ("pressure_drop_kPa", "pump_power_W"):
        return "the cooling has no hydraulics (not a cold plate)"
    return "the results Dataset lacks the variable"
