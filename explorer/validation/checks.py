"""The outside checks: one function per check, each returning a :class:`CheckResult`.

The validation report (``python -m explorer validate``) and the test suite
(``tests/test_validation.py``) call the same functions. Every check compares the tool with
something outside it (a published equation, a handbook table, a reference library or an
independent solver), names that source, states its tolerance before measuring, and returns
the measured value, pass or fail, its run time and, where a plot says more, a figure.

Adding a check: write a function decorated with :func:`check` (name, source, tolerance) that
returns an :class:`Outcome`, and list it in :data:`CHECKS`; ``tests/test_validation.py``
picks it up.
"""

from __future__ import annotations

import functools
import importlib.util
import time
from dataclasses import dataclass, replace

import numpy as np

from explorer.validation import reference as ref

__all__ = ["CHECKS", "CheckResult", "Outcome", "SkipCheck", "check", "run_check"]

PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9")
DEMO_CELL = "van_nmc_66ah"  # the geometry the in-plane checks use (invented demo data)


@dataclass(frozen=True)
class CheckResult:
    """One row of the validation report."""

    name: str
    source: str  # the outside reference, or "common practice" / "from memory"
    tolerance: str  # stated before measuring
    measured: str  # the measured value, in words and numbers
    passed: bool | None  # None: skipped (see measured for why)
    seconds: float  # wall time of the check
    figure: object = None  # a plotly Figure, or None
    detail: str = ""  # what is compared, one or two sentences

    @property
    def status(self) -> str:
        return {True: "pass", False: "FAIL", None: "skipped"}[self.passed]


@dataclass(frozen=True)
class Outcome:
    """What a check function measured; :func:`check` adds the name, source, tolerance, time."""

    measured: str
    passed: bool
    figure: object = None
    detail: str = ""


class SkipCheck(Exception):
    """Raised by a check that cannot run here (a missing optional package); the message says
    why."""


def check(name: str, source: str, tolerance: str):
    """Declare a check: the decorated function returns an :class:`Outcome`; calling it returns
    a :class:`CheckResult` with the run time."""

    def wrap(fn):
        @functools.wraps(fn)
        def run(**kwargs) -> CheckResult:
            t0 = time.perf_counter()
            try:
                out = fn(**kwargs)
            except SkipCheck as why:
                return CheckResult(name, source, tolerance, f"skipped: {why}", None,
                                   time.perf_counter() - t0)
            return CheckResult(name, source, tolerance, out.measured, bool(out.passed),
                               time.perf_counter() - t0, out.figure, out.detail)

        run.check_name = name
        return run

    return wrap


def run_check(fn, **kwargs) -> CheckResult:
    """Run one check; an unexpected error becomes a failed row naming it (the report goes on)."""
    t0 = time.perf_counter()
    try:
        return fn(**kwargs)
    except Exception as exc:  # a bug in the tool or the check: report it, do not hide it
        return CheckResult(getattr(fn, "check_name", fn.__name__), "(the check did not finish)",
                           "-", f"error: {type(exc).__name__}: {exc}", False,
                           time.perf_counter() - t0)


# ---------------------------------------------------------------------------------------------
# helpers


def _figure(title: str, x_title: str, y_title: str, **layout):
    import plotly.graph_objects as go

    fig = go.Figure()
    fig.update_layout(title=title, xaxis_title=x_title, yaxis_title=y_title, template="plotly_white",
                      height=420, margin=dict(l=70, r=20, t=60, b=60), legend=dict(font_size=11),
                      **layout)
    return fig


def _demo_cell(name: str = DEMO_CELL):
    from explorer.cell import load_cell

    return load_cell(name)


def _with_derived(cell, **values):
    return replace(cell, derived=replace(cell.derived, **values))


def _rel(a, b) -> float:
    return abs(a - b) / abs(b)


# ---------------------------------------------------------------------------------------------
# electrochemistry

_ROD_C_RATES = (0.5, 1.0)


