"""Heat transfer and friction in straight rectangular coolant channels.

Correlations (Darcy friction factor ``f`` throughout; ``Re`` and ``Nu`` on the
hydraulic diameter ``D_h = 4 A / P``):

* Laminar, fully developed (Re < 2300): Shah & London (1978), *Laminar Flow
  Forced Convection in Ducts*, polynomial fits in the aspect ratio
  ``alpha = short side / long side`` for

  - ``f Re = 96 (1 - 1.3553 a + 1.9467 a^2 - 1.7012 a^3 + 0.9564 a^4 - 0.2537 a^5)``,
  - ``Nu_H1 = 8.235 (1 - 2.0421 a + 3.0853 a^2 - 2.4765 a^3 + 1.0578 a^4 - 0.1861 a^5)``,
  - ``Nu_T = 7.541 (1 - 2.610 a + 4.970 a^2 - 5.119 a^3 + 2.702 a^4 - 0.548 a^5)``.

  The cold plate uses **H1** (axially uniform heat flux, peripherally uniform
  wall temperature): the heat from the cells enters roughly uniformly along
  the channel, and an aluminium plate is conductive enough to keep each
  cross-section's wall nearly isothermal. ``T`` (uniform wall temperature) is
  available for comparison. Fully developed values are used without an
  entrance-region enhancement, which is conservative (developing flow
  transfers more heat).
* Turbulent (Re >= 1e4): Gnielinski (1976), Int. Chem. Eng. 16, 359
  (Incropera & DeWitt, *Fundamentals of Heat and Mass Transfer*, 6th ed. 2007,
  eq. 8.62), with ``f`` from Colebrook (1939) for the wall roughness; stated
  validity 3000 <= Re <= 5e6, 0.5 <= Pr <= 2000.
* Transition (2300 <= Re < 1e4), heat transfer: Gnielinski's linear
  interpolation in Re between the laminar value at 2300 and the turbulent
  value at 1e4 (Gnielinski 1995, Forsch. Ingenieurwes. 61, 240; also VDI Heat
  Atlas 2010, G1 -- from memory). Friction: linear blend in Re between the
  laminar law and Colebrook from 2300 to 4000 (common practice). Results in
  transition carry a warning: the real behaviour depends on the inlet.
* Minor losses: sharp entrance from a manifold K = 0.5, exit into a manifold
  K = 1.0 (White, *Fluid Mechanics*, 7th ed. 2011, Sec. 6.9, from memory; the
  same values as ``fluids.fittings.entrance_sharp('Crane')`` and
  ``exit_normal()``), 180-degree return bend K = 1.5 (White Table 6.5, threaded
  return bend, from memory; machined U-turns in plates fall in 1-2.5, common
  practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from explorer.validators import InputError, check_nonnegative, check_positive

__all__ = [
    "RE_LAMINAR",
    "RE_TURBULENT",
    "RE_FRICTION_TURBULENT",
    "K_ENTRANCE",
    "K_EXIT",
    "K_BEND_180",
    "rectangular_section",
    "fre_laminar_rectangular",
    "nusselt_laminar_rectangular",
    "colebrook",
    "gnielinski",
    "darcy_friction",
    "nusselt",
    "flow_regime",
    "ChannelFlow",
    "channel_flow",
]

RE_LAMINAR = 2300.0  # end of laminar flow
RE_TURBULENT = 1.0e4  # start of fully turbulent heat transfer (Gnielinski 1995)
RE_FRICTION_TURBULENT = 4000.0  # end of the friction-factor blend
RE_MAX = 5.0e6  # top of Gnielinski's stated range
RE_LOW_WARN = 100.0  # below: flow distribution between parallel channels is fragile
PR_RANGE = (0.5, 2000.0)  # Gnielinski's stated Prandtl range
K_ENTRANCE = 0.5
K_EXIT = 1.0
K_BEND_180 = 1.5


def rectangular_section(width_m: float, height_m: float) -> tuple[float, float, float, float]:
    """Area (m2), wetted perimeter (m), hydraulic diameter (m) and aspect ratio (<= 1)."""
    w = check_positive("channel_width_mm", width_m * 1e3, "mm") / 1e3
    h = check_positive("channel_height_mm", height_m * 1e3, "mm") / 1e3
    area = w * h
    perimeter = 2.0 * (w + h)
    return area, perimeter, 4.0 * area / perimeter, min(w, h) / max(w, h)


def _aspect(aspect):
    a = np.asarray(aspect, dtype=float)
    if np.any((a < 0) | (a > 1)) or not np.all(np.isfinite(a)):
        raise InputError(f"`aspect`: expected short/long side ratio in [0, 1], got {aspect!r}")
    return a


def fre_laminar_rectangular(aspect):
    """Darcy ``f Re`` for fully developed laminar flow (Shah & London 1978).

    96 for parallel plates (aspect 0), 56.9 for a square duct.
    """
    a = _aspect(aspect)
    return 96.0 * (1 - 1.3553 * a + 1.9467 * a**2 - 1.7012 * a**3 + 0.9564 * a**4 - 0.2537 * a**5)


def nusselt_laminar_rectangular(aspect, boundary: str = "H1"):
    """Fully developed laminar Nusselt number of a rectangular duct (Shah & London 1978).

    Parameters
    ----------
    aspect : float or array
        Short side over long side, 0 (parallel plates) to 1 (square).
    boundary : {"H1", "T"}
        ``"H1"``: axially uniform heat flux with peripherally uniform wall
        temperature; ``"T"``: uniform wall temperature.
    """
    a = _aspect(aspect)
    if boundary == "H1":
        return 8.235 * (1 - 2.0421 * a + 3.0853 * a**2 - 2.4765 * a**3 + 1.0578 * a**4 - 0.1861 * a**5)
    if boundary == "T":
        return 7.541 * (1 - 2.610 * a + 4.970 * a**2 - 5.119 * a**3 + 2.702 * a**4 - 0.548 * a**5)
    raise InputError(f"`boundary`: expected one of 'H1', 'T', got {boundary!r}")


def colebrook(reynolds, relative_roughness=0.0):
    """Darcy friction factor from the Colebrook (1939) equation, solved to 1e-12.

    ``1/sqrt(f) = -2 log10(e/(3.7 D) + 2.51/(Re sqrt(f)))``, by Newton's method
    on ``x = 1/sqrt(f)`` from the Swamee-Jain (1976) explicit start.
    """
    re = np.asarray(reynolds, dtype=float)
    ed = np.asarray(relative_roughness, dtype=float)
    a, b = ed / 3.7, 2.51 / re
    x = -2.0 * np.log10(a + 5.74 / re**0.9)  # Swamee-Jain start
    for _ in range(20):
        g = x + 2.0 * np.log10(a + b * x)
        dg = 1.0 + 2.0 * b / ((a + b * x) * math.log(10.0))
        step = g / dg
        x = x - step
        if np.all(np.abs(step) < 1e-12 * np.abs(x)):
            break
    return 1.0 / x**2


def gnielinski(reynolds, prandtl, friction_factor):
    """Turbulent Nusselt number, Gnielinski (1976) (Incropera & DeWitt eq. 8.62)."""
    re, pr, f = (np.asarray(v, dtype=float) for v in (reynolds, prandtl, friction_factor))
    return (f / 8.0) * (re - 1000.0) * pr / (1.0 + 12.7 * np.sqrt(f / 8.0) * (pr ** (2.0 / 3.0) - 1.0))


def flow_regime(reynolds: float) -> str:
    """'laminar' (< 2300), 'transition' (2300 to 1e4) or 'turbulent' (>= 1e4)."""
    if reynolds < RE_LAMINAR:
        return "laminar"
    return "transition" if reynolds < RE_TURBULENT else "turbulent"


def darcy_friction(reynolds: float, aspect: float, relative_roughness: float = 0.0) -> float:
    """Darcy friction factor: laminar Shah & London, Colebrook, linear blend 2300-4000."""
    re = check_positive("reynolds", reynolds)
    laminar = float(fre_laminar_rectangular(aspect)) / re
    if re <= RE_LAMINAR:
        return laminar
    turbulent = float(colebrook(re, relative_roughness))
    if re >= RE_FRICTION_TURBULENT:
        return turbulent
    w = (re - RE_LAMINAR) / (RE_FRICTION_TURBULENT - RE_LAMINAR)
    return (1.0 - w) * laminar + w * turbulent


def nusselt(reynolds: float, prandtl: float, aspect: float, relative_roughness: float = 0.0,
            boundary: str = "H1") -> float:
    """Mean Nusselt number over laminar, transition and turbulent flow (see module notes)."""
    re = check_positive("reynolds", reynolds)
    pr = check_positive("prandtl", prandtl)
    laminar = float(nusselt_laminar_rectangular(aspect, boundary))
    if re < RE_LAMINAR:
        return laminar

    def turbulent(r):
        return float(gnielinski(r, pr, colebrook(r, relative_roughness)))

    if re >= RE_TURBULENT:
        return turbulent(re)
    g = (re - RE_LAMINAR) / (RE_TURBULENT - RE_LAMINAR)
    return (1.0 - g) * laminar + g * turbulent(RE_TURBULENT)


@dataclass(frozen=True)
class ChannelFlow:
    """Flow, heat transfer and pressure drop of one straight rectangular channel."""

    velocity_m_s: float
    hydraulic_diameter_m: float
    aspect: float
    reynolds: float
    prandtl: float
    regime: str
    nusselt: float
    h_W_m2K: float  # channel wall to bulk coolant
    friction_factor: float  # Darcy
    pressure_drop_friction_Pa: float
    pressure_drop_minor_Pa: float
    minor_loss_coefficient: float
    warnings: tuple[str, ...] = field(default=())

    @property
    def pressure_drop_Pa(self) -> float:
        return self.pressure_drop_friction_Pa + self.pressure_drop_minor_Pa


def channel_flow(width_m: float, height_m: float, length_m: float, flow_m3_s: float, props,
                 roughness_m: float = 0.0, bends: int = 0, boundary: str = "H1") -> ChannelFlow:
    """Evaluate one channel carrying ``flow_m3_s`` of a coolant with properties ``props``.

    Parameters
    ----------
    width_m, height_m : float
        Channel cross-section.
    length_m : float
        Total flow length of the channel (all passes).
    flow_m3_s : float
        Volume flow through this channel.
    props : CoolantProperties
        From :meth:`explorer.cooling.coolant.Coolant.properties`.
    roughness_m : float
        Absolute wall roughness (only matters in turbulent flow).
    bends : int
        Number of 180-degree return bends along the channel.
    boundary : {"H1", "T"}
        Laminar thermal boundary condition (see the module notes).

    Returns
    -------
    ChannelFlow
        With ``warnings`` for transition, very low Re or out-of-range Re/Pr.
    """
    area, _, dh, aspect = rectangular_section(width_m, height_m)
    length = check_positive("length_mm", length_m * 1e3, "mm") / 1e3
    q = check_positive("flow per channel (m3/s)", flow_m3_s, "m3/s")
    rough = check_nonnegative("roughness_um", roughness_m * 1e6, "um") / 1e6
    v = q / area
    re = props.density_kg_m3 * v * dh / props.viscosity_Pa_s
    pr = props.prandtl
    ed = rough / dh
    regime = flow_regime(re)
    nu = nusselt(re, pr, aspect, ed, boundary)
    f = darcy_friction(re, aspect, ed)
    dyn = 0.5 * props.density_kg_m3 * v**2
    k_minor = K_ENTRANCE + K_EXIT + bends * K_BEND_180
    warnings = []
    if re < RE_LOW_WARN:
        warnings.append(
            f"very low Reynolds number {re:.0f} (< {RE_LOW_WARN:.0f}): flow may distribute unevenly "
            "between parallel channels; the fully developed laminar results assume it does not"
        )
    if regime == "transition":
        warnings.append(
            f"flow in transition (Re = {re:.0f}, between {RE_LAMINAR:.0f} and {RE_TURBULENT:.0f}): "
            "Nusselt interpolated after Gnielinski (1995); real heat transfer depends on inlet disturbances"
        )
    if re > RE_MAX:
        warnings.append(f"Reynolds number {re:.3g} beyond the Gnielinski range (<= {RE_MAX:.0e})")
    if re >= 3000.0 and not PR_RANGE[0] <= pr <= PR_RANGE[1]:
        warnings.append(f"Prandtl number {pr:.3g} outside the Gnielinski range {PR_RANGE}")
    return ChannelFlow(
        velocity_m_s=v,
        hydraulic_diameter_m=dh,
        aspect=aspect,
        reynolds=re,
        prandtl=pr,
        regime=regime,
        nusselt=nu,
        h_W_m2K=nu * props.conductivity_W_mK / dh,
        friction_factor=f,
        pressure_drop_friction_Pa=f * length / dh * dyn,
        pressure_drop_minor_Pa=k_minor * dyn,
        minor_loss_coefficient=k_minor,
        warnings=tuple(warnings),
    )
