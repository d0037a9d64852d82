"""Plane channel with the linearized Boltzmann equation (hard spheres, VHS), knudsweep.solver.plane_channel.boltzmann_driver.

Published tables.  The hard-sphere channel tables of Ohwada, Sone & Aoki,
Phys. Fluids A 1 (1989) 2042, the slip coefficients of Ohwada, Sone & Aoki,
Phys. Fluids A 1 (1989) 1588 / Sone, Kinetic Theory and Fluid Dynamics
(2002), and Siewert, Z. angew. Math. Phys. 54 (2003) 273 could not be read
with the search tools (only title pages and abstracts are stored), so no
flow-rate table is compared here.  In their place:

* the operator's viscosity and heat conductivity against an independent
  computation: the Chapman-Enskog Sonine-polynomial approximations
  (Chapman & Cowling, The Mathematical Theory of Non-Uniform Gases, 3rd ed.,
  Cambridge 1970, Ch. 7 and 10) with the hard-sphere bracket integrals
  evaluated here by a quadrature that is exact for them (``sonine_factors``);
  the Sonine values rise monotonically to the exact ones (Ritz lower bounds);
* the viscous-slip coefficient k_0 = -1.2540 and the transport coefficients
  gamma_1 = 1.270042427, gamma_2 = 1.922284066 of Sone, Molecular Gas
  Dynamics (Birkhaeuser 2007), Table 3.1 and Sec. A.2.9: not read in the book
  here; values as reproduced in secondary sources.  gamma_1, gamma_2 are only
  printed, and so is k_0 (from memory: not a pass bar).  Conversion to our normalisation:
  kappa = n d^2 mu v0 / p = gamma_1 / (2 sqrt(2 pi)), Pr = gamma_1 / gamma_2,
  sigma_P = -k_0 / gamma_1 (check-values.md Sec. 2);
* conservation, symmetry, the free-molecular limit, Onsager reciprocity,
  plain-vs-accelerated agreement, a grid and velocity-set study with the
  error estimate tested against the actual error, and the slip asymptote.
"""

import math

import numpy as np
import pytest
from precision import ASYMPTOTIC, DISCRETISATION, ROUND_OFF, ROUND_OFF_FORMULA, ROUND_OFF_SUM

from knudsweep.solver.gas import get_gas
from knudsweep.solver.plane_channel import grids, solve_plane_channel
from knudsweep.solver.plane_channel import linearized_boltzmann as lb
from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann as solve_lbe
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall
from tests.verification.estimate_checks import assert_estimate_honest

# Sone (2007): not read in the book here; values from memory as reproduced in secondary sources (module
# docstring): printed beside our values, never a pass bar
GAMMA_1 = 1.270042427
GAMMA_2 = 1.922284066
K_0 = -1.2540
# first Chapman-Enskog approximation of hard spheres: mu_1 = (5/16) sqrt(pi m k T) / (pi d^2)
# (check-values.md Sec. 4.1, the VHS formula at omega = 1/2), i.e. kappa_1 = n d^2 mu_1 v0 / p
KAPPA_1 = 5.0 * math.sqrt(2.0) / (16.0 * math.sqrt(math.pi))

# Collision invariants int c'^2 k_0 = nu etc. by the composite Gauss rules of the kernel tests: their quadrature error
# at the kink c' = c, measured ~1e-10.
KERNEL_QUADRATURE = 1e-9
# Self-adjointness e^{-c^2} k_l(c, c') = e^{-c'^2} k_l(c', c): the kernel evaluated at swapped arguments, measured
# 1.5e-15 to 4.1e-15 (hard spheres, omega 0.81 and 1).
KERNEL_SYMMETRY = 1e-10
# The operator's speed-node quadrature (linearized_boltzmann.speed_matrices): measured ~1e-11 against the Sonine
# values at 10-12 nodes, 4e-12 (kappa) and 5e-13 (Pr) for Maxwell molecules at 5-8 nodes.
OPERATOR_QUADRATURE = 1e-10
# The Sonine tail after the last term is estimated as geometric with ratio q of the last two increments: the estimate
# needs a clearly geometric decay (measured q = 0.28, 0.30 for hard spheres, 0.16-0.18 for argon's omega).
MAX_TAIL_RATIO = 0.5
# The operator's value lies within this many estimated Sonine tails above the last Sonine value: the spread of the
# geometric tail estimate (measured 1.20x for mu, 1.18x for lambda, hard spheres).
SONINE_TAIL_FACTOR = 3.0
# The VHS gain factor J against scipy.quad at epsrel 1e-13: quad's own tolerance; measured difference <= 9e-15.
GAIN_FACTOR_QUAD = 1e-12
# nu against its defining integral (100-point Gauss-Legendre on two pieces): round-off of the difference of powers
# divided by c, measured 3e-12 at c = 0.05.
NU_DIFFERENCE_OF_POWERS = 1e-10
# Estimate ceilings (informative, not only safe): the coarse grid (24 cells, 6 speeds) errs by ~1e-4 (delta = 0.3)
# and ~1e-5 (delta = 3); the default grid by <= 3e-5 (delta = 0.1) and ~1e-6 above.  Estimates above these mean the
# estimator is broken.
COARSE_ESTIMATE_CEILING = 2e-3
DEFAULT_ESTIMATE_CEILING = 1e-4
# Velocity-converged: at delta = 10 the solves with 6-12 speed nodes agree to 5e-8 of G, the iteration tolerance
# times the 1/(1 - rho) amplification; changes below this fraction of G need not fall further.
VELOCITY_CONVERGED = 1e-7
# Plain and accelerated iteration, each stopped at tol 1e-11: the two iteration errors times the 1/(1 - rho)
# amplification.
PLAIN_AND_ACCELERATED = 1e-8
# LBE and BGK slopes dG/d ln(delta) at delta = 1e-3..1e-2 for hard spheres: the next terms (delta ln delta and the
# model-dependent cut-off), measured 2 %.
HARD_SPHERE_SLOPE_GAP = 0.03
# Both slopes lie below the leading coefficient by the same next terms: measured 7 % (hard spheres) and 9 % (VHS
# argon) for G_P at these delta; the bar is 15 % below.
LEADING_SLOPE_FLOOR = 0.85


