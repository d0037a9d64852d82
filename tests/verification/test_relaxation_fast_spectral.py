"""Fast spectral solution of the space-homogeneous Boltzmann equation (solver/relaxation/fast_spectral.py).

Sources beside each check:
- BKW exact solution for Maxwell molecules with isotropic scattering
  (Bobylev, Dokl. Akad. Nauk SSSR 225 (1975) 1041; Krook & Wu, Phys. Rev.
  Lett. 36 (1976) 1107), formula in solver/relaxation/bkw.py (check-values.md
  5.1, from memory there; its moments are derived from it).
- Maxwell molecules: the moment equations close, the traceless pressure
  tensor decays exactly at p/mu and the heat flux at (2/3) p/mu
  (Truesdell & Muncaster, Fundamentals of Maxwell's Kinetic Theory of a Simple
  Monatomic Gas, Academic Press 1980; check-values.md 5.2, derived there
  from 5.1).  In reduced units p/mu = 1/2 (cross_sections.py).
- H-theorem (Boltzmann; Cercignani, The Boltzmann Equation and its
  Applications, Springer 1988, Ch. II): H(f) - H(M) never increases.
- Equilibrium: Q(M, M) = 0 for every Maxwellian M (ibid.).
"""

import math

import numpy as np
import pytest
from precision import HONEST, ROUND_OFF_FORMULA, ROUND_OFF_SUM

from knudsweep.solver import gas
from knudsweep.solver.relaxation import deterministic as det
from knudsweep.solver.relaxation import fast_spectral as fs
from knudsweep.solver.relaxation.bkw import BKW_FIRST_TIME, bkw_density, bkw_fourth_moment
from knudsweep.solver.relaxation.cross_sections import MolecularModel, molecular_model
from knudsweep.solver.relaxation.h_function import _relative_entropy_grid, equiprobable_edges
from knudsweep.solver.relaxation.initial_states import initial_density_on_grid, make_initial_state

# The collision operator on the exact BKW distribution, N = 32, box 10: measured 1e-4 (16: 3e0, 24: 7e-3); the floor
# is the rank-4 radial expansion.
BKW_OPERATOR_ERROR_32 = 3e-4
# Stress and heat-flux rates of Maxwell molecules on a two-beam state, N = 32: spectral error measured ~3e-4.
MAXWELL_RATE_ERROR_32 = 2e-3
# Round-off of the H sum f ln(f/M_d) w over 1.4e4 nodes with terms <= 1e-2: ~1e-15.
H_SUM_ROUND_OFF = 1e-15
# H on the coarse mild-VSS run stops near 3e-4 of its start (spectral error in the tails of the box).
H_FLOOR_COARSE = 1e-3
# Binned H of an anisotropic Gaussian start on the 32^3 grid: measured 1.3e-3 off the closed form.
BINNED_H_START_ERROR = 3e-3
# BKW on the default grid (N = 32, L = 10, dt = 0.2): the requirement of the issue that added the method; measured
# 3e-6 (<c^4>) and 2e-5 (distribution).
BKW_DEFAULT_GRID_ERROR = 1e-4

MAXWELL = MolecularModel("maxwell", 1.0, 1.0)
ARGON = gas.get_gas("Ar")
EDGES = equiprobable_edges(4)
MILD = make_initial_state("anisotropic", (1.4, 0.8, 0.8))
# Small angular sets for the default run (accuracy is not tested with them).
SMALL = dict(n_polar=3, n_azimuth=6)


def _bkw_on(grid, t):
    v = grid.nodes()
    s = np.sqrt(np.sum(v * v, axis=1))
    f = bkw_density(s, t)
    eps = 1e-4
    # central difference in t: error eps**2 |f'''| / 6 ~ 1e-10 of f, far below the tested errors
    dfdt = (bkw_density(s, t + eps) - bkw_density(s, t - eps)) / (2.0 * eps)
    return v, s, f, dfdt


