"""Linearized Boltzmann collision operator for hard spheres and VHS molecules on a (speed, direction) velocity set.

Units: velocities c in v0 = sqrt(2kT/m), f = f_M (1 + h), f_M = n pi^(-3/2) e^(-c^2).
For hard spheres of diameter d the collision operator is n d^2 v0 times

    L h(c) = -nu(c) h(c) + int [K2(c, c') - K1(c, c')] h(c') dc'                     (1)

    nu(c)     = pi [ e^(-c^2)/sqrt(pi) + (c + 1/(2c)) erf(c) ]
    K1(c, c') = pi^(-1/2) |c - c'| e^(-c'^2)
    K2(c, c') = 2 pi^(-1/2) |c - c'|^(-1) exp( -((c - c').c')^2 / |c - c'|^2 )

(Hilbert 1912; the kernel decomposition used for the linearized hard-sphere
operator by Williams, Mathematical Methods in Particle Transport Theory,
Butterworths 1971, Ch. 3, and by Loyalka & Hickey, Phys. Fluids A 1 (1989)
612; here re-derived from the Carleman representation, and checked by the
conservation of mass, momentum and energy in the tests.)

Channel flows driven along x (Poiseuille, thermal creep) have h = c_x Phi(y, c, mu),
mu = c_y / |c|.  K is isotropic, so with the Legendre moments of the kernel,
k_l(c, c') = 2 pi int_{-1}^{1} (K2 - K1)(c, c', t) P_l(t) dt, t = cos(c, c'),
the addition theorem gives (Funk-Hecke)

    K[c_x Phi](c, mu) = c_x sum_{l>=1} (2l+1)/(2l(l+1)) P_l'(mu)
                        int_0^inf (c'^3/c) k_l(c, c') [ int_{-1}^{1} (1 - mu'^2) P_l'(mu') Phi(c', mu') dmu' ] dc'   (2)

(this Legendre form of the linearized operator for the planar shear-flow
problems is that of Siewert, Z. angew. Math. Phys. 54 (2003) 273, and of
Loyalka & Hickey 1989).  The t-integral is taken in s = |c - c'|, where the
1/|c - c'| singularity of K2 cancels the Jacobian:

    int_{-1}^{1} F(t) dt / |c - c'| = (1/(c c')) int_{|c-c'|}^{c+c'} F(t(s)) ds,    t(s) = (c^2 + c'^2 - s^2)/(2 c c').

Discretisation (product integration / Nystrom): the speed dependence of Phi is
the Lagrange interpolant on Gauss nodes for the weight c^2 e^(-c^2); the c'
integral of k_l times each Lagrange polynomial is done on a fine composite
Gauss-Legendre grid split and graded at c' = c (k_l has a kink there), so
the matrices M_l[i, j] = int (c'^3/c_i) k_l(c_i, c') ell_j(c') dc' carry no
error from the kernel's singularity.  In mu a double-Gauss (half-range
Gauss-Legendre) rule, which integrates the wall discontinuity at mu = 0
exactly, and the sum (2) truncated at l = n_legendre.  Finally the discrete
operator L_d = -diag(nu) + K_d is projected, L_d <- Pi L_d Pi with
Pi = I - e w^T / (w^T e) (e: the momentum invariant Phi = 1, w: the
quadrature weights of the x-velocity), so that momentum is conserved exactly
by the discrete collision operator (without it the O(1e-10) leak would be
amplified by delta^2 in the Poiseuille flow rate).

VHS molecules (viscosity index omega in [1/2, 1], mu ~ T^omega; isotropic
scattering with total cross-section sigma = pi d^2 g^(1 - 2 omega), g the
relative speed in v0, d the diameter at g = v0; Bird, Molecular Gas Dynamics
and the Direct Simulation of Gas Flows, Oxford 1994, Sec. 2.6; hard spheres
omega = 1/2, Maxwell molecules omega = 1).  With gamma = 2 - 2 omega and
beta = (1 - 2 omega)/2, in units of n d^2 v0 (derived here from the
linearized collision integral, Cercignani, The Boltzmann Equation and Its
Applications, Springer 1988, Ch. IV; Carleman's change of variables
c' = c + (w.e) e, dOmega_g' = 4 |cos| de, then the integral over the plane
normal to p = c' - c):

    nu(c)     = pi^(-1/2) int |c - c1|^gamma e^(-c1^2) dc1
              = pi Gamma((3 + gamma)/2) / Gamma(3/2) M(-gamma/2, 3/2, -c^2)     (Kummer's M)
    K1(c, c') = pi^(-1/2) |c - c'|^gamma e^(-c'^2)
    K2(c, c') = 2 pi^(-1/2) |c - c'|^(-1) e^(-a^2) J(s, b),      s = |c - c'|,
                a = c'.(c' - c)/s,  b^2 = c'^2 - a^2,
    J(s, b)   = 2 int_0^inf v (s^2 + v^2)^beta e^(-(v - b)^2) I0e(2 b v) dv    (I0e(x) = e^(-x) I_0(x)),

J = 1 for hard spheres (beta = 0), which gives eq. (1).  J is evaluated by
composite Gauss-Legendre quadrature in v, panels graded geometrically towards
v = 0 on the scale s (the branch points of (s^2 + v^2)^beta at v = +-i s)
and of unit width up to b + 7 (``vhs_gain_factor``); the Legendre moments
k_l then follow as for hard spheres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numba
import numpy as np
from scipy.special import erf, hyp1f1
from scipy.special import gamma as gamma_fn

from knudsweep.solver.quadrature import lanczos_recurrence

SQRT_PI = math.sqrt(math.pi)
# graded direction rules: Gauss-Legendre above this mu, graded panels below
_MU_SPLIT = 0.1
# the c' integrals stop at max(_C_MAX, c + 4): the integrands carry e^(-c'^2),
# or e^(-(c' - c)^2) around a fast molecule (< 1e-16 beyond)
_C_MAX = 7.0
# viscosity index range of the VHS operator (hard spheres .. Maxwell molecules)
OMEGA_RANGE = (0.5, 1.0)
_GX, _GW = np.polynomial.legendre.leggauss(10)


def check_omega(omega) -> float:
    """omega as a float in OMEGA_RANGE, else ValueError."""
    try:
        value = float(omega)
    except (TypeError, ValueError):
        raise ValueError(f"omega: must be a number in [{OMEGA_RANGE[0]}, {OMEGA_RANGE[1]}], got {omega!r}") from None
    if not (OMEGA_RANGE[0] <= value <= OMEGA_RANGE[1]):
        raise ValueError(f"omega: must be in [{OMEGA_RANGE[0]}, {OMEGA_RANGE[1]}], got {omega!r}")
    return value


@numba.njit(cache=True)
def _i0e(x):
    """e^(-x) I_0(x), x >= 0: power series below 25, Hankel's asymptotic series above (Abramowitz & Stegun 9.6.12, 9.7.1)."""
    if x < 25.0:
        q = 0.25 * x * x
        term = 1.0
        total = 1.0
        k = 1
        while term > 1e-17 * total:
            term *= q / (k * k)
            total += term
            k += 1
        return total * math.exp(-x)
    term = 1.0
    total = 1.0
    for k in range(1, 16):
        term *= (2 * k - 1) ** 2 / (8.0 * k * x)
        total += term
    return total / math.sqrt(2.0 * math.pi * x)


