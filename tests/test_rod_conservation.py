"""Conservation of lithium and charge in the rod models.

Outside references: Faraday's law (a charge Q moves Q / F mol of lithium from one
electrode to the other; from memory, any electrochemistry text, e.g. Newman &
Thomas-Alyea, *Electrochemical Systems*, 3rd ed. 2004, ch. 1) and conservation of the
salt in a binary electrolyte with constant transference number (Doyle, Fuller & Newman,
J. Electrochem. Soc. 140 (1993) 1526): the reaction terms of the two electrodes cancel,
so the salt in the separator and both coatings stays constant.

"Cyclable lithium" here is the lithium in both electrodes' solid phase
(``lithium_mol``); the lithium that has cycled is what left the negative electrode,
``lithium_by_electrode(state)["negative"]``, which falls by exactly the charge passed / F.
"""

from __future__ import annotations

import numpy as np
import pytest

from explorer.cell import load_cell
from explorer.materials import FARADAY
from explorer.rod import MODELS, Control, RodParameters, make_rod

MESH = {"shells": 8, "negative": 6, "separator": 4, "positive": 6}
T25 = 298.15


@pytest.fixture(scope="module", params=["van_nmc_66ah", "rack_lfp_26ah"])
def params(request):
    return RodParameters.from_cell(load_cell(request.param))


def _rest_after_pulse(rod, p):
    """A state with strong gradients: a 2C pulse of 5 min from SOC 0.7."""
    x = rod.initial_state(0.7, T25)
    for _ in range(10):
        x = rod.solve_step(x, 30.0, T25, Control("current", 2 * p.capacity_Ah)).state
    return x


@pytest.mark.parametrize("model", list(MODELS))
def test_lithium_constant_at_zero_current(params, model):
    # Relaxation at open circuit redistributes lithium but creates or destroys none.
    rod = make_rod(model, params, MESH)
    x = _rest_after_pulse(rod, params)
    li0 = rod.lithium_mol(x)
    by0 = rod.lithium_by_electrode(x)
    for dt in (1e-3, 1.0, 30.0, 120.0, 600.0):
        x = rod.solve_step(x, dt, T25, Control("current", 0.0)).state
    assert rod.lithium_mol(x) == pytest.approx(li0, rel=1e-6)
    for k in ("negative", "positive"):
        assert rod.lithium_by_electrode(x)[k] == pytest.approx(by0[k], rel=1e-6)


@pytest.mark.parametrize("model", list(MODELS))
def test_discharge_moves_charge_over_F(params, model):
    # Faraday's law: each electrode's lithium changes by -+ Q / F; the total is constant;
    # the charge passed equals the SOC change times the capacity.
    rod = make_rod(model, params, MESH)
    x = rod.initial_state(0.95, T25)
    li0 = rod.lithium_by_electrode(x)
    total0 = rod.lithium_mol(x)
    soc0 = rod.soc(x)
    q = 0.0
    schedule = [("current", params.capacity_Ah, 60.0)] * 10 + [("power", 150.0, 45.0)] * 5 \
        + [("current", -0.5 * params.capacity_Ah, 90.0)] * 4 + [("voltage", 3.3, 30.0)] * 2
    for kind, value, dt in schedule:
        r = rod.solve_step(x, dt, T25, Control(kind, value))
        q += r.current_A * dt
        x = r.state
    li = rod.lithium_by_electrode(x)
    assert li["negative"] == pytest.approx(li0["negative"] - q / FARADAY, rel=1e-9)
    assert li["positive"] == pytest.approx(li0["positive"] + q / FARADAY, rel=1e-9)
    assert rod.lithium_mol(x) == pytest.approx(total0, rel=1e-9)
    assert (soc0 - rod.soc(x)) * params.capacity_Ah * 3600.0 == pytest.approx(q, rel=1e-9)


@pytest.mark.parametrize("model", ["spme", "dfn"])
def test_salt_conserved(params, model):
    # Doyle, Fuller & Newman 1993: the two electrodes' reaction terms cancel.
    rod = make_rod(model, params, MESH)
    x = rod.initial_state(0.9, T25)
    salt0 = rod.electrolyte_lithium_mol(x)
    for _ in range(10):
        x = rod.solve_step(x, 30.0, T25, Control("current", 2 * params.capacity_Ah)).state
    c = rod.electrolyte_concentration(x)
    assert c.max() - c.min() > 1.0  # gradients did develop
    assert rod.electrolyte_lithium_mol(x) == pytest.approx(salt0, rel=1e-9)


@pytest.mark.parametrize("model", list(MODELS))
def test_soc_of_initial_state(params, model):
    rod = make_rod(model, params, MESH)
    for soc in (0.0, 0.25, 1.0):
        assert rod.soc(rod.initial_state(soc, T25)) == pytest.approx(soc, abs=1e-12)
    # the same lithium inventory at every SOC (anchored at SOC 1)
    li = [rod.lithium_mol(rod.initial_state(s, T25)) for s in (0.1, 0.5, 0.9)]
    assert np.ptp(li) <= 1e-9 * li[0]
