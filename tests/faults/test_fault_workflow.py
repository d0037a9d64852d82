"""Fault injection on the whole workflow: kills, a second workflow, corrupt files, a full disk.

All runs use the real Snakefile and solver on a tiny plane-channel study
(n_space 16, n_velocity 8; a point solves in well under a second, the job
around it -- a Python process importing numba -- costs about two seconds).

What "identical to an uninterrupted run" means here (``same_point_content``):
every variable of a point file (profiles, coefficients, residual history,
iteration count) is bit-identical, and every attribute is equal, except the
attributes ``history``, ``job_wall_time_s``, ``solver_wall_time_s`` and the
variable ``wall_time``, which record when and how long the computation ran, and
the checksum ``content_sha256``, which covers ``wall_time``.
HDF5 files are not byte-reproducible (they embed those values and allocation
order), so byte equality is not the right test; equality of everything that
is not a clock reading is.
"""

from __future__ import annotations

import random
import shutil
import subprocess
import time
from pathlib import Path

import pytest
import xarray as xr
from fault_helpers import (
    batch_lines,
    check_complete,
    job_counts,
    kill_tree,
    point_folder_files,
    same_point_content,
    smk,
    smk_cmd,
    solved_in,
    start_workflow,
    wait_for,
    write_study,
)

from knudsweep.cli import main
from knudsweep.config import load_study
from knudsweep.gather import open_sweep
from knudsweep.jobs import FAULT_HOLD_ENV, FAULT_WRITE_LIMIT_ENV
from knudsweep.plan import StudyPlan
from knudsweep.solver.netcdf_io import read_result, write_result
from knudsweep.status import study_status

DELTAS = [0.1, 0.3, 1.0, 10.0]
SEED = 20261201


def report(capsys, text):
    with capsys.disabled():
        print(f"\n[faults] {text}")


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """One uninterrupted run; while it runs, the same study and a study sharing two points start in its directory."""
    base = tmp_path_factory.mktemp("reference")
    study = write_study(base / "faults.yaml", study="faults", plane_channel__delta=DELTAS)
    # A second study that shares two of the points (same grid, delta subset).
    other = write_study(base / "other.yaml", study="other", plane_channel__delta=[0.1, 1.0])
    workdir = base / "w"
    t0 = time.monotonic()
    # the delta=10 point waits for the release file before solving, so the
    # reference surely still runs (and holds its locks) while the intruders try
    release = base / "release"
    proc = start_workflow(workdir, study, base / "reference.log", env={FAULT_HOLD_ENV: f"{release}@delta=1.0e+01"})
    try:
        running = wait_for(lambda: any((workdir / "logs" / "faults" / "batches").rglob("*.log")), 240, proc)
        assert running and proc.poll() is None, (base / "reference.log").read_text()[-3000:]
        # Both run as the default workflow profile does (rerun-incomplete:
        # true), so that the running points' "incomplete" marks do not stop
        # them before the lock check (the held point is always running here).
        intruders = {
            "same": subprocess.Popen(
                smk_cmd(workdir, study, "--cores", "2", "--rerun-incomplete"),
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            ),
            "shared": subprocess.Popen(
                smk_cmd(workdir, other, "--cores", "2", "--rerun-incomplete"),
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
            ),
        }
        results = {}
        for key, p in intruders.items():
            out, err = p.communicate(timeout=120)
            results[key] = subprocess.CompletedProcess(p.args, p.returncode, out, err)
        same, shared = results["same"], results["shared"]
        still_running = proc.poll() is None
        release.touch()
        proc.wait(timeout=600)
    finally:
        if proc.poll() is None:
            kill_tree(proc)
    elapsed = time.monotonic() - t0
    assert proc.returncode == 0, (base / "reference.log").read_text()[-4000:]
    assert still_running, "the reference finished before both intruders had tried to start"
    return {
        "study": study,
        "workdir": workdir,
        "elapsed": elapsed,
        "same": same,
        "shared": shared,
        "plan": StudyPlan(load_study(study)),
    }


