"""Synthetic acceleration of the tube's source iteration.

After each sweep the change R of u drives a correction (diffusion-type, in the
spirit of the general synthetic iterative scheme of Su, Zhu & Wu, J. Comput.
Phys. 407 (2020) 109245): the exact momentum balance of the error,
div tau_e = nu delta R, is closed by the Navier-Stokes relation
tau_e = -grad u_e / (2 delta) and a first-order slip condition; the correction
u_e is added to u.  It vanishes at the fixed point, so accelerated and plain
iteration converge to the same discrete solution.
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.linalg import lu_factor, lu_solve


class RadialDiffusion:
    """Collocation operator for -(1/(2 delta)) (1/r) d/dr (r de/dr) = rhs, slip at r = 1.

    The derivatives are those of the even cubic spline through the nodal values,
    i.e. of the same interpolant the transport sweep integrates.  This keeps the
    correction consistent with the sweep for grid-scale modes in optically
    thick cells (with finite-volume differences the sweep damps an odd-even
    mode three times more than the correction assumes, and the iteration
    diverges for delta * cell size >> 1).  Robin condition
    e(1) + (sigma/delta) e'(1) = 0 (first-order slip); at r = 0 the operator
    is 2 e''(0).  Dense LU (the radial grid has at most a few hundred nodes).
    """

    def __init__(self, r: np.ndarray, delta: float, slip: float):
        n = r.size
        spline = CubicSpline(r, np.eye(n), bc_type=((1, np.zeros(n)), "not-a-knot"), axis=0)
        d1 = spline(r, 1)
        d2 = spline(r, 2)
        a = np.empty((n, n))
        a[0] = -(1.0 / (2.0 * delta)) * 2.0 * d2[0]
        a[1:-1] = -(1.0 / (2.0 * delta)) * (d2[1:-1] + d1[1:-1] / r[1:-1, None])
        a[-1] = (slip / delta) * d1[-1]
        a[-1, -1] += 1.0
        self.lu = lu_factor(a)
        self.d1 = d1

    def solve(self, source_density: np.ndarray) -> np.ndarray:
        rhs = source_density.copy()
        rhs[-1] = 0.0
        return lu_solve(self.lu, rhs)
