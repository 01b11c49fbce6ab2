"""Pouch Thermal Explorer: heat, temperature and SOC fields of large pouch cells, and cold-plate sizing.

Public namespace, by task
-------------------------
Cells
    :func:`load_cell` -- read and validate a cell file (or a bundled demo cell by name).
    :func:`cell.from_datasheet` -- a complete cell file from data-sheet values and a template.
    :func:`calibrate` -- fit a few cell parameters to measured test curves.
Duty and cooling
    :mod:`duty` -- discharge, charge, hold_voltage, rest, profile_csv, repeat, cc_cv_charge.
    :mod:`cooling` -- convection, cold_plate, face_plate, edge_plate, tab_cooling.
Running
    :func:`simulate` -- one cell, one duty, one cooling design -> ``xarray.Dataset``.
    :func:`simulate_module` -- every cell on one coolant path, coupled -> ``xarray.Dataset``.
    :func:`open_results` -- load a saved run.
Designing
    :class:`Limits`, :func:`size_cooling`, :func:`sweep`.
    :func:`check_fidelity` -- the same design point on the fuller models: could the verdict flip?
Exploring
    :func:`explore` -- the notebook app.

Results inform design; they do not certify it (see ``explorer.results.CAUTION``).
"""

__version__ = "0.1.0"

from explorer import cell, cooling, duty, results, validators  # noqa: E402
from explorer.cell import load_cell  # noqa: E402
from explorer.limits import Limits  # noqa: E402
from explorer.module import simulate_module  # noqa: E402
from explorer.results import open_results  # noqa: E402
from explorer.simulate import simulate  # noqa: E402
from explorer.sizing import size_cooling  # noqa: E402
from explorer.sweeping import sweep  # noqa: E402

__all__ = [
    "__version__",
    "cell",
    "results",
    "validators",
    "load_cell",
    "duty",
    "cooling",
    "simulate",
    "simulate_module",
    "open_results",
    "Limits",
    "size_cooling",
    "sweep",
    "explore",
    "check_fidelity",
]

# The notebook app (ipywidgets, plotly) loads on first use; Dask and CoolProp load inside the
# functions that need them.
_LAZY = {
    "explore": ("explorer.app", "explore"),
    "calibrate": ("explorer.calibration", "calibrate"),
    "check_fidelity": ("explorer.fidelity", "check_fidelity"),
    "fidelity": ("explorer.fidelity", None),
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        mod = importlib.import_module(module)
        value = mod if attr is None else getattr(mod, attr)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'explorer' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