@check("SPMe against the DFN: voltage of a constant-current discharge",
       "Marquis, Sulzer, Timms, Please & Chapman, J. Electrochem. Soc. 166 (2019) A3693 "
       "(SPMe within a few mV of the full porous-electrode model at moderate rates); the 5 mV "
       "bound is common practice",
       "RMS difference <= 5 mV at 0.5C and 1C, every demo cell")
def spme_against_dfn() -> Outcome:
    """Both rods at the default mesh, the same fixed steps (30 s at 1C), 25 degC, SOC 1 to the
    cell's lower voltage."""
    from plotly.subplots import make_subplots

    from explorer.cell import list_demo_cells
    from explorer.rod import RodParameters, make_rod
    from explorer.rod_bench import discharge

    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, row_heights=(0.65, 0.35),
                        vertical_spacing=0.06)
    fig.update_layout(title="SPMe (solid) and DFN (dotted), 1C discharge at 25 °C",
                      template="plotly_white", height=560, margin=dict(l=70, r=20, t=60, b=60),
                      legend=dict(font_size=11))
    fig.update_yaxes(title_text="terminal voltage (V)", row=1, col=1)
    fig.update_yaxes(title_text="SPMe − DFN (mV)", row=2, col=1)
    fig.update_xaxes(title_text="charge delivered (Ah)", row=2, col=1)
    worst, where = 0.0, ""
    for k, name in enumerate(sorted(list_demo_cells())):
        params = RodParameters.from_cell(_demo_cell(name))
        for c_rate in _ROD_C_RATES:
            runs = {m: discharge(make_rod(m, params), params, c_rate=c_rate, dt=30.0)
                    for m in ("spme", "dfn")}
            (t, v_spme, _), (_, v_dfn, _) = runs["spme"], runs["dfn"]
            n = min(len(v_spme), len(v_dfn)) - 1  # the step that crosses the limit differs
            rms = float(np.sqrt(np.mean((v_spme[:n] - v_dfn[:n]) ** 2)))
            if rms > worst:
                worst, where = rms, f"{name}, {c_rate:g}C"
            if c_rate == 1.0:
                for model, dash in (("spme", "solid"), ("dfn", "dot")):
                    tt, vv, _ = runs[model]
                    fig.add_scatter(x=c_rate * params.capacity_Ah * tt / 3600, y=vv,
                                    name=f"{name} {model.upper()}", mode="lines",
                                    line=dict(color=PALETTE[k], dash=dash), row=1, col=1)
                fig.add_scatter(x=c_rate * params.capacity_Ah * t[:n] / 3600,
                                y=1e3 * (v_spme[:n] - v_dfn[:n]), mode="lines",
                                line=dict(color=PALETTE[k]), showlegend=False, row=2, col=1)
    return Outcome(f"largest RMS {worst * 1e3:.2f} mV ({where})", worst <= 5e-3, fig,
                   "Single particle model with electrolyte (SPMe) against the Doyle-Fuller-"
                   "Newman model (DFN) of the same cell, rods only, 25 °C.")


@check("Capacity at C/20 (Faraday's law)",
       "Faraday's law: the charge between the window's stoichiometries, F c_max eps_s L A |dsto| "
       "(cell.derived.theoretical_capacity_Ah)",
       "within 2 % for every demo cell (SPMe)")
def capacity_at_c20() -> Outcome:
    from explorer.cell import list_demo_cells
    from explorer.rod import RodParameters, make_rod
    from explorer.rod_bench import discharge

    worst, where = 0.0, ""
    for name in sorted(list_demo_cells()):
        cell = _demo_cell(name)
        params = RodParameters.from_cell(cell)
        t, v, _ = discharge(make_rod("spme", params), params, c_rate=0.05, dt=40.0)
        t_cross = np.interp(params.voltage_min_V, v[::-1], t[::-1])  # monotone at C/20
        q = 0.05 * params.capacity_Ah * t_cross / 3600.0
        err = _rel(q, cell.derived.theoretical_capacity_Ah)
        if err >= worst:
            worst, where = err, name
    return Outcome(f"largest difference {100 * worst:.2f} % ({where})", worst <= 0.02,
                   detail="A C/20 discharge from SOC 1 to the lower voltage delivers the charge "
                   "the electrode window holds.")


