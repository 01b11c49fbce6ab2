"""Inputs the property suite (tests/test_properties.py) once found escaping as bare Python
errors, each now a clear InputError naming the argument, the value and what was expected; and
the stepper ending a run whose thermal model breaks with a "failed" status, not a traceback.

Logic checks of input handling only; no physics is asserted here.
"""

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

import explorer
from explorer import cooling, duty
from explorer.inplane.lumped import LumpedThermal
from explorer.inplane.thermal import PlaneThermal
from explorer.rod.mesh import RodMesh
from explorer.validators import InputError, check_choice

PROFILE = Path(__file__).parents[1] / "demo_cells" / "profiles" / "van_city_route.csv"


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell("van_nmc_66ah")


def _one_minute(c_rate=1.0):
    return duty.discharge(c_rate=c_rate, end_time_s=60.0)


# ------------------------------------------------------------------ duty.repeat: `times`


@pytest.mark.parametrize("times", ["x", None, math.inf, math.nan, 2.5, 0, -3, True,
                                   np.array([1, 2]), [2]])
def test_repeat_times_not_a_whole_number_at_least_one(times):
    with pytest.raises(InputError, match=r"duty.repeat: `times`: expected a whole number"):
        duty.repeat(duty.rest(10.0), times=times)


@pytest.mark.parametrize("times", [10**30, 10**400, duty.MAX_REPEATS + 1])
def test_repeat_times_is_capped_before_building_the_list(times):
    with pytest.raises(InputError, match=rf"`times`.*<= {duty.MAX_REPEATS}"):
        duty.repeat(duty.rest(10.0), times=times)


def test_repeat_caps_the_total_number_of_steps():
    cycle = [duty.rest(1.0)] * 20
    with pytest.raises(InputError, match=r"duty.repeat: 20 step\(s\) `times` 10000"):
        duty.repeat(cycle, times=duty.MAX_REPEATS)


def test_repeat_accepts_a_whole_float_and_numpy_integer():
    assert len(duty.repeat([duty.rest(1.0), duty.rest(2.0)], times=3.0)) == 6
    assert len(duty.repeat(duty.rest(1.0), times=np.int64(4))) == 4


# ------------------------------------------------------------ duty.profile_csv: path, label


@pytest.mark.parametrize("path", [0, None, b"profile.csv", np.array([1.0]), ["a.csv"]])
def test_profile_path_not_a_path(path):
    with pytest.raises(InputError, match=r"duty.profile_csv: `path` must be a file path"):
        duty.profile_csv(path)


def test_profile_path_with_a_nul_character():
    with pytest.raises(InputError, match=r"`path` 'a\\x00b.csv' contains a NUL character"):
        duty.profile_csv("a\x00b.csv")


@pytest.mark.parametrize("path", ["", "   "])
def test_profile_path_empty_says_so_not_is_a_directory(path):
    with pytest.raises(InputError, match=r"`path` is empty") as info:
        duty.profile_csv(path)
    assert "directory" not in str(info.value)


@pytest.mark.parametrize("label", [np.array([1.0, 2.0]), 3, ["x"]])
def test_profile_label_not_a_string(label):
    with pytest.raises(InputError, match=r"duty.profile_csv: `label` must be a string"):
        duty.profile_csv(PROFILE, label=label)


@pytest.mark.parametrize("make, where", [
    (lambda label: duty.discharge(c_rate=1.0, label=label), "duty.discharge"),
    (lambda label: duty.charge(current_A=5.0, label=label), "duty.charge"),
    (lambda label: duty.hold_voltage(label=label), "duty.hold_voltage"),
    (lambda label: duty.rest(10.0, label=label), "duty.rest"),
])
def test_step_label_not_a_string(make, where):
    """An array label used to reach simulate and fail there (its truth value)."""
    with pytest.raises(InputError, match=rf"{where}: `label` must be a string, got ndarray"):
        make(np.array([1.0, 2.0]))
    assert make(None).label == where.rpartition(".")[2].replace("_voltage", "")


