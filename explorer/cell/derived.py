"""Properties computed from a cell definition: capacities, foils, mass, stack properties.

Construction assumed (common practice for stacked pouch cells): double-sided
electrodes alternate, negatives outermost. With ``N`` unit layers (one negative
coating, one separator, one positive coating each) there are ``N // 2 + 1``
negative foils and ``ceil(N / 2)`` positive foils. For even ``N`` the two
outermost negative foils carry a coating on their inner face only; for odd
``N`` one end of the stack is a positive foil. Coatings that face no
counter-electrode are not built (not counted in mass or capacity).
"""

from __future__ import annotations

import math

import numpy as np

from explorer.cell.model import (
    Collector,
    Derived,
    Electrode,
    Electrolyte,
    Geometry,
    Separator,
    ThermalOverrides,
)
from explorer.materials import FARADAY, OCP, SOLIDS

__all__ = ["compute_derived", "electrode_capacity_Ah", "foil_counts", "ocv",
           "stack_layers", "layers_thickness_m", "inplane_sheet_conductance_W_K"]


def electrode_capacity_Ah(electrode: Electrode, area_m2: float, unit_layers: int,
                          sto_span: float | None = None) -> float:
    """Charge an electrode holds between two stoichiometries (Faraday's law), in Ah.

    ``Q = F * c_max * eps_active * L * A * N * |span| / 3600`` with ``A`` one face of
    the coated area and ``N`` coating layers. ``sto_span=None`` uses the
    electrode's SOC window ``|sto_100 - sto_0|``; ``1.0`` gives full lithiation.
    """
    if sto_span is None:
        sto_span = abs(electrode.stoichiometry_100 - electrode.stoichiometry_0)
    return (FARADAY * electrode.max_concentration_mol_m3 * electrode.active_fraction
            * electrode.thickness_m * area_m2 * unit_layers * sto_span / 3600.0)


def foil_counts(unit_layers: int) -> tuple[int, int]:
    """(negative foils, positive foils) for the negatives-outermost construction."""
    return unit_layers // 2 + 1, math.ceil(unit_layers / 2)


def layers_thickness_m(geometry: Geometry, neg_cc: Collector, pos_cc: Collector,
                       negative: Electrode, positive: Electrode, separator: Separator) -> float:
    """Thickness of the electrode stack plus both pouch walls (no gaps, no swelling)."""
    n = geometry.unit_layers
    n_neg, n_pos = foil_counts(n)
    return (n * (negative.thickness_m + separator.thickness_m + positive.thickness_m)
            + n_neg * neg_cc.thickness_m + n_pos * pos_cc.thickness_m
            + 2 * geometry.pouch_foil_thickness_m)


def inplane_sheet_conductance_W_K(geometry: Geometry, neg_cc: Collector, pos_cc: Collector,
                                  negative: Electrode, positive: Electrode,
                                  separator: Separator) -> float:
    """In-plane conductance of the whole cell per square, ``sum(k_i t_i)`` in W/K.

    Layers conduct in parallel along the plane (e.g. Incropera & DeWitt, Fundamentals of
    Heat and Mass Transfer, ch. 3: parallel conduction paths add their conductances). Only
    the layers the file lists count: ``unit_layers`` coatings and separators, the foils
    actually built (:func:`foil_counts`) and the two pouch walls (laminate conductivity);
    thickness the layers do not fill (gaps, swelling) conducts nothing.
    """
    n = geometry.unit_layers
    n_neg, n_pos = foil_counts(n)
    return float(
        n * (negative.thickness_m * negative.thermal_conductivity_W_mK
             + separator.thickness_m * separator.thermal_conductivity_W_mK
             + positive.thickness_m * positive.thermal_conductivity_W_mK)
        + n_neg * neg_cc.thickness_m * SOLIDS[neg_cc.material].thermal_conductivity_W_mK
        + n_pos * pos_cc.thickness_m * SOLIDS[pos_cc.material].thermal_conductivity_W_mK
        + 2 * geometry.pouch_foil_thickness_m * SOLIDS["pouch_laminate"].thermal_conductivity_W_mK)


