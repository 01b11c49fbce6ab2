"""The validated pouch-cell definition: plain dataclasses, SI units throughout.

A :class:`Cell` is what :func:`explorer.load_cell` returns. Every later stage
(rod models, in-plane models, cooling) reads these fields and nothing else of
the file. Field names carry their unit as a suffix; fractions are plain floats.

Conventions
-----------
* ``x`` runs across the electrode width, ``y`` along the height; the origin is
  the bottom-left corner of the coated area seen from the front face.
* Edges are named ``"bottom"`` (y = 0), ``"top"`` (y = height), ``"left"``
  (x = 0) and ``"right"`` (x = width).
* A tab's ``position_m`` is the coordinate of its centre along its edge
  (x for top/bottom edges, y for left/right edges).
* ``unit_layers`` counts electrochemical unit cells (negative coating,
  separator, positive coating) in the stack; collector foils are coated on
  both sides, so a foil serves two unit layers.
"""

from __future__ import annotations

from dataclasses import dataclass, field

EDGES = ("bottom", "top", "left", "right")
POLARITIES = ("negative", "positive")


@dataclass(frozen=True)
class Tab:
    name: str  # unique within the cell, e.g. "negative"
    polarity: str  # "negative" | "positive"
    edge: str  # one of EDGES
    position_m: float  # centre along the edge
    width_m: float
    thickness_m: float
    material: str  # key of explorer.materials.SOLIDS
    free_length_m: float  # from the electrode edge to the busbar weld
    weld_resistance_ohm: float  # contact resistance of the tab-to-busbar weld


@dataclass(frozen=True)
class Geometry:
    width_m: float  # coated electrode width (x)
    height_m: float  # coated electrode height (y)
    unit_layers: int  # number of unit cells in the stack
    stack_thickness_m: float  # whole cell thickness, pouch included
    pouch_foil_thickness_m: float  # laminated aluminium pouch foil, one side
    tabs: tuple[Tab, ...]


@dataclass(frozen=True)
class Collector:
    material: str  # key of explorer.materials.SOLIDS
    thickness_m: float


@dataclass(frozen=True)
class Electrode:
    thickness_m: float  # one coating layer
    porosity: float  # electrolyte volume fraction
    active_fraction: float  # active-material volume fraction
    particle_radius_m: float
    max_concentration_mol_m3: float
    stoichiometry_0: float  # at 0 % SOC
    stoichiometry_100: float  # at 100 % SOC
    # key of explorer.materials.OCP (open-circuit potential and dU/dT), or the curve object
    # built from measured tables (explorer.cell.curves); OCP[ocp] gives the curve either way
    ocp: object
    diffusivity_m2_s: float  # solid diffusivity at the reference temperature
    diffusivity_activation_J_mol: float
    rate_constant: float  # Butler-Volmer rate constant, m^2.5 mol^-0.5 s^-1 at reference T
    rate_activation_J_mol: float
    solid_conductivity_S_m: float
    bruggeman: float
    density_kg_m3: float  # coating (composite) density
    specific_heat_J_kgK: float
    thermal_conductivity_W_mK: float
    charge_transfer_coefficient: float = 0.5


@dataclass(frozen=True)
class Separator:
    thickness_m: float
    porosity: float
    bruggeman: float
    density_kg_m3: float
    specific_heat_J_kgK: float
    thermal_conductivity_W_mK: float


@dataclass(frozen=True)
class Electrolyte:
    initial_concentration_mol_m3: float
    conductivity: str  # key of explorer.materials.ELECTROLYTES (conductivity function)
    diffusivity: str  # key of explorer.materials.ELECTROLYTES (diffusivity function)
    transference_number: float
    thermodynamic_factor: float
    conductivity_activation_J_mol: float
    diffusivity_activation_J_mol: float
    density_kg_m3: float
    specific_heat_J_kgK: float


@dataclass(frozen=True)
class ThermalOverrides:
    """Measured stack properties that replace the computed ones when given."""

    inplane_conductivity_W_mK: float | None = None
    throughplane_conductivity_W_mK: float | None = None
    heat_capacity_J_K: float | None = None


@dataclass(frozen=True)
class Derived:
    """Properties computed from the definition (see explorer.cell.derived)."""

    electrode_area_m2: float  # width x height, one face
    active_area_m2: float  # electrode_area_m2 x unit_layers (current-carrying area)
    theoretical_capacity_Ah: float  # the limiting electrode's window
    negative_capacity_Ah: float
    positive_capacity_Ah: float
    np_ratio: float
    mass_kg: float
    energy_Wh: float  # OCV integral over the SOC window at 25 degC
    negative_foils: int
    positive_foils: int
    negative_sheet_resistance_ohm: float  # all negative foils in parallel, ohm per square
    positive_sheet_resistance_ohm: float
    # used value (override if given); effective over the whole stated cell thickness, so
    # that times stack_thickness_m it is the in-plane conductance per square
    inplane_conductivity_W_mK: float
    throughplane_conductivity_W_mK: float
    heat_capacity_J_K: float  # whole cell, used value
    computed_inplane_conductivity_W_mK: float  # from the layers, before overrides
    computed_throughplane_conductivity_W_mK: float
    computed_heat_capacity_J_K: float


@dataclass(frozen=True)
class Cell:
    name: str
    description: str
    nominal_capacity_Ah: float
    voltage_min_V: float
    voltage_max_V: float
    temperature_min_C: float  # data-sheet operating window
    temperature_max_C: float
    geometry: Geometry
    negative_collector: Collector
    positive_collector: Collector
    negative: Electrode
    positive: Electrode
    separator: Separator
    electrolyte: Electrolyte
    thermal: ThermalOverrides
    derived: Derived
    source_path: str = ""  # file it was read from
    sha256: str = ""  # of the file's bytes (and of the measured tables it names)
    mass_kg: float | None = None  # stated (data sheet), if the file gives it
    extra: dict = field(default_factory=dict, compare=False, repr=False)

    def tab(self, polarity: str) -> tuple[Tab, ...]:
        """The tabs of one polarity."""
        return tuple(t for t in self.geometry.tabs if t.polarity == polarity)

    def __repr__(self) -> str:
        g, d = self.geometry, self.derived
        return (
            f"<Cell {self.name!r}: {self.nominal_capacity_Ah:g} Ah nominal "
            f"({d.theoretical_capacity_Ah:.1f} Ah computed), "
            f"{g.width_m * 1e3:.0f} x {g.height_m * 1e3:.0f} x "
            f"{g.stack_thickness_m * 1e3:.1f} mm, {d.mass_kg * 1e3:.0f} g>"
        )
