"""The cell file format: which tables and keys a cell TOML file has, and their units.

A cell file is TOML. Every dimensional quantity is a string holding a number and
a unit (``thickness = "85 um"``), read by pint and converted to SI; plain
fractions and counts are bare numbers (``porosity = 0.3``, ``unit_layers = 40``;
``"30 %"`` is also accepted for fractions). The tables:

``[cell]``
    ``name``, ``description``, ``data_note`` (where the numbers come from, e.g.
    "invented for the demo"), ``nominal_capacity``, ``voltage_min``,
    ``voltage_max``, ``temperature_min``, ``temperature_max`` (data-sheet
    operating window), optional ``mass`` (data sheet). The stated capacity and mass
    must lie within 20 % of what the layers give (Faraday's law on the loadings; the
    listed parts' mass), else the file is refused. Optional measured full-cell curves:
    ``ocv_table`` (CSV: ``soc``, ``ocv_V``, optional ``dUdT_V_K``) and ``entropic_table``
    (``soc``, ``dUdT_V_K``); they set the positive electrode's curve (see
    :mod:`explorer.cell.curves`).
``[geometry]``
    ``width`` (x), ``height`` (y) of the coated electrode, ``unit_layers``,
    ``thickness`` (whole cell, pouch included), ``pouch_foil_thickness`` (one side).
``[tabs.<name>]`` (one table per tab)
    ``polarity`` ("negative"/"positive", defaults to the table name when that is
    a polarity), ``edge`` ("bottom", "top", "left", "right"), ``centre`` (position
    of the tab centre along its edge, from the left or bottom corner), ``width``,
    ``thickness``, ``material``, ``free_length`` (electrode edge to busbar weld),
    ``weld_resistance``.
``[negative_collector]``, ``[positive_collector]``
    ``material``, ``thickness`` (one foil).
``[negative]``, ``[positive]``
    One coating layer: ``thickness``, ``porosity``, ``active_fraction``,
    ``particle_radius``, ``max_concentration``, ``stoichiometry_at_empty`` and
    ``stoichiometry_at_full`` (at 0 % and 100 % SOC), ``ocp`` (material key) or
    ``ocp_table`` (measured CSV: ``stoichiometry``, ``ocp_V``, optional ``dUdT_V_K``),
    optional ``entropic_table`` (CSV: ``stoichiometry``, ``dUdT_V_K``),
    ``diffusivity``, ``diffusivity_activation``, ``rate_constant`` (Butler-Volmer,
    m^2.5 mol^-0.5 s^-1), ``rate_activation``, ``solid_conductivity``,
    ``bruggeman``, ``density`` (dry porous coating: mass per coating volume),
    ``specific_heat`` (of the dry coating), ``thermal_conductivity`` (of the
    electrolyte-soaked coating), optional ``charge_transfer_coefficient`` (0.5).
``[separator]``
    ``thickness``, ``porosity``, ``bruggeman``, ``density`` (dry porous film),
    ``specific_heat``, ``thermal_conductivity`` (soaked).
``[electrolyte]``
    ``concentration``, ``conductivity`` and ``diffusivity`` (function keys),
    ``transference_number``, ``thermodynamic_factor``,
    ``conductivity_activation``, ``diffusivity_activation``, ``density``,
    ``specific_heat``.
``[thermal]`` (optional)
    Measured stack values that replace the computed ones: ``inplane_conductivity``
    (effective over the whole cell thickness ``geometry.thickness``),
    ``throughplane_conductivity``, ``heat_capacity`` (whole cell).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Field", "SECTIONS", "TAB_FIELDS", "OPTIONAL_SECTIONS", "PLAUSIBLE", "plausible_band"]


@dataclass(frozen=True)
class Field:
    """One key of a table.

    kind: "quantity" (string with unit, converted to ``unit``), "number"
    (dimensionless), "integer", "text", "choice" (one of ``choices``) or
    "key" (a key of the materials table ``table``).
    check: "positive", "nonnegative", "fraction" (open interval 0..1),
    "range" (``low``..``high``) or "" (any finite value).
    """

    key: str
    attr: str
    kind: str
    unit: str = ""
    example: str = ""
    check: str = ""
    low: float | None = None
    high: float | None = None
    table: str = ""
    choices: tuple = ()
    required: bool = True
    default: object = None


def _q(key, attr, unit, example, check="positive", **kw):
    return Field(key, attr, "quantity", unit=unit, example=example, check=check, **kw)


def _n(key, attr, check="fraction", **kw):
    return Field(key, attr, "number", check=check, **kw)


CELL = (
    Field("name", "name", "text"),
    Field("description", "description", "text"),
    Field("data_note", "data_note", "text"),
    _q("nominal_capacity", "nominal_capacity_Ah", "A*h", "66 Ah"),
    _q("voltage_min", "voltage_min_V", "V", "2.8 V"),
    _q("voltage_max", "voltage_max_V", "V", "4.2 V"),
    _q("temperature_min", "temperature_min_C", "degC", "-20 degC", check="range",
       low=-100.0, high=200.0),
    _q("temperature_max", "temperature_max_C", "degC", "55 degC", check="range",
       low=-100.0, high=200.0),
    _q("mass", "mass_kg", "kg", "900 g", required=False),
    Field("ocv_table", "ocv_table", "text", required=False),
    Field("entropic_table", "entropic_table", "text", required=False),
)

GEOMETRY = (
    _q("width", "width_m", "m", "300 mm"),
    _q("height", "height_m", "m", "100 mm"),
    Field("unit_layers", "unit_layers", "integer", check="range", low=1, high=10000),
    _q("thickness", "stack_thickness_m", "m", "11 mm"),
    _q("pouch_foil_thickness", "pouch_foil_thickness_m", "m", "150 um"),
)

TAB_FIELDS = (
    Field("polarity", "polarity", "choice", choices=("negative", "positive")),
    Field("edge", "edge", "choice", choices=("bottom", "top", "left", "right")),
    _q("centre", "position_m", "m", "75 mm"),
    _q("width", "width_m", "m", "45 mm"),
    _q("thickness", "thickness_m", "m", "0.3 mm"),
    Field("material", "material", "key", table="SOLIDS"),
    _q("free_length", "free_length_m", "m", "15 mm", check="nonnegative"),
    _q("weld_resistance", "weld_resistance_ohm", "ohm", "20 uohm", check="nonnegative"),
)

COLLECTOR = (
    Field("material", "material", "key", table="SOLIDS"),
    _q("thickness", "thickness_m", "m", "10 um"),
)

ELECTRODE = (
    _q("thickness", "thickness_m", "m", "85 um"),
    _n("porosity", "porosity"),
    _n("active_fraction", "active_fraction"),
    _q("particle_radius", "particle_radius_m", "m", "5 um"),
    _q("max_concentration", "max_concentration_mol_m3", "mol/m^3", "30000 mol/m^3"),
    _n("stoichiometry_at_empty", "stoichiometry_0"),
    _n("stoichiometry_at_full", "stoichiometry_100"),
    Field("ocp", "ocp", "key", table="OCP", required=False),  # or ocp_table
    Field("ocp_table", "ocp_table", "text", required=False),
    Field("entropic_table", "entropic_table", "text", required=False),
    _q("diffusivity", "diffusivity_m2_s", "m^2/s", "1e-14 m^2/s"),
    _q("diffusivity_activation", "diffusivity_activation_J_mol", "J/mol", "30 kJ/mol",
       check="nonnegative"),
    _q("rate_constant", "rate_constant", "m^2.5/mol^0.5/s", "2e-11 m^2.5/mol^0.5/s"),
    _q("rate_activation", "rate_activation_J_mol", "J/mol", "35 kJ/mol", check="nonnegative"),
    _q("solid_conductivity", "solid_conductivity_S_m", "S/m", "100 S/m"),
    _n("bruggeman", "bruggeman", check="range", low=0.5, high=5.0),
    _q("density", "density_kg_m3", "kg/m^3", "1.6 g/cm^3"),
    _q("specific_heat", "specific_heat_J_kgK", "J/kg/K", "800 J/kg/K"),
    _q("thermal_conductivity", "thermal_conductivity_W_mK", "W/m/K", "1 W/m/K"),
    _n("charge_transfer_coefficient", "charge_transfer_coefficient", required=False, default=0.5),
)

SEPARATOR = (
    _q("thickness", "thickness_m", "m", "16 um"),
    _n("porosity", "porosity"),
    _n("bruggeman", "bruggeman", check="range", low=0.5, high=5.0),
    _q("density", "density_kg_m3", "kg/m^3", "0.55 g/cm^3"),
    _q("specific_heat", "specific_heat_J_kgK", "J/kg/K", "1900 J/kg/K"),
    _q("thermal_conductivity", "thermal_conductivity_W_mK", "W/m/K", "0.2 W/m/K"),
)

ELECTROLYTE = (
    _q("concentration", "initial_concentration_mol_m3", "mol/m^3", "1 mol/L"),
    Field("conductivity", "conductivity", "key", table="ELECTROLYTES"),
    Field("diffusivity", "diffusivity", "key", table="ELECTROLYTES"),
    _n("transference_number", "transference_number"),
    _n("thermodynamic_factor", "thermodynamic_factor", check="positive"),
    _q("conductivity_activation", "conductivity_activation_J_mol", "J/mol", "13 kJ/mol",
       check="nonnegative"),
    _q("diffusivity_activation", "diffusivity_activation_J_mol", "J/mol", "23 kJ/mol",
       check="nonnegative"),
    _q("density", "density_kg_m3", "kg/m^3", "1.25 g/cm^3"),
    _q("specific_heat", "specific_heat_J_kgK", "J/kg/K", "1500 J/kg/K"),
)

THERMAL = (
    _q("inplane_conductivity", "inplane_conductivity_W_mK", "W/m/K", "27 W/m/K", required=False),
    _q("throughplane_conductivity", "throughplane_conductivity_W_mK", "W/m/K", "0.5 W/m/K",
       required=False),
    _q("heat_capacity", "heat_capacity_J_K", "J/K", "540 J/K", required=False),
)

#: table name -> fields (``tabs`` is handled separately: a table of tab tables)
SECTIONS = {
    "cell": CELL,
    "geometry": GEOMETRY,
    "negative_collector": COLLECTOR,
    "positive_collector": COLLECTOR,
    "negative": ELECTRODE,
    "positive": ELECTRODE,
    "separator": SEPARATOR,
    "electrolyte": ELECTROLYTE,
    "thermal": THERMAL,
}
OPTIONAL_SECTIONS = ("thermal",)

# Wide bands (orders of magnitude around real pouch cells, common practice) outside which a
# value is a typo or a wrong unit, in each field's unit. Beyond them derived properties and the
# later solves stop being finite (a 200 km wide electrode, a 1e-300 m foil). Keys are
# "<table>.<key>"; "electrode.", "collector." and "tabs." cover both electrodes, both collectors
# and every tab.
PLAUSIBLE = {
    "cell.nominal_capacity": (1e-3, 1e4),
    "cell.voltage_min": (0.1, 10.0),
    "cell.voltage_max": (0.1, 10.0),
    "cell.mass": (1e-4, 1e3),
    "geometry.width": (1e-3, 5.0),
    "geometry.height": (1e-3, 5.0),
    "geometry.thickness": (1e-5, 0.2),
    "geometry.pouch_foil_thickness": (1e-6, 2e-3),
    "tabs.centre": (0.0, 5.0),
    "tabs.width": (1e-4, 5.0),
    "tabs.thickness": (1e-6, 0.01),
    "tabs.free_length": (0.0, 1.0),
    "tabs.weld_resistance": (0.0, 1.0),
    "collector.thickness": (1e-7, 1e-3),
    "electrode.thickness": (1e-7, 5e-3),
    "electrode.particle_radius": (1e-9, 1e-3),
    "electrode.max_concentration": (100.0, 1e6),
    "electrode.diffusivity": (1e-24, 1e-6),
    "electrode.diffusivity_activation": (0.0, 5e5),
    "electrode.rate_constant": (1e-20, 1e-3),
    "electrode.rate_activation": (0.0, 5e5),
    "electrode.solid_conductivity": (1e-8, 1e8),
    "electrode.density": (10.0, 3e4),
    "electrode.specific_heat": (10.0, 1e5),
    "electrode.thermal_conductivity": (1e-3, 1e3),
    "electrode.porosity": (0.01, 0.99),
    "electrode.active_fraction": (0.01, 0.99),
    "electrode.stoichiometry_at_empty": (1e-4, 0.9999),
    "electrode.stoichiometry_at_full": (1e-4, 0.9999),
    "electrode.charge_transfer_coefficient": (0.05, 0.95),
    "separator.porosity": (0.01, 0.99),
    "separator.thickness": (1e-7, 1e-3),
    "separator.density": (10.0, 3e4),
    "separator.specific_heat": (10.0, 1e5),
    "separator.thermal_conductivity": (1e-3, 1e3),
    "electrolyte.concentration": (1.0, 1e4),
    "electrolyte.transference_number": (0.01, 0.99),
    "electrolyte.thermodynamic_factor": (0.01, 100.0),
    "electrolyte.conductivity_activation": (0.0, 5e5),
    "electrolyte.diffusivity_activation": (0.0, 5e5),
    "electrolyte.density": (10.0, 3e4),
    "electrolyte.specific_heat": (10.0, 1e5),
    "thermal.inplane_conductivity": (1e-3, 1e3),
    "thermal.throughplane_conductivity": (1e-3, 1e3),
    "thermal.heat_capacity": (1e-3, 1e7),
}
_GROUPS = {"negative": "electrode", "positive": "electrode", "negative_collector": "collector",
           "positive_collector": "collector"}


def plausible_band(path: str) -> tuple[float, float] | None:
    """The plausible band of a field path such as ``"negative.thickness"`` or
    ``"tabs.positive.width"`` (None when the field has none)."""
    parts = path.split(".")
    if parts[0] == "tabs":
        return PLAUSIBLE.get(f"tabs.{parts[-1]}")
    table = _GROUPS.get(parts[0], parts[0])
    return PLAUSIBLE.get(f"{table}.{parts[-1]}")