def _operator_error(n, **opts):
    """max |Q_c(f) - df/dt| / max |df/dt| for the BKW solution at its first time, and the <c^4> rate error."""
    grid = det.make_grid(n, 10.0)
    op = fs.build_operator(MAXWELL, grid, **opts)
    v, s, f, dfdt = _bkw_on(grid, BKW_FIRST_TIME)
    fs.set_equilibrium(op, det.discrete_target(0, f, v, grid.weight))
    q = fs.collision(f, op)
    rate4 = np.sum(q * s**4) * grid.weight
    exact4 = np.sum(dfdt * s**4) * grid.weight  # = d<c^4>/dt = 5 exp(-t/3) = 0.8 at t0
    return np.max(np.abs(q - dfdt)) / np.max(np.abs(dfdt)), abs(rate4 / exact4 - 1.0)


def test_bkw_operator_converges_spectrally_in_the_grid():
    # Grid study at fixed box (L = 10) and angular set: the error of the
    # collision operator on the exact BKW distribution falls by orders of
    # magnitude per refinement (measured 16: 3e0, 24: 7e-3, 32: 1e-4 with the
    # default angular set; the floor near 1e-4 is the rank-4 radial expansion).
    errs = [_operator_error(n)[0] for n in (16, 24, 32)]
    assert errs[1] < errs[0] / 100.0
    assert errs[2] < errs[1] / 20.0
    assert errs[2] < BKW_OPERATOR_ERROR_32


def test_maxwell_molecules_stress_and_heat_flux_rates_are_exact():
    # Moment equations of Maxwell molecules: d P'_ij/dt = -(p/mu) P'_ij and
    # dq/dt = -(2/3)(p/mu) q for ANY f, so the instantaneous rates of the
    # discrete operator on a two-beam state test them directly.  The remaining
    # error is the spectral error of the operator on this grid (measured
    # ~3e-4 at N = 32 for this state).
    state = make_initial_state("two_beams", beam_separation=1.5, beam_fraction=0.3)
    grid = det.make_grid(32, fs.spectral_half_width(state))
    op = fs.build_operator(MAXWELL, grid)
    v, w = grid.nodes(), grid.weight
    f = det.normalise_initial(initial_density_on_grid(state, v[:, 0], v[:, 1], v[:, 2]), v, w)
    fs.set_equilibrium(op, det.discrete_target(0, f, v, w))
    q = fs.collision(f, op)
    p_over_mu = MAXWELL.pressure_over_viscosity
    assert p_over_mu == pytest.approx(0.5, rel=ROUND_OFF_FORMULA)  # (7-2)(5-2)/30, cross_sections.py
    c2 = np.sum(v * v, axis=1)
    stress = np.sum(f * (v[:, 0] ** 2 - c2 / 3.0)) * w
    dstress = np.sum(q * (v[:, 0] ** 2 - c2 / 3.0)) * w
    heat = np.sum(f * 0.5 * c2 * v[:, 0]) * w
    dheat = np.sum(q * 0.5 * c2 * v[:, 0]) * w
    assert -dstress / stress == pytest.approx(p_over_mu, rel=MAXWELL_RATE_ERROR_32)
    assert -dheat / heat == pytest.approx(2.0 / 3.0 * p_over_mu, rel=MAXWELL_RATE_ERROR_32)


@pytest.mark.parametrize(
    "model",
    [MAXWELL, molecular_model("hard_sphere", ARGON), molecular_model("vss", ARGON)],
    ids=["maxwell", "hard_sphere", "vss_argon"],
)
def test_maxwellian_stays_maxwellian(model):
    # Q_h(f) = Q_s(f) - Q_s(M_d): the start differs from M_d only by the Newton
    # round-off of the discrete Maxwellian (~1e-16 of max f), and 10 steps of a
    # linear operator of norm ~10 keep it there; 1e-13 leaves a factor 100.
    state = make_initial_state("equilibrium")
    grid = det.make_grid(16, 10.0)
    data = fs.run_fast_spectral(model, state, grid, 0.5, 5, 3, EDGES, keep_distribution=True, **SMALL)
    v = grid.nodes()
    m = det.normalise_initial(initial_density_on_grid(state, v[:, 0], v[:, 1], v[:, 2]), v, grid.weight)
    assert np.max(np.abs(data["final_distribution"] - m)) < ROUND_OFF_SUM * m.max()
    assert np.max(np.abs(data["h_fine"])) < ROUND_OFF_SUM