def test_profile_label_string_and_default():
    assert duty.profile_csv(PROFILE, label="route").label == "route"
    assert duty.profile_csv(PROFILE).label == PROFILE.stem


# ------------------------------------------------------------------- C-rates: bounded


@pytest.mark.parametrize("make", [
    lambda: duty.discharge(c_rate=2.7e306),
    lambda: duty.charge(c_rate=duty.MAX_C_RATE * 1.01),
    lambda: duty.cc_cv_charge(1e300),
])
def test_c_rate_above_the_bound(make):
    with pytest.raises(InputError, match=r"`c_rate` must be at most 100 \(C-rate\)"):
        make()


def test_end_c_rate_above_the_bound():
    with pytest.raises(InputError, match=r"`end_c_rate` must be at most 100"):
        duty.hold_voltage(end_c_rate=1e308)
    with pytest.raises(InputError, match=r"`end_c_rate` must be at most 100"):
        duty.cc_cv_charge(1.0, end_c_rate=1e308)


def test_c_rate_at_the_bound_resolves_to_finite_amperes(cell):
    for step in (duty.discharge(c_rate=duty.MAX_C_RATE), *duty.cc_cv_charge(duty.MAX_C_RATE)):
        resolved = duty.resolve(step, cell)
        assert math.isfinite(resolved.value)
        assert all(math.isfinite(e.threshold) for e in resolved.ends)


def test_resolve_refuses_a_load_that_is_not_finite(cell):
    """A cell built in code (the loader bounds capacities) whose capacity overflows the load."""
    odd = dataclasses.replace(cell, nominal_capacity_Ah=1e307)
    with pytest.raises(InputError, match=r"duty step 'discharge': resolves to inf"):
        duty.resolve(duty.discharge(c_rate=100.0), odd)


# --------------------------------------------------------- simulate: output_interval_s


@pytest.mark.parametrize("interval", ["x", [5.0], b"5", True, {"s": 5}])
def test_output_interval_not_a_number(cell, interval):
    with pytest.raises(InputError, match=r"simulate: `output_interval_s` must be None or a "
                                         r"number of seconds"):
        explorer.simulate(cell, _one_minute(), layout="single", output_interval_s=interval)
    with pytest.raises(InputError, match=r"simulate_module: `output_interval_s` must be None"):
        explorer.simulate_module(cell, _one_minute(), None, layout="single",
                                 output_interval_s=interval)


@pytest.mark.parametrize("interval", [0, -1.0, math.nan])
def test_output_interval_not_positive(cell, interval):
    with pytest.raises(InputError, match=r"`output_interval_s` must be > 0"):
        explorer.simulate(cell, _one_minute(), layout="single", output_interval_s=interval)


def test_output_interval_numpy_number_is_fine(cell):
    ds = explorer.simulate(cell, _one_minute(), layout="single",
                           output_interval_s=np.float64(20.0))
    assert ds.attrs["status"] == "completed"


# ------------------------------------------------------------- check_choice: any value


@pytest.mark.parametrize("value", [np.array([1.0, 2.0]), np.array(["top"]), [], None, 3.0,
                                   {"top": 1}])
def test_check_choice_non_string_value(value):
    with pytest.raises(InputError, match=r"`edge`: expected one of 'bottom', 'top'"):
        check_choice("edge", value, ("bottom", "top"))


def test_check_choice_array_through_a_design():
    plate = cooling.fixed_sink(20.0, h_W_m2K=800.0)
    with pytest.raises(InputError, match=r"`face`: expected one of"):
        cooling.face_plate(plate, face=np.array([1.0, 2.0]))


def test_check_choice_string_and_near_miss():
    assert check_choice("edge", np.str_("top"), ("bottom", "top")) == "top"
    with pytest.raises(InputError, match=r"did you mean 'top'"):
        check_choice("edge", "tpo", ("bottom", "top"))


