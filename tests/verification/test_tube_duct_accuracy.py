"""Discretization error estimates and accuracy targets of the tube and duct solvers.

The estimate (knudsweep.solver.resolution: Richardson, Phil. Trans. R. Soc. A 210
(1911) 307; Roache, Verification and Validation in Computational Science and
Engineering, 1998, Ch. 5) must be honest against a much finer reference solve
of the same equations: actual error <= HONEST x estimate, and an accuracy
target must be met against that reference.  The factor 3 is the brief's
acceptance bound for an a-posteriori estimate (common practice, no source).
"""

import functools
import math

import pytest
from estimate_checks import HONEST, assert_estimate_honest  # noqa: E402
from precision import ROUND_OFF

import knudsweep.solver.tube.boundary as tube_boundary
import knudsweep.solver.tube.grids as tube_grids
from knudsweep.solver.duct import resolution_ladder as duct_ladder
from knudsweep.solver.duct import solve_duct
from knudsweep.solver.tube import resolution_ladder as tube_ladder
from knudsweep.solver.tube import solve_tube
from knudsweep.solver.walls import CercignaniLampisWall

DUCT_A = 1.0  # square duct

# Informative, not only safe: the tube's default grid errs by 1e-7 to 3e-6 relative against tube_reference; an
# estimate above this bound means the estimator is broken.
TUBE_ESTIMATE_CEILING = 3e-5
# The duct's default grid errs by 0.04-0.08 % (measured against 161 nodes); an estimate above 2 % means the estimator
# is broken.
DUCT_ESTIMATE_CEILING = 2e-2
# Absolute floor beside ROUND_OFF for the CL block check: the coefficients are O(1), so a different BLAS summation
# order moves them by a few eps absolute; the error estimate is a difference of two such values.
SUMMATION_ORDER_FLOOR = 1e-15


@functools.cache
def tube_reference(delta):
    """2x the radial intervals, 1.5x the speeds of the default (41, 16): error ~1/11 of the default's."""
    res = solve_tube("poiseuille", delta=delta, n_space=81, n_velocity=24, tol=1e-11, error_estimate=False)
    assert res.status == "converged"
    return res


@functools.cache
def duct_reference(delta):
    """2.4x the intervals, 2x the speeds of the default (41, 12) at delta = 1: agrees with 161 nodes to 5e-5."""
    res = solve_duct(
        "poiseuille", delta=delta, aspect_ratio=DUCT_A, n_space=97, n_velocity=24, tol=1e-10, error_estimate=False
    )
    assert res.status == "converged"
    return res


@pytest.mark.parametrize("delta", [0.1, 10.0])
def test_tube_default_error_estimate_is_honest(delta):
    res = solve_tube("poiseuille", delta=delta, tol=1e-10)
    ref = tube_reference(delta)
    assert res.status == "converged"
    assert_estimate_honest(res, ref, ("G_P", "Q_P"), TUBE_ESTIMATE_CEILING, f"tube delta={delta}")
    d = res.discretization
    assert d["resolutions_solved"] == [[21, 12], [41, 16]]
    assert d["accuracy_target"] is None and d["accuracy_met"] and d["relative_error_estimate"] > 0
    assert "coarser step" in d["error_estimate_source"]


def test_duct_default_error_estimate_is_honest():
    res = solve_duct("poiseuille", delta=1.0, aspect_ratio=DUCT_A, tol=1e-10)
    ref = duct_reference(1.0)
    assert res.status == "converged"
    assert_estimate_honest(res, ref, ("G_P", "Q_P"), DUCT_ESTIMATE_CEILING, "duct delta=1")
    assert res.discretization["resolutions_solved"] == [[21, 9], [41, 12]]


def test_tube_accuracy_target_is_met_and_recorded():
    # reachable below the reference grid (81, 24), so the reference stays independent
    accuracy = 1e-4
    res = solve_tube("poiseuille", delta=10.0, accuracy=accuracy)
    ref = tube_reference(10.0)
    assert res.status == "converged"
    d = res.discretization
    assert d["accuracy_target"] == accuracy and d["accuracy_met"]
    assert d["resolutions_solved"] == [list(lv) for lv in tube_ladder(10.0)[: len(d["resolutions_solved"])]]
    assert d["resolutions_solved"][-1] == [d["n_space"], d["n_velocity"]] and len(d["resolutions_solved"]) >= 2
    assert d["tolerance"] <= accuracy / 100
    for name in ("G_P", "Q_P"):
        actual = abs(res.coefficient(name) / ref.coefficient(name) - 1)
        rel_est = res.coefficient(f"{name}_error_estimate") / abs(res.coefficient(name))
        print(
            f"\ntube target {accuracy:g} {name}: actual {actual:.2e}, estimate {rel_est:.2e}, {d['resolutions_solved']}"
        )
        assert actual <= accuracy and rel_est <= accuracy


def test_duct_accuracy_target_is_met_and_recorded():
    accuracy = 1e-2
    res = solve_duct("poiseuille", delta=1.0, aspect_ratio=DUCT_A, accuracy=accuracy)
    ref = duct_reference(1.0)
    assert res.status == "converged"
    d = res.discretization
    assert d["accuracy_target"] == accuracy and d["accuracy_met"]
    assert d["resolutions_solved"] == [list(lv) for lv in duct_ladder(1.0, DUCT_A)[: len(d["resolutions_solved"])]]
    for name in ("G_P", "Q_P"):
        actual = abs(res.coefficient(name) / ref.coefficient(name) - 1)
        rel_est = res.coefficient(f"{name}_error_estimate") / abs(res.coefficient(name))
        print(
            f"\nduct target {accuracy:g} {name}: actual {actual:.2e}, estimate {rel_est:.2e}, {d['resolutions_solved']}"
        )
        assert actual <= accuracy and rel_est <= accuracy


