"""The SPM/SPMe's cheaper per-step paths give what the general paths give (no timing here).

* ``OpenCircuitPotential.at`` (the curves on one number, with ``math``) against
  ``potential``/``entropic`` (numpy) -- the same closed forms, so round-off only.
* The conductivity at 298.15 K with its temperature terms taken once against the published
  form of Valøen & Reimers, J. Electrochem. Soc. 152 (2005) A882 (the function
  ``valoen_reimers_conductivity`` that writes it out term by term).
* A current-controlled step (the new state in one product) against a voltage-controlled step
  held at the voltage it gave (the per-ampere response and the current solved for): the same
  step, so the same state.
* Rods sharing a plan: an equal parameter set reuses it; a changed one does not.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from explorer.cell import load_cell
from explorer.materials import ELECTROLYTES, OCP
from explorer.materials.electrolytes import valoen_reimers_conductivity
from explorer.materials.ocp import STO_CLIP
from explorer.rod import Control, RodParameters, make_rod

MESH = {"shells": 8, "negative": 6, "separator": 4, "positive": 6}


@pytest.mark.parametrize("key", sorted(OCP))
def test_one_number_curve_matches_the_array_form(key):
    curve = OCP[key]
    for x in [-0.5, 0.0, STO_CLIP / 2, 1e-4, 0.013, 0.2281, 0.45, 0.5095, 0.8, 0.999, 1.0, 2.0]:
        u, dudt = curve.at(x)
        assert isinstance(u, float) and isinstance(dudt, float)
        assert u == pytest.approx(float(curve.potential(x)), rel=1e-12, abs=1e-12)
        assert dudt == pytest.approx(float(curve.entropic(x)), rel=1e-9, abs=1e-15)


def test_curve_without_a_one_number_form_falls_back():
    curve = dataclasses.replace(OCP["nmc"], _scalar=None)
    assert curve.at(0.6) == pytest.approx(OCP["nmc"].at(0.6), rel=1e-12)


def test_conductivity_at_reference_is_the_published_form():
    prop = ELECTROLYTES["lipf6_carbonate_conductivity"]
    c = np.concatenate([[0.0, 0.5], np.linspace(1.0, 4000.0, 97), [4500.0]])
    np.testing.assert_allclose(prop(c), valoen_reimers_conductivity(c, 298.15), rtol=1e-12)
    assert float(prop(1000.0)) == pytest.approx(float(valoen_reimers_conductivity(1000.0)),
                                                rel=1e-12)


@pytest.mark.parametrize("model", ["spm", "spme"])
def test_current_step_equals_the_voltage_step_it_implies(model):
    params = RodParameters.from_cell(load_cell("van_nmc_66ah"))
    rod = make_rod(model, params, MESH)
    x = rod.initial_state(0.7, 298.15)
    x = rod.solve_step(x, 30.0, 300.0, Control("current", 60.0)).state
    by_current = rod.solve_step(x, 12.0, 303.7, Control("current", 45.0), 1e-3)
    by_voltage = rod.solve_step(x, 12.0, 303.7, Control("voltage", by_current.voltage_V), 1e-3)
    assert by_voltage.current_A == pytest.approx(45.0, rel=1e-7)
    np.testing.assert_allclose(by_voltage.state[:-1], by_current.state[:-1], rtol=1e-9)
    for key, value in by_current.heat_W.items():
        assert by_voltage.heat_W[key] == pytest.approx(value, rel=1e-6, abs=1e-9)
    assert by_voltage.soc == pytest.approx(by_current.soc, abs=1e-12)


def test_shared_plan_follows_the_parameters():
    params = RodParameters.from_cell(load_cell("van_nmc_66ah"))
    a, b = make_rod("spme", params, MESH), make_rod("spme", params, MESH)
    step = (30.0, 298.15, Control("current", 66.0))
    ra = a.solve_step(a.initial_state(0.9, 298.15), *step)
    rb = b.solve_step(b.initial_state(0.9, 298.15), *step)
    assert a._blocks is b._blocks
    assert rb.voltage_V == pytest.approx(ra.voltage_V, rel=1e-12)
    slower = dataclasses.replace(params, negative=dataclasses.replace(
        params.negative, diffusivity_m2_s=params.negative.diffusivity_m2_s / 10.0))
    c = make_rod("spme", slower, MESH)
    rc = c.solve_step(c.initial_state(0.9, 298.15), *step)
    assert c._blocks is not a._blocks
    assert abs(rc.voltage_V - ra.voltage_V) > 1e-4  # slower solid diffusion: a lower voltage