@check("Heat split against Bernardi's energy balance",
       "Bernardi, Pawlikowski & Newman, J. Electrochem. Soc. 132 (1985) 5: "
       "Q - Q_rev = I (U - V), Q_rev = -I T dU/dT",
       "irreversible + Ohmic heat = I (U - V) within 1e-9 (SPMe; uniform reaction) and 2 % "
       "(DFN; U at the electrode-averaged surfaces)")
def heat_split_bernardi() -> Outcome:
    from explorer.rod import Control, RodParameters, make_rod

    params = RodParameters.from_cell(_demo_cell())
    worst = {}
    for model in ("spme", "dfn"):
        rod = make_rod(model, params)
        x = rod.initial_state(0.9, 298.15)
        err = 0.0
        for _ in range(20):
            r = rod.solve_step(x, 30.0, 298.15, Control("current", 1.5 * params.capacity_Ah))
            x = r.state
            h = r.heat_W
            lhs = h["irreversible"] + h["ohmic_electrolyte"] + h["ohmic_solid"]
            err = max(err, _rel(lhs, r.current_A * (r.ocv_V - r.voltage_V)))
        worst[model] = err
    ok = worst["spme"] <= 1e-9 and worst["dfn"] <= 0.02
    return Outcome(f"SPMe {worst['spme']:.1e}, DFN {100 * worst['dfn']:.2f} %", ok,
                   detail=f"{DEMO_CELL}, 1.5C discharge from SOC 0.9, 20 steps of 30 s.")


# ---------------------------------------------------------------------------------------------
# collector foils

_FEM_GRID = (24, 16)  # the demo cell's 0.24 m x 0.16 m face: 10 mm control volumes
_FEM_PER_CELL = 4  # 2.5 mm P2 triangles: the tab ends (35, 85, 155, 205 mm) fall on mesh lines


def _tab_resistance(tab) -> float:
    from explorer.materials import SOLIDS

    sigma = SOLIDS[tab.material].electrical_conductivity_S_m
    return tab.free_length_m / (sigma * tab.width_m * tab.thickness_m) + tab.weld_resistance_ohm


@check("Foil potential against an independent finite-element solution",
       "scikit-fem (Gustafsson & McBain, JOSS 5 (2020) 2369), quadratic triangles, same "
       "equation and tab condition; the finite-volume solver of explorer.inplane.collector",
       "cell-mean potential within 1 % of the largest drop; resistance within 1 %")
def foil_against_fem() -> Outcome:
    if importlib.util.find_spec("skfem") is None:
        raise SkipCheck("scikit-fem not installed (pip install scikit-fem)")
    from explorer.inplane.collector import CollectorNetwork
    from explorer.inplane.grid import Grid

    cell = _demo_cell()
    g = cell.geometry
    grid = Grid(g.width_m, g.height_m, *_FEM_GRID)
    net = CollectorNetwork(cell, grid)
    fv_all = net.potentials(1.0)
    fig = _figure(f"Foil potential drop for 1 A, {DEMO_CELL} (lines: finite elements, "
                  "markers: this tool)", "x along the tab edge (mm)", "drop below the terminal "
                  "(µV per A)")
    worst_u, worst_r, texts = 0.0, 0.0, []
    for k, polarity in enumerate(("negative", "positive")):
        sigma = 1.0 / getattr(cell.derived, f"{polarity}_sheet_resistance_ohm")
        tabs = [(t.position_m - t.width_m / 2, t.position_m + t.width_m / 2, _tab_resistance(t))
                for t in cell.tab(polarity)]
        if any(t.edge != "top" for t in cell.tab(polarity)):
            raise AssertionError("the finite-element reference takes tabs on the top edge")
        fem, compliance = ref.fem_sheet_potential(sigma, g.width_m, g.height_m, tabs,
                                                  *_FEM_GRID, per_cell=_FEM_PER_CELL)
        fv = np.abs(fv_all[polarity])
        err_u = float(np.max(np.abs(fv - fem)) / fem.max())
        err_r = _rel(net.resistance_by_polarity_ohm[polarity], compliance)
        worst_u, worst_r = max(worst_u, err_u), max(worst_r, err_r)
        texts.append(f"{polarity} {100 * err_u:.2f} % / {100 * err_r:.2f} %")
        for row, dash, label in ((-1, "solid", "top row"), (0, "dash", "bottom row")):
            fig.add_scatter(x=grid.x * 1e3, y=fem[row] * 1e6, mode="lines",
                            line=dict(color=PALETTE[k], dash=dash),
                            name=f"{polarity}, {label}, finite elements")
            fig.add_scatter(x=grid.x * 1e3, y=fv[row] * 1e6, mode="markers",
                            marker=dict(color=PALETTE[k], symbol="circle-open", size=8),
                            name=f"{polarity}, {label}, this tool")
    return Outcome("potential / resistance: " + "; ".join(texts),
                   worst_u <= 0.01 and worst_r <= 0.01, fig,
                   f"The demo cell's foils (all foils of a polarity in parallel) drained by 1 A "
                   f"uniformly, on a {_FEM_GRID[0]} x {_FEM_GRID[1]} grid; finite elements "
                   f"{_FEM_PER_CELL} x {_FEM_PER_CELL} intervals per control volume.")