def sonine_brackets(n_terms: int, omega: float = 0.5) -> tuple[np.ndarray, np.ndarray]:
    """Bracket matrices A_pq (viscosity, conduction) of the Chapman-Enskog Sonine expansion (Chapman & Cowling,
    The Mathematical Theory of Non-Uniform Gases, 3rd ed., Cambridge 1970, Ch. 7) for VHS molecules with isotropic
    scattering and rate sigma g = pi g^(2 - 2 omega) (units of ``linearized_boltzmann``), an independent route to
    the transport coefficients (no use of ``linearized_boltzmann``).

    Basis: F_p = (c c - c^2 I / 3) L_p^(5/2)(c^2), p = 0..N-1 (viscosity), F_p = c L_p^(3/2)(c^2),
    p = 1..N (conduction).  A_pq = -<F_p, L F_q> = (1/4) int int int f_M f_M1 (g^gamma / 4)
    (F_p' + F_p1' - F_p - F_p1) . (F_q' + ...) dOmega' dc dc1, gamma = 2 - 2 omega, f_M = pi^(-3/2) e^(-c^2)
    (tensors contracted over all 9 components).  Centre-of-mass G and relative velocity g: weight
    pi^(-3) e^(-2 G^2) e^(-g^2/2) g^gamma; by rotation invariance g along z and g' in the x-z plane,
    g' = |g| (sin chi, 0, cos chi) (factors 4 pi g^2 dg and 2 pi dcos chi).  The integrand is a polynomial of
    degree <= 4N + 4 in G, in cos chi (odd powers of sin chi cancel in the symmetric G rule) and in |g|^2, so
    Gauss-Hermite (2N + 5 points per axis), Gauss-Legendre in cos chi (2N + 5) and generalized Gauss-Laguerre in
    u = |g|^2/2 with weight u^((1 + gamma)/2) e^(-u) (N + 3 points) integrate it exactly.
    """
    from scipy.special import eval_genlaguerre, roots_genlaguerre

    gam = 2.0 - 2.0 * omega
    nh = 2 * n_terms + 5
    x, wx = np.polynomial.hermite.hermgauss(nh)
    x = x / math.sqrt(2.0)
    grid = np.stack([a.ravel() for a in np.meshgrid(x, x, x, indexing="ij")], 1)
    wg = np.einsum("i,j,k->ijk", wx, wx, wx).ravel()
    t, wt = np.polynomial.legendre.leggauss(nh)
    u, wu = roots_genlaguerre(n_terms + 3, 0.5 * (1.0 + gam))
    # (1/4)(1/4) pi^-3 * 4 pi * 2 pi * 2^(-3/2) (G rule) * 2^((1 + gamma)/2) (g^(2 + gamma) dg = (2u)^((1 + gamma)/2) du)
    const = 0.5 * math.pi**-1 * 2.0**-1.5 * 2.0 ** (0.5 * (1.0 + gam))
    out = []
    for alpha, orders in ((2.5, range(n_terms)), (1.5, range(1, n_terms + 1))):

        def basis(c, alpha=alpha, orders=orders):
            c2 = (c * c).sum(-1)
            if alpha == 2.5:
                tensor = (c[:, :, None] * c[:, None, :] - np.eye(3) * c2[:, None, None] / 3.0).reshape(-1, 9)
            else:
                tensor = c
            return np.stack([tensor * eval_genlaguerre(p, alpha, c2)[:, None] for p in orders])

        A = np.zeros((n_terms, n_terms))
        for ui, wui in zip(u, wu, strict=False):
            g = np.array([0.0, 0.0, math.sqrt(2.0 * ui)])
            before = basis(grid + g / 2) + basis(grid - g / 2)
            for tj, wtj in zip(t, wt, strict=False):
                gp = g[2] * np.array([math.sqrt(1.0 - tj * tj), 0.0, tj])
                d = basis(grid + gp / 2) + basis(grid - gp / 2) - before
                A += wui * wtj * np.einsum("pgk,qgk,g->pq", d, d, wg)
        out.append(const * A)
    return out[0], out[1]


