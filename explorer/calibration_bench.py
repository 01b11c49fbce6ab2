"""Benchmark of :func:`explorer.calibrate`, and the synthetic tests it (and its tests) use.

``bench_calibration(quick)``: a three-parameter calibration (contact resistance,
solid-diffusivity scale, rate-constant scale) to three constant-current
discharges (0.5C, 1C, 2C) of a demo cell whose parameters were changed by known
factors, with seeded noise. Target: 60 s on the 2-core machine. ``quick``: two
discharges (1C, 2C) to 50 % SOC.

:func:`synthetic_tests` makes the "measured" curves: the demo cell with known
changed parameters, run under each test's current and rig, sampled every few
seconds, plus Gaussian noise from a seeded generator. The calibration sees
the same model it was generated with, so a round trip checks the fit and its
uncertainty, not the model.
"""

from __future__ import annotations

import time

import numpy as np

__all__ = ["bench_calibration", "synthetic_tests", "TRUE_CHANGES"]

#: the known changes of the round trip (SI; scales as factors)
TRUE_CHANGES = {"resistance": 0.6e-3, "diffusivity": 0.5, "rate_constant": 2.0}


def synthetic_tests(cell="van_nmc_66ah", c_rates=(0.5, 1.0, 2.0), changes=None, *,
                    noise_V=0.002, noise_K=0.1, seed=7, sample_s=None, end_soc=None,
                    ambient_C=25.0, h_W_m2K=10.0, temperature=True, grid=(4, 4)):
    """Measured-looking discharges of ``cell`` with ``changes`` applied.

    Returns a list of :class:`explorer.calibration.LabTest` (rig settings filled in).
    ``end_soc`` stops each discharge early (short tests); ``sample_s`` defaults to about
    150 samples per test.
    """
    import explorer
    from explorer.calibration import LabTest, _Runner
    from explorer.cell.datasheet import cell_data

    cell = explorer.load_cell(cell) if isinstance(cell, str) else cell
    data, _ = cell_data(cell)
    changes = dict(TRUE_CHANGES if changes is None else changes)
    settings = {"electrochemistry": "spme", "layout": "averaged", "grid": grid,
                "voltage_scale_V": 1.0, "temperature_scale_K": 1.0, "max_points": 3}
    truth = _Runner(data, [], [], settings, "synthetic").cell(changes)
    rng = np.random.default_rng(seed)
    tests = []
    for rate in c_rates:
        d = explorer.duty.discharge(c_rate=rate, end_soc=end_soc)
        h = changes.get("rig_h", h_W_m2K)
        ds = explorer.simulate(truth, d, explorer.cooling.convection(h, ambient_C),
                               layout="averaged", grid=grid, start_soc=1.0,
                               start_temperature_C=ambient_C,
                               output_interval_s=max(1.0, 3600.0 / rate / 600.0))
        t_end = float(ds["time"][-1])
        step = sample_s or max(1.0, round(t_end / 150.0))
        t = np.arange(0.0, t_end, step)
        v = np.interp(t, ds["time"].values, ds["voltage"].values)
        temp = np.interp(t, ds["time"].values, ds["temperature_front_max"].values)
        current = np.full_like(t, float(ds["current"][1]))
        tests.append(LabTest(
            name=f"{rate:g}C", time_s=t, current_A=current,
            voltage_V=v + rng.normal(0.0, noise_V, t.size),
            temperature_C=(temp + rng.normal(0.0, noise_K, t.size)) if temperature else None,
            ambient_C=ambient_C, start_soc=1.0, start_temperature_C=ambient_C,
            h_W_m2K=h_W_m2K))
    return tests


def bench_calibration(quick: bool = False) -> list[dict]:
    """Three parameters, three discharge curves (0.5C, 1C, 2C); target 60 s."""
    import explorer

    started = time.perf_counter()
    rates = (1.0, 2.0) if quick else (0.5, 1.0, 2.0)
    tests = synthetic_tests(c_rates=rates, end_soc=0.5 if quick else None, temperature=False)
    made = time.perf_counter() - started
    started = time.perf_counter()
    cal = explorer.calibrate("van_nmc_66ah", tests, fit=list(TRUE_CHANGES))
    wall = time.perf_counter() - started
    errors = {n: abs(np.log(cal.values[n] / TRUE_CHANGES[n])) / max(cal.sigma_log[n], 1e-12)
              for n in TRUE_CHANGES}
    return [{
        "section": "calibrate",
        "case": "3 parameters, " + ("2 discharges to 50 % SOC" if quick else "3 discharges"),
        "wall_s": round(wall, 2),
        "target": 60.0,
        "evaluations": cal.evaluations,
        "status": cal.status,
        "worst_error_in_sigma": round(max(errors.values()), 2),
        "voltage_rms_mV": round(max(r["voltage_rms_mV"] for r in cal.rms), 2),
        "synthetic_data_s": round(made, 2),
    }]
