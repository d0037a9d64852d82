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
from wf_helpers import DATA, REPO, job_counts, smk

from knudsweep.config import load_study
from knudsweep.gather import open_sweep
from knudsweep.plan import StudyPlan


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


def test_tiny_study_through_slurm_as_one_batch_job(tmp_path):
    study = DATA / "tiny_study.yaml"
    r = smk(
        tmp_path,
        study,
        "--slurm-no-account",
        "--slurm-status-command",
        "squeue",
        "--slurm-init-seconds-before-status-checks",
        "1",
        "--latency-wait",
        "5",
        cores="2",
        profiles=("--profile", str(REPO / "config/profiles/slurm"), "--workflow-profile", "none"),
        timeout=900,
    )
    out = r.stdout + r.stderr
    assert r.returncode == 0, out[-3000:]
    # the 3 points fit one batch at the cluster target: one solve_batch job and the
    # gather job went through sbatch; tables and figures ran on the submit host
    assert out.count("has been submitted with SLURM jobid") == 2, out[-3000:]
    counts = job_counts(out)
    assert counts["solve_batch"] == 1 and counts["gather"] == 1
    plan = StudyPlan(load_study(study))
    # the file stores status as CF flags (int8 + flag_meanings); open_sweep decodes them
    ds = open_sweep(tmp_path / plan.sweep_file, "plane_channel")
    assert list(ds["status"].values.ravel()) == ["converged"] * 3
    for f in plan.table_files() + plan.figure_files():
        assert (tmp_path / f).is_file()