def sonine_factors(n_terms: int, omega: float = 0.5) -> tuple[np.ndarray, np.ndarray]:
    """f_mu(N), f_lambda(N) for N = 1..n_terms: the N-term Sonine approximations of the viscosity and heat
    conductivity over the first ones (``sonine_brackets``); only F_0 (resp. F_1) overlaps the driving term, so
    f(N) = A_00 (A_N^-1)_00.  The bases are nested, so the leading blocks give every smaller N."""
    return tuple(
        np.array([A[0, 0] * np.linalg.inv(A[:n, :n])[0, 0] for n in range(1, n_terms + 1)])
        for A in sonine_brackets(n_terms, omega)
    )


def first_viscosity_factor(omega: float) -> float:
    """First Chapman-Enskog approximation kappa_1 = n d^2 mu_1 v0 / p from the bracket: with L[c_x c_y B] = -2 c_x c_y
    and the trial B = const, kappa_1 = 4 <c_x c_y, c_x c_y>^2 / (-<c_x c_y, L c_x c_y>) = 1 / (4 D), and by isotropy
    D = A_00 / 10 (the 9-component contraction of a traceless symmetric tensor is 10 times its xy part)."""
    A, _ = sonine_brackets(1, omega)
    return 1.0 / (4.0 * A[0, 0] / 10.0)


def test_kernel_conserves_mass_momentum_energy_and_is_symmetric():
    cs = np.array([0.2, 0.9, 1.7, 3.0])
    g, gw = np.polynomial.legendre.leggauss(16)
    for c in cs:
        # composite grid in c' split and graded at c' = c (kink of k_l there)
        edges = np.unique(
            np.concatenate(
                [[0.0], c - c * np.geomspace(1, 1e-5, 10), c + np.geomspace(1e-5, 1, 10), np.linspace(c + 1, c + 8, 15)]
            )
        )
        lo, hi = edges[:-1, None], edges[1:, None]
        x = (lo + 0.5 * (hi - lo) * (g + 1)).ravel()
        wx = (0.5 * (hi - lo) * gw).ravel()
        k = lb.kernel_moments(c, x, 1)
        nu = lb.collision_frequency(c)
        # L[1] = L[c_x] = L[c^2] = 0:  int c'^2 k_0 = nu, int c'^3/c k_1 = nu, int c'^4 k_0 = nu c^2;
        # KERNEL_QUADRATURE: quadrature error of the composite rules
        assert np.sum(wx * x**2 * k[0]) == pytest.approx(nu, rel=KERNEL_QUADRATURE)
        assert np.sum(wx * x**3 / c * k[1]) == pytest.approx(nu, rel=KERNEL_QUADRATURE)
        assert np.sum(wx * x**4 * k[0]) == pytest.approx(nu * c * c, rel=KERNEL_QUADRATURE)
    # self-adjointness: e^{-c^2} k_l(c, c') = e^{-c'^2} k_l(c', c)
    a, b = 0.7, 1.9
    kab = lb.kernel_moments(a, np.array([b]), 4)[:, 0]
    kba = lb.kernel_moments(b, np.array([a]), 4)[:, 0]
    assert np.allclose(math.exp(-a * a) * kab, math.exp(-b * b) * kba, rtol=KERNEL_SYMMETRY)


def test_viscosity_and_conductivity_against_sonine_approximations():
    f_mu, f_lam = sonine_factors(8)
    # the second approximations in closed form, 1 + 3/202 and 1 + 1/44 (Chapman & Cowling, from memory:
    # printed, not a pass bar), and the sequences
    print(
        f"\nSonine f_mu(2) = {f_mu[1]:.12f} (1 + 3/202 = {1 + 3 / 202:.12f}), f_lambda(2) = {f_lam[1]:.12f} "
        f"(1 + 1/44 = {1 + 1 / 44:.12f})\nf_mu: {np.array2string(f_mu, precision=10)}\n"
        f"f_lambda: {np.array2string(f_lam, precision=10)}"
    )
    kappa = lb.viscosity_factor(12)
    pr = lb.prandtl_number(12)
    # heat conductivity over its first approximation: lambda / lambda_1 = (kappa / kappa_1) (2/3) / Pr
    conduct = (kappa / KAPPA_1) * (2.0 / 3.0) / pr
    print(
        f"operator: kappa / kappa_1 = {kappa / KAPPA_1:.12f}, lambda / lambda_1 = {conduct:.12f}, Pr = {pr:.10f}; "
        f"Sone (secondary source, not a pass bar): {GAMMA_1 / (2 * math.sqrt(2 * math.pi)) / KAPPA_1:.12f}, "
        f"Pr = {GAMMA_1 / GAMMA_2:.10f}"
    )
    for f, exact in ((f_mu, kappa / KAPPA_1), (f_lam, conduct)):
        step = np.diff(f)
        assert np.all(step > 0)  # Ritz: nested bases raise the approximation monotonically
        # geometric tail after the last term, from the last two increments (ratio measured 0.28 and 0.30)
        q = step[-1] / step[-2]
        assert 0 < q < MAX_TAIL_RATIO
        tail = step[-1] * q / (1 - q)
        # the operator's value lies above every Sonine value (lower bounds, up to OPERATOR_QUADRATURE) and within
        # SONINE_TAIL_FACTOR estimated Sonine tails above the last
        assert exact > f[-1] * (1 - OPERATOR_QUADRATURE)
        assert exact - f[-1] < SONINE_TAIL_FACTOR * tail
    # and not the first Chapman-Enskog value (1.6 % lower)
    assert abs(kappa / KAPPA_1 - 1) > 0.01


