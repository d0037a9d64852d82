"""The solve step: escalation of max_iter, failed points written, provenance attributes."""

import xarray as xr

from knudsweep.config import validate_study
from knudsweep.plan import StudyPlan
from knudsweep.point_job import solve_point, solve_values


def one_point(**iteration):
    study = validate_study(
        {
            "study": "pj",
            "plane_channel": {
                "problems": ["poiseuille"],
                "models": ["bgk"],
                "walls": [{"alpha": 1.0}],
                "delta": [10.0],
                "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1e-6},
                "iteration": iteration,
            },
        }
    )
    (point,) = StudyPlan(study).points.values()
    return study, point


def test_nonconverged_point_is_retried_with_larger_max_iter_then_recorded_failed(tmp_path):
    # 2 unaccelerated iterations cannot reach 1e-6 at delta = 10; nor can 2 * 3 = 6
    study, point = one_point(max_iter=2, accelerate=False, retry_max_iter_factor=3)
    result, tries, last = solve_values("plane_channel", point.values, study["plane_channel"])
    assert (result.status, tries, last) == ("failed", 2, 6)
    assert result.convergence.reason
    out = tmp_path / "p.nc"
    solve_point(
        "plane_channel", point.values, out, section=study["plane_channel"], pid=point.pid, config_hash="h", attempt=2
    )
    with xr.open_dataset(out) as ds:
        assert ds.attrs["status"] == "failed" and ds.attrs["status_reason"]
        assert ds.attrs["snakemake_attempt"] == 2
        # attempt 2 starts at 2 * 3 and retries at 2 * 3 * 3
        assert ds.attrs["max_iter_last_try"] == 18
        assert ds.attrs["point_id"] == point.pid and ds.attrs["config_hash"] == "h"
        assert "G_P" not in ds.data_vars  # never a good-looking number...
        assert "G_P" in ds.attrs["unconverged_last_iterate"]  # ...only a labelled diagnostic


def test_escalation_rescues_a_point_that_needs_more_iterations():
    # with acceleration the solver needs a few tens of iterations; 5 fail, 5 * 10 suffice
    study, point = one_point(max_iter=5, accelerate=True, retry_max_iter_factor=10)
    result, tries, last = solve_values("plane_channel", point.values, study["plane_channel"])
    assert result.status == "converged" and tries == 2 and last == 50
