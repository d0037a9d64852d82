"""Molecular models, BKW formulas and initial states of the relaxation solvers."""

import math

import numpy as np
import pytest
from precision import QUADRATURE, ROUND_OFF, ROUND_OFF_FORMULA, ROUND_OFF_SUM, STANDARD_ERRORS
from scipy import integrate

from knudsweep.solver import gas as gasmod
from knudsweep.solver.relaxation.bkw import (
    BKW_FIRST_TIME,
    bkw_density,
    bkw_even_moment,
    bkw_fourth_moment,
    bkw_k,
    bkw_marginal,
)
from knudsweep.solver.relaxation.cross_sections import MolecularModel, check_model, molecular_model
from knudsweep.solver.relaxation.initial_states import _sample_initial, make_initial_state
from knudsweep.solver.relaxation.rng import replica_states

# Diameters printed to 0.01e-10 m (Bird 1994, Tables A1/A2): +-0.25 % on the smallest (He), so the squared ratio of
# two is known to about 1 %.
TABULATED_DIAMETERS = 0.01


def test_hard_sphere_collision_time_matches_free_path_conversion():
    # check-values.md Sec. 0.1 [derived]: lambda_HS = (8/(5 sqrt(pi))) ell with
    # ell = mu v0 / p, so tau_c = lambda_HS / c_mean = 0.8 mu/p exactly.
    ell_factor = 8.0 / (5.0 * math.sqrt(math.pi))
    tau_over_mu_p = ell_factor * math.sqrt(math.pi) / 2.0  # v0 / c_mean = sqrt(pi)/2
    hs = molecular_model("hard_sphere", gasmod.get_gas("Ar"))
    assert hs.collision_time_factor == pytest.approx(tau_over_mu_p, rel=ROUND_OFF_FORMULA)


def test_maxwell_molecule_p_over_mu_is_one_half():
    # check-values.md Sec. 5.2 [derived]: with collision frequency 1, p/mu = 1/2.
    mm = molecular_model("maxwell", gasmod.get_gas("Ar"))
    assert mm.pressure_over_viscosity == pytest.approx(0.5, rel=ROUND_OFF_FORMULA)


@pytest.mark.parametrize("name", gasmod.known_gases())
def test_vhs_collision_time_equals_gas_module(name):
    # Same quantity two ways: Bird 1994 eq. 4.76 in knudsweep.solver.gas, and
    # (7-2w)(5-2w)/30 mu/p here; algebraically identical, so round-off only.
    g = gasmod.get_gas(name)
    model = molecular_model("vhs", g)
    tau = model.collision_time_factor * gasmod.viscosity(g, 300.0) / 1000.0
    assert tau == pytest.approx(gasmod.mean_collision_time(g, 1000.0, 300.0), rel=ROUND_OFF)


@pytest.mark.parametrize("name", gasmod.known_gases())
def test_vss_factor_matches_tabulated_diameters(name):
    # Bird 1994 Tables A1/A2 (check-values.md 4.2): for equal viscosity
    # d_vss^2 / d_vhs^2 = (alpha+1)(alpha+2)/(6 alpha), which is the ratio of the
    # VSS and VHS collision-time factors.  Diameters are tabulated to 0.01e-10 m,
    # i.e. +-0.25 % on the smallest (He, 2.3e-10 m); squared ratio of two: TABULATED_DIAMETERS.
    g = gasmod.get_gas(name)
    ratio = molecular_model("vhs", g).collision_time_factor / molecular_model("vss", g).collision_time_factor
    assert (g.d_vss / g.d_vhs) ** 2 == pytest.approx(ratio, rel=TABULATED_DIAMETERS)


@pytest.mark.parametrize("omega", [0.5, 0.74, 0.81, 1.0])
def test_equilibrium_collision_frequency_is_one(omega):
    # Monte Carlo over Maxwellian pairs (numpy's generator, independent of the
    # closed form): n <sigma c_r> = A <c_r^(2-2w)> must be 1.  2e6 pairs give a
    # standard error < 1e-3.
    model = MolecularModel("test", omega, 1.0)
    rng = np.random.default_rng(3)
    g = rng.standard_normal((2_000_000, 3)) * math.sqrt(2.0)
    vals = model.sigma_cr_coefficient * np.linalg.norm(g, axis=1) ** model.collision_exponent
    se = vals.std() / math.sqrt(vals.size)
    assert abs(vals.mean() - 1.0) <= STANDARD_ERRORS * se + ROUND_OFF_FORMULA  # se = 0 for Maxwell molecules


