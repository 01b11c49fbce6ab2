"""Tab material and series resistance, shared by the collector and thermal models."""

from __future__ import annotations

from explorer.validators import InputError

__all__ = ["tab_solid", "tab_resistance_ohm"]


def tab_solid(tab):
    """The ``explorer.materials.SOLIDS`` entry of a tab's material, with a clear error."""
    from explorer.materials import SOLIDS

    if tab.material not in SOLIDS:
        valid = ", ".join(repr(k) for k in SOLIDS)
        raise InputError(f"`tab {tab.name!r} material`: expected one of {valid}, "
                         f"got {tab.material!r}")
    return SOLIDS[tab.material]


def tab_resistance_ohm(tab) -> float:
    """Series resistance of a tab's free length plus its weld (ohm).

    ``free_length / (sigma * width * thickness) + weld_resistance`` with
    ``sigma`` the electrical conductivity of the tab material.

    Raises
    ------
    InputError
        For a non-positive width or thickness, a negative free length or weld
        resistance, or an unknown material.
    """
    sigma = tab_solid(tab).electrical_conductivity_S_m
    for field, value in (("width_m", tab.width_m), ("thickness_m", tab.thickness_m)):
        if not (value > 0):
            raise InputError(f"`tab {tab.name!r} {field}`: expected a value > 0, got {value!r}")
    if not (tab.free_length_m >= 0) or not (tab.weld_resistance_ohm >= 0):
        raise InputError(
            f"tab {tab.name!r}: expected free_length_m >= 0 and weld_resistance_ohm >= 0, "
            f"got {tab.free_length_m!r} and {tab.weld_resistance_ohm!r}")
    if not (sigma > 0):
        raise InputError(f"`tab {tab.name!r} material`: expected an electrical conductor, "
                         f"got {tab.material!r} (conductivity {sigma!r} S/m)")
    return tab.free_length_m / (sigma * tab.width_m * tab.thickness_m) + tab.weld_resistance_ohm