def stack_layers(neg_cc: Collector, pos_cc: Collector, negative: Electrode,
                 positive: Electrode, separator: Separator):
    """Thicknesses and conductivities of the repeating unit, per unit layer.

    One unit layer owns one negative coating, one separator, one positive coating
    and half of each foil (a foil serves the two unit layers on its faces).
    Returns two arrays ``(thickness_m, conductivity_W_mK)``.
    """
    t = np.array([neg_cc.thickness_m / 2, negative.thickness_m, separator.thickness_m,
                  positive.thickness_m, pos_cc.thickness_m / 2])
    k = np.array([SOLIDS[neg_cc.material].thermal_conductivity_W_mK,
                  negative.thermal_conductivity_W_mK, separator.thermal_conductivity_W_mK,
                  positive.thermal_conductivity_W_mK,
                  SOLIDS[pos_cc.material].thermal_conductivity_W_mK])
    return t, k


def ocv(negative: Electrode, positive: Electrode, soc):
    """Full-cell open-circuit voltage at 25 degC, vectorised over ``soc`` in [0, 1].

    Each electrode's stoichiometry moves linearly between its ``stoichiometry_0``
    (SOC 0) and ``stoichiometry_100`` (SOC 1).
    """
    soc = np.asarray(soc, dtype=float)
    x_n = negative.stoichiometry_0 + soc * (negative.stoichiometry_100 - negative.stoichiometry_0)
    x_p = positive.stoichiometry_0 + soc * (positive.stoichiometry_100 - positive.stoichiometry_0)
    return OCP[positive.ocp].potential(x_p) - OCP[negative.ocp].potential(x_n)