# ---------------------------------------------------------------- VHS molecules (molecule="vhs", omega)

# argon's viscosity index from the gas table (Bird 1994, App. A, config/gases.yaml): 0.81
OMEGA_AR = get_gas("Ar").omega


def test_vhs_gain_factor_against_closed_form_and_quadrature():
    """J(s, 0) = e^(s^2) Gamma(1 + beta, s^2) (the v-integral is an incomplete gamma function, Abramowitz & Stegun
    6.5.3) and J = 1 for hard spheres (beta = 0); at b > 0 against scipy's adaptive quadrature."""
    from scipy.integrate import quad
    from scipy.special import gamma, gammaincc, i0e

    s = np.array([1e-7, 1e-3, 0.2, 1.0, 3.0, 8.0])
    for omega in (0.5, OMEGA_AR, 1.0):
        beta = 0.5 - omega
        ref = np.exp(s**2) * gammaincc(1.0 + beta, s**2) * gamma(1.0 + beta)
        # sums over the 10-point Gauss panels (quadrature error measured <= 1.6e-14) and the rounding of
        # e^(s^2) Gamma(.)
        assert np.allclose(lb.vhs_gain_factor(s, np.zeros_like(s), omega), ref, rtol=ROUND_OFF_SUM, atol=0)
    S, B = np.meshgrid(s, [0.4, 1.5, 4.0, 9.0])
    assert np.allclose(lb.vhs_gain_factor(S, B, 0.5), 1.0, rtol=ROUND_OFF_FORMULA, atol=0)  # measured 7e-16
    J = lb.vhs_gain_factor(S, B, OMEGA_AR)
    beta = 0.5 - OMEGA_AR
    for si, bi, ji in zip(S.ravel(), B.ravel(), J.ravel(), strict=False):
        f = lambda v: 2 * v * (si * si + v * v) ** beta * math.exp(-((v - bi) ** 2)) * i0e(2 * bi * v)  # noqa: E731
        ref = quad(f, 0, bi + 10, points=[si, bi], limit=400, epsabs=1e-15, epsrel=1e-13)[0]
        assert ji == pytest.approx(ref, rel=GAIN_FACTOR_QUAD)


def test_vhs_hard_sphere_limit_reproduces_closed_form():
    """The general VHS route (numerical J, Kummer-function nu) at omega = 1/2 against the hard-sphere closed form."""
    c, wc, nu, M = lb.speed_matrices(6, 12)
    c2, wc2, nu2, M2 = lb.speed_matrices(6, 12, 0.5, True)
    # round-off: J = 1 to 7e-16 (previous test), nu from hyp1f1 vs erf (measured 3e-16 of the largest entry)
    assert np.max(np.abs(nu2 - nu) / nu) < ROUND_OFF_FORMULA
    assert np.max(np.abs(M2 - M)) < ROUND_OFF_FORMULA * np.max(np.abs(M))


@pytest.mark.parametrize("omega", [OMEGA_AR, 1.0])
def test_vhs_kernel_conserves_mass_momentum_energy_and_is_symmetric(omega):
    g, gw = np.polynomial.legendre.leggauss(16)
    for c in (0.3, 1.2, 2.6):
        edges = np.unique(
            np.concatenate(
                [[0.0], c - c * np.geomspace(1, 1e-5, 10), c + np.geomspace(1e-5, 1, 10), np.linspace(c + 1, c + 8, 15)]
            )
        )
        lo, hi = edges[:-1, None], edges[1:, None]
        x = (lo + 0.5 * (hi - lo) * (g + 1)).ravel()
        wx = (0.5 * (hi - lo) * gw).ravel()
        k = lb.kernel_moments(c, x, 1, omega)
        nu = float(lb.collision_frequency(np.array([c]), omega)[0])
        # L[1] = L[c_x] = L[c^2] = 0 (collision invariants); KERNEL_QUADRATURE: quadrature of the composite rules
        assert np.sum(wx * x**2 * k[0]) == pytest.approx(nu, rel=KERNEL_QUADRATURE)
        assert np.sum(wx * x**3 / c * k[1]) == pytest.approx(nu, rel=KERNEL_QUADRATURE)
        assert np.sum(wx * x**4 * k[0]) == pytest.approx(nu * c * c, rel=KERNEL_QUADRATURE)
    # nu against its defining integral pi^(-1/2) int |c - c1|^gamma e^(-c1^2) dc1 (angular integral done by hand)
    gam = 2 - 2 * omega
    cs = np.array([0.05, 0.8, 2.5])
    y, wy = np.polynomial.legendre.leggauss(100)
    for c in cs:
        # Gauss-Legendre on [0, c] and [c, 9]: |c - c1|^(gamma + 2) is smooth on each
        c1 = np.concatenate([0.5 * c * (y + 1.0), c + 0.5 * (9.0 - c) * (y + 1.0)])
        w1 = np.concatenate([0.5 * c * wy, 0.5 * (9.0 - c) * wy])
        direct = (
            2
            * math.sqrt(math.pi)
            / ((gam + 2) * c)
            * np.sum(w1 * c1 * np.exp(-(c1**2)) * ((c + c1) ** (gam + 2) - np.abs(c - c1) ** (gam + 2)))
        )
        assert lb.collision_frequency(np.array([c]), omega)[0] == pytest.approx(direct, rel=NU_DIFFERENCE_OF_POWERS)
    # self-adjointness: e^{-c^2} k_l(c, c') = e^{-c'^2} k_l(c', c)
    a, b = 0.7, 1.9
    kab = lb.kernel_moments(a, np.array([b]), 4, omega)[:, 0]
    kba = lb.kernel_moments(b, np.array([a]), 4, omega)[:, 0]
    assert np.allclose(math.exp(-a * a) * kab, math.exp(-b * b) * kba, rtol=KERNEL_SYMMETRY)


