"""Discretization error estimates and resolution from an accuracy target.

Generic part (knudsweep.solver.resolution): on a sequence with an exactly known error,
G_k = G + C h_k^p with h_k = 2^-k, Richardson's estimate |G_k - G_{k-1}| /
(2^p - 1) is exact (Richardson, Phil. Trans. R. Soc. A 210 (1911) 307).

Plane channel: the estimate must be honest against a much finer reference
solve (4x the cells, 2x the velocity nodes of the default grid), i.e. the
actual error is at most ~3x the estimate, and an accuracy target must be met.
The factor 3 is the brief's acceptance bound for an a-posteriori estimate
(common practice, no source).
"""

import math

import pytest
from estimate_checks import HONEST, assert_estimate_honest  # noqa: E402
from precision import ROUND_OFF

from knudsweep.solver.plane_channel import grids, solve_plane_channel
from knudsweep.solver.resolution import ResolutionChoice, check_accuracy, choose_resolution, estimate_error

# Richardson on an exact power law G = 2 + 0.7 h^p: the estimate is a difference of values near 2 that differ by
# 1e-2 to 1e-6, so it keeps only ~10-14 of their 16 digits; the observed ratio is a quotient of two such differences.
RICHARDSON_CANCELLATION = 1e-10
# The same at the level the target picks (n = 256: differences of 1e-5 on values near 2).
CHOSEN_LEVEL_CANCELLATION = 1e-9
# Informative, not only safe: the default grids err by ~1e-6 (measured); an estimate above 1e-4 would mean the
# estimator is broken.
DEFAULT_ESTIMATE_CEILING = 1e-4


def power_law(p, exact=2.0, c=0.7):
    """solve(n, v) with error c / n^p: Richardson with ratio 2^p is then exact."""
    calls = []

    def solve(n_space, n_velocity):
        calls.append((n_space, n_velocity))
        return {"G": exact + c / n_space**p}

    return solve, calls


def test_richardson_estimate_is_exact_on_a_second_order_sequence():
    solve, _ = power_law(2)
    errors, ratio = estimate_error(solve(32, 1), solve(16, 1))
    assert ratio == 4.0
    assert errors["G"] == pytest.approx(0.7 / 32**2, rel=ROUND_OFF)


def test_observed_ratio_is_used_when_slower_than_assumed():
    # a first-order sequence (ratio 2) is slower than the assumed 4: the
    # estimate must use the observed ratio and stay exact, not shrink by 3x
    solve, _ = power_law(1)
    errors, ratio = estimate_error(solve(64, 1), solve(32, 1), solve(16, 1))
    assert ratio == pytest.approx(2.0, rel=ROUND_OFF)
    assert errors["G"] == pytest.approx(0.7 / 64, rel=RICHARDSON_CANCELLATION)


def test_faster_observed_ratio_is_clipped_to_the_assumed_one():
    # third order looks like ratio 8; clipped to 4 the estimate is 7/3 too large (safe side)
    solve, _ = power_law(3)
    errors, ratio = estimate_error(solve(64, 1), solve(32, 1), solve(16, 1))
    assert ratio == 4.0
    assert errors["G"] == pytest.approx(0.7 / 64**3 * 7 / 3, rel=RICHARDSON_CANCELLATION)


def test_choose_resolution_stops_at_the_first_level_meeting_the_target():
    solve, calls = power_law(2)
    levels = [(8 * 2**k, 1) for k in range(8)]
    choice = choose_resolution(solve, 1e-5, levels)
    # error 0.7/n^2 relative to ~2: the target 1e-5 needs n^2 >= 0.35e5, n >= 188 -> n = 256
    assert choice.met and choice.n_space == 256
    assert calls == levels[: len(calls)] and len(calls) == 6
    assert choice.error_estimate["G"] == pytest.approx(0.7 / 256**2, rel=CHOSEN_LEVEL_CANCELLATION)
    assert choice.levels == levels[:6]


def test_choose_resolution_reports_an_unreachable_target():
    solve, _ = power_law(2)
    choice = choose_resolution(solve, 1e-6, [(8, 1), (16, 1), (32, 1)])
    assert not choice.met and choice.n_space == 32
    assert "not met" in choice.reason and "n_space=32" in choice.reason
    assert isinstance(choice, ResolutionChoice)


@pytest.mark.parametrize("bad", [0.5, 1e-8, 0.0, -1e-3, "tight", True, math.nan])
def test_bad_accuracy_names_the_field(bad):
    with pytest.raises(ValueError, match="^accuracy: must be"):
        check_accuracy(bad)
    with pytest.raises(ValueError, match="^accuracy: must be"):
        solve_plane_channel("poiseuille", delta=1.0, accuracy=bad)


