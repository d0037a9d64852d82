"""Wall reflection operators on the half-range velocity nodes.

With f = f_M (1 + h), a wall maps the incoming perturbation to the outgoing one
as  h_out = h_w + K[h_in - h_w],  h_w the (linearised) wall Maxwellian.  Both
wall laws used here factor into a tangential and a normal part, and h is
expanded in tangential Hermite functions of degree ``k``:

    k = 1: c_x                     (Poiseuille, thermal creep, Couette: Phi)
    k = 3: c_x (c_x^2 + c_z^2 - 2) (Psi)
    k = 0: 1                       (heat transfer: A)
    k = 2: c_x^2 + c_z^2 - 1       (heat transfer: B)

For each k the operator on the normal speed is a matrix R_k[i, j]
(outgoing node i <- incoming node j):

Maxwell diffuse-specular, accommodation alpha (Maxwell 1879):
    R_0 = (1 - alpha) I + alpha D,   R_k = (1 - alpha) I  (k >= 1),
    D[i, j] = w_j c_j / sum_l w_l c_l  (diffuse re-emission, flux-balanced).

Cercignani-Lampis (Cercignani & Lampis, Transp. Theory Stat. Phys. 1 (1971)
101): the tangential part is a Mehler kernel whose eigenfunctions are the
Hermite functions with eigenvalues (1 - alpha_t)^k, so R_k = (1 - alpha_t)^k N,
with the normal kernel in h-form

    N(c' -> c) = (2 c'/alpha_n) exp(-(c'^2 + (1 - alpha_n) c^2) / alpha_n)
                 I0(2 sqrt(1 - alpha_n) c c' / alpha_n)

integrated over c' with the node weights.  It preserves constants exactly in
the continuum; on the nodes it does so up to quadrature error, which is
measured (``kernel_defect``) and then removed by a symmetric diagonal scaling
that keeps the discrete reciprocity  w_i c_i N_ij = w_j c_j N_ji  and makes
rows sum to one (so mass flux is conserved at the wall).
"""

from __future__ import annotations

import numpy as np
from scipy.special import i0e

from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall


def diffuse_matrix(c: np.ndarray, w: np.ndarray) -> np.ndarray:
    """D[i, j] = w_j c_j / sum_l w_l c_l: full accommodation of the normal speed."""
    flux = w * c
    return np.tile(flux / flux.sum(), (c.size, 1))


def cercignani_lampis_normal_matrix(c: np.ndarray, w: np.ndarray, alpha_n: float) -> tuple[np.ndarray, float]:
    """Normal-speed CL kernel on the nodes, and its defect max_i |sum_j N_ij - 1| before scaling.

    c, w : positive half-range nodes and weights (weights include exp(-c^2)).
    """
    if alpha_n >= 1.0:
        D = diffuse_matrix(c, w)
        return D, abs(2.0 * (w * c).sum() - 1.0)
    ci = c[:, None]
    cj = c[None, :]
    z = 2.0 * np.sqrt(1.0 - alpha_n) * ci * cj / alpha_n
    # w_j e^{c_j^2} (2 c_j/a) exp(-(c_j^2 + (1-a) c_i^2)/a) I0(z), written with
    # i0e(z) = I0(z) e^{-z} so that every factor stays bounded:
    expo = cj**2 - (cj - np.sqrt(1.0 - alpha_n) * ci) ** 2 / alpha_n
    N = w[None, :] * (2.0 * cj / alpha_n) * np.exp(expo) * i0e(z)
    defect = float(np.max(np.abs(N.sum(axis=1) - 1.0)))
    # symmetric scaling of A = diag(wc) N (symmetric by reciprocity) so that
    # A 1 = wc, i.e. N 1 = 1 and the column flux balance both hold.
    flux = w * c
    A = flux[:, None] * N
    A = 0.5 * (A + A.T)
    # symmetric Sinkhorn iteration s <- sqrt(s * flux / (A s)) (Knight,
    # SIAM J. Matrix Anal. Appl. 30 (2008) 261); the defect is small, so it
    # converges in a few dozen steps.
    s = np.ones_like(c)
    for _ in range(500):
        s_new = np.sqrt(s * flux / (A @ s))
        done = np.max(np.abs(s_new / s - 1.0)) < 1e-15
        s = s_new
        if done:
            break
    A = s[:, None] * A * s[None, :]
    return A / flux[:, None], defect


def reflection_matrix(
    wall: MaxwellWall | CercignaniLampisWall, degree: int, c: np.ndarray, w: np.ndarray
) -> tuple[np.ndarray, float]:
    """R_degree for ``wall`` on nodes (c, w), and the kernel defect (0 for Maxwell)."""
    m = c.size
    if isinstance(wall, MaxwellWall):
        R = (1.0 - wall.alpha) * np.eye(m)
        if degree == 0:
            R += wall.alpha * diffuse_matrix(c, w)
        return R, 0.0
    if isinstance(wall, CercignaniLampisWall):
        N, defect = cercignani_lampis_normal_matrix(c, w, wall.alpha_n)
        return (1.0 - wall.alpha_t) ** degree * N, defect
    raise ValueError(f"wall: must be a MaxwellWall or CercignaniLampisWall, got {type(wall).__name__}")


def wall_operators(wall, degrees: tuple[int, int], c: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, float]:
    """Stacked R[comp] for the two unknowns (tangential degrees ``degrees``) and the max defect."""
    mats, defects = zip(*(reflection_matrix(wall, k, c, w) for k in degrees), strict=True)
    return np.ascontiguousarray(np.stack(mats)), max(defects)
