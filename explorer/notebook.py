"""Notebooks that travel: figures that also show without a kernel, tables a reviewer can read.

A notebook shared for a design review is often opened as exported HTML or on a machine without
the live plotly renderer. :func:`share_ready_figures` makes every plotly figure carry, beside
its live form, an HTML form that draws offline (plotly.js is stored once per notebook, at the
call). :func:`verdict_table` is the limits check as a rounded table with units.
"""

from __future__ import annotations

#: Short labels with units for the figures a limit is checked against (tables; the long
#: definitions are ``explorer.limits.LONG_NAMES``).
SHORT_LABELS = {
    "temperature_max_C": ("hottest point, core included", "°C"),
    "spread_K": ("in-cell spread", "K"),
    "cell_to_cell_K": ("cell to cell", "K"),
    "core_temperature_max_C": ("hottest core", "°C"),
    "coolant_outlet_C": ("coolant outlet", "°C"),
    "pressure_drop_kPa": ("plate pressure drop", "kPa"),
    "pump_power_W": ("pump power", "W"),
}


def share_ready_figures() -> None:
    """Show plotly figures both live and as offline HTML from here on (in this kernel).

    The live JupyterLab view is unchanged; an exported (``jupyter nbconvert --to html``) or
    kernel-less copy of the saved notebook draws the same figures with no network, because the
    first call stores plotly.js in the notebook once (about 5 MB).
    """
    import plotly.io as pio

    pio.renderers.default = "plotly_mimetype+notebook"


def verdict_table(limits, check: dict, decimals: int = 1):
    """The limits check as a pandas DataFrame: figure, unit, value, limit, margin, verdict.

    ``check`` is ``limits.check(ds)``; one row per limit that is set. Values are rounded to
    ``decimals`` (a tenth of a kelvin is what a thermal review reads).
    """
    import pandas as pd

    rows = []
    for name in limits.names():
        label, unit = SHORT_LABELS.get(name, (name, ""))
        value, margin = check["figures"].get(name), check["margins"].get(name)
        rows.append({"figure": label, "unit": unit,
                     "value": None if value is None else round(float(value), decimals),
                     "limit": getattr(limits, name),
                     "margin": None if margin is None else round(float(margin), decimals),
                     "verdict": check["verdicts"][name]})
    return pd.DataFrame(rows).set_index("figure")
