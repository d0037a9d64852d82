"""Linearized Boltzmann gain term in the tube: spherical harmonics in the local frame, evaluated along chords.

Units and operator as ``knudsweep.solver.plane_channel.linearized_boltzmann``
(f = f_M (1 + h), c in v0, L h = -nu(c) h + K h in units of n d^2 v0, hard
spheres or VHS).  In the tube (axis z, radius 1) the flows driven along z have
h(r, c) odd in c_z and, in the local frame (e_r, e_psi, e_z) of the point,
even in the azimuth psi of c_perp measured from e_r.  With mu = c_z / c the
direction dependence is expanded in the real spherical harmonics

    h = sum_{l, m; l + m odd} a_lm(r, c) P_l^m(mu) cos(m psi),    1 <= l <= L, 0 <= m <= l,

and since K is isotropic, K[f(c) Y_lm] = (K_l f)(c) Y_lm with
(K_l f)(c) = int_0^inf c'^2 k_l(c, c') f(c') dc' and k_l the Legendre moments
of the kernel (Funk-Hecke; Hobson, The Theory of Spherical and Ellipsoidal
Harmonics, Cambridge 1931, Ch. VIII).  The plane channel's product-integration
matrices M_l (``speed_matrices``, for h = c_x Phi) give the speed matrices of
the tube directly: K_l = diag(c) M_l diag(1/c) (a_lm / c is the interpolated
function, as Phi there).  The l = 1 block holds the momentum invariant
a_10 = c (h = c_z); it is projected as in the plane channel,
L_1 <- Pi L_1 Pi with Pi = I - e w^T / (w^T e), e = c, w = (weights of
c^2 e^(-c^2)) c, so that the discrete operator conserves momentum exactly.

Velocity set: speeds c_k (Gauss rule of c^2 e^(-c^2), the plane channel's
``speed_rule``); polar angle theta of c to the axis by Gauss-Legendre on
(0, pi/2) with weight sin(theta) (mu = cos theta; h is odd in mu, so mu > 0
suffices; in theta the free-molecular factor mu / sqrt(1 - mu^2) of the
in-plane transit time is smooth); in-plane angle psi to the outward radius by
the tube's rule (Gauss-Legendre on [0, pi/2] and [pi/2, pi], the wall
discontinuity of h is at psi = pi/2).  The coefficients a_lm on the radial
nodes are the discrete projections of the nodal values (norms taken with the
same quadrature).  The harmonics are used as Y_lm - beta_lm mu with
beta_lm = Q(Y_lm mu) / Q(mu^2) for (l, m) != (1, 0) (Q the angular
quadrature; beta is a quadrature defect, < 1e-10 here), so the nodal gain
has exactly the momentum of the l = 1 block.

Spherical-harmonic gain along chords: the transport in the cross-section
runs along straight chords of fixed global direction of c_perp
(``knudsweep.solver.tube.kernels.build_rays``); along a chord the local
azimuth psi changes, so the gain at a chord point at radius rho and local
angle psi is

    kd (K h)(rho, psi, c_k, mu_j) = sum_m cos(m psi) C_m(rho, c_k, mu_j),
    C_m = kd sum_l (K_l a_lm)(rho, c_k) (P_l^m(mu_j) - beta_lm mu_j [m = 0]),

with C_m the cubic spline in rho through its nodal values (even in rho for m
even, odd for m odd: the coefficient of cos(m psi) of a smooth field behaves
like rho^m).  The source, a cubic through four Lobatto points per segment,
is integrated against exp(-kd nu s / c_perp) in closed form, as in the
model-equation sweep; Maxwell walls re-emit (1 - alpha) times the specular
value, summed over the repeated chord in closed form.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit, prange
from scipy.interpolate import CubicSpline
from scipy.special import lpmv

from knudsweep.solver.plane_channel import linearized_boltzmann as lb
from knudsweep.solver.tube.kernels import exp_moments

MOLECULES = ("hard_sphere", "vhs", "bgk")
SQRT_PI = math.sqrt(math.pi)


@dataclass
class TubeVelocitySet:
    """Speeds c_k, polar cosines mu_j (> 0), in-plane angles psi_m; harmonics (l, m), l + m odd, l <= L.

    Velocity index v = k * n_polar + j; nodal arrays h[i, m, v] (radial node i, angle m).
    """

    c: np.ndarray  # (nc,)
    wc: np.ndarray  # weights of c^2 e^(-c^2)
    mu: np.ndarray  # (n_polar,)
    wmu: np.ndarray  # weights of dmu on (0, 1)
    psi: np.ndarray  # (na,) in-plane angle to the outward radius
    wpsi: np.ndarray  # weights on (0, pi)
    n_legendre: int
    lm: list  # [(l, m)]
    analysis: np.ndarray  # (n_lm, na, n_polar): a_lm = sum analysis * h (per speed)
    synthesis: np.ndarray  # (n_lm, n_polar, M + 1): C_m contribution of (l, m) per polar node
    weight: np.ndarray  # (na, nv): u = sum weight * h  (pi^(-3/2) int c_z h e^(-c^2) d^3c)

    @property
    def nv(self) -> int:
        return self.c.size * self.mu.size

    def speed(self) -> np.ndarray:
        return np.repeat(self.c, self.mu.size)

    def polar(self) -> np.ndarray:
        return np.tile(self.mu, self.c.size)

    def c_perp(self) -> np.ndarray:
        return self.speed() * np.sqrt(1.0 - self.polar() ** 2)


def harmonic_indices(n_legendre: int) -> list[tuple[int, int]]:
    """(l, m) with l + m odd, 1 <= l <= n_legendre, 0 <= m <= l."""
    return [(l, m) for l in range(1, n_legendre + 1) for m in range(l + 1) if (l + m) % 2 == 1]


def polar_rule(n_polar: int, graded_smallest: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Polar cosines mu_j = cos(theta_j) and weights of dmu on (0, 1), theta = (pi/2) x.

    x by the plane channel's ``direction_rule`` (Gauss-Legendre on (0, 1), or, with
    graded_smallest, graded panels towards x = 0, i.e. towards molecules flying
    almost along the axis, whose in-plane transit time exp(-kd nu s / c_perp)
    varies on the scale theta ~ delta at small delta).
    """
    x, wx = lb.direction_rule(n_polar, graded_smallest)
    theta = 0.5 * np.pi * x
    return np.cos(theta), 0.5 * np.pi * wx * np.sin(theta)