def test_unreachable_target_is_reported_as_failed(monkeypatch):
    # cap the tube ladder at (11, 9): a 1e-6 target cannot be met there
    monkeypatch.setattr(tube_grids, "MAX_RAY_ENTRIES", 2 * 11 * 14 * (6 * 11 + 13))
    assert tube_ladder(1.0)[-1] == (11, 9)
    res = solve_tube("thermal_creep", delta=1.0, accuracy=1e-6)
    assert res.status == "failed" and "not met" in res.convergence.reason
    d = res.discretization
    assert d["accuracy_met"] is False and d["resolutions_solved"] == [[6, 7], [11, 9]]
    assert d["relative_error_estimate"] > 1e-6


@pytest.mark.parametrize("bad", [0.5, 1e-8, 0.0, -1e-3, "tight", True, math.nan])
def test_bad_accuracy_names_the_field(bad):
    with pytest.raises(ValueError, match="^accuracy: must be"):
        solve_tube("poiseuille", delta=1.0, accuracy=bad)
    with pytest.raises(ValueError, match="^accuracy: must be"):
        solve_duct("poiseuille", delta=1.0, aspect_ratio=2.0, accuracy=bad)


def test_accuracy_and_explicit_grid_are_exclusive():
    with pytest.raises(ValueError, match="^n_space: must be None when accuracy"):
        solve_tube("poiseuille", delta=1.0, accuracy=1e-3, n_space=21)
    with pytest.raises(ValueError, match="^n_velocity: must be None when accuracy"):
        solve_duct("poiseuille", delta=1.0, aspect_ratio=1.0, accuracy=1e-3, n_velocity=8)
    with pytest.raises(ValueError, match="^error_estimate: must be"):
        solve_tube("poiseuille", delta=1.0, error_estimate="yes")
    with pytest.raises(ValueError, match="^error_estimate: must be"):
        solve_duct("poiseuille", delta=1.0, aspect_ratio=1.0, error_estimate=1)


def test_estimate_can_be_switched_off():
    for res in (
        solve_tube("poiseuille", delta=1.0, n_space=11, n_velocity=8, error_estimate=False),
        solve_duct("thermal_creep", delta=1.0, aspect_ratio=1.0, n_space=9, n_velocity=8, error_estimate=False),
    ):
        name = "G_P" if res.problem == "poiseuille" else "G_T"
        assert math.isnan(res.coefficient(f"{name}_error_estimate"))
        assert res.discretization["error_estimate_source"] == "not requested"
        assert "resolutions_solved" not in res.discretization


def test_cl_kernel_built_in_blocks_gives_the_same_result(monkeypatch):
    # the Cercignani-Lampis wall matrix is built in row blocks to bound memory;
    # rows are normalised one by one, so any block size gives the same numbers
    kw = dict(delta=1.0, wall=CercignaniLampisWall(0.7, 0.5), n_space=11, n_velocity=8, tol=1e-10)
    whole = solve_tube("poiseuille", **kw)
    monkeypatch.setattr(tube_boundary, "CL_BLOCK", 1000)
    blocks = solve_tube("poiseuille", **kw)
    for name in ("G_P", "Q_P", "G_P_error_estimate"):
        # the same arithmetic per row; only BLAS summation order may differ
        assert blocks.coefficient(name) == pytest.approx(
            whole.coefficient(name), rel=ROUND_OFF, abs=SUMMATION_ORDER_FLOOR
        )
    assert whole.discretization["resolutions_solved"] == [[6, 6], [11, 8]]
    assert whole.coefficient("G_P_error_estimate") > 0


@pytest.mark.slow
@pytest.mark.parametrize("problem", ["poiseuille", "thermal_creep"])
@pytest.mark.parametrize("delta", [1.0, 100.0])
def test_tube_error_estimate_is_honest_slow(problem, delta):
    res = solve_tube(problem, delta=delta, tol=1e-10)
    ref = solve_tube(problem, delta=delta, n_space=121, n_velocity=24, tol=1e-11, error_estimate=False)
    for name in list(res.coefficients):
        if not name.endswith("_error_estimate"):
            actual = abs(res.coefficient(name) - ref.coefficient(name))
            assert actual <= HONEST * res.coefficient(f"{name}_error_estimate")


@pytest.mark.slow
@pytest.mark.parametrize("delta", [0.1, 10.0])
def test_duct_error_estimate_is_honest_slow(delta):
    res = solve_duct("thermal_creep", delta=delta, aspect_ratio=2.0, tol=1e-10)
    ref = solve_duct(
        "thermal_creep", delta=delta, aspect_ratio=2.0, n_space=97, n_velocity=24, tol=1e-10, error_estimate=False
    )
    for name in ("G_T", "Q_T"):
        actual = abs(res.coefficient(name) - ref.coefficient(name))
        assert actual <= HONEST * res.coefficient(f"{name}_error_estimate")
