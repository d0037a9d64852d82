"""Deterministic BGK / S-model / ES-BGK relaxation against the model equations' exact rates.

Sources: in a homogeneous gas the BGK equation relaxes every non-equilibrium
moment at nu = p/mu (Bhatnagar, Gross & Krook, Phys. Rev. 94 (1954) 511); the
S-model relaxes stress at p/mu and heat flux at (2/3) p/mu (Shakhov, Fluid
Dyn. 3 (1968) 95); the ES-BGK model relaxes stress at p/mu and heat flux at
Pr p/mu (Holway 1966; Andries et al., Eur. J. Mech. B 19 (2000) 813); see
check-values.md 5.2.  Conservation and the discrete H-theorem: Mieussens,
J. Comput. Phys. 162 (2000) 429.
"""

import math

import numpy as np
import pytest
from precision import ROUND_OFF, ROUND_OFF_FORMULA

from knudsweep.solver.relaxation import solve_relaxation
from knudsweep.solver.relaxation.deterministic import PRANDTL, discrete_target, make_grid

# A fit of an exact exponential (BGK relaxes every moment at one rate): the fit's round-off.
EXPONENTIAL_FIT = 1e-7
# The window part of an exact exponential's uncertainty: round-off of the fits.
WINDOW_ROUND_OFF = 1e-6
# A two-exponential fit of an exact model: the misfit minimum locates the rate to ~sqrt(machine epsilon) = 1.5e-8.
MISFIT_MINIMUM = 1e-6
# The stated uncertainty of that fit (jackknife and window parts of a noise-free curve).
MISFIT_UNCERTAINTY = 1e-5
# A rate the frozen-target step reproduces exactly (no step error): fit round-off only.
EXACT_STEP_FIT = 1e-9
# Grid error of the corrected Gaussian on 28^3 nodes: ~1e-6.
GAUSSIAN_GRID_ERROR = 1e-5
# The frozen-target exponential step against the exact rate: nu dt / 2 = 0.4 % for dt = 0.01 (ES-BGK: 0.13 %).
STEP_ERROR = 0.005
# The binned H falls to ~3e-6 of its start (quadratic in the remaining amplitude).
H_FLOOR = 1e-4
# Mieussens' discrete Maxwellian against the continuous one on 32^3 nodes over [-7, 7]^3: the trapezoid rule is
# spectrally accurate for a Gaussian.
DISCRETE_MAXWELLIAN = 1e-10

BEAMS = dict(initial_state="two_beams", beam_separation=2.5, beam_fraction=0.3)


def _run(method, model="hard_sphere", **kw):
    args = dict(method=method, molecular_model=model, t_end=8.0, n_output=33, n_velocity=28, **BEAMS)
    args.update(kw)
    return solve_relaxation(**args)


@pytest.fixture(scope="module")
def runs():
    return {m: _run(m) for m in ("bgk", "s_model", "es_bgk")}


@pytest.mark.parametrize("method", ["bgk", "s_model", "es_bgk"])
def test_conservation_to_round_off(runs, method):
    r = runs[method]
    assert r.status == "converged"
    # 800 steps, each a convex combination of two arrays with equal moments
    # (Newton residual <= 2e-14 relative) plus the round-off of the update
    # (~1e-16 per node, summed over 2e4 nodes ~1e-15): at most ~1e-12 in total
    assert r.coefficient("mass_drift") < ROUND_OFF
    assert r.coefficient("momentum_drift") < ROUND_OFF
    assert r.coefficient("energy_drift") < ROUND_OFF


@pytest.mark.parametrize("method", ["bgk", "es_bgk"])
def test_h_never_increases(runs, method):
    # H-theorems: BGK (discrete, Mieussens 2000) and ES-BGK (Andries et al. 2000);
    # round-off of a sum over 2e4 nodes ~1e-15
    h = runs[method].profiles["h_function_grid"].value
    assert np.all(np.diff(h) <= ROUND_OFF_FORMULA)
    assert h[0] > 100 * h[-1] > 0  # it does relax


@pytest.mark.parametrize("method", ["bgk", "es_bgk"])
def test_binned_h_tends_to_zero_at_the_grid_equilibrium(runs, method):
    # The binned estimate is measured against the cell probabilities of the grid's
    # discrete Maxwellian, so it must decay like the distance to equilibrium
    # (exp(-0.8 t) for the slowest BGK mode: e^-6.4 ~ 2e-3 of the start in
    # amplitude, ~3e-6 in H, quadratic in the amplitude) instead of stopping at
    # a grid-dependent floor; the binned H is also non-negative (Gibbs).
    h = runs[method].profiles["h_function"].value
    assert h[-1] >= 0.0
    assert h[-1] < H_FLOOR * h[0]


