"""Cooling hardware and the heat paths it gives a cell.

Designs (what users build; each gives ``sinks(cell, grid, position=None)``,
``parameters()``, ``replace(**changes)``, ``describe()``, ``hydraulics()``
and ``positions_to_check()``, and designs add up with ``+``):

* :func:`convection` -- both faces to an ambient at a fixed coefficient.
* :func:`face_plate` -- a plate under one or both faces, through a TIM.
* :func:`edge_plate` -- a plate at an edge, with or without a fin sheet.
* :func:`tab_cooling` -- the tabs conduct to busbars at a set temperature.
* :func:`combine` -- several of the above on one cell.

Plates (the ``plate`` of a face or edge design):

* :func:`cold_plate` -- coolant (water, ethylene/propylene glycol mixtures
  from CoolProp), flow, inlet temperature and channel geometry; laminar,
  transition and turbulent channel correlations, pressure drop, pump power.
* :func:`fixed_sink` -- a given sink temperature and surface coefficient,
  no hydraulics.

Building blocks: :mod:`explorer.cooling.coolant` (properties),
:mod:`explorer.cooling.channels` (correlations), :mod:`explorer.cooling.plate`.

Examples
--------
>>> from explorer import cooling
>>> plate = cooling.cold_plate("eg50", flow_L_min=5.0, inlet_C=25.0, cells_per_plate=12)
>>> design = cooling.edge_plate(plate, edge="bottom", fin_mm=1.0) + cooling.tab_cooling(busbar_C=30.0)
>>> design.positions_to_check()
[0, 5, 11]
"""

from explorer.cooling.coolant import Coolant, CoolantProperties, get_coolant
from explorer.cooling.designs import (
    Combined,
    Convection,
    EdgePlate,
    FacePlate,
    TabCooling,
    combine,
    convection,
    edge_plate,
    face_plate,
    tab_cooling,
)
from explorer.cooling.plate import ColdPlate, FixedSink, cold_plate, fixed_sink

__all__ = [
    "convection",
    "cold_plate",
    "fixed_sink",
    "face_plate",
    "edge_plate",
    "tab_cooling",
    "combine",
    "get_coolant",
    "Convection",
    "ColdPlate",
    "FixedSink",
    "FacePlate",
    "EdgePlate",
    "TabCooling",
    "Combined",
    "Coolant",
    "CoolantProperties",
]