def velocity_set(
    n_speed: int, n_polar: int, psi: np.ndarray, wpsi: np.ndarray, n_legendre: int, graded_smallest: float | None = None
) -> TubeVelocitySet:
    """The velocity set and the harmonic analysis/synthesis matrices (module docstring)."""
    c, wc = lb.speed_rule(n_speed)
    mu, wmu = polar_rule(n_polar, graded_smallest)
    n_polar = mu.size
    lm = harmonic_indices(n_legendre)
    cosm = np.cos(np.arange(n_legendre + 1)[:, None] * psi[None, :])  # (M+1, na)
    # Y[n, m_angle, j]; angular quadrature Q(f) = 4 sum wpsi wmu f (even in mu and psi over the sphere)
    Y = np.array([cosm[m][:, None] * lpmv(m, l, mu)[None, :] for l, m in lm])
    W = 4.0 * wpsi[:, None] * wmu[None, :]
    norm = np.einsum("nmj,nmj,mj->n", Y, Y, W)
    analysis = Y * W[None] / norm[:, None, None]
    mom = np.einsum("nmj,j,mj->n", Y, mu, W) / np.einsum("j,j,mj->", mu, mu, W)
    synthesis = np.zeros((len(lm), n_polar, n_legendre + 1))
    for n, (l, m) in enumerate(lm):
        synthesis[n, :, m] = lpmv(m, l, mu)
        if (l, m) != (1, 0):
            synthesis[n, :, 0] -= mom[n] * mu
    cz = np.outer(c, mu).ravel()  # c_z at v
    weight = 4.0 / SQRT_PI**3 * wpsi[:, None] * (np.outer(wc, wmu).ravel() * cz)[None, :]
    return TubeVelocitySet(c, wc, mu, wmu, psi, wpsi, n_legendre, lm, analysis, synthesis, weight)


def collision_blocks(vs: TubeVelocitySet, molecule: str, omega: float = 0.5) -> tuple[np.ndarray, list, float]:
    """(nu (nc,), [K_l (nc x nc), l = 1..L], kappa) with (K a)(c_k) = sum K_l[k, k'] a(c_k').

    molecule "hard_sphere"/"vhs": the linearized Boltzmann operator (module
    docstring), kappa = n d^2 mu v0 / p (``viscosity_factor``).  "bgk": the
    BGK operator L h = -h + 2 c_z u on the same velocity set (a check of the
    transport), nu = 1, K_1 = 2 c (4 / (3 sqrt(pi))) (w c)^T, kappa = 1.
    """
    c, wc = vs.c, vs.wc
    L = vs.n_legendre
    if molecule == "bgk":
        blocks = [np.zeros((c.size, c.size)) for _ in range(L)]
        blocks[0] = np.outer(2.0 * c, 4.0 / (3.0 * SQRT_PI) * wc * c)
        return np.ones(c.size), blocks, 1.0
    _, _, nu, M = lb.speed_matrices(c.size, max(L, 2), omega)
    blocks = [c[:, None] * M[l] / c[None, :] for l in range(L)]
    e, w = c, wc * c
    Pi = np.eye(c.size) - np.outer(e, w) / (w @ e)
    blocks[0] = Pi @ (blocks[0] - np.diag(nu)) @ Pi + np.diag(nu)
    return nu, blocks, lb.viscosity_factor(c.size, max(L, 2), omega)


