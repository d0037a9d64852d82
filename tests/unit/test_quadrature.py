"""Velocity quadratures against closed-form moments and independent integrators.

Closed forms used:
  int_0^inf x^k exp(-x^2) dx = Gamma((k+1)/2) / 2
  int_b^inf x^k exp(-x^2) dx = Gamma((k+1)/2, b^2) / 2  (upper incomplete gamma)
(Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, eqs. 6.1.1 and
6.5.3 after the substitution t = x^2.)
"""

import math

import numpy as np
import pytest
from precision import DISCRETISATION, ROUND_OFF, ROUND_OFF_FORMULA, ROUND_OFF_SUM
from scipy.integrate import quad
from scipy.special import gamma, gammaincc, roots_hermite

from knudsweep.solver.kinetic_models import MODEL_NAMES, get_model
from knudsweep.solver.quadrature import (
    full_range,
    graded_half_range,
    half_range_hermite,
    half_range_rule,
    log_linear_half_range,
    shifted_half_range_hermite,
)

# Inner panels of the graded rule are Gauss-Legendre on exp(-x^2) x^k, 4 points per panel, 2 panels per decade:
# moments measured ~1e-8 off; the bound leaves margin.
GRADED_MOMENT_RTOL = 1e-6
# Composite Gauss-Legendre (4 points) plus the exact outer Gauss rule of the log-linear rule: moments measured < 1e-9
# off; the bound leaves margin.
LOG_LINEAR_MOMENT_RTOL = 1e-7
# Ray integrand at the density of the tube's 16-speed default (2 panels per unit of t): the accuracy asked of it.
TUBE_SPEED_RULE_ERROR = 1e-6


def half_moment(k: int) -> float:
    return gamma((k + 1) / 2) / 2


@pytest.mark.parametrize("n", [1, 2, 3, 8, 16, 24, 32, 48, 64])
def test_half_range_hermite_exact_up_to_degree_2n_minus_1(n):
    x, w = half_range_hermite(n)
    assert x.shape == w.shape == (n,)
    assert np.all(np.diff(x) > 0) and x[0] > 0 and np.all(w > 0)
    rel = [abs((w * x**k).sum() / half_moment(k) - 1) for k in range(2 * n)]
    # all terms are positive, so the sum carries only rounding: a few ulp per
    # node and per power of x; 1e-12 leaves room for n = 64, degree 127.
    assert max(rel) < ROUND_OFF


def test_half_range_hermite_is_not_exact_beyond_degree_2n_minus_1():
    # a Gauss rule cannot integrate degree 2n exactly; this makes the test
    # above able to fail if the rule were, say, a fine composite rule.
    x, w = half_range_hermite(4)
    assert abs((w * x**8).sum() / half_moment(8) - 1) > 1e-6


def test_two_node_rule_against_hand_formula():
    # For n = 1 the node is the mean of the weight: (1/2) / (sqrt(pi)/2) = 1/sqrt(pi).
    x, w = half_range_hermite(1)
    assert x[0] == pytest.approx(1 / math.sqrt(math.pi), rel=ROUND_OFF_FORMULA)
    assert w[0] == pytest.approx(math.sqrt(math.pi) / 2, rel=ROUND_OFF_FORMULA)


@pytest.mark.parametrize("b", [0.3, 1.0, 2.5])
def test_shifted_rule_moments(b):
    n = 12
    x, w = shifted_half_range_hermite(n, b)
    assert x[0] > b
    for k in range(2 * n):
        exact = gamma((k + 1) / 2) * gammaincc((k + 1) / 2, b * b) / 2
        # same rounding argument as above
        assert (w * x**k).sum() == pytest.approx(exact, rel=ROUND_OFF)


def test_full_range_mirror_matches_hermite_moments_and_sign_function():
    x, w = full_range(*half_range_hermite(10))
    xh, wh = roots_hermite(10)  # independent full-range Gauss-Hermite rule (scipy)
    for k in range(0, 19, 2):
        exact = gamma((k + 1) / 2)
        assert (w * x**k).sum() == pytest.approx(exact, rel=ROUND_OFF)
        assert (wh * xh**k).sum() == pytest.approx(exact, rel=ROUND_OFF)
    # odd moments vanish by symmetry
    assert abs((w * x**5).sum()) < ROUND_OFF
    # a function with a jump at 0 (what a wall produces) is still integrated
    # exactly by the mirrored rule, not by the full-range Gauss-Hermite rule.
    f = lambda c: np.where(c > 0, c, 0.0)  # noqa: E731
    exact = half_moment(1)
    assert (w * f(x)).sum() == pytest.approx(exact, rel=ROUND_OFF_SUM)
    assert abs((wh * f(xh)).sum() / exact - 1) > 1e-4