@pytest.fixture(scope="module")
def mild_vss():
    """VSS argon (non-separable kernel, rank > 1) from a mild anisotropy, N = 24, every step recorded."""
    model = molecular_model("vss", ARGON)
    grid = det.make_grid(24, fs.spectral_half_width(MILD))
    op = fs.build_operator(model, grid, **SMALL)
    v, w = grid.nodes(), grid.weight
    f = det.normalise_initial(initial_density_on_grid(MILD, v[:, 0], v[:, 1], v[:, 2]), v, w)
    m_eq = det.discrete_target(0, f, v, w)
    fs.set_equilibrium(op, m_eq)
    mom = np.zeros(det.N_GRID_MOMENTS)
    rec, h, fmin = [], [], []
    for _ in range(48):
        det._grid_moments(f, v, w, mom)
        rec.append(mom.copy())
        h.append(_relative_entropy_grid(f, m_eq, w))
        fmin.append(f.min() / f.max())
        f = fs.ssp_rk3_step(f, 0.5, op)
    return op, np.array(rec), np.array(h), np.array(fmin)


def test_conservation_to_round_off(mild_vss):
    op, rec, _, _ = mild_vss
    assert op.rank > 1
    # The projection leaves C Q = 0 up to the round-off of a sum over 1.4e4
    # nodes (~1e-16 relative each); 48 steps of 3 stages accumulate < 1e-13.
    assert np.max(np.abs(rec[:, 0] - 1.0)) < ROUND_OFF_SUM
    assert np.max(np.abs(rec[:, 1:4])) < ROUND_OFF_SUM
    assert np.max(np.abs(rec[:, 4] - 1.5)) < ROUND_OFF_SUM


def test_h_never_increases(mild_vss):
    _, _, h, _ = mild_vss
    # H-theorem; the bound is the round-off of the sum f ln(f/M_d) w over 1.4e4
    # nodes (terms <= 1e-2, relative error 1e-16 each, ~1e-15 in total).
    assert np.all(np.diff(h) <= H_SUM_ROUND_OFF)
    # it does relax; on this coarse grid and angular set H stops near 3e-4 of its start
    # (spectral error deposited in the tails of the box, see the module notes)
    assert h[-1] < H_FLOOR_COARSE * h[0]


def test_negative_values_are_small(mild_vss):
    # Gibbs oscillations of the truncated Fourier series in the tails; measured
    # -1e-4 of max f on this coarse grid (h ~ 1 sqrt(kT/m)): bar 1e-3.
    _, _, _, fmin = mild_vss
    assert fmin.min() > -1e-3


def test_time_step_order_three():
    # SSP-RK3 (Shu & Osher 1988) is third order: halving dt divides the error
    # by 8; the observed ratio lies within [6, 10] (higher-order terms at the
    # largest step).
    grid = det.make_grid(16, 10.0)
    state = make_initial_state("bkw")
    op = fs.build_operator(MAXWELL, grid, **SMALL)
    finals = {}
    for dt, steps in ((0.4, 3), (0.2, 6), (0.1, 12), (0.025, 48)):
        d = fs.run_fast_spectral(MAXWELL, state, grid, dt, steps, 2, EDGES, operator=op, keep_distribution=True)
        finals[dt] = d["final_distribution"]
    e1 = np.max(np.abs(finals[0.4] - finals[0.025]))
    e2 = np.max(np.abs(finals[0.2] - finals[0.025]))
    e3 = np.max(np.abs(finals[0.1] - finals[0.025]))
    assert 6.0 < e1 / e2 < 10.0
    assert 6.0 < e2 / e3 < 10.0


def test_bad_options_raise():
    grid = det.make_grid(16, 10.0)
    with pytest.raises(ValueError, match=r"^collision_truncation: must lie in \[0.2, 2\]"):
        fs.build_operator(MAXWELL, grid, truncation=3.0)
    with pytest.raises(ValueError, match=r"^n_polar: must be an integer in \[1, 64\]"):
        fs.build_operator(MAXWELL, grid, n_polar=0)


def test_output_dictionary_matches_the_model_equation_path():
    from knudsweep.solver.relaxation.solve import _run_model_equation

    grid = det.make_grid(16, 10.0)
    state = make_initial_state("anisotropic")
    ref = _run_model_equation("bgk", MAXWELL, state, grid, 0.1, 2, 3, EDGES)
    got = fs.run_fast_spectral(MAXWELL, state, grid, 0.1, 2, 3, EDGES, **SMALL)
    assert set(ref) <= set(got)
    for key, val in ref.items():
        if isinstance(val, np.ndarray):
            assert got[key].shape == val.shape, key