def gain_coefficients(vs: TubeVelocitySet, blocks: list, kd: float, h: np.ndarray) -> np.ndarray:
    """C_m(r_i, v) of the module docstring from the nodal values h[i, m_angle, v]: array (M + 1, nr, nv)."""
    nr, na, _ = h.shape
    nc, npol = vs.c.size, vs.mu.size
    h4 = h.reshape(nr, na, nc, npol)
    a = np.einsum("nmj,imkj->nik", vs.analysis, h4)  # (n_lm, nr, nc)
    out = np.zeros((vs.n_legendre + 1, nr, nc, npol))
    for n, (l, _) in enumerate(vs.lm):
        g = kd * a[n] @ blocks[l - 1].T  # (nr, nc)
        out += np.einsum("ik,jM->Mikj", g, vs.synthesis[n])
    return out.reshape(vs.n_legendre + 1, nr, nc * npol)


def spline_coefficients(r: np.ndarray, C: np.ndarray) -> np.ndarray:
    """Cubic-spline coefficients coef[m, 4, nr - 1, nv] of C_m(r): even in r for m even, odd for m odd."""
    M1, _, nv = C.shape
    out = np.empty((M1, 4, r.size - 1, nv))
    zero = np.zeros(nv)
    for m in range(M1):
        bc = ((1, zero), "not-a-knot") if m % 2 == 0 else ((2, zero), "not-a-knot")
        out[m] = CubicSpline(r, C[m], bc_type=bc, axis=0).c
    return out


@njit(cache=True)
def _chord_integral(nseg, ds, jj, dr, cp, coef, c_perp, kappa, drive, vinv, src, tk, mom, acc, e0):
    """acc[v] = int_0^s_end S_v(s) / c_perp exp(-kappa_v s) ds, e0[v] = exp(-kappa_v s_end) along one backward ray."""
    nv = c_perp.size
    n_m = coef.shape[0]
    for v in range(nv):
        acc[v] = 0.0
        e0[v] = 1.0
    for sg in range(nseg):
        d = ds[sg]
        for p in range(4):
            k = 3 * sg + p
            j = jj[k]
            x = dr[k]
            cps = cp[k]
            tk[0] = 1.0
            if n_m > 1:
                tk[1] = cps
            for mm in range(2, n_m):
                tk[mm] = 2.0 * cps * tk[mm - 1] - tk[mm - 2]
            for v in range(nv):
                src[p, v] = drive[v]
            for mm in range(n_m):
                t = tk[mm]
                for v in range(nv):
                    src[p, v] += t * (
                        ((coef[mm, 0, j, v] * x + coef[mm, 1, j, v]) * x + coef[mm, 2, j, v]) * x + coef[mm, 3, j, v]
                    )
        for v in range(nv):
            e = exp_moments(kappa[v] * d, mom)
            total = 0.0
            for p in range(4):
                beta = vinv[0, p] * mom[0] + vinv[1, p] * mom[1] + vinv[2, p] * mom[2] + vinv[3, p] * mom[3]
                total += beta * src[p, v]
            acc[v] += e0[v] * d * total / c_perp[v]
            e0[v] *= e


@njit(cache=True, parallel=True)
def sweep(nseg, ds, jj, dr, cp, coef, c_perp, kappa, drive, reflect, vinv, out):
    """One transport sweep: out[i, m, v] at every radial node i, in-plane angle m, velocity v.

    Ray tables from ``tube.kernels.build_rays`` ([0] from the node, [1] the wall
    chord of the same impact parameter); reflect = 1 - alpha (Maxwell wall).
    """
    nr = nseg.shape[1]
    na = nseg.shape[2]
    nv = c_perp.size
    n_m = coef.shape[0]
    for idx in prange(nr * na):
        i = idx // na
        m = idx % na
        src = np.empty((4, nv))
        tk = np.empty(n_m)
        mom = np.empty(4)
        acc = np.empty(nv)
        e0 = np.empty(nv)
        _chord_integral(
            nseg[0, i, m], ds[0, i, m], jj[0, i, m], dr[0, i, m], cp[0, i, m],
            coef, c_perp, kappa, drive, vinv, src, tk, mom, acc, e0,
        )  # fmt: skip
        for v in range(nv):
            out[i, m, v] = acc[v]
        if reflect > 0.0:
            e_ray = e0.copy()
            _chord_integral(
                nseg[1, i, m], ds[1, i, m], jj[1, i, m], dr[1, i, m], cp[1, i, m],
                coef, c_perp, kappa, drive, vinv, src, tk, mom, acc, e0,
            )  # fmt: skip
            for v in range(nv):
                out[i, m, v] += e_ray[v] * reflect * acc[v] / (1.0 - reflect * e0[v])