def test_maxwell_molecules_exact_transport():
    """Maxwell molecules (omega = 1): the Burnett functions are eigenfunctions of the linearized operator
    (Wang Chang & Uhlenbeck, Studies in Statistical Mechanics V, 1970; Cercignani 1988, Ch. IV), so
    the first Sonine approximations of viscosity and conduction are exact and Pr = 2/3 exactly."""
    f_mu, f_lam = sonine_factors(4, 1.0)
    # every higher Sonine term vanishes: f(N) = 1 to the round-off of the bracket sums and the inverse of the
    # bracket matrix (measured 4e-16)
    assert np.allclose(f_mu, 1.0, rtol=ROUND_OFF) and np.allclose(f_lam, 1.0, rtol=ROUND_OFF)
    kappa_1 = first_viscosity_factor(1.0)
    for n in (5, 8):
        assert lb.viscosity_factor(n, omega=1.0) == pytest.approx(kappa_1, rel=OPERATOR_QUADRATURE)
        assert lb.prandtl_number(n, 1.0) == pytest.approx(2.0 / 3.0, rel=OPERATOR_QUADRATURE)
    print(
        f"\nMaxwell: kappa = {lb.viscosity_factor(8, omega=1.0):.14f} (bracket {kappa_1:.14f}, 2/pi = {2 / math.pi:.14f})"
    )


def test_hard_sphere_bracket_reproduces_first_chapman_enskog_viscosity():
    # kappa_1 of hard spheres (5/16) sqrt(pi m k T)/(pi d^2) (Chapman & Cowling 1970, Ch. 10; check-values.md Sec. 4.1)
    # round-off of a quadrature that is exact for the bracket integrand
    assert first_viscosity_factor(0.5) == pytest.approx(KAPPA_1, rel=ROUND_OFF_SUM)


def test_vhs_viscosity_and_conductivity_against_sonine_approximations():
    """Argon's omega: operator viscosity and conductivity above every Sonine value and within the Sonine tail."""
    f_mu, f_lam = sonine_factors(6, OMEGA_AR)
    kappa_1 = first_viscosity_factor(OMEGA_AR)
    kappa = lb.viscosity_factor(10, omega=OMEGA_AR)
    pr = lb.prandtl_number(10, OMEGA_AR)
    conduct = (kappa / kappa_1) * (2.0 / 3.0) / pr
    print(
        f"\nomega = {OMEGA_AR}: kappa / kappa_1 = {kappa / kappa_1:.12f}, lambda / lambda_1 = {conduct:.12f}, Pr = {pr:.10f}"
        f"\nf_mu: {np.array2string(f_mu, precision=10)}\nf_lambda: {np.array2string(f_lam, precision=10)}"
    )
    for f, exact in ((f_mu, kappa / kappa_1), (f_lam, conduct)):
        step = np.diff(f)
        assert np.all(step > 0)  # Ritz: nested bases raise the approximation monotonically
        q = step[-1] / step[-2]
        assert 0 < q < MAX_TAIL_RATIO  # geometric tail
        tail = step[-1] * q / (1 - q)
        assert exact > f[-1] * (1 - OPERATOR_QUADRATURE)
        assert exact - f[-1] < SONINE_TAIL_FACTOR * tail
    # between hard spheres (Pr 0.6609 on this operator) and Maxwell molecules (2/3)
    assert lb.prandtl_number(10) < pr < 2.0 / 3.0


@pytest.mark.parametrize(("delta", "alpha"), [(0.3, 1.0), (3.0, 0.8)])
def test_vhs_onsager_reciprocity(delta, alpha):
    kw = dict(
        delta=delta,
        molecule="vhs",
        omega=OMEGA_AR,
        lower_wall=MaxwellWall(alpha),
        n_space=32,
        n_velocity=5,
        tol=1e-10,
        error_estimate=False,
    )
    qp = solve_lbe("poiseuille", **kw).coefficient("Q_P")
    gt = solve_lbe("thermal_creep", **kw).coefficient("G_T")
    # Q_P = G_T (Sharipov, Physica A 203 (1994) 437); reciprocal up to the truncation error (as for hard spheres)
    assert qp == pytest.approx(gt, rel=DISCRETISATION)