def test_binned_h_of_the_start_matches_the_closed_form():
    # The binned H of an anisotropic Gaussian start: p_b factorises per axis into differences of the
    # normal distribution function, H = sum_axes sum_b p_b ln(k p_b) (exact, equiprobable cells of
    # the unit Maxwellian).  On the fast spectral 32^3 grid (h = 0.84) the Gaussian-weighted cell
    # shares give it to 1.3e-3 (measured; the rest is the weight's ramp beyond 3.5 sqrt(T)), where
    # f constant per grid cell is 18 % low.
    from scipy.stats import norm

    edges = equiprobable_edges(8)
    bounds = np.concatenate([[-np.inf], edges, [np.inf]])
    exact = sum(np.sum(p * np.log(8 * p)) for p in (np.diff(norm.cdf(bounds / np.sqrt(t))) for t in (1.8, 0.6, 0.6)))
    state = make_initial_state("anisotropic", (1.8, 0.6, 0.6))
    grid = det.make_grid(32, fs.spectral_half_width(state))
    d = fs.run_fast_spectral(MAXWELL, state, grid, 0.01, 1, 2, edges, **SMALL)
    assert abs(d["h_function"][0, 0] / exact - 1.0) < BINNED_H_START_ERROR


def test_unresolved_points_fail_with_a_reason(monkeypatch):
    from knudsweep.solver.relaxation import solve as solve_mod

    # 12^3 in the wide spectral box cannot carry the start's five moments: failed, not an exception
    r = solve_mod.solve_relaxation(
        method="fast_spectral", molecular_model="hard_sphere", n_velocity=12, t_end=0.5, n_output=2
    )
    assert r.status == "failed" and "Newton did not converge" in r.convergence.reason
    # negative values beyond the bar (here lowered below the measured -7.8e-4 of max f on 16^3)
    monkeypatch.setattr(solve_mod, "MAX_NEGATIVE_FRACTION", 1e-5)
    r = solve_mod.solve_relaxation(
        method="fast_spectral", molecular_model="hard_sphere", n_velocity=16, t_end=1.0, n_output=3
    )
    assert r.status == "failed" and r.convergence.reason.startswith("distribution not resolved: min f")


# ---------------------------------------------------------------- slow checks


@pytest.mark.slow
def test_bkw_on_the_default_grid():
    # Default grid N = 32, box L = 10 (spectral_half_width), default angular and
    # radial sets, dt = 0.2: <c^4>(t) and the distribution (max error over max f) within BKW_DEFAULT_GRID_ERROR.
    state = make_initial_state("bkw")
    grid = det.make_grid(32, fs.spectral_half_width(state))
    n_out, dt, steps = 4, 0.2, 4
    d = fs.run_fast_spectral(MAXWELL, state, grid, dt, steps, n_out, EDGES, keep_distribution=True)
    times = BKW_FIRST_TIME + np.arange(n_out) * dt * steps
    assert np.max(np.abs(d["fourth_moment"][0] / bkw_fourth_moment(times) - 1.0)) < BKW_DEFAULT_GRID_ERROR
    v = grid.nodes()
    exact = bkw_density(np.sqrt(np.sum(v * v, axis=1)), times[-1])
    assert np.max(np.abs(d["final_distribution"] - exact)) < BKW_DEFAULT_GRID_ERROR * exact.max()
    assert np.all(np.diff(d["h_fine"]) < 0.0)


@pytest.mark.slow
def test_bkw_grid_study_to_forty():
    # Spectral convergence continues past the default grid: N = 40 is at least
    # 5x better than N = 32 on the operator (measured 8e-6 vs 1e-4 with a
    # converged angular set).
    e32 = _operator_error(32, n_polar=6, n_azimuth=12, rank_tol=1e-6)[0]
    e40 = _operator_error(40, n_polar=6, n_azimuth=12, rank_tol=1e-6)[0]
    assert e40 < e32 / 5.0


