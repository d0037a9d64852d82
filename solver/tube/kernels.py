"""Numba kernels of the tube: backward rays to the wall, the sweep along them, the moments.

The transport equation of ``knudsweep.solver.cross_section`` is solved exactly along
straight characteristics (long characteristics): for a point at radius r and
in-plane direction at angle theta to the outward radius, the backward ray to
the wall is cut at every radial grid circle it crosses; the source, a cubic
through four Lobatto points per segment, is integrated against
exp(-nu delta s / c) in closed form.  At a Maxwell wall (accommodation
alpha) (1 - alpha) times the arriving value is re-emitted (the diffuse part
carries no c_x-odd perturbation); in a circle every specular reflection
repeats the same chord, so the multiple reflections sum to a geometric series
in closed form inside the sweep.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

# Four Lobatto points per segment; the source along a segment is the cubic
# through them, integrated against exp(-kappa s) in closed form.
_LOBATTO = np.array([0.0, 0.5 - 0.5 / math.sqrt(5.0), 0.5 + 0.5 / math.sqrt(5.0), 1.0])
# inverse Vandermonde: monomial coefficients a_n = sum_p VINV[n, p] S_p in tau = t / Delta
VINV = np.linalg.inv(np.vander(_LOBATTO, 4, increasing=True))


@njit(cache=True)
def _locate(r_nodes, rho):
    """Interval j (r_j <= rho <= r_{j+1}) of the radial grid."""
    n = r_nodes.size
    if rho >= r_nodes[n - 1]:
        return n - 2
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if r_nodes[mid] <= rho:
            lo = mid
        else:
            hi = mid
    return lo


@njit(cache=True)
def _ray_samples(r_nodes, r0, mu, s_end, work, out_ds, out_j, out_dr, out_cpsi):
    """Segments and sample points of the backward ray X(s) = P - s e, |P| = r0, e.P/|P| = mu.

    Breakpoints: 0, s_end, every crossing of a grid circle and the point of
    closest approach; each segment gets the four Lobatto points.  Fills
    out_ds (segment lengths), and for the 3 n_seg + 1 samples the radial
    interval j, rho - r_j and cos(psi) (psi = angle between e and the local
    outward radius).  Returns the number of segments.
    """
    b2 = r0 * r0 * (1.0 - mu * mu)
    if b2 < 0.0:
        b2 = 0.0
    n = 0
    work[n] = 0.0
    n += 1
    st = r0 * mu
    for jj in range(r_nodes.size):
        rj = r_nodes[jj]
        d = rj * rj - b2
        if d <= 0.0:
            continue
        sq = math.sqrt(d)
        for sgn in (-1.0, 1.0):
            s = st + sgn * sq
            if s > 1e-13 and s < s_end - 1e-13:
                work[n] = s
                n += 1
    if st > 1e-13 and st < s_end - 1e-13:
        work[n] = st
        n += 1
    work[n] = s_end
    n += 1
    work[:n] = np.sort(work[:n])
    m = 1
    for k in range(1, n):
        if work[k] - work[m - 1] > 1e-13:
            work[m] = work[k]
            m += 1
    work[m - 1] = s_end
    nseg = m - 1
    for k in range(nseg):
        out_ds[k] = work[k + 1] - work[k]
    for k in range(max(nseg, 0) * 3 + 1):
        seg = min(k // 3, max(nseg - 1, 0))
        p = k - 3 * seg
        if nseg == 0:
            s = 0.0
        else:
            s = work[seg] + _LOBATTO[p] * (work[seg + 1] - work[seg])
        rho2 = r0 * r0 - 2.0 * r0 * mu * s + s * s
        rho = math.sqrt(rho2) if rho2 > 0.0 else 0.0
        if rho > 1.0:
            rho = 1.0
        j = _locate(r_nodes, rho)
        out_j[k] = j
        out_dr[k] = rho - r_nodes[j]
        out_cpsi[k] = (st - s) / rho if rho > 1e-14 else 0.0
    return nseg


@njit(cache=True)
def build_rays(r_nodes, cos_th):
    """Tables of the backward rays from every (node, angle) [0] and of the wall chords [1]."""
    nr = r_nodes.size
    na = cos_th.size
    nbmax = 2 * nr + 4
    nsmax = 3 * nbmax + 1
    nseg = np.zeros((2, nr, na), dtype=np.int64)
    ds = np.zeros((2, nr, na, nbmax))
    jj = np.zeros((2, nr, na, nsmax), dtype=np.int64)
    dr = np.zeros((2, nr, na, nsmax))
    cp = np.zeros((2, nr, na, nsmax))
    work = np.zeros(nbmax)
    for i in range(nr):
        r0 = r_nodes[i]
        for m in range(na):
            mu = cos_th[m]
            b2 = r0 * r0 * (1.0 - mu * mu)
            root = math.sqrt(max(1.0 - b2, 0.0))
            s_end = r0 * mu + root
            nseg[0, i, m] = _ray_samples(
                r_nodes, r0, mu, s_end, work, ds[0, i, m], jj[0, i, m], dr[0, i, m], cp[0, i, m]
            )
            # the chord that arrives at the wall with the same impact parameter
            nseg[1, i, m] = _ray_samples(
                r_nodes, 1.0, root, 2.0 * root, work, ds[1, i, m], jj[1, i, m], dr[1, i, m], cp[1, i, m]
            )
    return nseg, ds, jj, dr, cp


@njit(cache=True, parallel=True)
def sample_fields(nseg, jj, dr, coef_u, coef_q, coef_t, out):
    """Cubic-spline values of u, q, tau at every ray sample: out[field, ray, i, m, p].

    coef_* are the per-interval cubic coefficients (highest power first).
    """
    nr = nseg.shape[1]
    na = nseg.shape[2]
    for idx in prange(2 * nr * na):
        ray = idx // (nr * na)
        rest = idx % (nr * na)
        i = rest // na
        m = rest % na
        npts = 3 * nseg[ray, i, m] + 1
        for p in range(npts):
            j = jj[ray, i, m, p]
            x = dr[ray, i, m, p]
            out[0, ray, i, m, p] = ((coef_u[0, j] * x + coef_u[1, j]) * x + coef_u[2, j]) * x + coef_u[3, j]
            out[1, ray, i, m, p] = ((coef_q[0, j] * x + coef_q[1, j]) * x + coef_q[2, j]) * x + coef_q[3, j]
            out[2, ray, i, m, p] = ((coef_t[0, j] * x + coef_t[1, j]) * x + coef_t[2, j]) * x + coef_t[3, j]


@njit(cache=True)
def exp_moments(x, out):
    """out[n] = int_0^1 t^n exp(-x t) dt, n = 0..3; returns exp(-x).

    Taylor series for x < 0.5 (14 terms: remainder < 0.5^14/14! ~ 1e-15);
    upward recurrence otherwise (amplifies rounding by at most n!/x^n = 48).
    """
    e = math.exp(-x)
    if x < 0.5:
        for n in range(4):
            term = 1.0
            acc = 0.0
            for k in range(14):
                acc += term / (n + k + 1.0)
                term *= -x / (k + 1.0)
            out[n] = acc
    else:
        out[0] = (1.0 - e) / x
        for n in range(1, 4):
            out[n] = (n * out[n - 1] - e) / x
    return e


@njit(cache=True)
def _ray_integral(nseg, ds, fields, ray, i, m, cpsi, kappa, c, src, vinv, mom):
    """int_0^s_end S(s)/c exp(-kappa s) ds for both reduced functions.

    S1 = src[0] u + (src[1] + src[2] c^2) q + src[3] c cos(psi) tau + src[4] + src[5] c^2 (Phi1)
    S3 likewise with src[6:12] (Phi3).  Returns (I1, I3, exp(-kappa s_end)).
    """
    i1 = 0.0
    i3 = 0.0
    e0 = 1.0
    c2 = c * c
    k1q = src[1] + src[2] * c2
    k1d = src[4] + src[5] * c2
    k3q = src[7] + src[8] * c2
    k3d = src[10] + src[11] * c2
    for sg in range(nseg):
        d = ds[sg]
        e = exp_moments(kappa * d, mom)
        acc1 = 0.0
        acc3 = 0.0
        for p in range(4):
            k = 3 * sg + p
            uu = fields[0, ray, i, m, k]
            qq = fields[1, ray, i, m, k]
            tt = fields[2, ray, i, m, k] * c * cpsi[k]
            s1 = src[0] * uu + k1q * qq + src[3] * tt + k1d
            s3 = src[6] * uu + k3q * qq + src[9] * tt + k3d
            beta = vinv[0, p] * mom[0] + vinv[1, p] * mom[1] + vinv[2, p] * mom[2] + vinv[3, p] * mom[3]
            acc1 += beta * s1
            acc3 += beta * s3
        i1 += e0 * d * acc1 / c
        i3 += e0 * d * acc3 / c
        e0 *= e
    return i1, i3, e0


@njit(cache=True, parallel=True)
def sweep(nseg, ds, cp, fields, c_nodes, nu_delta, reflect, src, vinv, phi1, phi3):
    """One transport sweep: phi[i, m, k] for every node i, angle m, speed k.

    reflect = 1 - alpha (Maxwell wall).  prange over the in-plane velocities.
    """
    nr = nseg.shape[1]
    na = nseg.shape[2]
    nc = c_nodes.size
    for idx in prange(na * nc):
        m = idx // nc
        k = idx % nc
        c = c_nodes[k]
        kappa = nu_delta / c
        mom = np.zeros(4)
        for i in range(nr):
            r1, r3, e_ray = _ray_integral(
                nseg[0, i, m], ds[0, i, m], fields, 0, i, m, cp[0, i, m], kappa, c, src, vinv, mom
            )
            w1 = 0.0
            w3 = 0.0
            if reflect > 0.0:
                c1, c3, e_ch = _ray_integral(
                    nseg[1, i, m], ds[1, i, m], fields, 1, i, m, cp[1, i, m], kappa, c, src, vinv, mom
                )
                den = 1.0 - reflect * e_ch
                w1 = reflect * c1 / den
                w3 = reflect * c3 / den
            phi1[i, m, k] = r1 + e_ray * w1
            phi3[i, m, k] = r3 + e_ray * w3


@njit(cache=True)
def moments(phi1, phi3, weight, c_nodes, cos_th, u, tau, q):
    """u, tau (radial shear), q at every node from the reduced functions."""
    nr, na, nc = phi1.shape
    for i in range(nr):
        su = 0.0
        st = 0.0
        sq = 0.0
        for m in range(na):
            for k in range(nc):
                w = weight[m, k]
                p1 = phi1[i, m, k]
                c = c_nodes[k]
                su += w * p1
                st += w * c * cos_th[m] * p1
                sq += w * (phi3[i, m, k] + (c * c - 2.5) * p1)
        u[i] = su
        tau[i] = st
        q[i] = sq
