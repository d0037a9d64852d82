"""Helpers of the fault-injection tests: run Snakemake, kill a process tree, check point files."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import xarray as xr

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "workflow"))
from wf_helpers import DATA, REPO, batch_lines, job_counts, smk, smk_cmd, solved_in, write_study  # noqa: E402,F401

# Hidden files a point folder may hold besides complete point files: the writer's
# temporary (.<name>.<pid>.tmp), the per-point lock and the status sidecar.
HIDDEN_SUFFIXES = (".tmp", ".lock", ".status.json")

# Attributes that record *when* and *how long*, not *what*: they differ between two
# runs of the same point by construction (timestamps and wall-clock times).
# The content checksum covers the wall_time variable too, so it differs with it; the
# variables it covers are compared one by one instead.
VOLATILE_ATTRS = {"history", "job_wall_time_s", "solver_wall_time_s", "content_sha256"}
# Variables that hold wall-clock time (same reason).
VOLATILE_VARS = {"wall_time"}


def descendants(pid: int) -> list[int]:
    """All descendant process ids of ``pid`` (from /proc/<pid>/task/*/children)."""
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        for task in Path(f"/proc/{p}/task").glob("*"):
            try:
                kids = [int(c) for c in (task / "children").read_text().split()]
            except OSError:
                continue
            out += kids
            todo += kids
    return out


def kill_tree(proc: subprocess.Popen) -> None:
    """SIGKILL the workflow's process group and every descendant (jobs may start their own group)."""
    victims = descendants(proc.pid)
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    for pid in victims:
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    proc.wait()


def start_workflow(workdir, study, log_path, *args, cores="2", env=None) -> subprocess.Popen:
    cmd = smk_cmd(workdir, study, "--cores", cores, *args)
    fh = open(log_path, "w")
    full_env = None if env is None else {**os.environ, **env}
    return subprocess.Popen(cmd, stdout=fh, stderr=subprocess.STDOUT, start_new_session=True, env=full_env)


def point_folder_files(workdir: Path) -> tuple[list[Path], list[Path], list[Path]]:
    """(final point files, allowed hidden files, anything else) under results/points."""
    finals, hidden, other = [], [], []
    for f in sorted((workdir / "results" / "points").rglob("*")):
        if f.is_dir():
            continue
        if f.name.startswith(".") and f.name.endswith(HIDDEN_SUFFIXES):
            hidden.append(f)
        elif f.suffix == ".nc" and not f.name.startswith("."):
            finals.append(f)
        else:
            other.append(f)
    return finals, hidden, other


def check_complete(path: Path) -> str:
    """Open a point file fully (every variable loaded); return its status or raise."""
    with xr.open_dataset(path, engine="netcdf4") as ds:
        ds.load()
        status = ds.attrs["status"]
        assert "residual" in ds and "iterations" in ds, path
    assert status in ("converged", "failed"), (path, status)
    return status


def same_point_content(a: Path, b: Path) -> list[str]:
    """Differences between two point files, ignoring VOLATILE_ATTRS / VOLATILE_VARS.

    Every other variable (profiles, coefficients, residual history, iteration
    count) must be bit-identical (NaN equal to NaN) and every other attribute equal.
    """
    diffs = []
    with xr.open_dataset(a, engine="netcdf4") as da, xr.open_dataset(b, engine="netcdf4") as db:
        da, db = da.load(), db.load()
        names_a = set(da.variables) - VOLATILE_VARS
        names_b = set(db.variables) - VOLATILE_VARS
        if names_a != names_b:
            diffs.append(f"variables differ: {sorted(names_a ^ names_b)}")
        for name in sorted(names_a & names_b):
            x, y = da[name].values, db[name].values
            if x.dtype.kind == "f":
                same = x.shape == y.shape and np.array_equal(x, y, equal_nan=True)
            else:
                same = x.shape == y.shape and np.array_equal(x, y)
            if not same or da[name].attrs != db[name].attrs:
                diffs.append(f"variable {name}")
        ka = {k: v for k, v in da.attrs.items() if k not in VOLATILE_ATTRS}
        kb = {k: v for k, v in db.attrs.items() if k not in VOLATILE_ATTRS}
        for k in sorted(set(ka) | set(kb)):
            if str(ka.get(k)) != str(kb.get(k)):
                diffs.append(f"attribute {k}: {ka.get(k)!r} != {kb.get(k)!r}")
    return diffs


def wait_for(predicate, timeout: float, proc: subprocess.Popen | None = None, step: float = 0.05) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if predicate():
            return True
        if proc is not None and proc.poll() is not None:
            return predicate()
        time.sleep(step)
    return False


TINY = DATA / "tiny_study.yaml"


def finished_tiny(tmp_path_factory, name: str):
    """(working folder, plan) of the tiny study run to the end once, for a module's tests to copy."""
    from knudsweep.config import load_study
    from knudsweep.plan import StudyPlan

    workdir = tmp_path_factory.mktemp(name) / "w"
    smk(workdir, TINY)
    return workdir, StudyPlan(load_study(TINY))
