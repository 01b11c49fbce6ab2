"""The contract every through-cell ("rod") electrochemical model meets.

A rod model represents the whole cell's electrochemistry through its
thickness at one temperature: the current it is given is the cell current
(all unit layers in parallel) and the heat it returns is the whole cell's.

A new model must provide, as a subclass of :class:`RodModel`:

1. ``name`` -- the registry key (``"spm"``, ``"spme"``, ``"dfn"``, ...).
2. ``__init__(self, params, mesh=None)`` taking the shared
   :class:`explorer.rod.params.RodParameters` and optional mesh sizes.
3. ``initial_state(soc, temperature_K)`` -- a 1-D float array, the model's
   unknowns at rest (uniform concentrations) at that SOC.
4. ``solve_step(state, dt, temperature_K, control, series_resistance_ohm)``
   advancing ``state`` by ``dt`` seconds implicitly and returning a
   :class:`StepResult`. ``control`` fixes the current, the terminal power or
   the terminal voltage at the end of the step; the terminal voltage is the
   rod voltage minus ``current * series_resistance_ohm`` (collectors, tabs).
   On failure to converge it raises :class:`RodStepError` and leaves
   ``state`` untouched, so the caller can retry with a smaller step.
5. ``soc(state)`` and ``lithium_mol(state)`` (cyclable lithium in both
   electrodes' solid phase, for conservation checks).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


class RodStepError(RuntimeError):
    """A step did not converge; the caller may retry with a smaller step."""


@dataclass(frozen=True)
class Control:
    """What a step holds fixed at its end: ``kind`` in {"current", "power", "voltage"}.

    ``value`` is A (positive on discharge), W (terminal power, positive on
    discharge) or V (terminal voltage).
    """

    kind: str
    value: float


@dataclass
class StepResult:
    state: np.ndarray
    current_A: float  # positive on discharge
    voltage_V: float  # terminal voltage (rod voltage minus series drop)
    ocv_V: float  # open-circuit voltage at the electrodes' surface-averaged state... see model doc
    soc: float
    # whole-cell heat rates in W, keys: "irreversible", "reversible",
    # "ohmic_electrolyte", "ohmic_solid" (series-resistance heat is the caller's)
    heat_W: dict[str, float] = field(default_factory=dict)
    iterations: int = 0


class RodModel:
    """Base class; see the module docstring for the contract."""

    name: str = ""

    def initial_state(self, soc: float, temperature_K: float) -> np.ndarray:
        raise NotImplementedError

    def solve_step(self, state, dt, temperature_K, control, series_resistance_ohm=0.0) -> StepResult:
        raise NotImplementedError

    def soc(self, state) -> float:
        raise NotImplementedError

    def lithium_mol(self, state) -> float:
        raise NotImplementedError
