"""The Snakemake workflow end to end on tiny studies (real solver, 2-6 points each).

Each test runs the repository's Snakefile with --directory tmp_path, so nothing
touches the repository's results/.  Profiles are switched off (--profile none
--workflow-profile none) unless the test is about them.
"""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xarray as xr
from wf_helpers import DATA, REPO, batch_lines, job_counts, smk, smk_cmd, solved_in, write_study

from knudsweep.config import load_study
from knudsweep.gather import open_sweep
from knudsweep.jobs import FAULT_HOLD_ENV, FAULT_RAISE_ENV
from knudsweep.plan import StudyPlan
from knudsweep.solver.netcdf_io import read_result
from knudsweep.status import study_status

TINY = DATA / "tiny_study.yaml"


@pytest.fixture(scope="module")
def tiny_run(tmp_path_factory):
    """The tiny study run once; several tests inspect or rerun it."""
    workdir = tmp_path_factory.mktemp("tiny")
    r = smk(workdir, TINY)
    return workdir, r


def test_tiny_study_end_to_end(tiny_run):
    workdir, r = tiny_run
    plan = StudyPlan(load_study(TINY))
    counts = job_counts(r.stdout + r.stderr)
    assert counts["solve_batch"] == 1 and counts["gather"] == 1 and "warm_up" not in counts
    assert batch_lines(r.stderr) == [
        {"key": next(iter(plan.batches)), "points": 3, "solved": 3, "reused": 0, "failed": 0, "crashed": 0}
    ]
    for f in plan.point_files() + plan.batch_files() + plan.table_files() + plan.figure_files() + [plan.sweep_file]:
        assert (workdir / f).is_file(), f
    with open_sweep(workdir / plan.sweep_file, "plane_channel") as ds:
        assert list(ds["status"].values.ravel()) == ["converged"] * 3
        assert ds["G_P"].notnull().all()
    point = read_result(workdir / plan.point_files()[0])
    with xr.open_dataset(workdir / plan.point_files()[0]) as ds:
        for key in ("code_version", "config_hash", "point_id", "job_wall_time_s", "iterations_used"):
            assert key in ds.attrs
    assert point.status == "converged"
    # nothing left to do on a second run
    again = smk(workdir, TINY, "--dry-run")
    assert "Nothing to be done" in again.stdout + again.stderr


def test_figure_only_change_redraws_without_solver(tiny_run, tmp_path):
    workdir, _ = tiny_run
    plan = StudyPlan(load_study(TINY))
    before = {f: (workdir / f).stat().st_mtime_ns for f in plan.point_files() + [plan.sweep_file]}
    fig = workdir / plan.figure_files()[0]
    fig_before = fig.read_bytes()
    study = write_study(tmp_path / "wider.yaml", figures__width=7.5)
    r = smk(workdir, study)
    counts = job_counts(r.stdout + r.stderr)
    assert counts.get("plot") == 1
    assert not {"solve_batch", "gather", "tables"} & set(counts), counts
    assert fig.read_bytes() != fig_before
    assert {f: (workdir / f).stat().st_mtime_ns for f in before} == before
    # the `figures` target redraws from sweep.nc alone
    r = smk(workdir, study, "figures", "--forcerun", "plot")
    counts = job_counts(r.stdout + r.stderr)
    assert counts.get("plot") == 1 and "solve_batch" not in counts and "gather" not in counts


def test_status_command_lists_done_points(tiny_run):
    workdir, _ = tiny_run
    exe = Path(os.sys.executable).with_name("knudsweep")
    r = subprocess.run(
        [str(exe), "status", str(TINY), "--directory", str(workdir)], capture_output=True, text=True, check=True
    )
    assert "3 points: 3 done, 0 failed, 0 missing, 0 corrupt" in r.stdout


def test_failing_point_is_recorded_and_others_finish(tmp_path):
    # Without acceleration the source iteration contracts roughly like
    # 1 - O(1/delta^2) at large delta but in a few steps at delta = 0.1 (most
    # molecules fly wall to wall without collisions), so max_iter = 8 fails only
    # the delta = 10 point; the in-job retry is off (factor 1).
    study = write_study(
        tmp_path / "fail.yaml",
        plane_channel__delta=[0.1, 10.0],
        plane_channel__iteration={"max_iter": 8, "accelerate": False, "retry_max_iter_factor": 1},
    )
    workdir = tmp_path / "w"
    smk(workdir, study)  # exit 0: a failed point does not fail the workflow
    plan = StudyPlan(load_study(study))
    states = {row.pid.rsplit("/", 1)[-1]: row for row in study_status(plan, workdir)}
    assert states["delta=1.0e-01"].state == "converged"
    assert states["delta=1.0e+01"].state == "failed"
    assert states["delta=1.0e+01"].reason
    with open_sweep(workdir / plan.sweep_file, "plane_channel") as ds:
        failed = ds.sel(delta=10.0).squeeze()
        assert str(failed["status"].values) == "failed" and bool(failed["G_P"].isnull())
    table = (workdir / plan.table_files()[0]).read_text()
    assert "failed" in table
    assert (workdir / plan.figure_files()[0]).is_file()


