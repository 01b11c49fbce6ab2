"""Sizing that costs a few runs, and the fidelity check of its answer.

Run counts, not times (timings belong to ``python -m explorer.bench``). The search is checked
on margins with known roots (algebra) and on the INVENTED stand-ins of ``test_sizing`` and
``test_sizing_cheap`` (a lumped cell on a coolant stream: Incropera & DeWitt, Fundamentals of
Heat and Mass Transfer, 6th ed. 2007, section 5.3). Thermal figures go smoothly with the
reciprocal of a flow or a conductance (a series of thermal resistances: the same source,
section 3.1), which the refinement uses; the answers are the same as a dense scan's to the
stated resolution (self-consistency of sizing: common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from test_sizing import DUTY, STANDIN_CELL, Counter, StandInPlate
from test_sizing_cheap import standin_module

import explorer
import explorer.sizing as sizing
from explorer import cooling, duty
from explorer.limits import Limits
from explorer.sizing import find_boundary, size_cooling
from explorer.validators import InputError

# margins with known boundaries (algebra): (margin, lo, hi, resolution, cheaper, answer)
LAWS = {
    "reciprocal flow": (lambda q: 45.0 - (25.0 + 31.0 / q), 0.5, 10.0, 0.02, "lower", 1.56),
    "series resistance": (lambda k: 3.0 - 12.2 / (1.0 + 4.0 * k), 0.1, 3.0, 0.05, "lower",
                          0.8),
    "warmer inlet": (lambda t: 45.0 - (t + 10.0 + 0.002 * (t - 10.0) ** 2), 5.0, 45.0, 0.5,
                     "higher", 33.5),
    "saturating": (lambda x: 2.8 - 3.0 * math.exp(-x / 2.0) - 0.5 / x, 0.1, 20.0, 0.05,
                   "lower", 0.75),
}


def _scan(margin, lo, hi, step, cheaper):
    """The answer by a dense scan of every value on the resolution (the reference)."""
    values = np.arange(math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9) + 1) * step
    values = values if cheaper == "lower" else values[::-1]
    return next(round(v, 6) for v in values if margin(v) >= 0.0)


@pytest.mark.parametrize("name", sorted(LAWS))
def test_few_evaluations_and_the_scanned_answer(name):
    margin, lo, hi, step, cheaper, answer = LAWS[name]
    assert _scan(margin, lo, hi, step, cheaper) == pytest.approx(answer)
    calls = []

    def counted(x):
        calls.append(x)
        return margin(x)

    spacing = "linear" if name == "warmer inlet" else "auto"
    b = find_boundary(counted, lo, hi, cheaper=cheaper, resolution=step, samples=3,
                      spacing=spacing)
    assert b.kind == "limits" and b.value == pytest.approx(answer)
    # three samples, then the two neighbours of the boundary and at most two more probes
    assert len(calls) <= 7, calls
    assert len(set(calls)) == len(calls)  # no value is run twice


def test_refinement_beats_bisection():
    """Bisection from the same bracket needs about log2(bracket) probes; the refinement on a
    smooth margin needs fewer (here the reciprocal law over 475 resolution steps)."""
    margin, lo, hi, step, cheaper, _ = LAWS["reciprocal flow"]
    calls = []
    find_boundary(lambda x: calls.append(x) or margin(x), lo, hi, cheaper=cheaper,
                  resolution=step, samples=3)
    bisection = 3 + math.ceil(math.log2((hi - lo) / step / 2))
    assert len(calls) < bisection - 2


def test_module_sizing_uses_three_samples(monkeypatch):
    """A module run costs every cell on the plate: three first samples, then the refinement."""
    calls = []

    def run(*args, **kwargs):
        calls.append(kwargs["cooling"].flow_L_min)
        return standin_module(*args, **kwargs)

    monkeypatch.setattr(sizing, "_simulate_module", run)
    monkeypatch.setattr(sizing, "_simulate", lambda *a, **k: pytest.fail("single-cell run"))
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                       Limits(temperature_max_C=40.0))
    assert res.limited_by == "limits" and res.evaluations == len(calls)
    assert calls[:3] == pytest.approx([0.2, 1.4, 10.0])  # the ends and the geometric middle
    assert res.evaluations <= 7
    # the same answer as with five samples
    five = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                        Limits(temperature_max_C=40.0), samples=5)
    assert five.value == res.value


def test_positions_run_once_each_and_fewer_than_before(monkeypatch):
    """Cells one at a time: every (value, position) is run once; the samples at all three
    positions, the refinement at the worst, the answer again at all."""
    counter = Counter()
    monkeypatch.setattr(sizing, "_simulate", counter)
    monkeypatch.setattr(sizing, "_module_simulator", lambda: None)
    seen = []
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                       Limits(temperature_max_C=40.0),
                       on_evaluation=lambda v, met, m: seen.append(v))
    assert counter.calls == res.evaluations == len(seen)
    assert counter.calls <= 3 * 3 + 5  # 3 samples x 3 positions, then a few at the worst


def test_samples_auto_and_bad_values():
    with pytest.raises(InputError, match="`samples`"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                     Limits(temperature_max_C=40.0), samples="many")
    with pytest.raises(InputError, match="`check_fidelity`"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                     Limits(temperature_max_C=40.0), check_fidelity="yes")
    with pytest.raises(InputError, match="`check_fidelity`"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.2, 10.0),
                     Limits(temperature_max_C=40.0), check_fidelity={"wall": 3})


def test_sizing_checks_its_answer_on_the_fuller_models():
    """check_fidelity=True: the answer's run is the check's "as run", and carries its summary."""
    from explorer import fidelity

    cell = explorer.load_cell("van_nmc_66ah")
    design = cooling.edge_plate(cooling.fixed_sink(25.0, conductance_W_mK=80.0), fin_mm=1.0)
    res = size_cooling(cell, duty.discharge(c_rate=2.0, end_time_s=120.0), design, "fin_mm",
                       (0.2, 2.0), Limits(temperature_max_C=28.0), layout="single",
                       check_fidelity={"max_wall_s": 30.0})
    fid = res.fidelity
    assert fid is not None and str(fid["variant"].values[0]) == "as run"
    assert float(fid["peak_temperature"][0]) == pytest.approx(res.figures["temperature_max_C"])
    assert {"dfn", "averaged"} <= {str(v) for v in fid["variant"].values}
    assert fidelity.from_attrs(res.dataset) == fidelity.summary(fid)
    assert fid.attrs["verdict_could_flip"] in ("yes", "no")
    assert "fidelity check of the answer" in res.table()
    assert "Fidelity check" in res._repr_html_()
    off = size_cooling(cell, duty.discharge(c_rate=2.0, end_time_s=120.0), design, "fin_mm",
                       (0.2, 2.0), Limits(temperature_max_C=28.0), layout="single")
    assert off.fidelity is None and fidelity.from_attrs(off.dataset) is None
    assert off.value == res.value


SCENARIO = """
[scenario]
name = "fidelity on the CLI (invented)"
cell = "van_nmc_66ah"
[model]
electrochemistry = "spm"
layout = "single"
[[duty]]
step = "discharge"
c_rate = 2.0
end_time_s = 120
[cooling]
design = "edge_plate"
edge = "bottom"
fin_mm = 0.5
[cooling.plate]
kind = "fixed_sink"
temperature_C = 25.0
conductance_W_mK = 200.0
[limits]
temperature_max_C = 28.0
[size]
vary = "fin_mm"
bounds = [0.2, 2.0]
"""


@pytest.mark.parametrize("on", [True, False])
def test_cli_size_checks_the_answer_unless_told_not_to(tmp_path, capsys, on):
    import xarray as xr

    from explorer.cli import _parser
    from explorer.fidelity import from_attrs
    from explorer.scenario import cmd_size

    argv = ["size", "case.toml"] + ([] if on else ["--no-fidelity"])
    assert _parser().parse_args(argv).no_fidelity is (not on)
    path = tmp_path / "case.toml"
    path.write_text(SCENARIO, encoding="utf-8")
    code = cmd_size(path, tmp_path, fidelity=on)
    out, err = capsys.readouterr()
    assert code in (0, 1)
    assert ("fidelity check of the answer" in out) is on
    assert ("verdict could flip:" in out) is on
    assert err.count("run: fin_mm =") >= 3  # one line per evaluation
    with xr.open_dataset(tmp_path / "case_size.nc") as ds:
        assert (from_attrs(ds) is not None) is on


def test_the_runs_progress_callback_is_not_given_to_the_check():
    """A `progress(t_s, step)` for the runs (as the app passes) follows the sizing runs only;
    the fidelity check reports through its own option."""
    cell = explorer.load_cell("van_nmc_66ah")
    design = cooling.edge_plate(cooling.fixed_sink(25.0, conductance_W_mK=80.0), fin_mm=1.0)
    times, variants = [], set()
    res = size_cooling(cell, duty.discharge(c_rate=2.0, end_time_s=60.0), design, "fin_mm",
                       (0.2, 2.0), Limits(temperature_max_C=28.0), layout="single",
                       progress=lambda t_s, step=0: times.append(float(t_s)),
                       check_fidelity={"progress": lambda v, f: variants.add(v)})
    assert res.fidelity is not None and times and max(times) <= 60.0 + 1e-6
    assert variants == {str(v) for v in res.fidelity["variant"].values[1:]}
