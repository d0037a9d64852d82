"""Acceleration of the duct's iteration: synthetic correction and Anderson mixing of the state.

Synthetic step (cf. Su, Zhu & Wu, J. Comput. Phys. 407 (2020) 109245): after
each sweep the change R of u drives a correction e solving

    A e = R ,   A = (1/(nu delta)) sum_dirs w c.D_up  +  (1/(2 nu delta^2)) (-Laplacian_h)

where the first term is the dissipation that the upwind differences D_up add
to grid-scale modes (it makes the correction consistent with the sweep in
optically thick cells) and the second is the Navier-Stokes momentum balance
(tau = -grad u / (2 delta)).  Walls carry the first-order slip condition
e - (sigma/delta) de/dn_in = 0.  A is factorised once (scipy.sparse LU).
ES-BGK: the shear stress in the gain lags one sweep; its change r_tau adds
-(e/(1-e)) div r_tau / (nu delta) to R (the plane channel's treatment,
``knudsweep.solver.plane_channel.kernels._synthetic_step``).

Walls re-emit what arrived in the previous sweep, a lag of specular
reflection: the specular part of the wall inflow is corrected along with u
(``duct.boundary.correct_inflow``), and the accelerated iteration is
Anderson-mixed (``knudsweep.solver.anderson``) over the moments and the wall
inflow (:class:`IterationState`).  Near the free-molecular limit the lag
remains: the bounce operator has its eigenvalues on a circle of radius
1 - alpha, so no sweep-based Krylov method beats (1 - alpha)^k by much.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

MIX_DEPTH = 16  # Anderson history (knudsweep.solver.anderson) of the accelerated iteration
MIX_MEMORY = 200_000_000  # bytes for that history; fine grids get a shorter one


def _diff_matrix(coef: np.ndarray, sign: int, n: int, mirror_last: np.ndarray | None) -> sp.csr_matrix:
    """Sparse 1-D matrix of the upwind derivative d/dx (sign=+1: back stencil, -1: fwd)."""
    rows, cols, vals = [], [], []
    for i in range(n):
        a0, a1, a2 = coef[i]
        if sign > 0:
            if i == 0:
                continue
            i1, i2 = i - 1, (i - 2 if i >= 2 else i - 1)
            rows += [i, i, i]
            cols += [i, i1, i2]
            vals += [a0, a1, a2]
        else:
            if i == n - 1:
                continue
            i1, i2 = i + 1, (i + 2 if i <= n - 3 else i)  # mirror node of n-2 is n-2
            # coefficients are for the derivative along -x
            rows += [i, i, i]
            cols += [i, i1, i2]
            vals += [-a0, -a1, -a2]
    mat = sp.csr_matrix((vals, (rows, cols)), shape=(n, n))
    if sign < 0 and mirror_last is not None:
        # inflow at the symmetry plane: value mirrored from the other direction,
        # i.e. the derivative along -x equals minus the back derivative
        mat = sp.lil_matrix(mat)
        mat[n - 1, :] = sp.lil_matrix(mirror_last.reshape(1, -1))
        mat = mat.tocsr()
    return mat


def _laplacian_1d(x: np.ndarray) -> sp.csr_matrix:
    """Second-difference matrix on nodes x; mirror at the last node (symmetry plane)."""
    n = x.size
    rows, cols, vals = [], [], []
    for i in range(1, n):
        if i < n - 1:
            hm, hp = x[i] - x[i - 1], x[i + 1] - x[i]
            rows += [i, i, i]
            cols += [i - 1, i, i + 1]
            vals += [2.0 / (hm * (hm + hp)), -2.0 / (hm * hp), 2.0 / (hp * (hm + hp))]
        else:
            hm = x[i] - x[i - 1]
            rows += [i, i]
            cols += [i - 1, i]
            vals += [2.0 / hm**2, -2.0 / hm**2]
    return sp.csr_matrix((vals, (rows, cols)), shape=(n, n))


class DuctCorrection:
    """Sparse LU of the synthetic correction operator (see module docstring)."""

    def __init__(self, y, z, by, fy, bz, fz, weight, c_nodes, cos_th, sin_th, nu_delta, delta, slip):
        ny, nz = y.size, z.size
        Dyb = _diff_matrix(by, +1, ny, None)
        Dyf = _diff_matrix(fy, -1, ny, -Dyb.toarray()[ny - 1])
        Dzb = _diff_matrix(bz, +1, nz, None)
        Dzf = _diff_matrix(fz, -1, nz, -Dzb.toarray()[nz - 1])
        # first moments of each half: sum w |c_y| over the directions of one quadrant
        my = float(np.sum(weight * c_nodes[None, :] * cos_th[:, None]))
        mz = float(np.sum(weight * c_nodes[None, :] * sin_th[:, None]))
        Iy, Iz = sp.identity(ny), sp.identity(nz)
        # sum over quadrants of (signed first moment) x (upwind derivative):
        # two quadrants move along +y (back stencil), two along -y (fwd stencil)
        m1 = 2.0 * my * sp.kron(Dyb - Dyf, Iz) + 2.0 * mz * sp.kron(Iy, Dzb - Dzf)
        lap = sp.kron(_laplacian_1d(y), Iz) + sp.kron(Iy, _laplacian_1d(z))
        a = (m1 / nu_delta - lap * (1.0 / (2.0 * nu_delta * delta))).tolil()
        # wall rows: e - (sigma/delta) de/dn_in = 0 (first-order slip)
        h_y = y[1] - y[0]
        h_z = z[1] - z[0]
        for j in range(nz):
            r = j  # node (0, j)
            a[r, :] = 0.0
            a[r, r] = 1.0 + slip / (delta * h_y)
            a[r, nz + j] = -slip / (delta * h_y)
        for i in range(1, ny):
            r = i * nz
            a[r, :] = 0.0
            a[r, r] = 1.0 + slip / (delta * h_z)
            a[r, r + 1] = -slip / (delta * h_z)
        self.wall_rows = np.concatenate([np.arange(nz), np.arange(1, ny) * nz])
        self.lu = splu(a.tocsc())
        self.shape = (ny, nz)

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        b = rhs.ravel().copy()
        b[self.wall_rows] = 0.0
        return self.lu.solve(b).reshape(self.shape)


class IterationState:
    """Packs the iteration state into one vector for Anderson mixing, and back.

    Moments (u, tau_y, tau_z, q) and, if ``with_inflow``, the re-emitted wall
    inflow of the quadrants that receive it (0, 2 at y = 0; 0, 1 at z = 0).
    """

    _RECEIVING = ((0, 2), (0, 2), (0, 1), (0, 1))  # wy1, wy3, wz1, wz3

    def __init__(self, moments, inflow, with_inflow: bool):
        self.moment_shape = moments[0].shape
        self.inflow_shapes = [a.shape for a in inflow]
        self.with_inflow = with_inflow
        self.n_mom = moments[0].size

    def pack(self, moments, inflow) -> np.ndarray:
        parts = [m.ravel() for m in moments]
        if self.with_inflow:
            parts += [a[list(q)].ravel() for a, q in zip(inflow, self._RECEIVING, strict=True)]
        return np.concatenate(parts)

    def unpack(self, vec):
        n = self.n_mom
        moments = tuple(vec[i * n : (i + 1) * n].reshape(self.moment_shape) for i in range(4))
        inflow = [np.zeros(s) for s in self.inflow_shapes]
        if self.with_inflow:
            pos = 4 * n
            for a, q in zip(inflow, self._RECEIVING, strict=True):
                size = len(q) * a[0].size
                a[list(q)] = vec[pos : pos + size].reshape((len(q),) + a.shape[1:])
                pos += size
        return moments, inflow
