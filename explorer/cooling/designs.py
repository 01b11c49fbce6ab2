"""User-facing cooling designs: each turns hardware into the :class:`~explorer.inplane.sinks.Sinks` of one cell.

Every design is a frozen dataclass with the same members:

1. ``sinks(cell, grid, position=None) -> Sinks`` -- the heat paths of the
   cell at ``position`` along the coolant path (0 = the first cell the
   coolant meets; None = the last, which sees the warmest coolant).
2. ``positions_to_check() -> list[int]`` -- e.g. ``[0, mid, last]``.
3. ``parameters() -> dict[str, float]`` -- every numeric design value by a
   flat name (``"flow_L_min"``, ``"tim_W_mK"``, ...), and
   ``replace(**{name: value})`` -- a new design with values changed.
4. ``describe() -> dict`` -- JSON-ready kind and inputs.
5. ``hydraulics(heat_W=None, cell=None) -> dict`` -- flow figures of a cold
   plate ({} without one); ``heat_W`` is the heat ONE cell rejects into the
   plate, the plate's load (``plate_heat_W``) is that times the cells sharing
   its coolant; with ``cell`` the warnings also say when the plate does not
   fit the cells (channel coverage, channel length). Pressure drop and pump
   power are for the plate's channels only (``pressure_drop_scope``, the
   ``labels`` and a note say so): manifolds and the rest of the loop are not
   included.
6. ``check_fits(cell)`` -- raises :class:`~explorer.validators.InputError`
   with the lengths when the plate's channels are shorter than the path under
   the cells they serve (sizing calls it: such a plate is no answer).

Designs add up: ``edge_plate(...) + tab_cooling(...)`` (or :func:`combine`).

Thermal paths (all resistances in series; per unit area for faces, per unit
edge length for edges):

* face plate: ``1/U = 1/(h_surface * coverage) + tim_mm/tim_W_mK``, with
  ``h_surface`` the plate's coolant-to-surface coefficient
  (:meth:`ColdPlate.surface_h_W_m2K`) and ``coverage`` the fraction of the
  cell's width across the flow that the channel band covers (the top wall is
  taken to spread heat over the rest);
* edge plate: ``1/G' = tim_mm/(tim_W_mK * foot) + 1/(h_surface * coverage * pitch)``
  with ``foot`` the contact width (the cell's stack thickness, or the fin's
  foot) and ``pitch`` the plate length per cell along the stack (stack
  thickness plus fin): the plate under one cell's pitch serves that cell.

Coolant properties for the channel coefficient and the capacity rate are
taken at the plate inlet; the coolant temperature itself varies along the
flow through the :class:`~explorer.inplane.sinks.CoolantStream`, which the
thermal model solves.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from dataclasses import replace as _dc_replace

from explorer.cooling.plate import ColdPlate, FixedSink, solid
from explorer.inplane.sinks import CoolantStream, EdgeSink, FaceSink, Fin, Sinks, TabSink
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

__all__ = [
    "Convection",
    "FacePlate",
    "EdgePlate",
    "TabCooling",
    "Combined",
    "convection",
    "face_plate",
    "edge_plate",
    "tab_cooling",
    "combine",
]

EDGES = ("bottom", "top", "left", "right")
FACE_CHOICES = ("back", "front", "both")
# Cell face to fin through a thin bonding layer: order of magnitude only (common practice).
DEFAULT_FIN_CONTACT_W_m2K = 2000.0
# Gap pads and pastes for battery cold plates span about 1-6 W/(m K) (common practice).
DEFAULT_TIM_W_mK = 3.0
DEFAULT_TIM_MM = 0.5
# Thickest fin sheet or interface layer accepted: gap pads run to a few mm and fins to a few
# mm (common practice); beyond this the value is a typo (e.g. metres given as mm).
MAX_LAYER_MM = 50.0
# Widest fin foot (contact width on the plate) accepted: pouch stacks are tens of mm thick.
MAX_FOOT_MM = 500.0
# Smallest values accepted, far below any real part (a foil is some um thick, still air
# conducts 0.026 W/(m K)); a smaller one (say 5e-324) underflows to 0 in the resistances.
MIN_LAYER_MM = 1e-3
MIN_FOOT_MM = 1e-2
MIN_TIM_W_MK = 1e-3
MIN_TAB_W_K = 1e-6
# What the plate's pressure drop and pump power cover (said wherever they are shown).
HYDRAULICS_SCOPE = "channels only"
HYDRAULICS_NOTE = ("pressure drop and pump power: channels only (friction, entrance, exit and "
                   "bends in the plate's channels); manifolds, connectors, hoses and the rest "
                   "of the coolant loop are not included")
HYDRAULICS_LABELS = {
    "pressure_drop_Pa": "pressure drop, channels only",
    "pressure_drop_friction_Pa": "pressure drop by friction, channels only",
    "pressure_drop_minor_Pa": "pressure drop by entrance, exit and bends, channels only",
    "pump_power_W": "pump power for the channels only",
}


class _Design:
    """Shared protocol: parameters / replace / describe / + (see the module docstring)."""

    kind = "design"
    _own_numeric: tuple[str, ...] = ()  # numeric fields of the design itself

    # subclasses with a plate keep it in ``self.plate``
    def _plate(self):
        return getattr(self, "plate", None)

    def parameters(self) -> dict[str, float]:
        out = {}
        plate = self._plate()
        if plate is not None:
            out.update(plate.parameters())
        for name in self._own_numeric:
            value = getattr(self, name)
            if value is not None:
                out[name] = float(value)
        return out

    def accepts(self) -> set[str]:
        """Every name :meth:`replace` takes: numeric parameters and the other inputs."""
        plate = self._plate()
        own = {f.name for f in fields(self) if f.name != "plate"}
        return own | ({f.name for f in fields(plate)} if plate is not None else set())

    def replace(self, **changes):
        plate = self._plate()
        plate_fields = [f.name for f in fields(plate)] if plate is not None else []
        own = [f.name for f in fields(self) if f.name != "plate"]
        plate_changes = {k: v for k, v in changes.items() if k in plate_fields}
        own_changes = {k: v for k, v in changes.items() if k in own}
        unknown = [k for k in changes if k not in plate_changes and k not in own_changes]
        if unknown:
            valid = ", ".join(sorted(self.parameters()))
            raise InputError(f"`{unknown[0]}`: not a parameter of this {self.kind} design; "
                             f"valid: {valid}")
        if plate_changes:
            own_changes["plate"] = plate.replace(**plate_changes)
        return _dc_replace(self, **own_changes)

    def describe(self) -> dict:
        out = {"kind": self.kind}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "plate":
                out["plate"] = value.describe()
            elif isinstance(value, tuple):
                out[f.name] = list(value)
            else:
                out[f.name] = value
        if isinstance(self._plate(), ColdPlate):
            out["hydraulics_scope"] = HYDRAULICS_NOTE
        return out

    def hydraulics(self, heat_W: float | None = None, cell=None) -> dict:
        return {}

    def check_fits(self, cell) -> None:
        """Raise InputError when the plate is too short for the cells it serves."""
        needed = self._path_needed(cell) if isinstance(self._plate(), ColdPlate) else None
        if needed is not None:
            _check_length(self._plate(), *needed)

    def _path_needed(self, cell):
        """(length of the coolant path under the cells this plate serves in m, what it is)."""
        return None

    def positions_to_check(self) -> list[int]:
        return [0]

    def cells_in_series(self) -> int:
        """Cells one after another on this design's coolant (1 without a coolant path)."""
        return max(self.positions_to_check()) + 1

    def __add__(self, other):
        return combine(self, other)

    def _summary(self) -> str:
        return ""

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self._summary()})"