# delta = 0.3 builds the 10-speed VHS operator (~15 s): slow
@pytest.mark.parametrize("delta", [pytest.param(0.3, marks=pytest.mark.slow), 3.0])
def test_vhs_error_estimate_against_finer_solution(delta):
    kw = dict(molecule="vhs", omega=OMEGA_AR, tol=1e-11)
    res = solve_lbe("poiseuille", delta=delta, n_space=24, n_velocity=6, **kw)
    ref = solve_lbe("poiseuille", delta=delta, n_space=96, n_velocity=10, error_estimate=False, **kw)
    assert res.status == ref.status == "converged"
    assert_estimate_honest(res, ref, ["G_P", "Q_P"], max_relative=COARSE_ESTIMATE_CEILING, label=f"VHS delta={delta}")


@pytest.mark.slow
@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
@pytest.mark.parametrize("problem", ["poiseuille", "thermal_creep"])
def test_vhs_velocity_set_convergence_study(delta, problem):
    """Speed nodes 6, 8 (default), 10, 12 at twice the default cells: the change per step falls, and the
    default's error against 12 nodes is within its error estimate's promise."""
    name = "G_P" if problem == "poiseuille" else "G_T"
    kw = dict(molecule="vhs", omega=OMEGA_AR, tol=1e-11)
    ns = 2 * grids.default_n_space(delta)
    vals = {
        n: solve_lbe(problem, delta=delta, n_space=ns, n_velocity=n, error_estimate=False, **kw).coefficient(name)
        for n in (6, 8, 10, 12)
    }
    diffs = [abs(vals[a] - vals[12]) for a in (6, 8, 10)]
    print(f"\n{problem} delta={delta}: " + ", ".join(f"{n}: {v:.8f}" for n, v in vals.items()))
    # changes fall with the speed count until they reach VELOCITY_CONVERGED of G
    assert all(d2 < d1 or d2 < VELOCITY_CONVERGED * abs(vals[12]) for d1, d2 in zip(diffs, diffs[1:], strict=False))
    res = solve_lbe(problem, delta=delta, **kw)
    finer = solve_lbe(problem, delta=delta, n_space=ns, n_velocity=12, error_estimate=False, **kw)
    assert_estimate_honest(
        res, finer, [name], max_relative=DEFAULT_ESTIMATE_CEILING, label=f"VHS {problem} delta={delta}"
    )


@pytest.mark.parametrize("delta", [1.0])
@pytest.mark.parametrize("alpha", [1.0, 0.7])
def test_accelerated_equals_plain_iteration(delta, alpha):
    kw = dict(delta=delta, lower_wall=MaxwellWall(alpha), n_space=24, n_velocity=5, tol=1e-11, error_estimate=False)
    fast = solve_lbe("poiseuille", accelerate=True, **kw)
    slow = solve_lbe("poiseuille", accelerate=False, **kw)
    assert fast.status == slow.status == "converged"
    # same discrete fixed point, up to the two iteration errors
    assert fast.coefficient("G_P") == pytest.approx(slow.coefficient("G_P"), rel=PLAIN_AND_ACCELERATED)
    assert fast.convergence.iterations < slow.convergence.iterations


# The stopping rule watches velocity and heat flux (boltzmann_driver): at tol 1e-8 every reported coefficient is within
# ITERATION_BOUND of the tol 1e-12 solve.  Measured |coefficient(1e-8) / coefficient(1e-12) - 1| <= 1.22e-8 = 1.22 tol
# over hard spheres and VHS argon, delta 0.1-100, alpha 1 and 0.7 (16 cases, 5 speeds): the condition factor of the
# stopping rule's estimate (relative change of the moment profiles against the relative error of their integrals)
# is 1.2 there; the bound allows 10 tol.  When the rule watched the velocity only, Q_P was 1.5e-7 off (15 tol).
ITERATION_TOL = 1e-8
ITERATION_BOUND = 10.0 * ITERATION_TOL


@pytest.mark.parametrize(
    ("molecule", "delta"),
    [
        ("hard_sphere", 1.0),
        ("vhs", 1.0),
        pytest.param("hard_sphere", 10.0, marks=pytest.mark.slow),
        pytest.param("vhs", 100.0, marks=pytest.mark.slow),
    ],
)
def test_stopping_rule_converges_every_coefficient(molecule, delta):
    kw = dict(
        delta=delta,
        molecule=molecule,
        omega=OMEGA_AR if molecule == "vhs" else None,
        n_velocity=5,
        error_estimate=False,
    )
    loose = {p: solve_lbe(p, tol=ITERATION_TOL, **kw) for p in ("poiseuille", "thermal_creep")}
    tight = {p: solve_lbe(p, tol=1e-12, **kw) for p in ("poiseuille", "thermal_creep")}
    for problem, names in (("poiseuille", ("G_P", "Q_P")), ("thermal_creep", ("G_T", "Q_T"))):
        assert loose[problem].status == tight[problem].status == "converged"
        for name in names:
            a, b = loose[problem].coefficient(name), tight[problem].coefficient(name)
            assert a == pytest.approx(b, rel=ITERATION_BOUND), f"{name}: {a / b - 1:.2e} at tol {ITERATION_TOL:g}"
    # Onsager Q_P = G_T (Sharipov, Physica A 203 (1994) 437): the discrete scheme's reciprocity gap (truncation error,
    # ~1e-5 here) is the converged one to the iteration bound (one bound for each of Q_P and G_T)
    gap = loose["poiseuille"].coefficient("Q_P") - loose["thermal_creep"].coefficient("G_T")
    gap_tight = tight["poiseuille"].coefficient("Q_P") - tight["thermal_creep"].coefficient("G_T")
    assert abs(gap - gap_tight) <= 2.0 * ITERATION_BOUND * abs(tight["thermal_creep"].coefficient("G_T"))


