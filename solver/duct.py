"""Fully developed rarefied flow through a long rectangular duct (linearized kinetic models).

Geometry and normalisation
--------------------------
Height H (the length scale, a = H), width W = A H with aspect ratio A >= 1,
delta = p H / (mu v0).  Lengths in units of H: y in [0, 1] across the height,
z in [0, A] across the width.  The mass flow rate is written per unit width,

    M / W = (H p / v0) [ G_P X_P + G_T X_T ],  X_P = -(H/p) dp/dx,  X_T = (H/T) dT/dx,
    G = (2/A) int int u dy dz ,    Q = -(2/A) int int q dy dz ,

so that as A -> infinity G_P tends to the plane channel of gap H (check-values
0.2: M' = (a p / v0) G_P X_P, hydrodynamic limit delta/6 + sigma_P).  The
continuum (no-slip) limit is G_P = (delta/6) [1 - (192/(pi^5 A)) sum_{n odd}
tanh(n pi A / 2) / n^5] (laminar flow in a rectangular duct: White, *Viscous
Fluid Flow*, 3rd ed. 2006, eq. 3-48; Shah & London 1978), see
:func:`continuum_flow_rate`.

Equations and moments are those of ``knudsweep.solver.tube`` (reduced functions Phi1,
Phi3 after integrating out c_x; in-plane velocity c (cos theta, sin theta)).

Method
------
The uncollided part (the drive streamed from the walls without a collision,
Phi_0 = D(c) (1 - exp(-nu delta s / c)) / (nu delta), s the distance back to
the wall) is integrated over the angle exactly at every node
(``_uncollided_moments``: per wall, u = asinh(tan phi) makes the integrand
smooth and constant at delta = 0) and over the speed by a table of
j_n(lam) = int c^n exp(-c^2) (1 - exp(-lam/c)) / lam dc; its share
``uncollided_weight(delta)`` (1 at small delta, falling off above 4) leaves
the sweep the rest.  Discrete ordinates alone miss the grazing rays along
the long side (ray effect): G_P at delta = 0 was 0.3 % (A = 1) to 24 %
(A = 50) low on the default grid; now 0.03-0.06 % (the trapezoid rule over
the cross-section).  Angles: ``angle_rule`` (graded towards the long side).

Discrete ordinates on a quarter of the cross-section (the planes y = 1/2 and
z = A/2 are symmetry planes, i.e. specular reflectors applied exactly within a
sweep by ordering the quadrants).  Second-order upwind differences on a grid
graded towards the walls (first cell a tenth of a free path, see
``_clustered``; first order next to a boundary).  Walls re-emit from the
distribution that arrived in the previous sweep: Maxwell (1 - alpha) times the
mirrored value, Cercignani-Lampis through the kernel of ``_WallReemission``.

Acceleration (synthetic, cf. Su, Zhu & Wu, J. Comput. Phys. 407 (2020)
109245): after each sweep the change R of u drives a correction e solving

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
reflection.  Two measures (Poiseuille, A = 2, BGK, tol 1e-8):
* the specular part of the wall inflow is corrected along with u
  (``_correct_inflow``): alpha = 0.1 at delta = 1000 went from 107 to 15
  iterations;
* the accelerated iteration is Anderson-mixed (``knudsweep.solver.anderson``, 16
  differences) over the moments and the wall inflow: alpha = 0.3 went from
  > 300 iterations (delta >= 1) to 20-38.
Near the free-molecular limit the lag remains: the bounce operator has its
eigenvalues on a circle of radius 1 - alpha, so no sweep-based Krylov method
beats (1 - alpha)^k by much (alpha = 0.1: 64-88 iterations for delta <= 0.1;
alpha = 0.3: 36-39).
"""

from __future__ import annotations

import math
import time

import numpy as np
import scipy.sparse as sp
from numba import njit, prange
from scipy.integrate import quad
from scipy.optimize import brentq
from scipy.sparse.linalg import splu

from knudsweep.solver.anderson import AndersonMixer
from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult
from knudsweep.solver.tube import (
    check_common,
    check_estimate_options,
    nested_ladder,
    solve_with_estimate,
    heat_coefficient,
    inplane_cl_kernel,
    source_polynomials,
    speed_rule,
    tangential_accommodation,
)
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

__all__ = [
    "solve_duct",
    "continuum_flow_rate",
    "free_molecular_flow_rate",
    "slip_flow_rate",
    "MAX_ASPECT_RATIO",
    "MAX_DELTA",
    "resolution_ladder",
]

MAX_ASPECT_RATIO = 50.0
MAX_DELTA = 1.0e3  # upper end of the accepted delta range (see default_sizes)
WALL_CELL = 0.1  # first cell at the wall, in free paths (see _clustered)
MAX_CELL = 2.0  # largest cell, in units of the uniform spacing (see _clustered)
_MIX_DEPTH = 16  # Anderson history (knudsweep.solver.anderson) of the accelerated iteration
_MIX_MEMORY = 200_000_000  # bytes for that history; fine grids get a shorter one
UNCOLLIDED_DELTA = 4.0  # delta at which half of the uncollided part is analytic (uncollided_weight)
_ACCEL_SLIP = 1.0162  # BGK diffuse slip (check-values 2, from memory); used only in the correction


def continuum_flow_rate(delta: float, aspect_ratio: float, terms: int = 200) -> float:
    """No-slip G_P of the duct: (delta/6)[1 - (192/(pi^5 A)) sum_{n odd} tanh(n pi A/2)/n^5].

    White, Viscous Fluid Flow, 3rd ed. (2006), eq. 3-48, rewritten in this
    module's normalisation.
    """
    a = float(aspect_ratio)
    n = np.arange(1, 2 * terms, 2, dtype=float)
    series = np.sum(np.tanh(n * np.pi * a / 2.0) / n**5)
    return float(delta) / 6.0 * (1.0 - 192.0 / (np.pi**5 * a) * series)


