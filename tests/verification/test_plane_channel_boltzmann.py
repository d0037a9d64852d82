"""Plane channel with the linearized Boltzmann equation (hard spheres), solver.plane_channel.boltzmann_driver.

Published tables.  The hard-sphere channel tables of Ohwada, Sone & Aoki,
Phys. Fluids A 1 (1989) 2042, the slip coefficients of Ohwada, Sone & Aoki,
Phys. Fluids A 1 (1989) 1588 / Sone, Kinetic Theory and Fluid Dynamics
(2002), and Siewert, Z. angew. Math. Phys. 54 (2003) 273 could not be read
with the search tools (only title pages and abstracts are stored), so no
flow-rate table is compared here.  In their place:

* the operator itself against Sone's hard-sphere transport coefficients
  gamma_1 = 1.270042427 (viscosity) and gamma_2 = 1.922284066 (thermal
  conductivity) and the viscous-slip coefficient k_0 = -1.2540 (Sone,
  Molecular Gas Dynamics, Birkhaeuser 2007, Sec. A.2.9 and Table 3.1), as
  quoted in a public repository's scripts that reproduce them (secondary
  source: the values were not read in the book).  Conversion to our
  normalisation: kappa = n d^2 mu v0 / p = gamma_1 / (2 sqrt(2 pi)) (Sone's
  mu = (sqrt(pi)/2) gamma_1 p l_0 / sqrt(2RT), l_0 = 1/(sqrt(2) pi d^2 n));
  Pr = gamma_1 / gamma_2; sigma_P = -k_0 / gamma_1 (check-values.md Sec. 2);
* conservation, symmetry, the free-molecular limit, Onsager reciprocity,
  plain-vs-accelerated agreement, a grid and velocity-set study with the
  error estimate tested against the actual error, and the slip asymptote.
"""

import math

import numpy as np
import pytest

from solver.plane_channel import grids
from solver.plane_channel import linearized_boltzmann as lb
from solver.plane_channel import solve_plane_channel
from solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann as solve_lbe
from solver.walls import CercignaniLampisWall, MaxwellWall
from tests.verification.estimate_checks import assert_estimate_honest

# Sone (2007), as quoted in a public repository (module docstring; secondary source)
GAMMA_1 = 1.270042427
GAMMA_2 = 1.922284066
K_0 = -1.2540


def test_kernel_conserves_mass_momentum_energy_and_is_symmetric():
    cs = np.array([0.2, 0.9, 1.7, 3.0])
    g, gw = np.polynomial.legendre.leggauss(16)
    for c in cs:
        # composite grid in c' split and graded at c' = c (kink of k_l there)
        edges = np.unique(np.concatenate([[0.0], c - c * np.geomspace(1, 1e-5, 10), c + np.geomspace(1e-5, 1, 10), np.linspace(c + 1, c + 8, 15)]))
        lo, hi = edges[:-1, None], edges[1:, None]
        x = (lo + 0.5 * (hi - lo) * (g + 1)).ravel()
        wx = (0.5 * (hi - lo) * gw).ravel()
        k = lb.kernel_moments(c, x, 1)
        nu = lb.collision_frequency(c)
        # L[1] = L[c_x] = L[c^2] = 0:  int c'^2 k_0 = nu, int c'^3/c k_1 = nu, int c'^4 k_0 = nu c^2;
        # 1e-9: quadrature error of the composite rules (measured ~1e-10)
        assert np.sum(wx * x**2 * k[0]) == pytest.approx(nu, rel=1e-9)
        assert np.sum(wx * x**3 / c * k[1]) == pytest.approx(nu, rel=1e-9)
        assert np.sum(wx * x**4 * k[0]) == pytest.approx(nu * c * c, rel=1e-9)
    # self-adjointness: e^{-c^2} k_l(c, c') = e^{-c'^2} k_l(c', c)
    a, b = 0.7, 1.9
    kab = lb.kernel_moments(a, np.array([b]), 4)[:, 0]
    kba = lb.kernel_moments(b, np.array([a]), 4)[:, 0]
    assert np.allclose(math.exp(-a * a) * kab, math.exp(-b * b) * kba, rtol=1e-10)


