"""Rectangular duct: free-molecular closed form, default-grid accuracy and honesty of the error estimate.

Normalisation (knudsweep.solver.duct): height H is the length scale, width W = A H,
G = (2/A) int int u dy dz per unit width.

Closed form (derived here, as the issue text asks).  With diffuse walls at
delta = 0 the flow velocity is u(P) = (1/(4 sqrt(pi))) int_0^{2 pi} s(P, theta)
dtheta, s the distance from P back to the wall (knudsweep.solver.duct docstring of
free_molecular_flow_rate).  Over the cross-section, int int s dA = int l^2/2 db
over the chords of one direction, and summed over directions

    I(a, b) = int_0^{2 pi} dtheta int int_{a x b} s dA
            = (2/3)(a^3 + b^3 - d^3) + 2 a^2 b ln((b + d)/a) + 2 a b^2 ln((a + d)/b),
    d = sqrt(a^2 + b^2),   G_P = (2/A) I(1, A) / (4 sqrt(pi)).

This is the integral that gives Clausing-type geometric factors of a
rectangle (the mean chord-length moment); the same route for the unit circle
(I = 16 pi / 3, G = 4 int u r dr = (2/pi) int int u dA) gives Knudsen's
8/(3 sqrt(pi)) (check-values 0.3; Knudsen, Ann. Phys. 28 (1909) 75).  The
tests check I against an independent quadrature of the chord integral.
"""

import functools
import math

import numpy as np
import pytest
from estimate_checks import HONEST  # noqa: E402
from precision import ROUND_OFF_FORMULA, ROUND_OFF_SUM
from scipy.integrate import quad

from knudsweep.solver.duct import solve_duct
from knudsweep.solver.limits import free_molecular_flow_rate

ASPECTS = (1.0, 2.0, 4.0, 10.0, 20.0, 50.0)
TARGET = 1e-3  # relative accuracy asked of the default grid (issue 14)
# Two nested scipy.quad integrals (epsrel 1e-12 each, split at their kinks) against the closed form: the quadrature
# tolerances of both levels.
NESTED_QUADRATURE = 1e-9
# The solver module's chord quadrature (scipy.quad, epsrel 1e-12) against the closed form: measured 1.7e-14.
CHORD_QUADRATURE = 1e-11
# The Richardson estimate of the free-molecular trapezoid error is at most this many times the actual error (measured
# 1.2-1.4: the error falls by ~3.5 per halving, the estimate assumes 3).
ESTIMATE_PESSIMISM = 10.0
# G_T = G_P / 2 at delta = 0: the same uncollided moments with weights in ratio 1/2, only rounding; measured 2.2e-16.
UNCOLLIDED_HALF = 1e-10
# Successive differences of the grid study must shrink at least by this factor per step (second-order upwind, first
# order at the walls: measured 2.8-5.4).
MIN_REFINEMENT_RATIO = 2.0


def chord_moment_rectangle(a: float, b: float) -> float:
    """I(a, b) above, closed form."""
    d = math.hypot(a, b)
    return (
        (2.0 / 3.0) * (a**3 + b**3 - d**3)
        + 2.0 * a * a * b * math.log((b + d) / a)
        + 2.0 * a * b * b * math.log((a + d) / b)
    )


def free_molecular_closed_form(aspect: float) -> float:
    return (2.0 / aspect) * chord_moment_rectangle(1.0, aspect) / (4.0 * math.sqrt(math.pi))


def test_closed_form_is_symmetric_and_scales_as_length_cubed():
    # int dtheta int dA s has the units of length^3 and does not care which side is which
    assert chord_moment_rectangle(1.0, 3.0) == pytest.approx(chord_moment_rectangle(3.0, 1.0), rel=ROUND_OFF_FORMULA)
    assert chord_moment_rectangle(2.0, 6.0) == pytest.approx(
        8.0 * chord_moment_rectangle(1.0, 3.0), rel=ROUND_OFF_FORMULA
    )