def free_molecular_flow_rate(aspect_ratio: float) -> float:
    """Diffuse-wall free-molecular G_P of the duct (delta = 0), by quadrature of a closed form.

    At delta = 0 with diffuse walls u(P) = (1/(4 sqrt(pi))) int_0^{2 pi} s(P, theta)
    dtheta, s the distance to the wall behind P (the drive integrated along the
    ray; derived from the equations of this module).  Over the cross-section,
    int s dA = int l(b)^2 / 2 db over the chords of direction theta; for a
    rectangle l(b) is a trapezoid of height min(A / cos, 1 / sin), ramps
    min(A sin, cos) and plateau |A sin - cos|.  The same algebra for the
    circle gives Knudsen's 8 / (3 sqrt(pi)) (check-values 0.3).
    """
    a = float(aspect_ratio)
    if not (math.isfinite(a) and 1.0 <= a <= MAX_ASPECT_RATIO):
        raise ValueError(f"aspect_ratio: must be in [1, {MAX_ASPECT_RATIO:g}], got {aspect_ratio!r}")

    def half_l2(th):
        s_, c_ = math.sin(th), math.cos(th)
        top = min(a / c_, 1.0 / s_) if s_ > 0 else a / c_
        ramp = min(a * s_, c_)
        return 0.5 * top * top * (abs(a * s_ - c_) + 2.0 * ramp / 3.0)

    kink = math.atan(1.0 / a)
    total = 4.0 * sum(quad(half_l2, lo, hi, epsabs=0.0, epsrel=1e-12, limit=200)[0] for lo, hi in ((0.0, kink), (kink, 0.5 * math.pi)))
    return (2.0 / a) * total / (4.0 * math.sqrt(math.pi))


def slip_flow_rate(delta: float, aspect_ratio: float, sigma_p: float, terms: int = 400) -> float:
    """G_P of the duct from Navier-Stokes with first-order velocity slip, to first order in sigma_p/delta.

    G = continuum_flow_rate(delta, A) + sigma_p (2/A) oint (dv/dn)^2 ds, v the
    solution of lap v = -1 vanishing on the walls (derived here: Green's
    identity for the slip perturbation; for the tube the same formula gives
    delta/4 + sigma_P, check-values 0.3; as A -> infinity it gives the plane
    channel's delta/6 + sigma_P).  dv/dn from the series of White, Viscous
    Fluid Flow (2006) eq. 3-48.
    """
    a = float(aspect_ratio)
    n = np.arange(1, 2 * terms, 2, dtype=float)[:, None]
    g, gw = np.polynomial.legendre.leggauss(64)

    def nodes(length, panels):
        edges = np.linspace(0.0, length, panels + 1)
        lo, hi = edges[:-1, None], edges[1:, None]
        return (0.5 * (lo + hi) + 0.5 * (hi - lo) * g).ravel(), (0.5 * (hi - lo) * gw).ravel()

    z, wz = nodes(a, 32)
    y, wy = nodes(1.0, 32)
    # lower wall y = 0: dv/dy = 1/2 - sum 4/(n pi)^2 cosh(n pi (z - A/2)) / cosh(n pi A / 2)
    # cosh(n pi (z - A/2)) / cosh(n pi A/2) without overflow
    ratio = (np.exp(n * np.pi * (z[None, :] - a)) + np.exp(-n * np.pi * z[None, :])) / (1.0 + np.exp(-n * np.pi * a))
    dvdy = 0.5 - np.sum(4.0 / (n * np.pi) ** 2 * ratio, axis=0)
    # side wall z = 0: dv/dz = sum 4/(n pi)^2 sin(n pi y) tanh(n pi A / 2)
    dvdz = np.sum(4.0 / (n * np.pi) ** 2 * np.sin(n * np.pi * y[None, :]) * np.tanh(n * np.pi * 0.5 * a), axis=0)
    contour = 2.0 * np.sum(wz * dvdy**2) + 2.0 * np.sum(wy * dvdz**2)
    return continuum_flow_rate(delta, a) + float(sigma_p) * (2.0 / a) * contour


def _clustered(n: int, length: float, delta: float = 0.0) -> np.ndarray:
    """n nodes on [0, length], graded towards the wall x = 0.

    Cells grow geometrically from WALL_CELL / delta (a tenth of the free path
    ell = H / delta, in units of H) through the Knudsen layer, which carries
    the thermal-creep drive at large delta, and are capped at MAX_CELL times
    the uniform spacing in the core, where the Poiseuille profile needs them;
    the growth factor is chosen so that the n - 1 cells fill the length.
    Uniform when the first cell would exceed the uniform spacing.  Measured
    (square duct, BGK): see default_sizes.
    """
    uniform = length / (n - 1)
    h0 = WALL_CELL / delta if delta > 0.0 else math.inf
    if h0 >= uniform:
        return np.linspace(0.0, length, n)
    k = np.arange(n - 1)
    h_max = MAX_CELL * uniform

    def cells(g):
        return np.minimum(h0 * np.exp(np.minimum(k * math.log(g), 700.0)), h_max)

    g = brentq(lambda g: cells(g).sum() - length, 1.0 + 1e-12, 1e6)
    x = np.concatenate([[0.0], np.cumsum(cells(g))])
    x *= length / x[-1]
    x[-1] = length
    return x