def test_kill_mid_batch_then_resume_solves_only_unfinished_points(tmp_path):
    """SIGKILL in the middle of a batch; the rerun solves only what was not finished, and every
    value is identical to an uninterrupted run (issue: sweeps at solver speed, tests)."""
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "faults"))
    from fault_helpers import same_point_content

    deltas = [0.1, 0.3, 1.0, 3.0, 10.0]
    study = write_study(tmp_path / "five.yaml", plane_channel__delta=deltas)
    plan = StudyPlan(load_study(study))
    assert len(plan.batches) == 1  # all five points in one batch job
    ref = tmp_path / "ref"
    smk(ref, study)
    files = [tmp_path / "w" / f for f in plan.point_files()]
    release = tmp_path / "release"  # never created: the delta = 3 point holds until killed
    cmd = smk_cmd(tmp_path / "w", study, "--cores", "1")
    log = tmp_path / "killed_run.log"
    with open(log, "w") as fh:
        proc = subprocess.Popen(
            cmd,
            stdout=fh,
            stderr=subprocess.STDOUT,
            start_new_session=True,
            env={**os.environ, FAULT_HOLD_ENV: f"{release}@delta=3.0e+00"},
        )
        try:
            deadline = time.monotonic() + 300
            while sum(f.exists() for f in files) < 3 and time.monotonic() < deadline and proc.poll() is None:
                time.sleep(0.05)
            time.sleep(0.5)
            assert proc.poll() is None, f"workflow ended before the kill:\n{log.read_text()[-4000:]}"
        finally:
            os.killpg(proc.pid, signal.SIGKILL)  # the workflow and its batch job, mid-batch
            proc.wait()
    done = [f for f in files if f.exists()]
    assert len(done) == 3, "the kill did not land mid-batch"
    inodes = {f: (f.stat().st_ino, f.stat().st_mtime_ns) for f in done}

    smk(tmp_path / "w", study, "--unlock")
    r = smk(tmp_path / "w", study, "--rerun-incomplete")
    (line,) = batch_lines(r.stderr)
    assert (line["solved"], line["reused"]) == (2, 3)
    assert {f: (f.stat().st_ino, f.stat().st_mtime_ns) for f in done} == inodes  # never rewritten
    for f in files:
        assert not same_point_content(f, ref / f.relative_to(tmp_path / "w")), f
    with (
        open_sweep(tmp_path / "w" / plan.sweep_file, "plane_channel") as a,
        open_sweep(ref / plan.sweep_file, "plane_channel") as b,
    ):
        for name in ("G_P", "Q_P", "G_P_error_estimate", "residual", "iterations", "status"):
            assert a[name].identical(b[name]), name


def test_adding_one_delta_solves_exactly_one_point(tiny_run, tmp_path):
    workdir, _ = tiny_run
    study = write_study(tmp_path / "plus_one.yaml", plane_channel__delta=[0.1, 0.5, 1.0, 10.0])
    r = smk(workdir, study)
    lines = batch_lines(r.stderr)
    assert solved_in(r.stderr) == 1 and sum(b["reused"] for b in lines) == 3, lines


def test_two_studies_sharing_points_compute_each_shared_point_once(tmp_path):
    a = write_study(tmp_path / "a.yaml", study="a", plane_channel__delta=[0.1, 1.0, 10.0])
    b = write_study(tmp_path / "b.yaml", study="b", plane_channel__delta=[1.0, 10.0, 30.0])
    workdir = tmp_path / "w"
    assert solved_in(smk(workdir, a).stderr) == 3
    r = smk(workdir, b)
    assert solved_in(r.stderr) == 1 and sum(x["reused"] for x in batch_lines(r.stderr)) == 2