def test_bgk_rates_are_p_over_mu(runs):
    # hard spheres: p/mu = 0.8 per mean collision time (check-values 0.1)
    r = runs["bgk"]
    for name in ("anisotropy", "heat_flux", "anisotropy_initial", "anisotropy_late", "heat_flux_late"):
        assert 1.0 / r.coefficient(f"{name}_relaxation_time") == pytest.approx(0.8, rel=EXPONENTIAL_FIT)
        # exact exponentials: the stated uncertainty (window part) is round-off
        assert r.coefficient(f"{name}_relaxation_time_uncertainty") < WINDOW_ROUND_OFF
    # <c^4> relaxes at p/mu in BGK (its target has <c^4> = 15); the two-exponential fit
    # finds D = 0; the misfit minimum locates the rate to ~sqrt(machine epsilon)
    assert 1.0 / r.coefficient("fourth_moment_relaxation_time") == pytest.approx(0.8, rel=MISFIT_MINIMUM)
    assert r.coefficient("fourth_moment_relaxation_time_uncertainty") < MISFIT_UNCERTAINTY


def test_es_bgk_fourth_moment_is_two_exponentials(runs):
    # ES-BGK: the Gaussian target with Lambda = I - sigma/2 (Pr = 2/3) has
    # <c^4> = 15 + tr(sigma^2)/2, so dM4/dt = -nu (M4 - 15) + nu tr(sigma^2)/2 with
    # nu = Pr p/mu: the same two-exponential form as Maxwell molecules.  The
    # frozen-target step multiplies M4 - 15 by exp(-nu dt) exactly, so the slow
    # rate is nu without step error.
    r = runs["es_bgk"]
    assert 1.0 / r.coefficient("fourth_moment_relaxation_time") == pytest.approx(PRANDTL * 0.8, rel=MISFIT_MINIMUM)
    assert r.coefficient("fourth_moment_relaxation_time_uncertainty") < MISFIT_UNCERTAINTY


@pytest.mark.parametrize("method", ["s_model", "es_bgk"])
def test_shakhov_and_es_rates(runs, method):
    r = runs[method]
    nu = 0.8
    dt = r.discretization["time_step"]
    # stress at p/mu.  S-model: exact (its correction has no second moment and
    # the target stress is isotropic).  ES-BGK: the frozen-target step gives the
    # per-step factor 1 - (1 - exp(-Pr nu dt))/Pr, 0.13 % above p/mu for dt =
    # 0.01; the grid error of the corrected Gaussian is ~1e-6 on 28^3 nodes
    if method == "s_model":
        assert 1.0 / r.coefficient("anisotropy_relaxation_time") == pytest.approx(nu, rel=EXACT_STEP_FIT)
    else:
        stepped = -math.log(1 - (1 - math.exp(-PRANDTL * nu * dt)) / PRANDTL) / dt
        assert 1.0 / r.coefficient("anisotropy_relaxation_time") == pytest.approx(stepped, rel=GAUSSIAN_GRID_ERROR)
        assert stepped == pytest.approx(nu, rel=STEP_ERROR)
    # heat flux at (2/3) p/mu.  The exponential step with frozen target has
    # per-step decay 1 - Pr (1 - exp(-nu dt)) (S-model) or exp(-Pr nu dt)
    # (ES-BGK); relative deviation from Pr nu is < nu dt/2 = 0.4 % for dt = 0.01
    rate = 1.0 / r.coefficient("heat_flux_relaxation_time")
    assert rate == pytest.approx(PRANDTL * nu, rel=STEP_ERROR)


def test_s_model_step_matches_its_discrete_decay_factor(runs):
    # sharper check of the same rate: the S-model's one-step factor
    dt = runs["s_model"].discretization["time_step"]
    nu = 0.8
    expected = -math.log(1 - PRANDTL * (1 - math.exp(-nu * dt))) / dt
    assert 1.0 / runs["s_model"].coefficient("heat_flux_relaxation_time") == pytest.approx(expected, rel=MISFIT_MINIMUM)


def test_discrete_maxwellian_matches_continuous():
    # Mieussens' discrete Maxwellian tends to the continuous one as the grid
    # is refined; on 32^3 nodes over [-7, 7]^3 the trapezoid rule for a
    # Gaussian is spectrally accurate, so they agree to ~1e-10 relative.
    grid = make_grid(32, 7.0)
    v = grid.nodes()
    m = np.exp(-0.5 * np.sum(v**2, axis=1)) / (2 * math.pi) ** 1.5
    md = discrete_target(0, m.copy(), v, grid.weight)
    assert np.max(np.abs(md - m)) < DISCRETE_MAXWELLIAN * m.max()


def test_maxwell_model_bgk_matches_dsmc_anisotropy_rate():
    # same molecular model, two equations: for Maxwell molecules the Boltzmann
    # stress rate p/mu (DSMC: tests above) equals the BGK rate by construction
    r = _run("bgk", model="maxwell", initial_state="anisotropic", beam_fraction=0.5)
    assert 1.0 / r.coefficient("anisotropy_relaxation_time") == pytest.approx(0.5, rel=EXACT_STEP_FIT)


def test_bad_grid_names_field():
    with pytest.raises(ValueError, match="n_velocity"):
        _run("bgk", n_velocity=4)
    with pytest.raises(ValueError, match="velocity_half_width"):
        _run("bgk", velocity_half_width=1.0)