@check("Foil fed along a whole edge: one third of the end-to-end resistance",
       "Distributed-load result for a resistive sheet with uniform drain (derived: V'' = -J R_s, "
       "V(0) = 0, V'(H) = 0 gives P = I^2 R_s H / (3 W)); common practice in tab design",
       "Joule heat per A^2 within 0.1 % of R_s H / (3 W) on a 4 x 48 grid")
def foil_one_third() -> Outcome:
    from explorer.cell.model import Tab
    from explorer.inplane.collector import CollectorNetwork
    from explorer.inplane.grid import Grid

    cell = _demo_cell()
    g = cell.geometry
    tabs = (Tab("negative", "negative", "bottom", g.width_m / 2, g.width_m, 3e-4, "copper",
                0.0, 0.0), replace(g.tabs[1], edge="top"))
    cell = replace(cell, geometry=replace(g, tabs=tabs))
    r_s = cell.derived.negative_sheet_resistance_ohm
    exact = r_s * g.height_m / (3 * g.width_m)
    net = CollectorNetwork(cell, Grid(g.width_m, g.height_m, 4, 48), refine=1)
    err = _rel(float(net.foil_joule_W_per_A2["negative"].sum()), exact)
    return Outcome(f"{100 * err:.3f} %", err <= 1e-3,
                   detail="The demo cell's negative foils with one tab along the whole bottom "
                   "edge (no tab resistance).")


# ---------------------------------------------------------------------------------------------
# heat conduction and cooling


@check("Plane wall with generation: in-plane field against the analytic profile",
       "Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed., §3.5 (plane wall "
       "with uniform generation, eq. 3.42 form)",
       "largest difference <= 0.1 % of the rise on 48 rows; second order (error / 10 or better "
       "from 12 to 48 rows)")