@numba.njit(cache=True)
def _gain_factor_one(s, b, beta):
    total = 0.0
    lo = 0.0
    # panels [0, s], [s, 2s], [2s, 4s], ... below 1 (geometric grading at the branch points v = +-i s)
    if s < 1.0:
        hi = s
        while True:
            for q in range(_GX.size):
                v = lo + 0.5 * (hi - lo) * (_GX[q] + 1.0)
                total += (
                    0.5
                    * (hi - lo)
                    * _GW[q]
                    * v
                    * (s * s + v * v) ** beta
                    * math.exp(-((v - b) ** 2))
                    * _i0e(2.0 * b * v)
                )
            lo = hi
            if lo >= 1.0:
                break
            hi = min(2.0 * lo, 1.0)
            if hi > 0.75:
                hi = 1.0
    top = b + 7.0
    n = int(math.ceil(top - lo))
    width = (top - lo) / max(n, 1)
    for p in range(n):
        a = lo + p * width
        for q in range(_GX.size):
            v = a + 0.5 * width * (_GX[q] + 1.0)
            total += 0.5 * width * _GW[q] * v * (s * s + v * v) ** beta * math.exp(-((v - b) ** 2)) * _i0e(2.0 * b * v)
    return 2.0 * total


@numba.njit(cache=True, parallel=True)
def _gain_factor(s, b, beta, out):
    for k in numba.prange(s.size):
        out[k] = _gain_factor_one(s[k], b[k], beta)


