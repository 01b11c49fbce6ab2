"""One-dimensional through-plane conduction used by the in-plane thermal field.

The in-plane field carries the through-thickness *mean* temperature of the
stack. Heat generated uniformly through the thickness ``L`` leaves through
the faces that have a heat path; the plane where the through-plane gradient
vanishes sits at depth ``d_f`` below face ``f``. Per the plane wall with
uniform generation (Incropera & DeWitt, *Fundamentals of Heat and Mass
Transfer*, §3.5, the parabolic profile of eq. 3.42 form), over the depth
``d`` from that plane to a face:

* core - surface   = q''' d**2 / (2 k)
* mean - surface   = q''' d**2 / (3 k) = q'' d / (3 k), so the mean-to-face
  resistance per unit area is ``d / (3 k)``;
* core - mean      = q''' d**2 / (6 k).

With both faces cooled symmetrically ``d = L/2`` (core - surface =
q''' L**2 / (8 k)); with one face cooled and the other adiabatic ``d = L``
(q''' L**2 / (2 k)). For two faces with unequal heat paths the depth is split
in proportion to each face's conductance per unit area (a first-order
estimate: exact for equal paths and in the one-sided limit). With no face
heat path at all (edge or tab cooling, adiabatic faces) heat flows in the
plane and the through-plane profile is taken flat (``d = 0``). The same
``d / (3 k)`` also holds for the slowest mode of a slab cooling without
generation (small Biot number expansion of Incropera & DeWitt §5.5).
"""

from __future__ import annotations

import numpy as np

#: Stand-in for an infinite face conductance when splitting the depth.
_BIG = 1e12


def face_depths(u_front, u_back, thickness_m: float, shape) -> tuple[np.ndarray, np.ndarray]:
    """Conduction depth below each face, split by face conductance per area.

    Parameters
    ----------
    u_front, u_back : scalar or ndarray
        Conductance per unit face area of each face's heat path (W m-2 K-1);
        0 where the face is adiabatic.
    thickness_m : float
        Stack thickness ``L``.
    shape : tuple
        Grid shape to broadcast to.

    Returns
    -------
    d_front, d_back : ndarray
        Depths (m) with ``d_front + d_back = L`` where any face is cooled, 0 elsewhere.
    """
    uf = np.minimum(np.broadcast_to(np.asarray(u_front, dtype=float), shape), _BIG)
    ub = np.minimum(np.broadcast_to(np.asarray(u_back, dtype=float), shape), _BIG)
    total = uf + ub
    safe = np.where(total > 0, total, 1.0)
    d_front = np.where(total > 0, thickness_m * uf / safe, 0.0)
    d_back = np.where(total > 0, thickness_m * ub / safe, 0.0)
    return d_front, d_back


def mean_to_face_resistance(depth_m, k_through_W_mK: float) -> np.ndarray:
    """Resistance per unit area from the mean temperature to a face, ``d / (3 k)`` (m2 K/W)."""
    return np.asarray(depth_m, dtype=float) / (3.0 * k_through_W_mK)


def core_surface_factor(d_front, d_back, k_through_W_mK: float) -> np.ndarray:
    """Core - surface difference per unit volumetric generation, ``d**2 / (2 k)``.

    The deeper of the two sides is used: it belongs to the face that takes
    more heat, whose surface is the coolest, so this is the larger difference.
    """
    d = np.maximum(d_front, d_back)
    return d**2 / (2.0 * k_through_W_mK)


def core_mean_factor(d_front, d_back, thickness_m: float, k_through_W_mK: float) -> np.ndarray:
    """Core - mean difference per unit volumetric generation.

    The mean over the whole thickness of the two parabolic pieces:
    ``sum_f (d_f / L) d_f**2 / (6 k)``.
    """
    return (d_front**3 + d_back**3) / (6.0 * k_through_W_mK * thickness_m)


def slab_profile(mean_C, q_front_W_m2, q_back_W_m2, thickness_m: float,
                 k_through_W_mK: float) -> dict:
    """Face temperatures and extremes of the through-plane profile at each point of the face.

    The 1-D slab of thickness ``L`` with a uniform volumetric source (Incropera &
    DeWitt, plane wall with generation, §3.5) has a parabolic profile; with the
    source taken as what leaves through the two faces, ``(q_front + q_back) / L``
    (generation less what is stored or carried in the plane, both spread
    through the thickness like the generation), the parabola is fixed by its
    mean and the two face fluxes:

    * ``T_front = T_mean - (2 q_front - q_back) L / (6 k)``
    * ``T_back  = T_mean - (2 q_back - q_front) L / (6 k)``
    * the vertex, ``q_front L / (q_front + q_back)`` below the front face,
      lies inside the slab when both faces carry heat the same way; it is
      ``T_front + q_front**2 L / (2 k (q_front + q_back))``.

    Symmetric cooling at steady state gives the mean-to-face difference
    ``q''' L**2 / 12 k`` and core-to-face ``q''' L**2 / 8 k``; one face cooled
    gives ``q''' L**2 / 3 k`` and ``q''' L**2 / 2 k`` with the free face at the
    core temperature -- the same numbers as :func:`core_mean_factor` and
    :func:`mean_to_face_resistance`.

    Parameters
    ----------
    mean_C : scalar or ndarray
        Through-thickness mean temperature.
    q_front_W_m2, q_back_W_m2 : scalar or ndarray
        Heat flux leaving the cell through each face (negative when heat enters).
    thickness_m, k_through_W_mK : float
        Stack thickness and through-plane conductivity.

    Returns
    -------
    dict
        ``front``, ``back`` (face temperatures), ``max`` and ``min`` (hottest
        and coldest point through the thickness), arrays broadcast together.
    """
    T, qf, qb = np.broadcast_arrays(*(np.asarray(v, dtype=float)
                                      for v in (mean_C, q_front_W_m2, q_back_W_m2)))
    scale = thickness_m / (6.0 * k_through_W_mK)
    front = T - (2.0 * qf - qb) * scale
    back = T - (2.0 * qb - qf) * scale
    total = qf + qb
    inside = qf * qb > 0.0  # same sign, both nonzero: the vertex is between the faces
    safe = np.where(inside, total, 1.0)
    vertex = front + 3.0 * scale * qf**2 / safe  # q_f^2 L / (2 k (q_f + q_b))
    hot = np.maximum(front, back)
    cold = np.minimum(front, back)
    return {"front": front, "back": back,
            "max": np.where(inside & (total > 0), np.maximum(hot, vertex), hot),
            "min": np.where(inside & (total < 0), np.minimum(cold, vertex), cold)}


