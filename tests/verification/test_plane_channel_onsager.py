"""Plane channel: Onsager reciprocity, wall laws, bad input and failure records.

Reciprocity G_T = Q_P: Sharipov, Physica A 203 (1994) 437 (check-values 1.4,
citation from memory); it holds for every linearised model and for wall laws
obeying reciprocity (Maxwell, Cercignani-Lampis), also with unequal walls.
"""

import numpy as np
import pytest
from precision import DISCRETISATION, ROUND_OFF, ROUND_OFF_FORMULA, ROUND_OFF_SUM

from knudsweep.solver.plane_channel import solve_plane_channel
from knudsweep.solver.plane_channel.boundary import cercignani_lampis_normal_matrix
from knudsweep.solver.quadrature import half_range_hermite
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

# Cercignani-Lampis normal kernel (alpha_n = 0.6) on 24 half-range Hermite nodes: its integral is 1 up to the
# quadrature error of the nodes (measured ~1e-6).
CL_NORMAL_DEFECT = 1e-4

WALLS = {
    "diffuse": (MaxwellWall(1.0), None),
    "maxwell_0.7": (MaxwellWall(0.7), None),
    "unequal_maxwell": (MaxwellWall(1.0), MaxwellWall(0.6)),
    "cl_and_maxwell": (CercignaniLampisWall(0.8, 0.6), MaxwellWall(0.9)),
}


@pytest.mark.parametrize("model", ["bgk", "s_model", "es_bgk"])
@pytest.mark.parametrize("walls", list(WALLS))
@pytest.mark.parametrize("delta", [0.1, 1.0, 10.0])
def test_onsager_reciprocity(model, walls, delta):
    lower, upper = WALLS[walls]
    kw = dict(delta=delta, model=model, lower_wall=lower, upper_wall=upper, accelerate=True, tol=1e-10, n_space=100)
    qp = solve_plane_channel("poiseuille", **kw)
    gt = solve_plane_channel("thermal_creep", **kw)
    assert qp.status == gt.status == "converged"
    # the discrete scheme is reciprocal only up to its truncation error
    # (measured <= 2e-5 with 100 cells).
    assert qp.coefficient("Q_P") == pytest.approx(gt.coefficient("G_T"), rel=DISCRETISATION)


def test_cercignani_lampis_kernel_preserves_constants_and_reduces_to_diffuse():
    c, w = half_range_hermite(24)
    # alpha_n = 1 is the diffuse normal kernel 2 c' exp(-c'^2): rows 2 w_j c_j
    N, defect = cercignani_lampis_normal_matrix(c, w, 1.0)
    assert np.allclose(N, np.tile(2 * w * c, (24, 1)) / (2 * w * c).sum(), rtol=ROUND_OFF_FORMULA)
    assert defect < ROUND_OFF_SUM  # 2 sum w c = 1 exactly for a Gauss rule (degree 1)
    N, defect = cercignani_lampis_normal_matrix(c, w, 0.6)
    # the continuous kernel integrates to 1 (Cercignani & Lampis 1971); the
    # nodes reproduce it to quadrature accuracy (measured ~1e-6 for 24 nodes)
    assert defect < CL_NORMAL_DEFECT
    assert np.allclose(N.sum(axis=1), 1.0, atol=ROUND_OFF_SUM)
    flux = w * c
    assert np.allclose(flux @ N, flux, rtol=ROUND_OFF)  # mass flux conserved at the wall
    assert np.allclose(flux[:, None] * N, (flux[:, None] * N).T, rtol=ROUND_OFF)  # reciprocity


def test_cercignani_lampis_with_full_accommodation_equals_diffuse_maxwell():
    a = solve_plane_channel("poiseuille", delta=1.0, lower_wall=CercignaniLampisWall(1.0, 1.0))
    b = solve_plane_channel("poiseuille", delta=1.0, lower_wall=MaxwellWall(1.0))
    assert a.coefficient("G_P") == pytest.approx(b.coefficient("G_P"), rel=ROUND_OFF)


def test_result_record():
    res = solve_plane_channel(
        "poiseuille", delta=2.0, lower_wall=MaxwellWall(0.8), upper_wall=CercignaniLampisWall(0.7, 0.5)
    )
    assert res.family == "plane_channel" and res.problem == "poiseuille"
    assert res.parameters["alpha_lower"] == 0.8 and res.parameters["alpha_n_upper"] == 0.5
    y = res.coords["y"].value
    assert y.min() > -0.5 and y.max() < 0.5 and res.profiles["velocity"].value.shape == y.shape
    assert res.discretization["n_space"] == y.size
    assert set(res.coefficients) == {"G_P", "Q_P", "G_P_error_estimate", "Q_P_error_estimate"}
    assert res.convergence.iterations == res.convergence.residuals.size


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        (dict(problem="poiseulle", delta=1.0), "problem"),
        (dict(problem="poiseuille", delta=1e5), "delta"),
        (dict(problem="poiseuille", delta=0.0), "delta"),
        (dict(problem="poiseuille", delta=1.0, model="hs"), "model"),
        (dict(problem="poiseuille", delta=1.0, n_space=3), "n_space"),
        (dict(problem="poiseuille", delta=1.0, n_velocity=2.5), "n_velocity"),
        (dict(problem="poiseuille", delta=1.0, tol=0.5), "tol"),
        (dict(problem="poiseuille", delta=1.0, lower_wall="diffuse"), "lower_wall"),
    ],
)
def test_bad_input_names_the_field(kwargs, field):
    problem = kwargs.pop("problem")
    with pytest.raises(ValueError, match=f"^{field}: must be"):
        solve_plane_channel(problem, **kwargs)


def test_non_converged_point_is_recorded_as_failed():
    res = solve_plane_channel("poiseuille", delta=10.0, max_iter=5)
    assert res.status == "failed"
    assert "max_iter" in res.convergence.reason
    assert res.convergence.iterations == 5
