"""A results Dataset built exactly to the contract in /work/notes/dataset.md, with synthetic numbers.

The numbers are INVENTED (plausible shapes for a large pouch cell on a 1C discharge with an edge plate);
they exist only so that the plots, the report and the app can be tested without running the
simulation. Tests that need physics use ``explorer.simulate`` instead.
"""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

HEAT_PARTS = (
    "heat_irreversible",
    "heat_reversible",
    "heat_ohmic_electrolyte",
    "heat_ohmic_solid",
    "heat_collector",
    "heat_tab",
)

_UNITS = {
    "voltage": ("V", "terminal voltage"),
    "current": ("A", "current, positive on discharge"),
    "power": ("W", "terminal power, positive on discharge"),
    "ocv": ("V", "open-circuit voltage"),
    "soc_mean": ("1", "cell state of charge"),
    "soc": ("1", "local state of charge"),
    "temperature": ("degC", "in-plane temperature"),
    "temperature_max": ("degC", "hottest point of the face"),
    "temperature_min": ("degC", "coldest point of the face"),
    "temperature_mean": ("degC", "mean temperature of the face"),
    "temperature_core_max": ("degC", "hottest core temperature estimate"),
    "heat_flux": ("W m-2", "generated heat per face area"),
    "heat_total": ("W", "all generated heat"),
    "heat_rejected": ("W", "heat into all sinks"),
    "coolant_outlet": ("degC", "coolant outlet temperature"),
    "step": ("1", "index of the duty step"),
    **{name: ("W", name.replace("_", " ")) for name in HEAT_PARTS},
}


def synthetic_dataset(
    nx: int = 8,
    ny: int = 12,
    n_time: int = 41,
    duration_s: float = 3600.0,
    layout: str = "averaged",
    coolant: bool = True,
    rise_K: float = 18.0,
    status: str = "completed",
    cell_name: str = "synthetic pouch (invented)",
    capacity_Ah: float = 66.0,
) -> xr.Dataset:
    """Return a contract-conforming results Dataset with invented, smooth numbers.

    Parameters
    ----------
    nx, ny : int
        Grid size (forced to 1 x 1 for ``layout="single"``).
    n_time : int
        Number of time samples from 0 to ``duration_s``.
    rise_K : float
        Peak temperature rise above the 25 degC start at the end of the run.
    """
    if layout == "single":
        nx = ny = 1
    width, height = 0.30, 0.10
    time = np.linspace(0.0, duration_s, n_time)
    x = (np.arange(nx) + 0.5) * width / nx
    y = (np.arange(ny) + 0.5) * height / ny
    tau = time / duration_s
    current = np.full(n_time, capacity_Ah * 3600.0 / duration_s)
    soc_mean = 1.0 - tau
    ocv = 3.0 + 1.1 * soc_mean + 0.1 * np.sin(3.0 * soc_mean)
    voltage = ocv - 0.05 - 0.1 * tau**4
    power = current * voltage

    # hot near the top edge (tabs), cooled at the bottom edge: shape in [0, 1]
    yy, xx = np.meshgrid(y / height, x / width, indexing="ij")
    shape = 0.55 + 0.45 * yy**1.5 * (1.0 - 0.3 * (xx - 0.7) ** 2)
    shape = shape / shape.max()
    rise = rise_K * (1.0 - np.exp(-3.0 * tau)) / (1.0 - np.exp(-3.0))
    temperature = 25.0 + rise[:, None, None] * shape[None, :, :]
    if layout == "single":
        temperature = 25.0 + rise[:, None, None] * np.ones((1, 1, 1))

    parts = {
        "heat_irreversible": 18.0 + 8.0 * tau**2,
        "heat_reversible": 4.0 * np.cos(3.0 * tau),
        "heat_ohmic_electrolyte": 6.0 + 2.0 * tau,
        "heat_ohmic_solid": 1.5 + 0.2 * tau,
        "heat_collector": np.full(n_time, 3.0),
        "heat_tab": np.full(n_time, 1.2),
    }
    heat_total = sum(parts.values())
    area = width * height
    weight = shape / shape.mean()
    heat_flux = heat_total[:, None, None] / area * weight[None, :, :]
    heat_rejected = 0.8 * heat_total * (1.0 - np.exp(-4.0 * tau))
    soc = np.broadcast_to(soc_mean[:, None, None], (n_time, ny, nx)).copy()

    data = {
        "voltage": ("time", voltage),
        "current": ("time", current),
        "power": ("time", power),
        "ocv": ("time", ocv),
        "soc_mean": ("time", soc_mean),
        "soc": (("time", "y", "x"), soc),
        "temperature": (("time", "y", "x"), temperature),
        "temperature_max": ("time", temperature.max(axis=(1, 2))),
        "temperature_min": ("time", temperature.min(axis=(1, 2))),
        "temperature_mean": ("time", temperature.mean(axis=(1, 2))),
        "temperature_core_max": ("time", temperature.max(axis=(1, 2)) + 0.4 * rise / rise_K),
        "heat_flux": (("time", "y", "x"), heat_flux),
        "heat_total": ("time", heat_total),
        **{name: ("time", values) for name, values in parts.items()},
        "heat_rejected": ("time", heat_rejected),
        "step": ("time", np.zeros(n_time, dtype=int)),
    }
    if coolant:
        data["coolant_outlet"] = ("time", 25.0 + 2.0 * (1.0 - np.exp(-4.0 * tau)))
    ds = xr.Dataset(data, coords={"time": time, "x": x, "y": y})
    for name, (units, long_name) in _UNITS.items():
        if name in ds:
            ds[name].attrs.update(units=units, long_name=long_name)
    ds["time"].attrs.update(units="s", long_name="time from the start of the duty")
    ds["x"].attrs.update(units="m", long_name="across the width")
    ds["y"].attrs.update(units="m", long_name="along the height")
    ds.attrs.update(
        tool_version="0.1.0",
        cell_name=cell_name,
        cell_sha256="0" * 64,
        cell_file="synthetic.toml",
        electrochemistry="spme",
        layout=layout,
        grid_nx=nx,
        grid_ny=ny,
        start_soc=1.0,
        start_temperature_C=25.0,
        heat_capacity_J_per_K=1100.0,
        collector_resistance_ohm=2.0e-4,
        temperature_limit_C=55.0,
        duty=json.dumps([{"kind": "discharge", "c_rate": 1.0}]),
        cooling=json.dumps({"kind": "edge_plate", "flow_L_min": 1.0, "inlet_C": 25.0}),
        hydraulics=json.dumps({"pressure_drop_Pa": 1200.0}) if coolant else "{}",
        status=status,
        status_message="reached the lower voltage limit" if status == "completed" else "stopped",
        caution="Synthetic test data (invented); results inform design, they do not certify it.",
    )
    return ds


class SyntheticSizing:
    """A stand-in for the object ``explorer.size_cooling`` returns: ``.curve``, ``.value``, ``.feasible``.

    The curve is invented: peak temperature and spread falling with flow as a + b / flow.
    """

    def __init__(self, vary: str = "flow_L_min", limit_C: float = 45.0):
        values = np.linspace(0.2, 3.0, 8)
        self.vary = vary
        self.curve = xr.Dataset(
            {
                "temperature_max_C": ("value", 35.0 + 6.0 / values),
                "spread_K": ("value", 2.0 + 3.0 / values),
            },
            coords={"value": values},
        )
        self.value = 6.0 / (limit_C - 35.0)
        self.feasible = True
        self.dataset = synthetic_dataset()
        self.message = "limits met (invented)"

