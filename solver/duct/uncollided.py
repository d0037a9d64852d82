"""The uncollided (first-flight) part of the duct's solution, integrated over the angle analytically.

The uncollided part (the drive streamed from the walls without a collision,
Phi_0 = D(c) (1 - exp(-nu delta s / c)) / (nu delta), s the distance back to
the wall) is integrated over the angle exactly at every node
(:func:`uncollided_moments`: per wall, u = asinh(tan phi) makes the integrand
smooth and constant at delta = 0) and over the speed by a table of
j_n(lam) = int c^n exp(-c^2) (1 - exp(-lam/c)) / lam dc; its share
:func:`uncollided_weight` (1 at small delta, falling off above
UNCOLLIDED_DELTA) leaves the sweep the rest.  Discrete ordinates alone miss
the grazing rays along the long side (ray effect).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from knudsweep.solver.duct.kernels import SY, SZ

UNCOLLIDED_DELTA = 4.0  # delta at which half of the uncollided part is analytic (uncollided_weight)

# The drive alone, D(c) = d0 + d2 c^2, streamed from the diffuse-free walls
# (no re-emitted perturbation) gives along a ray of length s behind P
#     Phi_0 = D(c) (1 - exp(-nu delta s / c)) / (nu delta)        (= D s / c at delta = 0),
# and its moments need  M_n(s) = int_0^inf c^n exp(-c^2) Phi-factor dc = s j_n(nu delta s),
#     j_n(lam) = int_0^inf c^n exp(-c^2) (1 - exp(-lam / c)) / lam dc ,   j_n(0) = Gamma(n/2) / 2.
_TABLE_X0 = math.log(1e-12)  # below: j_n(0) (the next term is O(lam ln lam))
_TABLE_X1 = math.log(1e4)  # above: j_n = Gamma((n+1)/2) / (2 lam) (the rest is ~exp(-3 (lam/2)^(2/3)))
_TABLE_STEP = 1.0 / 64.0  # in ln(lam); cubic interpolation of ln j_n: error ~1e-11 (measured)
_TABLE = None


def speed_moment_table() -> np.ndarray:
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
GL6 = np.polynomial.legendre.leggauss(6)


@njit(cache=True, parallel=True)
def uncollided_moments(y, z, a_r, nu_delta, d, table, gx, gw, u0, ty0, tz0, q0):
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
                        sq += ww * (
                            d[2] * jn[0] + d[3] * jn[2] + d[0] * (jn[2] - 2.5 * jn[0]) + d[1] * (jn[4] - 2.5 * jn[2])
                        )
            u0[i, j] = su / math.pi
            ty0[i, j] = sy_ / math.pi
            tz0[i, j] = sz_ / math.pi
            q0[i, j] = sq / math.pi


def uncollided_at_walls(y, z, a_r, nu_delta, d, c_nodes, cos_th, sin_th):
    """Phi1_0, Phi3_0 of the discrete directions at the wall nodes.

    Returns ((Phi1_0, Phi3_0) at y = 0, each (4, na, nc, nz); the same at z = 0, each (4, na, nc, ny)).
    """
    out = []
    for pts_y, pts_z in ((np.zeros_like(z), z), (y, np.zeros_like(y))):
        dy = SY[:, None, None] * cos_th[None, :, None]  # (4, na, 1): molecule direction
        dz = SZ[:, None, None] * sin_th[None, :, None]
        with np.errstate(divide="ignore"):
            # backward ray P - s (dy, dz) in the full rectangle [0, 1] x [0, A]
            sy_ = np.where(dy > 0, pts_y / dy, (1.0 - pts_y) / -dy)
            sz_ = np.where(dz > 0, pts_z / dz, (a_r - pts_z) / -dz)
        s = np.minimum(sy_, sz_)[:, :, None, :]  # (4, na, 1, n_wall)
        c = c_nodes[None, None, :, None]
        f = s / c if nu_delta == 0.0 else -np.expm1(-nu_delta * s / c) / nu_delta
        out.append(((d[0] + d[1] * c**2) * f, (d[2] + d[3] * c**2) * f))
    return out


def uncollided_weight(delta: float) -> float:
    """Share w = 1 / (1 + (delta / UNCOLLIDED_DELTA)^4) of the uncollided part taken analytically.

    Any share is exact (the sweep carries the drive times 1 - w); it decides
    which part the upwind differences see.  Long rays (small delta) need the
    analytic part: the discrete ordinates miss the grazing directions (ray
    effect).  At large delta the drive's Knudsen layer is thinner than the
    cells, and the scheme's errors on it and on the collided layer cancel
    only when both are swept, so the share falls off from delta ~ 4
    (w = 0.99 at delta = 1, 0.29 at 5, 0.025 at 10).
    """
    return 1.0 / (1.0 + (float(delta) / UNCOLLIDED_DELTA) ** 4)
