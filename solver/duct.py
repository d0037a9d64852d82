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

Equations and moments are those of ``solver.tube`` (reduced functions Phi1,
Phi3 after integrating out c_x; in-plane velocity c (cos theta, sin theta)).

Method
------
Discrete ordinates on a quarter of the cross-section (the planes y = 1/2 and
z = A/2 are symmetry planes, i.e. specular reflectors applied exactly within a
sweep by ordering the quadrants).  Second-order upwind differences on a grid
clustered towards the walls (first order next to a boundary); Maxwell walls
re-emit (1 - alpha) times the mirrored distribution of the previous sweep.

Acceleration (synthetic, cf. Su, Zhu & Wu, J. Comput. Phys. 407 (2020)
109245): after each sweep the change R of u drives a correction e solving

    A e = R ,   A = (1/(nu delta)) sum_dirs w c.D_up  +  (1/(2 nu delta^2)) (-Laplacian_h)

where the first term is the dissipation that the upwind differences D_up add
to grid-scale modes (it makes the correction consistent with the sweep in
optically thick cells) and the second is the Navier-Stokes momentum balance
(tau = -grad u / (2 delta)).  Walls carry the first-order slip condition
e - (sigma/delta) de/dn_in = 0.  A is factorised once (scipy.sparse LU).
"""

from __future__ import annotations

import math
import time

import numpy as np
import scipy.sparse as sp
from numba import njit, prange
from scipy.sparse.linalg import splu

from solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult
from solver.tube import check_common, heat_coefficient, source_polynomials, speed_rule
from solver.walls import CercignaniLampisWall, MaxwellWall

__all__ = ["solve_duct", "continuum_flow_rate", "MAX_ASPECT_RATIO"]

MAX_ASPECT_RATIO = 50.0
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


def _clustered(n: int, length: float) -> np.ndarray:
    """n nodes on [0, length], clustered at 0 (wall), x = length (1 - cos(pi xi / 2))."""
    xi = np.linspace(0.0, 1.0, n)
    x = length * (1.0 - np.cos(0.5 * np.pi * xi))
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
def _sweep_direction(phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, reflect, prev1, prev3, qy, qz):
    """Sweep one direction (quadrant q, angle m, speed k) over the quarter grid.

    sy, sz = +1/-1 direction signs; cy, cz = |c_y|, |c_z|.  Inflow: walls (i=0
    for sy>0, j=0 for sz>0) take (1-alpha) x the mirrored value of the previous
    sweep (prev*, quadrant qy / qz); symmetry planes (last index) take the
    mirrored value of the current sweep.
    """
    ny = s1.shape[0]
    nz = s1.shape[1]
    for ii in range(ny):
        i = ii if sy > 0 else ny - 1 - ii
        for jj in range(nz):
            j = jj if sz > 0 else nz - 1 - jj
            if sy > 0 and i == 0:
                phi1[q, m, k, i, j] = reflect * prev1[qy, m, k, i, j]
                phi3[q, m, k, i, j] = reflect * prev3[qy, m, k, i, j]
                continue
            if sz > 0 and j == 0:
                phi1[q, m, k, i, j] = reflect * prev1[qz, m, k, i, j]
                phi3[q, m, k, i, j] = reflect * prev3[qz, m, k, i, j]
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
def _sweep_stage(q0, nquad, phi1, phi3, prev1, prev3, c_nodes, cos_th, sin_th, nu_delta, reflect, uf, qf, tyf, tzf, src, by, fy, bz, fz):
    """Sweep quadrants q0 .. q0+nquad-1 (independent of each other), prange over directions.

    Sources per direction: S1 = src[0] u + (src[1] + src[2] c^2) q + src[3] (c_y tau_y + c_z tau_z)
    + src[4] + src[5] c^2, S3 with src[6:12].
    """
    na = cos_th.size
    nc = c_nodes.size
    for idx in prange(nquad * na * nc):
        q = q0 + idx // (na * nc)
        rest = idx % (na * nc)
        _sweep_one(phi1, phi3, prev1, prev3, q, rest // nc, rest % nc, c_nodes, cos_th, sin_th, nu_delta, reflect, uf, qf, tyf, tzf, src, by, fy, bz, fz)


def _sweep(*args):
    """Full sweep: quadrant (+,+), then (-,+) and (+,-), then (-,-), so that the
    inflow at each symmetry plane is the mirrored value of the same sweep."""
    for q0, nquad in ((0, 1), (1, 2), (3, 1)):
        _sweep_stage(q0, nquad, *args)


@njit(cache=True)
def _sweep_one(phi1, phi3, prev1, prev3, q, m, k, c_nodes, cos_th, sin_th, nu_delta, reflect, uf, qf, tyf, tzf, src, by, fy, bz, fz):
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
    _sweep_direction(phi1, phi3, q, m, k, sy, sz, cy, cz, nu_delta, s1, s3, by, fy, bz, fz, reflect, prev1, prev3, _QY[q], _QZ[q])


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


def _trapezoid_2d(y, z, f) -> float:
    return float(np.trapezoid(np.trapezoid(f, z, axis=1), y))


def default_sizes(delta: float, aspect_ratio: float) -> tuple[int, int, int, int]:
    """(nodes across the half height, across the half width, angles per quadrant, speeds)."""
    # thermal creep at large delta lives in the Knudsen layer: G_T delta at
    # delta = 1000 moved from 1.69 (33 nodes) to 0.85 (65 nodes); see report
    ny = 25 if delta <= 10 else (33 if delta <= 100 else 65)
    nz = int(round(ny * (1.0 + 0.5 * math.log2(aspect_ratio))))
    return ny, nz, 6, 12


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
) -> SolverResult:
    """Solve Poiseuille or thermal-creep flow in a long rectangular duct; see the module docstring.

    delta : p H / (mu v0) on the height H (the smaller side), in [0, 1e5].
    aspect_ratio : width / height A in [1, 50].
    n_space : nodes across the half height (the half width gets
              n_space (1 + log2(A)/2)); n_velocity : speed nodes (angles per
              quadrant = n_velocity / 2).
    Returns a SolverResult (family "duct") with G_P, Q_P or G_T, Q_T per unit width.
    """
    t_start = time.perf_counter()
    km, alpha = check_common(problem, delta, model, wall, tol, max_iter, "duct")
    a_r = float(aspect_ratio)
    if not (math.isfinite(a_r) and 1.0 <= a_r <= MAX_ASPECT_RATIO):
        raise ValueError(f"aspect_ratio: must be in [1, {MAX_ASPECT_RATIO:g}], got {aspect_ratio!r}")
    delta = float(delta)
    ny, nz, na, nc = default_sizes(delta, a_r)
    if n_space is not None:
        if isinstance(n_space, bool) or int(n_space) != n_space or not 5 <= int(n_space) <= 400:
            raise ValueError(f"n_space: must be an integer in [5, 400], got {n_space!r}")
        ny = int(n_space)
        nz = int(round(ny * (1.0 + 0.5 * math.log2(a_r))))
    if n_velocity is not None:
        if isinstance(n_velocity, bool) or int(n_velocity) != n_velocity or not 4 <= int(n_velocity) <= 128:
            raise ValueError(f"n_velocity: must be an integer in [4, 128], got {n_velocity!r}")
        nc = int(n_velocity)
        na = max(nc // 2, 2)
    if max_iter is None:
        max_iter = 400 if accelerate else 200000

    y = _clustered(ny, 0.5)
    z = _clustered(nz, 0.5 * a_r)
    by, fy = _upwind_coefficients(y)
    bz, fz = _upwind_coefficients(z)
    th = (np.arange(na) + 0.5) * (0.5 * np.pi / na)
    cos_th, sin_th = np.cos(th), np.sin(th)
    c, cw = speed_rule(nc, delta)
    nc = c.size
    weight = cw[None, :] * np.full(na, (0.5 * np.pi / na) / np.pi)[:, None]  # (1/pi) dtheta w_k, one quadrant

    nu_delta = km.collision_factor * delta
    reflect = 1.0 - alpha
    poly = source_polynomials(problem, heat_coefficient(km), km.stress_coefficient)
    src = np.array([
        nu_delta * poly["u1"], nu_delta * poly["q1"][0], nu_delta * poly["q1"][1], nu_delta * poly["t1"],
        poly["d1"][0], poly["d1"][1],
        nu_delta * poly["u3"], nu_delta * poly["q3"][0], nu_delta * poly["q3"][1], nu_delta * poly["t3"],
        poly["d3"][0], poly["d3"][1],
    ])
    shape = (4, na, nc, ny, nz)
    phi1 = np.zeros(shape)
    phi3 = np.zeros(shape)
    prev1 = np.zeros(shape)
    prev3 = np.zeros(shape)
    u = np.zeros((ny, nz))
    ty = np.zeros((ny, nz))
    tz = np.zeros((ny, nz))
    q = np.zeros((ny, nz))
    un, tyn, tzn, qn = (np.zeros((ny, nz)) for _ in range(4))
    slip = _ACCEL_SLIP * (2.0 - alpha) / alpha
    corr = None
    if accelerate and delta > 0.0:
        corr = _DuctCorrection(y, z, by, fy, bz, fz, weight, c, cos_th, sin_th, nu_delta, delta, slip)

    residuals = []
    status, reason, iterations = FAILED, "", 0
    for it in range(1, max_iter + 1):
        prev1[...] = phi1
        prev3[...] = phi3
        _sweep(phi1, phi3, prev1, prev3, c, cos_th, sin_th, nu_delta, reflect, u, q, ty, tz, src, by, fy, bz, fz)
        _moments(phi1, phi3, weight, c, cos_th, sin_th, un, tyn, tzn, qn)
        if corr is not None:
            e = corr.solve(un - u)
            un = un + e
            # shear of the correction, -grad e / (2 delta), keeps tau consistent
            # with u (needed when tau feeds back into the source: ES-BGK)
            tyn = tyn - np.gradient(e, y, axis=0) / (2.0 * delta)
            tzn = tzn - np.gradient(e, z, axis=1) / (2.0 * delta)
        change = np.max(np.abs(un - u)) / max(np.max(np.abs(un)), 1e-300)
        if poly["q1"][1] != 0.0:
            change = max(change, np.max(np.abs(qn - q)) / max(np.max(np.abs(qn)), 1e-300))
        if poly["t1"] != 0.0:
            change = max(change, np.max(np.abs(tyn - ty)) / max(np.max(np.abs(tyn)), 1e-300))
        u, ty, tz, q = un.copy(), tyn.copy(), tzn.copy(), qn.copy()
        residuals.append(change)
        iterations = it
        if not np.all(np.isfinite(u)):
            reason = f"non-finite flow velocity at iteration {it}"
            break
        if delta == 0.0 and reflect == 0.0:
            status = CONVERGED  # free-molecular, diffuse walls: one sweep is exact
            break
        if change < tol:
            status = CONVERGED
            break
    else:
        reason = f"relative change {residuals[-1]:.3e} > tol {tol:g} after max_iter={max_iter} iterations"

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
        "n_y_half": ny,
        "n_z_half": nz,
        "n_angle_quadrant": na,
        "n_speed": nc,
        "method": "discrete ordinates, second-order upwind, quarter domain",
        "tolerance": tol,
        "max_iter": int(max_iter),
    }
    conv = ConvergenceRecord(np.asarray(residuals), iterations, status, reason, tol)
    return SolverResult("duct", problem, params, coords, profiles, coefficients, disc, conv, time.perf_counter() - t_start)