def test_accuracy_and_explicit_grid_are_exclusive():
    with pytest.raises(ValueError, match="^n_space: must be None when accuracy"):
        solve_plane_channel("poiseuille", delta=1.0, accuracy=1e-3, n_space=40)
    with pytest.raises(ValueError, match="^error_estimate: must be"):
        solve_plane_channel("poiseuille", delta=1.0, error_estimate="yes")


def reference(problem, delta, **kw):
    """Much finer solve: 4x the default cells, 2x the default velocity nodes."""
    res = solve_plane_channel(
        problem,
        delta=delta,
        n_space=4 * grids.default_n_space(delta),
        n_velocity=2 * grids.default_n_velocity(delta),
        tol=1e-11,
        error_estimate=False,
        **kw,
    )
    assert res.status == "converged"
    return res


@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
def test_default_error_estimate_is_honest(delta):
    kw = dict(accelerate=True)
    res = solve_plane_channel("poiseuille", delta=delta, tol=1e-10, **kw)
    ref = reference("poiseuille", delta, **kw)
    assert res.status == "converged"
    assert_estimate_honest(res, ref, ("G_P", "Q_P"), DEFAULT_ESTIMATE_CEILING, f"delta={delta}")
    d = res.discretization
    ns, nv = grids.default_n_space(delta), grids.default_n_velocity(delta)  # requested sizes are recorded
    assert d["resolutions_solved"] == [[ns // 2, grids.coarser_velocity(delta, nv)], [ns, nv]]
    assert d["accuracy_target"] is None and d["relative_error_estimate"] > 0


@pytest.mark.parametrize(
    ("problem", "name"), [("couette", "shear_stress"), ("heat_transfer", "heat_flux"), ("thermal_creep", "G_T")]
)
def test_error_estimate_is_honest_for_the_other_problems(problem, name):
    res = solve_plane_channel(problem, delta=1.0, tol=1e-10, accelerate=True)
    ref = reference(problem, 1.0, accelerate=True)
    actual = abs(res.coefficient(name) - ref.coefficient(name))
    est = res.coefficient(f"{name}_error_estimate")
    print(f"\n{problem} {name}: actual {actual:.2e}, estimate {est:.2e}")
    assert actual <= HONEST * est


@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
@pytest.mark.parametrize("accuracy", [1e-3, 1e-5])
def test_accuracy_target_is_met_and_recorded(delta, accuracy):
    res = solve_plane_channel("poiseuille", delta=delta, accelerate=True, accuracy=accuracy)
    ref = reference("poiseuille", delta, accelerate=True)
    assert res.status == "converged"
    d = res.discretization
    assert d["accuracy_target"] == accuracy and d["accuracy_met"]
    assert d["resolutions_solved"][-1][0] == d["n_space"] and len(d["resolutions_solved"]) >= 2
    assert d["resolutions_solved"] == [
        list(lv) for lv in grids.resolution_ladder(delta)[: len(d["resolutions_solved"])]
    ]
    assert d["tol"] <= accuracy / 100
    for name in ("G_P", "Q_P"):
        actual = abs(res.coefficient(name) / ref.coefficient(name) - 1)
        rel_est = res.coefficient(f"{name}_error_estimate") / abs(res.coefficient(name))
        print(
            f"\ndelta={delta} target {accuracy:g} {name}: actual {actual:.2e}, estimate {rel_est:.2e}, grids {d['resolutions_solved']}"
        )
        assert actual <= accuracy
        assert rel_est <= accuracy
        assert actual <= HONEST * rel_est


def test_loose_target_uses_fewer_cells_than_a_tight_one():
    loose = solve_plane_channel("poiseuille", delta=1.0, accelerate=True, accuracy=1e-2)
    # the graded velocity set meets 1e-5 on the ladder's second level already, so the
    # tight target is the smallest one allowed
    tight = solve_plane_channel("poiseuille", delta=1.0, accelerate=True, accuracy=1e-6)
    assert loose.discretization["n_space"] < tight.discretization["n_space"]


def test_estimate_can_be_switched_off():
    res = solve_plane_channel("poiseuille", delta=1.0, error_estimate=False)
    assert math.isnan(res.coefficient("G_P_error_estimate"))
    assert res.discretization["error_estimate_source"] == "not requested"
    assert "resolutions_solved" not in res.discretization


@pytest.mark.slow
@pytest.mark.parametrize("delta", [0.01, 100.0, 1000.0])
def test_default_error_estimate_is_honest_slow(delta):
    res = solve_plane_channel("poiseuille", delta=delta, tol=1e-10, accelerate=True)
    ref = reference("poiseuille", delta, accelerate=True)
    actual = abs(res.coefficient("G_P") - ref.coefficient("G_P"))
    assert actual <= HONEST * res.coefficient("G_P_error_estimate")
