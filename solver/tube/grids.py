"""Grid of the tube: radial nodes, angles, speeds; default sizes and the resolution ladder.

Radial nodes r_j = sin(pi xi_j / 2), xi uniform (clustered at the wall);
angles by Gauss-Legendre on [0, pi/2] and [pi/2, pi] (the distribution jumps
at theta = pi/2 on the wall); speeds by ``cross_section.speed_rule``.  The
moments are represented by cubic splines through the nodal values (even in r
for u and q, odd for tau), the same interpolant the sweep integrates.
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import CubicSpline

from knudsweep.solver.cross_section import check_resolution, speed_rule
from knudsweep.solver.resolution import nested_ladder

SPACE_MAX = 2001  # largest accepted n_space (radial nodes)
# Error reduction per ladder step assumed by the Richardson estimate
# (knudsweep.solver.resolution); measured 11 to 12 per step (BGK, diffuse, G_P and
# Q_P, delta = 0.1 and 10), so the estimate is about twice the actual error.
ASSUMED_RATIO = 6.0
# Cap of the accuracy ladder: entries 2 n_r n_angle (6 n_r + 13) of the ray
# tables (six float/int tables of this size, ~50 bytes per entry).
MAX_RAY_ENTRIES = 6_000_000


class TubeGrid:
    """Radial nodes r_j = sin(pi xi_j / 2) (clustered at the wall), angles and speeds."""

    def __init__(self, n_space: int, n_angle: int, n_speed: int, delta: float):
        xi = np.linspace(0.0, 1.0, n_space)
        self.r = np.sin(0.5 * np.pi * xi)
        self.r[-1] = 1.0
        # Gauss-Legendre on [0, pi/2] and [pi/2, pi]: the distribution jumps at
        # theta = pi/2 on the wall.
        g, gw = np.polynomial.legendre.leggauss(n_angle // 2)
        th = np.concatenate([(g + 1.0) * np.pi / 4.0, (g + 1.0) * np.pi / 4.0 + np.pi / 2.0])
        thw = np.concatenate([gw, gw]) * np.pi / 4.0
        self.theta = th
        self.theta_weight = thw
        self.cos_th = np.cos(th)
        self.c, self.cw = speed_rule(n_speed, delta)
        # (1/pi) int d^2c e^{-c^2} = sum over the half circle, doubled
        self.weight = (2.0 / np.pi) * thw[:, None] * self.cw[None, :]


def even_spline(r: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Cubic-spline coefficients (4, n-1) of an even function of r (f'(0) = 0)."""
    return CubicSpline(r, f, bc_type=((1, 0.0), "not-a-knot")).c


def odd_spline(r: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Cubic-spline coefficients of an odd function of r (f''(0) = 0)."""
    return CubicSpline(r, f, bc_type=((2, 0.0), "not-a-knot")).c


def radial_integral(r: np.ndarray, f: np.ndarray) -> float:
    """int_0^1 f r dr with f the even cubic spline through the nodal values."""
    spline = CubicSpline(r, f, bc_type=((1, 0.0), "not-a-knot"))
    # integrate the piecewise cubic times r exactly (Gauss-Legendre, 3 points per interval)
    g, gw = np.polynomial.legendre.leggauss(3)
    a, b = r[:-1, None], r[1:, None]
    x = 0.5 * (a + b) + 0.5 * (b - a) * g[None, :]
    return float(np.sum(0.5 * (b - a) * gw[None, :] * spline(x) * x))


def default_sizes(delta: float) -> tuple[int, int, int]:
    """(radial nodes, angles on the half circle, speeds) used when not given."""
    n_space = 41 if delta <= 100 else 61
    return n_space, 24, 16


def sizes(n_space, n_velocity, delta) -> tuple[int, int, int]:
    """Checked (radial nodes, angles on the half circle = 1.5 n_velocity rounded to even, speeds)."""
    ns, na, nc = default_sizes(delta)
    n_space, n_velocity = check_resolution(n_space, n_velocity, SPACE_MAX)
    if n_space is not None:
        ns = n_space
    if n_velocity is not None:
        nc = n_velocity
        na = 2 * ((int(1.5 * nc) + 1) // 2)
    return ns, na, nc


def resolution_ladder(delta: float) -> list[tuple[int, int]]:
    """(n_space, n_velocity) tried for an accuracy target in the tube, coarse to fine.

    Nested radial grids through the default (41 nodes: 6, 11, 21, 41, 81;
    61 nodes for delta > 100: 16, 31, 61, 121), speeds 16 (4/3)^k; capped by
    MAX_RAY_ENTRIES.
    """
    ns, _, nv = default_sizes(float(delta))

    def fits(n, v):
        na = sizes(n, v, delta)[1]
        return 2 * n * na * (6 * n + 13) <= MAX_RAY_ENTRIES

    return nested_ladder(ns, nv, 6, fits)
