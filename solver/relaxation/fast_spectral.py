"""Deterministic solution of the space-homogeneous nonlinear Boltzmann equation (fast spectral method).

    df/dt = Q(f, f),   Q = int_R3 int_S2 B(|g|, cos chi) [f(v') f(v*') - f(v) f(v*)] dsigma dv*     (1)

in the reduced units of :mod:`knudsweep.solver.relaxation.cross_sections` (n = 1, velocity
sqrt(kT/m), time in mean collision times), with the same VHS/VSS cross-section
as the particle solver (hard spheres and Maxwell molecules as special cases):

    B = sigma_T c_r * (alpha / 4 pi) cos(chi/2)**(2 alpha - 2),  sigma_T c_r = A |g|**k,  k = 2 - 2 omega

(Bird 1994, Secs. 2.6 and 4.3; Koura & Matsumoto, Phys. Fluids A 3 (1991)
2459: the scattering law cos chi = 2 U**(1/alpha) - 1 of the particle kernel).

Collision integral.  The fast spectral method of Mouhot & Pareschi, Math.
Comp. 75 (2006) 1833, eqs. (2.4) and (3.10)-(3.16).  In Carleman's form

    Q(v) = int int Bt(x, y) delta(x.y) [f(v + x) f(v + y) - f(v + x + y) f(v)] dx dy,
    Bt = 4 B(|x + y|, chi) / |x + y| = (A alpha / pi) |x|**(2 alpha - 2) |x + y|**(k + 1 - 2 alpha),

(y = v' - v, |x| = |g| cos(chi/2)), both |x|, |y| truncated at R, on the
periodic box [-L, L]**3 with the velocity grid of
:mod:`knudsweep.solver.relaxation.deterministic`.  Writing x = rho e, y = rho' e' the
kernel enters through G(rho, rho') = rho rho' Bt.  For hard spheres G is a
product (Mouhot & Pareschi's case).  For other VHS/VSS molecules G is
non-separable; here it is replaced by its truncated singular-value expansion
G ~ sum_r a_r(rho) b_r(rho') on Gauss-Legendre nodes in rho, kept to relative
singular value ``rank_tol``.  (Wu, White, Scanlon, Reese & Zhang, J. Comput.
Phys. 250 (2013) 27, instead change the angular dependence of B so that G
separates; the expansion used here keeps the particle solver's cross-section
exactly, our own variant.)  Each term gives Mouhot & Pareschi's decomposition

    Q+(v) = sum_r sum_{e in S2+} w_e  F^-1[phi_r(xi.e) f^](v) * F^-1[psi_r(|xi - (xi.e) e|) f^](v),
    phi_r(s) = 2 int_0^R a_r(rho) cos(rho s) drho,   psi_r(t) = 2 pi int_0^R b_r(rho) J0(rho t) drho,
    Q-(v) = f(v) F^-1[L f^](v),   L(xi) = sum_r sum_e w_e phi_r(xi.e) psi_r(|xi_perp|),

e on a Gauss-Legendre (cos theta) times uniform (azimuth) grid of M points on
the half sphere.  Cost: O(r M N**3 log N) per evaluation (2 r M real 3-D
inverse FFTs); measured in benchmarks/bench_fast_spectral.py.

Equilibrium preservation.  Q_h(f) = Q_s(f) - Q_s(M_d) with M_d the discrete
Maxwellian of the (conserved) moments, so a Maxwellian start stays one to
round-off (Filbet, Pareschi & Rey, C. R. Acad. Sci. Paris Ser. I 353 (2015)
309).  Conservation.  The result is projected on the null space of the five
discrete moment constraints, the Lagrange-multiplier correction of Gamba &
Tharkabhushanam, J. Comput. Phys. 228 (2009) 2012, Sec. 4:
Q_c = Q_h - C^T (C C^T)^-1 C Q_h, C_ij = phi_i(v_j) w; mass, momentum and
energy are then conserved to round-off.  The minimised norm is weighted by
1/M_d (correction M_d C^T (C M_d C^T)^-1 C Q_h), so the correction stays
where the gas is rather than growing like |v|^2 in the corners of the box.

Time stepping: the three-stage strong-stability-preserving Runge-Kutta scheme
of Shu & Osher, J. Comput. Phys. 77 (1988) 439 (third order; tested in
tests/verification/test_relaxation_fast_spectral.py).  Negative values of f
(Gibbs oscillations of the truncated Fourier series in the tails) are not
removed; the smallest value is returned as ``min_distribution``.

Records (shared with the model equations, :class:`deterministic.GridRecord`):
moments, grid H, x-marginal; the binned H on equiprobable cells uses cell
shares of each node with f/g interpolated locally against the Gaussian g of
the current axis temperature (:func:`gaussian_axis_overlap`), because the
wide box of this method leaves the cold axes of an anisotropic start barely
resolved (h ~ sigma) for a piecewise-constant cell rule.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
from numba import njit
from scipy.special import j0

from knudsweep.solver.relaxation import deterministic as det
from knudsweep.solver.relaxation.cross_sections import MolecularModel
from knudsweep.solver.relaxation.initial_states import InitialState, initial_density_on_grid

# Defaults (accuracy studied in tests/verification/test_relaxation_fast_spectral.py).
DEFAULT_TRUNCATION = 0.6  # R / L
DEFAULT_POLAR = 5  # Gauss-Legendre nodes in cos(theta) on the half sphere
DEFAULT_AZIMUTH = 10  # uniform azimuth nodes
DEFAULT_RADIAL = 48  # Gauss-Legendre nodes in rho on [0, R]
DEFAULT_RANK_TOL = 1e-3  # relative singular value kept in the radial expansion
FFT_BATCH = 8  # directions transformed per scipy.fft call
SCHEME = "SSP-RK3 (Shu & Osher 1988)"


@dataclass
class SpectralOperator:
    """Precomputed multipliers of the fast spectral collision operator on one grid."""

    n: int
    half_width: float
    truncation: float
    rank: int
    n_directions: int
    gain_x: np.ndarray  # (r*M, N, N, N//2+1) phi_r(xi.e)
    gain_y: np.ndarray  # (r*M, N, N, N//2+1) w_e psi_r(|xi_perp|)
    loss: np.ndarray  # (N, N, N//2+1)
    constraints: np.ndarray  # C (5, N**3)
    projector: np.ndarray  # C^T (C C^T)^-1 (N**3, 5)
    equilibrium_term: np.ndarray | None = None  # Q_s(M_d), set by set_equilibrium

    @property
    def shape(self) -> tuple[int, int, int]:
        return (self.n, self.n, self.n)


def radial_kernel(model: MolecularModel, radius: float, rho: np.ndarray) -> np.ndarray:
    """G(rho_x, rho_y) = rho_x rho_y Bt on the node pairs (rows rho_x, columns rho_y)."""
    k = model.collision_exponent
    alpha = model.alpha
    coef = model.sigma_cr_coefficient * alpha / math.pi
    rx = rho[:, None]
    ry = rho[None, :]
    g = np.sqrt(rx * rx + ry * ry)
    return coef * rx ** (2.0 * alpha - 1.0) * ry * g ** (k + 1.0 - 2.0 * alpha)


def radial_separation(
    model: MolecularModel, radius: float, n_radial: int = DEFAULT_RADIAL, rank_tol: float = DEFAULT_RANK_TOL
):
    """Nodes rho (n_radial) and weighted factors c, d (r, n_radial) with
    sum_ij w_i w_j G_ij F_i H_j = sum_r (sum_i c_ri F_i)(sum_j d_rj H_j) to relative ``rank_tol``."""
    x, w = np.polynomial.legendre.leggauss(n_radial)
    rho = 0.5 * radius * (x + 1.0)
    w = 0.5 * radius * w
    sw = np.sqrt(w)
    kmat = sw[:, None] * radial_kernel(model, radius, rho) * sw[None, :]
    u, s, vt = np.linalg.svd(kmat)
    rank = max(1, int(np.sum(s > rank_tol * s[0])))
    c = (u[:, :rank] * np.sqrt(s[:rank]) * sw[:, None]).T
    d = (vt[:rank, :].T * np.sqrt(s[:rank]) * sw[:, None]).T
    return rho, c, d


def half_sphere(n_polar: int, n_azimuth: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit vectors e (M, 3) with cos(theta) > 0 and weights: Gauss-Legendre in cos(theta)
    (the positive half of a 2 n_polar rule on [-1, 1]) times the uniform azimuth rule."""
    x, w = np.polynomial.legendre.leggauss(2 * n_polar)
    keep = x > 0
    ct, wt = x[keep], w[keep]
    st = np.sqrt(1.0 - ct * ct)
    ph = 2.0 * math.pi * np.arange(n_azimuth) / n_azimuth
    e = np.stack([np.outer(st, np.cos(ph)).ravel(), np.outer(st, np.sin(ph)).ravel(), np.repeat(ct, n_azimuth)], axis=1)
    we = np.repeat(wt, n_azimuth) * (2.0 * math.pi / n_azimuth)
    return e, we