def test_second_workflow_on_the_same_directory_refuses_and_damages_nothing(reference):
    plan, workdir = reference["plan"], reference["workdir"]
    # the same study again: Snakemake's lock on its outputs refuses it before any job
    r = reference["same"]
    out = r.stdout + r.stderr
    assert r.returncode != 0, f"a second workflow of the same study was allowed to run:\n{out[-3000:]}"
    assert "LockException" in out or "cannot be locked" in out, out[-3000:]
    assert "rule solve_batch" not in out
    # another study that shares two points has other outputs, so it may run beside it: the point
    # files are a shared cache under per-point locks, so each shared point is solved by exactly
    # one of the two workflows (usually the reference, which started first) and reused by the other
    r = reference["shared"]
    out = r.stdout + r.stderr
    assert r.returncode == 0, out[-3000:]
    lines = batch_lines(out)
    assert len(lines) == 1 and lines[0]["solved"] + lines[0]["reused"] == 2, lines
    for f in plan.point_files():
        assert check_complete(workdir / f) == "converged"
    assert (workdir / plan.sweep_file).is_file()


def test_five_random_sigkills_then_resume_lose_nothing(reference, tmp_path, capsys):
    study, plan, ref = reference["study"], reference["plan"], reference["workdir"]
    workdir = tmp_path / "w"
    rng = random.Random(SEED)
    # Kill moments: uniform in (0.15, 1) x 30 % of an uninterrupted run, scaled by
    # the share of work left (missing points + 1 for gather/tables/figures), so
    # each killed run makes only part of the progress and all five kills land
    # mid-study, from Snakemake's start-up to the figures.
    kills, finished_early, seen_tmp = 0, 0, 0
    moments = []
    total = len(plan.points)
    for attempt in range(5):
        if attempt:
            smk(workdir, study, "--unlock")
        missing = sum(not (workdir / f).exists() for f in plan.point_files())
        at = rng.uniform(0.15, 1.0) * 0.3 * reference["elapsed"] * (missing + 1) / (total + 1)
        proc = start_workflow(workdir, study, tmp_path / f"run{attempt}.log", "--rerun-incomplete")
        try:
            proc.wait(timeout=at)
        except subprocess.TimeoutExpired:
            pass
        if proc.poll() is None:
            kill_tree(proc)
            kills += 1
            moments.append(round(at, 2))
        else:
            finished_early += 1
        # Invariants right after the kill: every file under a final name is complete.
        finals, hidden, other = point_folder_files(workdir)
        assert not other, other
        for f in finals:
            check_complete(f)
        seen_tmp += sum(f.name.endswith(".tmp") for f in hidden)
        sweep = workdir / plan.sweep_file
        if sweep.exists():
            with open_sweep(sweep, "plane_channel") as ds:
                ds.load()
    smk(workdir, study, "--unlock")
    smk(workdir, study, "--rerun-incomplete")

    finals, hidden, other = point_folder_files(workdir)
    expected = sorted(workdir / f for f in plan.point_files())
    assert finals == expected, "every point present exactly once, nothing else"
    assert not other
    lost = 0
    for f in plan.point_files():
        if check_complete(workdir / f) != "converged":
            lost += 1
        diffs = same_point_content(workdir / f, ref / f)
        assert not diffs, (f, diffs)
    with (
        open_sweep(workdir / plan.sweep_file, "plane_channel") as a,
        open_sweep(ref / plan.sweep_file, "plane_channel") as b,
    ):
        for name in ("G_P", "Q_P", "status", "iterations", "code_version"):
            assert (a[name].values == b[name].values).all(), name
    for table in plan.table_files():
        assert (workdir / table).read_bytes() == (ref / table).read_bytes(), table
    report(
        capsys,
        f"kill/resume: {kills} SIGKILLs survived at {moments} s "
        f"({finished_early} runs ended before their kill), {lost} points lost, "
        f"{seen_tmp} writer temporaries seen after kills (hidden, never read)",
    )
    assert kills == 5 and lost == 0


def _copy(reference, dest: Path) -> Path:
    shutil.copytree(reference["workdir"], dest, symlinks=True)
    return dest


