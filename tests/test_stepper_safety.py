"""The stepper ends cleanly when the solver cannot go on or the state leaves physical bounds,
keeping what it computed; bad run settings are clear input errors.

These are logic checks of the stepper's bookkeeping: the misbehaving rods are made so by
construction (a wrapper around a real rod), the extreme parameters are far outside any cell.
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest

import explorer
import explorer.rod
from explorer import duty
from explorer.cell.loader import cell_from_text
from explorer.inplane.lumped import LumpedThermal
from explorer.inplane.sinks import Sinks
from explorer.rod import RodParameters
from explorer.rod.base import RodStepError
from explorer.stepping.run import Settings, _extrapolation_error, run
from explorer.validators import InputError

CELL_FILE = Path(__file__).parents[1] / "demo_cells" / "van_nmc_66ah.toml"


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell(CELL_FILE)


def _cell_with(old, new):
    text = CELL_FILE.read_text()
    assert old in text
    return cell_from_text(text.replace(old, new, 1))


def _extreme(cell, section, **changes):
    """``cell`` with values of one section replaced in Python. The cell-file loader refuses such
    values (its plausibility bands); a cell built in code reaches the stepper, which must still
    end cleanly."""
    import dataclasses

    return dataclasses.replace(cell, **{section: dataclasses.replace(getattr(cell, section),
                                                                     **changes)})


class _Wrapped:
    """A real rod whose steps are altered by ``change(result)`` (raise, or return a result)."""

    def __init__(self, rod, change):
        self.rod, self.change, self.name = rod, change, rod.name

    def __getattr__(self, name):
        return getattr(self.rod, name)

    def solve_step(self, state, dt, temperature, control, series_resistance_ohm=0.0):
        res = self.rod.solve_step(state, dt, temperature, control, series_resistance_ohm)
        return self.change(res)


def _wrap_rods(monkeypatch, change):
    # the factory simulate takes its rod from (a fresh model here, never the shared one)
    real = explorer.rod.make_rod
    monkeypatch.setattr(explorer.rod, "shared_rod",
                        lambda *a, **k: _Wrapped(real(*a, **k), change))


def _ends(ds):
    return json.loads(ds.attrs["duty_step_ends"])


def test_a_start_that_fails_is_an_input_error_not_a_record_without_voltage(cell, monkeypatch):
    """Nothing is computed when the cell model fails at rest at the start state: an InputError
    naming the start state and the reason, never a record whose only point has no voltage."""
    def always_fails(res):
        raise RodStepError("invented failure")

    _wrap_rods(monkeypatch, always_fails)
    with pytest.raises(InputError, match=r"could not start.*`start_soc`.*invented failure"):
        explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single")


def test_extreme_activation_energy_at_minus_20_fails_cleanly(cell):
    """A DFN whose start fails (electrolyte conductivity activation 1000 kJ/mol at -20 degC,
    far outside any electrolyte) is a clear InputError (nothing was computed to keep), not a
    traceback from the solver; the cell-file loader refuses the value outright."""
    with pytest.raises(InputError, match="conductivity_activation"):
        _cell_with('conductivity_activation = "13 kJ/mol"',
                   'conductivity_activation = "1000 kJ/mol"')
    odd = _extreme(cell, "electrolyte", conductivity_activation_J_mol=1.0e6)
    with pytest.raises(InputError, match=r"could not start.*`start_temperature_C` -20"):
        explorer.simulate(odd, duty.discharge(c_rate=1.0), electrochemistry="dfn",
                          layout="single", start_temperature_C=-20.0)


def test_a_rod_that_gives_up_midway_keeps_the_records_so_far(cell, monkeypatch):
    def fails_below_80_percent(res):
        if res.soc < 0.8:
            raise RodStepError("invented: no step below 80 % SOC")
        return res

    _wrap_rods(monkeypatch, fails_below_80_percent)
    ds = explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single")
    assert ds.attrs["status"] == "failed"
    assert "could not sustain a current" in ds.attrs["status_message"]
    assert float(ds.soc_mean[-1]) == pytest.approx(0.8, abs=1e-3)
    assert float(ds.time[-1]) > 600.0  # 20 % of the charge at 1C is about 720 s
    end = _ends(ds)[0]
    assert end["ended_by"] == "solver" and end["time_s"] == pytest.approx(float(ds.time[-1]))


def test_a_collapsing_step_ends_failed_not_with_a_division_by_zero(cell, monkeypatch):
    """A voltage with a jitter no step size can follow (by construction) used to drive the step
    towards zero; now the run stops as "failed" and says the step collapsed."""
    def jitter(res):
        if res.soc < 0.9:
            res.voltage_V += 0.05 * (math.sin(res.soc * 1.7e7) % 1.0)
        return res

    _wrap_rods(monkeypatch, jitter)
    ds = explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single")
    assert ds.attrs["status"] == "failed"
    assert "collapsed" in ds.attrs["status_message"]
    assert float(ds.soc_mean[-1]) < 0.9 and ds.sizes["time"] > 10


def test_extrapolation_error_with_two_points_at_one_time_is_none():
    assert _extrapolation_error([(5.0, 1.0), (5.0, 1.1)], 5.0, 1.2) is None


def test_a_non_physical_voltage_fails_the_run_and_is_not_recorded(cell):
    """Positive-electrode conductivity 1e-12 S/m (absurd by construction): the first load step
    would put the terminal voltage far below 0 V. The cell-file loader refuses the value; a cell
    built in code reaches the stepper."""
    with pytest.raises(InputError, match="solid_conductivity"):
        _cell_with('solid_conductivity = "10 S/m"', 'solid_conductivity = "1e-12 S/m"')
    odd = _extreme(cell, "positive", solid_conductivity_S_m=1e-12)
    ds = explorer.simulate(odd, duty.discharge(c_rate=1.0), layout="single")
    assert ds.attrs["status"] == "failed"
    assert "non-physical" in ds.attrs["status_message"]
    v = ds.voltage.values
    assert np.all((v >= 0.0) & (v <= 2 * odd.voltage_max_V))


def test_the_temperature_cap_cuts_the_run_short_at_the_cap(cell):
    """An adiabatic 2C discharge heats the cell; with the cap set to 30 degC (Settings field)
    the run stops there, located like an end condition, and says so."""
    from explorer.duty import resolve
    from explorer.rod import make_rod

    rod = make_rod("spme", RodParameters.from_cell(cell))
    thermal = LumpedThermal(cell, Sinks())
    rec = run(rod, thermal, [resolve(duty.discharge(c_rate=2.0), cell)], start_soc=1.0,
              start_temperature_C=25.0, settings=Settings(temperature_cap_C=30.0))
    assert rec.status == "cut_short"
    assert "temperature cap 30 degC" in rec.message
    hottest = [float(np.max(T)) for T in rec.temperature]
    assert hottest[-1] == pytest.approx(30.0, abs=1e-2)
    assert max(hottest) <= 30.0 + 1e-2
    assert rec.step_ends[0]["ended_by"] == "temperature_cap"


def test_the_default_cap_is_150_degC():
    assert Settings().temperature_cap_C == 150.0


@pytest.mark.parametrize("kwargs, name", [
    ({"grid": (2.7, 5)}, "grid"),
    ({"grid": (8, "six")}, "grid"),
    ({"grid": 8}, "grid"),
    ({"layout": "distributed", "grid": (8, 8), "rods": (2.5, 2)}, "rods"),
    ({"position": "last"}, "position"),
    ({"position": 1.5}, "position"),
    ({"output_interval_s": 1e-4}, "output_interval_s"),
])
def test_bad_run_settings_are_input_errors(cell, kwargs, name):
    with pytest.raises(InputError, match=f"`{name}`") as err:
        explorer.simulate(cell, duty.discharge(c_rate=1.0), **kwargs)
    assert "Traceback" not in str(err.value)


def test_too_many_records_says_what_to_do(cell):
    with pytest.raises(InputError, match="choose output_interval_s >="):
        explorer.simulate(cell, duty.discharge(c_rate=1.0), output_interval_s=1e-4)


def test_a_day_long_1_hz_profile_runs_with_a_bounded_record(tmp_path, cell):
    """86 400 rows (an invented zero-mean current load, 1 Hz): the run completes and the record
    is thinned to a regular time base (about 5 000 points), not one point per row."""
    n = 86_400
    t = np.arange(n)
    current = 10.0 * np.sign(np.sin(2 * np.pi * t / 600.0))  # invented
    path = tmp_path / "day.csv"
    path.write_text("time_s,current_A\n" + "".join(f"{a},{b:g}\n" for a, b in zip(t, current)))
    ds = explorer.simulate(cell, duty.profile_csv(path), layout="single", start_soc=0.5)
    assert ds.attrs["status"] == "completed"
    assert float(ds.time[-1]) == pytest.approx(n - 1)
    assert ds.sizes["time"] <= 10_000
    assert _ends(ds)[0]["ended_by"] == "profile_end"
