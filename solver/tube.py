"""Fully developed rarefied flow through a long circular tube (linearized kinetic models).

Equations
---------
The tube has radius a; lengths are in units of a, velocities in units of
v0 = sqrt(2kT/m), and delta = p a / (mu v0).  The perturbation h of the
Maxwellian (f = f_M (1 + h)) obeys, for the pressure gradient X_P = -(a/p) dp/dx
(``"poiseuille"``) or the temperature gradient X_T = (a/T) dT/dx
(``"thermal_creep"``), per unit gradient,

    c_perp . grad h + nu delta h = nu delta [2 c_x u + model term] + c_x            (poiseuille)
    c_perp . grad h + nu delta h = nu delta [2 c_x u + model term] - c_x (c^2 - 5/2) (thermal creep)

(nu = collision-frequency factor of the model, ``knudsweep.solver.kinetic_models``).  The
streaming operator does not touch c_x, so c_x is integrated out exactly: with
w(c_x) = exp(-c_x^2)/sqrt(pi) the two reduced functions

    Phi1 = int c_x h w dc_x ,     Phi3 = int c_x^3 h w dc_x

obey the same 2-D transport equation in the cross-section with in-plane
velocity c_perp = c (cos theta, sin theta) and closed sources (c_x-moments
int c_x^2 w = 1/2, c_x^4 w = 3/4, c_x^6 w = 15/8).  Moments:

    u   = (1/pi) int Phi1 exp(-c^2) d^2c                       (flow velocity)
    tau = (1/pi) int c_perp Phi1 exp(-c^2) d^2c                (shear stress P_x./(2p))
    q   = (1/pi) int [Phi3 + (c^2 - 5/2) Phi1] exp(-c^2) d^2c  (heat flux)

and the reduced flow rates (Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27
(1998) 657, normalisation of check-values 0.2)

    G = 4 int_0^1 u r dr ,     Q = -4 int_0^1 q r dr .

G is G_P or G_T, Q is Q_P or Q_T; Onsager reciprocity gives Q_P = G_T
(Sharipov, Physica A 203 (1994) 437).  In the free-molecular limit
G_P = 8/(3 sqrt(pi)) (Knudsen, Ann. Phys. 28 (1909) 75).

Method
------
Because the tube is axially symmetric the moments depend on r only, and the
transport equation is solved exactly along straight characteristics (long
characteristics): for a point at radius r and in-plane direction at angle
theta to the outward radius, the backward ray to the wall is cut at every
radial grid circle it crosses; the source, piecewise linear in between, is
integrated against exp(-nu delta s / c) in closed form.  At the wall a Maxwell
diffuse-specular law (accommodation alpha) re-emits (1 - alpha) times the
arriving value (the diffuse part carries no c_x-odd perturbation); in a circle
every specular reflection repeats the same chord, so the multiple reflections
sum to a geometric series in closed form.  A Cercignani-Lampis wall
(Cercignani & Lampis, Transp. Theory Stat. Phys. 1 (1971) 101) is solved
exactly within each sweep as a small dense linear system on the wall's
velocity nodes (:class:`_TubeCLWall`).

Iteration: source iteration on the moments (u, q, tau), accelerated by a
synthetic step (diffusion-type correction in the spirit of the general
synthetic iterative scheme of Su, Zhu & Wu, J. Comput. Phys. 407 (2020)
109245): the exact momentum balance of the error, div tau_e = nu delta R with R
the change of u in the sweep, is closed by the Navier-Stokes relation
tau_e = -grad u_e / (2 delta) and a first-order slip condition; the
correction u_e is added to u.  It vanishes at the fixed point, so accelerated
and plain iteration converge to the same discrete solution.
"""

from __future__ import annotations

import math
import time

import numpy as np
from numba import njit, prange
from scipy.interpolate import CubicSpline
from scipy.linalg import lu_factor, lu_solve
from scipy.special import i0e

from knudsweep.solver.kinetic_models import get_model
from knudsweep.solver.quadrature import half_range_hermite, log_linear_half_range
from knudsweep.solver.resolution import attach_estimate, check_estimate_options  # noqa: F401  (re-exported for knudsweep.solver.duct)
from knudsweep.solver.resolution import solve_with_estimate as _shared_solve_with_estimate
from knudsweep.solver.result import FAILED, CONVERGED, ConvergenceRecord, Quantity, SolverResult
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