def _older(path: Path, version: str = "0.0.1") -> None:
    """Rewrite a point file as if an older solver version had computed it."""
    result = read_result(path)
    with xr.open_dataset(path) as ds:
        attrs = dict(ds.attrs)
    provenance = {k: v for k, v in attrs.items() if k in ("config_hash", "point_id", "point_values")}
    provenance["code_version"] = version
    write_result(result, path, provenance)


def test_corrupt_and_outdated_points_are_detected_and_only_they_recomputed(reference, tmp_path, capsys):
    study, plan = reference["study"], reference["plan"]
    workdir = _copy(reference, tmp_path / "w")
    rng = random.Random(SEED + 1)
    files = [workdir / f for f in plan.point_files()]
    victims = rng.sample(files, 4)
    corrupt, outdated = victims[:3], victims[3]
    for i, f in enumerate(corrupt):
        data = f.read_bytes()
        if i == 0:
            f.write_bytes(data[: len(data) // 2])  # truncated
        elif i == 1:
            f.write_bytes(rng.randbytes(len(data)))  # random bytes, same size
        else:
            f.write_bytes(data[:8] + rng.randbytes(len(data) - 8))  # valid magic, garbage body
    _older(outdated)
    before = {f: f.stat().st_mtime_ns for f in files if f not in victims}

    # knudsweep status sees all four before any run
    rows = {r.path: r for r in study_status(plan, workdir)}
    assert {p for p, r in rows.items() if r.state == "corrupt"} == {str(f) for f in corrupt}
    assert [p for p, r in rows.items() if r.outdated] == [str(outdated)]
    assert main(["status", str(study), "--directory", str(workdir), "--requeue-outdated"]) == 0
    out = capsys.readouterr().out
    assert f"removed {outdated} (older solver version" in out
    assert not outdated.exists() and all(f.exists() for f in corrupt)

    assert not (workdir / plan.sweep_file).exists()  # removed with the requeue: it must be rebuilt
    assert not any((workdir / f).exists() for f in plan.batch_files())  # the batch holding the point too
    # one run: the batch job checks every point file of its batch, moves the corrupt ones aside
    # (one log line each, by path) and solves them with the outdated one; the others are reused
    r = smk(workdir, study)
    out = r.stdout + r.stderr
    assert job_counts(out).get("solve_batch") == 1
    assert solved_in(out) == len(victims), batch_lines(out)
    batch_log = "".join(p.read_text() for p in (workdir / "logs" / plan.name / "batches").rglob("*.log"))
    detected = [f for f in corrupt if f"invalid point file {f.relative_to(workdir)} (unreadable" in batch_log]
    assert all(Path(f"{f}.corrupt").exists() for f in corrupt)
    # provenance: the recomputed point carries the current solver version
    with xr.open_dataset(outdated) as ds:
        assert ds.attrs["code_version"] == _version()
    # nothing left to do
    r = smk(workdir, study)
    assert not batch_lines(r.stdout + r.stderr)
    with open_sweep(workdir / plan.sweep_file, "plane_channel") as ds:
        assert (ds["status"] == "converged").all()
        # provenance: every gathered point names the solver version that computed it
        assert set(ds["code_version"].values.ravel()) == {_version()}
    for f in files:
        assert check_complete(f) == "converged"
        assert not same_point_content(f, reference["workdir"] / f.relative_to(workdir))
    assert {f: f.stat().st_mtime_ns for f in before} == before  # the others were not touched
    report(
        capsys,
        f"corruption: {len(corrupt)} corrupt files injected, {len(detected)} detected "
        f"by the batch job by path, {len(corrupt)} recomputed with the 1 outdated point in one run",
    )
    assert len(detected) == len(corrupt)


def _version():
    from knudsweep.solver import __version__

    return __version__


def _mount_tmpfs(folder: Path, size: str) -> bool:
    folder.mkdir(parents=True, exist_ok=True)
    try:
        r = subprocess.run(
            ["mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(folder)],
            capture_output=True,
            text=True,
            timeout=30,
        )
    except (OSError, subprocess.TimeoutExpired):
        return False
    return r.returncode == 0


def test_full_disk_fails_only_that_point_cleanly_and_it_is_retried(reference, tmp_path, capsys, monkeypatch):
    """Two write faults in one run: a real ENOSPC on a 4 KiB tmpfs mounted on one point's
    folder (skipped where mount is not allowed), and an injected file-size limit
    (RLIMIT_FSIZE via KNUDSWEEP_FAULT_WRITE_LIMIT) on another point: its write fails
    with EFBIG on the same code path."""
    workdir = _copy(reference, tmp_path / "w")
    ref_plan = reference["plan"]
    kept = {f: (workdir / f).stat().st_mtime_ns for f in ref_plan.point_files()}
    study = write_study(
        tmp_path / "disk.yaml",
        study="disk",
        plane_channel__delta=[1.0],
        plane_channel__models=["bgk", "s_model"],
        plane_channel__walls=[{"model": "maxwell", "alpha": 1.0}, {"model": "maxwell", "alpha": 0.5}],
    )
    plan = StudyPlan(load_study(study))
    on_tmpfs = next(p for p in plan.points if "model=bgk/wall=maxwell-alpha=0.5" in p)
    limited = next(p for p in plan.points if "model=s_model/wall=maxwell-alpha=0.5" in p)
    # 4 KiB (one page): a point file of this study is about 5 KB
    mounted_dir = (workdir / plan.point_file(on_tmpfs)).parent
    mounted = _mount_tmpfs(mounted_dir, "4k")
    victims = [limited] + ([on_tmpfs] if mounted else [])
    monkeypatch.setenv(FAULT_WRITE_LIMIT_ENV, f"4096@{limited}")
    try:
        r = smk(workdir, study, plan.sweep_file, "--keep-going", check=False)
        out = r.stdout + r.stderr
        # attempt 1 fails its batch job after writing the other points, the retry cannot write
        # either: the batch is then written with the victims recorded as crashed, and the run ends
        assert r.returncode == 0, out[-3000:]
        assert [b["crashed"] for b in batch_lines(out)] == [len(victims), len(victims)], batch_lines(out)
        batch_log = "".join(p.read_text() for p in (workdir / "logs" / "disk" / "batches").rglob("*.log"))
        with open_sweep(workdir / plan.sweep_file, "plane_channel") as ds:
            reasons = [str(x) for x in ds["reason"].values.ravel()]
        for v in victims:
            final = workdir / plan.point_file(v)
            assert not final.exists(), "no file under the final name"
            assert not [f for f in final.parent.iterdir() if f.name.endswith(".tmp")], "no temporary left"
            assert f"could not write point file {plan.point_file(v)}" in batch_log
            assert "bytes free in" in batch_log and "--requeue-failed" in batch_log
        assert sum(x.startswith("crashed: PointWriteError: could not write point file") for x in reasons) == len(
            victims
        )
        for p in plan.points:  # every other point, new or old, is complete
            if p not in victims:
                assert check_complete(workdir / plan.point_file(p)) == "converged"
    finally:
        if mounted:
            subprocess.run(["umount", str(mounted_dir)], check=True, timeout=30)
    monkeypatch.delenv(FAULT_WRITE_LIMIT_ENV)
    assert {f: (workdir / f).stat().st_mtime_ns for f in kept} == kept  # nothing else lost or rewritten
    assert main(["status", str(study), "--directory", str(workdir), "--requeue-failed"]) == 0
    r = smk(workdir, study, plan.sweep_file)
    # after the unmount the tmpfs point's folder is the (empty) folder underneath
    assert solved_in(r.stdout + r.stderr) == len(victims), batch_lines(r.stdout + r.stderr)
    for p in plan.points:
        assert check_complete(workdir / plan.point_file(p)) == "converged"
    report(
        capsys,
        f"disk full: {len(victims)} write faults injected "
        f"({'ENOSPC on tmpfs + ' if mounted else 'no tmpfs (mount refused); '}EFBIG by RLIMIT_FSIZE), "
        f"{len(victims)} survived: recorded as crashed, solved again after --requeue-failed; "
        f"{len(kept)} earlier points untouched",
    )