def _upwind_coefficients(x: np.ndarray):
    """One-sided derivative coefficients along +x (back) and -x (fwd, as derivative along -x).

    back[i] = (a0, a1, a2) with dF/dx ~ a0 F_i + a1 F_{i-1} + a2 F_{i-2}; second
    order where two upwind points exist, first order next to the boundary.
    fwd[i] likewise for -dF/dx with F_{i+1}, F_{i+2}; at n-2 the second point
    is the mirror image of node n-2 across the symmetry plane x[n-1]; the last
    node is an inflow node for that direction and has no stencil.
    """
    n = x.size
    back = np.zeros((n, 3))
    fwd = np.zeros((n, 3))
    for i in range(1, n):
        h1 = x[i] - x[i - 1]
        if i >= 2:
            h2 = x[i] - x[i - 2]
            back[i] = (1.0 / h1 + 1.0 / h2, -h2 / (h1 * (h2 - h1)), h1 / (h2 * (h2 - h1)))
        else:
            back[i] = (1.0 / h1, -1.0 / h1, 0.0)
    for i in range(0, n - 1):
        h1 = x[i + 1] - x[i]
        # beyond the symmetry plane the mirror node of n-2 lies at 2 x[n-1] - x[n-2]
        h2 = x[i + 2] - x[i] if i <= n - 3 else 2.0 * h1
        fwd[i] = (1.0 / h1 + 1.0 / h2, -h2 / (h1 * (h2 - h1)), h1 / (h2 * (h2 - h1)))
    return back, fwd