def vhs_gain_factor(s, b, omega: float) -> np.ndarray:
    """J(s, b) of the VHS gain kernel (module docstring): 1 for hard spheres."""
    s = np.ascontiguousarray(s, dtype=float)
    b = np.ascontiguousarray(b, dtype=float)
    out = np.empty(s.size)
    _gain_factor(s.ravel(), b.ravel(), 0.5 - omega, out)
    return out.reshape(s.shape)


def collision_frequency(c: np.ndarray, omega: float = 0.5, general: bool = False) -> np.ndarray:
    """nu(c) = pi^(-1/2) int |c - c1|^gamma e^(-c1^2) dc1 (units n d^2 v0): closed form of eq. (1) for
    hard spheres, Kummer's function (module docstring) otherwise or if ``general``."""
    c = np.asarray(c, dtype=float)
    if omega != 0.5 or general:
        g = 2.0 - 2.0 * omega
        return math.pi * gamma_fn(1.5 + 0.5 * g) / gamma_fn(1.5) * hyp1f1(-0.5 * g, 1.5, -(c**2))
    small = c < 1e-6
    cs = np.where(small, 1.0, c)
    nu = math.pi * (np.exp(-(cs**2)) / SQRT_PI + (cs + 0.5 / cs) * erf(cs))
    # series at c -> 0: 2 sqrt(pi) (1 + c^2 / 3 + ...)
    return np.where(small, 2.0 * SQRT_PI * (1.0 + c**2 / 3.0), nu)