def test_viscosity_and_prandtl_number_against_sone():
    kappa = lb.viscosity_factor(12)
    # 1e-8: the speed sets converge spectrally (6 nodes: 1e-7, 12 nodes: 1e-10 from 16);
    # the quoted values carry 10 digits
    assert kappa == pytest.approx(GAMMA_1 / (2.0 * math.sqrt(2.0 * math.pi)), rel=1e-8)
    assert lb.prandtl_number(12) == pytest.approx(GAMMA_1 / GAMMA_2, rel=1e-8)
    # and not the first Chapman-Enskog value 5 sqrt(2)/(16 sqrt(pi)) (1.6 % lower), derived in linearized_boltzmann
    assert abs(kappa / (5 * math.sqrt(2) / (16 * math.sqrt(math.pi))) - 1) > 0.01


@pytest.mark.parametrize("delta", [1.0])
@pytest.mark.parametrize("alpha", [1.0, 0.7])
def test_accelerated_equals_plain_iteration(delta, alpha):
    kw = dict(delta=delta, lower_wall=MaxwellWall(alpha), n_space=24, n_velocity=5, tol=1e-11, error_estimate=False)
    fast = solve_lbe("poiseuille", accelerate=True, **kw)
    slow = solve_lbe("poiseuille", accelerate=False, **kw)
    assert fast.status == slow.status == "converged"
    # same discrete fixed point; 1e-8 covers the two iteration tolerances (1e-11 each, times the 1/(1-rho) amplification)
    assert fast.coefficient("G_P") == pytest.approx(slow.coefficient("G_P"), rel=1e-8)
    assert fast.convergence.iterations < slow.convergence.iterations


@pytest.mark.parametrize(("delta", "alpha"), [(0.3, 1.0), (3.0, 1.0), (3.0, 0.8)])
def test_onsager_reciprocity(delta, alpha):
    kw = dict(delta=delta, lower_wall=MaxwellWall(alpha), n_space=32, n_velocity=5, tol=1e-10, error_estimate=False)
    qp = solve_lbe("poiseuille", **kw).coefficient("Q_P")
    gt = solve_lbe("thermal_creep", **kw).coefficient("G_T")
    # Q_P = G_T (Sharipov, Physica A 203 (1994) 437); the discrete scheme is
    # reciprocal up to its truncation error (measured <= 1e-5 on this grid)
    assert qp == pytest.approx(gt, rel=1e-4)


def test_free_molecular_limit_matches_model_equations():
    """Between plates G_P and G_T diverge like -ln(delta)/sqrt(pi) and -ln(delta)/(2 sqrt(pi)) for every collision model
    (the divergence comes from molecules flying parallel to the walls, cut off by collisions: only the constant term
    depends on the model).  So the LBE and BGK slopes d G / d ln(delta) agree as delta -> 0, and the ratio LBE/BGK
    approaches 1 (like 1/ln delta)."""
    res = {}
    for delta in (1e-3, 1e-2):
        for problem, name in (("poiseuille", "G_P"), ("thermal_creep", "G_T")):
            lbe = solve_lbe(problem, delta=delta, n_space=16, n_velocity=5, error_estimate=False, tol=1e-10)
            bgk = solve_plane_channel(problem, delta=delta, model="bgk", accelerate=True, n_space=16, error_estimate=False, tol=1e-10)
            res[delta, name] = (lbe.coefficient(name), bgk.coefficient(name))
    for name, lead in (("G_P", 1 / math.sqrt(math.pi)), ("G_T", 0.5 / math.sqrt(math.pi))):
        slope_lbe = (res[1e-3, name][0] - res[1e-2, name][0]) / math.log(10)
        slope_bgk = (res[1e-3, name][1] - res[1e-2, name][1]) / math.log(10)
        print(f"\n{name}: slope LBE {slope_lbe:.4f}, BGK {slope_bgk:.4f}, leading {lead:.4f}")
        # 3 %: the next terms (delta ln delta and the model-dependent cut-off) at delta = 1e-3..1e-2 (measured 2 %)
        assert slope_lbe == pytest.approx(slope_bgk, rel=0.03)
        # both approach the leading coefficient from below; 12 %: same next terms (measured 7 % for G_P at these delta)
        assert 0.85 * lead < slope_lbe < lead
        ratio = [res[d, name][0] / res[d, name][1] for d in (1e-2, 1e-3)]
        assert abs(ratio[1] - 1) < abs(ratio[0] - 1)


