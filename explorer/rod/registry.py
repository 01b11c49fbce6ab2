"""The rod models by name: ``MODELS`` and :func:`make_rod`."""

from __future__ import annotations

from explorer.rod.dfn import DFN
from explorer.rod.spm import SPM
from explorer.rod.spme import SPMe
from explorer.validators import check_choice

__all__ = ["MODELS", "make_rod"]

MODELS = {"spm": SPM, "spme": SPMe, "dfn": DFN}


def make_rod(name: str, params, mesh=None):
    """Build the rod model registered as ``name`` (one of ``MODELS``).

    Parameters
    ----------
    name : {"spm", "spme", "dfn"}
    params : RodParameters
        e.g. ``RodParameters.from_cell(cell)``.
    mesh : None, RodMesh or dict, optional
        Mesh sizes (``shells``, ``negative``, ``separator``, ``positive``).

    Examples
    --------
    >>> from explorer.cell import load_cell
    >>> from explorer.rod import RodParameters, make_rod
    >>> rod = make_rod("spme", RodParameters.from_cell(load_cell("van_nmc_66ah")))
    >>> rod.name
    'spme'
    """
    key = check_choice("electrochemistry", name, tuple(MODELS))
    return MODELS[key](params, mesh)