def plane_wall() -> Outcome:
    from explorer.inplane.grid import Grid
    from explorer.inplane.sinks import EdgeSink, Sinks
    from explorer.inplane.thermal import PlaneThermal

    cell = _demo_cell()
    g = cell.geometry
    W, H = g.width_m, g.height_m
    q_W, T0 = 20.0, 20.0
    q_per_k = q_W / (W * H) / (cell.derived.inplane_conductivity_W_mK * g.stack_thickness_m)
    rise = float(ref.plane_wall_rise(H, H, q_per_k))
    errors, profiles = {}, {}
    for ny in (12, 24, 48):
        grid = Grid(W, H, 4, ny)
        model = PlaneThermal(cell, grid, Sinks(edges={"bottom": EdgeSink(1e9, T0)}))
        T = model.temperature_C(model.steady_state(np.full(grid.shape, q_W / (4 * ny))))
        exact = T0 + ref.plane_wall_rise(grid.y, H, q_per_k)
        errors[ny] = float(np.max(np.abs(T - exact[:, None])) / rise)
        profiles[ny] = (grid.y, T[:, 0])
    fig = _figure(f"Steady plane wall with generation ({q_W:g} W, bottom edge at {T0:g} °C)",
                  "distance from the cooled edge (mm)", "temperature (°C)")
    y = np.linspace(0, H, 200)
    fig.add_scatter(x=y * 1e3, y=T0 + ref.plane_wall_rise(y, H, q_per_k), mode="lines",
                    name="analytic (Incropera & DeWitt §3.5)", line=dict(color="#000000"))
    for k, ny in enumerate((12, 48)):
        yy, TT = profiles[ny]
        fig.add_scatter(x=yy * 1e3, y=TT, mode="markers", name=f"this tool, {ny} rows",
                        marker=dict(color=PALETTE[k], size=7 if ny == 12 else 4))
    ok = errors[48] <= 1e-3 and errors[12] / errors[48] >= 10
    return Outcome(f"{100 * errors[48]:.3f} % of the {rise:.2f} K rise on 48 rows "
                   f"({100 * errors[12]:.2f} % on 12: ratio {errors[12] / errors[48]:.1f})",
                   ok, fig, f"{DEMO_CELL} face, in-plane conductivity "
                   f"{cell.derived.inplane_conductivity_W_mK:.1f} W/(m K), held at the bottom edge, "
                   "adiabatic elsewhere.")


@check("Through the thickness: plane wall with generation and face convection",
       "Incropera & DeWitt §3.5, eqs. 3.42-3.46 form (surface T_inf + q''' d / h, core + "
       "q''' d^2 / (2k), mean + q''' d^2 / (3k))",
       "face, core and mean temperatures within 1e-9 (relative), one and two faces cooled")
def through_thickness() -> Outcome:
    from explorer.inplane.grid import Grid
    from explorer.inplane.sinks import FaceSink, Sinks
    from explorer.inplane.thermal import PlaneThermal

    cell = _demo_cell()
    g = cell.geometry
    grid = Grid(g.width_m, g.height_m, 4, 6)
    q_W, h, T_inf = 12.0, 150.0, 20.0
    heat = np.full(grid.shape, q_W / 24)
    q3 = q_W / (g.width_m * g.height_m * g.stack_thickness_m)
    k = cell.derived.throughplane_conductivity_W_mK
    worst = 0.0
    for faces in (("front", "back"), ("back",)):
        model = PlaneThermal(cell, grid, Sinks(faces={f: FaceSink(h, T_inf) for f in faces}))
        x = model.steady_state(heat)
        tt = model.through_thickness_C(x, heat)
        exact = ref.wall_convection(q3, g.stack_thickness_m / len(faces), h, k, T_inf)
        got = {"surface": tt["coldest"], "core": tt["hottest"], "mean": model.temperature_C(x)}
        for key, value in got.items():
            worst = max(worst, float(np.max(np.abs(value - exact[key]))) / exact[key])
    return Outcome(f"largest relative difference {worst:.1e}", worst <= 1e-9,
                   detail=f"{DEMO_CELL}, {q_W:g} W uniform, h = {h:g} W/(m² K).")


_BIOT = (0.05, 0.5)


@check("Lumped cooling against the exact slab solution",
       "Incropera & DeWitt §5.5.1 (plane wall, exact series solution, eqs. 5.39-5.46) and §5.2 "
       "(lumped capacitance, eq. 5.6)",
       "mean temperature excess within 1 % of the initial excess for Fo <= 3, at Bi 0.05 and 0.5")
