"""Single particle model (SPM): one particle per electrode, uniform reaction.

Each electrode is represented by one particle whose surface carries the
electrode-averaged reaction ``j = +-I / (A a L)`` (A the cell's active area,
a = 3 eps_s / R_p, L the coating thickness). The electrolyte stays at its
initial concentration and conducts perfectly, the solid has no resistance:

    V_rod = U_p(c_p,surf) - U_n(c_n,surf) + eta_p - eta_n,

with ``eta`` from inverse Butler-Volmer (:mod:`explorer.rod.kinetics`). The
particles are the conservative finite-volume spheres of
:mod:`explorer.rod.particle`, advanced by backward Euler.

State layout: ``[c_n shells, c_p shells, I]`` -- the last entry is the
current of the step that produced the state (0 at rest), used only as the
starting guess of the next voltage-controlled step.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from explorer.materials import arrhenius
from explorer.rod.base import RodModel, RodStepError, StepResult
from explorer.rod.control import check_control, solve_current
from explorer.rod.heat import heat_split
from explorer.rod.kinetics import exchange_current, overpotential
from explorer.rod.mesh import RodMesh
from explorer.rod.params import FARADAY, GAS_CONSTANT, REFERENCE_K, RodParameters
from explorer.rod.particle import CACHE_SIZE, SphereShells
from explorer.validators import InputError

__all__ = ["SPM", "RodBatch", "check_step_inputs"]


@dataclass
class RodBatch:
    """What :meth:`SPM.solve_current_batch` gives: per rod (first axis) the new state, the
    terminal voltage, the open-circuit voltage, the SOC and the heat rates (arrays under
    the keys of :data:`explorer.rod.heat.HEAT_KEYS`)."""

    states: np.ndarray
    voltage_V: np.ndarray
    ocv_V: np.ndarray
    soc: np.ndarray
    heat_W: dict


_PLANS: dict = {}  # SPM._shared_plan


class _AtTemperature:
    """What a step needs of one temperature (:meth:`SPM._at`): ``f`` the Arrhenius factors
    (list, in :meth:`SPM._activation_energies` order), ``rate_lam`` every mode's decay rate
    (None where :meth:`SPM._operator` takes them from the factors in one product),
    ``extrap`` the two surface extrapolations per ampere, and the voltage terms' constants
    (:meth:`SPM._fill_constants`)."""

    __slots__ = ("T", "f", "rate_lam", "extrap", "rate", "gF", "two_over_f", "kappa_f", "nu")


class _StepOperator:
    """One step's linear part at ``(dt, T)`` (:meth:`SPM._operator`)."""

    __slots__ = ("at", "dt", "den", "q", "surf_q")


def ocp_at(ocp):
    """``sto -> (U, dU/dT)`` as Python floats for one stoichiometry: the curve's own ``at``
    (:meth:`explorer.materials.ocp.OpenCircuitPotential.at`) or, for another curve object,
    its ``potential`` and ``entropic``."""
    at = getattr(ocp, "at", None)
    if at is not None:
        return at
    return lambda sto: (float(ocp.potential(sto)), float(ocp.entropic(sto)))


def check_step_inputs(dt, temperature_K, series_resistance_ohm):
    """Validate the scalar step inputs; return them as floats."""
    try:
        dt, T, R = float(dt), float(temperature_K), float(series_resistance_ohm)
    except (TypeError, ValueError):
        raise InputError(f"rod step: `dt`, `temperature_K` and `series_resistance_ohm` must be "
                         f"numbers, got {dt!r}, {temperature_K!r}, {series_resistance_ohm!r}") from None
    if not (dt > 0 and math.isfinite(dt)):
        raise InputError(f"`dt`: expected a positive time step in s, got {dt!r}")
    if not (150.0 < T < 500.0):
        raise InputError(f"`temperature_K`: expected a cell temperature in kelvin (150-500 K), "
                         f"got {T!r}")
    if not (R >= 0 and math.isfinite(R)):
        raise InputError(f"`series_resistance_ohm`: expected a resistance >= 0, got {R!r}")
    return dt, T, R


