"""Heat paths from a cell to its surroundings, as the in-plane thermal model sees them.

The cooling objects in :mod:`explorer.cooling` turn hardware (a convecting
face, a cold plate with its coolant, fins, interface material) into a
:class:`Sinks` for one cell; the thermal models in :mod:`explorer.inplane`
consume it. Everything here is SI except temperatures, which are in degC to
match the user-facing inputs (sink temperatures are only ever differenced).

Values may be scalars or arrays on the thermal grid:

* face quantities: scalar or an array of shape ``(ny, nx)`` (cell-centred),
* edge quantities: scalar or an array along the edge (``nx`` for
  bottom/top, ``ny`` for left/right).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

FACES = ("front", "back")
FLOW_DIRECTIONS = ("+x", "-x", "+y", "-y")

ArrayLike = float | np.ndarray


@dataclass
class FaceSink:
    """Convective/conductive exchange of one face with a sink temperature."""

    h_W_m2K: ArrayLike  # per unit face area
    temperature_C: ArrayLike


@dataclass
class EdgeSink:
    """Exchange of one edge with a sink, as a conductance per unit edge length."""

    conductance_W_mK: ArrayLike  # W per (m of edge length) per K
    temperature_C: ArrayLike
    layer: str = "cell"  # "cell" or "fin": which sheet the edge sink attaches to


@dataclass
class TabSink:
    """Exchange of one tab (through its busbar) with a sink."""

    conductance_W_K: float
    temperature_C: float


@dataclass
class Fin:
    """An aluminium (or other) sheet on one face that bends onto an edge.

    Modelled as a second in-plane sheet under the cell face, coupled to it by
    ``contact_W_m2K``; its edge sink is the ``EdgeSink`` with ``layer="fin"``.
    """

    face: str  # "front" | "back"
    thickness_m: float
    conductivity_W_mK: float
    density_kg_m3: float
    specific_heat_J_kgK: float
    contact_W_m2K: float  # cell face to fin, interface material included
    edge: str  # the edge the fin bends onto


@dataclass
class CoolantStream:
    """Coolant that warms as it takes up heat along one sink.

    The sink temperature named by ``sink`` (a face name or an edge name, or
    several face names that share one coolant, e.g. both faces on one plate
    pair) is not fixed: it is the local coolant temperature plus nothing else (the
    wall-to-coolant resistance is already in that sink's h or conductance).
    The coolant enters at ``inlet_C`` raised by what ``upstream_cells`` cells
    (assumed to behave like this one) have already put into it, flows in
    ``direction`` and warms by the heat this cell rejects into ``sink``
    divided by ``capacity_rate_W_K`` (mass flow times specific heat of the
    share of coolant serving this cell).

    ``upstream_cells`` > 0 is an approximation: the cells before this one are
    taken to reject what this one rejects, at every moment. The cells upstream
    run cooler and reject less, so it overstates the coolant reaching the cell
    somewhat (a cautious figure for the last cell, but no figure for the
    others and no cell-to-cell spread). :func:`explorer.simulate_module` runs
    every cell on the coolant path, each fed the one before's outlet, from
    sinks with ``upstream_cells`` = 0 whose inlet the thermal models set per
    step (``set_coolant_inlet_C``, ``step_series``).
    """

    sink: str | tuple[str, ...]  # one sink, or several sharing the coolant (both faces)
    direction: str  # one of FLOW_DIRECTIONS
    capacity_rate_W_K: float
    inlet_C: float
    upstream_cells: int = 0

    @property
    def sink_names(self) -> tuple[str, ...]:
        return (self.sink,) if isinstance(self.sink, str) else tuple(self.sink)

    @property
    def name(self) -> str:
        """The name its heat flow is reported under ("front+back" for two faces)."""
        return "+".join(self.sink_names)


@dataclass
class Sinks:
    """All heat paths of one cell. An empty Sinks is an adiabatic cell."""

    faces: dict[str, FaceSink] = field(default_factory=dict)
    edges: dict[str, EdgeSink] = field(default_factory=dict)
    tabs: dict[str, TabSink] = field(default_factory=dict)
    fin: Fin | None = None
    coolant: CoolantStream | None = None

    @property
    def adiabatic(self) -> bool:
        return not (self.faces or self.edges or self.tabs)