def _gauss_rule(x: np.ndarray, w: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """n-point Gauss rule of the discrete measure sum w delta(x) (Golub & Welsch 1969, Math. Comp. 23, 221)."""
    alpha, beta = lanczos_recurrence(x, w, n)
    nodes, vec = np.linalg.eigh(np.diag(alpha) + np.diag(beta, 1) + np.diag(beta, -1))
    return nodes, w.sum() * vec[0] ** 2


@lru_cache(maxsize=32)
def speed_rule(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss rule for int_0^inf c^2 e^(-c^2) g(c) dc: nodes, weights (weights include c^2 e^(-c^2))."""
    g, gw = np.polynomial.legendre.leggauss(32)
    edges = np.linspace(0.0, 12.0, 97)
    lo, hi = edges[:-1, None], edges[1:, None]
    x = (lo + 0.5 * (hi - lo) * (g + 1.0)).ravel()
    w = (0.5 * (hi - lo) * gw).ravel() * x**2 * np.exp(-(x**2))
    keep = w > 1e-300
    nodes, weights = _gauss_rule(x[keep], w[keep], n)
    return nodes, weights


def direction_rule(n_half: int, graded_smallest: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Positive half of a double-Gauss rule on mu in (0, 1]: nodes, weights (sum 1).

    graded_smallest None: n_half-point Gauss-Legendre on [0, 1].  Otherwise
    (molecules flying almost parallel to the walls at small delta):
    n_half-point Gauss-Legendre on [_MU_SPLIT, 1], 4-point Gauss-Legendre
    panels graded geometrically (2 per decade) from graded_smallest to
    _MU_SPLIT, and one 4-point panel on [0, graded_smallest].  The outer part
    keeps the Legendre projections of eq. (2) accurate (a few wide panels
    there do not).
    """
    g, gw = np.polynomial.legendre.leggauss(n_half)
    if graded_smallest is None:
        return 0.5 * (g + 1.0), 0.5 * gw
    outer = _MU_SPLIT + 0.5 * (1.0 - _MU_SPLIT) * (g + 1.0)
    w_outer = 0.5 * (1.0 - _MU_SPLIT) * gw
    panels = max(1, int(math.ceil(2.0 * math.log10(_MU_SPLIT / graded_smallest))))
    edges = np.concatenate([[0.0], np.geomspace(graded_smallest, _MU_SPLIT, panels + 1)])
    g4, gw4 = np.polynomial.legendre.leggauss(4)
    lo, hi = edges[:-1, None], edges[1:, None]
    inner = (lo + 0.5 * (hi - lo) * (g4 + 1.0)).ravel()
    w_inner = (0.5 * (hi - lo) * gw4).ravel()
    return np.concatenate([inner, outer]), np.concatenate([w_inner, w_outer])


def _legendre_all(t: np.ndarray, L: int) -> np.ndarray:
    """P_0..P_L at t: array (L+1, *t.shape)."""
    P = np.empty((L + 1, *t.shape))
    P[0] = 1.0
    if L >= 1:
        P[1] = t
    for l in range(1, L):
        P[l + 1] = ((2 * l + 1) * t * P[l] - l * P[l - 1]) / (l + 1)
    return P


def legendre_derivatives(mu: np.ndarray, L: int) -> np.ndarray:
    """P_l'(mu) for l = 1..L: array (L, mu.size)."""
    P = _legendre_all(mu, L)
    D = np.zeros((L + 1, mu.size))
    for l in range(1, L + 1):
        # P_l' = (2l-1) P_{l-1} + P_{l-2}'
        D[l] = (2 * l - 1) * P[l - 1] + (D[l - 2] if l >= 2 else 0.0)
    return D[1:]


def kernel_moments(c: float, cp: np.ndarray, L: int, omega: float = 0.5, general: bool = False) -> np.ndarray:
    """k_l(c, c') for l = 0..L at the points cp > 0: array (L + 1, cp.size).

    Hard spheres (omega = 1/2) use J = 1 unless ``general`` (then J by quadrature, as for VHS)."""
    g, gw = np.polynomial.legendre.leggauss(12)
    s_lo = np.abs(c - cp)[:, None]
    s_hi = (c + cp)[:, None]
    # edges s_lo + (s_hi - s_lo) r: r graded geometrically up to 0.05 (the K2
    # integrand varies on the scale s - s_lo ~ |c - c'|), then uniform panels
    # enough for the ~l oscillations of P_l(t(s))
    r = np.concatenate([[0.0], np.geomspace(1e-4, 0.05, 6)[:-1], np.linspace(0.05, 1.0, max(4, L // 2 + 2) + 1)])
    edges = s_lo + (s_hi - s_lo) * r[None, :]
    lo, hi = edges[:, :-1, None], edges[:, 1:, None]
    s = (lo + 0.5 * (hi - lo) * (g + 1.0)).reshape(cp.size, -1)
    ws = (0.5 * (hi - lo) * gw).reshape(cp.size, -1)
    cq = cp[:, None]
    t = np.clip((c * c + cq * cq - s * s) / (2.0 * c * cq), -1.0, 1.0)
    E = (c * c - cq * cq - s * s) ** 2 / (4.0 * s * s)
    # K2: 2 pi^(-1/2) / s e^{-E} J;  K1: pi^(-1/2) s^gamma e^{-c'^2};  dt = s ds / (c c')
    if omega == 0.5 and not general:
        integrand = (2.0 * np.exp(-E) - s * s * np.exp(-cq * cq)) / (SQRT_PI * c * cq) * ws
    else:
        J = vhs_gain_factor(s, np.sqrt(np.maximum(cq * cq - E, 0.0)), omega)
        integrand = (2.0 * np.exp(-E) * J - s ** (3.0 - 2.0 * omega) * np.exp(-cq * cq)) / (SQRT_PI * c * cq) * ws
    P = _legendre_all(t, L)
    return 2.0 * math.pi * (P * integrand[None]).sum(axis=2)


def _lagrange_matrix(nodes: np.ndarray, x: np.ndarray) -> np.ndarray:
    """B[j, q] = ell_j(x_q), the Lagrange polynomials of ``nodes`` (barycentric form)."""
    diff = nodes[:, None] - nodes[None, :]
    np.fill_diagonal(diff, 1.0)
    bw = 1.0 / diff.prod(axis=1)
    d = x[None, :] - nodes[:, None]
    exact = d == 0.0
    d[exact] = 1.0
    terms = bw[:, None] / d
    B = terms / terms.sum(axis=0)
    cols = exact.any(axis=0)
    B[:, cols] = exact[:, cols].astype(float)
    return B


@lru_cache(maxsize=16)
def speed_matrices(
    n_speed: int, n_legendre: int, omega: float = 0.5, general: bool = False
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(c, wc, nu, M) with M[l-1, i, j] = int_0^inf (c'^3 / c_i) k_l(c_i, c') ell_j(c') dc', l = 1..n_legendre.

    omega: VHS viscosity index; ``general``: hard spheres through the VHS route (a check)."""
    c, wc = speed_rule(n_speed)
    nu = collision_frequency(c, omega, general)
    g, gw = np.polynomial.legendre.leggauss(16)
    M = np.zeros((n_legendre, n_speed, n_speed))
    for i, ci in enumerate(c):
        # panels graded towards c' = c_i from both sides, then uniform to _C_MAX
        left = ci - ci * np.geomspace(1.0, 1e-4, 9)
        right = ci + np.geomspace(1e-4, 1.0, 9)
        top = max(_C_MAX, ci + 4.0)
        edges = np.unique(np.concatenate([[0.0], left, [ci], right, np.linspace(ci + 1.0, top, 12)]))
        lo, hi = edges[:-1, None], edges[1:, None]
        x = (lo + 0.5 * (hi - lo) * (g + 1.0)).ravel()
        wx = (0.5 * (hi - lo) * gw).ravel()
        k = kernel_moments(ci, x, n_legendre, omega, general)[1:]
        B = _lagrange_matrix(c, x)
        M[:, i, :] = (k * (wx * x**3 / ci)) @ B.T
    return c, wc, nu, M


@dataclass
class VelocitySet:
    """Nodes of h = c_x Phi(c, mu): speeds c_i, directions mu_j > 0 (mirrored for c_y < 0).

    Flattened node index k = i * n_mu + j per direction sign; full index
    (sign, k) with sign 0: mu > 0, 1: mu < 0.
    """

    c: np.ndarray  # (n_speed,)
    wc: np.ndarray  # weights of c^2 e^{-c^2}
    mu: np.ndarray  # (n_mu,) positive
    wmu: np.ndarray
    nu: np.ndarray  # (n_speed,) collision frequency
    n_legendre: int
    description: dict
    omega: float = 0.5  # VHS viscosity index (0.5: hard spheres)

    @property
    def m(self) -> int:
        return self.c.size * self.mu.size

    def node_speed(self) -> np.ndarray:
        return np.repeat(self.c, self.mu.size)

    def node_mu(self) -> np.ndarray:
        return np.tile(self.mu, self.c.size)

    def node_nu(self) -> np.ndarray:
        return np.repeat(self.nu, self.mu.size)

    def velocity_weights(self) -> np.ndarray:
        """W[k] (one sign) with u = pi^(-1/2) sum_{sign,k} W[k] Phi: int c^4 e^{-c^2} (1 - mu^2) Phi dc dmu."""
        return np.outer(self.wc * self.c**2, self.wmu * (1.0 - self.mu**2)).ravel()


def velocity_set(
    n_speed: int, n_mu: int, n_legendre: int, graded_smallest: float | None = None, omega: float = 0.5
) -> VelocitySet:
    omega = check_omega(omega)
    c, wc, nu, _ = speed_matrices(n_speed, n_legendre, omega)
    mu, wmu = direction_rule(n_mu, graded_smallest)
    desc = {
        "velocity_rule": "speed Gauss (c^2 exp(-c^2)) x direction double-Gauss"
        + (" graded" if graded_smallest else ""),
        "n_speed": int(n_speed),
        "n_direction": int(2 * mu.size),
        "n_legendre": int(n_legendre),
    }
    if graded_smallest is not None:
        desc["direction_smallest"] = float(graded_smallest)
    return VelocitySet(c, wc, mu, wmu, nu, n_legendre, desc, omega)


def collision_matrix(vs: VelocitySet) -> np.ndarray:
    """Discrete gain operator K on the full node set (2 m x 2 m), momentum-conserving (module docstring).

    Returns K such that L Phi = -nu Phi + K Phi, in units of n d^2 v0.
    """
    _, _, _, M = speed_matrices(vs.c.size, vs.n_legendre, vs.omega)
    L = vs.n_legendre
    mu_full = np.concatenate([vs.mu, -vs.mu])
    w_full = np.concatenate([vs.wmu, vs.wmu]) * (1.0 - mu_full**2)
    D = legendre_derivatives(mu_full, L)  # (L, 2 n_mu)
    ns, nm = vs.c.size, vs.mu.size
    K = np.zeros((2, ns, nm, 2, ns, nm))
    for l in range(1, L + 1):
        A = (2 * l + 1) / (2.0 * l * (l + 1)) * np.outer(D[l - 1], D[l - 1] * w_full)  # (2nm, 2nm)
        A = A.reshape(2, nm, 2, nm)
        K += np.einsum("sjtk,ia->sijtak", A, M[l - 1])
    K = K.reshape(2 * ns * nm, 2 * ns * nm)
    nu = np.tile(vs.node_nu(), 2)
    Lop = K - np.diag(nu)
    e = np.ones(nu.size)
    w = np.tile(vs.velocity_weights(), 2)
    Pi = np.eye(nu.size) - np.outer(e, w) / (w @ e)
    Lop = Pi @ Lop @ Pi
    return Lop + np.diag(nu)


def viscosity_factor(n_speed: int, n_legendre: int = 2, omega: float = 0.5) -> float:
    """kappa = n d^2 mu v0 / p on the speed set (exact viscosity, not the first Chapman-Enskog value;
    d: the VHS diameter at relative speed v0).

    Chapman-Enskog: L[c_x c_y B(c)] = -2 c_x c_y; with a(c) = c B(c) the l = 2
    speed equation reads (-nu + M_2) a = -2 c, and
    kappa = 2 pi^(-3/2) int c_x^2 c_y^2 B e^(-c^2) dc = 8/(15 sqrt(pi)) int c^5 a e^(-c^2) dc.
    """
    c, wc, nu, M = speed_matrices(n_speed, max(2, n_legendre), check_omega(omega))
    a = np.linalg.solve(M[1] - np.diag(nu), -2.0 * c)
    return float(8.0 / (15.0 * SQRT_PI) * (wc * c**3) @ a)


def prandtl_number(n_speed: int, omega: float = 0.5) -> float:
    """Prandtl number of hard spheres (VHS: viscosity index omega) from the operator on the speed set.

    Chapman-Enskog heat conduction: L[c_y A(c)] = -c_y (c^2 - 5/2), i.e.
    (-nu + M_1) A = -(c^2 - 5/2) (A up to the momentum invariant, which does
    not change the heat flux); then
    Pr = (5/4) kappa / [ 4/(3 sqrt(pi)) int c^4 (c^2 - 5/2) A e^(-c^2) dc ]
    (1 for the BGK operator, where A = c^2 - 5/2 and kappa = 1).
    """
    omega = check_omega(omega)
    c, wc, nu, M = speed_matrices(n_speed, 2, omega)
    A = np.linalg.lstsq(M[0] - np.diag(nu), -(c**2 - 2.5), rcond=None)[0]
    conduct = 4.0 / (3.0 * SQRT_PI) * (wc * c**2 * (c**2 - 2.5)) @ A
    return float(1.25 * viscosity_factor(n_speed, omega=omega) / conduct)
