"""The tiny study through a real SLURM (sbatch/squeue) with the repository's slurm profile.

Opt-in (marker `slurm`) and skipped unless a SLURM controller and node answer
here; .ci/start_slurm.sh sets up a one-node cluster (munge, slurmctld, slurmd).
The one-node cluster has no accounting database, so the executor polls with
squeue and submits without an account.
"""

import os
import shutil
import subprocess

import pytest
import xarray as xr

from knudsweep.config import load_study
from knudsweep.plan import StudyPlan
from wf_helpers import DATA, REPO, job_counts, smk


def _slurm_ready() -> str:
    """Empty string if usable, else the reason to skip."""
    for tool in ("sinfo", "sbatch", "squeue"):
        if shutil.which(tool) is None:
            return f"{tool} not found (run .ci/start_slurm.sh as root to set up a one-node SLURM)"
    try:
        r = subprocess.run(["sinfo", "-h", "-N", "-o", "%T"], capture_output=True, text=True, timeout=10)
    except subprocess.TimeoutExpired:
        return "sinfo timed out: slurmctld not answering"
    if r.returncode != 0:
        return f"slurmctld not reachable: {r.stderr.strip()[:200]}"
    states = r.stdout.split()
    if not any(s.startswith(("idle", "mixed", "alloc")) for s in states):
        return f"no usable SLURM node (states: {states or 'none'}); is slurmd running?"
    return ""


_NOT_READY = _slurm_ready()
# .ci/run sets KNUDSWEEP_REQUIRE_SLURM=1 after starting the one-node cluster, so
# in CI a broken SLURM set-up fails this test instead of skipping it silently.
if _NOT_READY and os.environ.get("KNUDSWEEP_REQUIRE_SLURM") == "1":
    pytestmark = [pytest.mark.slurm]
else:
    pytestmark = [pytest.mark.slurm, pytest.mark.skipif(bool(_NOT_READY), reason=_NOT_READY or "ready")]


def test_slurm_is_ready_when_required():
    assert not _NOT_READY, f"KNUDSWEEP_REQUIRE_SLURM=1 but SLURM is not usable: {_NOT_READY}"


def test_tiny_study_through_slurm_with_grouped_points(tmp_path):
    study = DATA / "tiny_study.yaml"
    r = smk(
        tmp_path, study,
        "--slurm-no-account", "--slurm-status-command", "squeue",
        "--slurm-init-seconds-before-status-checks", "1",
        "--latency-wait", "5",
        # 3 points in one group job, 2 at a time on this 2-CPU node
        "--group-components", "solve_batch=3",
        cores="2",
        profiles=("--profile", str(REPO / "config/profiles/slurm"), "--workflow-profile", "none"),
        timeout=900,
    )
    out = r.stdout + r.stderr
    # warm_up and one group of 3 solve jobs were submitted through sbatch
    assert out.count("has been submitted with SLURM jobid") >= 2
    assert "group_solve_batch" in out
    assert job_counts(out)["solve"] == 3
    plan = StudyPlan(load_study(study))
    with xr.open_dataset(tmp_path / plan.sweep_file, group="plane_channel") as ds:
        assert list(ds["status"].values.ravel()) == ["converged"] * 3
    for f in plan.table_files() + plan.figure_files():
        assert (tmp_path / f).is_file()