def _frequencies(n: int, half_width: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Angular frequencies xi = pi k / L on the rfftn grid; ``keep`` is 0 on the Nyquist planes."""
    k_full = np.fft.fftfreq(n, 1.0 / n)
    k_half = np.fft.rfftfreq(n, 1.0 / n)
    kx, ky, kz = np.meshgrid(k_full, k_full, k_half, indexing="ij")
    nyq = -(n // 2) if n % 2 == 0 else None
    keep = np.ones(kx.shape)
    if nyq is not None:
        keep[(kx == nyq) | (ky == nyq) | (kz == n // 2)] = 0.0
    s = math.pi / half_width
    return kx * s, ky * s, kz * s, keep


def _radial_table(rho: np.ndarray, coef: np.ndarray, t_max: float, radius: float, kernel):
    """g_r(t) = sum_i coef_ri kernel(rho_i t) on [0, t_max] as a cubic spline (r values per t);
    kernel 2 cos gives phi_r, 2 pi J0 gives psi_r.

    Interpolation error of a cubic spline: (5/384) dt**4 max |g^(4)| (de Boor,
    A Practical Guide to Splines, Springer 1978, Ch. V), and |g^(4)| <= radius**4
    times the scale of g; dt = 1.5e-3 / radius keeps it near 1e-13 of g (measured
    2e-15 against direct evaluation at every frequency, which was most of the build time).
    """
    from scipy.interpolate import CubicSpline

    step = 1.5e-3 / radius
    nodes = np.linspace(0.0, t_max, max(int(math.ceil(t_max / step)), 4) + 1)
    values = kernel(np.multiply.outer(nodes, rho)) @ coef.T  # (n_nodes, rank)
    return CubicSpline(nodes, values, axis=0)


def build_operator(
    model: MolecularModel,
    grid: det.VelocityGrid,
    truncation: float = DEFAULT_TRUNCATION,
    n_polar: int = DEFAULT_POLAR,
    n_azimuth: int = DEFAULT_AZIMUTH,
    n_radial: int = DEFAULT_RADIAL,
    rank_tol: float = DEFAULT_RANK_TOL,
) -> SpectralOperator:
    """Multipliers phi_r(xi.e), w_e psi_r(|xi_perp|), the loss multiplier L and the conservation projector."""
    if not (0.2 <= float(truncation) <= 2.0):
        raise ValueError(f"collision_truncation: must lie in [0.2, 2] (R / L), got {truncation!r}")
    for name, val, lo, hi in (
        ("n_polar", n_polar, 1, 64),
        ("n_azimuth", n_azimuth, 1, 128),
        ("n_radial", n_radial, 4, 512),
    ):
        if int(val) != val or not (lo <= val <= hi):
            raise ValueError(f"{name}: must be an integer in [{lo}, {hi}], got {val!r}")
    n, half_width = grid.n, grid.half_width
    radius = truncation * half_width
    rho, c, d = radial_separation(model, radius, n_radial, rank_tol)
    e, we = half_sphere(n_polar, n_azimuth)
    xi_x, xi_y, xi_z, keep = _frequencies(n, half_width)
    xi2 = xi_x**2 + xi_y**2 + xi_z**2
    rank, m = c.shape[0], e.shape[0]
    gain_x = np.empty((rank * m,) + xi_x.shape)
    gain_y = np.empty_like(gain_x)
    xi_max = math.sqrt(float(xi2.max()))
    phi = _radial_table(rho, c, xi_max, radius, lambda x: 2.0 * np.cos(x))
    psi = _radial_table(rho, d, xi_max, radius, lambda x: 2.0 * math.pi * j0(x))
    for j in range(m):
        s = xi_x * e[j, 0] + xi_y * e[j, 1] + xi_z * e[j, 2]
        t = np.sqrt(np.maximum(xi2 - s * s, 0.0))
        phi_s = phi(np.abs(s))  # (..., rank); phi_r is even
        psi_t = psi(t)
        for r in range(rank):
            gain_x[r * m + j] = phi_s[..., r] * keep
            gain_y[r * m + j] = we[j] * psi_t[..., r] * keep
    loss = np.einsum("a...,a...->...", gain_x, gain_y)
    v = grid.nodes()
    w = grid.weight
    phi = np.stack([np.ones(v.shape[0]), v[:, 0], v[:, 1], v[:, 2], 0.5 * np.sum(v * v, axis=1)])
    cmat = phi * w
    projector = cmat.T @ np.linalg.inv(cmat @ cmat.T)
    return SpectralOperator(n, half_width, truncation, rank, m, gain_x, gain_y, loss, cmat, projector)


@njit(cache=True)
def _accumulate_products(gain: np.ndarray, a: np.ndarray, b: np.ndarray) -> None:
    """gain += sum_k a[k] * b[k] (one pass, no temporaries)."""
    g = gain.ravel()
    for k in range(a.shape[0]):
        x = a[k].ravel()
        y = b[k].ravel()
        for i in range(g.size):
            g[i] += x[i] * y[i]


def raw_collision(f: np.ndarray, op: SpectralOperator) -> np.ndarray:
    """Q_s(f) = Q+ - Q- of the fast spectral method (no correction), f and result flat (N**3)."""
    shape = op.shape
    fh = sfft.rfftn(f.reshape(shape))
    gain = np.zeros(shape)
    total = op.gain_x.shape[0]
    buf = np.empty((min(FFT_BATCH, total),) + fh.shape, dtype=complex)
    for b0 in range(0, total, FFT_BATCH):
        b1 = min(total, b0 + FFT_BATCH)
        part = buf[: b1 - b0]
        np.multiply(op.gain_x[b0:b1], fh, out=part)
        ax = sfft.irfftn(part, s=shape, axes=(1, 2, 3), overwrite_x=True)
        np.multiply(op.gain_y[b0:b1], fh, out=part)
        ay = sfft.irfftn(part, s=shape, axes=(1, 2, 3), overwrite_x=True)
        _accumulate_products(gain, ax, ay)
    loss = f.reshape(shape) * sfft.irfftn(op.loss * fh, s=shape)
    return (gain - loss).ravel()


def set_equilibrium(op: SpectralOperator, m_eq: np.ndarray) -> None:
    """Store Q_s(M_d) for the equilibrium-preserving form and weight the projection with M_d.

    The weighted correction M_d C^T (C M_d C^T)^-1 C Q puts the (small)
    correction where the gas is instead of spreading (1, v, v^2/2) w over the
    whole box, whose corners would otherwise collect spurious mass and bias
    <c^4> (measured 1e-2 on a 24^3 grid with the unweighted form).
    """
    cw = op.constraints * m_eq[None, :]
    op.projector = cw.T @ np.linalg.inv(op.constraints @ cw.T)
    op.equilibrium_term = None
    op.equilibrium_term = raw_collision(m_eq, op)


def collision(f: np.ndarray, op: SpectralOperator) -> np.ndarray:
    """Q_c(f) = P[Q_s(f) - Q_s(M_d)]: equilibrium-preserving and conservative to round-off."""
    q = raw_collision(f, op)
    if op.equilibrium_term is not None:
        q -= op.equilibrium_term
    return q - op.projector @ (op.constraints @ q)


def ssp_rk3_step(f: np.ndarray, dt: float, op: SpectralOperator) -> np.ndarray:
    """One step of the three-stage SSP Runge-Kutta scheme (Shu & Osher 1988, eq. 2.18)."""
    f1 = f + dt * collision(f, op)
    f2 = 0.75 * f + 0.25 * (f1 + dt * collision(f1, op))
    return f / 3.0 + (2.0 / 3.0) * (f2 + dt * collision(f2, op))


def run_fast_spectral(
    model: MolecularModel,
    state: InitialState,
    grid: det.VelocityGrid,
    dt: float,
    steps: int,
    n_output: int,
    edges: np.ndarray,
    operator: SpectralOperator | None = None,
    keep_distribution: bool = False,
    **operator_options,
) -> dict:
    """Relax ``state`` under eq. (1); records at n_output times, ``steps`` steps of ``dt`` apart.

    Returns the dictionary of the model-equation path of :func:`knudsweep.solver.relaxation.solve`
    (temperature tensor, <c^4>, heat flux, binned and grid H, x-marginal, drifts,
    min_distribution), so the result assembles the same way.
    """
    op = operator if operator is not None else build_operator(model, grid, **operator_options)
    v = grid.nodes()
    w = grid.weight
    f = initial_density_on_grid(state, v[:, 0], v[:, 1], v[:, 2])
    f = det.normalise_initial(f, v, w)
    m_eq = det.discrete_target(0, f, v, w)
    if op.equilibrium_term is None:
        set_equilibrium(op, m_eq)
    record = det.GridRecord(grid, m_eq, edges, n_output, _axis_overlaps(grid, edges))
    record.record(0, f)
    for k in range(1, n_output):
        for _ in range(steps):
            f = ssp_rk3_step(f, dt, op)
            record.extremes(f)
        record.record(k, f)
    out = record.result()
    if keep_distribution:
        out["final_distribution"] = f
    return out


GAUSS_WEIGHT_CUT = 3.5  # in sqrt(T): g Gaussian up to here ...
GAUSS_WEIGHT_RAMP = 1.5  # ... then its exponent levels off (C1) over this width, flat beyond


def _weight_exponent(v: np.ndarray, temperature: float) -> np.ndarray:
    """-ln g: v**2 / 2T up to c = GAUSS_WEIGHT_CUT sqrt(T), then a quadratic with matching slope
    that levels off after GAUSS_WEIGHT_RAMP sqrt(T), flat beyond (g >= exp(-8.75), 1.6e-4)."""
    x = np.abs(v) / math.sqrt(temperature)
    c, r = GAUSS_WEIGHT_CUT, GAUSS_WEIGHT_RAMP
    beyond = np.clip(x - c, 0.0, r)
    return 0.5 * np.minimum(x, c) ** 2 + c * beyond - 0.5 * c * beyond**2 / r


def gaussian_axis_overlap(
    grid: det.VelocityGrid, edges: np.ndarray, temperature: float, points: int = 6, n_gauss: int = 8
) -> np.ndarray:
    """O[i, a] = (1/h) int_{cell a} g(v) L_i(v) dv / g(v_i), g(v) = exp(-min(v**2, 25 T) / (2 T)): share of
    node i in H cell a on one axis when f/g is interpolated locally (Lagrange on the ``points``
    nearest nodes) and integrated against the Gaussian g of the axis temperature T.

    Exact for an axis Gaussian of temperature T and accurate for f near one, which a
    piecewise-constant f per grid cell (:func:`h_function.axis_overlap`, error O(h**2)) is
    not on the fast spectral method's wide box: 18 % low in the binned H of the default
    anisotropic start on 32^3 (h = 0.84, wider than the central H cells), against 1e-7 here.
    Sub-intervals between nodes and H-cell edges, Gauss-Legendre with ``n_gauss`` points each.
    g is held flat beyond 5 sqrt(T), where f is below 4e-6 of its peak and holds round-off and
    Gibbs noise that f/g would otherwise amplify by up to exp(v**2 / 2T).
    """
    axis, half, h, n = grid.axis, grid.half_width, grid.spacing, grid.n
    inner = edges[(edges > -half) & (edges < half)]
    brk = np.unique(np.concatenate([[-half, half], inner, axis]))
    xg, wg = np.polynomial.legendre.leggauss(n_gauss)
    a, b = brk[:-1], brk[1:]
    centre = 0.5 * (a + b)
    v = 0.5 * (b - a)[:, None] * xg[None, :] + centre[:, None]
    w = 0.5 * (b - a)[:, None] * wg[None, :]
    cell = np.searchsorted(edges, centre)
    first = np.clip(np.floor((centre + half) / h - 0.5).astype(int) - points // 2 + 1, 0, n - points)
    gv = np.exp(-_weight_exponent(v, temperature))
    out = np.zeros((n, edges.size + 1))
    for s in range(points):
        node = first + s
        basis = np.ones_like(v)
        for t in range(points):
            if t != s:
                other = axis[first + t]
                basis *= (v - other[:, None]) / (axis[node] - other)[:, None]
        share = np.sum(w * gv * basis, axis=1) * np.exp(_weight_exponent(axis[node], temperature)) / h
        np.add.at(out, (node, cell), share)
    return out


def _axis_overlaps(grid: det.VelocityGrid, edges: np.ndarray):
    """Per-output overlaps of the three axes at the axis temperatures P_aa / rho of the moments."""

    def overlaps(mom: np.ndarray) -> list[np.ndarray]:
        return [gaussian_axis_overlap(grid, edges, float(mom[5 + a] / mom[0])) for a in range(3)]

    return overlaps


def operator_size(
    model: MolecularModel,
    n: int,
    n_polar: int = DEFAULT_POLAR,
    n_azimuth: int = DEFAULT_AZIMUTH,
    n_radial: int = DEFAULT_RADIAL,
    rank_tol: float = DEFAULT_RANK_TOL,
) -> tuple[int, int, float]:
    """(rank r, directions M, peak bytes) of one run on an n**3 grid, without building the operator.

    The rank does not depend on the truncation radius (G is homogeneous in rho).  Bytes:
    the multipliers 16 r M n**2 (n/2+1) plus about 900 per velocity node (projector, stages,
    FFT buffers, build tables) plus 10 MB; measured with tracemalloc 88 MB (VHS argon, r = 4,
    n = 32; model 95), 43 MB (hard spheres, r = 1, n = 32; model 53), 48 MB (VHS, n = 24; model 46).
    """
    rank = radial_separation(model, 1.0, n_radial, rank_tol)[1].shape[0]
    m = n_polar * n_azimuth
    return rank, m, 16.0 * rank * m * n * n * (n // 2 + 1) + 900.0 * n**3 + 10e6


def spectral_half_width(state: InitialState) -> float:
    """Default box half-width L: 10 sqrt(T_max), T_max the largest axis temperature <c_a^2> of the state.

    The gain term reads f at v + x with |x| <= R = 0.6 L; a periodic image is
    read where |v + x| > L, so f must be negligible beyond 2L - R - |v|:
    at |v| = 4 sqrt(T_max) that is 10 sqrt(T_max), where a Gaussian has
    fallen by exp(-50).  Studied in tests/verification/test_relaxation_fast_spectral.py.
    """
    if state.name == "anisotropic":
        t_max = max(state.params)
    elif state.name == "two_beams":
        s, w, tb = state.params
        t_max = tb + w * (1.0 - w) * s * s
    else:
        t_max = 1.0
    return 10.0 * math.sqrt(t_max)
