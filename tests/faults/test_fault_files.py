"""Faults at the level of one file: a writer killed mid-write, a killed lock holder,
two jobs on one point, and the status listing of a 300-point study (no Snakemake)."""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
from fault_helpers import check_complete, wait_for

from knudsweep.cli import main
from knudsweep.config import validate_study
from knudsweep.plan import StudyPlan
from knudsweep.point_files import identity, write_point
from knudsweep.solver.netcdf_io import write_result
from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult
from knudsweep.status import clean_stray_temporaries, sidecar_path, stray_temporaries, study_status

SEED = 7

WRITER = textwrap.dedent("""
    import sys, numpy as np
    from pathlib import Path
    from knudsweep.solver.netcdf_io import to_dataset, write_dataset
    from knudsweep.solver.result import ConvergenceRecord, Quantity, SolverResult
    out = Path(sys.argv[1])
    rng = np.random.default_rng(int(sys.argv[2]))
    # 2 M random floats: zlib cannot shrink them, so each write spends ~0.1-0.3 s inside HDF5
    big = SolverResult("plane_channel", "poiseuille", {"delta": 1.0},
                       coords={"y": Quantity(np.linspace(0, 1, 2_000_000), "1", "y", ("y",))},
                       profiles={"u": Quantity(rng.random(2_000_000), "1", "velocity", ("y",))},
                       coefficients={"G_P": Quantity(1.0, "1", "flow rate")},
                       convergence=ConvergenceRecord(np.ones(3), 3, "converged", "", 1e-8))
    ds = to_dataset(big)
    (out / "ready").write_text("ready")
    i = 0
    while True:
        write_dataset(ds, out / f"p{i}.nc")
        i += 1
""")


def test_writer_killed_mid_write_leaves_no_partial_file(tmp_path, capsys):
    rng = random.Random(SEED)
    kills, mid_write = 0, 0
    # at least 4 kills; more (up to 12) until one lands inside a write: on a
    # loaded machine a seeded moment can fall between two writes every time
    for k in range(12):
        if kills >= 4 and mid_write >= 1:
            break
        folder = tmp_path / f"k{k}"
        folder.mkdir()
        proc = subprocess.Popen([sys.executable, "-c", WRITER, str(folder), str(k)])
        try:
            assert wait_for(lambda: (folder / "ready").exists(), 120, proc), "writer did not start"
            time.sleep(rng.uniform(0.05, 1.5))
            assert proc.poll() is None
        finally:
            proc.send_signal(signal.SIGKILL)
            proc.wait()
        kills += 1
        names = sorted(p.name for p in folder.iterdir() if p.name != "ready")
        finals = [n for n in names if not n.startswith(".")]
        temps = [n for n in names if n.startswith(".")]
        assert all(n.endswith(".tmp") for n in temps), temps
        assert all(n.endswith(".nc") for n in finals), finals
        for n in finals:  # every file under a final name opens completely
            check_complete(folder / n)
        mid_write += bool(temps)
        # the writer is dead: its temporary is abandoned; removed with min_age_s = 0
        stray = stray_temporaries([folder], min_age_s=0)
        assert sorted(p.name for p in stray) == temps
        for p in stray:
            p.unlink()
    with capsys.disabled():
        print(
            f"\n[faults] writer SIGKILLed {kills} times, {mid_write} inside write_dataset "
            "(temporary present); 0 partial files under a final name"
        )
    assert mid_write >= 1  # the kill moments are seeded; at least one landed mid-write


# ---------------------------------------------------------------- per-point lock

STUDY = {
    "study": "lock",
    "plane_channel": {
        "problems": ["poiseuille"],
        "models": ["bgk"],
        "walls": [{"alpha": 1.0}],
        "delta": [1.0],
        "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1e-6},
    },
}

SOLVE_JOB = textwrap.dedent("""
    import json, sys
    from knudsweep.batch_job import run_batch
    pid, values, root, study, log = json.loads(sys.argv[1])
    run_batch("plane_channel/b0", {pid: values}, root + "/batch.nc", study, log_path=log, root=root)
""")

HOLDER = textwrap.dedent("""
    import fcntl, sys, time
    fh = open(sys.argv[1], "a+")
    fcntl.flock(fh, fcntl.LOCK_EX)
    open(sys.argv[2], "w").write("locked")
    time.sleep(600)
""")


def _solve_job(tmp_path, name):
    study = validate_study(STUDY)
    (point,) = StudyPlan(study).points.values()
    out = tmp_path / "results" / "points" / f"{point.pid}.nc"
    log = tmp_path / f"{name}.log"
    args = json.dumps([point.pid, point.values, str(tmp_path), study, str(log)])
    return (
        point,
        out,
        log,
        subprocess.Popen([sys.executable, "-c", SOLVE_JOB, args], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL),
    )


def test_killed_lock_holder_releases_the_point_and_a_waiting_job_computes_it(tmp_path):
    point, out, log, _ = None, None, None, None
    study = validate_study(STUDY)
    (point,) = StudyPlan(study).points.values()
    out = tmp_path / "results" / "points" / f"{point.pid}.nc"
    out.parent.mkdir(parents=True)
    lock = out.with_name(f".{out.name}.lock")
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(lock), str(tmp_path / "held")])
    try:
        assert wait_for(lambda: (tmp_path / "held").exists(), 60, holder)
        _, _, log, job = _solve_job(tmp_path, "waiter")
        assert wait_for(lambda: log.exists() and "waiting for it to finish" in log.read_text(), 120, job), (
            log.read_text() if log.exists() else "no log"
        )
        assert not out.exists() and job.poll() is None  # it waits; nothing is computed twice
    finally:
        holder.kill()  # SIGKILL: the kernel drops its flock, no stale lock remains
        holder.wait()
    assert job.wait(timeout=300) == 0
    assert check_complete(out) == "converged"
    assert "1 point, 1 solved, 0 reused" in log.read_text()
    assert sidecar_path(out).exists()