@pytest.mark.parametrize("aspect", [1.0, 4.0, 50.0])
def test_closed_form_against_direct_quadrature(aspect):
    # An independent route (no chords): I = 4 int_0^{pi/2} dtheta int_0^1 dy
    # int_0^A dz min(y / cos, z / sin) (the four quadrants of directions give
    # equal area integrals by the rectangle's symmetry); the z integral in
    # closed form, the y and theta integrals by scipy.quad (epsrel 1e-12) split
    # at their kinks.  Agreement to the quadrature tolerance.
    def over_z(y, c, s):
        z_m = min(aspect, y * s / c)  # z / s < y / c below z_m
        return 0.5 * z_m**2 / s + (aspect - z_m) * y / c

    def over_area(th):
        c, s = math.cos(th), math.sin(th)
        kink = aspect * c / s
        pts = [kink] if 0.0 < kink < 1.0 else None
        return quad(over_z, 0.0, 1.0, args=(c, s), points=pts, epsabs=0.0, epsrel=1e-12, limit=200)[0]

    total = quad(over_area, 0.0, 0.5 * math.pi, points=[math.atan(aspect)], epsabs=0.0, epsrel=1e-12, limit=200)[0]
    assert 4.0 * total == pytest.approx(chord_moment_rectangle(1.0, aspect), rel=NESTED_QUADRATURE)


@pytest.mark.parametrize("aspect", ASPECTS)
def test_closed_form_matches_chord_quadrature_of_the_solver_module(aspect):
    # knudsweep.solver.limits.free_molecular_flow_rate integrates the chord-length
    # distribution by scipy.quad (epsrel 1e-12): agreement to rounding
    assert free_molecular_flow_rate(aspect) == pytest.approx(free_molecular_closed_form(aspect), rel=CHORD_QUADRATURE)


def test_same_route_gives_knudsen_for_the_tube():
    # unit circle: chords of length l(b) = 2 sqrt(1 - b^2), int l^2/2 db = 8/3
    # per direction, I = 2 pi 8/3; G = (2/pi) I / (4 sqrt(pi)) = 8/(3 sqrt(pi))
    # (check-values 0.3).  Quadrature of the chord integral, not the result; 20 Gauss points integrate the
    # quadratic l^2 exactly, so only the rounding of a short sum remains.
    per_direction = np.polynomial.legendre.leggauss(20)
    b, w = per_direction
    chord_sq_half = np.sum(w * 0.5 * (2.0 * np.sqrt(1.0 - b**2)) ** 2)
    g = (2.0 / math.pi) * (2.0 * math.pi * chord_sq_half) / (4.0 * math.sqrt(math.pi))
    assert g == pytest.approx(8.0 / (3.0 * math.sqrt(math.pi)), rel=ROUND_OFF_SUM)


@functools.cache
def _default_solve(problem, delta, aspect):
    res = solve_duct(problem, delta=delta, aspect_ratio=aspect, tol=1e-10)
    assert res.status == "converged"
    return res


@pytest.mark.parametrize("aspect", ASPECTS)
def test_default_grid_free_molecular_within_target_and_estimate_honest(aspect):
    # The uncollided part is integrated over the angle analytically
    # (knudsweep.solver.duct.uncollided.uncollided_moments), so at delta = 0 only the trapezoid
    # rule over the cross-section remains: measured -0.06 % (A = 1) and
    # -0.03 % (A >= 4) on the default grid, estimate 0.08 / 0.03-0.04 %.
    # Before, the discrete ordinates missed the grazing rays: -0.3 % (A = 1)
    # to -24 % (A = 50).  Bounds: issue 14's 0.1 % and HONEST (estimate_checks).
    res = _default_solve("poiseuille", 0.0, aspect)
    exact = free_molecular_closed_form(aspect)
    actual = abs(res.coefficient("G_P") - exact)
    est = res.coefficient("G_P_error_estimate")
    print(f"\nA={aspect:g}: actual {actual / exact:.2e}, estimate {est / exact:.2e}")
    assert actual <= TARGET * exact
    assert actual <= HONEST * est
    # informative, not only safe: the Richardson estimate of a trapezoid error
    # that falls by ~3.5 per halving, with the assumed ratio 3, is at most a
    # few times pessimistic (measured 1.2-1.4); more would mean it is broken
    assert est <= ESTIMATE_PESSIMISM * actual