@pytest.mark.parametrize(("delta", "alpha"), [(0.3, 1.0), (3.0, 1.0), (3.0, 0.8)])
def test_onsager_reciprocity(delta, alpha):
    kw = dict(delta=delta, lower_wall=MaxwellWall(alpha), n_space=32, n_velocity=5, tol=1e-10, error_estimate=False)
    qp = solve_lbe("poiseuille", **kw).coefficient("Q_P")
    gt = solve_lbe("thermal_creep", **kw).coefficient("G_T")
    # Q_P = G_T (Sharipov, Physica A 203 (1994) 437); the discrete scheme is
    # reciprocal up to its truncation error (measured <= 1e-5 on this grid)
    assert qp == pytest.approx(gt, rel=DISCRETISATION)


@pytest.mark.parametrize("molecule", ["hard_sphere", "vhs"])
def test_free_molecular_limit_matches_model_equations(molecule):
    """Between plates G_P and G_T diverge like -ln(delta)/sqrt(pi) and -ln(delta)/(2 sqrt(pi)) for every collision model
    (the divergence comes from molecules flying parallel to the walls, cut off by collisions: only the constant term
    depends on the model).  So the LBE and BGK slopes d G / d ln(delta) agree as delta -> 0, and the ratio LBE/BGK
    approaches 1 (like 1/ln delta).  The gap between the LBE and BGK slopes (the next terms, which depend on
    the loss frequency nu(c) of slow molecules: 2 % for hard spheres, 3.6 % for VHS argon, 5 % for Maxwell molecules
    at delta = 1e-3..1e-2, measured, velocity-converged) must shrink as the delta window moves down."""
    res = {}
    for delta in (1e-3, 3e-3, 1e-2):
        for problem, name in (("poiseuille", "G_P"), ("thermal_creep", "G_T")):
            lbe = solve_lbe(
                problem,
                delta=delta,
                molecule=molecule,
                omega=OMEGA_AR if molecule == "vhs" else None,
                n_space=16,
                n_velocity=5,
                error_estimate=False,
                tol=1e-10,
            )
            bgk = solve_plane_channel(
                problem, delta=delta, model="bgk", accelerate=True, n_space=16, error_estimate=False, tol=1e-10
            )
            res[delta, name] = (lbe.coefficient(name), bgk.coefficient(name))

    def slope(name, k, d1, d2):
        return (res[d1, name][k] - res[d2, name][k]) / math.log(d2 / d1)

    for name, lead in (("G_P", 1 / math.sqrt(math.pi)), ("G_T", 0.5 / math.sqrt(math.pi))):
        slope_lbe, slope_bgk = slope(name, 0, 1e-3, 1e-2), slope(name, 1, 1e-3, 1e-2)
        gap_low = abs(slope(name, 0, 1e-3, 3e-3) - slope(name, 1, 1e-3, 3e-3))
        print(
            f"\n{name}: slope LBE {slope_lbe:.4f}, BGK {slope_bgk:.4f}, leading {lead:.4f}; gap (1e-3, 3e-3) {gap_low:.4f}"
        )
        if molecule == "hard_sphere":
            assert slope_lbe == pytest.approx(slope_bgk, rel=HARD_SPHERE_SLOPE_GAP)
        assert gap_low < abs(slope_lbe - slope_bgk)
        # both approach the leading coefficient from below (LEADING_SLOPE_FLOOR: the same next terms)
        assert LEADING_SLOPE_FLOOR * lead < slope_lbe < lead
        if molecule == "hard_sphere":
            # the ratio approaches 1 only once the slopes agree: holds for hard spheres at these delta, not yet for
            # VHS argon (measured 0.967 -> 0.959 for G_P), whose slope gap is larger (checked to shrink above)
            ratio = [res[d, name][0] / res[d, name][1] for d in (1e-2, 1e-3)]
            assert abs(ratio[1] - 1) < abs(ratio[0] - 1)


@pytest.mark.parametrize("delta", [0.3, 3.0])
def test_error_estimate_against_finer_solution(delta):
    res = solve_lbe("poiseuille", delta=delta, n_space=24, n_velocity=6, tol=1e-11)
    ref = solve_lbe("poiseuille", delta=delta, n_space=96, n_velocity=10, tol=1e-11, error_estimate=False)
    assert res.status == ref.status == "converged"
    # the coarse grid's error measured ~1e-4 (delta = 0.3) and ~1e-5 (delta = 3)
    assert_estimate_honest(res, ref, ["G_P", "Q_P"], max_relative=COARSE_ESTIMATE_CEILING, label=f"LBE delta={delta}")


