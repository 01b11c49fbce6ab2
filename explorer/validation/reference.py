"""Outside references the checks compare against: handbook tables, exact solutions, and an
independent finite-element solver. Nothing here calls the models it checks.

Each table or formula names its source next to it; "from memory" marks values recalled rather
than copied from the printed page.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

# --- water: Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed. (2007),
# Table A.6 "Thermophysical properties of saturated water" (values from memory).
# T [K] -> (density = 1/v_f [kg/m3], cp [J/(kg K)], viscosity [Pa s], conductivity [W/(m K)], Pr)
# The rows below 290 K are left out: the conductivities recalled there (0.574, 0.582 W/(m K))
# sit 1.7-2.4 % above the IAPWS values, more than the recall of the other rows.
WATER_TABLE_A6 = {
    290.0: (1 / 1.001e-3, 4184.0, 1080e-6, 0.598, 7.56),
    300.0: (1 / 1.003e-3, 4179.0, 855e-6, 0.613, 5.83),
    310.0: (1 / 1.007e-3, 4178.0, 695e-6, 0.628, 4.62),
    320.0: (1 / 1.011e-3, 4180.0, 577e-6, 0.640, 3.77),
    330.0: (1 / 1.016e-3, 4184.0, 489e-6, 0.650, 3.15),
    340.0: (1 / 1.021e-3, 4188.0, 420e-6, 0.660, 2.66),
    350.0: (1 / 1.027e-3, 4195.0, 365e-6, 0.668, 2.29),
    360.0: (1 / 1.034e-3, 4203.0, 324e-6, 0.674, 2.02),
    370.0: (1 / 1.041e-3, 4214.0, 289e-6, 0.679, 1.80),
}
WATER_PROPERTIES = ("density", "specific heat", "viscosity", "conductivity", "Prandtl number")
WATER_UNITS = ("kg/m³", "J/(kg K)", "Pa s", "W/(m K)", "1")
#: relative tolerance per property: the table's own precision and the recall
WATER_TOLERANCE = (0.003, 0.005, 0.015, 0.015, 0.02)

# --- glycol: ASHRAE Handbook - Fundamentals (2009), Ch. 31 "Physical properties of secondary
# coolants (brines)" (values from memory, hence the wide tolerances).
# name -> (T degC, density, cp, viscosity, conductivity), relative tolerances
EG50_ASHRAE = (25.0, 1063.0, 3300.0, 3.4e-3, 0.39)
EG50_TOLERANCE = (0.01, 0.03, 0.2, 0.05)
# freezing points by mass fraction, degC, and the allowed difference in K
FREEZING_ASHRAE = {"eg50": (-36.5, 1.5), "pg30": (-12.7, 1.0)}

# --- laminar rectangular ducts: Shah & London, Laminar Flow Forced Convection in Ducts (1978),
# as reproduced in Incropera & DeWitt Table 8.1 (values from memory).
# b/a (long side over short side) -> (Nu_H1 uniform flux, Nu_T uniform wall temperature, f Re)
DUCT_TABLE_8_1 = {
    1.0: (3.61, 2.98, 57.0),
    1.43: (3.73, 3.08, 59.0),
    2.0: (4.12, 3.39, 62.0),
    3.0: (4.79, 3.96, 69.0),
    4.0: (5.33, 4.44, 73.0),
    8.0: (6.49, 5.60, 82.0),
    math.inf: (8.23, 7.54, 96.0),
}
DUCT_TOLERANCE = (0.01, 0.01, 0.015)  # the table prints three figures; f Re only two


def plane_wall_rise(y, length, q_per_k):
    """Steady 1-D wall with uniform generation, held at y = 0 and adiabatic at y = ``length``:
    ``T - T0 = (q'''/k) (L y - y**2 / 2)`` (Incropera & DeWitt §3.5, eq. 3.42 form, with the
    adiabatic plane at the far edge)."""
    y = np.asarray(y, dtype=float)
    return q_per_k * (length * y - y**2 / 2)


def slab_eigenvalues(biot: float, n: int = 30) -> np.ndarray:
    """Roots of ``zeta tan(zeta) = Bi``, one in each interval ``((k) pi, (k + 1/2) pi)``
    (Incropera & DeWitt §5.5.1, eq. 5.39c)."""
    roots = []
    for k in range(n):
        lo, hi = k * math.pi + 1e-12, k * math.pi + math.pi / 2 - 1e-12
        roots.append(brentq(lambda z: z * math.tan(z) - biot, lo, hi))
    return np.array(roots)


def slab_mean_excess(biot: float, fourier) -> np.ndarray:
    """Mean excess temperature of a plane wall cooled on both faces, over its initial value:
    ``sum C_n sin(z_n) / z_n exp(-z_n**2 Fo)``, ``C_n = 4 sin z_n / (2 z_n + sin 2 z_n)``
    (exact series solution, Incropera & DeWitt §5.5.1 eqs. 5.39a-c and 5.46; Fo and Bi on the
    half-thickness). Thirty terms: converged to round-off for Fo >= 1e-3."""
    z = slab_eigenvalues(biot)
    c = 4 * np.sin(z) / (2 * z + np.sin(2 * z))
    fo = np.atleast_1d(np.asarray(fourier, dtype=float))
    return (c * np.sin(z) / z * np.exp(-np.outer(fo, z**2))).sum(axis=1)


def wall_convection(q3: float, depth: float, h: float, k: float, T_inf: float) -> dict:
    """Plane wall with uniform generation ``q3`` cooled by ``h`` on a face at ``depth`` from its
    adiabatic plane (Incropera & DeWitt §3.5, eqs. 3.42-3.46 form): surface, core (adiabatic
    plane) and through-thickness mean temperatures."""
    surface = T_inf + q3 * depth / h
    return {"surface": surface, "core": surface + q3 * depth**2 / (2 * k),
            "mean": surface + q3 * depth**2 / (3 * k)}


def outlet_constant_wall(T_wall: float, T_in: float, hA_W_K: float, capacity_W_K: float):
    """Coolant outlet along a wall at uniform temperature:
    ``(T_s - T_o) / (T_s - T_i) = exp(-h A / (m c_p))`` (Incropera & DeWitt §8.3.1, eq. 8.42b)."""
    return T_wall - (T_wall - T_in) * math.exp(-hA_W_K / capacity_W_K)


def fem_sheet_potential(sigma_S: float, width: float, height: float, tabs, nx: int, ny: int,
                        per_cell: int = 4):
    """Independent finite-element solution of one collector sheet with scikit-fem (Gustafsson &
    McBain, "scikit-fem: A Python package for finite element assembly", JOSS 5 (2020) 2369).

    Weak form of ``-div(sigma grad u) = J`` (``J = 1 A`` drawn uniformly) with the Robin
    condition ``-sigma du/dn = g u`` on each tab root (``g = 1 / (R_tab w)``), on quadratic
    triangles over a tensor mesh with ``per_cell`` intervals per control volume of an
    ``nx`` x ``ny`` grid. ``tabs`` is a list of ``(x_lo, x_hi, R_tab_ohm)`` on the top edge; the
    tab ends must fall on mesh lines. Returns the cell means of ``u`` (shape ``(ny, nx)``) and
    the compliance ``int J u`` (the heat-equivalent resistance for 1 A).
    """
    import skfem
    from scipy.sparse.linalg import splu
    from skfem.helpers import dot, grad

    j = 1.0 / (width * height)
    xs = np.linspace(0, width, nx * per_cell + 1)
    ys = np.linspace(0, height, ny * per_cell + 1)
    mesh = skfem.MeshTri.init_tensor(xs, ys)
    element = skfem.ElementTriP2()
    basis = skfem.Basis(mesh, element)

    @skfem.BilinearForm
    def stiffness(u, v, w):
        return sigma_S * dot(grad(u), grad(v))

    @skfem.BilinearForm
    def robin(u, v, w):
        return u * v

    @skfem.LinearForm
    def load(v, w):
        return j * v

    A = stiffness.assemble(basis)
    b = load.assemble(basis)
    for lo, hi, r_tab in tabs:
        if min(np.min(np.abs(xs - lo)), np.min(np.abs(xs - hi))) > 1e-9 * width:
            raise ValueError(f"tab end {lo}..{hi} m is not on a mesh line")
        facets = mesh.facets_satisfying(
            lambda x, lo=lo, hi=hi: (np.abs(x[1] - height) < 1e-12) & (x[0] > lo - 1e-12)
            & (x[0] < hi + 1e-12))
        g = 1.0 / (r_tab * (hi - lo))
        A = A + g * robin.assemble(skfem.FacetBasis(mesh, element, facets=facets))
    u = splu(A.tocsc()).solve(b)
    per_element = skfem.Functional(lambda w: w["u"]).elemental(basis, u=basis.interpolate(u))
    centre = mesh.p[:, mesh.t].mean(axis=1)
    dx, dy = width / nx, height / ny
    col = np.minimum((centre[0] / dx).astype(int), nx - 1)
    row = np.minimum((centre[1] / dy).astype(int), ny - 1)
    means = np.bincount(row * nx + col, per_element, nx * ny).reshape(ny, nx) / (dx * dy)
    return means, float(b @ u)
