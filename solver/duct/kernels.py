"""Numba kernels of the duct: discrete-ordinate sweeps over the quarter cross-section and the moments.

Discrete ordinates on a quarter of the cross-section (the planes y = 1/2 and
z = A/2 are symmetry planes, i.e. specular reflectors applied exactly within a
sweep by ordering the quadrants).  Second-order upwind differences on the
graded grid of ``duct.grids`` (first order next to a boundary).  Walls take
the inflow re-emitted from the previous sweep (``duct.boundary``).
Quadrants: 0 (+y,+z), 1 (-y,+z), 2 (+y,-z), 3 (-y,-z).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True)
def __sweep_direction(
    phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, wy1, wy3, wz1, wz3, qy, qz
):
    """Sweep one direction (quadrant q, angle m, speed k) over the quarter grid.

    sy, sz = +1/-1 direction signs; cy, cz = |c_y|, |c_z|.  Inflow: walls (i=0
    for sy>0, j=0 for sz>0) take the re-emitted values wy*[q, m, k, j] /
    wz*[q, m, k, i] computed from the previous sweep (:meth:`duct.boundary.WallReemission.inflow`);
    symmetry planes (last index) take the mirrored value of the current sweep.
    """
    ny = s1.shape[0]
    nz = s1.shape[1]
    for ii in range(ny):
        i = ii if sy > 0 else ny - 1 - ii
        for jj in range(nz):
            j = jj if sz > 0 else nz - 1 - jj
            if sy > 0 and i == 0:
                phi1[q, m, k, i, j] = wy1[q, m, k, j]
                phi3[q, m, k, i, j] = wy3[q, m, k, j]
                continue
            if sz > 0 and j == 0:
                phi1[q, m, k, i, j] = wz1[q, m, k, i]
                phi3[q, m, k, i, j] = wz3[q, m, k, i]
                continue
            if sy < 0 and i == ny - 1:
                phi1[q, m, k, i, j] = phi1[qy, m, k, i, j]
                phi3[q, m, k, i, j] = phi3[qy, m, k, i, j]
                continue
            if sz < 0 and j == nz - 1:
                phi1[q, m, k, i, j] = phi1[qz, m, k, i, j]
                phi3[q, m, k, i, j] = phi3[qz, m, k, i, j]
                continue
            if sy > 0:
                a0, a1, a2 = by[i, 0], by[i, 1], by[i, 2]
                i1 = i - 1
                i2 = i - 2 if i >= 2 else i - 1
            else:
                a0, a1, a2 = fy[i, 0], fy[i, 1], fy[i, 2]
                i1 = i + 1
                i2 = i + 2
            if sz > 0:
                b0, b1, b2 = bz[j, 0], bz[j, 1], bz[j, 2]
                j1 = j - 1
                j2 = j - 2 if j >= 2 else j - 1
            else:
                b0, b1, b2 = fz[j, 0], fz[j, 1], fz[j, 2]
                j1 = j + 1
                j2 = j + 2
            # second upwind point; beyond a symmetry plane it is the mirrored
            # direction at the mirror node (already swept)
            if i2 == ny:
                g1y = phi1[qy, m, k, ny - 2, j]
                g3y = phi3[qy, m, k, ny - 2, j]
            else:
                g1y = phi1[q, m, k, i2, j]
                g3y = phi3[q, m, k, i2, j]
            if j2 == nz:
                g1z = phi1[qz, m, k, i, nz - 2]
                g3z = phi3[qz, m, k, i, nz - 2]
            else:
                g1z = phi1[q, m, k, i, j2]
                g3z = phi3[q, m, k, i, j2]
            den = nu_delta + cy * a0 + cz * b0
            n1 = s1[i, j] - cy * (a1 * phi1[q, m, k, i1, j] + a2 * g1y) - cz * (b1 * phi1[q, m, k, i, j1] + b2 * g1z)
            n3 = s3[i, j] - cy * (a1 * phi3[q, m, k, i1, j] + a2 * g3y) - cz * (b1 * phi3[q, m, k, i, j1] + b2 * g3z)
            phi1[q, m, k, i, j] = n1 / den
            phi3[q, m, k, i, j] = n3 / den


# quadrant q -> signs; mirror partner across y (qy) and across z (qz)
SY = np.array([1, -1, 1, -1])
SZ = np.array([1, 1, -1, -1])
QY = np.array([1, 0, 3, 2])
QZ = np.array([2, 3, 0, 1])


@njit(cache=True, parallel=True)
def _sweep_stage(
    q0, nquad, phi1, phi3, wy1, wy3, wz1, wz3, c_nodes, cos_th, sin_th, nu_delta, uf, qf, tyf, tzf, src, by, fy, bz, fz
):
    """Sweep quadrants q0 .. q0+nquad-1 (independent of each other), prange over directions.

    Sources per direction: S1 = src[0] u + (src[1] + src[2] c^2) q + src[3] (c_y tau_y + c_z tau_z)
    + src[4] + src[5] c^2, S3 with src[6:12].
    """
    na = cos_th.size
    nc = c_nodes.size
    for idx in prange(nquad * na * nc):
        q = q0 + idx // (na * nc)
        rest = idx % (na * nc)
        _sweep_one(
            phi1,
            phi3,
            wy1,
            wy3,
            wz1,
            wz3,
            q,
            rest // nc,
            rest % nc,
            c_nodes,
            cos_th,
            sin_th,
            nu_delta,
            uf,
            qf,
            tyf,
            tzf,
            src,
            by,
            fy,
            bz,
            fz,
        )


def sweep(*args):
    """Full sweep: quadrant (+,+), then (-,+) and (+,-), then (-,-), so that the
    inflow at each symmetry plane is the mirrored value of the same sweep."""
    for q0, nquad in ((0, 1), (1, 2), (3, 1)):
        _sweep_stage(q0, nquad, *args)


@njit(cache=True)
def _sweep_one(
    phi1, phi3, wy1, wy3, wz1, wz3, q, m, k, c_nodes, cos_th, sin_th, nu_delta, uf, qf, tyf, tzf, src, by, fy, bz, fz
):
    """Sources of one direction, then its sweep."""
    ny, nz = uf.shape
    c = c_nodes[k]
    sy = SY[q]
    sz = SZ[q]
    cy = c * cos_th[m]
    cz = c * sin_th[m]
    c2 = c * c
    s1 = np.empty((ny, nz))
    s3 = np.empty((ny, nz))
    for i in range(ny):
        for j in range(nz):
            shear = sy * cy * tyf[i, j] + sz * cz * tzf[i, j]
            s1[i, j] = src[0] * uf[i, j] + (src[1] + src[2] * c2) * qf[i, j] + src[3] * shear + src[4] + src[5] * c2
            s3[i, j] = src[6] * uf[i, j] + (src[7] + src[8] * c2) * qf[i, j] + src[9] * shear + src[10] + src[11] * c2
    __sweep_direction(
        phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, wy1, wy3, wz1, wz3, QY[q], QZ[q]
    )


@njit(cache=True, parallel=True)
def moments(phi1, phi3, weight, c_nodes, cos_th, sin_th, u, ty, tz, qf):
    """u, tau_y, tau_z, q at every node."""
    nq, na, nc, ny, nz = phi1.shape
    sy_arr = np.array([1.0, -1.0, 1.0, -1.0])
    sz_arr = np.array([1.0, 1.0, -1.0, -1.0])
    for i in prange(ny):
        for j in range(nz):
            su = 0.0
            sty = 0.0
            stz = 0.0
            sq = 0.0
            for q in range(nq):
                for m in range(na):
                    for k in range(nc):
                        w = weight[m, k]
                        c = c_nodes[k]
                        p1 = phi1[q, m, k, i, j]
                        su += w * p1
                        sty += w * sy_arr[q] * c * cos_th[m] * p1
                        stz += w * sz_arr[q] * c * sin_th[m] * p1
                        sq += w * (phi3[q, m, k, i, j] + (c * c - 2.5) * p1)
            u[i, j] = su
            ty[i, j] = sty
            tz[i, j] = stz
            qf[i, j] = sq