@pytest.mark.slow
@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
@pytest.mark.parametrize("problem", ["poiseuille", "thermal_creep"])
def test_default_grid_convergence_study(delta, problem):
    name = "G_P" if problem == "poiseuille" else "G_T"
    res = solve_lbe(problem, delta=delta, tol=1e-11)
    finer = solve_lbe(
        problem, delta=delta, n_space=2 * res.discretization["n_space"], n_velocity=12, tol=1e-11, error_estimate=False
    )
    # default grid: measured relative error <= 3e-5 (directions/Legendre order at delta = 0.1), 1e-6 above
    assert_estimate_honest(res, finer, [name], max_relative=DEFAULT_ESTIMATE_CEILING, label=f"{problem} delta={delta}")


@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
def test_iterations_with_acceleration(delta):
    res = solve_lbe("poiseuille", delta=delta, n_space=grids.default_n_space(delta), n_velocity=5, error_estimate=False)
    # target of the issue: at most 50 iterations up to delta = 100 (measured 9, 18, 33)
    assert res.status == "converged" and res.convergence.iterations <= 50


@pytest.mark.slow
@pytest.mark.parametrize("problem", ["poiseuille", "thermal_creep"])
def test_iterations_at_delta_100(problem):
    res = solve_lbe(problem, delta=100.0, error_estimate=False)
    assert res.status == "converged" and res.convergence.iterations <= 50  # measured 34 and 39


@pytest.mark.slow
def test_slip_asymptote():
    """G_P = delta/6 + sigma_P + b/delta and delta G_T = sigma_T + b'/delta at large delta (check-values.md Sec. 0.3)."""
    gp = {}
    gt = {}
    for delta in (50.0, 100.0, 200.0):
        gp[delta] = (
            solve_lbe("poiseuille", delta=delta, n_velocity=6, tol=1e-11, error_estimate=False).coefficient("G_P")
            - delta / 6
        )
        gt[delta] = delta * solve_lbe(
            "thermal_creep", delta=delta, n_velocity=6, tol=1e-11, error_estimate=False
        ).coefficient("G_T")

    def extrapolate(f, d1, d2):  # eliminate b/delta
        return (d2 * f[d2] - d1 * f[d1]) / (d2 - d1)

    sigma_p = extrapolate(gp, 100.0, 200.0)
    sigma_t = extrapolate(gt, 100.0, 200.0)
    print(
        f"\nsigma_P = {sigma_p:.5f} (Sone -k0/gamma_1 = {-K_0 / GAMMA_1:.5f}, from memory, not a pass bar), "
        f"sigma_T = {sigma_t:.5f} (1.0178 from memory, check-values.md Sec. 2, not a pass bar)"
    )
    # ASYMPTOTIC: the O(1/delta^2) remainder (the two extrapolations (50,100), (100,200) differ by 2e-4).
    # The same sigma_P and sigma_T from the tube's solver are compared with these in test_tube_boltzmann.py.
    assert sigma_p == pytest.approx(extrapolate(gp, 50.0, 100.0), abs=ASYMPTOTIC)
    assert sigma_t == pytest.approx(extrapolate(gt, 50.0, 100.0), abs=ASYMPTOTIC)


def test_failure_record_and_bad_input():
    res = solve_lbe("poiseuille", delta=10.0, n_space=16, n_velocity=4, max_iter=3, error_estimate=False)
    assert res.status == "failed" and "max_iter" in res.convergence.reason
    for kwargs, field in [
        (dict(problem="couette", delta=1.0), "problem"),
        (dict(problem="poiseuille", delta=1e-5), "delta"),
        (dict(problem="poiseuille", delta=1.0, molecule="vss"), "molecule"),
        (dict(problem="poiseuille", delta=1.0, molecule="vhs"), "omega"),
        (dict(problem="poiseuille", delta=1.0, molecule="vhs", omega=1.2), "omega"),
        (dict(problem="poiseuille", delta=1.0, molecule="hard_sphere", omega=0.81), "omega"),
        (dict(problem="poiseuille", delta=1.0, n_velocity=40), "n_velocity"),
        (dict(problem="poiseuille", delta=1.0, lower_wall=CercignaniLampisWall(0.8, 0.8)), "lower_wall"),
    ]:
        problem = kwargs.pop("problem")
        with pytest.raises(ValueError, match=f"^{field}:"):
            solve_lbe(problem, **kwargs)


def test_result_record():
    res = solve_lbe("thermal_creep", delta=1.0, n_space=16, n_velocity=4)
    assert res.family == "plane_channel" and res.parameters["kinetic_model"] == "boltzmann_hard_sphere"
    assert set(res.coefficients) == {"G_T", "Q_T", "G_T_error_estimate", "Q_T_error_estimate"}
    assert res.profiles["velocity"].value.shape == res.coords["y"].value.shape
    assert res.convergence.iterations == res.convergence.residuals.size