__all__ = ["solve_tube", "PROBLEMS", "TubeGrid", "resolution_ladder"]

PROBLEMS = ("poiseuille", "thermal_creep")
MAX_DELTA = 1.0e3  # tube thermal creep: G_T delta 0.776 at 1e3 but 0.830 at 3e3 on the default grid; Poiseuille diverged at 1e4
# First-order slip coefficient of the diffuse wall used only inside the
# acceleration step (the converged answer does not depend on it): BGK value
# 1.0162 in units of mu v0 / p (check-values section 2, from memory).
_ACCEL_SLIP = 1.0162
_CL_BLOCK = 2_000_000  # kernel entries evaluated per block in _TubeCLWall (bounds temporary memory)


# --------------------------------------------------------------------------
# checked inputs shared with the duct solver
# --------------------------------------------------------------------------
def check_common(problem, delta, model, wall, tol, max_iter, family, max_delta=None):
    """Validate the common arguments; return the kinetic-model object.

    max_delta : upper end of the allowed delta range (default MAX_DELTA).
    """
    if problem not in PROBLEMS:
        raise ValueError(f"problem: must be one of {', '.join(PROBLEMS)}, got {problem!r}")
    top = MAX_DELTA if max_delta is None else max_delta
    d = float(delta)
    if not (math.isfinite(d) and 0.0 <= d <= top):
        raise ValueError(
            f"delta: must be in [0, {top:g}] for the {family} solver (larger delta is not resolved "
            f"reliably; use the slip-flow asymptote there), got {delta!r}"
        )
    km = get_model(model)
    if not isinstance(wall, (MaxwellWall, CercignaniLampisWall)):
        raise ValueError(f"wall: must be a MaxwellWall or CercignaniLampisWall, got {type(wall).__name__}")
    t = float(tol)
    if not (0.0 < t < 1.0):
        raise ValueError(f"tol: must be in (0, 1), got {tol!r}")
    if max_iter is not None and (isinstance(max_iter, bool) or int(max_iter) != max_iter or int(max_iter) < 1):
        raise ValueError(f"max_iter: must be an integer >= 1, got {max_iter!r}")
    return km


def tangential_accommodation(wall) -> float:
    """alpha (Maxwell) or alpha_t (Cercignani-Lampis): used by the slip estimate of the acceleration step."""
    return wall.alpha if isinstance(wall, MaxwellWall) else min(wall.alpha_t, 1.0)


def inplane_cl_kernel(cn_out, ct_out, cn_in, ct_in, w_in, alpha_t, alpha_n):
    """Cercignani-Lampis reflection of the in-plane velocity, h-form, on quadrature nodes.

    Returns (K, defect): h_out(o) = sum_j K[o, j] h_in(j) for outgoing in-plane
    velocities (normal speed cn_out >= 0 away from the wall, tangential ct_out)
    and arriving nodes (cn_in > 0 towards the wall, ct_in) with weights w_in
    for int d^2c' exp(-c'^2) (.).  Kernel (Cercignani & Lampis, Transp.
    Theory Stat. Phys. 1 (1971) 101), written for h by reciprocity:

        h_out(c) = int N(c_n'; c_n) T(c_t'; c_t) h_in(c') d^2c',
        N = (2 c_n'/a_n) exp(-(c_n'^2 + (1 - a_n) c_n^2)/a_n) I0(2 sqrt(1 - a_n) c_n c_n'/a_n),
        T = exp(-(c_t' - (1 - a_t) c_t)^2 / (a_t (2 - a_t))) / sqrt(pi a_t (2 - a_t)).

    Both integrate to one over c', so constants are kept; on the nodes they
    do so up to quadrature error ``defect`` = max |row sum - 1|, which is then
    removed by scaling each row (a normalised Nystrom evaluation).
    """
    cn = np.asarray(cn_out, float)[:, None]
    ct = np.asarray(ct_out, float)[:, None]
    cni = np.asarray(cn_in, float)[None, :]
    cti = np.asarray(ct_in, float)[None, :]
    root = math.sqrt(max(1.0 - alpha_n, 0.0))
    var_t = alpha_t * (2.0 - alpha_t)
    # exp(c'^2) N T written so that each exponent stays bounded (i0e = I0 e^-z)
    z = 2.0 * root * cn * cni / alpha_n
    expo = cni**2 - (cni - root * cn) ** 2 / alpha_n + cti**2 - (cti - (1.0 - alpha_t) * ct) ** 2 / var_t
    k = (2.0 * cni / alpha_n) * np.exp(expo) * i0e(z) / math.sqrt(math.pi * var_t) * np.asarray(w_in, float)[None, :]
    rows = k.sum(axis=1)
    defect = float(np.max(np.abs(rows - 1.0)))
    return k / rows[:, None], defect


