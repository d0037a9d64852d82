"""Walls of the duct: the inflow of the next sweep from what arrived in the previous one.

Maxwell walls re-emit (1 - alpha) times the mirrored arriving value,
Cercignani-Lampis walls (Cercignani & Lampis, Transp. Theory Stat. Phys. 1
(1971) 101) through the in-plane kernel of ``knudsweep.solver.walls``.
"""

from __future__ import annotations

import numpy as np

from knudsweep.solver.duct.kernels import QY, QZ
from knudsweep.solver.walls import CercignaniLampisWall, inplane_cl_kernel


class WallReemission:
    """Wall inflow of the next sweep from the distribution arriving in the previous one.

    Maxwell: (1 - alpha) x the mirrored arriving value (the diffuse part carries
    no c_x-odd perturbation).  Cercignani-Lampis: as in ``knudsweep.solver.tube``
    (:class:`knudsweep.solver.tube.boundary.TubeCLWall`), Psi1 = Phi1 and Psi3 = Phi3 - (3/2) Phi1
    are reflected with (1 - alpha_t) and (1 - alpha_t)^3 times the in-plane
    kernel :func:`knudsweep.solver.walls.inplane_cl_kernel`, here a matrix from the
    arriving to the re-emitted discrete ordinates (the same at every node of
    a flat wall).  Quadrants: 0 (+y,+z), 1 (-y,+z), 2 (+y,-z), 3 (-y,-z).
    """

    def __init__(self, wall, c_nodes, cos_th, sin_th, weight):
        self.cl = isinstance(wall, CercignaniLampisWall)
        self.defect = 0.0
        if not self.cl:
            self.f = (1.0 - wall.alpha,)
            return
        r1 = 1.0 - wall.alpha_t
        self.f = (r1, r1**3)
        sgn = {0: 1.0, 1: 1.0, 2: -1.0, 3: -1.0}  # z-sign of each quadrant
        sgy = {0: 1.0, 1: -1.0, 2: 1.0, 3: -1.0}
        c = c_nodes[None, :]
        w = (np.pi * weight).ravel()  # int d^2c' exp(-c'^2) over one quadrant's nodes
        cy = (cos_th[:, None] * c).ravel()
        cz = (sin_th[:, None] * c).ravel()

        def matrix(normal, tangential, sign, q_out, q_in):
            cn_out = np.concatenate([normal for _ in q_out])
            ct_out = np.concatenate([sign[q] * tangential for q in q_out])
            cn_in = np.concatenate([normal for _ in q_in])
            ct_in = np.concatenate([sign[q] * tangential for q in q_in])
            k, d = inplane_cl_kernel(cn_out, ct_out, cn_in, ct_in, np.concatenate([w, w]), wall.alpha_t, wall.alpha_n)
            self.defect = max(self.defect, d)
            return k

        # wall y = 0: normal y, tangential z; re-emitted into quadrants 0, 2 from 1, 3
        self.ky = matrix(cy, cz, sgn, (0, 2), (1, 3))
        # wall z = 0: normal z, tangential y; re-emitted into 0, 1 from 2, 3
        self.kz = matrix(cz, cy, sgy, (0, 1), (2, 3))

    def inflow(self, prev1, prev3, uncollided=None):
        """(wy1, wy3, wz1, wz3), each (4, na, nc, n_along_wall).

        ``uncollided``: ((Phi1_0, Phi3_0) at y = 0, (Phi1_0, Phi3_0) at z = 0)
        from :func:`duct.uncollided.uncollided_at_walls`, added to the arriving values.
        """
        _, na, nc, ny, nz = prev1.shape
        arr = [prev1[:, :, :, 0, :], prev3[:, :, :, 0, :], prev1[:, :, :, :, 0], prev3[:, :, :, :, 0]]
        if uncollided is not None:
            (b1y, b3y), (b1z, b3z) = uncollided
            arr = [a + b for a, b in zip(arr, (b1y, b3y, b1z, b3z), strict=True)]
        p1y, p3y, p1z, p3z = arr
        wy1 = np.zeros((4, na, nc, nz))
        wy3 = np.zeros((4, na, nc, nz))
        wz1 = np.zeros((4, na, nc, ny))
        wz3 = np.zeros((4, na, nc, ny))
        if not self.cl:
            f = self.f[0]
            for q in (0, 2):
                wy1[q] = f * p1y[QY[q]]
                wy3[q] = f * p3y[QY[q]]
            for q in (0, 1):
                wz1[q] = f * p1z[QZ[q]]
                wz3[q] = f * p3z[QZ[q]]
            return wy1, wy3, wz1, wz3
        f1, f3 = self.f
        m = na * nc
        for k, q_out, q_in, a1, a3, pa1, pa3 in (
            (self.ky, (0, 2), (1, 3), wy1, wy3, p1y, p3y),
            (self.kz, (0, 1), (2, 3), wz1, wz3, p1z, p3z),
        ):
            p1 = np.concatenate([pa1[q].reshape(m, -1) for q in q_in])
            p3 = np.concatenate([pa3[q].reshape(m, -1) for q in q_in])
            o1 = f1 * (k @ p1)
            o3 = f3 * (k @ (p3 - 1.5 * p1)) + 1.5 * o1
            for n, q in enumerate(q_out):
                a1[q] = o1[n * m : (n + 1) * m].reshape(na, nc, -1)
                a3[q] = o3[n * m : (n + 1) * m].reshape(na, nc, -1)
        return wy1, wy3, wz1, wz3


def correct_inflow(inflow, e, f1):
    """Add the reflection of the corrected velocity to the wall inflow.

    Molecules arriving at a wall carry the velocity next to it; the synthetic
    correction e changes that velocity, so the specular part f1 (Maxwell:
    1 - alpha; Cercignani-Lampis: 1 - alpha_t) of the re-emitted distribution
    changes by f1 e_wall, as a drifting Maxwellian (Phi1 = e, Phi3 = 3/2 e).
    Zero when e is zero, so the fixed point is unchanged.
    """
    wy1, wy3, wz1, wz3 = inflow
    for q in (0, 2):
        wy1[q] += f1 * e[0, :]
        wy3[q] += 1.5 * f1 * e[0, :]
    for q in (0, 1):
        wz1[q] += f1 * e[:, 0]
        wz3[q] += 1.5 * f1 * e[:, 0]
