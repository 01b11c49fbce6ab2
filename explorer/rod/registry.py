"""The rod models by name: ``MODELS`` and :func:`make_rod`."""

from __future__ import annotations

from explorer.rod.dfn import DFN
from explorer.rod.mesh import RodMesh
from explorer.rod.spm import SPM
from explorer.rod.spme import SPMe
from explorer.validators import check_choice

__all__ = ["MODELS", "make_rod", "shared_rod"]

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


_SHARED: dict = {}  # shared_rod: (name, params, mesh) -> model
_SHARED_SIZE = 16


def shared_rod(name: str, params, mesh=None):
    """:func:`make_rod`, kept and handed out again for the same model, parameters and mesh.

    A rod model holds no run state (the state travels with the caller; what it keeps are
    caches of its step operators, functions of the step and temperature), so one can serve
    every run of a cell: a sizing, a sweep or the app runs the same cell many times, and
    building the model costs as much as a short run's first dozen steps. Parameters that
    cannot be hashed (a curve object of the caller's) get a new model each time.
    """
    key = check_choice("electrochemistry", name, tuple(MODELS))
    try:
        k = (key, params, RodMesh.coerce(mesh))
        rod = _SHARED.get(k)
    except TypeError:
        return make_rod(key, params, mesh)
    if rod is None:
        if len(_SHARED) >= _SHARED_SIZE:
            _SHARED.clear()
        rod = _SHARED[k] = make_rod(key, params, mesh)
    return rod