def _positions(n: int) -> list[int]:
    return sorted({0, (n - 1) // 2, n - 1})


def _position(position, n: int) -> int:
    if position is None:
        return n - 1
    return check_integer("position", position, low=0, high=n - 1)


def _series(r_tim: float, conductance: float) -> float:
    """Series combination of a resistance and a conductance (same basis)."""
    return 1.0 / (r_tim + 1.0 / conductance)


# ---------------------------------------------------------------------------------------
@dataclass(frozen=True, repr=False)
class Convection(_Design):
    """Both faces exchange heat with an ambient at a fixed coefficient."""

    h_W_m2K: float
    ambient_C: float
    kind = "convection"
    _own_numeric = ("h_W_m2K", "ambient_C")

    def __post_init__(self):
        object.__setattr__(self, "h_W_m2K", check_positive("h_W_m2K", self.h_W_m2K, "W/(m2 K)"))
        object.__setattr__(self, "ambient_C",
                           check_range("ambient_C", self.ambient_C, -60.0, 150.0, "degC"))

    def _summary(self) -> str:
        return f"both faces, h {self.h_W_m2K:g} W/(m2 K) to {self.ambient_C:g} degC"

    def sinks(self, cell, grid, position=None) -> Sinks:
        return Sinks(faces={f: FaceSink(self.h_W_m2K, self.ambient_C) for f in ("front", "back")})


def convection(h_W_m2K: float, ambient_C: float) -> Convection:
    """Convection from both faces to ``ambient_C`` with coefficient ``h_W_m2K``.

    >>> convection(10.0, 25.0).sinks(None, None).faces["front"].h_W_m2K
    10.0
    """
    return Convection(h_W_m2K, ambient_C)


# ---------------------------------------------------------------------------------------
@dataclass(frozen=True, repr=False)
class TabCooling(_Design):
    """Each tab conducts to a busbar held at ``busbar_C`` through ``conductance_W_K``."""

    conductance_W_K: float
    busbar_C: float
    tabs: tuple[str, ...] | None = None  # tab names; None = every tab of the cell
    kind = "tab_cooling"
    _own_numeric = ("conductance_W_K", "busbar_C")

    def __post_init__(self):
        object.__setattr__(self, "conductance_W_K", check_range(
            "conductance_W_K", self.conductance_W_K, MIN_TAB_W_K, None, "W/K"))
        object.__setattr__(self, "busbar_C",
                           check_range("busbar_C", self.busbar_C, -60.0, 150.0, "degC"))
        if self.tabs is not None:
            tabs = (self.tabs,) if isinstance(self.tabs, str) else self.tabs
            if not isinstance(tabs, list | tuple) or not tabs \
                    or not all(isinstance(t, str) for t in tabs):
                raise InputError("`tabs`: expected a tab name or a list of tab names (e.g. "
                                 f"'negative' or ['negative', 'positive']), or None for every "
                                 f"tab, got {short_repr(self.tabs)}")
            object.__setattr__(self, "tabs", tuple(tabs))

    def _summary(self) -> str:
        which = "every tab" if self.tabs is None else ", ".join(self.tabs)
        return f"{which}, {self.conductance_W_K:g} W/K each to {self.busbar_C:g} degC"

    def sinks(self, cell, grid, position=None) -> Sinks:
        names = [t.name for t in cell.geometry.tabs]
        chosen = names if self.tabs is None else list(self.tabs)
        for t in chosen:
            if t not in names:
                raise InputError(f"`tabs`: cell {cell.name!r} has no tab {t!r}; its tabs: "
                                 f"{', '.join(map(repr, names))}")
        return Sinks(tabs={t: TabSink(self.conductance_W_K, self.busbar_C) for t in chosen})


def tab_cooling(conductance_W_K: float = 2.0, busbar_C: float = 25.0, tabs=None) -> TabCooling:
    """Tab cooling: every tab (or those named in ``tabs``) to a busbar at ``busbar_C``.

    ``conductance_W_K`` is per tab, from the busbar weld to the busbar's
    temperature-controlled part (busbar conduction and any busbar cooler); the
    tab's own conduction from the electrode edge to the weld is part of the
    thermal model, not of this figure. Default 2 W/K (order of magnitude of a
    short actively cooled busbar, common practice).
    """
    return TabCooling(conductance_W_K, busbar_C, tabs)


# ---------------------------------------------------------------------------------------
def _check_plate(plate):
    if not isinstance(plate, ColdPlate | FixedSink):
        raise InputError("`plate`: expected a cold_plate(...) or a fixed_sink(...), got "
                         f"{type(plate).__name__}")


def _check_tim(obj):
    object.__setattr__(obj, "tim_W_mK",
                       check_range("tim_W_mK", obj.tim_W_mK, MIN_TIM_W_MK, None, "W/(m K)"))
    tim = check_nonnegative("tim_mm", obj.tim_mm, "mm")
    object.__setattr__(obj, "tim_mm", _at_most("tim_mm", tim, obj.tim_mm, MAX_LAYER_MM))


def _at_most(name: str, v: float, given, high: float) -> float:
    """``v`` (checked >= 0 already) if it is at most ``high`` mm; the error echoes ``given``."""
    if v > high:
        raise InputError(f"`{name}`: expected a value <= {high:g} (in mm), "
                         f"got {short_repr(given)}")
    return v


@dataclass(frozen=True, repr=False)
class FacePlate(_Design):
    """A plate (cold plate or fixed sink) under one or both faces, through a TIM."""

    plate: ColdPlate | FixedSink
    face: str = "back"
    tim_W_mK: float = DEFAULT_TIM_W_mK
    tim_mm: float = DEFAULT_TIM_MM
    faces_per_plate: int | None = None  # cell faces on one plate at one position; None: 2 for "both"
    kind = "face_plate"
    _own_numeric = ("tim_W_mK", "tim_mm", "faces_per_plate")

    def __post_init__(self):
        _check_plate(self.plate)
        check_choice("face", self.face, FACE_CHOICES)
        _check_tim(self)
        n = self.faces_per_plate
        n = (2 if self.face == "both" else 1) if n is None else check_integer("faces_per_plate", n, 1, 2)
        object.__setattr__(self, "faces_per_plate", n)
        if isinstance(self.plate, FixedSink) and self.plate.h_W_m2K is None:
            raise InputError("`plate`: under a face a fixed_sink needs `h_W_m2K` (per unit area); "
                             "`conductance_W_mK` is for edge plates")
        if isinstance(self.plate, ColdPlate) and self.plate.flow_direction == "across":
            raise InputError("`flow_direction`: 'across' is for edge plates; under a face use one of "
                             "'+x', '-x', '+y', '-y'")

    def _summary(self) -> str:
        return (f"{self.face}, TIM {self.tim_W_mK:g} W/(m K) x {self.tim_mm:g} mm, "
                f"{self.faces_per_plate} face(s) per plate, {self.plate!r}")

    @property
    def direction(self) -> str:
        return self.plate.flow_direction or "+x"

    def positions_to_check(self) -> list[int]:
        if isinstance(self.plate, ColdPlate):
            return _positions(self.plate.cells_per_plate)
        return [0]

    def face_h_W_m2K(self, cell) -> float:
        """Coefficient from one covered cell face to the coolant (or sink) temperature."""
        r_tim = self.tim_mm * 1e-3 / self.tim_W_mK
        if isinstance(self.plate, FixedSink):
            return _series(r_tim, self.plate.h_W_m2K)
        return _series(r_tim, self.plate.surface_h_W_m2K() * self._coverage(cell)[1])

    def _coverage(self, cell) -> tuple[float, float]:
        """(channels under the cell, fraction of the cell's cross-flow width they cover)."""
        g = cell.geometry
        across = g.height_m if self.direction in ("+x", "-x") else g.width_m
        n_under = min(float(self.plate.channels), across / self.plate.pitch_m)
        return n_under, n_under * self.plate.pitch_m / across

    def sinks(self, cell, grid, position=None) -> Sinks:
        h = self.face_h_W_m2K(cell)
        faces = ("front", "back") if self.face == "both" else (self.face,)
        if isinstance(self.plate, FixedSink):  # no coolant path: every position is alike
            return Sinks(faces={f: FaceSink(h, self.plate.temperature_C) for f in faces})
        plate = self.plate
        k = _position(position, plate.cells_per_plate)
        n_under, _ = self._coverage(cell)
        share = plate.capacity_rate_W_K() * n_under / plate.channels / self.faces_per_plate
        # both faces on plates of one coolant circuit: one stream takes up what both faces give
        stream = CoolantStream(sink=faces if len(faces) > 1 else faces[0],
                               direction=self.direction, capacity_rate_W_K=len(faces) * share,
                               inlet_C=plate.inlet_C, upstream_cells=k)
        return Sinks(faces={f: FaceSink(h, plate.inlet_C) for f in faces}, coolant=stream)

    def hydraulics(self, heat_W: float | None = None, cell=None) -> dict:
        """Plate hydraulics; ``heat_W`` is one cell's heat, ``cell`` adds geometry warnings."""
        if not isinstance(self.plate, ColdPlate):
            return {}
        faces = 2 if self.face == "both" else 1
        # each plate serves faces_per_plate faces at each of cells_per_plate positions
        cells = self.plate.cells_per_plate * self.faces_per_plate / faces
        out = _plate_hydraulics(self.plate, heat_W, cells)
        if cell is not None:
            out["warnings"] += _fit_warnings(self.plate, self._coverage(cell)[1],
                                             self._path_needed(cell)[0], "cells along the flow")
        return out

    def _path_needed(self, cell):
        g = cell.geometry
        along = g.width_m if self.direction in ("+x", "-x") else g.height_m
        n = self.plate.cells_per_plate
        return n * along, f"{n} cell(s) one after another, {along * 1e3:.0f} mm each along the flow"


def face_plate(plate, face: str = "back", tim_W_mK: float = DEFAULT_TIM_W_mK,
               tim_mm: float = DEFAULT_TIM_MM, faces_per_plate: int | None = None) -> FacePlate:
    """A plate under a cell face (``"back"``, ``"front"`` or ``"both"``) through a TIM.

    Parameters
    ----------
    plate : ColdPlate or FixedSink
        From :func:`cold_plate` (coolant, flow, channels) or :func:`fixed_sink`
        (a given temperature and surface coefficient).
    face : {"back", "front", "both"}
    tim_W_mK, tim_mm : float
        Interface material between the cell face and the plate.
    faces_per_plate : {1, 2}, optional
        Cell faces one plate serves at each position (2 when the plate sits
        between two cells, sharing its coolant). Default 2 for ``"both"``
        (plates between every pair of cells), else 1.

    Notes
    -----
    The plate's ``cells_per_plate`` cells lie one after another along the
    flow (``flow_direction``, default ``"+x"``); cell ``k`` receives coolant
    already warmed by ``k`` cells. For ``"both"`` the returned Sinks carries
    one face sink (on ``"back"``) with the two faces' combined coefficient
    and coolant share, because :class:`~explorer.inplane.sinks.Sinks` has a
    single coolant stream. The in-plane field sees the right coolant
    profile; the thermal model's mean-to-face conduction is then one-sided
    (depth L rather than L/2), which overstates the through-plane resistance
    -- conservative. With a :func:`fixed_sink` plate both faces get their own
    sink and this does not arise.
    """
    return FacePlate(plate, face, tim_W_mK, tim_mm, faces_per_plate)


# ---------------------------------------------------------------------------------------
_ALONG = {"bottom": ("+x", "-x"), "top": ("+x", "-x"), "left": ("+y", "-y"), "right": ("+y", "-y")}
_ACROSS = {"bottom": "+y", "top": "-y", "left": "+x", "right": "-x"}  # into the cell, off the edge


@dataclass(frozen=True, repr=False)
class EdgePlate(_Design):
    """A plate at one edge, touched by the cell's own edge or by a fin bent onto it."""

    plate: ColdPlate | FixedSink
    edge: str = "bottom"
    fin_mm: float | None = None  # None: no fin, the cell edge sits on the TIM
    fin_material: str = "aluminium"
    fin_face: str = "back"
    fin_contact_W_m2K: float = DEFAULT_FIN_CONTACT_W_m2K
    tim_W_mK: float = DEFAULT_TIM_W_mK
    tim_mm: float = DEFAULT_TIM_MM
    foot_mm: float | None = None  # contact width on the plate; None: the cell's stack thickness
    kind = "edge_plate"
    _own_numeric = ("fin_mm", "fin_contact_W_m2K", "tim_W_mK", "tim_mm", "foot_mm")

    def __post_init__(self):
        _check_plate(self.plate)
        check_choice("edge", self.edge, EDGES)
        _check_tim(self)
        if self.fin_mm is not None:
            fin = check_range("fin_mm", self.fin_mm, MIN_LAYER_MM, None, "mm")
            object.__setattr__(self, "fin_mm", _at_most("fin_mm", fin, self.fin_mm, MAX_LAYER_MM))
            solid(self.fin_material, "fin_material")
            check_choice("fin_face", self.fin_face, ("front", "back"))
        object.__setattr__(self, "fin_contact_W_m2K",
                           check_positive("fin_contact_W_m2K", self.fin_contact_W_m2K, "W/(m2 K)"))
        if self.foot_mm is not None:
            foot = check_range("foot_mm", self.foot_mm, MIN_FOOT_MM, None, "mm")
            object.__setattr__(self, "foot_mm", _at_most("foot_mm", foot, self.foot_mm, MAX_FOOT_MM))
        if isinstance(self.plate, ColdPlate) and self.plate.flow_direction is not None:
            allowed = ("across",) + _ALONG[self.edge]
            if self.plate.flow_direction not in allowed:
                raise InputError(f"`flow_direction`: at the {self.edge} edge expected one of "
                                 f"{', '.join(map(repr, allowed))}, got {self.plate.flow_direction!r}")

    def _summary(self) -> str:
        fin = "no fin" if self.fin_mm is None else f"fin {self.fin_mm:g} mm {self.fin_material}"
        return (f"{self.edge}, {fin}, TIM {self.tim_W_mK:g} W/(m K) x {self.tim_mm:g} mm, "
                f"{self.plate!r}")

    @property
    def direction(self) -> str:
        return self.plate.flow_direction or "across"

    def positions_to_check(self) -> list[int]:
        if isinstance(self.plate, ColdPlate) and self.direction == "across":
            return _positions(self.plate.cells_per_plate)
        return [0]

    def _lengths(self, cell) -> tuple[float, float, float]:
        """(edge length, contact width, plate length per cell along the stack), m."""
        g = cell.geometry
        edge_len = g.width_m if self.edge in ("bottom", "top") else g.height_m
        foot = g.stack_thickness_m if self.foot_mm is None else self.foot_mm * 1e-3
        pitch = g.stack_thickness_m + (self.fin_mm or 0.0) * 1e-3
        return edge_len, foot, max(pitch, foot)

    def _share(self, cell) -> tuple[float, float]:
        """(coverage of the plate area per cell by channels, fraction of the plate's coolant)."""
        plate = self.plate
        edge_len, _, pitch = self._lengths(cell)
        if self.direction == "across":  # channels cross the edge, all cells in series
            n_under = min(float(plate.channels), edge_len / plate.pitch_m)
            return n_under * plate.pitch_m / edge_len, n_under / plate.channels
        # channels along the edge, the cells side by side across them (in parallel)
        cells = plate.cells_per_plate
        return min(1.0, plate.band_width_m / (cells * pitch)), 1.0 / cells

    def conductance_W_mK(self, cell) -> float:
        """Edge (or fin foot) to coolant/sink temperature, per metre of edge."""
        _, foot, pitch = self._lengths(cell)
        r_tim = self.tim_mm * 1e-3 / (self.tim_W_mK * foot)
        if isinstance(self.plate, FixedSink):
            g = self.plate.conductance_W_mK
            return _series(r_tim, self.plate.h_W_m2K * foot if g is None else g)
        coverage, _ = self._share(cell)
        return _series(r_tim, self.plate.surface_h_W_m2K() * coverage * pitch)

    def fin(self) -> Fin | None:
        """The fin sheet for the thermal model, or None."""
        if self.fin_mm is None:
            return None
        m = solid(self.fin_material, "fin_material")
        return Fin(face=self.fin_face, thickness_m=self.fin_mm * 1e-3,
                   conductivity_W_mK=m.thermal_conductivity_W_mK, density_kg_m3=m.density_kg_m3,
                   specific_heat_J_kgK=m.specific_heat_J_kgK,
                   contact_W_m2K=self.fin_contact_W_m2K, edge=self.edge)

    def sinks(self, cell, grid, position=None) -> Sinks:
        g = self.conductance_W_mK(cell)
        layer = "cell" if self.fin_mm is None else "fin"
        if isinstance(self.plate, FixedSink):
            return Sinks(edges={self.edge: EdgeSink(g, self.plate.temperature_C, layer)}, fin=self.fin())
        plate = self.plate
        k = _position(position, plate.cells_per_plate)
        _, fraction = self._share(cell)
        if self.direction == "across":
            # The coolant crosses the edge (runs through the stack): a stream direction across the
            # edge tells the thermal model to treat the edge as one strip at one coolant temperature.
            direction, upstream = _ACROSS[self.edge], k
        else:
            direction, upstream = self.direction, 0
        stream = CoolantStream(sink=self.edge, direction=direction,
                               capacity_rate_W_K=plate.capacity_rate_W_K() * fraction,
                               inlet_C=plate.inlet_C, upstream_cells=upstream)
        return Sinks(edges={self.edge: EdgeSink(g, plate.inlet_C, layer)}, fin=self.fin(),
                     coolant=stream)

    def hydraulics(self, heat_W: float | None = None, cell=None) -> dict:
        """Plate hydraulics; ``heat_W`` is one cell's heat, ``cell`` adds geometry warnings."""
        if not isinstance(self.plate, ColdPlate):
            return {}
        out = _plate_hydraulics(self.plate, heat_W, self.plate.cells_per_plate)
        if cell is not None:
            out["warnings"] += _fit_warnings(self.plate, self._share(cell)[0],
                                             self._path_needed(cell)[0], "the path under the cells")
        return out

    def _path_needed(self, cell):
        edge_len, _, pitch = self._lengths(cell)
        if self.direction == "across":
            n = self.plate.cells_per_plate
            return n * pitch, f"{n} cell(s) through the stack, {pitch * 1e3:.1f} mm pitch each"
        return edge_len, f"the {self.edge} edge, {edge_len * 1e3:.0f} mm"


def edge_plate(plate, edge: str = "bottom", fin_mm: float | None = None,
               fin_material: str = "aluminium", tim_W_mK: float = DEFAULT_TIM_W_mK,
               tim_mm: float = DEFAULT_TIM_MM, *, fin_face: str = "back",
               fin_contact_W_m2K: float = DEFAULT_FIN_CONTACT_W_m2K,
               foot_mm: float | None = None) -> EdgePlate:
    """A plate at one edge of the cell, with or without a fin sheet bending onto it.

    Parameters
    ----------
    plate : ColdPlate or FixedSink
    edge : {"bottom", "top", "left", "right"}
    fin_mm : float or None
        Fin sheet thickness; None for no fin (the cell's own edge touches the
        TIM over its stack thickness).
    fin_material : str
        Key of ``explorer.materials.SOLIDS``.
    tim_W_mK, tim_mm : float
        Interface material between the edge (or the fin foot) and the plate.
    fin_face : {"back", "front"}
        The face the fin covers.
    fin_contact_W_m2K : float
        Cell face to fin, bonding layer included (default 2000, order of
        magnitude, common practice).
    foot_mm : float, optional
        Contact width on the plate; default the cell's stack thickness.

    Notes
    -----
    With ``flow_direction="across"`` (the default) the coolant runs through
    the stack and meets the plate's ``cells_per_plate`` cells one after
    another; with a direction along the edge the cells stand side by side
    across parallel channels and share the flow equally.
    """
    return EdgePlate(plate, edge, fin_mm, fin_material, fin_face, fin_contact_W_m2K, tim_W_mK,
                     tim_mm, foot_mm)


def _plate_hydraulics(plate: ColdPlate, heat_W, cells: float) -> dict:
    total = None if heat_W is None else check_finite("heat_W", heat_W, "W") * cells
    out = plate.hydraulics(total)
    out["cell_heat_W"] = None if heat_W is None else float(heat_W)
    out["cells_on_coolant"] = float(cells)
    out["pressure_drop_scope"] = HYDRAULICS_SCOPE
    out["labels"] = dict(HYDRAULICS_LABELS)
    out["notes"] = [*out.get("notes", []), HYDRAULICS_NOTE]
    return out


def _check_length(plate: ColdPlate, needed_m: float, what: str) -> None:
    """The plate's channels must run the whole path under the cells they serve."""
    if plate.length_mm * 1e-3 < 0.99 * needed_m:
        raise InputError(
            f"`length_mm`: the plate's channels are {plate.length_mm:g} mm long, shorter than "
            f"the path under the cells they serve ({what}: {needed_m * 1e3:.0f} mm); expected "
            f"length_mm >= {needed_m * 1e3:.0f}, or fewer `cells_per_plate`")


# Below this channel coverage the assumed lateral spreading in the top wall is doubtful.
_COVERAGE_WARN = 0.8


def _fit_warnings(plate: ColdPlate, coverage: float, needed_m: float, what: str) -> list[str]:
    """Plain-words warnings when the plate does not fit the cells it serves."""
    out = []
    if coverage < _COVERAGE_WARN:
        out.append(f"the channels cover only {coverage:.0%} of the cooled width; the plate wall "
                   "is taken to spread the heat over the rest, which flatters the result")
    if plate.length_mm * 1e-3 < 0.99 * needed_m:
        out.append(f"channel length {plate.length_mm:g} mm is shorter than {what} "
                   f"({needed_m * 1e3:.0f} mm): the plate does not fit the cells and the "
                   f"pressure drop (channels only) is understated; sizing refuses such a plate")
    return out


# ---------------------------------------------------------------------------------------
@dataclass(frozen=True, repr=False)
class Combined(_Design):
    """Several designs acting on one cell (e.g. an edge plate plus tab cooling)."""

    parts: tuple
    kind = "combined"

    def __post_init__(self):
        flat = []
        for p in self.parts:
            if isinstance(p, Combined):
                flat.extend(p.parts)
            elif isinstance(p, _Design):
                flat.append(p)
            else:
                raise InputError(f"`cooling`: expected designs from explorer.cooling, got "
                                 f"{type(p).__name__}")
        if len(flat) < 1:
            raise InputError("`cooling`: combine() needs at least one design")
        object.__setattr__(self, "parts", tuple(flat))

    def _summary(self) -> str:
        return " + ".join(repr(p) for p in self.parts)

    def _labels(self) -> list[str]:
        kinds = [p.kind for p in self.parts]
        return [k if kinds.count(k) == 1 else f"{k}{kinds[:i + 1].count(k)}" for i, k in enumerate(kinds)]

    def _names(self, aliases: bool = True) -> dict[str, tuple[int, str]]:
        """Flat name -> (part index, the part's own name).

        A name only one part has stays plain; a name several parts share is
        prefixed with the part's kind (``"edge_plate.tim_mm"``). With
        ``aliases`` the prefixed form of every name is accepted as well.
        """
        counts: dict[str, int] = {}
        for p in self.parts:
            for n in p.parameters():
                counts[n] = counts.get(n, 0) + 1
        out = {}
        for i, (label, p) in enumerate(zip(self._labels(), self.parts)):
            for n in p.parameters():
                if counts[n] == 1:
                    out[n] = (i, n)
                if counts[n] > 1 or aliases:
                    out[f"{label}.{n}"] = (i, n)
        return out

    def parameters(self) -> dict[str, float]:
        """Every numeric value; names shared by several parts carry the part's kind as prefix."""
        return {name: self.parts[i].parameters()[n]
                for name, (i, n) in self._names(aliases=False).items()}

    def replace(self, **changes):
        names = self._names()
        parts = list(self.parts)
        for name, value in changes.items():
            if name not in names:  # a non-numeric input (e.g. "coolant") only one part has
                owners = [i for i, p in enumerate(parts) if name in p.accepts()]
                if len(owners) != 1:
                    valid = ", ".join(sorted(self._names(aliases=False)))
                    raise InputError(f"`{name}`: not a parameter of this combined design"
                                     f"{' (several parts have it)' if owners else ''}; valid: {valid}")
                names[name] = (owners[0], name)
            i, n = names[name]
            parts[i] = parts[i].replace(**{n: value})
        return Combined(tuple(parts))

    def describe(self) -> dict:
        return {"kind": self.kind, "parts": [p.describe() for p in self.parts]}

    def positions_to_check(self) -> list[int]:
        return sorted({k for p in self.parts for k in p.positions_to_check()})

    def check_fits(self, cell) -> None:
        for p in self.parts:
            p.check_fits(cell)

    def hydraulics(self, heat_W: float | None = None, cell=None) -> dict:
        for p in self.parts:
            h = p.hydraulics(heat_W, cell)
            if h:
                return h
        return {}

    def sinks(self, cell, grid, position=None) -> Sinks:
        out = Sinks()
        labels = self._labels()
        owner: dict[str, str] = {}
        for label, p in zip(labels, self.parts):
            # a part with fewer cells on its coolant than `position` (or none) takes its last
            pos = position if position is not None and position < p.cells_in_series() else None
            s = p.sinks(cell, grid, position=pos)
            for group in ("faces", "edges", "tabs"):
                for name, sink in getattr(s, group).items():
                    key = f"{group}:{name}"
                    if key in owner:
                        raise InputError(f"`cooling`: {owner[key]} and {label} both cool the "
                                         f"{name} {group[:-1]}; one design per face, edge or tab")
                    owner[key] = label
                    getattr(out, group)[name] = sink
            for single in ("fin", "coolant"):
                value = getattr(s, single)
                if value is not None:
                    if getattr(out, single) is not None:
                        raise InputError(f"`cooling`: {owner[single]} and {label} both bring a "
                                         f"{'fin' if single == 'fin' else 'coolant stream'}; "
                                         "a cell can take one of each")
                    owner[single] = label
                    setattr(out, single, value)
        return out


def combine(*designs) -> Combined:
    """Several designs on one cell: ``combine(edge_plate(...), tab_cooling(...))`` (or ``a + b``)."""
    return Combined(tuple(designs))

