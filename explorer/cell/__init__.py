"""Cell definition: the file format, the loader and the derived properties.

* :func:`load_cell` — read and validate a cell TOML file (or a demo cell by name).
* :func:`cell_from_text`, :func:`cell_from_dict` — the same from TOML text or a mapping.
* :func:`list_demo_cells` — names of the bundled demo cells and their paths.
* :func:`from_datasheet` — a complete cell from data-sheet values and a chemistry template.
* :mod:`explorer.cell.model` — the :class:`Cell` dataclasses (SI units).
* :mod:`explorer.cell.schema` — the file format's tables and keys.
* :func:`summary`, :func:`summary_text` — key figures with units for reports.
* :mod:`explorer.cell.derived` — capacities, foils, mass, stack properties.
"""

from explorer.cell.derived import ocv
from explorer.cell.loader import (
    CellFileNotFoundError,
    cell_from_dict,
    cell_from_text,
    list_demo_cells,
    load_cell,
)
from explorer.cell.model import (
    Cell,
    Collector,
    Derived,
    Electrode,
    Electrolyte,
    Geometry,
    Separator,
    Tab,
    ThermalOverrides,
)
from explorer.cell.summary import summary, summary_text

__all__ = [
    "load_cell",
    "list_demo_cells",
    "cell_from_text",
    "cell_from_dict",
    "from_datasheet",
    "ocv",
    "summary",
    "summary_text",
    "CellFileNotFoundError",
    "Cell",
    "Collector",
    "Derived",
    "Electrode",
    "Electrolyte",
    "Geometry",
    "Separator",
    "Tab",
    "ThermalOverrides",
]


def __getattr__(name):
    # the data-sheet builder loads on first use (it is not needed to read a cell file)
    if name == "from_datasheet":
        from explorer.cell.datasheet import from_datasheet

        return from_datasheet
    raise AttributeError(f"module 'explorer.cell' has no attribute {name!r}")
