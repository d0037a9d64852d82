"""Deterministic relaxation of a space-homogeneous gas under the BGK, S-model and ES-BGK equations.

    df/dt = nu (G[f] - f)                                       (1)

on a uniform 3-D discrete velocity grid, reduced units (n = 1, velocity unit
sqrt(kT/m), time in mean collision times, Prandtl number Pr = 2/3 for the
S-model and ES-BGK):

    BGK     G = M[f],                         nu = p/mu
            (Bhatnagar, Gross & Krook, Phys. Rev. 94 (1954) 511)
    S-model G = M [1 + (1 - Pr) (q.c)/(5 p theta) (c**2/theta - 5)], nu = p/mu
            (Shakhov, Fluid Dyn. 3 (1968) 95): stress relaxes at p/mu, heat
            flux at Pr p/mu
    ES-BGK  G = Gaussian with tensor Lambda = theta I / Pr - (1 - Pr)/Pr Theta,
            Theta = P / rho,                  nu = Pr p/mu
            (Holway, Phys. Fluids 9 (1966) 1658; Andries et al., Eur. J. Mech.
            B 19 (2000) 813): stress relaxes at p/mu, heat flux at Pr p/mu

p/mu in reduced units is the molecular model's collision_time_factor (see
:mod:`knudsweep.solver.relaxation.cross_sections`).

Conservation on the grid.  Following Mieussens, J. Comput. Phys. 162 (2000)
429, the target is made conservative on the grid: the discrete target is

    G_d(v) = G(v) exp(a . phi(v)),   phi = (1, v_x, v_y, v_z, |v|**2/2),

with the five numbers a found by Newton's method so that sum phi G_d w equals
sum phi f w exactly.  For BGK this is Mieussens' discrete Maxwellian
exp(a' . phi); for the S-model and ES-BGK the same exponential moment
correction is our own extension.  Since f and G_d carry the same conserved
moments, the exponential step

    f^{n+1} = exp(-nu dt) f^n + (1 - exp(-nu dt)) G_d[f^n]     (2)

conserves mass, momentum and energy to round-off.  (2) is exact for frozen G;
for BGK G depends only on the conserved moments, so (2) is the exact solution.
It is a convex combination, so the discrete H-function cannot increase when
H(G_d) <= H(f) (true for Mieussens' discrete Maxwellian, which minimises H
under the moment constraints).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from knudsweep.solver.kinetic_models import MODEL_NAMES, get_model
from knudsweep.solver.relaxation.h_function import (
    _relative_entropy_grid,
    axis_overlap,
    binned_divergence_grid,
    binned_probabilities_grid,
)

MODEL_EQUATIONS = MODEL_NAMES  # the registry of model equations (solver.kinetic_models)
MODEL_CODE = {"bgk": 0, "s_model": 1, "es_bgk": 2}
PRANDTL = get_model("es_bgk").prandtl  # the ES-BGK target's Prandtl number

# Columns of the per-output record (shared layout with the particle solver
# where the quantities coincide).
N_GRID_MOMENTS = 15  # rho, rho u (3), energy, P (6), q (3), <c^4>

# Fixed bins of the recorded x-marginal f_x(v_x) (reduced units), identical
# for every method (particle and deterministic) so that points can be gathered
# on one coordinate.
HIST_LO, HIST_WIDTH, HIST_BINS = -6.0, 0.25, 48


class NewtonFailure(RuntimeError):
    """The conservative-target Newton iteration did not converge."""


@dataclass(frozen=True)
class VelocityGrid:
    """Uniform grid of n**3 cell-centred nodes on [-L, L]**3."""

    n: int
    half_width: float

    @property
    def spacing(self) -> float:
        return 2.0 * self.half_width / self.n

    @property
    def axis(self) -> np.ndarray:
        h = self.spacing
        return -self.half_width + (np.arange(self.n) + 0.5) * h

    @property
    def weight(self) -> float:
        return self.spacing**3

    def nodes(self) -> np.ndarray:
        """Node velocities v[n**3, 3] (x slowest, z fastest)."""
        a = self.axis
        vx, vy, vz = np.meshgrid(a, a, a, indexing="ij")
        return np.ascontiguousarray(np.stack([vx.ravel(), vy.ravel(), vz.ravel()], axis=1))


def make_grid(n_velocity: int, half_width: float) -> VelocityGrid:
    """Check and build the grid: n_velocity in [8, 128], half_width in [3, 50]."""
    n = int(n_velocity)
    if not (8 <= n <= 128) or n != n_velocity:
        raise ValueError(f"n_velocity: must be an integer in [8, 128], got {n_velocity!r}")
    if not (3.0 <= float(half_width) <= 50.0):
        raise ValueError(f"velocity_half_width: must lie in [3, 50], got {half_width!r}")
    return VelocityGrid(n, float(half_width))


@njit(cache=True)
def _grid_moments(f: np.ndarray, v: np.ndarray, w: float, out: np.ndarray) -> None:
    """out = [rho, rho u_x, rho u_y, rho u_z, E, P_xx, P_yy, P_zz, P_xy, P_xz, P_yz, q_x, q_y, q_z, <c^4>]."""
    rho = 0.0
    mx = my = mz = 0.0
    e = 0.0
    for i in range(f.shape[0]):
        fi = f[i] * w
        rho += fi
        mx += fi * v[i, 0]
        my += fi * v[i, 1]
        mz += fi * v[i, 2]
        e += 0.5 * fi * (v[i, 0] ** 2 + v[i, 1] ** 2 + v[i, 2] ** 2)
    ux = mx / rho
    uy = my / rho
    uz = mz / rho
    pxx = pyy = pzz = pxy = pxz = pyz = 0.0
    qx = qy = qz = 0.0
    m4 = 0.0
    for i in range(f.shape[0]):
        fi = f[i] * w
        cx = v[i, 0] - ux
        cy = v[i, 1] - uy
        cz = v[i, 2] - uz
        c2 = cx * cx + cy * cy + cz * cz
        pxx += fi * cx * cx
        pyy += fi * cy * cy
        pzz += fi * cz * cz
        pxy += fi * cx * cy
        pxz += fi * cx * cz
        pyz += fi * cy * cz
        qx += 0.5 * fi * c2 * cx
        qy += 0.5 * fi * c2 * cy
        qz += 0.5 * fi * c2 * cz
        m4 += fi * c2 * c2
    out[0] = rho
    out[1] = mx
    out[2] = my
    out[3] = mz
    out[4] = e
    out[5] = pxx
    out[6] = pyy
    out[7] = pzz
    out[8] = pxy
    out[9] = pxz
    out[10] = pyz
    out[11] = qx
    out[12] = qy
    out[13] = qz
    out[14] = m4 / rho


@njit(cache=True)
def _continuous_target(
    code: int, v: np.ndarray, mom: np.ndarray, prandtl: float, lam_inv: np.ndarray, lam_det: float, out: np.ndarray
) -> None:
    """Target G of model ``code`` at the nodes from the moments ``mom`` (layout of _grid_moments).

    For ES-BGK lam_inv / lam_det are the inverse and determinant of Lambda.
    """
    rho = mom[0]
    ux = mom[1] / rho
    uy = mom[2] / rho
    uz = mom[3] / rho
    theta = (2.0 * mom[4] / rho - (ux * ux + uy * uy + uz * uz)) / 3.0
    p = rho * theta
    qx = mom[11]
    qy = mom[12]
    qz = mom[13]
    norm_m = rho / (2.0 * math.pi * theta) ** 1.5
    norm_es = rho / math.sqrt((2.0 * math.pi) ** 3 * lam_det)
    for i in range(v.shape[0]):
        cx = v[i, 0] - ux
        cy = v[i, 1] - uy
        cz = v[i, 2] - uz
        c2 = cx * cx + cy * cy + cz * cz
        if code == 2:
            quad = (
                lam_inv[0, 0] * cx * cx
                + lam_inv[1, 1] * cy * cy
                + lam_inv[2, 2] * cz * cz
                + 2.0 * (lam_inv[0, 1] * cx * cy + lam_inv[0, 2] * cx * cz + lam_inv[1, 2] * cy * cz)
            )
            out[i] = norm_es * math.exp(-0.5 * quad)
        else:
            m = norm_m * math.exp(-0.5 * c2 / theta)
            if code == 1:
                qc = qx * cx + qy * cy + qz * cz
                m *= 1.0 + (1.0 - prandtl) * qc / (5.0 * p * theta) * (c2 / theta - 5.0)
            out[i] = m


@njit(cache=True)
def _correction_system(
    g: np.ndarray, v: np.ndarray, w: float, a: np.ndarray, moments: np.ndarray, jac: np.ndarray, gd: np.ndarray
) -> None:
    """gd = g exp(a.phi); moments = sum phi gd w; jac = sum phi phi^T gd w."""
    moments[:] = 0.0
    jac[:, :] = 0.0
    phi = np.empty(5)
    for i in range(g.shape[0]):
        phi[0] = 1.0
        phi[1] = v[i, 0]
        phi[2] = v[i, 1]
        phi[3] = v[i, 2]
        phi[4] = 0.5 * (v[i, 0] ** 2 + v[i, 1] ** 2 + v[i, 2] ** 2)
        s = a[0] + a[1] * phi[1] + a[2] * phi[2] + a[3] * phi[3] + a[4] * phi[4]
        val = g[i] * math.exp(s)
        gd[i] = val
        for r in range(5):
            moments[r] += phi[r] * val * w
            for c in range(r, 5):
                jac[r, c] += phi[r] * phi[c] * val * w
    for r in range(5):
        for c in range(r):
            jac[r, c] = jac[c, r]


@njit(cache=True)
def _exponential_step(f: np.ndarray, gd: np.ndarray, decay: float) -> None:
    """f <- decay f + (1 - decay) gd, eq. (2)."""
    for i in range(f.shape[0]):
        f[i] = decay * f[i] + (1.0 - decay) * gd[i]


def conservative_target(
    g: np.ndarray, v: np.ndarray, w: float, target: np.ndarray, tol: float = 2e-15, max_iter: int = 60
) -> np.ndarray:
    """G_d = g exp(a.phi) whose conserved moments equal ``target`` (5 numbers), Newton on a.

    Converged when every moment residual is below tol times the moment scale
    (density, sqrt(2 E rho), energy): round-off level of a sum over ~1e5 nodes.
    """
    a = np.zeros(5)
    moments = np.zeros(5)
    jac = np.zeros((5, 5))
    gd = np.empty_like(g)
    scale = np.array([target[0], *(math.sqrt(2.0 * target[4] * target[0]),) * 3, target[4]])
    for _ in range(max_iter):
        _correction_system(g, v, w, a, moments, jac, gd)
        resid = moments - target
        if np.all(np.abs(resid) <= tol * scale * 10.0):
            return gd
        try:
            step = np.linalg.solve(jac, resid)
        except np.linalg.LinAlgError:  # f too poorly resolved for the five moments
            break
        a -= step
        if not np.all(np.isfinite(a)):
            break
    _correction_system(g, v, w, a, moments, jac, gd)
    resid = moments - target
    if np.all(np.abs(resid) <= 1e-12 * scale):
        # round-off floor reached although the strict tolerance was not
        return gd
    raise NewtonFailure(f"conservative target: Newton did not converge, residual {np.max(np.abs(resid) / scale):.3e}")


def _es_tensor(mom: np.ndarray, prandtl: float) -> tuple[np.ndarray, float]:
    rho = mom[0]
    u = mom[1:4] / rho
    theta = (2.0 * mom[4] / rho - u @ u) / 3.0
    big_theta = np.array([[mom[5], mom[8], mom[9]], [mom[8], mom[6], mom[10]], [mom[9], mom[10], mom[7]]]) / rho
    lam = theta / prandtl * np.eye(3) - (1.0 - prandtl) / prandtl * big_theta
    det = float(np.linalg.det(lam))
    if not det > 0.0:
        raise NewtonFailure(f"ES-BGK tensor not positive definite (det {det:.3e})")
    return np.linalg.inv(lam), det


def discrete_target(code: int, f: np.ndarray, v: np.ndarray, w: float, prandtl: float = PRANDTL) -> np.ndarray:
    """Conservative discrete target G_d[f] of model ``code`` (0 BGK, 1 S-model, 2 ES-BGK)."""
    mom = np.zeros(N_GRID_MOMENTS)
    _grid_moments(f, v, w, mom)
    lam_inv, lam_det = (np.eye(3), 1.0) if code != 2 else _es_tensor(mom, prandtl)
    g = np.empty_like(f)
    _continuous_target(code, v, mom, prandtl, lam_inv, lam_det, g)
    return conservative_target(g, v, w, mom[:5].copy())


def normalise_initial(f: np.ndarray, v: np.ndarray, w: float) -> np.ndarray:
    """Correct the sampled initial density so its grid moments are exactly (1, 0, 0, 0, 3/2)."""
    return conservative_target(f, v, w, np.array([1.0, 0.0, 0.0, 0.0, 1.5]))


def relaxation_frequency(model_equation: str, pressure_over_viscosity: float) -> float:
    """nu of eq. (1) in reduced units."""
    if model_equation == "es_bgk":
        return PRANDTL * pressure_over_viscosity
    return pressure_over_viscosity


class GridRecord:
    """Output record of a deterministic run on a velocity grid (BGK family and fast spectral).

    At each output time: the grid moments (layout of :func:`_grid_moments`),
    the binned relative H on the equiprobable cells ``edges`` of the grid's own
    equilibrium ``m_eq`` (so it tends to exactly 0), the grid relative entropy
    sum f ln(f/M_d) w, and the x-marginal interpolated to the HIST_* bins.
    """

    def __init__(self, grid: VelocityGrid, m_eq: np.ndarray, edges: np.ndarray, n_output: int, axis_overlaps=None):
        self.grid = grid
        self.v = grid.nodes()
        self.m_eq = m_eq
        # O[i, a]: share of node i's weight in H cell a, f constant on each grid cell; or
        # ``axis_overlaps(moments)`` -> [O_x, O_y, O_z] recomputed at each output time
        self.overlap = axis_overlap(grid.axis, grid.spacing, edges)
        self.axis_overlaps = axis_overlaps
        self.q_axes: np.ndarray | None = None
        self.q_eq = binned_probabilities_grid(m_eq, grid.n, grid.weight, self.overlap)
        self.mom = np.zeros(N_GRID_MOMENTS)
        self.rec = np.zeros((n_output, N_GRID_MOMENTS))
        self.h_bin = np.zeros(n_output)
        self.h_fine = np.zeros(n_output)
        self.dist = np.zeros((n_output, HIST_BINS))
        self.centres = HIST_LO + (np.arange(HIST_BINS) + 0.5) * HIST_WIDTH
        self.min_f = math.inf
        self.max_f = -math.inf

    def record(self, k: int, f: np.ndarray) -> None:
        g, n, w = self.grid, self.grid.n, self.grid.weight
        _grid_moments(f, self.v, w, self.mom)
        self.rec[k] = self.mom
        if self.axis_overlaps is None:
            self.h_bin[k] = binned_divergence_grid(f, n, w, self.overlap, self.q_eq)
        else:
            if self.q_axes is None:  # the equilibrium's cells from its own moments
                _grid_moments(self.m_eq, self.v, w, self.mom)
                self.q_axes = self._probabilities(self.m_eq, self.axis_overlaps(self.mom))
                _grid_moments(f, self.v, w, self.mom)
            p = self._probabilities(f, self.axis_overlaps(self.mom))
            q = self.q_axes
            nz = p > 0.0
            self.h_bin[k] = float(np.sum(p[nz] * np.log(p[nz] / q[nz])))
        try:
            self.h_fine[k] = _relative_entropy_grid(f, self.m_eq, w)
        except ZeroDivisionError:  # f > 0 where M_d underflows to 0: H is infinite (point fails)
            self.h_fine[k] = math.inf
        marginal = f.reshape(n, n, n).sum(axis=(1, 2)) * g.spacing**2
        self.dist[k] = np.interp(self.centres, g.axis, marginal, left=0.0, right=0.0)
        self.extremes(f)

    def _probabilities(self, f: np.ndarray, overlaps) -> np.ndarray:
        n = self.grid.n
        p = np.einsum("ijl,ia,jb,lc->abc", f.reshape(n, n, n), *overlaps, optimize=True).ravel()
        return p / p.sum()

    def extremes(self, f: np.ndarray) -> None:
        """Track min f and max f (also between output times)."""
        self.min_f = min(self.min_f, float(f.min()))
        self.max_f = max(self.max_f, float(f.max()))

    def result(self) -> dict:
        """The dictionary that :func:`knudsweep.solver.relaxation.solve` assembles (one 'replica')."""
        rec = self.rec
        rho = rec[:, 0:1]
        temp = np.concatenate([rec[:, 5:8], rec[:, 8:11]], axis=1) / rho
        return {
            "temperature": temp[None],
            "fourth_moment": rec[None, :, 14],
            "heat_flux": (rec[:, 11:14] / rho)[None],
            "h_function": self.h_bin[None],
            "h_fine": self.h_fine,
            "collisions": None,
            "distribution": self.dist[None],
            "momentum_drift": float(np.max(np.abs(rec[:, 1:4]))),
            "energy_drift": float(np.max(np.abs(rec[:, 4] - 1.5))),
            "mass_drift": float(np.max(np.abs(rec[:, 0] - 1.0))),
            "exceedances": 0.0,
            "h_bias": 0.0,
            "min_distribution": self.min_f,
            "max_distribution": self.max_f,
        }