@njit(cache=True)
def _sweep_direction(phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, wy1, wy3, wz1, wz3, qy, qz):
    """Sweep one direction (quadrant q, angle m, speed k) over the quarter grid.

    sy, sz = +1/-1 direction signs; cy, cz = |c_y|, |c_z|.  Inflow: walls (i=0
    for sy>0, j=0 for sz>0) take the re-emitted values wy*[q, m, k, j] /
    wz*[q, m, k, i] computed from the previous sweep (:func:`_wall_inflow`);
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
_SY = np.array([1, -1, 1, -1])
_SZ = np.array([1, 1, -1, -1])
_QY = np.array([1, 0, 3, 2])
_QZ = np.array([2, 3, 0, 1])


@njit(cache=True, parallel=True)
def _sweep_stage(q0, nquad, phi1, phi3, wy1, wy3, wz1, wz3, c_nodes, cos_th, sin_th, nu_delta, uf, qf, tyf, tzf, src, by, fy, bz, fz):
    """Sweep quadrants q0 .. q0+nquad-1 (independent of each other), prange over directions.

    Sources per direction: S1 = src[0] u + (src[1] + src[2] c^2) q + src[3] (c_y tau_y + c_z tau_z)
    + src[4] + src[5] c^2, S3 with src[6:12].
    """
    na = cos_th.size
    nc = c_nodes.size
    for idx in prange(nquad * na * nc):
        q = q0 + idx // (na * nc)
        rest = idx % (na * nc)
        _sweep_one(phi1, phi3, wy1, wy3, wz1, wz3, q, rest // nc, rest % nc, c_nodes, cos_th, sin_th, nu_delta, uf, qf, tyf, tzf, src, by, fy, bz, fz)


def _sweep(*args):
    """Full sweep: quadrant (+,+), then (-,+) and (+,-), then (-,-), so that the
    inflow at each symmetry plane is the mirrored value of the same sweep."""
    for q0, nquad in ((0, 1), (1, 2), (3, 1)):
        _sweep_stage(q0, nquad, *args)


@njit(cache=True)
def _sweep_one(phi1, phi3, wy1, wy3, wz1, wz3, q, m, k, c_nodes, cos_th, sin_th, nu_delta, uf, qf, tyf, tzf, src, by, fy, bz, fz):
    """Sources of one direction, then its sweep."""
    ny, nz = uf.shape
    c = c_nodes[k]
    sy = _SY[q]
    sz = _SZ[q]
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
    _sweep_direction(phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, wy1, wy3, wz1, wz3, _QY[q], _QZ[q])


@njit(cache=True, parallel=True)
def _moments(phi1, phi3, weight, c_nodes, cos_th, sin_th, u, ty, tz, qf):
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



# --------------------------------------------------------------------------
# uncollided (first-flight) part, integrated over the angle analytically
# --------------------------------------------------------------------------
# The drive alone, D(c) = d0 + d2 c^2, streamed from the diffuse-free walls
# (no re-emitted perturbation) gives along a ray of length s behind P
#     Phi_0 = D(c) (1 - exp(-nu delta s / c)) / (nu delta)        (= D s / c at delta = 0),
# and its moments need  M_n(s) = int_0^inf c^n exp(-c^2) Phi-factor dc = s j_n(nu delta s),
#     j_n(lam) = int_0^inf c^n exp(-c^2) (1 - exp(-lam / c)) / lam dc ,   j_n(0) = Gamma(n/2) / 2.
_TABLE_X0 = math.log(1e-12)  # below: j_n(0) (the next term is O(lam ln lam))
_TABLE_X1 = math.log(1e4)  # above: j_n = Gamma((n+1)/2) / (2 lam) (the rest is ~exp(-3 (lam/2)^(2/3)))
_TABLE_STEP = 1.0 / 64.0  # in ln(lam); cubic interpolation of ln j_n: error ~1e-11 (measured)
_TABLE = None


def _speed_moment_table() -> np.ndarray:
    """ln j_n(lam), n = 1..5 (rows), on ln(lam) = _TABLE_X0 + k _TABLE_STEP (composite Gauss-Legendre)."""
    global _TABLE
    if _TABLE is None:
        g, gw = np.polynomial.legendre.leggauss(8)
        edges = np.concatenate([np.logspace(-16.0, math.log10(0.5), 8 * 16), np.arange(0.625, 9.01, 0.125)])
        lo, hi = edges[:-1, None], edges[1:, None]
        c = (0.5 * (lo + hi) + 0.5 * (hi - lo) * g).ravel()
        w = (0.5 * (hi - lo) * gw).ravel() * np.exp(-c * c)
        lam = np.exp(np.arange(_TABLE_X0, _TABLE_X1 + 0.5 * _TABLE_STEP, _TABLE_STEP))
        f = -np.expm1(-lam[:, None] / c[None, :]) / lam[:, None]
        _TABLE = np.log(np.stack([f @ (w * c**n) for n in range(1, 6)]))
    return _TABLE


_GAMMA_HALF = np.array([math.gamma(0.5 * n) for n in range(1, 8)])  # Gamma(n/2), n = 1..7


@njit(cache=True)
def _speed_moments(lam, table, out):
    """out[n-1] = j_n(lam), n = 1..5 (cubic Lagrange interpolation of ln j_n in ln lam)."""
    if lam <= math.exp(_TABLE_X0):
        for n in range(5):
            out[n] = 0.5 * _GAMMA_HALF[n]
        return
    x = math.log(lam)
    if x >= _TABLE_X1:
        for n in range(5):
            out[n] = 0.5 * _GAMMA_HALF[n + 1] / lam
        return
    t = (x - _TABLE_X0) / _TABLE_STEP
    k = min(max(int(t) - 1, 0), table.shape[1] - 4)
    p = t - k  # in [1, 2) away from the ends
    l0 = -(p - 1.0) * (p - 2.0) * (p - 3.0) / 6.0
    l1 = p * (p - 2.0) * (p - 3.0) / 2.0
    l2 = -p * (p - 1.0) * (p - 3.0) / 2.0
    l3 = p * (p - 1.0) * (p - 2.0) / 6.0
    for n in range(5):
        out[n] = math.exp(l0 * table[n, k] + l1 * table[n, k + 1] + l2 * table[n, k + 2] + l3 * table[n, k + 3])


_U_PANEL = 0.5  # panel width in u = asinh(tan phi) (the integrands vary on the scale 1)
_GL6 = np.polynomial.legendre.leggauss(6)


@njit(cache=True, parallel=True)
def _uncollided_moments(y, z, a_r, nu_delta, d, table, gx, gw, u0, ty0, tz0, q0):
    """Moments of the uncollided part at the nodes (y_i, z_j) of the quarter, exact in the angle.

    Directions are grouped by the wall their backward ray meets: for the wall
    at normal distance L, the ray at angle phi to the normal has length
    s = L / cos phi; with u = asinh(tan phi), s = L cosh u and dtheta = du / cosh u,
    so  (1/pi) int dtheta M_n(s) = (1/pi) int L j_n(nu delta L cosh u) du  over
    u between the two corners of that wall (composite Gauss-Legendre panels
    of width _U_PANEL; exact at delta = 0, where the integrand is constant).
    d = (d0, d2) of Phi1 and (d0, d2) of Phi3.
    """
    ny, nz = y.size, z.size
    for i in prange(ny):
        jn = np.empty(5)
        for j in range(nz):
            yy, zz = y[i], z[j]
            su, sy_, sz_, sq = 0.0, 0.0, 0.0, 0.0
            for wall in range(4):
                if wall == 0:
                    ell, t_lo, t_hi, ny_s, nz_s = yy, zz - a_r, zz, 1.0, 0.0  # wall y = 0
                elif wall == 1:
                    ell, t_lo, t_hi, ny_s, nz_s = 1.0 - yy, zz - a_r, zz, -1.0, 0.0  # y = 1
                elif wall == 2:
                    ell, t_lo, t_hi, ny_s, nz_s = zz, yy - 1.0, yy, 0.0, 1.0  # z = 0
                else:
                    ell, t_lo, t_hi, ny_s, nz_s = a_r - zz, yy - 1.0, yy, 0.0, -1.0  # z = A
                if ell <= 0.0:
                    continue  # a node on this wall: no ray comes from it
                u_lo = math.asinh(t_lo / ell)
                u_hi = math.asinh(t_hi / ell)
                n_pan = max(1, int(math.ceil((u_hi - u_lo) / _U_PANEL)))
                h = (u_hi - u_lo) / n_pan
                for p in range(n_pan):
                    for g in range(gx.size):
                        uu = u_lo + h * (p + 0.5 * (gx[g] + 1.0))
                        ww = 0.5 * h * gw[g] * ell
                        _speed_moments(nu_delta * ell * math.cosh(uu), table, jn)
                        cn, ct = 1.0 / math.cosh(uu), math.tanh(uu)
                        # molecule direction: normal part cn into the duct, tangential ct
                        dir_y = ny_s * cn + (1.0 - abs(ny_s)) * ct
                        dir_z = nz_s * cn + (1.0 - abs(nz_s)) * ct
                        su += ww * (d[0] * jn[0] + d[1] * jn[2])
                        shear = ww * (d[0] * jn[1] + d[1] * jn[3])
                        sy_ += shear * dir_y
                        sz_ += shear * dir_z
                        sq += ww * (d[2] * jn[0] + d[3] * jn[2] + d[0] * (jn[2] - 2.5 * jn[0]) + d[1] * (jn[4] - 2.5 * jn[2]))
            u0[i, j] = su / math.pi
            ty0[i, j] = sy_ / math.pi
            tz0[i, j] = sz_ / math.pi
            q0[i, j] = sq / math.pi


def _uncollided_at_walls(y, z, a_r, nu_delta, d, c_nodes, cos_th, sin_th):
    """Phi1_0, Phi3_0 of the discrete directions at the wall nodes: ((4, na, nc, nz) at y = 0, (4, na, nc, ny) at z = 0)."""
    out = []
    for pts_y, pts_z in ((np.zeros_like(z), z), (y, np.zeros_like(y))):
        dy = _SY[:, None, None] * cos_th[None, :, None]  # (4, na, 1): molecule direction
        dz = _SZ[:, None, None] * sin_th[None, :, None]
        with np.errstate(divide="ignore"):
            # backward ray P - s (dy, dz) in the full rectangle [0, 1] x [0, A]
            sy_ = np.where(dy > 0, pts_y / dy, (1.0 - pts_y) / -dy)
            sz_ = np.where(dz > 0, pts_z / dz, (a_r - pts_z) / -dz)
        s = np.minimum(sy_, sz_)[:, :, None, :]  # (4, na, 1, n_wall)
        c = c_nodes[None, None, :, None]
        f = s / c if nu_delta == 0.0 else -np.expm1(-nu_delta * s / c) / nu_delta
        out.append(((d[0] + d[1] * c**2) * f, (d[2] + d[3] * c**2) * f))
    return out


class _WallReemission:
    """Wall inflow of the next sweep from the distribution arriving in the previous one.

    Maxwell: (1 - alpha) x the mirrored arriving value (the diffuse part carries
    no c_x-odd perturbation).  Cercignani-Lampis: as in ``knudsweep.solver.tube``
    (:class:`knudsweep.solver.tube._TubeCLWall`), Psi1 = Phi1 and Psi3 = Phi3 - (3/2) Phi1
    are reflected with (1 - alpha_t) and (1 - alpha_t)^3 times the in-plane
    kernel :func:`knudsweep.solver.tube.inplane_cl_kernel`, here a matrix from the
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
        from :func:`_uncollided_at_walls`, added to the arriving values.
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
                wy1[q] = f * p1y[_QY[q]]
                wy3[q] = f * p3y[_QY[q]]
            for q in (0, 1):
                wz1[q] = f * p1z[_QZ[q]]
                wz3[q] = f * p3z[_QZ[q]]
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
                a1[q] = o1[n * m:(n + 1) * m].reshape(na, nc, -1)
                a3[q] = o3[n * m:(n + 1) * m].reshape(na, nc, -1)
        return wy1, wy3, wz1, wz3


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