# ------------------------------------------------------------------------ rod mesh values


@pytest.mark.parametrize("value", [None, "x", math.nan, math.inf, -math.inf, 2.5, [3]])
def test_mesh_value_not_a_whole_number(cell, value):
    with pytest.raises(InputError, match=r"`mesh.shells`: expected a whole number"):
        RodMesh.coerce({"shells": value})
    with pytest.raises(InputError, match=r"`mesh.shells`"):
        explorer.simulate(cell, _one_minute(), layout="single", mesh={"shells": value})


@pytest.mark.parametrize("mesh, key", [({"shells": 2}, "shells"), ({"negative": 0}, "negative"),
                                       ({"separator": 10**9}, "separator")])
def test_mesh_value_out_of_range(mesh, key):
    with pytest.raises(InputError, match=rf"`mesh.{key}`: expected a whole number .*<= 1000"):
        RodMesh.coerce(mesh)


def test_mesh_unknown_keys_of_any_type():
    with pytest.raises(InputError, match=r"`mesh`: unknown key\(s\)"):
        RodMesh.coerce({1: 3, "x": 2})


def test_mesh_whole_floats_are_fine():
    assert RodMesh.coerce({"shells": 5.0, "negative": np.int64(4)}) == RodMesh(shells=5, negative=4)


# ------------------------------------------------------- the stepper and a broken thermal model


def _singular(*args, **kwargs):
    raise RuntimeError("Factor is exactly singular")


@pytest.mark.parametrize("layout, model", [("averaged", PlaneThermal), ("single", LumpedThermal)])
def test_thermal_failure_in_a_step_ends_failed_with_a_message(cell, monkeypatch, layout, model):
    """What a design with overflowing conductances did to the sparse factorisation (invented
    by construction here): a failed status keeping the finite initial point, no traceback."""
    monkeypatch.setattr(model, "step", _singular)
    ds = explorer.simulate(cell, [_one_minute(), duty.rest(60.0)], layout=layout, grid=(4, 4))
    assert ds.attrs["status"] == "failed"
    message = ds.attrs["status_message"]
    assert "thermal model failed" in message and "Factor is exactly singular" in message
    assert "1 later duty step(s) did not run" in message
    assert ds.sizes["time"] == 1
    assert np.all(np.isfinite(ds.voltage.values))


def test_thermal_step_with_non_finite_temperatures_ends_failed(cell, monkeypatch):
    real = LumpedThermal.step

    def nan_step(self, *args, **kwargs):
        state, rejected = real(self, *args, **kwargs)
        return np.full_like(state, np.nan), rejected

    monkeypatch.setattr(LumpedThermal, "step", nan_step)
    ds = explorer.simulate(cell, _one_minute(), layout="single")
    assert ds.attrs["status"] == "failed"
    assert "temperatures are no longer finite" in ds.attrs["status_message"]
    assert np.all(np.isfinite(ds.voltage.values))


def test_thermal_failure_at_the_start_is_an_input_error(cell, monkeypatch):
    monkeypatch.setattr(PlaneThermal, "initial_state", _singular)
    with pytest.raises(InputError, match=r"could not start: the thermal model .* `cooling`.*"
                                         r"Factor is exactly singular"):
        explorer.simulate(cell, _one_minute(), layout="averaged", grid=(4, 4))


def test_thermal_failure_in_a_module_ends_failed(cell, monkeypatch):
    monkeypatch.setattr(PlaneThermal, "step_series", _singular)
    plate = cooling.cold_plate("eg50", 3.0, 25.0, cells_per_plate=2)
    ds = explorer.simulate_module(cell, _one_minute(), cooling.face_plate(plate),
                                  layout="averaged", grid=(4, 4))
    assert ds.attrs["status"] == "failed"
    assert "Factor is exactly singular" in ds.attrs["status_message"]