def lumped_cooling() -> Outcome:
    """The single-temperature model (layout 'single') cools from both faces; its mean-to-face
    resistance d/(3k) carries the slab's internal resistance."""
    from explorer.inplane.lumped import LumpedThermal
    from explorer.inplane.sinks import FaceSink, Sinks

    cell = _demo_cell()
    g = cell.geometry
    d = g.stack_thickness_m / 2
    k = cell.derived.throughplane_conductivity_W_mK
    rho_c = cell.derived.heat_capacity_J_K / (g.width_m * g.height_m * g.stack_thickness_m)
    alpha = k / rho_c
    fig = _figure("Cooling from both faces: mean temperature excess", "Fourier number α t / d²",
                  "(T - T∞) / (T_i - T∞)")
    worst, texts = 0.0, []
    zero = np.zeros((1, 1))
    for n, biot in enumerate(_BIOT):
        h = biot * k / d
        model = LumpedThermal(cell, Sinks(faces={f: FaceSink(h, 0.0) for f in ("front", "back")}))
        fo_end, steps = 3.0, 600
        dt = fo_end * d**2 / alpha / steps
        x = model.initial_state(1.0)
        fo, mean = [0.0], [1.0]
        for i in range(steps):
            x, _ = model.step(x, zero, dt)
            fo.append((i + 1) * dt * alpha / d**2)
            mean.append(model.mean_temperature_C(x))
        fo, mean = np.array(fo), np.array(mean)
        exact = ref.slab_mean_excess(biot, np.maximum(fo, 1e-3))
        exact[0] = 1.0
        err = float(np.max(np.abs(mean - exact)))
        worst = max(worst, err)
        texts.append(f"Bi {biot:g}: {100 * err:.2f} %")
        fig.add_scatter(x=fo, y=exact, mode="lines", line=dict(color=PALETTE[n]),
                        name=f"Bi {biot:g}, exact slab series")
        sub = slice(0, None, 30)
        fig.add_scatter(x=fo[sub], y=mean[sub], mode="markers", name=f"Bi {biot:g}, this tool",
                        marker=dict(color=PALETTE[n], symbol="circle-open", size=8))
    fo = np.linspace(0, 3, 100)
    fig.add_scatter(x=fo, y=np.exp(-_BIOT[-1] * fo), mode="lines",
                    line=dict(color="#888888", dash="dot"),
                    name=f"Bi {_BIOT[-1]:g}, lumped capacitance without internal resistance")
    return Outcome("; ".join(texts), worst <= 0.01, fig,
                   f"{DEMO_CELL} stack (through-plane k = {k:.2f} W/(m K), half-thickness "
                   f"{d * 1e3:.2f} mm), both faces cooled from a uniform start; backward Euler, "
                   "600 steps to Fo = 3.")


@check("Coolant warming along a wall at uniform temperature",
       "Incropera & DeWitt §8.3.1, eq. 8.42b: (T_s - T_o) / (T_s - T_i) = exp(-h A / (m c_p))",
       "outlet temperature within 1e-9 (relative), flow along +y and -x")
def coolant_constant_wall() -> Outcome:
    from explorer.inplane.grid import Grid
    from explorer.inplane.sinks import CoolantStream, FaceSink, Sinks
    from explorer.inplane.thermal import PlaneThermal

    cell = _with_derived(_demo_cell(), heat_capacity_J_K=1e15)  # the wall holds its temperature
    g = cell.geometry
    grid = Grid(g.width_m, g.height_m, 12, 8)
    h, C, T_s, T_in = 400.0, 10.0, 40.0, 20.0
    expected = ref.outlet_constant_wall(T_s, T_in, h * g.width_m * g.height_m, C)
    worst = 0.0
    for direction in ("+y", "-x"):
        sinks = Sinks(faces={"back": FaceSink(h, 0.0)},
                      coolant=CoolantStream("back", direction, C, T_in))
        model = PlaneThermal(cell, grid, sinks, throughplane=False)
        x, _ = model.step(model.initial_state(T_s), np.zeros(grid.shape), 1.0)
        worst = max(worst, _rel(model.coolant_outlet_C(x), expected))
    return Outcome(f"largest relative difference {worst:.1e} (outlet {expected:.3f} °C)",
                   worst <= 1e-9, detail=f"h = {h:g} W/(m² K) over the {DEMO_CELL} face, "
                   f"m c_p = {C:g} W/K, wall {T_s:g} °C, inlet {T_in:g} °C.")


# ---------------------------------------------------------------------------------------------
# coolant properties and channel correlations