class _DuctCorrection:
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


def _correct_inflow(inflow, e, f1):
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


class _IterationState:
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
        moments = tuple(vec[i * n:(i + 1) * n].reshape(self.moment_shape) for i in range(4))
        inflow = [np.zeros(s) for s in self.inflow_shapes]
        if self.with_inflow:
            pos = 4 * n
            for a, q in zip(inflow, self._RECEIVING, strict=True):
                size = len(q) * a[0].size
                a[list(q)] = vec[pos:pos + size].reshape((len(q),) + a.shape[1:])
                pos += size
        return moments, inflow


def _trapezoid_2d(y, z, f) -> float:
    return float(np.trapezoid(np.trapezoid(f, z, axis=1), y))


def uncollided_weight(delta: float) -> float:
    """Share w = 1 / (1 + (delta / UNCOLLIDED_DELTA)^4) of the uncollided part taken analytically.

    Any share is exact (the sweep carries the drive times 1 - w); it decides
    which part the upwind differences see.  Long rays (small delta) need the
    analytic part: the discrete ordinates miss the grazing directions (ray
    effect).  At large delta the drive's Knudsen layer is thinner than the
    cells, and the scheme's errors on it and on the collided layer cancel
    only when both are swept.  Measured (A = 2, BGK, 25 nodes, against 97):
    thermal creep G_T error -0.36 / -0.07 % at delta = 1 with w = 0 / 1,
    -0.55 / +0.02 % at delta = 5, -0.20 / +0.63 % at delta = 10; on 13
    nodes w = 1 puts G_T 0.7 % high at delta = 5, so the share falls off
    from delta ~ 4 (w = 0.99 at delta = 1, 0.29 at 5, 0.025 at 10).
    """
    return 1.0 / (1.0 + (float(delta) / UNCOLLIDED_DELTA) ** 4)


def angle_rule(n_angle: int, aspect_ratio: float, delta: float):
    """Angles theta of one quadrant (from the y axis, across the height) and their weights (sum pi/2).

    Gauss-Legendre in v in [0, 1] with psi = pi/2 - theta = psi_c (exp(b v) - 1),
    b = ln(1 + pi / (2 psi_c)), psi_c = max(1/A, delta): nodes crowd towards
    directions grazing the long side, where a ray runs up to min(A, ~1/delta)
    heights before it meets a wall or collides, so that the collided part
    varies on the angular scale psi ~ psi_c there.  Measured (BGK, diffuse,
    13 nodes across the half height, against 24 angles): G_P within 4e-5 with
    6 angles and 2.5e-4 with 4, delta 0.01-10, A 1-50 (uniform midpoint
    angles: -0.7 % with 6 at A = 20, delta = 0.1).
    """
    psi_c = max(1.0 / float(aspect_ratio), float(delta))
    b = math.log1p(0.5 * math.pi / psi_c)
    v, wv = np.polynomial.legendre.leggauss(int(n_angle))
    v = 0.5 * (v + 1.0)
    psi = psi_c * np.expm1(b * v)
    w = 0.5 * wv * psi_c * b * np.exp(b * v)
    w *= 0.5 * math.pi / w.sum()  # exact for isotropic data (Gauss-Legendre errs by ~1e-8 here)
    return (0.5 * math.pi - psi)[::-1].copy(), w[::-1].copy()