class SPM(RodModel):
    """Single particle model.

    Parameters
    ----------
    params : RodParameters
    mesh : None, RodMesh or dict, optional
        Only ``shells`` is used.

    Examples
    --------
    >>> rod = SPM(params)                                         # doctest: +SKIP
    >>> x = rod.initial_state(1.0, 298.15)                        # doctest: +SKIP
    >>> r = rod.solve_step(x, 10.0, 298.15, Control("current", 66.0))  # doctest: +SKIP
    """

    name = "spm"
    has_electrolyte = False

    def __init__(self, params: RodParameters, mesh=None):
        if not isinstance(params, RodParameters):
            raise InputError(f"`params`: expected RodParameters, got {type(params).__name__}")
        self.params = params
        self.mesh = RodMesh.coerce(mesh)
        self.shells = SphereShells.of(self.mesh.shells)
        self.nr = self.mesh.shells
        A = params.area_m2
        self._electrodes = (params.negative, params.positive)
        # outward particle flux per ampere of cell current (j / F with j = +-I / (A a L))
        self._flux_per_A = tuple(e.sign / (A * e.surface_area_m2_m3 * e.thickness_m * FARADAY)
                                 for e in self._electrodes)
        self._j_per_A = tuple(e.sign / (A * e.surface_area_m2_m3 * e.thickness_m)
                              for e in self._electrodes)
        # solid volume of each electrode, for lithium inventories
        self._solid_m3 = tuple(e.active_fraction * e.thickness_m * A for e in self._electrodes)
        self.current_1C_A = params.capacity_Ah
        self.size = 2 * self.nr + self._extra_size() + 1
        self._outer = (self.nr - 1, 2 * self.nr - 1)  # outer shells in the state
        self._temps: dict = {}  # T -> _AtTemperature
        self._last_op = None  # the operator of the last step (_operator)
        self._ea = np.array(self._activation_energies())
        self._cmax = np.array([e.max_concentration_mol_m3 for e in self._electrodes])
        self._cmax_f = tuple(self._cmax.tolist())
        self._ocp_at = tuple(ocp_at(e.ocp) for e in self._electrodes)
        self._ce_slice = None  # the electrolyte's part of the state (SPMe)
        # SOC = soc_0 + soc_w . (negative shells): params.soc_from_negative of the bulk
        # stoichiometry, which is linear in it
        self._soc_0 = params.soc_from_negative(0.0)
        self._soc_w = self.shells.weights * ((params.soc_from_negative(1.0) - self._soc_0)
                                             / params.negative.max_concentration_mol_m3)
        self._blocks = None  # the stacked linear parts (_plan), built on first use: subclasses
        # finish their parts after this

    # ---- hooks the SPMe extends ------------------------------------------------------------
    def _extra_size(self) -> int:
        return 0

    # ---- contract ------------------------------------------------------------------------
    def initial_state(self, soc: float, temperature_K: float) -> np.ndarray:
        soc = float(soc)
        if not math.isfinite(soc):
            raise InputError(f"`soc`: expected a number, got {soc!r}")
        stos = self.params.stoichiometry_at(soc)
        for e, sto in zip(self._electrodes, stos):
            if not 0.0 < sto < 1.0:
                raise InputError(f"`soc`: {soc!r} puts the {e.name} electrode at stoichiometry "
                                 f"{sto:.4f}, outside (0, 1); expected a SOC inside the cell's window")
        x = np.zeros(self.size)
        nr = self.nr
        x[:nr] = stos[0] * self.params.negative.max_concentration_mol_m3
        x[nr:2 * nr] = stos[1] * self.params.positive.max_concentration_mol_m3
        self._fill_extra_initial(x)
        return x

    def _fill_extra_initial(self, x):
        pass

    def _check_state(self, state):
        x = np.asarray(state, dtype=float)
        if x.shape != (self.size,):
            raise InputError(f"`state`: expected a {self.name} state of length {self.size}, "
                             f"got shape {x.shape}")
        return x

    def soc(self, state) -> float:
        x = self._check_state(state)
        sto_n = self.shells.mean(x[:self.nr]) / self.params.negative.max_concentration_mol_m3
        return float(self.params.soc_from_negative(sto_n))

    def lithium_by_electrode(self, state) -> dict[str, float]:
        """Lithium in each electrode's solid phase, mol."""
        x = self._check_state(state)
        nr = self.nr
        return {"negative": float(self.shells.mean(x[:nr]) * self._solid_m3[0]),
                "positive": float(self.shells.mean(x[nr:2 * nr]) * self._solid_m3[1])}

    def lithium_mol(self, state) -> float:
        li = self.lithium_by_electrode(state)
        return li["negative"] + li["positive"]

    # ---- stepping ------------------------------------------------------------------------
    def _activation_energies(self) -> list[float]:
        """Activation energies of every temperature-dependent property the model uses."""
        n, p = self._electrodes
        return [n.diffusivity_activation_J_mol, p.diffusivity_activation_J_mol,
                n.rate_activation_J_mol, p.rate_activation_J_mol]

    def _modal_blocks(self):
        """The linear state parts in state order: ``(slice, ModalEuler, forcing per A)``.

        Each part obeys ``W dc/dt = -s K c + b I`` (``s`` from :meth:`_rates`), so one
        backward-Euler step is applied in the part's eigenbasis (see
        :class:`~explorer.rod.particle.ModalEuler`) without forming a propagator matrix.
        """
        nr, modal = self.nr, self.shells._modal
        blocks = []
        for k, e in enumerate(self._electrodes):
            force = np.zeros(nr)
            force[nr - 1] = -3.0 / e.particle_radius_m  # outer-face flux (4 pi R^2)/(4/3 pi R^3)
            blocks.append((slice(k * nr, (k + 1) * nr), modal, force * self._flux_per_A[k]))
        return blocks

    def _rates(self, f):
        """Each part's eigenvalue scale ``s`` at Arrhenius factors ``f``, in block order."""
        return [e.diffusivity_m2_s * f[k] / e.particle_radius_m ** 2
                for k, e in enumerate(self._electrodes)]

    def _fill_constants(self, at):
        """The temperature-dependent constants of the voltage terms, on ``at`` (its ``f`` is
        the list of Arrhenius factors in :meth:`_activation_energies` order)."""
        n, p = self._electrodes
        f = at.f
        at.rate = (n.rate_constant * f[2], p.rate_constant * f[3])
        at.gF = (FARADAY * at.rate[0], FARADAY * at.rate[1])
        at.two_over_f = 2.0 * GAS_CONSTANT * at.T / FARADAY

    def _shared_plan(self):
        """:meth:`_plan`, shared between rods of the same model, parameters and mesh (the
        plan is read-only; a run builds its rod anew, and a sweep or sizing runs many)."""
        try:
            key = (type(self), self.params, self.mesh)
            plan = _PLANS.get(key)
        except TypeError:  # parameters holding an unhashable curve object: not shared
            return self._plan()
        if plan is None:
            if len(_PLANS) >= CACHE_SIZE:
                _PLANS.clear()
            plan = _PLANS[key] = self._plan()
        return plan

    def _plan(self):
        """The linear parts stacked once: block-diagonal eigenbases, their eigenvalues and the
        projected forcing, so a step's operator is a few vector operations whatever its
        ``(dt, T)`` (the temperature changes on every step of a thermal run)."""
        from scipy.linalg import block_diag

        blocks = self._modal_blocks()
        sizes = [m.lam.size for _, m, _ in blocks]
        if sum(sizes) != self.size - 1 or any(sl.start != sum(sizes[:i]) for i, (sl, _, _)
                                              in enumerate(blocks)):
            raise RuntimeError(f"{self.name}: the linear parts must cover the state in order")
        surf_c = np.array([e.particle_radius_m * self.shells.surface_distance
                           / e.diffusivity_m2_s * self._flux_per_A[k]
                           for k, e in enumerate(self._electrodes)])
        lam = np.concatenate([m.lam for _, m, _ in blocks])
        # each part's rate is linear in the Arrhenius factors: rates = R @ f, so every mode's
        # decay rate s lam is one product (RL @ f); checked, else taken part by part
        ea = len(self._ea)
        R = np.array(self._rates(np.eye(ea)), dtype=float)  # (parts, factors)
        probe = np.linspace(0.5, 2.0, ea)
        linear = np.allclose(R @ probe, np.asarray(self._rates(probe), dtype=float),
                             rtol=1e-12, atol=0.0)
        RL = np.repeat(R, sizes, axis=0) * lam[:, None] if linear else None
        return {"sizes": np.array(sizes), "lam": lam, "RL": RL,
                # [1 | RL]: applied to [1, dt f] it gives every mode's 1 + dt s lam
                "RL1": None if RL is None else np.hstack([np.ones((RL.shape[0], 1)), RL]),
                "ea_R": self._ea / GAS_CONSTANT,
                "ea_R_list": (self._ea / GAS_CONSTANT).tolist(),
                "V": block_diag(*(m.V for _, m, _ in blocks)),
                "VtW": block_diag(*(m._VtW for _, m, _ in blocks)),
                "Vtb": np.concatenate([m.V.T @ b for _, m, b in blocks]),
                # V'W with V'b as a last column: applied to the state with its current entry
                # replaced by I dt, it gives the modal amplitudes before the decay, V'W c + I dt V'b
                "VtW_b": np.hstack([block_diag(*(m._VtW for _, m, _ in blocks)),
                                    np.concatenate([m.V.T @ b for _, m, b in blocks])[:, None]]),
                "outer": np.array(self._outer), "surf_c": surf_c,
                "surf_c_list": surf_c.tolist()}

    def _at(self, T) -> _AtTemperature:
        """What the steps need of temperature ``T``, cached: the Arrhenius factors and the
        voltage terms' constants (and every mode's decay rate where the rates are not linear
        in the factors); a thermal run changes the temperature on every step."""
        at = self._temps.get(T)
        if at is not None:
            return at
        plan = self._blocks
        if plan is None:
            plan = self._blocks = self._shared_plan()
        # every property's Arrhenius factor (explorer.materials.arrhenius), as Python floats:
        # for these few, math.exp costs less than numpy's call on an array
        x = 1.0 / REFERENCE_K - 1.0 / T
        f = [math.exp(e * x) for e in plan["ea_R_list"]]
        at = _AtTemperature()
        at.T, at.f = T, f
        # every mode's decay rate, when the rates are not linear in the factors (else the
        # step's operator takes them in one product, :meth:`_operator`)
        at.rate_lam = None if plan["RL1"] is not None else np.repeat(
            np.asarray(self._rates(f), dtype=float), plan["sizes"]) * plan["lam"]
        # surface = outer shell's value less the extrapolation to the surface, per ampere
        surf_c = plan["surf_c_list"]
        at.extrap = (surf_c[0] / f[0], surf_c[1] / f[1])
        self._fill_constants(at)
        if len(self._temps) >= CACHE_SIZE:
            self._temps.clear()
        self._temps[T] = at
        return at

    def _operator(self, dt, T) -> _StepOperator:
        """The whole step's linear part at ``(dt, T)``: backward Euler in each part's
        eigenbasis, every mode decays by ``1 / den``, ``den = 1 + dt s lam``; the response per ampere
        ``q`` is made only when a control needs the current solved for (:meth:`_response`).
        The last one is kept (a retried step, or a run at one temperature, finds it ready);
        another costs a product, its temperature's constants cached (:meth:`_at`)."""
        op = self._last_op
        if op is not None and op.dt == dt and op.at.T == T:
            return op
        op = _StepOperator()
        op.at = at = self._temps.get(T) or self._at(T)
        if at.rate_lam is None:  # den = [1 | RL] @ [1, dt f], one product
            fdt = [dt * v for v in at.f]
            fdt.insert(0, 1.0)
            den = self._blocks["RL1"].dot(fdt)
        else:
            den = 1.0 + dt * at.rate_lam
        op.dt, op.den, op.q, op.surf_q = dt, den, None, None
        self._last_op = op
        return op

    def _response(self, op):
        """``(q, surf_q)``: the new state (less its current entry) and the two particle
        surfaces per ampere of the step's current."""
        if op.q is None:
            plan = self._blocks
            q = plan["V"] @ (plan["Vtb"] * op.dt / op.den)
            o_n, o_p = self._outer
            op.surf_q = (q.item(o_n) - op.at.extrap[0], q.item(o_p) - op.at.extrap[1])
            op.q = q
        return op.q, op.surf_q

    def _surfaces(self, base, q, surf_q, I):
        """``(cs_n, cs_p, c_e)`` of the new state ``base + I q`` (``c_e`` None: no electrolyte)."""
        o_n, o_p = self._outer
        sl = self._ce_slice
        return (base.item(o_n) + I * surf_q[0], base.item(o_p) + I * surf_q[1],
                None if sl is None else base[sl] + I * q[sl])

    def _electrolyte_terms(self, at, I, cs_n, cs_p, ce):
        """(eta_n, eta_p, dphi_e, solid drop, ohmic_e heat, ohmic_s heat) -- SPM: ideal
        electrolyte, so only the reaction overpotentials (Python floats)."""
        c0, T = self.params.electrolyte.initial_concentration_mol_m3, at.T
        etas = []
        for k, (e, cs) in enumerate(zip(self._electrodes, (cs_n, cs_p))):
            cmax, alpha = self._cmax_f[k], e.charge_transfer_coefficient
            if alpha == 0.5:  # closed-form inverse Butler-Volmer (explorer.rod.kinetics)
                j0 = at.gF[k] * math.sqrt(c0 * (cmax - cs) * cs)
                etas.append(at.two_over_f * math.asinh(I * self._j_per_A[k] / (2.0 * j0)))
            else:
                j0 = exchange_current(at.rate[k], c0, cs, cmax, alpha)
                etas.append(float(overpotential(I * self._j_per_A[k], j0, alpha, T)))
        return etas[0], etas[1], 0.0, 0.0, 0.0, 0.0

    def _evaluate(self, at, I, R, cs_n, cs_p, ce, full=False):
        """Terminal voltage at current ``I`` for the new surfaces ``cs_n, cs_p`` and salt
        ``ce`` (NaN outside the physical range); with ``full``, ``(ocv, v_term, (dU_n/dT,
        dU_p/dT), terms)`` and a :class:`RodStepError` outside the range."""
        cmax_n, cmax_p = self._cmax_f
        if not (0.0 < cs_n < cmax_n and 0.0 < cs_p < cmax_p):
            if full:
                for e, cs, cmax in zip(self._electrodes, (cs_n, cs_p), self._cmax_f):
                    if not 0.0 < cs < cmax:
                        raise RodStepError(
                            f"{self.name}: the {e.name} particle surface would reach "
                            f"stoichiometry {cs / cmax:.4f} (outside (0, 1)) at {I:.4g} A "
                            "within this step; reduce the step or the current")
            return math.nan
        terms = self._electrolyte_terms(at, I, cs_n, cs_p, ce)
        if terms is None:
            if full:
                raise RodStepError(
                    f"{self.name}: the electrolyte salt would be depleted at {I:.4g} A within this "
                    "step; if a smaller step does not help, the discharge is transport-limited "
                    "(cold cell or high rate), outside the SPMe's validity: use the DFN")
            return math.nan
        eta_n, eta_p, dphi_e, solid_drop, _, _ = terms
        u_n, ds_n = self._ocp_at[0](cs_n / cmax_n)
        u_p, ds_p = self._ocp_at[1](cs_p / cmax_p)
        ocv = (u_p - u_n) + (ds_p - ds_n) * (at.T - REFERENCE_K)
        v_term = ocv + eta_p - eta_n + dphi_e - solid_drop - I * R
        if not full:
            return v_term
        return ocv, v_term, (ds_n, ds_p), terms

    def solve_current_batch(self, states, dt, temperatures_K, currents_A) -> RodBatch:
        """Current-controlled steps of several rods of this model at once (a grid of rods):
        each row of ``states`` advanced by ``dt`` at its own temperature and current, no
        series resistance. The same arithmetic as :meth:`solve_step` on arrays; raises
        :class:`RodStepError` when any rod's step fails (the caller retries the group)."""
        X = np.asarray(states, dtype=float)
        T = np.asarray(temperatures_K, dtype=float)
        I = np.asarray(currents_A, dtype=float)
        plan = self._blocks
        if plan is None:
            plan = self._blocks = self._shared_plan()
        f = arrhenius(self._ea[None, :], T[:, None], REFERENCE_K)  # (rods, properties)
        rates = np.array(self._rates(f.T), dtype=float)  # (parts, rods)
        d = 1.0 / (1.0 + np.repeat(rates.T * dt, plan["sizes"], axis=1) * plan["lam"])
        q = (plan["Vtb"] * (dt * d)) @ plan["V"].T
        base = ((X[:, :-1] @ plan["VtW"].T) * d) @ plan["V"].T
        cmax = self._cmax
        cs = base[:, plan["outer"]] + I[:, None] * (q[:, plan["outer"]] - plan["surf_c"] / f[:, :2])
        if not np.all((cs > 0.0) & (cs < cmax)):
            raise RodStepError(f"{self.name}: a particle surface would leave stoichiometry (0, 1) "
                               "within this step in a rod of the group; reduce the step")
        terms = self._electrolyte_batch(T, f, base, q, I, cs)
        if terms is None:
            raise RodStepError(f"{self.name}: the electrolyte salt would be depleted within this "
                               "step in a rod of the group")
        eta_n, eta_p, dphi_e, solid_drop, ohmic_e, ohmic_s = terms
        n, p = self._electrodes
        sto = cs / cmax
        ds_n, ds_p = n.entropic(sto[:, 0]), p.entropic(sto[:, 1])
        ocv = p.ocp.potential(sto[:, 1]) - n.ocp.potential(sto[:, 0]) + (ds_p - ds_n) * (
            T - REFERENCE_K)
        new = np.empty_like(X)
        new[:, :-1] = base + I[:, None] * q
        new[:, -1] = I
        soc = self.params.soc_from_negative(
            (new[:, :self.nr] @ self.shells.weights) / n.max_concentration_mol_m3)
        heat = {"irreversible": I * (eta_n - eta_p), "reversible": I * T * (ds_n - ds_p),
                "ohmic_electrolyte": ohmic_e, "ohmic_solid": ohmic_s}
        return RodBatch(states=new, voltage_V=ocv + eta_p - eta_n + dphi_e - solid_drop,
                        ocv_V=ocv, soc=soc, heat_W=heat)

    def _electrolyte_batch(self, T, f, base, q, I, cs):
        """:meth:`_electrolyte_terms` for a group of rods (arrays over the rods)."""
        c0 = self.params.electrolyte.initial_concentration_mol_m3
        etas = []
        for k, e in enumerate(self._electrodes):
            j0 = exchange_current(e.rate_constant * f[:, 2 + k], c0, cs[:, k],
                                  e.max_concentration_mol_m3, e.charge_transfer_coefficient)
            etas.append(overpotential(I * self._j_per_A[k], j0, e.charge_transfer_coefficient, T))
        zero = np.zeros_like(I)
        return etas[0], etas[1], zero, zero, zero, zero

    def solve_step(self, state, dt, temperature_K, control, series_resistance_ohm=0.0) -> StepResult:
        kind, value = check_control(control)
        dt, T, R = check_step_inputs(dt, temperature_K, series_resistance_ohm)
        x = self._check_state(state)
        op = self._operator(dt, T)
        at, plan = op.at, self._blocks
        new = np.empty(self.size)
        if kind == "current":
            current = value
            # the current is known: new = V diag(d) (V'W old + dt V'b I), one product back
            new[:] = x
            new[-1] = current * dt
            plan["V"].dot(plan["VtW_b"].dot(new) / op.den, out=new[:-1])
            o_n, o_p = self._outer
            sl = self._ce_slice
            surfaces = (new.item(o_n) - current * at.extrap[0],
                        new.item(o_p) - current * at.extrap[1], None if sl is None else new[sl])
        else:
            base = plan["V"].dot(plan["VtW"].dot(x[:-1]) / op.den)  # new state = base + I q
            q, surf_q = self._response(op)
            guess = float(x[-1]) if kind == "voltage" else 0.0
            current = solve_current(
                lambda i: self._evaluate(at, i, R, *self._surfaces(base, q, surf_q, i)),
                kind, value, guess, self.current_1C_A)
            surfaces = self._surfaces(base, q, surf_q, current)
            np.add(base, current * q, out=new[:-1])
        new[-1] = current
        ocv, v_term, (ds_n, ds_p), terms = self._evaluate(at, current, R, *surfaces, full=True)
        heat = heat_split(
            irreversible=current * (terms[0] - terms[1]),
            reversible=current * T * (ds_n - ds_p),
            ohmic_electrolyte=terms[4],
            ohmic_solid=terms[5],
        )
        soc = self._soc_0 + float(self._soc_w.dot(new[:self.nr]))
        return StepResult(state=new, current_A=float(current), voltage_V=float(v_term),
                          ocv_V=float(ocv), soc=float(soc), heat_W=heat, iterations=1)
