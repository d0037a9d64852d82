"""Relaxation-time estimates (knudsweep.solver.relaxation.fitting) and the Maxwell-molecule moment equations.

Synthetic signals with known rates check that each estimate recovers its
rate and that the stated uncertainty (statistical plus window part) covers
the actual error.  The moment equations of knudsweep.solver.relaxation.moments are
checked by Monte Carlo over collision pairs, independently of the particle
solver.
"""

import math

import numpy as np
import pytest
from precision import HONEST, ROUND_OFF_FORMULA, STANDARD_ERRORS

from knudsweep.solver.relaxation.fitting import (
    e_folding_time,
    exponential_rate_jackknife,
    fit_decay,
    fit_two_exponentials,
    initial_rate,
    late_rate,
)
from knudsweep.solver.relaxation.moments import maxwell_fourth_moment_deviation, maxwell_rates, vss_mean_sin2_chi

# A minimum of a misfit of an exact model locates the rate to ~sqrt(machine epsilon) = 1.5e-8 (the misfit is
# quadratic in the rate near its minimum); 1e-6 leaves margin.
MINIMUM_LOCATION = 1e-6
# A fitted rate within 4 of its jackknife uncertainties: two-sided 4-sigma, a false failure 6e-5 for a new seed.
FIT_UNCERTAINTIES = 4.0
# Over [t(y < e^-2), t(y < 1e-6)] the fast part of a two-exponential curve still bends ln y: the late rate may sit
# this far from the slow rate (the window part of its uncertainty covers the distance).
LATE_RATE_BIAS = 0.05

T = np.linspace(0.0, 12.0, 49)


def test_two_exponentials_recover_the_maxwell_fourth_moment_rate_noise_free():
    # two-beam start (s = 3, w = 1/2): y0 = -3.375, S0 = 3.375 (moments of the start)
    y = maxwell_fourth_moment_deviation(T, -3.375, 3.375)
    fit = fit_two_exponentials(T, y[None], fast_rate=1.0, min_fraction=1e-4)
    # exact model: a minimum of the misfit locates r to ~sqrt(machine epsilon) = 1.5e-8
    assert fit.rate == pytest.approx(1.0 / 3.0, rel=MINIMUM_LOCATION)
    assert fit.rate_uncertainty < MINIMUM_LOCATION
    # a single exponential on the same signal is biased (the reason for the model):
    # starting at t = 0 its rate is off by more than 5 %
    single = fit_decay(T, y[None], min_fraction=1e-4)
    assert abs(single.rate * 3.0 - 1.0) > 0.05


def test_two_exponentials_noise_and_fast_rate_uncertainty_are_covered():
    # 16 replicas with white noise 0.02 and a fast rate known to 1 %; repeated over
    # 20 seeds, |error| <= 3 u in all but at most one (3-sigma coverage 99.7 %,
    # allowing one for the approximate jackknife)
    misses = 0
    for seed in range(20):
        rng = np.random.default_rng(seed)
        y = maxwell_fourth_moment_deviation(T, -3.375, 3.375)
        curves = y + 0.02 * rng.standard_normal((16, T.size))
        q_jack = 1.0 + 0.01 * rng.standard_normal(16) / math.sqrt(16)
        fit = fit_two_exponentials(T, curves, fast_rate=1.0, fast_rate_jackknife=q_jack)
        assert fit.ok
        misses += abs(fit.rate - 1.0 / 3.0) > HONEST * fit.rate_uncertainty
        assert fit.rate_uncertainty < 0.01  # resolves the rate to 3 %
    assert misses <= 1


def test_single_exponential_with_noise_and_jackknife_of_its_rate():
    rng = np.random.default_rng(9)
    t = np.linspace(0, 8, 41)
    curves = 0.8 * np.exp(-0.37 * t) + 0.01 * rng.standard_normal((16, t.size))
    fit = fit_decay(t, curves)
    assert abs(fit.rate - 0.37) < FIT_UNCERTAINTIES * fit.rate_uncertainty
    assert fit.rate_uncertainty < 0.02
    jack = exponential_rate_jackknife(t, curves, fit)
    assert jack.shape == (16,) and np.all(np.abs(jack - fit.rate) < 0.05)


# A decay whose local rate falls from 0.7994 to 1/1.45 = 0.690 (like the
# hard-sphere anisotropy): y = (exp(-t/1.45) + exp(-t/1.1)) / 2.
def _bent(t):
    return 0.5 * np.exp(-t / 1.45) + 0.5 * np.exp(-t / 1.1)


def test_e_folding_and_initial_rate_of_a_bent_decay():
    t = np.linspace(0, 12, 49)
    y = _bent(t)[None]
    ef = e_folding_time(t, y)
    # exact crossing by bisection on the formula
    lo, hi = 0.5, 3.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if _bent(mid) > math.exp(-1) else (lo, mid)
    actual = abs(ef.time - lo)
    # honest: the interpolation part covers the interpolation error (within 3x, the
    # project's bound for error estimates), and it is small (output spacing 0.25)
    assert actual <= HONEST * ef.time_uncertainty
    assert ef.time_uncertainty < 0.01 * lo
    ini = initial_rate(t, y, ef.time)
    exact_initial = 0.5 / 1.45 + 0.5 / 1.1
    assert abs(ini.rate - exact_initial) <= HONEST * ini.rate_uncertainty
    # the window part is what carries it: a quadratic in ln y is not exact here
    assert ini.rate_window > 0
    # a single exponential over the whole window cannot describe it: its two
    # window variants differ, and the uncertainty says so (> 1 %)
    whole = fit_decay(t, y, min_fraction=1e-4)
    assert whole.rate_uncertainty > 0.01 * whole.rate


