"""The Snakemake workflow end to end on tiny studies (real solver, 2-6 points each).

Each test runs the repository's Snakefile with --directory tmp_path, so nothing
touches the repository's results/.  Profiles are switched off (--profile none
--workflow-profile none) unless the test is about them.
"""

import os
import signal
import subprocess
import time
from pathlib import Path

import pytest
import xarray as xr

from knudsweep.config import load_study
from knudsweep.plan import StudyPlan
from knudsweep.status import study_status
from solver.netcdf_io import read_result

from wf_helpers import DATA, REPO, job_counts, smk, smk_cmd, write_study

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
    assert counts["solve"] == 3 and counts["warm_up"] == 1 and counts["gather"] == 1
    for f in plan.point_files() + plan.table_files() + plan.figure_files() + [plan.sweep_file]:
        assert (workdir / f).is_file(), f
    with xr.open_dataset(workdir / plan.sweep_file, group="plane_channel") as ds:
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
    assert not {"solve", "warm_up", "gather", "tables"} & set(counts), counts
    assert fig.read_bytes() != fig_before
    assert {f: (workdir / f).stat().st_mtime_ns for f in before} == before
    # the `figures` target redraws from sweep.nc alone
    r = smk(workdir, study, "figures", "--forcerun", "plot")
    counts = job_counts(r.stdout + r.stderr)
    assert counts.get("plot") == 1 and "solve" not in counts and "gather" not in counts


def test_status_command_lists_done_points(tiny_run):
    workdir, _ = tiny_run
    exe = Path(os.sys.executable).with_name("knudsweep")
    t0 = time.perf_counter()
    r = subprocess.run([str(exe), "status", str(TINY), "--directory", str(workdir)],
                       capture_output=True, text=True, check=True)
    assert "3 points: 3 done, 0 failed, 0 missing, 0 corrupt" in r.stdout


def test_failing_point_is_recorded_and_others_finish(tmp_path):
    # Without acceleration the source iteration contracts roughly like
    # 1 - O(1/delta^2) at large delta but in a few steps at delta = 0.1 (most
    # molecules fly wall to wall without collisions), so max_iter = 8 fails only
    # the delta = 10 point; the in-job retry is off (factor 1).
    study = write_study(tmp_path / "fail.yaml", plane_channel__delta=[0.1, 10.0],
                        plane_channel__iteration={"max_iter": 8, "accelerate": False,
                                                  "retry_max_iter_factor": 1})
    workdir = tmp_path / "w"
    r = smk(workdir, study)  # exit 0: a failed point does not fail the workflow
    plan = StudyPlan(load_study(study))
    states = {row.pid.rsplit("/", 1)[-1]: row for row in study_status(plan, workdir)}
    assert states["delta=1.0e-01"].state == "converged"
    assert states["delta=1.0e+01"].state == "failed"
    assert states["delta=1.0e+01"].reason
    with xr.open_dataset(workdir / plan.sweep_file, group="plane_channel") as ds:
        failed = ds.sel(delta=10.0).squeeze()
        assert str(failed["status"].values) == "failed" and bool(failed["G_P"].isnull())
    table = (workdir / plan.table_files()[0]).read_text()
    assert "failed" in table
    assert (workdir / plan.figure_files()[0]).is_file()


def test_kill_mid_study_then_resume_runs_only_missing_points(tmp_path):
    study = write_study(tmp_path / "five.yaml", plane_channel__delta=[0.1, 0.3, 1.0, 3.0, 10.0])
    plan = StudyPlan(load_study(study))
    files = [tmp_path / "w" / f for f in plan.point_files()]
    cmd = smk_cmd(tmp_path / "w", study, "--cores", "1")
    log = tmp_path / "killed_run.log"
    with open(log, "w") as fh:
        proc = subprocess.Popen(cmd, stdout=fh, stderr=subprocess.STDOUT, start_new_session=True)
        try:
            deadline = time.monotonic() + 300
            while sum(f.exists() for f in files) < 2 and time.monotonic() < deadline and proc.poll() is None:
                time.sleep(0.05)
            assert proc.poll() is None, f"workflow ended before the kill:\n{log.read_text()[-4000:]}"
        finally:
            try:
                os.killpg(proc.pid, signal.SIGKILL)  # the workflow and its running job, mid-study
            except ProcessLookupError:
                pass
            proc.wait()
    time.sleep(1.0)  # let any orphaned job of the killed run finish its (atomic) write
    done = [f for f in files if f.exists()]
    assert 2 <= len(done) < len(files), "the kill did not land mid-study"
    for f in done:  # every file under its final name is complete
        assert read_result(f).status == "converged"
    mtimes = {f: f.stat().st_mtime_ns for f in done}

    smk(tmp_path / "w", study, "--unlock")
    r = smk(tmp_path / "w", study, "--rerun-incomplete")
    out = r.stdout + r.stderr
    counts = job_counts(out)
    redone = [f for f in done if f.stat().st_mtime_ns != mtimes[f]]
    # Only missing points run, plus at most the one point (--cores 1) whose file was
    # renamed into place in the instant before the kill, while Snakemake still had
    # it marked incomplete: it cannot know that our atomic write had finished.
    assert len(redone) <= 1
    if redone:
        assert "ncomplete" in out
    assert counts["solve"] == len(files) - len(done) + len(redone)
    assert all(f.exists() for f in files)


@pytest.mark.parametrize(
    "change,message",
    [
        ({"plane_channel__delta": [1.0, -0.5]}, "plane_channel.delta[1]: got -0.5; allowed range is (0, 1e+06]"),
        ({"plane_channel__gases": ["Ar", "Unobtainium"]}, "plane_channel.gases[1]: unknown value 'Unobtainium'; allowed values are He"),
        ({"plane_channel__walls": [{"model": "maxwell", "alfa": 0.9}]}, "plane_channel.walls[0].alfa: unknown key; allowed keys here are"),
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
    r = smk(tmp_path / "w", TINY, "--dry-run",
            profiles=("--profile", "none", "--workflow-profile", str(REPO / "config/profiles/default")))
    assert job_counts(r.stdout + r.stderr)["solve"] == 3
