"""Products that used to be lost or stuck: a truncated or deleted sweep.nc, temporaries of killed
figure jobs. The next plain run must rebuild the sweep (tables and figures with it) and clean up."""

from __future__ import annotations

import os
import shutil
import time

import pytest
from fault_helpers import TINY, batch_lines, finished_tiny, job_counts, smk


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    return finished_tiny(tmp_path_factory, "products")


def _copy(finished, tmp_path):
    workdir, plan = finished
    dest = tmp_path / "w"
    shutil.copytree(workdir, dest, symlinks=True)
    return dest, plan


def test_a_truncated_sweep_is_moved_aside_and_rebuilt_without_solving(finished, tmp_path):
    workdir, plan = _copy(finished, tmp_path)
    sweep = workdir / plan.sweep_file
    sweep.write_bytes(sweep.read_bytes()[:1000])
    r = smk(workdir, TINY)
    out = r.stdout + r.stderr
    assert f"knudsweep: {plan.sweep_file} is invalid (unreadable" in out
    assert "Traceback" not in out
    counts = job_counts(out)
    assert counts.get("gather") == 1 and counts.get("tables") == 1 and "solve_batch" not in counts, counts
    assert not batch_lines(out)
    assert (workdir / f"{plan.sweep_file}.corrupt").exists()
    from knudsweep.gather import sweep_problem

    assert sweep_problem(sweep, plan.families) == ""


def test_a_deleted_sweep_is_rebuilt_although_tables_and_figures_exist(finished, tmp_path):
    workdir, plan = _copy(finished, tmp_path)
    (workdir / plan.sweep_file).unlink()
    r = smk(workdir, TINY)
    assert job_counts(r.stdout + r.stderr).get("gather") == 1
    assert (workdir / plan.sweep_file).is_file()


def test_temporaries_of_killed_figure_and_table_jobs_are_removed(finished, tmp_path):
    workdir, plan = _copy(finished, tmp_path)
    dead_pid = 2**22 + 12345  # above the default pid_max of 4,194,304: never a live process
    leftovers = [
        workdir / plan.study_dir / sub / f".x.{ext}.{dead_pid}.tmp"
        for sub, ext in (("figures", "png"), ("tables", "csv"))
    ]
    old = time.time() - 3600
    for f in leftovers:
        f.write_bytes(b"half a file")
        os.utime(f, (old, old))
    smk(workdir, TINY)
    assert not any(f.exists() for f in leftovers)