def default_sizes(delta: float, aspect_ratio: float) -> tuple[int, int, int, int]:
    """(nodes across the half height, across the half width, angles per quadrant, speeds)."""
    # Thermal creep at large delta lives in the Knudsen layer (graded grid,
    # _clustered).  Square duct, BGK, diffuse, G_T delta:
    #   delta = 10:   25 / 49 nodes            0.6061 / 0.6051
    #   delta = 100:  25 / 33 / 41 / 49 / 65   0.770 / 0.754 / 0.749 / 0.748 / 0.747
    #   delta = 1000: 49 / 65 / 81 / 97        0.777 / 0.769 / 0.767 / 0.766
    # (before the grading, cosine clustering: 1.69 on 33 and 0.85 on 65 nodes at
    # delta = 1000).  Poiseuille at delta = 100: G_P 7.711 / 7.631 / 7.612 on
    # 25 / 41 / 65 nodes.  The slow grid study in test_duct_flow.py repeats this.
    # 41 nodes from delta 0.5: the G_P error of 25 nodes grows from 0.06 % there to
    # 0.4 % at delta 5 (first-order differences next to the walls); 41 halve it
    ny = 25 if delta <= 0.5 else (41 if delta <= 100 else 81)
    nz = int(round(ny * (1.0 + 0.5 * math.log2(aspect_ratio))))
    return ny, nz, 6, 12


# Error reduction per ladder step assumed by the Richardson estimate
# (knudsweep.solver.resolution).  Measured (A = 2, BGK, diffuse, delta = 1, G_P) on
# 7 -> 13 -> 25 -> 49 -> 97 nodes: 2.7 to 3.3 per step (second-order upwind,
# first order next to the walls; the speed error, ~6e-4 of G_P at 12 speeds,
# falls more slowly).
DUCT_ASSUMED_RATIO = 3.0
# Cap of the accuracy ladder: unknowns 4 n_angle n_speed n_y n_z of one
# distribution array (four such float arrays are kept: 1.2e7 -> ~400 MB).
DUCT_MAX_UNKNOWNS = 12_000_000