def test_graded_rule_moments_and_grazing_integrand():
    x, w = graded_half_range(12, split=1.0, smallest=1e-6)
    assert x.size == 64  # (1 + 12 graded) panels x 4 points + 12 outer nodes
    assert np.all(np.diff(x) > 0) and x[0] > 0 and np.all(w > 0)
    assert x[0] < 1e-6
    for k in range(8):
        assert (w * x**k).sum() == pytest.approx(half_moment(k), rel=GRADED_MOMENT_RTOL)
    # The integrand of the channel flow rate at small rarefaction parameter d:
    # (1 - exp(-d/x)) / d, which is ~1/d below x ~ d and ~1/x above.
    for d in (1e-4, 1e-3, 1e-2):
        f = lambda c: -np.expm1(-d / c) / d * np.exp(-c * c)  # noqa: E731
        cuts = [0, d, 10 * d, 100 * d, 1000 * d, np.inf]
        exact = sum(
            quad(f, a, b, limit=200, epsabs=0, epsrel=1e-12)[0] for a, b in zip(cuts[:-1], cuts[1:], strict=True)
        )
        approx = (w * -np.expm1(-d / x) / d).sum()
        # measured 4e-5 with these panel settings; DISCRETISATION is the accuracy the
        # solver defaults are chosen for.
        assert approx == pytest.approx(exact, rel=DISCRETISATION)
        # the plain half-range rule of similar size misses it badly
        xh, wh = half_range_hermite(x.size)
        if d <= 1e-3:
            assert abs((wh * -np.expm1(-d / xh) / d).sum() / exact - 1) > 1e-2


def test_log_linear_rule_moments_and_regular_convergence_on_ray_integrands():
    x, w = log_linear_half_range(2.0, 1e-3, split=1.0, slope=1.0, points_per_panel=4, n_outer=8)
    assert np.all(np.diff(x) > 0) and x[0] > 0 and np.all(w > 0)
    for k in range(8):
        assert (w * x**k).sum() == pytest.approx(half_moment(k), rel=LOG_LINEAR_MOMENT_RTOL)
    # The tube/duct speed integrand of a ray of optical length k:
    # int_0^inf c exp(-c^2) exp(-k/c) dc, which varies on the scale c ~ k.
    for k in (1e-3, 1e-2, 0.1, 0.5):
        f = lambda c: c * np.exp(-c * c - k / c)  # noqa: E731
        cuts = [0, k, 10 * k, 1.0, np.inf]
        exact = sum(
            quad(f, a, b, limit=200, epsabs=0, epsrel=1e-13)[0] for a, b in zip(cuts[:-1], cuts[1:], strict=True)
        )
        errors = []
        for per in (1.0, 2.0, 4.0):
            xr, wr = log_linear_half_range(per, 1e-4, split=1.0, slope=1.0, points_per_panel=4, n_outer=16)
            errors.append(abs((wr * xr * np.exp(-k / xr)).sum() / exact - 1))
        # every panel narrows when the density doubles, so the error falls by a
        # large factor per doubling (order 8 for smooth integrands: 256 per
        # doubling asymptotically; 8 is asked, well short of that)
        assert errors[1] < errors[0] / 8 or errors[1] < ROUND_OFF
        assert errors[2] < errors[1] / 8 or errors[2] < ROUND_OFF
        assert errors[1] < TUBE_SPEED_RULE_ERROR


@pytest.mark.parametrize(
    ("call", "field"),
    [
        (lambda: log_linear_half_range(0.0, 1e-3), "panels_per_unit"),
        (lambda: log_linear_half_range(2.0, 2.0), "smallest"),
        (lambda: log_linear_half_range(2.0, 1e-3, slope=-1.0), "slope"),
        (lambda: half_range_hermite(0), "n"),
        (lambda: half_range_hermite(2.5), "n"),
        (lambda: half_range_hermite(1000), "n"),
        (lambda: shifted_half_range_hermite(4, -1.0), "b"),
        (lambda: graded_half_range(8, split=1.0, smallest=2.0), "smallest"),
        (lambda: half_range_rule("legendre", 8), "kind"),
    ],
)
def test_bad_input_names_the_field(call, field):
    with pytest.raises(ValueError, match=f"^{field}: must be"):
        call()


def test_rule_object():
    rule = half_range_rule("graded", 8, split=1.0, smallest=1e-4)
    assert rule.size == rule.nodes.size and rule.kind == "graded"
    assert rule.description["smallest"] == 1e-4


def test_kinetic_model_registry():
    # Prandtl numbers: BGK 1 (Bhatnagar et al. 1954), S-model 2/3 (Shakhov 1968),
    # ES-BGK 2/3 with nu = Pr p/mu (Andries et al. 2000).
    assert MODEL_NAMES == ("bgk", "s_model", "es_bgk")
    assert get_model("bgk").prandtl == 1.0
    assert get_model("s_model").prandtl == pytest.approx(2 / 3)
    es = get_model("es_bgk")
    assert es.collision_factor == pytest.approx(es.prandtl)
    assert es.stress_coefficient == pytest.approx(-0.5)
    with pytest.raises(ValueError, match="^model: must be one of bgk, s_model, es_bgk, got 'hs'"):
        get_model("hs")