# Speed rule for 0 < delta < GRADED_BELOW (log_linear_half_range): 4-point
# Gauss-Legendre panels, n_speed / 8 panels per unit of t = log10(c) + c
# (16 speeds: 2 per decade near c = 0, 8 over [1e-3, 1]), n_speed / 2 nodes on
# [1, inf).  Measured against a 5-point, 20-per-decade reference on the same
# (41, 24) space-angle grid, BGK, G_P and Q_P: relative error 1.3e-7 (delta
# 0.01), 5e-8 (0.1), 4e-9 (0.5), 7e-10 (0.9) with 16 speeds, falling 6 to 13x
# per 4/3 more speeds (12 -> 16 -> 21).  The former rule (3 points, 2 fixed
# panels per decade, only the outer nodes grew) erred by 2e-5 to 9e-5 there
# whatever the speed count.
GRADED_BELOW = 1.0
_SPEED_PANEL_DENSITY = 1.0 / 8.0  # panels per unit of t, per speed node
_SPEED_POINTS = 4


def speed_rule(n_speed: int, delta: float):
    """In-plane speed rule for int_0^inf c exp(-c^2) g(c) dc: nodes c_k, weights (sum 1/2).

    delta = 0 or >= GRADED_BELOW: half-range Hermite rule with n_speed nodes
    (``knudsweep.solver.quadrature``), weights times c.  0 < delta < GRADED_BELOW: the
    factor exp(-nu delta s / c) of a ray of length s varies on every scale
    c ~ delta s < 1, so a composite rule (:func:`log_linear_half_range`, from
    max(min(1e-3, delta/10), 1e-7) to 1) whose every panel narrows as n_speed
    grows: the coarser level of the error estimate then sees the speed error.
    """
    if delta >= GRADED_BELOW or delta == 0.0:
        c, w = half_range_hermite(n_speed)
    else:
        smallest = max(min(1e-3, 0.1 * delta), 1e-7)
        c, w = log_linear_half_range(_SPEED_PANEL_DENSITY * n_speed, smallest, split=1.0, slope=1.0,
                                     points_per_panel=_SPEED_POINTS, n_outer=max(4, n_speed // 2))
    return c, w * c


def source_polynomials(problem: str, heat_coef: float, stress_coef: float):
    """Coefficients of the reduced sources (see module docstring).

    Returns a dict with, for Phi1 and Phi3 respectively, the factors that
    multiply u, q (times a polynomial in c^2), tau (times c_perp) and the drive.
    For a c_x g(c) term the Phi1/Phi3 sources are g/2 and 3g/4; for c_x^3 k(c)
    they are 3k/4 and 15k/8.
    """
    # drive: poiseuille c_x -> (1/2, 3/4) ; thermal -c_x(c^2-5/2) = -c_x(c_p^2-5/2) - c_x^3
    if problem == "poiseuille":
        d1 = (0.5, 0.0)  # constant, c^2-coefficient
        d3 = (0.75, 0.0)
    else:
        d1 = (0.5, -0.5)  # -(c^2 - 1)/2
        d3 = (0.0, -0.75)  # -(3/4) c^2
    return {
        "u1": 1.0,
        "u3": 1.5,
        # Shakhov term K c_x (c^2-5/2) q: Phi1 K q (c^2-1)/2 ; Phi3 (3/4) K q c^2
        "q1": (-0.5 * heat_coef, 0.5 * heat_coef),
        "q3": (0.0, 0.75 * heat_coef),
        # ES term 4 b c_x (c_perp . tau): Phi1 2 b ; Phi3 3 b
        "t1": 2.0 * stress_coef,
        "t3": 3.0 * stress_coef,
        "d1": d1,
        "d3": d3,
    }


def heat_coefficient(km) -> float:
    """Shakhov gain factor (4/5)(1 - Pr) (= 4/15 for Pr = 2/3) or 0."""
    return 0.8 * (1.0 - km.prandtl) if km.heat_flux_term else 0.0


# --------------------------------------------------------------------------
# geometry of the characteristics
# --------------------------------------------------------------------------
# Four Lobatto points per segment; the source along a segment is the cubic
# through them, integrated against exp(-kappa s) in closed form.
_LOBATTO = np.array([0.0, 0.5 - 0.5 / math.sqrt(5.0), 0.5 + 0.5 / math.sqrt(5.0), 1.0])
# inverse Vandermonde: monomial coefficients a_n = sum_p _VINV[n, p] S_p in tau = t / Delta
_VINV = np.linalg.inv(np.vander(_LOBATTO, 4, increasing=True))


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
def _build_rays(r_nodes, cos_th):
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
            nseg[0, i, m] = _ray_samples(r_nodes, r0, mu, s_end, work, ds[0, i, m], jj[0, i, m], dr[0, i, m], cp[0, i, m])
            # the chord that arrives at the wall with the same impact parameter
            nseg[1, i, m] = _ray_samples(r_nodes, 1.0, root, 2.0 * root, work, ds[1, i, m], jj[1, i, m], dr[1, i, m], cp[1, i, m])
    return nseg, ds, jj, dr, cp


@njit(cache=True, parallel=True)
def _sample_fields(nseg, jj, dr, coef_u, coef_q, coef_t, out):
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
def _exp_moments(x, out):
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
        e = _exp_moments(kappa * d, mom)
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
def _sweep(nseg, ds, cp, fields, c_nodes, nu_delta, reflect, src, vinv, phi1, phi3):
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
            r1, r3, e_ray = _ray_integral(nseg[0, i, m], ds[0, i, m], fields, 0, i, m, cp[0, i, m], kappa, c, src, vinv, mom)
            w1 = 0.0
            w3 = 0.0
            if reflect > 0.0:
                c1, c3, e_ch = _ray_integral(nseg[1, i, m], ds[1, i, m], fields, 1, i, m, cp[1, i, m], kappa, c, src, vinv, mom)
                den = 1.0 - reflect * e_ch
                w1 = reflect * c1 / den
                w3 = reflect * c3 / den
            phi1[i, m, k] = r1 + e_ray * w1
            phi3[i, m, k] = r3 + e_ray * w3


@njit(cache=True)
def _moments(phi1, phi3, weight, c_nodes, cos_th, u, tau, q):
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


# --------------------------------------------------------------------------
# grid, acceleration, integrals
# --------------------------------------------------------------------------
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


class _RadialDiffusion:
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


class _TubeCLWall:
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

    def __init__(self, grid: "TubeGrid", wall: CercignaniLampisWall, nu_delta: float):
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
            step = max(1, _CL_BLOCK // (2 * nw))
            for a in range(0, cn_out.size, step):
                k, d = inplane_cl_kernel(cn_out[a:a + step], ct_out[a:a + step], cn_in2, ct_in2, w_in2, wall.alpha_t, wall.alpha_n)
                out[a:a + step] = k[:, :nw] + k[:, nw:]
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
        for rr, f, lu in zip((r1, r3), self.f, self.lu):
            w = lu_solve(lu, f * (self.k_wall @ rr))
            arriving = rr + self.e_wall * w
            out.append((f * (self.k_all @ arriving)).reshape(self.shape))
        w1, w3 = out
        phi1 += self.e_ray * w1
        phi3 += self.e_ray * (w3 + 1.5 * w1)


def default_sizes(delta: float) -> tuple[int, int, int]:
    """(radial nodes, angles on the half circle, speeds) used when not given."""
    n_space = 41 if delta <= 100 else 61
    return n_space, 24, 16


def _sizes(n_space, n_velocity, delta):
    ns, na, nc = default_sizes(delta)
    if n_space is not None:
        if isinstance(n_space, bool) or int(n_space) != n_space or not 5 <= int(n_space) <= 2001:
            raise ValueError(f"n_space: must be an integer in [5, 2001], got {n_space!r}")
        ns = int(n_space)
    if n_velocity is not None:
        if isinstance(n_velocity, bool) or int(n_velocity) != n_velocity or not 4 <= int(n_velocity) <= 128:
            raise ValueError(f"n_velocity: must be an integer in [4, 128], got {n_velocity!r}")
        nc = int(n_velocity)
        na = 2 * ((int(1.5 * nc) + 1) // 2)
    return ns, na, nc


# --------------------------------------------------------------------------
# discretization error estimate and accuracy target (shared with the duct solver)
# --------------------------------------------------------------------------
# Error reduction per ladder step assumed by the Richardson estimate
# (knudsweep.solver.resolution).  Measured for the tube, BGK, diffuse wall, G_P and Q_P at
# delta = 0.1 and 10 on (21, 12) -> (41, 16) -> (81, 32): 11 to 12 per step
# (space error dominates; long characteristics with a cubic source).  6 keeps
# the estimate about twice the actual error, on the safe side.
TUBE_ASSUMED_RATIO = 6.0
# Cap of the accuracy ladder: entries of the ray tables 2 n_r n_angle (6 n_r + 13)
# (six float/int tables of this size, ~50 bytes per entry); (81, 21) has 2.6e6,
# (121, 21) 5.7e6, (161, 28) 1.3e7 (over 600 MB) is left out.
TUBE_MAX_RAY_ENTRIES = 6_000_000


def coarser_level(n_space: int, n_velocity: int) -> tuple[int, int]:
    """One ladder step down: half the spatial intervals, 3/4 of the speed nodes (at least 5 and 4)."""
    return max(5, (n_space - 1) // 2 + 1), max(4, int(round(0.75 * n_velocity)))


def nested_ladder(n_default: int, v_default: int, n_min: int, fits) -> list[tuple[int, int]]:
    """Levels (n_space, n_velocity), coarse to fine, through the default (n_default, v_default).

    n_space - 1 (the number of intervals) halves per step down while it stays
    even and n_space >= n_min, and doubles per step up while ``fits(ns, nv)``;
    n_velocity = v_default (4/3)^k at step k from the default (at least 4).
    """
    spans, down = n_default - 1, 0
    while spans % 2 == 0 and spans // 2 + 1 >= n_min:
        spans //= 2
        down += 1
    levels = []
    k = -down
    while True:
        ns = spans * 2 ** (k + down) + 1
        nv = max(4, int(round(v_default * (4.0 / 3.0) ** k)))
        if not fits(ns, nv):
            return levels
        levels.append((ns, nv))
        k += 1


def resolution_ladder(delta: float) -> list[tuple[int, int]]:
    """(n_space, n_velocity) tried for an accuracy target in the tube, coarse to fine.

    Nested radial grids through the default (41 nodes: 6, 11, 21, 41, 81;
    61 nodes for delta > 100: 16, 31, 61, 121), speeds 16 (4/3)^k; capped by
    TUBE_MAX_RAY_ENTRIES.
    """
    ns, _, nv = default_sizes(float(delta))

    def fits(n, v):
        na = _sizes(n, v, delta)[1]
        return 2 * n * na * (6 * n + 13) <= TUBE_MAX_RAY_ENTRIES

    return nested_ladder(ns, nv, 6, fits)


def solve_with_estimate(run, n_space, n_velocity, *, tol, accuracy, error_estimate, ladder, assumed_ratio, t_start):
    """Tube/duct entry to the shared driver :func:`knudsweep.solver.resolution.solve_with_estimate`.

    The coarse level of the estimate is :func:`coarser_level` (half the spatial
    intervals, 3/4 of the speed nodes).
    """
    return _shared_solve_with_estimate(
        run, n_space, n_velocity, tol=tol, accuracy=accuracy, error_estimate=error_estimate,
        ladder=ladder, coarse_level=coarser_level(n_space, n_velocity), t_start=t_start,
        assumed_ratio=assumed_ratio,
        coarse_how="one coarser step (half the spatial intervals, 3/4 of the speed nodes)",
        ladder_how="accuracy-driven refinement along the resolution ladder",
    )


def solve_tube(
    problem: str,
    *,
    delta: float,
    model: str = "bgk",
    wall: MaxwellWall | CercignaniLampisWall = MaxwellWall(1.0),
    n_space: int | None = None,
    n_velocity: int | None = None,
    max_iter: int | None = None,
    tol: float = 1e-8,
    accelerate: bool = True,
    accuracy: float | None = None,
    error_estimate: bool = True,
) -> SolverResult:
    """Solve Poiseuille or thermal-creep flow in a long tube; see the module docstring.

    delta : rarefaction parameter p a / (mu v0) on the radius a, in [0, MAX_DELTA = 1e3]
            (0 = free-molecular, one sweep).
    n_space : radial nodes; n_velocity : in-plane speed nodes (angles on the
            half circle = 1.5 n_velocity, even).
    accuracy : relative accuracy asked of G and Q, in [1e-6, 0.1]; the
            resolution then climbs :func:`resolution_ladder` until the
            Richardson estimate (knudsweep.solver.resolution) is below it (n_space,
            n_velocity must be None; iteration tol min(tol, accuracy/100)).
            Not reached on the finest level: status "failed" with the reason.
    error_estimate : without accuracy, also solve at one coarser step (half
            the radial intervals, 3/4 of the speeds; ~30-40 % extra work, measured)
            and report the estimate.
    Returns a SolverResult (family "tube") with coefficients G_P, Q_P or G_T,
    Q_T and "<name>_error_estimate" (absolute, same units; NaN if not
    estimated); discretization records the estimate and how it was obtained.
    """
    t_start = time.perf_counter()
    km = check_common(problem, delta, model, wall, tol, max_iter, "tube", MAX_DELTA)
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    delta = float(delta)
    ns, _, nc = _sizes(n_space, n_velocity, delta)
    if max_iter is None:
        max_iter = 300 if accelerate else 200000

    def run(n, v, it_tol):
        return _solve_tube_once(problem, delta, km, wall, n, v, int(max_iter), float(it_tol), accelerate)

    return solve_with_estimate(
        run, ns, nc, tol=float(tol), accuracy=accuracy, error_estimate=error_estimate,
        ladder=resolution_ladder(delta) if accuracy is not None else None,
        assumed_ratio=TUBE_ASSUMED_RATIO, t_start=t_start,
    )


def _solve_tube_once(problem, delta, km, wall, n_space, n_velocity, max_iter, tol, accelerate) -> SolverResult:
    """One solve at a fixed resolution (inputs already checked)."""
    t_start = time.perf_counter()
    alpha = tangential_accommodation(wall)
    ns, na, nc = _sizes(n_space, n_velocity, delta)
    grid = TubeGrid(ns, na, nc, delta)
    nc = grid.c.size  # the graded speed rule (delta < 1) has its own node count
    nu_delta = km.collision_factor * delta
    cl_wall = _TubeCLWall(grid, wall, nu_delta) if isinstance(wall, CercignaniLampisWall) else None
    # Maxwell: specular part summed along the chord inside the sweep; CL: the
    # sweep runs with a black wall and _TubeCLWall adds the re-emitted part.
    reflect = 1.0 - alpha if cl_wall is None else 0.0
    poly = source_polynomials(problem, heat_coefficient(km), km.stress_coefficient)
    src = np.array([
        nu_delta * poly["u1"], nu_delta * poly["q1"][0], nu_delta * poly["q1"][1], nu_delta * poly["t1"],
        poly["d1"][0], poly["d1"][1],
        nu_delta * poly["u3"], nu_delta * poly["q3"][0], nu_delta * poly["q3"][1], nu_delta * poly["t3"],
        poly["d3"][0], poly["d3"][1],
    ])
    nseg, ds, jj, dr, cp = _build_rays(grid.r, grid.cos_th)
    fields = np.zeros((3,) + dr.shape)

    u = np.zeros(ns)
    tau = np.zeros(ns)
    q = np.zeros(ns)
    phi1 = np.zeros((ns, na, nc))
    phi3 = np.zeros((ns, na, nc))
    un = np.zeros(ns)
    taun = np.zeros(ns)
    qn = np.zeros(ns)
    slip = _ACCEL_SLIP * (2.0 - alpha) / alpha
    diffusion = _RadialDiffusion(grid.r, delta, slip) if (accelerate and delta > 0.0) else None

    residuals = []
    status, reason = FAILED, ""
    iterations = 0
    for it in range(1, max_iter + 1):
        _sample_fields(nseg, jj, dr, even_spline(grid.r, u), even_spline(grid.r, q), odd_spline(grid.r, tau), fields)
        _sweep(nseg, ds, cp, fields, grid.c, nu_delta, reflect, src, _VINV, phi1, phi3)
        if cl_wall is not None:
            cl_wall.add_reemission(phi1, phi3)
        _moments(phi1, phi3, grid.weight, grid.c, grid.cos_th, un, taun, qn)
        if diffusion is not None:
            corr = diffusion.solve(nu_delta * (un - u))
            un = un + corr
            # shear of the correction, -e'/(2 delta), keeps tau consistent with
            # u (needed when tau feeds back into the source: ES-BGK)
            taun = taun - (diffusion.d1 @ corr) / (2.0 * delta)
        scale_u = max(np.max(np.abs(un)), 1e-300)
        change = np.max(np.abs(un - u)) / scale_u
        if poly["q1"][1] != 0.0:
            change = max(change, np.max(np.abs(qn - q)) / max(np.max(np.abs(qn)), 1e-300))
        if poly["t1"] != 0.0:
            change = max(change, np.max(np.abs(taun - tau)) / max(np.max(np.abs(taun)), 1e-300))
        u, tau, q = un.copy(), taun.copy(), qn.copy()
        residuals.append(change)
        iterations = it
        if not np.all(np.isfinite(u)):
            reason = f"non-finite flow velocity at iteration {it}"
            break
        if delta == 0.0 and (cl_wall is not None or reflect == 0.0):
            # free-molecular: the source is fixed and the wall re-emission is
            # solved exactly inside the sweep, so one sweep is exact
            status = CONVERGED
            break
        if change < tol:
            status = CONVERGED
            break
    else:
        reason = f"relative change {residuals[-1]:.3e} > tol {tol:g} after max_iter={max_iter} iterations"

    g = 4.0 * radial_integral(grid.r, u)
    qq = -4.0 * radial_integral(grid.r, q)
    names = ("G_P", "Q_P") if problem == "poiseuille" else ("G_T", "Q_T")
    drive = "pressure gradient X_P" if problem == "poiseuille" else "temperature gradient X_T"
    coefficients = {
        names[0]: Quantity(g, "1", f"reduced mass flow rate per unit {drive}, 4 int u r dr"),
        names[1]: Quantity(qq, "1", f"reduced heat flow rate per unit {drive}, -4 int q r dr"),
    }
    coords = {"r": Quantity(grid.r, "1", "radial coordinate in units of the tube radius", ("r",))}
    profiles = {
        "velocity": Quantity(u, "1", f"axial flow velocity per unit {drive}, units of v0", ("r",)),
        "heat_flux": Quantity(q, "1", f"axial heat flux per unit {drive}, units of p v0", ("r",)),
        "shear_stress": Quantity(tau, "1", f"radial shear stress P_xr/(2p) per unit {drive}", ("r",)),
    }
    params = {
        "geometry": "tube",
        "problem": problem,
        "delta": delta,
        "length_scale": "tube radius",
        "kinetic_model": km.name,
        **wall.describe(),
        "accelerate": bool(accelerate),
    }
    disc = {
        "n_space": ns,
        "n_velocity": int(n_velocity),
        "n_radial": ns,
        "n_angle_half_circle": na,
        "n_speed": nc,
        "speed_rule": "hermite" if (delta >= GRADED_BELOW or delta == 0.0) else "log_linear_panels",
        "radial_grid": "r = sin(pi xi / 2), xi uniform",
        "method": "long characteristics, piecewise-linear source",
        "tolerance": tol,
        "max_iter": int(max_iter),
    }
    if cl_wall is not None:
        disc["wall_kernel_defect"] = cl_wall.defect
    conv = ConvergenceRecord(np.asarray(residuals), iterations, status, reason, tol)
    return SolverResult("tube", problem, params, coords, profiles, coefficients, disc, conv, time.perf_counter() - t_start)
