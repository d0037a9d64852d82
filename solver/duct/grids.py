"""Grid of the duct: graded nodes, upwind coefficients, angles; default sizes, memory and the resolution ladder.

Height H (the length scale), width W = A H, A >= 1; a quarter of the
cross-section, y in [0, 1/2] and z in [0, A/2] (the symmetry planes last).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.interpolate import PchipInterpolator
from scipy.optimize import brentq

from knudsweep.solver.resolution import nested_ladder

MAX_ASPECT_RATIO = 50.0
SPACE_MAX = 400  # largest accepted n_space (nodes across the half height)
WALL_CELL = 0.1  # first cell of the grid's shape at the wall, in free paths (see graded_shape)
MAX_CELL = 2.0  # largest cell of the shape, in units of the uniform spacing (see graded_shape)
SHAPE_INTERVALS = 40  # intervals across the half height of the shape that clustered maps
# Error reduction per ladder step assumed by the Richardson estimate
# (knudsweep.solver.resolution): second-order upwind, first order next to the
# walls; measured 2.7 to 3.3 per step (A = 2, BGK, diffuse, delta = 1, G_P) and 3.6 to 5.5
# (A = 1, delta = 5 to 1000, on the mapped grid of clustered); the smaller value is kept.
ASSUMED_RATIO = 3.0
# Cap of the accuracy ladder: unknowns 4 n_angle n_speed n_y n_z of one
# distribution array (four such float arrays are kept: 1.2e7 -> ~400 MB).
MAX_UNKNOWNS = 12_000_000
# Bytes per unknown of the distribution at the peak of a solve: measured
# 16.4-17.1 (peak resident memory growth), rounded up.
BYTES_PER_UNKNOWN = 20


def clustered(n: int, length: float, delta: float = 0.0) -> np.ndarray:
    """n nodes on [0, length], graded towards the wall x = 0: a fixed map of uniform nodes.

    The map x(s), s in [0, 1], does not depend on n: it is the monotone cubic
    (PCHIP; Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238) through the
    nodes of :func:`graded_shape` at SHAPE_INTERVALS (1 + log2(2 length)/2)
    intervals, evaluated at n uniform s.  Every cell, the wall cell included,
    therefore shrinks as 1/(n - 1) when n grows, and the discretisation error
    falls as (n - 1)^-2 (measured in tests/verification/test_duct_flow.py), which
    is what the Richardson estimate of knudsweep.solver.resolution assumes.
    """
    n_shape = 1 + int(round(SHAPE_INTERVALS * (1.0 + 0.5 * math.log2(max(2.0 * length, 1.0)))))
    shape = graded_shape(n_shape, length, delta)
    if n == n_shape:
        return shape
    x = PchipInterpolator(np.linspace(0.0, 1.0, n_shape), shape)(np.linspace(0.0, 1.0, n))
    x[0], x[-1] = 0.0, length
    return x


def graded_shape(n: int, length: float, delta: float) -> np.ndarray:
    """The shape of :func:`clustered`: n nodes whose cells grow geometrically away from x = 0.

    Cells grow from WALL_CELL / delta (a tenth of the free path ell = H / delta,
    in units of H) through the Knudsen layer, which carries the thermal-creep
    drive at large delta, and are capped at MAX_CELL times the uniform spacing
    in the core, where the Poiseuille profile needs them; the growth factor is
    chosen so that the n - 1 cells fill the length.  Uniform when the first
    cell would exceed the uniform spacing.
    """
    uniform = length / (n - 1)
    h0 = WALL_CELL / delta if delta > 0.0 else math.inf
    if h0 >= uniform:
        return np.linspace(0.0, length, n)
    k = np.arange(n - 1)
    h_max = MAX_CELL * uniform

    def cells(g):
        return np.minimum(h0 * np.exp(np.minimum(k * math.log(g), 700.0)), h_max)

    g = brentq(lambda g: cells(g).sum() - length, 1.0 + 1e-12, 1e6)
    x = np.concatenate([[0.0], np.cumsum(cells(g))])
    x *= length / x[-1]
    x[-1] = length
    return x


def upwind_coefficients(x: np.ndarray):
    """One-sided derivative coefficients along +x (back) and -x (fwd, as derivative along -x).

    back[i] = (a0, a1, a2) with dF/dx ~ a0 F_i + a1 F_{i-1} + a2 F_{i-2}; second
    order where two upwind points exist, first order next to the boundary.
    fwd[i] likewise for -dF/dx with F_{i+1}, F_{i+2}; at n-2 the second point
    is the mirror image of node n-2 across the symmetry plane x[n-1]; the last
    node is an inflow node for that direction and has no stencil.
    """
    n = x.size
    back = np.zeros((n, 3))
    fwd = np.zeros((n, 3))
    for i in range(1, n):
        h1 = x[i] - x[i - 1]
        if i >= 2:
            h2 = x[i] - x[i - 2]
            back[i] = (1.0 / h1 + 1.0 / h2, -h2 / (h1 * (h2 - h1)), h1 / (h2 * (h2 - h1)))
        else:
            back[i] = (1.0 / h1, -1.0 / h1, 0.0)
    for i in range(0, n - 1):
        h1 = x[i + 1] - x[i]
        # beyond the symmetry plane the mirror node of n-2 lies at 2 x[n-1] - x[n-2]
        h2 = x[i + 2] - x[i] if i <= n - 3 else 2.0 * h1
        fwd[i] = (1.0 / h1 + 1.0 / h2, -h2 / (h1 * (h2 - h1)), h1 / (h2 * (h2 - h1)))
    return back, fwd


def angle_rule(n_angle: int, aspect_ratio: float, delta: float):
    """Angles theta of one quadrant (from the y axis, across the height) and their weights (sum pi/2).

    Gauss-Legendre in v in [0, 1] with psi = pi/2 - theta = psi_c (exp(b v) - 1),
    b = ln(1 + pi / (2 psi_c)), psi_c = max(1/A, delta): nodes crowd towards
    directions grazing the long side, where a ray runs up to min(A, ~1/delta)
    heights before it meets a wall or collides, so that the collided part
    varies on the angular scale psi ~ psi_c there.
    """
    psi_c = max(1.0 / float(aspect_ratio), float(delta))
    b = math.log1p(0.5 * math.pi / psi_c)
    v, wv = np.polynomial.legendre.leggauss(int(n_angle))
    v = 0.5 * (v + 1.0)
    psi = psi_c * np.expm1(b * v)
    w = 0.5 * wv * psi_c * b * np.exp(b * v)
    w *= 0.5 * math.pi / w.sum()  # exact for isotropic data (Gauss-Legendre errs by ~1e-8 here)
    return (0.5 * math.pi - psi)[::-1].copy(), w[::-1].copy()


def default_sizes(delta: float, aspect_ratio: float) -> tuple[int, int, int, int]:
    """(nodes across the half height, across the half width, angles per quadrant, speeds).

    Nodes across the half height: 25 up to delta = 0.5, 41 up to 2, 81 up to
    50, 161 above, so that G_P and G_T are within 0.1 % and every coefficient's
    coarse level (every other node) already converges as n^-2, which keeps the
    estimate honest (tests/verification/test_duct_flow.py measures both against
    finer grids); across the half width n (1 + log2(A)/2).
    """
    ny = 25 if delta <= 0.5 else 41 if delta <= 2.0 else 81 if delta <= 50.0 else 161
    nz = int(round(ny * (1.0 + 0.5 * math.log2(aspect_ratio))))
    return ny, nz, 6, 12


def duct_sizes(n_space, n_velocity, aspect_ratio):
    """(n_y, n_z, n_angle, n_speed) for given nodes across the half height and speeds."""
    nz = int(round(n_space * (1.0 + 0.5 * math.log2(aspect_ratio))))
    return n_space, nz, max(n_velocity // 2, 2), n_velocity


def duct_memory_mb(
    delta: float,
    aspect_ratio: float,
    n_space: int | None = None,
    n_velocity: int | None = None,
    accuracy: float | None = None,
) -> float:
    """Estimated peak memory of one duct solve, MB (an accuracy ladder stays under its cap)."""
    if accuracy is not None:
        return BYTES_PER_UNKNOWN * MAX_UNKNOWNS / 1e6
    ny, nz, na, nc = default_sizes(float(delta), float(aspect_ratio))
    if n_space is not None:
        ny, nz = duct_sizes(int(n_space), nc, float(aspect_ratio))[:2]
    if n_velocity is not None:
        na, nc = duct_sizes(ny, int(n_velocity), float(aspect_ratio))[2:]
    return BYTES_PER_UNKNOWN * 4 * na * nc * ny * nz / 1e6


def resolution_ladder(delta: float, aspect_ratio: float) -> list[tuple[int, int]]:
    """(n_space, n_velocity) tried for an accuracy target in the duct, coarse to fine.

    Through the default of :func:`default_sizes` (25 nodes: 7, 13, 25, 49, 97),
    halving / doubling the intervals across the half height, speeds 12 (4/3)^k;
    capped by MAX_UNKNOWNS.
    """
    ny, _, _, nc = default_sizes(float(delta), float(aspect_ratio))

    def fits(n, v):
        a, b, na, nv = duct_sizes(n, v, float(aspect_ratio))
        return n <= 400 and 4 * na * nv * a * b <= MAX_UNKNOWNS

    return nested_ladder(ny, nc, 5, fits)


def every_other(x: np.ndarray) -> np.ndarray:
    """Every other node of x, keeping the last (the symmetry plane)."""
    return x[::2] if (x.size - 1) % 2 == 0 else np.append(x[::2], x[-1])


def trapezoid_2d(y, z, f) -> float:
    """Trapezoid rule of f over the quarter cross-section y x z."""
    return float(np.trapezoid(np.trapezoid(f, z, axis=1), y))
