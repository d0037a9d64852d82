"""Products that cannot be written: a read-only results folder, a full disk while gathering,
drawing or tabulating. Each must end in one line naming the file and the free space (or the
folder), exit code 1, no traceback, and leave nothing half-written under a product's name."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys

import pytest
from fault_helpers import REPO, TINY, finished_tiny, job_counts, smk


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    return finished_tiny(tmp_path_factory, "writes")


def _one_knudsweep_line(text: str) -> str:
    lines = [x for x in text.splitlines() if x.startswith("knudsweep: ")]
    assert len(lines) == 1, text[-3000:]
    assert "Traceback" not in text
    return lines[0]


def test_results_that_cannot_hold_files_stop_the_run_before_any_job(tmp_path):
    workdir = tmp_path / "w"
    workdir.mkdir()
    (workdir / "results").write_text("not a folder\n")  # any folder the run cannot write behaves alike
    r = smk(workdir, TINY, check=False)
    out = r.stdout + r.stderr
    assert r.returncode == 1
    line = _one_knudsweep_line(out)
    assert line.startswith("knudsweep: cannot write to results/") and "nothing was run" in line, line
    assert not job_counts(out)


def _read_only_bind(folder) -> bool:
    """Bind-mount ``folder`` on itself read-only (root in a container that allows it), else False."""
    if os.geteuid() != 0 or shutil.which("mount") is None:
        return False
    first = subprocess.run(["mount", "--bind", str(folder), str(folder)], capture_output=True)
    if first.returncode != 0:
        return False
    second = subprocess.run(["mount", "-o", "remount,bind,ro", str(folder), str(folder)], capture_output=True)
    if second.returncode != 0:
        subprocess.run(["umount", str(folder)], capture_output=True)
        return False
    return True


def test_a_read_only_results_folder_is_one_line_not_a_workflow_error(finished, tmp_path):
    workdir = tmp_path / "w"
    shutil.copytree(finished[0], workdir, symlinks=True)
    os.remove(workdir / finished[1].sweep_file)  # something is left to do
    results = workdir / "results"
    if not _read_only_bind(results):
        pytest.skip("no read-only bind mount here (needs root and mount permission)")
    try:
        r = smk(workdir, TINY, check=False)
    finally:
        subprocess.run(["umount", str(results)], capture_output=True)
    out = r.stdout + r.stderr
    assert r.returncode == 1
    line = _one_knudsweep_line(out)
    assert "cannot write to results/ (Read-only file system)" in line, line


# Each product writer under a file-size limit (RLIMIT_FSIZE): Python ignores SIGXFSZ, so
# the write fails with EFBIG on the real write path, as a full disk fails it with ENOSPC.
_UNDER_LIMIT = """
import resource, sys
from knudsweep.config import load_study
from knudsweep import jobs
study = load_study(sys.argv[2])
resource.setrlimit(resource.RLIMIT_FSIZE, (int(sys.argv[3]), resource.RLIM_INFINITY))
stage = sys.argv[1]
if stage == "gather":
    jobs.run_gather(study, "results/tiny/sweep.nc", 1, None)
elif stage == "tables":
    jobs.run_tables(study, "results/tiny/sweep.nc", "results/tiny/new_tables", None)
else:
    jobs.run_figures(study, "results/tiny/sweep.nc", "results/tiny/new_figures", None, threads=1)
"""


@pytest.mark.parametrize(
    "stage,limit,target",
    [
        ("gather", 8192, "results/tiny/sweep.nc"),
        ("tables", 64, "results/tiny/new_tables/"),
        ("figures", 2048, "results/tiny/new_figures/"),
    ],
)
def test_a_full_disk_while_writing_a_product_is_one_line_with_the_free_space(finished, tmp_path, stage, limit, target):
    workdir = tmp_path / "w"
    shutil.copytree(finished[0], workdir, symlinks=True)
    sweep = workdir / finished[1].sweep_file
    before = sweep.read_bytes()
    if stage == "gather":
        sweep.unlink()
    r = subprocess.run(
        [sys.executable, "-c", _UNDER_LIMIT, stage, str(TINY), str(limit)],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=300,
        env={**os.environ, "PYTHONPATH": str(REPO)},
    )
    assert r.returncode == 1, r.stderr[-3000:]
    line = _one_knudsweep_line(r.stderr)
    assert line.startswith(f"knudsweep: {stage}: could not write {target}"), line
    assert "bytes free in results/tiny" in line and "nothing under that name was changed" in line, line
    if stage == "gather":
        assert not sweep.exists()  # no half-written sweep under its name
    else:
        assert sweep.read_bytes() == before
        out = workdir / target
        assert not any(f.name.endswith(".tmp") for f in out.glob(".*")), list(out.iterdir())