def test_late_rate_tends_to_the_slow_rate():
    t = np.linspace(0, 40, 161)
    fit = late_rate(t, _bent(t)[None], min_fraction=1e-6)
    # over [t(y < e^-2), t(y < 1e-6)] the fast part still bends ln y; the window
    # part must cover the distance to the asymptotic rate 1/1.45
    assert abs(fit.rate - 1 / 1.45) <= HONEST * fit.rate_uncertainty
    assert fit.rate == pytest.approx(1 / 1.45, rel=LATE_RATE_BIAS)


def test_fits_report_unresolved_signals():
    flat = np.ones((1, T.size))
    assert not e_folding_time(T, flat).ok
    assert not fit_two_exponentials(T, np.zeros((1, T.size)), 1.0).ok
    assert not fit_two_exponentials(T, np.ones((1, T.size)), math.nan).ok


def _two_beam_sample(rng, n, s=3.0, w=0.3):
    tb = 1.0 - w * (1.0 - w) * s * s / 3.0
    c = rng.standard_normal((n, 3)) * math.sqrt(tb)
    up = rng.random(n) < w
    c[:, 0] += np.where(up, (1.0 - w) * s, -w * s)
    return c


@pytest.mark.parametrize("alpha", [1.0, 1.6])
def test_moment_equations_by_monte_carlo_over_collision_pairs(alpha):
    # d<phi>/dt = (1/2) < dphi >_pairs (collision frequency 1 per molecule, sigma_T g = 1
    # for Maxwell molecules).  Pairs are drawn from the empirical distribution of a
    # sample, so the expectation is the formula evaluated with the sample's moments.
    # VSS scattering: (1 + cos chi)/2 = u**(1/alpha), u uniform (Bird 1994, Sec. 2.7).
    rng = np.random.default_rng(4)
    c = _two_beam_sample(rng, 4000)
    c -= c.mean(axis=0)
    n = len(c)
    p = c.T @ c / n
    sigma = p - np.trace(p) / 3.0 * np.eye(3)
    m4 = np.mean(np.sum(c * c, axis=1) ** 2)
    theta = np.trace(p) / 3.0  # the sample's temperature (not exactly 1): rescale
    n_pairs = 1_000_000
    i = rng.integers(0, len(c), n_pairs)
    j = (i + rng.integers(1, len(c), n_pairs)) % len(c)  # distinct partner; i = j pairs do not change
    a, b = c[i], c[j]
    g_vec = a - b
    g = np.linalg.norm(g_vec, axis=1)
    cos_chi = 2.0 * rng.random(n_pairs) ** (1.0 / alpha) - 1.0
    phi = 2.0 * math.pi * rng.random(n_pairs)
    # rotate g by chi about a random axis perpendicular to it
    e1 = np.cross(g_vec, np.where(np.abs(g_vec[:, :1]) < 0.9 * g[:, None], [[1.0, 0, 0]], [[0, 1.0, 0]]))
    e1 /= np.linalg.norm(e1, axis=1)[:, None]
    e2 = np.cross(g_vec / g[:, None], e1)
    sin_chi = np.sqrt(1.0 - cos_chi**2)
    g_new = cos_chi[:, None] * g_vec + g[:, None] * sin_chi[:, None] * (
        np.cos(phi)[:, None] * e1 + np.sin(phi)[:, None] * e2
    )
    centre = 0.5 * (a + b)
    a2, b2 = centre + 0.5 * g_new, centre - 0.5 * g_new
    q4 = lambda v: np.sum(v * v, axis=1) ** 2  # noqa: E731
    d4 = 0.5 * (q4(a2) + q4(b2) - q4(a) - q4(b))
    dp = 0.5 * (
        np.einsum("ni,nj->nij", a2, a2)
        + np.einsum("ni,nj->nij", b2, b2)
        - np.einsum("ni,nj->nij", a, a)
        - np.einsum("ni,nj->nij", b, b)
    )
    # pairs with i != j: the mean over them is n/(n-1) times the mean over all pairs
    d4 *= (n - 1) / n
    dp *= (n - 1) / n
    s = vss_mean_sin2_chi(alpha)
    r_a, r_4 = maxwell_rates(s)
    # eq. (1) in units where kT/m = theta: (M4 - 15 theta^2) and tr(sigma^2) scale with theta^2
    expect4 = -r_4 * ((m4 - 15.0 * theta**2) + np.trace(sigma @ sigma))
    se4 = d4.std() / math.sqrt(n_pairs)
    # 5 standard errors of the Monte Carlo mean (false failure < 1e-6); the signal is
    # > 20 standard errors, so a wrong coefficient (e.g. r_4 = 1/2) is rejected
    assert abs(d4.mean() - expect4) < STANDARD_ERRORS * se4
    assert abs(expect4) > 20 * se4
    assert abs(-0.5 * (m4 - 15.0 * theta**2) - d4.mean()) > STANDARD_ERRORS * se4  # the tr(sigma^2) term matters
    xx = dp[:, 0, 0]
    assert abs(xx.mean() + r_a * sigma[0, 0]) < STANDARD_ERRORS * xx.std() / math.sqrt(n_pairs)


def test_bkw_obeys_the_fourth_moment_equation():
    # BKW (sigma = 0): <c^4> = 15 [1 - exp(-t/3)] (check-values 5.1) is eq. (3) with S0 = 0
    t = np.linspace(0, 10, 11)
    y0 = -15.0 * math.exp(-6 * math.log(2.5) / 3)
    assert np.allclose(
        maxwell_fourth_moment_deviation(t, y0, 0.0),
        -15.0 * np.exp(-(t + 6 * math.log(2.5)) / 3),
        rtol=ROUND_OFF_FORMULA,
    )