@check("Water properties against the handbook table",
       "Incropera & DeWitt, 6th ed., Table A.6 (saturated water), 290-370 K, values from memory",
       "density 0.3 %, specific heat 0.5 %, viscosity 1.5 %, conductivity 1.5 %, Prandtl 2 %")
def water_properties() -> Outcome:
    from plotly.subplots import make_subplots

    from explorer.cooling.coolant import get_coolant

    water = get_coolant("water")
    worst = {p: 0.0 for p in ref.WATER_PROPERTIES}
    ok = True
    for T_K, row in ref.WATER_TABLE_A6.items():
        for prop, got, want, tol in zip(ref.WATER_PROPERTIES, _water_values(water, T_K - 273.15),
                                        row, ref.WATER_TOLERANCE):
            err = _rel(got, want)
            worst[prop] = max(worst[prop], err)
            ok &= err <= tol
    fig = make_subplots(rows=1, cols=5, subplot_titles=[f"{p} ({u})" for p, u in
                                                        zip(ref.WATER_PROPERTIES, ref.WATER_UNITS)])
    T = np.linspace(10.0, 99.0, 60)
    curve = np.array([_water_values(water, t) for t in T])
    T_tab = np.array(list(ref.WATER_TABLE_A6)) - 273.15
    table = np.array(list(ref.WATER_TABLE_A6.values()))
    for i in range(5):
        fig.add_scatter(x=T, y=curve[:, i], mode="lines", line=dict(color=PALETTE[0]),
                        name="this tool (CoolProp)", showlegend=i == 0, row=1, col=i + 1)
        fig.add_scatter(x=T_tab, y=table[:, i], mode="markers", name="Table A.6",
                        marker=dict(color=PALETTE[1], size=7), showlegend=i == 0, row=1, col=i + 1)
        fig.update_xaxes(title_text="°C", row=1, col=i + 1)
    fig.update_layout(title="Water: this tool against Incropera & DeWitt Table A.6",
                      template="plotly_white", height=360, margin=dict(l=50, r=20, t=80, b=50),
                      font_size=11)
    text = ", ".join(f"{p} {100 * e:.2f} %" for p, e in worst.items())
    return Outcome("largest differences: " + text, ok, fig,
                   "Every row of the table from 290 K to 370 K; the tool reads CoolProp's "
                   "IAPWS formulations.")


def _water_values(water, T_C: float) -> tuple:
    p = water.properties(T_C)
    return (p.density_kg_m3, p.specific_heat_J_kgK, p.viscosity_Pa_s, p.conductivity_W_mK,
            p.prandtl)


@check("Glycol coolants against the ASHRAE tables",
       "ASHRAE Handbook - Fundamentals (2009), Ch. 31 (secondary coolants), values from memory",
       "50 % ethylene glycol at 25 °C: density 1 %, cp 3 %, viscosity 20 %, conductivity 5 %; "
       "freezing points of eg50 and pg30 within 1.5 K and 1 K")
def glycol_properties() -> Outcome:
    from explorer.cooling.coolant import get_coolant

    T, *want = ref.EG50_ASHRAE
    p = get_coolant("eg50").properties(T)
    got = (p.density_kg_m3, p.specific_heat_J_kgK, p.viscosity_Pa_s, p.conductivity_W_mK)
    errs = [_rel(a, b) for a, b in zip(got, want)]
    ok = all(e <= t for e, t in zip(errs, ref.EG50_TOLERANCE))
    freeze = {}
    for name, (T_f, tol) in ref.FREEZING_ASHRAE.items():
        freeze[name] = get_coolant(name).min_C - T_f
        ok &= abs(freeze[name]) <= tol
    labels = ("density", "cp", "viscosity", "conductivity")
    text = ", ".join(f"{n} {100 * e:.1f} %" for n, e in zip(labels, errs))
    text += "; freezing " + ", ".join(f"{n} {v:+.1f} K" for n, v in freeze.items())
    return Outcome(text, ok, detail="Mass fractions (CoolProp's incompressible mixtures).")