def compute_derived(geometry: Geometry, negative_collector: Collector,
                    positive_collector: Collector, negative: Electrode, positive: Electrode,
                    separator: Separator, electrolyte: Electrolyte,
                    thermal: ThermalOverrides) -> Derived:
    """Fill :class:`~explorer.cell.model.Derived` from the validated parts of a cell.

    Definitions
    -----------
    * capacities: :func:`electrode_capacity_Ah` over each SOC window; the cell's
      theoretical capacity is the smaller of the two (the usable window).
    * N/P ratio: negative capacity at full lithiation (stoichiometry 0 to 1) over
      the positive capacity between full lithiation and its charged state
      (``1 - stoichiometry_100``), i.e. graphite sites available per lithium the
      positive gives up on a full charge. Values a little above 1 are usual.
    * mass: coatings (dry), separators, electrolyte filling the pores of coatings
      and separators, foils over the coated area, the pouch laminate over both
      faces and the four side walls, and the free length of the tabs. Not
      included: sealing flanges, uncoated foil outside the coated area, tab
      sealant, excess electrolyte.
    * in-plane conductivity: the effective value over the whole stated cell thickness,
      :func:`inplane_sheet_conductance_W_K` (layers in parallel, only those listed) divided
      by ``geometry.stack_thickness_m``, so that conductivity x thickness, what the in-plane
      models use, is the listed layers' conductance (it used to be the repeating unit's mean
      times the whole thickness, pouch walls and unfilled thickness included: 4-8 % too
      strong on the demo cells).
    * through-plane conductivity over the repeating unit including foils
      (:func:`stack_layers`), layers in series (harmonic mean).
    * heat capacity: the sum of mass times specific heat over the same parts as
      the mass.
    * energy: theoretical capacity times the mean full-cell OCV over SOC 0..1 at
      25 degC (Gauss-Legendre quadrature).
    """
    n = geometry.unit_layers
    area = geometry.width_m * geometry.height_m
    q_neg = electrode_capacity_Ah(negative, area, n)
    q_pos = electrode_capacity_Ah(positive, area, n)
    q_cell = min(q_neg, q_pos)
    np_ratio = (electrode_capacity_Ah(negative, area, n, 1.0)
                / electrode_capacity_Ah(positive, area, n, 1.0 - positive.stoichiometry_100))

    n_neg, n_pos = foil_counts(n)
    cu, al = SOLIDS[negative_collector.material], SOLIDS[positive_collector.material]
    r_neg = 1.0 / (cu.electrical_conductivity_S_m * negative_collector.thickness_m * n_neg)
    r_pos = 1.0 / (al.electrical_conductivity_S_m * positive_collector.thickness_m * n_pos)

    # masses (kg) and specific heats (J/kg/K) of every part
    pore_volume = area * n * (negative.thickness_m * negative.porosity
                              + positive.thickness_m * positive.porosity
                              + separator.thickness_m * separator.porosity)
    pouch = SOLIDS["pouch_laminate"]
    pouch_area = 2 * area + 2 * (geometry.width_m + geometry.height_m) * geometry.stack_thickness_m
    parts = [
        (area * n * negative.thickness_m * negative.density_kg_m3, negative.specific_heat_J_kgK),
        (area * n * positive.thickness_m * positive.density_kg_m3, positive.specific_heat_J_kgK),
        (area * n * separator.thickness_m * separator.density_kg_m3,
         separator.specific_heat_J_kgK),
        (pore_volume * electrolyte.density_kg_m3, electrolyte.specific_heat_J_kgK),
        (area * n_neg * negative_collector.thickness_m * cu.density_kg_m3, cu.specific_heat_J_kgK),
        (area * n_pos * positive_collector.thickness_m * al.density_kg_m3, al.specific_heat_J_kgK),
        (pouch_area * geometry.pouch_foil_thickness_m * pouch.density_kg_m3,
         pouch.specific_heat_J_kgK),
    ]
    for tab in geometry.tabs:
        m = SOLIDS[tab.material]
        parts.append((tab.width_m * tab.thickness_m * tab.free_length_m * m.density_kg_m3,
                      m.specific_heat_J_kgK))
    masses = np.array([p[0] for p in parts])
    cps = np.array([p[1] for p in parts])
    mass = float(masses.sum())
    heat_capacity = float(masses @ cps)

    t, k = stack_layers(negative_collector, positive_collector, negative, positive, separator)
    k_in = inplane_sheet_conductance_W_K(geometry, negative_collector, positive_collector,
                                         negative, positive, separator) / geometry.stack_thickness_m
    k_through = float(t.sum() / (t / k).sum())

    nodes, weights = np.polynomial.legendre.leggauss(64)
    soc = 0.5 * (nodes + 1.0)
    mean_ocv = float(0.5 * weights @ ocv(negative, positive, soc))

    def used(override, computed):
        return computed if override is None else override

    return Derived(
        electrode_area_m2=area,
        active_area_m2=area * n,
        theoretical_capacity_Ah=q_cell,
        negative_capacity_Ah=q_neg,
        positive_capacity_Ah=q_pos,
        np_ratio=np_ratio,
        mass_kg=mass,
        energy_Wh=q_cell * mean_ocv,
        negative_foils=n_neg,
        positive_foils=n_pos,
        negative_sheet_resistance_ohm=r_neg,
        positive_sheet_resistance_ohm=r_pos,
        inplane_conductivity_W_mK=used(thermal.inplane_conductivity_W_mK, k_in),
        throughplane_conductivity_W_mK=used(thermal.throughplane_conductivity_W_mK, k_through),
        heat_capacity_J_K=used(thermal.heat_capacity_J_K, heat_capacity),
        computed_inplane_conductivity_W_mK=k_in,
        computed_throughplane_conductivity_W_mK=k_through,
        computed_heat_capacity_J_K=heat_capacity,
    )
