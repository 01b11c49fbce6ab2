"""Bulk properties of the solid (non-electrode) materials of a pouch cell at about 300 K."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Solid", "SOLIDS"]

_INCROPERA = ("Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, Table A.1 "
              "(thermophysical properties of selected metallic solids) at 300 K")
_CRC = "electrical resistivity at 20 degC from memory of the CRC Handbook of Chemistry and Physics"


@dataclass(frozen=True)
class Solid:
    """Thermal and electrical properties of one solid, SI units."""

    name: str
    electrical_conductivity_S_m: float
    thermal_conductivity_W_mK: float
    density_kg_m3: float
    specific_heat_J_kgK: float
    source: str


SOLIDS: dict[str, Solid] = {
    "copper": Solid("copper", 1 / 1.68e-8, 401.0, 8933.0, 385.0, f"{_INCROPERA} (pure copper); {_CRC}"),
    "aluminium": Solid("aluminium", 1 / 2.65e-8, 237.0, 2702.0, 903.0,
                       f"{_INCROPERA} (pure aluminum); {_CRC}"),
    "nickel": Solid("nickel", 1 / 6.99e-8, 90.7, 8900.0, 444.0, f"{_INCROPERA} (pure nickel); {_CRC}"),
    # nickel-plated copper tabs: the micrometre plating changes neither conduction nor mass
    "nickel_plated_copper": Solid("nickel_plated_copper", 1 / 1.68e-8, 401.0, 8933.0, 385.0,
                                  f"copper values ({_INCROPERA}; {_CRC}); plating neglected"),
    "stainless_steel_304": Solid("stainless_steel_304", 1 / 7.2e-7, 14.9, 7900.0, 477.0,
                                 f"{_INCROPERA} (AISI 304); {_CRC}"),
    # Pouch laminate (polyamide / aluminium / polypropylene): a layer-weighted estimate,
    # common practice, no single source; treated as an electrical insulator (its outer
    # polymer layers insulate the aluminium core).
    "pouch_laminate": Solid("pouch_laminate", 0.0, 0.5, 1500.0, 1300.0,
                            "layer-weighted estimate for a polyamide/aluminium/polypropylene "
                            "laminate, common practice"),
}