def test_default_grid_free_molecular_thermal_creep_is_half():
    # G_T = G_P / 2 at delta = 0 (check-values 0.3), exactly in the uncollided moments
    gp = _default_solve("poiseuille", 0.0, 10.0).coefficient("G_P")
    gt = solve_duct("thermal_creep", delta=0.0, aspect_ratio=10.0, error_estimate=False).coefficient("G_T")
    assert gt == pytest.approx(0.5 * gp, rel=UNCOLLIDED_HALF)


@pytest.mark.slow
@pytest.mark.parametrize(("delta", "aspect"), [(0.01, 20.0), (0.1, 4.0), (1.0, 4.0), (1.0, 20.0), (10.0, 20.0)])
def test_default_grid_estimate_honest_small_intermediate_large_delta(delta, aspect):
    # Convergence study against a finer solve of the same equations (at least
    # 2x the intervals of the default: 97 nodes up to delta = 1, where the
    # default has 25 or 41; 161 at delta = 10, where it has 81; its own error
    # is 1/4 to 1/12 of the default's, ratio 3.5-4 per halving, measured).
    # Measured on the default grid: actual/estimate 0.45-0.8 and actual
    # 0.03-0.09 % for delta <= 1 (estimate 0.04-0.13 %).
    res = _default_solve("poiseuille", delta, aspect)
    n_ref = max(97, 2 * res.discretization["n_y_half"] - 1)
    ref = solve_duct(
        "poiseuille", delta=delta, aspect_ratio=aspect, n_space=n_ref, n_velocity=16, tol=1e-10, error_estimate=False
    )
    actual = abs(res.coefficient("G_P") - ref.coefficient("G_P"))
    est = res.coefficient("G_P_error_estimate")
    print(
        f"\ndelta={delta:g} A={aspect:g}: actual {actual / ref.coefficient('G_P'):.2e}, estimate {est / res.coefficient('G_P'):.2e}"
    )
    assert actual <= HONEST * est
    assert actual <= TARGET * ref.coefficient("G_P")


@pytest.mark.slow
@pytest.mark.parametrize("aspect", [4.0, 20.0])
def test_grid_convergence_delta_0_1_and_1(aspect):
    # Convergence study (issue 14): 13 -> 25 -> 49 nodes across the half height
    # (angles 4 -> 6 -> 8, speeds 9 -> 12 -> 16).  Differences must shrink by
    # at least 2 per step (second-order upwind, first order at the walls:
    # measured 2.8-5.4), and the default (25) must lie within 0.1 % of the
    # Richardson extrapolation of the last two levels (ratio 3.5).
    for delta in (0.1, 1.0):
        g = [
            solve_duct(
                "poiseuille", delta=delta, aspect_ratio=aspect, n_space=n, n_velocity=v, tol=1e-10, error_estimate=False
            ).coefficient("G_P")
            for n, v in ((13, 9), (25, 12), (49, 16))
        ]
        d1, d2 = abs(g[1] - g[0]), abs(g[2] - g[1])
        extrapolated = g[2] + (g[2] - g[1]) / 2.5
        print(f"\ndelta={delta:g} A={aspect:g}: {g}, ratio {d1 / d2:.2f}")
        assert d2 * MIN_REFINEMENT_RATIO <= d1
        assert g[1] == pytest.approx(extrapolated, rel=TARGET)