def settling_time_s(depth_m: float, k_through_W_mK: float, heat_capacity_J_m3K: float) -> float:
    """Time constant of the slowest mode of the through-plane profile, ``d**2 / (pi**2 alpha)``.

    A slab of depth ``d`` (from the plane of zero gradient to a cooled face) whose face flux or
    generation changes at once reaches the parabolic profile through the series of Carslaw &
    Jaeger, *Conduction of Heat in Solids*, 2nd ed. (1959), §3.3 (slab with a constant flux at
    one face; from memory), whose slowest term decays with this time constant.
    """
    if depth_m <= 0.0:
        return 0.0
    return depth_m**2 * heat_capacity_J_m3K / (np.pi**2 * k_through_W_mK)


#: A falling elevation decays at most this many times slower than a rising one builds: the
#: series of Carslaw & Jaeger at the zero-gradient plane stays below min(1, 1.22 exp(-t/tau))
#: (sum of its terms at t = 0 is pi**2/12), which exp(-t/(2 tau)) bounds from above.
_SLOW_DECAY = 2.0


def settle(time_s, offset, tau_s: float, hotter_is_safe: bool = True) -> np.ndarray:
    """An offset through the thickness (quasi-steady, per record) brought in with the slab's lag.

    ``offset`` is the quasi-steady figure less its reference (e.g. the hottest point less the
    mean field's hottest). The profile starts flat (the runs start at one temperature) and
    approaches the quasi-steady one with ``tau_s``; toward the unsafe side (a falling elevation
    when hotter is the safe side) it moves ``_SLOW_DECAY`` times slower. At the plane of zero
    gradient (the core, an adiabatic face) the slab's own series moves slower than this in both
    directions, so the settled figure stays on the safe side of the exact one while removing
    the quasi-steady figure's jump at the start (a cell at rest shown hotter than it is).
    """
    target = np.asarray(offset, dtype=float)
    if target.size == 0 or tau_s <= 0.0:
        return target.copy()
    dt = np.diff(np.asarray(time_s, dtype=float), prepend=float(time_s[0])).clip(min=0.0)
    fast = np.exp(-dt / tau_s).tolist()  # per record; a plain loop on floats (a few per step)
    slow = np.exp(-dt / (_SLOW_DECAY * tau_s)).tolist()
    sign = 1.0 if hotter_is_safe else -1.0
    out = []
    value = 0.0
    for goal, f, g in zip(target.tolist(), fast, slow, strict=True):
        value = goal + (value - goal) * (f if sign * (goal - value) > 0.0 else g)
        out.append(value)
    return np.array(out)


def settle_extremes(time_s, mean_max, mean_min, figures: dict, tau_s: float,
                    cooled: dict) -> dict:
    """The through-thickness figures of a run with the settling lag (:func:`settle`).

    ``figures``: per record ``hottest``, ``coldest``, ``front_max``, ``front_min``,
    ``back_max``, ``back_min``, ``through_difference`` and optionally ``core_difference``
    (degC or K); ``cooled``: face -> whether it has a heat path. The figures of a cooled face
    stay quasi-steady (there the slab's series moves faster than one exponential, and the
    quasi-steady figure is the safe bound); interior points and adiabatic faces settle.
    """
    tmax = np.asarray(mean_max, dtype=float)
    tmin = np.asarray(mean_min, dtype=float)
    f = {k: np.asarray(v, dtype=float) for k, v in figures.items()}
    out = dict(f)
    for face in ("front", "back"):
        if not cooled.get(face, False):
            out[f"{face}_max"] = tmax + settle(time_s, f[f"{face}_max"] - tmax, tau_s, True)
            out[f"{face}_min"] = tmin + settle(time_s, f[f"{face}_min"] - tmin, tau_s, False)
    hot = [tmax + settle(time_s, f["hottest"] - tmax, tau_s, True)]
    cold = [tmin + settle(time_s, f["coldest"] - tmin, tau_s, False)]
    for face in ("front", "back"):
        if cooled.get(face, False):
            hot.append(f[f"{face}_max"])
            cold.append(f[f"{face}_min"])
    # the hottest point anywhere is never below the mean field's hottest (nor the coldest above)
    out["hottest"] = np.maximum(np.maximum.reduce(hot), tmax)
    out["coldest"] = np.minimum(np.minimum.reduce(cold), tmin)
    out["through_difference"] = np.minimum(f["through_difference"],
                                           out["hottest"] - out["coldest"])
    if "core_difference" in f:
        out["core_difference"] = settle(time_s, f["core_difference"], tau_s, True)
    return out
