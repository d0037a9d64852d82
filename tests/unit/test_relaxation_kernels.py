"""Particle kernels: per-collision conservation, scattering law, reproducibility, inputs."""

import math

import numba
import numpy as np
import pytest
from precision import ROUND_OFF, ROUND_OFF_FORMULA, ROUND_OFF_SUM

from knudsweep.solver.netcdf_io import read_result, write_result
from knudsweep.solver.relaxation import solve_relaxation
from knudsweep.solver.relaxation.dsmc import _collide, _scatter
from knudsweep.solver.relaxation.fitting import fit_decay
from knudsweep.solver.relaxation.rng import replica_states

# The azimuth mean of 1e5 scattered vectors: 6 standard errors (two-sided normal tail 2e-9; the seed is fixed).
AZIMUTH_STANDARD_ERRORS = 6.0
# A fitted rate within 4 of its jackknife uncertainties: two-sided 4-sigma, a false failure 6e-5 for a new seed.
FIT_UNCERTAINTIES = 4.0

SMALL = dict(
    method="dsmc",
    gas="Ar",
    pressure=10.0,
    temperature=300.0,
    n_particles=4000,
    n_replicas=3,
    t_end=2.0,
    n_output=5,
    seed=1,
)


@pytest.mark.parametrize("isotropic", [True, False])
def test_collision_conserves_momentum_and_energy_to_round_off(isotropic):
    # exact conservation per collision (momentum and energy are invariants of
    # v_cm +- g'/2 with |g'| = |g|); round-off of a few ulps of the largest
    # term, tolerance 1e-14 relative.
    rng = np.random.default_rng(0)
    for _ in range(2000):
        v = rng.standard_normal((2, 3)) * rng.uniform(0.01, 30.0)
        p0 = v.sum(axis=0)
        e0 = np.sum(v**2)
        u = rng.uniform()
        cos_chi = 2 * u - 1 if isotropic else 2 * u ** (1 / 1.4) - 1
        _collide(v, 0, 1, cos_chi, rng.uniform(0, 2 * math.pi), isotropic)
        assert np.abs(v.sum(axis=0) - p0).max() <= ROUND_OFF_FORMULA * math.sqrt(e0)
        assert abs(np.sum(v**2) - e0) <= ROUND_OFF_FORMULA * e0


def test_vss_rotation_gives_the_drawn_deflection_angle():
    # Bird 1994 eq. 2.22: g' keeps |g| and makes angle chi with g, for any g
    # (including g along x, the special branch).
    rng = np.random.default_rng(1)
    for k in range(500):
        g = rng.standard_normal(3) if k else np.array([1.3, 0.0, 0.0])
        cos_chi = rng.uniform(-1, 1)
        new = np.array(_scatter(g[0], g[1], g[2], cos_chi, rng.uniform(0, 2 * math.pi), False))
        assert np.linalg.norm(new) == pytest.approx(np.linalg.norm(g), rel=ROUND_OFF_SUM)
        assert new @ g / (g @ g) == pytest.approx(cos_chi, abs=ROUND_OFF)


def test_vss_azimuth_is_uniform():
    # mean of g' over the azimuth is cos(chi) g: the perpendicular part averages
    # out.  10^5 draws: standard error ~ |g| sin(chi)/sqrt(2e5).
    rng = np.random.default_rng(2)
    g = np.array([0.3, -1.1, 0.7])
    cos_chi = 0.2
    eps = rng.uniform(0, 2 * math.pi, 100_000)
    new = np.array([_scatter(g[0], g[1], g[2], cos_chi, e, False) for e in eps])
    se = np.linalg.norm(g) / math.sqrt(2 * eps.size)
    assert np.abs(new.mean(axis=0) - cos_chi * g).max() < AZIMUTH_STANDARD_ERRORS * se


def test_replica_states_are_distinct_and_reproducible():
    a = replica_states(42, 16)
    assert np.array_equal(a, replica_states(42, 16))
    assert len({tuple(r) for r in a}) == 16
    assert not np.array_equal(a, replica_states(43, 16))


def test_same_seed_same_result_for_any_thread_count():
    original = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = solve_relaxation(**SMALL)
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = solve_relaxation(**SMALL)
    finally:
        numba.set_num_threads(original)
    for name in ("temperature_xx", "h_function", "collisions_per_particle"):
        assert np.array_equal(one.profiles[name].value, two.profiles[name].value)
    other = solve_relaxation(**{**SMALL, "seed": 2})
    assert not np.array_equal(one.profiles["temperature_xx"].value, other.profiles["temperature_xx"].value)


def test_result_round_trip_and_units(tmp_path):
    res = solve_relaxation(**SMALL)
    assert res.status == "converged"
    assert res.family == "relaxation" and res.problem == "anisotropic"
    back = read_result(write_result(res, tmp_path / "p.nc"))
    assert back.profiles["temperature_xx"].units == "K"
    assert np.allclose(back.profiles["h_function"].value, res.profiles["h_function"].value)
    assert back.coefficient("mean_collision_time_s") == pytest.approx(res.coefficient("mean_collision_time_s"))
    # time_s = time * tau_c
    assert np.allclose(
        res.profiles["time_s"].value, res.coords["time"].value * res.coefficient("mean_collision_time_s")
    )


def test_too_few_particles_is_a_failed_point(tmp_path):
    res = solve_relaxation(**{**SMALL, "n_particles": 500})  # < 5 per cell of 8^3 cells
    assert res.status == "failed"
    assert "n_particles=500" in res.convergence.reason
    back = read_result(write_result(res, tmp_path / "f.nc"))
    assert back.status == "failed" and np.all(np.isnan(back.profiles["h_function"].value))


@pytest.mark.parametrize(
    "override, field",
    [
        ({"method": "lattice"}, "method"),
        ({"n_particles": 0}, "n_particles"),
        ({"n_particles": 1.5}, "n_particles"),
        ({"n_replicas": 0}, "n_replicas"),
        ({"t_end": -1.0}, "t_end"),
        ({"n_output": 1}, "n_output"),
        ({"pressure": -5.0}, "pressure"),
        ({"temperature": 0.0}, "temperature"),
        ({"molecular_model": "soft"}, "molecular_model"),
        ({"h_bins_per_axis": 1}, "h_bins_per_axis"),
        ({"time_step": 2.0}, "time_step"),
        ({"seed": -1}, "seed"),
        ({"gas": "Unobtainium"}, "gas"),
    ],
)
def test_bad_input_names_field(override, field):
    with pytest.raises(ValueError, match=field):
        solve_relaxation(**{**SMALL, **override})


def test_fit_recovers_known_rate_from_noisy_replicas():
    # synthetic y = 0.8 exp(-0.37 t) + white noise 0.01 in 16 replicas: the
    # jackknife error is honest, so the fitted rate lies within 4 of them
    # (two-sided 4-sigma, chance of a false failure 6e-5).
    rng = np.random.default_rng(9)
    t = np.linspace(0, 8, 41)
    curves = 0.8 * np.exp(-0.37 * t) + 0.01 * rng.standard_normal((16, t.size))
    fit = fit_decay(t, curves)
    assert abs(fit.rate - 0.37) < FIT_UNCERTAINTIES * fit.rate_uncertainty
    assert fit.rate_uncertainty < 0.02  # the fit actually resolves the rate
    exact = fit_decay(t, 2.0 * np.exp(-1.25 * t)[None, :], min_fraction=1e-4)
    assert exact.rate == pytest.approx(1.25, rel=ROUND_OFF)