def test_a_crashing_and_a_failing_point_are_recorded_and_the_batch_is_written(tmp_path):
    # delta = 1 raises in the solver call (a crash, on both attempts); delta = 10 cannot
    # converge in 8 unaccelerated iterations (a failed convergence: a result)
    study = write_study(
        tmp_path / "mixed.yaml",
        plane_channel__delta=[0.1, 1.0, 10.0],
        plane_channel__iteration={"max_iter": 8, "accelerate": False, "retry_max_iter_factor": 1},
    )
    workdir = tmp_path / "w"
    cmd = smk_cmd(workdir, study, "--cores", "2")
    r = subprocess.run(
        cmd, capture_output=True, text=True, timeout=600, env={**os.environ, FAULT_RAISE_ENV: "@delta=1.0e+00"}
    )
    assert r.returncode == 0, r.stderr[-3000:]
    lines = batch_lines(r.stderr)
    # attempt 1 fails the job after writing the other points. Attempt 2 reuses the converged
    # point and solves again only the points that did not succeed: the crashed one and the
    # failed one, whose limits a higher attempt raises (here by a factor of 1, so it fails again)
    assert [(x["solved"], x["reused"], x["crashed"]) for x in lines] == [(2, 0, 1), (1, 1, 1)], lines
    plan = StudyPlan(load_study(study))
    with open_sweep(workdir / plan.sweep_file, "plane_channel") as ds:
        s = {
            float(d): (str(ds["status"].sel(delta=d).item()), str(ds["reason"].sel(delta=d).item()))
            for d in ds["delta"].values
        }
        assert bool(ds["G_P"].sel(delta=0.1).notnull().all())
        assert bool(ds["G_P"].sel(delta=[1.0, 10.0]).isnull().all())
    assert s[0.1] == ("converged", "")
    assert s[1.0][0] == "failed" and "crashed: RuntimeError: fault injection" in s[1.0][1]
    assert s[10.0][0] == "failed" and not s[10.0][1].startswith("crashed")
    files = {float(p.values["delta"]): workdir / plan.point_file(p.pid) for p in plan.points.values()}
    assert files[0.1].exists() and files[10.0].exists() and not files[1.0].exists()
    # the console got one line per batch, not the per-point log lines
    assert "knudsweep.solve" not in r.stderr and "Shell command" not in r.stdout + r.stderr


@pytest.mark.parametrize(
    "change,message",
    [
        ({"plane_channel__delta": [1.0, -0.5]}, "plane_channel.delta[1]: got -0.5; allowed range is (0, 1e+06]"),
        (
            {"plane_channel__gases": ["Ar", "Unobtainium"]},
            "plane_channel.gases[1]: unknown value 'Unobtainium'; allowed values are He",
        ),
        (
            {"plane_channel__walls": [{"model": "maxwell", "alfa": 0.9}]},
            "plane_channel.walls[0].alfa: unknown key; allowed keys here are",
        ),
    ],
)
def test_bad_config_fails_before_any_job(tmp_path, change, message):
    study = write_study(tmp_path / "bad.yaml", **change)
    r = smk(tmp_path / "w", study, check=False)
    assert r.returncode != 0
    lines = [line for line in r.stderr.splitlines() if line.startswith("knudsweep: invalid study config:")]
    assert len(lines) == 1 and message in lines[0]
    assert "Traceback" not in r.stderr
    assert not (tmp_path / "w" / "results").exists()
    assert "rule solve" not in r.stdout + r.stderr


def test_default_profile_is_accepted(tmp_path):
    r = smk(
        tmp_path / "w",
        TINY,
        "--dry-run",
        profiles=("--profile", "none", "--workflow-profile", str(REPO / "config/profiles/default")),
    )
    assert job_counts(r.stdout + r.stderr)["solve_batch"] == 1


def test_knudsweep_run_applies_the_safe_profile(tmp_path):
    exe = Path(os.sys.executable).with_name("knudsweep")
    r = subprocess.run(
        [str(exe), "run", "--dry-run", "--directory", str(tmp_path / "w"), "--configfile", str(TINY)],
        capture_output=True,
        text=True,
        cwd=REPO,
        timeout=300,
    )
    assert r.returncode == 0, r.stderr[-3000:]
    out = r.stdout + r.stderr
    assert "config/profiles/default" in out and job_counts(out)["solve_batch"] == 1
    r = subprocess.run([str(exe), "run", "--dry-run"], capture_output=True, text=True, cwd=tmp_path)
    assert r.returncode == 2 and r.stderr.startswith("knudsweep: error: run: no Snakefile in")