def test_model_checks_name_field():
    with pytest.raises(ValueError, match="molecular_model"):
        molecular_model("lennard_jones", gasmod.get_gas("Ar"))
    with pytest.raises(ValueError, match="omega"):
        check_model(MolecularModel("x", 1.2, 1.0))
    with pytest.raises(ValueError, match="alpha_vss"):
        check_model(MolecularModel("x", 0.8, 2.5))


@pytest.mark.parametrize("t", [BKW_FIRST_TIME, 7.0, 12.0])
def test_bkw_moments_by_quadrature(t):
    # check-values.md 5.1 [derived]: integral f = 1, <v^2> = 3,
    # <v^4> = 15[1 - exp(-t/3)], <v^6> = 105 K^2 (3 - 2K).  Quadrature to 1e-10.
    def moment(p):
        return integrate.quad(lambda s: 4 * math.pi * s**2 * s**p * bkw_density(s, t), 0, 40, limit=200)[0]

    assert moment(0) == pytest.approx(1.0, abs=QUADRATURE)
    assert moment(2) == pytest.approx(3.0, abs=QUADRATURE)
    assert moment(4) == pytest.approx(bkw_fourth_moment(t), rel=QUADRATURE)
    assert moment(6) == pytest.approx(bkw_even_moment(3, t), rel=QUADRATURE)
    assert bkw_fourth_moment(BKW_FIRST_TIME) == pytest.approx(12.6, rel=ROUND_OFF)  # check-values 5.1


def test_bkw_density_nonnegative_from_first_time():
    s = np.linspace(0, 10, 2001)
    assert bkw_density(s, BKW_FIRST_TIME).min() >= 0.0
    assert bkw_k(BKW_FIRST_TIME) == pytest.approx(0.6, rel=ROUND_OFF_FORMULA)
    assert bkw_density(s, BKW_FIRST_TIME - 0.1)[0] < 0.0  # negative before t0


@pytest.mark.parametrize("t", [BKW_FIRST_TIME, 8.0])
def test_bkw_marginal_is_integral_of_density(t):
    # the marginal formula (derived in bkw.py) against a 2-D quadrature of f
    for u in (0.0, 0.7, 2.3):
        num = integrate.quad(lambda r: 2 * math.pi * r * bkw_density(math.hypot(u, r), t), 0, 30)[0]
        assert bkw_marginal(u, t) == pytest.approx(num, rel=QUADRATURE)


def _sample(state, n=200_000, seed=5):
    v = np.empty((n, 3))
    _sample_initial(state.code, np.asarray(state.params, dtype=float), v, replica_states(seed, 1)[0].copy())
    return v


def test_bkw_sampler_matches_sixth_moment():
    # <v^4> is not fixed by the normalisation; sampled value against 12.6.
    # per-particle std of v^4 at t0 is ~25, so the standard error with 2e5 is
    # 0.06.
    v = _sample(make_initial_state("bkw"))
    v2 = np.sum(v**2, axis=1)
    assert v.mean(axis=0) == pytest.approx(np.zeros(3), abs=ROUND_OFF)
    assert v2.mean() == pytest.approx(3.0, rel=ROUND_OFF)
    se = (v2**2).std() / math.sqrt(v2.size)
    assert abs((v2**2).mean() - 12.6) < STANDARD_ERRORS * se


def test_anisotropic_and_beam_states_are_exactly_normalised():
    v = _sample(make_initial_state("anisotropic", axis_temperature_ratios=(3, 1, 2)), n=5000)
    assert np.mean(v**2, axis=0) == pytest.approx([1.5, 0.5, 1.0], rel=ROUND_OFF)
    beams = make_initial_state("two_beams", beam_separation=2.5, beam_fraction=0.3)
    v = _sample(beams, n=5000)
    assert np.abs(v.mean(axis=0)).max() < ROUND_OFF_SUM
    assert np.mean(np.sum(v**2, axis=1)) == pytest.approx(3.0, rel=ROUND_OFF)
    s, w, tb = beams.params
    assert tb == pytest.approx(1.0 - w * (1 - w) * s * s / 3.0)


@pytest.mark.parametrize(
    "kwargs, field",
    [
        ({"name": "shock"}, "initial_state"),
        ({"name": "anisotropic", "axis_temperature_ratios": (1, -1, 1)}, "axis_temperature_ratios"),
        ({"name": "two_beams", "beam_fraction": 1.2}, "beam_fraction"),
        ({"name": "two_beams", "beam_separation": 4.0}, "beam_separation"),
        ({"name": "bkw", "bkw_start_time": 1.0}, "bkw_start_time"),
    ],
)
def test_initial_state_errors_name_field(kwargs, field):
    with pytest.raises(ValueError, match=field):
        make_initial_state(**kwargs)
