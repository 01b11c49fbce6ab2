"""The cold plate: coolant, channels, hydraulics and the coolant-to-surface thermal path.

A :class:`ColdPlate` is hardware plus operating point: ``channels`` identical
straight rectangular channels in parallel, separated by ribs of ``rib_mm``,
under a top wall of ``wall_mm`` that the cells (or their TIM) sit on. It knows
nothing about where the cells are; :mod:`explorer.cooling.designs` places it
under a face or at an edge.

Thermal path from the coolant to the plate's top surface, per unit plate
area over the channel band (channel pitch ``p = w + rib``)::

    h_plate = h_channel * (w + 2 * eta * H) / p          (convection, wetted area / footprint)
    eta     = tanh(m H) / (m H),  m = sqrt(2 h_channel / (k_plate * rib))

-- each rib is a straight fin of height ``H`` (the channel height) wetted on
both sides, with its far end taken as adiabatic (Incropera & DeWitt,
*Fundamentals of Heat and Mass Transfer*, 6th ed. 2007, Sec. 3.6.4, eq. 3.89
with Table 3.4 case B); the channel floor is not counted, which is
conservative when the plate's underside is not itself a heat path. The top
wall adds ``wall_mm / k_plate`` in series.

A :class:`FixedSink` replaces all of that with a given surface-to-sink heat
transfer coefficient and sink temperature (no hydraulics), for studies where
the plate's performance is known or imposed.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

from explorer.cooling.channels import ChannelFlow, channel_flow
from explorer.cooling.coolant import Coolant, get_coolant
from explorer.validators import (
    InputError,
    check_choice,
    check_finite,
    check_integer,
    check_nonnegative,
    check_positive,
    check_range,
    short_repr,
)

__all__ = ["ColdPlate", "FixedSink", "cold_plate", "fixed_sink", "solid", "PLATE_FLOW_DIRECTIONS",
           "DEFAULT_PUMP_EFFICIENCY"]

#: "+x" ... "-y" along the cell's own axes, or "across": through the stack, the
#: coolant meeting the cells one after another (edge plates only).
PLATE_FLOW_DIRECTIONS = ("+x", "-x", "+y", "-y", "across")
# Small electric coolant pumps reach roughly 30-60 % wire-to-water (common practice).
DEFAULT_PUMP_EFFICIENCY = 0.5
# Upper bound on every plate dimension (channel size, rib, wall, flow length, channel band):
# far beyond any battery cold plate, low enough that the thermal model stays well conditioned.
MAX_PLATE_MM = 10_000.0
# ... and at least 10 um (a thinner rib or channel underflows the rib-fin and friction sums).
MIN_PLATE_MM = 1e-2
# Cells one plate serves at most (a pack row is tens to a few hundred; the app allows 200).
MAX_CELLS_PER_PLATE = 1000
# Most coolant flow through one plate: a module loop runs a few to tens of L/min (common
# practice); far beyond, the channel velocity overflows the friction and heat-transfer sums.
MAX_FLOW_L_MIN = 1000.0
MIN_FLOW_L_MIN = 1e-6  # a smaller flow per channel underflows to zero
# Smallest fixed-sink coefficient accepted: far below still air (a few W/(m2 K)); a smaller
# one (say 5e-324) underflows to 0 in the design's series resistances.
MIN_SINK_COEFFICIENT = 1e-6
# Above about 2 m/s erosion-corrosion of aluminium channels becomes a concern (common practice).
VELOCITY_WARN_M_S = 2.0


def solid(name: str, field_name: str):
    """A solid from :data:`explorer.materials.SOLIDS`, with an error naming ``field_name``."""
    from explorer.materials import SOLIDS

    if not isinstance(name, str) or name not in SOLIDS:  # a list or dict cannot be looked up
        valid = ", ".join(repr(k) for k in SOLIDS)
        raise InputError(f"`{field_name}`: expected one of {valid}, got {short_repr(name)}")
    return SOLIDS[name]


@dataclass(frozen=True, repr=False)
class FixedSink:
    """A plate given directly by a sink temperature and a coefficient (no hydraulics).

    Give exactly one of ``h_W_m2K`` and ``conductance_W_mK``.

    Attributes
    ----------
    temperature_C : float
        Sink (plate or coolant) temperature, degC (-60 to 150).
    h_W_m2K : float or None
        Heat transfer coefficient from the plate surface the cell (or its TIM)
        touches to the sink temperature, per unit contact area.
    conductance_W_mK : float or None
        Edge plates only: conductance from the plate surface under the edge
        (or fin foot) to the sink, per metre of edge length.
    """

    temperature_C: float
    h_W_m2K: float | None = None
    conductance_W_mK: float | None = None

    def __post_init__(self):
        set_ = object.__setattr__
        set_(self, "temperature_C", check_range("temperature_C", self.temperature_C, -60.0, 150.0, "degC"))
        if (self.h_W_m2K is None) == (self.conductance_W_mK is None):
            raise InputError("`fixed_sink`: expected exactly one of `h_W_m2K` (per unit contact area) "
                             f"and `conductance_W_mK` (per metre of edge), got h_W_m2K={self.h_W_m2K!r}, "
                             f"conductance_W_mK={self.conductance_W_mK!r}")
        if self.h_W_m2K is not None:
            set_(self, "h_W_m2K", check_range("h_W_m2K", self.h_W_m2K, MIN_SINK_COEFFICIENT, None,
                                              "W/(m2 K)"))
        else:
            set_(self, "conductance_W_mK", check_range(
                "conductance_W_mK", self.conductance_W_mK, MIN_SINK_COEFFICIENT, None, "W/(m K)"))

    def parameters(self) -> dict[str, float]:
        out = {"temperature_C": self.temperature_C}
        if self.h_W_m2K is not None:
            out["h_W_m2K"] = self.h_W_m2K
        else:
            out["conductance_W_mK"] = self.conductance_W_mK
        return out

    def replace(self, **changes) -> FixedSink:
        """A copy with ``temperature_C`` or the coefficient changed."""
        valid = tuple(self.parameters())
        for k in changes:
            if k not in valid:
                raise InputError(f"`{k}`: not a parameter of this fixed sink; valid: {', '.join(valid)}")
        return FixedSink(**{**self.parameters(), **changes})

    def describe(self) -> dict:
        return {"kind": "fixed_sink", **self.parameters()}

    def __repr__(self) -> str:
        coef = (f"h {self.h_W_m2K:g} W/(m2 K)" if self.h_W_m2K is not None
                else f"{self.conductance_W_mK:g} W/(m K) per metre of edge")
        return f"FixedSink({self.temperature_C:g} degC, {coef})"


def fixed_sink(temperature_C: float, h_W_m2K: float | None = None,
               conductance_W_mK: float | None = None) -> FixedSink:
    """A sink of fixed temperature behind a known coefficient (no hydraulics).

    Use it in place of a :class:`ColdPlate` in :func:`~explorer.cooling.face_plate`
    (with ``h_W_m2K``) or :func:`~explorer.cooling.edge_plate` (with either
    ``h_W_m2K`` per unit contact area or ``conductance_W_mK`` per metre of
    edge). The design's TIM is added in series.

    >>> fixed_sink(temperature_C=25.0, h_W_m2K=500.0).h_W_m2K
    500.0
    """
    return FixedSink(temperature_C, h_W_m2K, conductance_W_mK)


# Integer-valued plate fields (validated as whole numbers, reported as floats).
_INTEGERS = {"channels": (1, None), "cells_per_plate": (1, MAX_CELLS_PER_PLATE), "bends": (0, None)}


@dataclass(frozen=True, repr=False)
class ColdPlate:
    """A liquid cold plate with parallel straight rectangular channels (see the module notes).

    Build it with :func:`cold_plate`. All fields are validated on creation.
    """

    coolant: str  # canonical name, see explorer.cooling.coolant
    flow_L_min: float  # volume flow through the whole plate (all channels)
    inlet_C: float
    channels: int = 16  # parallel channels
    channel_width_mm: float = 10.0
    channel_height_mm: float = 3.0
    rib_mm: float = 2.0  # wall between neighbouring channels
    wall_mm: float = 1.5  # top wall between a channel and the cell-side surface
    length_mm: float = 500.0  # flow length of one channel, all passes
    material: str = "aluminium"  # key of explorer.materials.SOLIDS
    roughness_um: float = 1.5  # drawn/machined aluminium, from memory of Moody-chart tables
    cells_per_plate: int = 1  # cells served by this plate (series or parallel: see designs)
    flow_direction: str | None = None  # PLATE_FLOW_DIRECTIONS; None = the design's default
    bends: int = 0  # 180-degree return bends along each channel
    pump_efficiency: float = DEFAULT_PUMP_EFFICIENCY

    def __post_init__(self):
        set_ = object.__setattr__
        set_(self, "coolant", get_coolant(self.coolant).name)
        check_positive("flow_L_min", self.flow_L_min, "L/min")  # the plain message for <= 0
        set_(self, "flow_L_min", check_range("flow_L_min", self.flow_L_min, MIN_FLOW_L_MIN,
                                             MAX_FLOW_L_MIN, "L/min, through one plate"))
        set_(self, "inlet_C", check_finite("inlet_C", self.inlet_C, "degC"))
        self.fluid.properties(self.inlet_C, what="inlet_C")  # range / freezing check
        for name, (low, high) in _INTEGERS.items():
            set_(self, name, check_integer(name, getattr(self, name), low=low, high=high))
        for name in ("channel_width_mm", "channel_height_mm", "rib_mm", "wall_mm", "length_mm"):
            set_(self, name, _check_size(name, getattr(self, name)))
        band_mm = self.channels * (self.channel_width_mm + self.rib_mm)
        if band_mm > MAX_PLATE_MM:
            raise InputError(f"`channels` x (`channel_width_mm` + `rib_mm`): {self.channels} "
                             f"channels of {self.channel_width_mm:g} mm with {self.rib_mm:g} mm "
                             f"ribs make a plate {band_mm:g} mm wide; expected at most "
                             f"{MAX_PLATE_MM:g} mm (10 m)")
        set_(self, "roughness_um", check_nonnegative("roughness_um", self.roughness_um, "um"))
        set_(self, "pump_efficiency", check_range("pump_efficiency", self.pump_efficiency, 0.0, 1.0,
                                                  inclusive=False))
        if self.roughness_um * 1e-3 >= 0.5 * min(self.channel_width_mm, self.channel_height_mm):
            raise InputError(f"`roughness_um`: expected much less than the channel size, got "
                             f"{self.roughness_um!r}")
        solid(self.material, "material")
        if self.flow_direction is not None:
            check_choice("flow_direction", self.flow_direction, PLATE_FLOW_DIRECTIONS)

    # -- what the plate is made of and carries -------------------------------------------
    @property
    def fluid(self) -> Coolant:
        return get_coolant(self.coolant)

    @property
    def conductivity_W_mK(self) -> float:
        """Thermal conductivity of the plate material."""
        return solid(self.material, "material").thermal_conductivity_W_mK

    @property
    def pitch_m(self) -> float:
        return (self.channel_width_mm + self.rib_mm) * 1e-3

    @property
    def band_width_m(self) -> float:
        """Width of the plate covered by channels and ribs (channels x pitch)."""
        return self.channels * self.pitch_m

    @property
    def flow_m3_s(self) -> float:
        return self.flow_L_min / 60000.0

    def capacity_rate_W_K(self, temperature_C: float | None = None) -> float:
        """Mass flow x specific heat of the whole plate's coolant (W/K)."""
        p = self.fluid.properties(self.inlet_C if temperature_C is None else temperature_C)
        return self.flow_m3_s * p.density_kg_m3 * p.specific_heat_J_kgK

    def channel(self, temperature_C: float | None = None) -> ChannelFlow:
        """Flow in one channel with properties at ``temperature_C`` (default the inlet)."""
        t = self.inlet_C if temperature_C is None else temperature_C
        props = self.fluid.properties(t, what="coolant temperature")
        return channel_flow(self.channel_width_mm * 1e-3, self.channel_height_mm * 1e-3,
                            self.length_mm * 1e-3, self.flow_m3_s / self.channels, props,
                            roughness_m=self.roughness_um * 1e-6, bends=self.bends)

    # -- thermal path --------------------------------------------------------------------
    def rib_efficiency(self, h_channel_W_m2K: float) -> float:
        """Fin efficiency of a rib wetted on both sides, adiabatic far end."""
        mh = math.sqrt(2.0 * h_channel_W_m2K / (self.conductivity_W_mK * self.rib_mm * 1e-3)) \
            * self.channel_height_mm * 1e-3
        return math.tanh(mh) / mh

    def surface_h_W_m2K(self, temperature_C: float | None = None) -> float:
        """Coolant to the plate's top surface, per unit area over the channel band.

        Convection on the wetted channel roof and ribs (with rib efficiency)
        divided by the pitch, in series with conduction through the top wall.
        """
        h = self.channel(temperature_C).h_W_m2K
        w, hh = self.channel_width_mm * 1e-3, self.channel_height_mm * 1e-3
        h_conv = h * (w + 2.0 * self.rib_efficiency(h) * hh) / self.pitch_m
        return 1.0 / (1.0 / h_conv + self.wall_mm * 1e-3 / self.conductivity_W_mK)

    # -- hydraulics ----------------------------------------------------------------------
    def hydraulics(self, heat_W: float | None = None) -> dict:
        """Flow figures of the plate; with ``heat_W`` (W taken up by the whole plate) the outlet.

        Properties are taken at the inlet, or at the mean bulk temperature
        (inlet + rise / 2) when a heat load is given. Pressure drop covers the
        channels (friction plus entrance, exit and bend losses), not the
        manifolds or the rest of the loop.
        """
        warnings: list[str] = []
        t_bulk = self.inlet_C
        rise = None
        if heat_W is not None:
            q = check_finite("heat_W", heat_W, "W")
            for _ in range(3):  # rise depends weakly on cp at the mean temperature
                rise = q / self.capacity_rate_W_K(_clip(self.fluid, t_bulk))
                t_bulk = self.inlet_C + 0.5 * rise
            t_bulk = _clip(self.fluid, t_bulk)
        ch = self.channel(t_bulk)
        props = self.fluid.properties(t_bulk)
        warnings += ch.warnings
        if ch.velocity_m_s > VELOCITY_WARN_M_S:
            warnings.append(f"channel velocity {ch.velocity_m_s:.2f} m/s above {VELOCITY_WARN_M_S} m/s: "
                            "erosion risk for aluminium channels (common practice)")
        outlet = None
        if rise is not None:
            outlet = self.inlet_C + rise
            if outlet > self.fluid.max_C:
                warnings.append(f"coolant outlet {outlet:.1f} degC beyond the liquid range of "
                                f"{self.coolant} ({self.fluid.max_C:.1f} degC): flow too small for the heat")
        dp = ch.pressure_drop_Pa
        mass = self.flow_m3_s * props.density_kg_m3
        # Laminar entry lengths, Incropera & DeWitt eqs. 8.3 and 8.23: x = 0.05 Re D (x Pr).
        entry_h = 0.05 * ch.reynolds * ch.hydraulic_diameter_m if ch.regime == "laminar" else None
        entry_t = None if entry_h is None else entry_h * ch.prandtl
        notes = []
        if entry_t is not None and entry_t > 0.5 * self.length_mm * 1e-3:
            notes.append(f"thermally developing over much of the channel (entry length about "
                         f"{entry_t * 1e3:.0f} mm): the fully developed Nusselt number used is "
                         "conservative")
        h_surface = self.surface_h_W_m2K(t_bulk)
        return {
            "coolant": self.coolant,
            "coolant_description": self.fluid.description,
            "flow_L_min": self.flow_L_min,
            "flow_per_channel_L_min": self.flow_L_min / self.channels,
            "mass_flow_kg_s": mass,
            "capacity_rate_W_K": mass * props.specific_heat_J_kgK,
            "bulk_temperature_C": t_bulk,
            "density_kg_m3": props.density_kg_m3,
            "specific_heat_J_kgK": props.specific_heat_J_kgK,
            "viscosity_Pa_s": props.viscosity_Pa_s,
            "conductivity_W_mK": props.conductivity_W_mK,
            "velocity_m_s": ch.velocity_m_s,
            "hydraulic_diameter_mm": ch.hydraulic_diameter_m * 1e3,
            "reynolds": ch.reynolds,
            "prandtl": ch.prandtl,
            "regime": ch.regime,
            "nusselt": ch.nusselt,
            "h_channel_W_m2K": ch.h_W_m2K,
            "rib_efficiency": self.rib_efficiency(ch.h_W_m2K),
            "h_surface_W_m2K": h_surface,
            "friction_factor": ch.friction_factor,
            "minor_loss_coefficient": ch.minor_loss_coefficient,
            "pressure_drop_friction_Pa": ch.pressure_drop_friction_Pa,
            "pressure_drop_minor_Pa": ch.pressure_drop_minor_Pa,
            "pressure_drop_Pa": dp,
            "pump_efficiency": self.pump_efficiency,
            "pump_power_W": dp * self.flow_m3_s / self.pump_efficiency,
            "plate_heat_W": None if heat_W is None else float(heat_W),
            "temperature_rise_K": rise,
            "outlet_C": outlet,
            "entry_length_hydraulic_mm": None if entry_h is None else entry_h * 1e3,
            "entry_length_thermal_mm": None if entry_t is None else entry_t * 1e3,
            "notes": notes,
            "warnings": warnings,
        }

    # -- design-parameter protocol -------------------------------------------------------
    def parameters(self) -> dict[str, float]:
        """Every numeric field by name (integers as floats)."""
        return {f.name: float(getattr(self, f.name)) for f in fields(self)
                if f.name not in ("coolant", "material", "flow_direction")}

    def replace(self, **changes) -> ColdPlate:
        """A copy with fields changed (any field name, numeric or not)."""
        names = [f.name for f in fields(self)]
        for k in changes:
            if k not in names:
                raise InputError(f"`{k}`: not a cold-plate parameter; valid: {', '.join(names)}")
        values = asdict(self)
        values.update(changes)
        return ColdPlate(**values)

    def describe(self) -> dict:
        return {"kind": "cold_plate", **asdict(self)}

    def __repr__(self) -> str:
        flow = f", flow {self.flow_direction}" if self.flow_direction else ""
        return (f"ColdPlate({self.coolant}, {self.flow_L_min:g} L/min at {self.inlet_C:g} degC, "
                f"{self.channels} channels {self.channel_width_mm:g} x {self.channel_height_mm:g} mm "
                f"x {self.length_mm:g} mm, {self.material}, {self.cells_per_plate} cell(s){flow})")