@pytest.mark.parametrize("delta", [0.3, 3.0])
def test_error_estimate_against_finer_solution(delta):
    res = solve_lbe("poiseuille", delta=delta, n_space=24, n_velocity=6, tol=1e-11)
    ref = solve_lbe("poiseuille", delta=delta, n_space=96, n_velocity=10, tol=1e-11, error_estimate=False)
    assert res.status == ref.status == "converged"
    # the coarse grid's error measured ~1e-4 (delta = 0.3) and ~1e-5 (delta = 3)
    assert_estimate_honest(res, ref, ["G_P", "Q_P"], max_relative=2e-3, label=f"LBE delta={delta}")


@pytest.mark.slow
@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
@pytest.mark.parametrize("problem", ["poiseuille", "thermal_creep"])
def test_default_grid_convergence_study(delta, problem):
    name = "G_P" if problem == "poiseuille" else "G_T"
    res = solve_lbe(problem, delta=delta, tol=1e-11)
    finer = solve_lbe(problem, delta=delta, n_space=2 * res.discretization["n_space"], n_velocity=12, tol=1e-11, error_estimate=False)
    # default grid: measured relative error <= 3e-5 (directions/Legendre order at delta = 0.1), 1e-6 above
    assert_estimate_honest(res, finer, [name], max_relative=1e-4, label=f"{problem} delta={delta}")


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
        gp[delta] = solve_lbe("poiseuille", delta=delta, n_velocity=6, tol=1e-11, error_estimate=False).coefficient("G_P") - delta / 6
        gt[delta] = delta * solve_lbe("thermal_creep", delta=delta, n_velocity=6, tol=1e-11, error_estimate=False).coefficient("G_T")

    def extrapolate(f, d1, d2):  # eliminate b/delta
        return (d2 * f[d2] - d1 * f[d1]) / (d2 - d1)

    sigma_p = extrapolate(gp, 100.0, 200.0)
    sigma_t = extrapolate(gt, 100.0, 200.0)
    print(f"\nsigma_P = {sigma_p:.5f} (Sone -k0/gamma_1 = {-K_0 / GAMMA_1:.5f}), sigma_T = {sigma_t:.5f}"
          " (1.0178 from memory, check-values.md Sec. 2, not a pass bar)")
    # 1e-3: the O(1/delta^2) remainder (the two extrapolations (50,100), (100,200) differ by 2e-4) and
    # the 4 digits of k_0
    assert sigma_p == pytest.approx(-K_0 / GAMMA_1, abs=1e-3)
    assert sigma_p == pytest.approx(extrapolate(gp, 50.0, 100.0), abs=1e-3)
    assert sigma_t == pytest.approx(extrapolate(gt, 50.0, 100.0), abs=1e-3)


def test_failure_record_and_bad_input():
    res = solve_lbe("poiseuille", delta=10.0, n_space=16, n_velocity=4, max_iter=3, error_estimate=False)
    assert res.status == "failed" and "max_iter" in res.convergence.reason
    for kwargs, field in [
        (dict(problem="couette", delta=1.0), "problem"),
        (dict(problem="poiseuille", delta=1e-5), "delta"),
        (dict(problem="poiseuille", delta=1.0, molecule="vhs"), "molecule"),
        (dict(problem="poiseuille", delta=1.0, n_velocity=40), "n_velocity"),
        (dict(problem="poiseuille", delta=1.0, lower_wall=CercignaniLampisWall(0.8, 0.8)), "lower_wall"),
    ]:
        problem = kwargs.pop("problem")
        with pytest.raises(ValueError, match=f"^{field}:"):
            solve_lbe(problem, **kwargs)


def test_result_record():
    res = solve_lbe("thermal_creep", delta=1.0, n_space=16, n_velocity=4)
    assert res.family == "plane_channel" and res.parameters["model"] == "boltzmann_hard_sphere"
    assert set(res.coefficients) == {"G_T", "Q_T", "G_T_error_estimate", "Q_T_error_estimate"}
    assert res.profiles["velocity"].value.shape == res.coords["y"].value.shape
    assert res.convergence.iterations == res.convergence.residuals.size
