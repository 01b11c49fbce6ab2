"""Material library: electrode potentials, electrolyte transport, solid properties.

Tables (keys are what cell files name):

* :data:`OCP` — open-circuit potential and entropic coefficient per electrode material
  (``"graphite"``, ``"nmc"``, ``"lfp"``).
* :data:`ELECTROLYTES` — concentration-dependent conductivity and diffusivity at 298.15 K.
* :data:`SOLIDS` — collector, tab and pouch materials.

Helpers: :func:`arrhenius` (temperature factor) and :func:`lookup` (a table entry by key,
with an error listing the valid keys).
"""

from __future__ import annotations

from explorer.materials.arrhenius import FARADAY, GAS_CONSTANT, arrhenius
from explorer.materials.electrolytes import ELECTROLYTES, ElectrolyteProperty
from explorer.materials.ocp import OCP, OpenCircuitPotential
from explorer.materials.solids import SOLIDS, Solid
from explorer.validators import InputError

__all__ = [
    "OCP",
    "ELECTROLYTES",
    "SOLIDS",
    "TABLES",
    "arrhenius",
    "lookup",
    "OpenCircuitPotential",
    "ElectrolyteProperty",
    "Solid",
    "FARADAY",
    "GAS_CONSTANT",
]

TABLES = {"OCP": OCP, "ELECTROLYTES": ELECTROLYTES, "SOLIDS": SOLIDS}


def lookup(table_name: str, key: str, where: str = ""):
    """Return ``TABLES[table_name][key]`` or raise :class:`~explorer.validators.InputError`.

    Parameters
    ----------
    table_name : {"OCP", "ELECTROLYTES", "SOLIDS"}
        Which table (case-insensitive).
    key : str
        The entry's key.
    where : str, optional
        Where the key came from, e.g. ``"cell.toml: negative.ocp"``; put in the message.

    Examples
    --------
    >>> lookup("SOLIDS", "copper").thermal_conductivity_W_mK
    401.0
    """
    table = TABLES.get(str(table_name).upper())
    if table is None:
        raise InputError(f"`table_name`: expected one of {', '.join(map(repr, TABLES))}, "
                         f"got {table_name!r}")
    if key not in table:
        valid = ", ".join(repr(k) for k in table)
        at = f"{where}: " if where else ""
        raise InputError(f"{at}unknown {table_name.lower()} key {key!r}; valid keys: {valid}")
    return table[key]
