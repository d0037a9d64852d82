"""The BGK viscous- and thermal-slip coefficients, computed here independently of the solvers.

Kramers' problem (shear flow over a diffuse wall at rest in a half-space) for
the linearised BGK equation, lengths in ell = mu v0 / p, reduces to the
integral equation for the flow velocity (Cercignani, The Boltzmann Equation
and Its Applications, Springer 1988, Ch. V; Abramowitz functions
T_n(x) = int_0^inf t^n exp(-t^2 - x/t) dt, Abramowitz & Stegun 1964, 27.5)

    u(x) = pi^(-1/2) int_0^inf T_{-1}(|x - x'|) u(x') dx' ,
    u(x) -> x + sigma_P  (x -> inf),   shear stress pi^(-1/2) int_0^inf T_0 u = 1/2 ,

the last line being the far-field normalisation (slope 1 gives tau = -1/2;
dT_n/dx = -T_{n-1}).  Solved by collocation with u piecewise constant on a
wall-graded grid over [0, L], u = x + sigma beyond L, cell integrals of the
kernel exact through T_0, T_1, T_2 (scipy quad_vec); second order in the cell
size (measured ratio 3.9 per halving), so two grids and Richardson give
sigma_P.  Measured: 1.01616 (L = 16, 400 and 800 cells) and 1.01617 (800 and
1600 cells); the remaining truncation and grid error is below 5e-5.

Thermal slip (the half-space thermal-creep problem, temperature gradient X_T =
(ell/T) dT/dy = 1 along the wall; the gradient of the local Maxwellian at
constant p gives the source -c_y (c^2 - 5/2)):

    u(x) = pi^(-1/2) int_0^inf T_{-1}(|x - x'|) u(x') dx' + (T_2(x) - T_0(x)/2) / (2 sqrt(pi)) ,
    u -> u_inf (x -> inf),   zero shear stress:  int_0^inf T_0 u dx' = 1/8 ,

and sigma_T = 2 u_inf, because (mu / (rho T)) dT/dy = v0 / 2 at X_T = 1 in
units of v0.  Same collocation; measured 0.76626 (400 and 800 cells), second
order (ratio 3.9), remaining error below 5e-5.
No solver code is used.
"""

import functools
import math

import numpy as np
from scipy.integrate import quad_vec

SQRT_PI = math.sqrt(math.pi)
SIGMA_P_UNCERTAINTY = 5e-5  # grid and truncation error of bgk_viscous_slip() (see the docstring)


def abramowitz(n: int, x: np.ndarray) -> np.ndarray:
    """T_n(x) for an array x >= 0 (adaptive quadrature, relative accuracy 1e-12)."""
    x = np.asarray(x, float)

    def f(t):
        return np.zeros_like(x) if t == 0.0 else t**n * np.exp(-t * t - x / t)

    return quad_vec(f, 0.0, np.inf, epsabs=1e-14, epsrel=1e-12, limit=2000)[0]


def _collocation(n_cells: int, length: float, grade: float):
    """Cells, the kernel matrix pi^(-1/2) int_cell T_{-1}(|x_i - x'|) dx', T_0(L - x_i), int_cell T_0."""
    edges = length * np.linspace(0.0, 1.0, n_cells + 1) ** grade
    a, b = edges[:-1], edges[1:]
    xc = 0.5 * (a + b)
    da, db = np.abs(xc[:, None] - a[None, :]), np.abs(xc[:, None] - b[None, :])
    uniq, inv = np.unique(np.concatenate([da.ravel(), db.ravel(), length - xc]), return_inverse=True)
    t0 = abramowitz(0, uniq)
    t0a, t0b = t0[inv[: da.size]].reshape(da.shape), t0[inv[da.size : 2 * da.size]].reshape(da.shape)
    inside = (xc[:, None] >= a[None, :]) & (xc[:, None] <= b[None, :])
    below = xc[:, None] < a[None, :]
    # int over a cell of T_{-1}(|x - x'|) dx' = differences of T_0 (T_0(0) = sqrt(pi)/2)
    kernel = np.where(below, t0a - t0b, np.where(inside, SQRT_PI - t0a - t0b, t0b - t0a)) / SQRT_PI
    t1_edges = abramowitz(1, edges)
    return xc, kernel, t0[inv[2 * da.size :]], t1_edges[:-1] - t1_edges[1:]


@functools.cache
def slip_on_grid(n_cells: int, length: float = 16.0, grade: float = 1.5) -> float:
    """sigma_P from the collocation on n_cells cells, edges L (k/n)^grade."""
    xc, kernel, t0_tail, t0_cells = _collocation(n_cells, length, grade)
    n = n_cells
    mat, rhs = np.zeros((n + 1, n + 1)), np.zeros(n + 1)
    mat[:n, :n] = np.eye(n) - kernel
    # beyond L: int_L^inf T_{-1}(x' - x)(x' + sigma) dx' = (L + sigma) T_0(L - x) + T_1(L - x)
    mat[:n, n] = -t0_tail / SQRT_PI
    rhs[:n] = (length * t0_tail + abramowitz(1, length - xc)) / SQRT_PI
    t1_l, t2_l = abramowitz(1, np.array([length]))[0], abramowitz(2, np.array([length]))[0]
    mat[n, :n] = t0_cells
    mat[n, n] = t1_l
    rhs[n] = SQRT_PI / 2 - (length * t1_l + t2_l)
    return float(np.linalg.solve(mat, rhs)[-1])


@functools.cache
def thermal_slip_on_grid(n_cells: int, length: float = 16.0, grade: float = 1.5) -> float:
    """sigma_T from the collocation on n_cells cells (u = u_inf beyond L)."""
    xc, kernel, t0_tail, t0_cells = _collocation(n_cells, length, grade)
    n = n_cells
    mat, rhs = np.zeros((n + 1, n + 1)), np.zeros(n + 1)
    mat[:n, :n] = np.eye(n) - kernel
    mat[:n, n] = -t0_tail / SQRT_PI  # int_L^inf T_{-1}(x' - x) dx' = T_0(L - x)
    rhs[:n] = (abramowitz(2, xc) - 0.5 * abramowitz(0, xc)) / (2.0 * SQRT_PI)
    mat[n, :n] = t0_cells
    mat[n, n] = abramowitz(1, np.array([length]))[0]
    rhs[n] = 1.0 / 8.0
    return 2.0 * float(np.linalg.solve(mat, rhs)[-1])


@functools.cache
def bgk_viscous_slip() -> float:
    """sigma_P of the BGK model, diffuse wall, in ell = mu v0 / p (Richardson on 400 and 800 cells)."""
    coarse, fine = slip_on_grid(400), slip_on_grid(800)
    return fine + (fine - coarse) / 3.0


@functools.cache
def bgk_thermal_slip() -> float:
    """sigma_T of the BGK model, diffuse wall (Richardson on 400 and 800 cells)."""
    coarse, fine = thermal_slip_on_grid(400), thermal_slip_on_grid(800)
    return fine + (fine - coarse) / 3.0