def _check_size(name: str, value) -> float:
    """A plate dimension in mm, from :data:`MIN_PLATE_MM` to :data:`MAX_PLATE_MM` (10 m)."""
    return check_range(name, value, MIN_PLATE_MM, MAX_PLATE_MM, "mm")


def _clip(fluid: Coolant, t: float) -> float:
    return min(max(t, fluid.min_C), fluid.max_C)


def cold_plate(coolant: str = "water", flow_L_min: float = 4.0, inlet_C: float = 25.0, *,
               channels: int = 16, channel_width_mm: float = 10.0, channel_height_mm: float = 3.0,
               rib_mm: float = 2.0, wall_mm: float = 1.5, length_mm: float = 500.0,
               material: str = "aluminium", roughness_um: float = 1.5, cells_per_plate: int = 1,
               flow_direction: str | None = None, bends: int = 0,
               pump_efficiency: float = DEFAULT_PUMP_EFFICIENCY) -> ColdPlate:
    """A liquid cold plate: coolant, flow through the plate, inlet temperature, geometry.

    Parameters
    ----------
    coolant : str
        ``"water"``, ``"eg<NN>"`` or ``"pg<NN>"`` (glycol mass percent, 1-60),
        e.g. ``"eg50"``; long forms like ``"ethylene_glycol_50"`` also work.
    flow_L_min : float
        Volume flow through the whole plate, L/min.
    inlet_C : float
        Coolant inlet temperature, degC (within the coolant's liquid range).
    channels : int
        Number of identical parallel channels.
    channel_width_mm, channel_height_mm : float
        Channel cross-section.
    rib_mm : float
        Wall thickness between neighbouring channels.
    wall_mm : float
        Top wall between a channel and the surface the cells sit on.
    length_mm : float
        Flow length of one channel (all passes); used for the pressure drop.
    material : str
        Plate material, a key of ``explorer.materials.SOLIDS``.
    roughness_um : float
        Absolute channel roughness (turbulent friction only).
    cells_per_plate : int
        How many cells this plate serves; how they share the coolant (one
        after another, or side by side) follows from the design and
        ``flow_direction``.
    flow_direction : {"+x", "-x", "+y", "-y", "across"} or None
        Coolant direction in the cell's axes; "across" (edge plates) runs
        through the stack, meeting the cells one after another. None picks
        the design's default ("+x" under a face, "across" at an edge).
    bends : int
        180-degree return bends along each channel (serpentine passes).
    pump_efficiency : float
        For the pump power ``dp * Q / efficiency``; default 0.5.

    Examples
    --------
    >>> plate = cold_plate("eg50", flow_L_min=6.0, inlet_C=25.0)
    >>> plate.hydraulics()["regime"]
    'laminar'
    """
    return ColdPlate(coolant, flow_L_min, inlet_C, channels, channel_width_mm, channel_height_mm,
                     rib_mm, wall_mm, length_mm, material, roughness_um, cells_per_plate,
                     flow_direction, bends, pump_efficiency)