# ------------------------------------------------ slow: against DSMC (same cross-section, same start)
# DSMC (solver/relaxation/dsmc.py) solves the same Boltzmann equation by particles; with
# 16 replicas of 2e5 particles its standard errors are small enough that the comparison resolves
# 0.3 % in the anisotropy time.  The fast spectral runs use N = 48: at the default N = 32 the
# relaxation times agree as well (measured |tau_32 / tau_48 - 1| = 1e-5 for VHS argon), but the
# binned H of this strongly anisotropic start (cold axes sigma = 0.77 against h = 0.84) is off
# by up to 8 DSMC standard errors (1 %) in the first collision time.


def _dsmc_and_spectral(model_name):
    from knudsweep.solver.relaxation import solve_relaxation

    common = dict(molecular_model=model_name, initial_state="anisotropic", t_end=10.0, n_output=41)
    ds = solve_relaxation(method="dsmc", n_particles=200_000, n_replicas=16, seed=7, **common)
    sp = solve_relaxation(method="fast_spectral", n_velocity=48, **common)
    assert ds.status == "converged" and sp.status == "converged", (ds.convergence.reason, sp.convergence.reason)
    return ds, sp


def _late_time_on(window, times, curve, se):
    """1/rate of the exponential fitted to ``curve`` on the DSMC late-fit window with the DSMC
    weights (the definition of knudsweep.solver.relaxation.fitting.late_rate, window fixed)."""
    from knudsweep.solver.relaxation.fitting import _exp_rate

    sel = (times >= window["t_first"] - 1e-9) & (times <= window["t_last"] + 1e-9)
    return 1.0 / _exp_rate(times[sel], curve[sel], se[sel])[0]


@pytest.mark.slow
@pytest.mark.parametrize("model_name", ["hard_sphere", "vhs"])
def test_relaxation_times_and_h_agree_with_dsmc(model_name):
    ds, sp = _dsmc_and_spectral(model_name)
    times = ds.coords["time"].value
    for name in ("anisotropy", "anisotropy_initial", "fourth_moment"):
        tau, u = ds.coefficient(f"{name}_relaxation_time"), ds.coefficient(f"{name}_relaxation_time_uncertainty")
        ref = sp.coefficient(f"{name}_relaxation_time")
        print(f"\n{model_name} {name}: DSMC {tau:.4f} +- {u:.4f}, fast spectral {ref:.4f}")
        # HONEST standard uncertainties (99.7 % for Gaussian errors); the fast spectral times'
        # own error (grid, angles, rank, dt: < 3e-4 relative, measured) is far below u
        assert abs(tau - ref) <= HONEST * u
        assert u <= (0.01 if name != "fourth_moment" else 0.04) * ref  # the check resolves the time
    # Late anisotropy time: window dependent for hard spheres (non-exponential decay), so the
    # deterministic curve is fitted on the DSMC window.
    window = ds.discretization["anisotropy_late_fit"]
    tau, u = (
        ds.coefficient("anisotropy_late_relaxation_time"),
        ds.coefficient("anisotropy_late_relaxation_time_uncertainty"),
    )
    ref = _late_time_on(
        window, times, sp.profiles["anisotropy"].value, ds.profiles["anisotropy_std"].value / math.sqrt(16)
    )
    print(
        f"{model_name} late anisotropy on [{window['t_first']}, {window['t_last']}]: DSMC {tau:.4f} +- {u:.4f}, "
        f"fast spectral {ref:.4f}"
    )
    assert abs(tau - ref) <= HONEST * u
    # Mean DSMC H(t) within its noise band about the deterministic curve at every output time.
    # Band: 4 standard errors of the replica mean (41 correlated outputs; for Gaussian noise a
    # 4-sigma excursion anywhere has probability < 41 x 6e-5 = 0.3 %; measured max 2.5).  The
    # bias-corrected binned H of DSMC has a residual O(B/N^2) bias (h_function.py), ~1e-8 here.
    se = ds.profiles["h_function_std"].value / math.sqrt(16)
    z = (ds.profiles["h_function"].value - sp.profiles["h_function"].value) / se
    print(f"{model_name} H: max |z| = {np.max(np.abs(z)):.2f}")
    assert np.all(np.abs(z) <= 4.0)
    # the anisotropy itself at every output time after the start (exact at t = 0 for both)
    se_a = ds.profiles["anisotropy_std"].value[1:] / math.sqrt(16)
    z_a = (ds.profiles["anisotropy"].value[1:] - sp.profiles["anisotropy"].value[1:]) / se_a
    assert np.all(np.abs(z_a) <= 4.0)