@check("Laminar duct Nusselt numbers and friction against the tabulated values",
       "Shah & London, Laminar Flow Forced Convection in Ducts (1978), as in Incropera & DeWitt "
       "Table 8.1 (values from memory)",
       "Nu_H1 and Nu_T within 1 %, f Re within 1.5 %, aspect ratios 1 to infinity")
def duct_nusselt() -> Outcome:
    from explorer.cooling import channels as ch

    worst = [0.0, 0.0, 0.0]
    for ratio, row in ref.DUCT_TABLE_8_1.items():
        aspect = 1.0 / ratio
        got = (ch.nusselt_laminar_rectangular(aspect, "H1"),
               ch.nusselt_laminar_rectangular(aspect, "T"), ch.fre_laminar_rectangular(aspect))
        worst = [max(w, _rel(a, b)) for w, a, b in zip(worst, got, row)]
    ok = all(w <= t for w, t in zip(worst, ref.DUCT_TOLERANCE))
    fig = _figure("Fully developed laminar flow in rectangular ducts", "short side / long side",
                  "Nusselt number (f Re / 10 for friction)")
    a = np.linspace(0.0, 1.0, 101)
    table_a = np.array([1.0 / r for r in ref.DUCT_TABLE_8_1])
    table = np.array(list(ref.DUCT_TABLE_8_1.values()))
    curves = (("Nu_H1 (uniform flux)", lambda s: ch.nusselt_laminar_rectangular(s, "H1"), 1.0),
              ("Nu_T (uniform wall temperature)", lambda s: ch.nusselt_laminar_rectangular(s, "T"),
               1.0),
              ("f Re / 10", ch.fre_laminar_rectangular, 0.1))
    for i, (label, fn, scale) in enumerate(curves):
        fig.add_scatter(x=a, y=[scale * fn(s) for s in a], mode="lines", name=f"{label}, this tool",
                        line=dict(color=PALETTE[i]))
        fig.add_scatter(x=table_a, y=scale * table[:, i], mode="markers",
                        name=f"{label}, Table 8.1", marker=dict(color=PALETTE[i], size=8,
                                                                 symbol="diamond-open"))
    return Outcome(f"largest differences Nu_H1 {100 * worst[0]:.2f} %, Nu_T {100 * worst[1]:.2f} "
                   f"%, f Re {100 * worst[2]:.2f} %", ok, fig,
                   "The seven aspect ratios of the table.")


@check("Turbulent channels: Gnielinski Nusselt number and Colebrook friction",
       "Reference libraries ht (ht.conv_internal.turbulent_Gnielinski) and fluids "
       "(fluids.friction.Colebrook), Caleb Bell",
       "Nusselt within 1 %, friction factor within 1e-8 (relative)")
def turbulent_channels() -> Outcome:
    import fluids
    import ht

    from explorer.cooling import channels as ch

    worst_nu = worst_f = 0.0
    for re in (4e3, 1e4, 1e5, 1e6):
        for ed in (0.0, 1e-4, 1e-2):
            f_ref = fluids.friction.Colebrook(re, ed)
            worst_f = max(worst_f, _rel(ch.colebrook(re, ed), f_ref))
            for pr in (0.7, 6.0, 30.0, 200.0):
                worst_nu = max(worst_nu, _rel(ch.gnielinski(re, pr, f_ref),
                                              ht.conv_internal.turbulent_Gnielinski(re, pr, f_ref)))
    return Outcome(f"Nusselt {100 * worst_nu:.3f} %, friction {worst_f:.1e}",
                   worst_nu <= 0.01 and worst_f <= 1e-8,
                   detail="Re 4e3 to 1e6, relative roughness 0 to 1e-2, Pr 0.7 to 200.")


#: every check, in report order
CHECKS = (
    spme_against_dfn,
    capacity_at_c20,
    heat_split_bernardi,
    foil_against_fem,
    foil_one_third,
    plane_wall,
    through_thickness,
    lumped_cooling,
    coolant_constant_wall,
    water_properties,
    glycol_properties,
    duct_nusselt,
    turbulent_channels,
)

