"""Cercignani-Lampis wall of the tube, solved exactly within each sweep.

(Cercignani & Lampis, Transp. Theory Stat. Phys. 1 (1971) 101.)  A Maxwell
wall needs no module here: its specular part is summed along the chord inside
the sweep (``tube.kernels.sweep``).
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import lu_factor, lu_solve

from knudsweep.solver.tube.grids import TubeGrid
from knudsweep.solver.walls import CercignaniLampisWall, inplane_cl_kernel

CL_BLOCK = 2_000_000  # kernel entries evaluated per block in TubeCLWall (bounds temporary memory)


class TubeCLWall:
    """Cercignani-Lampis re-emission at the tube wall, added after a black-wall sweep.

    Tangential part along the axis (Mehler kernel, Hermite eigenfunctions):
    with h = c_x A + c_x^3 B the reduced functions Psi1 = Phi1 and
    Psi3 = Phi3 - (3/2) Phi1 are the projections on the Hermite polynomials
    c_x and c_x^3 - (3/2) c_x, reflected with factors (1 - alpha_t) and
    (1 - alpha_t)^3.  In the cross-section the normal and in-plane tangential
    speeds are reflected by :func:`inplane_cl_kernel`.

    By axial symmetry the wall distribution is the same at every wall point;
    it is a function W(beta, c) of the angle beta to the inward normal (even
    in beta).  A molecule arriving at angle theta left the wall at angle theta
    along the same chord, so on the wall nodes (theta_m, c_k) of the outer
    grid circle the arriving values are A = R + E W, with R the black-wall
    ray integral (from the sweep) and E = exp(-nu delta 2 cos theta / c).
    W = f K A is solved exactly ((I - f K E) W = f K R, f = 1 - alpha_t or its
    cube), then evaluated at the exit angle of every interior ray by the same
    kernel (Nystrom), W(beta_im, c_k) = f K_im A, and added with
    exp(-nu delta s_end / c).
    """

    def __init__(self, grid: TubeGrid, wall: CercignaniLampisWall, nu_delta: float):
        r, cos_th, c = grid.r, grid.cos_th, grid.c
        na, nc, nr = cos_th.size, c.size, r.size
        half = na // 2  # angles with cos(theta) > 0: arriving at the wall from the outer circle
        self.half = half
        ct, st = cos_th[:half], np.sqrt(1.0 - cos_th[:half] ** 2)
        # arriving nodes: both signs of the tangential speed (h is even in it)
        cn_in = (ct[:, None] * c[None, :]).ravel()
        ctan = (st[:, None] * c[None, :]).ravel()
        w_in = (grid.theta_weight[:half, None] * grid.cw[None, :]).ravel()
        cn_in2 = np.concatenate([cn_in, cn_in])
        ct_in2 = np.concatenate([ctan, -ctan])
        w_in2 = np.concatenate([w_in, w_in])
        nw = cn_in.size

        def kernel(cn_out, ct_out):
            # in row blocks: the temporaries of inplane_cl_kernel are 2 nw wide,
            # so building all rows at once needs several times the final matrix
            out = np.empty((cn_out.size, nw))
            defect = 0.0
            step = max(1, CL_BLOCK // (2 * nw))
            for a in range(0, cn_out.size, step):
                k, d = inplane_cl_kernel(
                    cn_out[a : a + step], ct_out[a : a + step], cn_in2, ct_in2, w_in2, wall.alpha_t, wall.alpha_n
                )
                out[a : a + step] = k[:, :nw] + k[:, nw:]
                defect = max(defect, d)
            return out, defect

        # wall nodes: outgoing at angle theta_m to the inward normal
        k_wall, d1 = kernel(cn_in, ctan)
        e_wall = np.exp(-nu_delta * 2.0 * ct[:, None] / c[None, :]).ravel()
        # every interior ray (i, m, k): exit angle beta with sin(beta) = r_i sin(theta_m)
        b = np.clip(r[:, None] * np.sqrt(1.0 - cos_th[None, :] ** 2), 0.0, 1.0)  # (nr, na)
        cb = np.sqrt(1.0 - b * b)
        cn_out = (cb[:, :, None] * c[None, None, :]).ravel()
        ct_out = (b[:, :, None] * c[None, None, :]).ravel()
        self.k_all, d2 = kernel(cn_out, ct_out)
        self.defect = max(d1, d2)
        s_end = r[:, None] * cos_th[None, :] + cb  # backward ray length to the wall
        self.e_ray = np.exp(-nu_delta * s_end[:, :, None] / c[None, None, :])  # (nr, na, nc)
        self.e_wall = e_wall
        r1 = 1.0 - wall.alpha_t
        self.f = (r1, r1**3)
        self.lu = [lu_factor(np.eye(nw) - f * k_wall * e_wall[None, :]) for f in self.f]
        self.k_wall = k_wall
        self.shape = (nr, na, nc)

    def add_reemission(self, phi1: np.ndarray, phi3: np.ndarray) -> None:
        """phi1, phi3 hold black-wall ray integrals; add the re-emitted part in place."""
        h = self.half
        r1 = phi1[-1, :h, :].ravel()
        r3 = phi3[-1, :h, :].ravel() - 1.5 * r1
        out = []
        for rr, f, lu in zip((r1, r3), self.f, self.lu, strict=True):
            w = lu_solve(lu, f * (self.k_wall @ rr))
            arriving = rr + self.e_wall * w
            out.append((f * (self.k_all @ arriving)).reshape(self.shape))
        w1, w3 = out
        phi1 += self.e_ray * w1
        phi3 += self.e_ray * (w3 + 1.5 * w1)
