"""The one parameter set shared by the SPM, SPMe and DFN rod models (SI units).

:meth:`RodParameters.from_cell` reads a validated :class:`explorer.cell.model.Cell`
and keeps everything the through-cell models need: the geometry of one unit
layer (negative coating | separator | positive coating), the whole cell's
active area (the current density is the cell current over
``cell.derived.active_area_m2``), porosities with Bruggeman effective
transport ``eps**b``, particle radii, maximum concentrations, stoichiometry
windows, the material functions and the kinetic and transport constants.

Temperature dependence
----------------------
Every temperature-dependent property (solid diffusivity, rate constant,
electrolyte conductivity and diffusivity) is its 298.15 K value times
:func:`explorer.materials.arrhenius` with the cell file's activation energy.
The open-circuit potentials use the linear entropic correction
``U(sto) + dU/dT (T - 298.15 K)`` so that the reversible heat and the voltage
are consistent.

State of charge
---------------
SOC is defined on the cell's usable window. At SOC = 1 both electrodes sit at
``stoichiometry_100``; a charge ``Q`` removed moves each electrode's
bulk-average stoichiometry by ``Q`` over that electrode's full-lithiation
capacity, and SOC = 1 - Q / C with C = ``capacity_Ah`` (the smaller of the two
windows' capacities, as in ``cell.derived.theoretical_capacity_Ah``). The
limiting electrode therefore runs linearly from ``stoichiometry_100`` to
``stoichiometry_0``; when both windows hold the same charge both electrodes
do, which is the linear map ``sto(soc)`` of the cell file. Anchoring at
SOC = 1 keeps the cyclable lithium the same at every SOC.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from explorer.materials import ELECTROLYTES, FARADAY, GAS_CONSTANT, OCP, arrhenius
from explorer.validators import InputError

__all__ = ["ElectrodeParameters", "SeparatorParameters", "ElectrolyteParameters",
           "RodParameters", "FARADAY", "GAS_CONSTANT", "REFERENCE_K"]

REFERENCE_K = 298.15


@dataclass(frozen=True)
class ElectrodeParameters:
    """One porous electrode coating (SI units).

    ``ocp`` is an object with ``potential(sto)``, ``entropic(sto)`` and
    ``__call__(sto, temperature_K)`` (see :mod:`explorer.materials.ocp`).
    """

    name: str  # "negative" | "positive"
    thickness_m: float
    porosity: float  # electrolyte volume fraction
    active_fraction: float  # active-material volume fraction
    particle_radius_m: float
    max_concentration_mol_m3: float
    stoichiometry_0: float  # bulk stoichiometry at SOC 0 (limiting electrode)
    stoichiometry_100: float  # bulk stoichiometry at SOC 1
    ocp: Any
    diffusivity_m2_s: float  # at 298.15 K
    diffusivity_activation_J_mol: float
    rate_constant: float  # m^2.5 mol^-0.5 s^-1 at 298.15 K
    rate_activation_J_mol: float
    solid_conductivity_S_m: float
    bruggeman: float
    charge_transfer_coefficient: float = 0.5  # anodic transfer coefficient alpha_a

    @property
    def surface_area_m2_m3(self) -> float:
        """Active surface per electrode volume, a = 3 eps_s / R (spheres)."""
        return 3.0 * self.active_fraction / self.particle_radius_m

    @property
    def electrolyte_transport(self) -> float:
        """Bruggeman factor eps**b multiplying electrolyte conductivity and diffusivity."""
        return self.porosity ** self.bruggeman

    @property
    def solid_conductivity_eff_S_m(self) -> float:
        """Effective solid conductivity sigma (1 - eps)**b (the whole solid matrix conducts)."""
        return self.solid_conductivity_S_m * (1.0 - self.porosity) ** self.bruggeman

    @property
    def sign(self) -> float:
        """+1 for the negative electrode (oxidised on discharge), -1 for the positive."""
        return 1.0 if self.name == "negative" else -1.0

    def diffusivity(self, temperature_K: float) -> float:
        """Solid diffusivity at ``temperature_K``, m^2/s."""
        return self.diffusivity_m2_s * float(arrhenius(self.diffusivity_activation_J_mol,
                                                       temperature_K, REFERENCE_K))

    def rate(self, temperature_K: float) -> float:
        """Butler-Volmer rate constant at ``temperature_K``."""
        return self.rate_constant * float(arrhenius(self.rate_activation_J_mol,
                                                    temperature_K, REFERENCE_K))

    def potential(self, sto, temperature_K: float):
        """Open-circuit potential in V vs Li/Li+ at ``temperature_K`` (vectorised)."""
        return self.ocp(sto, temperature_K)

    def entropic(self, sto):
        """Entropic coefficient dU/dT in V/K (vectorised)."""
        return self.ocp.entropic(sto)

    def full_capacity_C(self, area_m2: float) -> float:
        """Charge of the electrode from empty to full lithiation, coulombs."""
        return (FARADAY * self.max_concentration_mol_m3 * self.active_fraction
                * self.thickness_m * area_m2)


@dataclass(frozen=True)
class SeparatorParameters:
    thickness_m: float
    porosity: float
    bruggeman: float

    @property
    def electrolyte_transport(self) -> float:
        return self.porosity ** self.bruggeman


@dataclass(frozen=True)
class ElectrolyteParameters:
    """Binary electrolyte; ``conductivity`` and ``diffusivity`` are f(c) at 298.15 K."""

    initial_concentration_mol_m3: float
    conductivity: Any
    diffusivity: Any
    transference_number: float
    thermodynamic_factor: float
    conductivity_activation_J_mol: float
    diffusivity_activation_J_mol: float

    def kappa(self, c, temperature_K: float):
        """Bulk ionic conductivity at ``c`` (mol/m^3) and ``temperature_K``, S/m."""
        return self.conductivity(c) * float(arrhenius(self.conductivity_activation_J_mol,
                                                      temperature_K, REFERENCE_K))

    def kappa_factor(self, temperature_K: float) -> float:
        return float(arrhenius(self.conductivity_activation_J_mol, temperature_K, REFERENCE_K))

    def diffusion(self, c, temperature_K: float):
        """Bulk salt diffusivity at ``c`` and ``temperature_K``, m^2/s."""
        return self.diffusivity(c) * self.diffusion_factor(temperature_K)

    def diffusion_factor(self, temperature_K: float) -> float:
        return float(arrhenius(self.diffusivity_activation_J_mol, temperature_K, REFERENCE_K))

    def diffusion_potential_V(self, temperature_K: float) -> float:
        """2 R T (1 - t+) (1 + dln f/dln c) / F, the concentration-overpotential coefficient."""
        return (2.0 * GAS_CONSTANT * temperature_K * (1.0 - self.transference_number)
                * self.thermodynamic_factor / FARADAY)


@dataclass(frozen=True)
class RodParameters:
    """Everything the rod models read, for the whole cell (all unit layers in parallel).

    Attributes
    ----------
    negative, positive : ElectrodeParameters
    separator : SeparatorParameters
    electrolyte : ElectrolyteParameters
    area_m2 : float
        Whole cell's active (current-carrying) area: electrode area x unit layers.
    voltage_min_V, voltage_max_V : float
        The cell's voltage window (used by drivers, not by the models).
    name : str
        The cell's name, for messages.
    """

    negative: ElectrodeParameters
    positive: ElectrodeParameters
    separator: SeparatorParameters
    electrolyte: ElectrolyteParameters
    area_m2: float
    voltage_min_V: float = 2.5
    voltage_max_V: float = 4.2
    name: str = ""

    # ---- construction --------------------------------------------------------------------
    @classmethod
    def from_cell(cls, cell) -> RodParameters:
        """Build the parameter set from a validated :class:`~explorer.cell.model.Cell`.

        Examples
        --------
        >>> from explorer.cell import load_cell            # doctest: +SKIP
        >>> p = RodParameters.from_cell(load_cell("van_nmc_66ah"))  # doctest: +SKIP
        """
        where = cell.source_path or cell.name

        def material(table, key, field):
            if key not in table:
                valid = ", ".join(repr(k) for k in table)
                raise InputError(f"{where}: `{field}`: expected one of {valid}, got {key!r}")
            return table[key]

        def electrode(name, e):
            return ElectrodeParameters(
                name=name,
                thickness_m=e.thickness_m,
                porosity=e.porosity,
                active_fraction=e.active_fraction,
                particle_radius_m=e.particle_radius_m,
                max_concentration_mol_m3=e.max_concentration_mol_m3,
                stoichiometry_0=e.stoichiometry_0,
                stoichiometry_100=e.stoichiometry_100,
                ocp=material(OCP, e.ocp, f"{name}.ocp"),
                diffusivity_m2_s=e.diffusivity_m2_s,
                diffusivity_activation_J_mol=e.diffusivity_activation_J_mol,
                rate_constant=e.rate_constant,
                rate_activation_J_mol=e.rate_activation_J_mol,
                solid_conductivity_S_m=e.solid_conductivity_S_m,
                bruggeman=e.bruggeman,
                charge_transfer_coefficient=e.charge_transfer_coefficient,
            )

        el = cell.electrolyte
        s = cell.separator
        return cls(
            negative=electrode("negative", cell.negative),
            positive=electrode("positive", cell.positive),
            separator=SeparatorParameters(s.thickness_m, s.porosity, s.bruggeman),
            electrolyte=ElectrolyteParameters(
                initial_concentration_mol_m3=el.initial_concentration_mol_m3,
                conductivity=material(ELECTROLYTES, el.conductivity, "electrolyte.conductivity"),
                diffusivity=material(ELECTROLYTES, el.diffusivity, "electrolyte.diffusivity"),
                transference_number=el.transference_number,
                thermodynamic_factor=el.thermodynamic_factor,
                conductivity_activation_J_mol=el.conductivity_activation_J_mol,
                diffusivity_activation_J_mol=el.diffusivity_activation_J_mol,
            ),
            area_m2=cell.derived.active_area_m2,
            voltage_min_V=cell.voltage_min_V,
            voltage_max_V=cell.voltage_max_V,
            name=cell.name,
        )

    def __post_init__(self):
        for e in (self.negative, self.positive):
            for field in ("thickness_m", "particle_radius_m", "max_concentration_mol_m3",
                          "diffusivity_m2_s", "rate_constant", "solid_conductivity_S_m"):
                v = getattr(e, field)
                if not (np.isfinite(v) and v > 0):
                    raise InputError(f"`{e.name}.{field}`: expected a positive number, got {v!r}")
            for field in ("porosity", "active_fraction", "stoichiometry_0", "stoichiometry_100",
                          "charge_transfer_coefficient"):
                v = getattr(e, field)
                if not (0.0 < v < 1.0):
                    raise InputError(f"`{e.name}.{field}`: expected a value in (0, 1), got {v!r}")
        if not (self.area_m2 > 0):
            raise InputError(f"`area_m2`: expected a positive area, got {self.area_m2!r}")
        el = self.electrolyte
        if not (0.0 < el.transference_number < 1.0):
            raise InputError("`electrolyte.transference_number`: expected a value in (0, 1), "
                             f"got {el.transference_number!r}")

    # ---- capacities and SOC ----------------------------------------------------------------
    @cached_property
    def capacity_Ah(self) -> float:
        """Usable capacity: the smaller of the two electrodes' window capacities."""
        return min(self.window_capacity_C(e) for e in (self.negative, self.positive)) / 3600.0

    def window_capacity_C(self, e: ElectrodeParameters) -> float:
        return e.full_capacity_C(self.area_m2) * abs(e.stoichiometry_100 - e.stoichiometry_0)

    def stoichiometry_at(self, soc: float) -> tuple[float, float]:
        """Bulk-average stoichiometries (negative, positive) at ``soc`` (module docstring)."""
        q = (1.0 - soc) * self.capacity_Ah * 3600.0
        n, p = self.negative, self.positive
        return (n.stoichiometry_100 - q / n.full_capacity_C(self.area_m2),
                p.stoichiometry_100 + q / p.full_capacity_C(self.area_m2))

    @cached_property
    def _soc_per_sto_n(self) -> float:
        return self.negative.full_capacity_C(self.area_m2) / (self.capacity_Ah * 3600.0)

    def soc_from_negative(self, sto_n_bulk: float) -> float:
        """SOC from the negative electrode's bulk-average stoichiometry."""
        return 1.0 - (self.negative.stoichiometry_100 - sto_n_bulk) * self._soc_per_sto_n

    @property
    def total_thickness_m(self) -> float:
        return self.negative.thickness_m + self.separator.thickness_m + self.positive.thickness_m

    def current_density(self, current_A: float) -> float:
        """Through-cell current density, A/m^2 of active area."""
        return current_A / self.area_m2
