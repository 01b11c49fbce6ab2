"""In-plane models over the pouch face: collector potentials and the thermal field.

* :class:`~explorer.inplane.collector.CollectorNetwork` -- both collector
  foils and their tabs, factorised once: series resistance, Joule maps,
  potentials for any current distribution.
* :class:`~explorer.inplane.thermal.PlaneThermal` -- the 2-D transient field
  with face, edge and tab sinks, a fin sheet and a warming coolant stream.
* :class:`~explorer.inplane.lumped.LumpedThermal` -- one temperature.
* :class:`~explorer.inplane.sinks.Sinks` -- the heat paths both consume.

The thermal-model contract is in :mod:`explorer.inplane.base`.
"""

from explorer.inplane.collector import CollectorNetwork
from explorer.inplane.grid import Grid
from explorer.inplane.lumped import LumpedThermal
from explorer.inplane.sinks import CoolantStream, EdgeSink, FaceSink, Fin, Sinks, TabSink
from explorer.inplane.thermal import PlaneThermal

__all__ = ["CollectorNetwork", "Grid", "LumpedThermal", "PlaneThermal", "Sinks", "FaceSink",
           "EdgeSink", "TabSink", "Fin", "CoolantStream"]