def test_second_job_on_a_point_finished_meanwhile_keeps_the_file(tmp_path):
    import fcntl

    from knudsweep.point_job import solve_point

    study = validate_study(STUDY)
    (point,) = StudyPlan(study).points.values()
    out = tmp_path / "results" / "points" / f"{point.pid}.nc"
    out.parent.mkdir(parents=True)
    with open(out.with_name(f".{out.name}.lock"), "a+") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)  # "another workflow" is computing this point
        _, _, log, job = _solve_job(tmp_path, "second")
        assert wait_for(lambda: log.exists() and "waiting for it to finish" in log.read_text(), 120, job)
        solve_point("plane_channel", point.values, out, section=study["plane_channel"], pid=point.pid)
        first = out.stat().st_mtime_ns
    assert job.wait(timeout=300) == 0
    assert "completed by another workflow" in log.read_text()
    assert out.stat().st_mtime_ns == first  # kept, not recomputed or rewritten


# ---------------------------------------------------------------- 300-point status

BIG = {
    "study": "three_hundred",
    "plane_channel": {
        "problems": ["poiseuille", "thermal_creep", "couette", "heat_transfer"],
        "models": ["bgk"],
        "walls": [{"alpha": 1.0}],
        "delta": {"start": 0.01, "stop": 100.0, "num": 75},
        "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1e-6},
    },
}


def synthetic(point, status=CONVERGED):
    return SolverResult(
        family="plane_channel",
        problem=point.values["problem"],
        parameters={"delta": point.values["delta"]},
        coefficients={} if status == FAILED else {"G": Quantity(point.values["delta"], "1", "test value")},
        convergence=ConvergenceRecord(
            np.geomspace(1, 1e-7, 9), 9, status, "max_iter reached" if status == FAILED else "", 1e-6
        ),
        wall_time=0.01,
    )


def test_status_of_a_300_point_study(tmp_path, capsys):
    plan = StudyPlan(validate_study(BIG))
    pids = list(plan.points)
    assert len(pids) == 300
    rng = random.Random(SEED)
    chosen = rng.sample(pids, 40)
    failed, missing, corrupt, outdated = set(chosen[:10]), set(chosen[10:20]), set(chosen[20:30]), set(chosen[30:])
    for pid in pids:
        path = tmp_path / plan.point_file(pid)
        if pid in missing:
            continue
        if pid in corrupt:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(rng.randbytes(2000))
            continue
        ident = identity(pid, plan.points[pid].values)
        if pid in outdated:
            ident["code_version"] = "0.0.1"
        write_result(synthetic(plan.points[pid], FAILED if pid in failed else CONVERGED), path, ident)

    def expected(pid):
        return (
            "missing" if pid in missing else "corrupt" if pid in corrupt else "failed" if pid in failed else "converged"
        )

    first = {r.pid: r for r in study_status(plan, tmp_path)}  # reads the files, writes sidecars
    second = {r.pid: r for r in study_status(plan, tmp_path)}  # from the sidecars
    for rows in (first, second):
        assert {pid: r.state for pid, r in rows.items()} == {pid: expected(pid) for pid in pids}
        assert {pid for pid, r in rows.items() if r.outdated} == outdated
        assert all(rows[pid].reason == "max_iter reached" for pid in failed)
    assert sum(sidecar_path(tmp_path / plan.point_file(p)).exists() for p in pids) == 300 - 20

    # a rewritten file invalidates its sidecar (size / mtime changed)
    changed = next(p for p in pids if expected(p) == "converged" and p not in outdated)
    time.sleep(0.01)
    write_point(
        synthetic(plan.points[changed], FAILED),
        tmp_path / plan.point_file(changed),
        changed,
        plan.points[changed].values,
    )
    assert {r.pid: r.state for r in study_status(plan, tmp_path)}[changed] == "failed"

    # stray temporaries: an abandoned one (dead writer, 2 min old) is removed, a live one kept
    folder = (tmp_path / plan.point_file(pids[0])).parent
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    stale = folder / f".{Path(plan.point_file(pids[0])).name}.{int(dead.stdout)}.tmp"
    live = folder / f".{Path(plan.point_file(pids[1])).name}.{os.getpid()}.tmp"
    for p in (stale, live):
        p.write_bytes(b"partial")
        os.utime(p, (time.time() - 120, time.time() - 120))

    study_file = tmp_path / "study.yaml"
    study_file.write_text(json.dumps(BIG).replace("1e-06", "1.0e-06"))  # JSON is YAML (1.1: floats need a dot)
    assert main(["status", str(study_file), "--directory", str(tmp_path), "--requeue-outdated"]) == 0
    out = capsys.readouterr().out
    assert f"removed stray temporary {stale}" in out and not stale.exists() and live.exists()
    assert out.count("(older solver version; will be recomputed") == len(outdated)
    after = {r.pid: r for r in study_status(plan, tmp_path)}
    assert {p for p, r in after.items() if r.state == "missing"} == missing | outdated
    assert not any(r.outdated for r in after.values())
    assert "300 points: " in out and "0 outdated" in out
    assert clean_stray_temporaries(plan, tmp_path, min_age_s=0) == []  # live writer: kept