def _duct_sizes(n_space, n_velocity, aspect_ratio):
    """(n_y, n_z, n_angle, n_speed) for given nodes across the half height and speeds."""
    nz = int(round(n_space * (1.0 + 0.5 * math.log2(aspect_ratio))))
    return n_space, nz, max(n_velocity // 2, 2), n_velocity


# Bytes per unknown of the distribution (4 n_angle n_speed n_y n_z) at the peak of
# a solve: measured 16.4-17.1 (ru_maxrss growth, A = 4 and 10, 97 nodes, 48 and 96
# speeds); rounded up.
DUCT_BYTES_PER_UNKNOWN = 20


def duct_memory_mb(delta: float, aspect_ratio: float, n_space: int | None = None,
                   n_velocity: int | None = None, accuracy: float | None = None) -> float:
    """Estimated peak memory of one duct solve, MB (an accuracy ladder stays under its cap)."""
    if accuracy is not None:
        return DUCT_BYTES_PER_UNKNOWN * DUCT_MAX_UNKNOWNS / 1e6
    ny, nz, na, nc = default_sizes(float(delta), float(aspect_ratio))
    if n_space is not None:
        ny, nz = _duct_sizes(int(n_space), nc, float(aspect_ratio))[:2]
    if n_velocity is not None:
        na, nc = _duct_sizes(ny, int(n_velocity), float(aspect_ratio))[2:]
    return DUCT_BYTES_PER_UNKNOWN * 4 * na * nc * ny * nz / 1e6


def resolution_ladder(delta: float, aspect_ratio: float) -> list[tuple[int, int]]:
    """(n_space, n_velocity) tried for an accuracy target in the duct, coarse to fine.

    Through the default of :func:`default_sizes` (25 nodes: 7, 13, 25, 49, 97),
    halving / doubling the intervals across the half height, speeds 12 (4/3)^k;
    capped by DUCT_MAX_UNKNOWNS.
    """
    ny, _, _, nc = default_sizes(float(delta), float(aspect_ratio))

    def fits(n, v):
        a, b, na, nv = _duct_sizes(n, v, float(aspect_ratio))
        return n <= 400 and 4 * na * nv * a * b <= DUCT_MAX_UNKNOWNS

    return nested_ladder(ny, nc, 5, fits)


def solve_duct(
    problem: str,
    *,
    delta: float,
    aspect_ratio: float,
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
    """Solve Poiseuille or thermal-creep flow in a long rectangular duct; see the module docstring.

    delta : p H / (mu v0) on the height H (the smaller side), in [0, MAX_DELTA = 1e3].
    aspect_ratio : width / height A in [1, 50].
    n_space : nodes across the half height (the half width gets
              n_space (1 + log2(A)/2)); n_velocity : speed nodes (angles per
              quadrant = n_velocity / 2).
    accuracy : relative accuracy asked of G and Q, in [1e-6, 0.1]; the
              resolution then climbs :func:`resolution_ladder` until the
              Richardson estimate (knudsweep.solver.resolution) is below it (n_space,
              n_velocity must be None; iteration tol min(tol, accuracy/100)).
              Not reached on the finest level: status "failed" with the reason.
    error_estimate : without accuracy, also solve at one coarser step (half
              the intervals, 3/4 of the speeds; ~30-40 % extra work, measured) and
              report the estimate.
    Returns a SolverResult (family "duct") with G_P, Q_P or G_T, Q_T per unit
    width and "<name>_error_estimate" (absolute, same units; NaN if not
    estimated); discretization records the estimate and how it was obtained.
    """
    t_start = time.perf_counter()
    km = check_common(problem, delta, model, wall, tol, max_iter, "duct", MAX_DELTA)
    a_r = float(aspect_ratio)
    if not (math.isfinite(a_r) and 1.0 <= a_r <= MAX_ASPECT_RATIO):
        raise ValueError(f"aspect_ratio: must be in [1, {MAX_ASPECT_RATIO:g}], got {aspect_ratio!r}")
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    delta = float(delta)
    ny, _, _, nc = default_sizes(delta, a_r)
    if n_space is not None:
        if isinstance(n_space, bool) or int(n_space) != n_space or not 5 <= int(n_space) <= 400:
            raise ValueError(f"n_space: must be an integer in [5, 400], got {n_space!r}")
        ny = int(n_space)
    if n_velocity is not None:
        if isinstance(n_velocity, bool) or int(n_velocity) != n_velocity or not 4 <= int(n_velocity) <= 128:
            raise ValueError(f"n_velocity: must be an integer in [4, 128], got {n_velocity!r}")
        nc = int(n_velocity)
    if max_iter is None:
        max_iter = 400 if accelerate else 200000

    def run(n, v, it_tol):
        # the coarse level of the estimate takes every other node of the
        # default grid (nested), so that it also coarsens the graded wall cells
        parent = ny if (accuracy is None and n < ny) else None
        return _solve_duct_once(problem, delta, a_r, km, wall, n, v, int(max_iter), float(it_tol), accelerate, parent)

    return solve_with_estimate(
        run, ny, nc, tol=float(tol), accuracy=accuracy, error_estimate=error_estimate,
        ladder=resolution_ladder(delta, a_r) if accuracy is not None else None,
        assumed_ratio=DUCT_ASSUMED_RATIO, t_start=t_start,
    )


def _every_other(x: np.ndarray) -> np.ndarray:
    """Every other node of x, keeping the last (the symmetry plane)."""
    return x[::2] if (x.size - 1) % 2 == 0 else np.append(x[::2], x[-1])


def _solve_duct_once(problem, delta, a_r, km, wall, n_space, n_velocity, max_iter, tol, accelerate,
                     parent=None) -> SolverResult:
    """One solve at a fixed resolution (inputs already checked).

    parent : if given, the grid is every other node of the grid for
    n_space = parent (nested coarse level of the error estimate).
    """
    t_start = time.perf_counter()
    alpha = tangential_accommodation(wall)
    ny, nz, na, nc = _duct_sizes(n_space, n_velocity, a_r)

    if parent is None:
        y = _clustered(ny, 0.5, delta)
        z = _clustered(nz, 0.5 * a_r, delta)
    else:
        py, pz = _duct_sizes(parent, n_velocity, a_r)[:2]
        y = _every_other(_clustered(py, 0.5, delta))
        z = _every_other(_clustered(pz, 0.5 * a_r, delta))
        ny, nz = y.size, z.size
    by, fy = _upwind_coefficients(y)
    bz, fz = _upwind_coefficients(z)
    th, th_w = angle_rule(na, a_r, delta)
    cos_th, sin_th = np.cos(th), np.sin(th)
    c, cw = speed_rule(nc, delta)
    nc = c.size
    weight = cw[None, :] * (th_w / np.pi)[:, None]  # (1/pi) dtheta w_k, one quadrant

    nu_delta = km.collision_factor * delta
    walls = _WallReemission(wall, c, cos_th, sin_th, weight)
    poly = source_polynomials(problem, heat_coefficient(km), km.stress_coefficient)
    # the sweep carries the collided part only: the drive enters through the
    # uncollided moments (exact in the angle) and, at the walls, through the
    # uncollided distribution arriving there
    w_unc = uncollided_weight(delta)
    src = np.array([
        nu_delta * poly["u1"], nu_delta * poly["q1"][0], nu_delta * poly["q1"][1], nu_delta * poly["t1"],
        (1.0 - w_unc) * poly["d1"][0], (1.0 - w_unc) * poly["d1"][1],
        nu_delta * poly["u3"], nu_delta * poly["q3"][0], nu_delta * poly["q3"][1], nu_delta * poly["t3"],
        (1.0 - w_unc) * poly["d3"][0], (1.0 - w_unc) * poly["d3"][1],
    ])
    d_poly = w_unc * np.array([poly["d1"][0], poly["d1"][1], poly["d3"][0], poly["d3"][1]])
    gx, gw = _GL6
    u0, ty0, tz0, q0 = (np.zeros((ny, nz)) for _ in range(4))
    _uncollided_moments(y, z, a_r, nu_delta, d_poly, _speed_moment_table(), gx, gw, u0, ty0, tz0, q0)
    with_inflow = walls.cl or walls.f[0] != 0.0
    at_walls = _uncollided_at_walls(y, z, a_r, nu_delta, d_poly, c, cos_th, sin_th) if with_inflow else None
    shape = (4, na, nc, ny, nz)
    phi1 = np.zeros(shape)
    phi3 = np.zeros(shape)
    # first iterate: the free-molecular (uncollided) moments
    u, ty, tz, q = u0.copy(), ty0.copy(), tz0.copy(), q0.copy()
    un, tyn, tzn, qn = (np.zeros((ny, nz)) for _ in range(4))
    slip = _ACCEL_SLIP * (2.0 - alpha) / alpha
    corr = None
    if accelerate and delta > 0.0:
        corr = _DuctCorrection(y, z, by, fy, bz, fz, weight, c, cos_th, sin_th, nu_delta, delta, slip)

    # state of the iteration: the moments the sweep reads and, unless the walls
    # are diffuse, the wall inflow (re-emission of what arrived in the previous
    # sweep).  Anderson mixing of this state (knudsweep.solver.anderson) removes most of
    # the wall lag of specular reflection, which the synthetic correction does
    # not see, and the oscillation of the lagged ES-BGK stress.
    inflow = walls.inflow(phi1, phi3, at_walls)
    state = _IterationState((u, ty, tz, q), inflow, with_inflow)
    x = state.pack((u, ty, tz, q), inflow)
    # two stored differences per depth step: keep them under _MIX_MEMORY bytes
    depth = int(min(_MIX_DEPTH, max(2, _MIX_MEMORY // (16 * x.size))))
    mixer = AndersonMixer(depth=depth) if accelerate else None
    lag = km.stress_coefficient / (1.0 - km.stress_coefficient)

    residuals = []
    status, reason, iterations = FAILED, "", 0
    for it in range(1, max_iter + 1):
        (u, ty, tz, q), inflow = state.unpack(x)
        _sweep(phi1, phi3, *inflow, c, cos_th, sin_th, nu_delta, u, q, ty, tz, src, by, fy, bz, fz)
        _moments(phi1, phi3, weight, c, cos_th, sin_th, un, tyn, tzn, qn)
        un += u0
        tyn += ty0
        tzn += tz0
        qn += q0
        if corr is not None:
            rhs = un - u
            if lag != 0.0:
                # ES-BGK: the shear stress in the gain lags one sweep; its
                # change adds -lag div(r_tau) / (nu delta) to the right-hand
                # side (as in the plane channel, kernels._synthetic_step)
                rhs = rhs - (lag / nu_delta) * (np.gradient(tyn - ty, y, axis=0) + np.gradient(tzn - tz, z, axis=1))
            e = corr.solve(rhs)
            un = un + e
        change = np.max(np.abs(un - u)) / max(np.max(np.abs(un)), 1e-300)
        if poly["q1"][1] != 0.0:
            change = max(change, np.max(np.abs(qn - q)) / max(np.max(np.abs(qn)), 1e-300))
        if poly["t1"] != 0.0:
            change = max(change, np.max(np.abs(tyn - ty)) / max(np.max(np.abs(tyn)), 1e-300))
        residuals.append(change)
        iterations = it
        if not np.all(np.isfinite(un)):
            reason = f"non-finite flow velocity at iteration {it}"
            break
        if delta == 0.0 and walls.f[0] == 0.0:
            status = CONVERGED  # free-molecular, diffuse walls: one sweep is exact
            break
        if change < tol:
            status = CONVERGED
            break
        inflow = walls.inflow(phi1, phi3, at_walls) if state.with_inflow else None  # diffuse walls: no inflow
        if corr is not None and state.with_inflow:
            _correct_inflow(inflow, e, walls.f[0])
        gx = state.pack((un, tyn, tzn, qn), inflow)
        x = mixer.mix(x, gx) if mixer is not None else gx
    else:
        reason = f"relative change {residuals[-1]:.3e} > tol {tol:g} after max_iter={max_iter} iterations"
    # report the moments of the last sweep
    u, q = un, qn

    # quarter -> full cross-section: factor 4; G = (2/A) int int u
    g = (8.0 / a_r) * _trapezoid_2d(y, z, u)
    qq = -(8.0 / a_r) * _trapezoid_2d(y, z, q)
    names = ("G_P", "Q_P") if problem == "poiseuille" else ("G_T", "Q_T")
    drive = "pressure gradient X_P" if problem == "poiseuille" else "temperature gradient X_T"
    coefficients = {
        names[0]: Quantity(g, "1", f"reduced mass flow rate per unit width and unit {drive}, (2/A) int int u"),
        names[1]: Quantity(qq, "1", f"reduced heat flow rate per unit width and unit {drive}, -(2/A) int int q"),
    }
    coords = {
        "y": Quantity(y, "1", "coordinate across the height, units of the height H (wall at 0, mid-plane at 0.5)", ("y",)),
        "z": Quantity(z, "1", "coordinate across the width, units of H (wall at 0, mid-plane at A/2)", ("z",)),
    }
    profiles = {
        "velocity": Quantity(u, "1", f"axial flow velocity per unit {drive}, units of v0", ("y", "z")),
        "heat_flux": Quantity(q, "1", f"axial heat flux per unit {drive}, units of p v0", ("y", "z")),
    }
    params = {
        "geometry": "duct",
        "problem": problem,
        "delta": delta,
        "aspect_ratio": a_r,
        "length_scale": "duct height (smaller side)",
        "kinetic_model": km.name,
        **wall.describe(),
        "accelerate": bool(accelerate),
    }
    disc = {
        "n_space": ny,
        "n_velocity": int(n_velocity),
        "n_y_half": ny,
        "n_z_half": nz,
        "n_angle_quadrant": na,
        "n_speed": nc,
        "method": "discrete ordinates, second-order upwind, quarter domain, uncollided part exact in the angle",
        "uncollided_share": w_unc,
        "angle_rule": "Gauss-Legendre, graded towards the long side (duct.angle_rule)",
        "tolerance": tol,
        "max_iter": int(max_iter),
        "anderson_depth": int(mixer.depth) if mixer is not None else 0,
        "anderson_restarts": int(mixer.restarts) if mixer is not None else 0,
    }
    if walls.cl:
        disc["wall_kernel_defect"] = walls.defect
    conv = ConvergenceRecord(np.asarray(residuals), iterations, status, reason, tol)
    return SolverResult("duct", problem, params, coords, profiles, coefficients, disc, conv, time.perf_counter() - t_start)
