"""One batch job: verify, solve and record the points of one batch (the body of rule ``solve_batch``).

For each point of the batch, in order:

1. its point file ``results/points/<pid>.nc`` is checked
   (:func:`knudsweep.point_files.read_point_record`).  A valid file is reused
   as it is (never rewritten, so a finished point keeps its inode).  An invalid
   one (unreadable, another point's content, another solver version) is moved
   aside to ``<file>.corrupt`` with one log line, and the point is solved again.
   On a Snakemake retry (``attempt`` >= 2) points recorded as failed are solved
   again too, with the higher iteration limit of that attempt.
2. points to solve are solved sequentially, or in ``threads`` worker processes
   (one numba thread each) when their estimated cost pays for starting the
   workers (:data:`knudsweep.batches.POOL_MIN_COST_S`).  Each point file is written atomically
   as soon as the point is solved, under the point's lock
   (:class:`knudsweep.jobs.point_lock`), so a kill loses at most the points
   being solved and two workflows sharing ``results/points`` never solve one
   point twice.
3. a point whose solve raises (a bug, a full disk, a dead worker: not a failed
   convergence, which is a result) is *crashed*: it gets no point file.  If the
   job has attempts left it fails after all other points are written, so
   Snakemake runs it again and only the crashed points are solved; on the last
   attempt it is recorded as failed with its reason and the batch completes.
4. the batch file (:mod:`knudsweep.batch_files`) gets every point's record,
   with its discretization and, for a family with a ``series_dim``, its time
   series (from the fresh result, or from the point file it reused).

The kernels of the family are compiled before the first point is solved, once
per numba cache: the first process to need them compiles under a lock on
``<cache>/.<family>.compile.lock`` while the others wait, then each loads the
cache.  No Snakemake file stands for the compile, so a new directory or a lost
marker never makes a finished point look outdated.
"""

from __future__ import annotations

import contextlib
import logging
import os
import sys
import time
import traceback
from pathlib import Path
from typing import Any

from knudsweep.batches import POOL_MIN_COST_S
from knudsweep.identity import point_path

log = logging.getLogger("knudsweep.batch")

CRASHED = "crashed"


class BatchIncomplete(RuntimeError):
    """Points of the batch crashed and Snakemake has attempts left: fail so it runs the job again."""


def ensure_compiled(family: str) -> None:
    """Compile (or load) the family's kernels; the first process per numba cache compiles under a lock."""
    import fcntl

    import numba

    from knudsweep.families import get_family
    from knudsweep.solver import __version__

    cache = Path(os.environ.get("NUMBA_CACHE_DIR", ".numba_cache"))
    cache.mkdir(parents=True, exist_ok=True)
    marker = cache / f".{family}.solver-{__version__}.numba-{numba.__version__}.compiled"
    if marker.exists():
        return  # compiled before: the first solve loads the cached kernels
    with open(cache / f".{family}.compile.lock", "a+") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)
        if not marker.exists():
            t0 = time.perf_counter()
            get_family(family).warm_up()
            marker.write_text(f"compiled in {time.perf_counter() - t0:.1f} s\n")
            log.info("compiled the %s kernels into %s in %.1f s", family, cache, time.perf_counter() - t0)


def _injected_raise(pid: str) -> None:
    from knudsweep.jobs import FAULT_RAISE_ENV, _injected_fault

    if _injected_fault(FAULT_RAISE_ENV, pid) is not None:
        raise RuntimeError(f"fault injection: {FAULT_RAISE_ENV} raised in point {pid}")


def solve_one(task: tuple) -> dict[str, Any]:
    """Solve one point and write its file; returns its record (``source`` solved, reused or crashed)."""
    family, pid, values, section, config_hash, attempt, root = task
    from knudsweep.batch_files import complete_record
    from knudsweep.jobs import point_lock, with_injected_faults
    from knudsweep.point_files import read_point_record, record_from_result
    from knudsweep.point_job import solve_point
    from knudsweep.status import write_sidecar

    output = os.path.join(root, point_path(pid, "results")) if root else point_path(pid, "results")
    try:
        with with_injected_faults(pid, log), point_lock(output, log):
            record, _ = read_point_record(output, pid, values)
            if record is not None and not (record["status"] == "failed" and attempt > 1):
                log.info("point %s was completed by another workflow meanwhile; kept %s", pid, output)
                return {**complete_record(record, path=output), "source": "reused"}
            _injected_raise(pid)
            result = solve_point(
                family, dict(values), output, section=section, pid=pid, config_hash=config_hash, attempt=int(attempt)
            )
            write_sidecar(output)  # from the file's header (netCDF classic: a fraction of a millisecond)
        return {**complete_record(record_from_result(result, pid), result=result), "source": "solved"}
    except Exception as exc:  # a crash of this point must not lose the others
        log.error("point %s crashed: %s: %s\n%s", pid, type(exc).__name__, exc, traceback.format_exc())
        return crashed_record(pid, f"{type(exc).__name__}: {exc}")


def crashed_record(pid: str, why: str) -> dict[str, Any]:
    import numpy as np

    from knudsweep.solver import __version__

    return {
        "pid": pid,
        "status": "failed",
        "reason": f"crashed: {why}",
        "code_version": __version__,
        "iterations": -1,
        "wall_time": float("nan"),
        "residual": np.zeros(0),
        "coefficients": {},
        "discretization": "",
        "source": CRASHED,
    }


def _worker_init(log_path: str | None) -> None:
    from knudsweep.jobs import setup_logging
    from knudsweep.point_job import configure_numba

    setup_logging(log_path, console=False, mode="a")
    configure_numba(1)


def _solve_chunk(tasks: list[tuple]) -> list[dict[str, Any]]:
    ensure_compiled(tasks[0][0])
    return [solve_one(t) for t in tasks]


@contextlib.contextmanager
def _no_main_reimport():
    """Spawned workers import the parent's ``__main__`` file; a Snakemake script is not meant to be
    imported again, so hide its path while the pool starts its workers."""
    main = sys.modules.get("__main__")
    path = getattr(main, "__file__", None)
    if path is not None:
        del main.__file__
    try:
        yield
    finally:
        if path is not None:
            main.__file__ = path


def _start_method() -> str:
    """ "fork" while this process has not started numba's thread pool (forking a running pool is
    unsafe), else "spawn". A forked worker skips the imports, 0.8 s less per batch start."""
    try:
        from numba.np.ufunc import parallel

        started = bool(getattr(parallel, "_is_initialized", True))
    except ImportError:
        started = True
    return "spawn" if started or sys.platform != "linux" else "fork"


def solve_in_pool(tasks: list[tuple], workers: int, log_path: str | None) -> list[dict[str, Any]]:
    """Solve ``tasks`` in ``workers`` worker processes; a dead worker crashes only its unfinished points.

    (Letting this process solve chunks beside ``workers - 1`` workers was measured
    15 % slower on 2 cores: 7.8 s against 6.8 s for 1,000 plane-channel points.)
    """
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    size = max(1, min(16, len(tasks) // (workers * 8)))
    chunks = [tasks[i : i + size] for i in range(0, len(tasks), size)]
    out: dict[str, dict[str, Any]] = {}
    ctx = multiprocessing.get_context(_start_method())
    with (
        _no_main_reimport(),
        ProcessPoolExecutor(
            max_workers=workers, mp_context=ctx, initializer=_worker_init, initargs=(log_path,)
        ) as pool,
    ):
        futures = {pool.submit(_solve_chunk, c): c for c in chunks}
        for fut in as_completed(futures):
            try:
                for rec in fut.result():
                    out[rec["pid"]] = rec
            except Exception as exc:  # BrokenProcessPool: a worker died (killed, out of memory)
                for t in futures[fut]:
                    out.setdefault(t[1], crashed_record(t[1], f"worker process died ({type(exc).__name__})"))
    return [out[t[1]] for t in tasks]


def verify_points(
    points: dict[str, dict[str, Any]], *, attempt: int = 1, root: str | os.PathLike = ""
) -> tuple[dict[str, dict[str, Any]], list[str]]:
    """Records of the points with a valid file (``source`` "reused") and the ids of those to solve.

    A reused point's record is completed from its file for the batch file
    (:func:`knudsweep.batch_files.complete_record`: discretization, time series).
    Corrupt files are moved aside (``<file>.corrupt``) with one warning; outdated
    ones stay until the new file replaces them (one info line); on ``attempt``
    >= 2 points recorded as failed are solved again.
    """
    from knudsweep.batch_files import complete_record
    from knudsweep.point_files import OUTDATED, move_aside, read_point_record

    records: dict[str, dict[str, Any]] = {}
    todo: list[str] = []
    for pid, values in points.items():
        path = os.path.join(root, point_path(pid)) if root else point_path(pid)
        record, why = read_point_record(path, pid, values)
        if record is not None and not (record["status"] == "failed" and attempt > 1):
            try:
                records[pid] = {**complete_record(record, path=path), "source": "reused"}
                continue
            except Exception as exc:  # replaced or removed since the check: solve the point again
                record, why = None, f"unreadable ({type(exc).__name__}: {exc})"
        if record is None and why.startswith(OUTDATED):
            log.info("point file %s is %s; solving the point again", path, why)
        elif record is None and why != "missing":
            try:
                aside = move_aside(path)
                log.warning("invalid point file %s (%s); moved to %s; solving the point again", path, why, aside)
            except FileNotFoundError:
                pass
        todo.append(pid)
    return records, todo


def run_batch(
    key: str,
    points: dict[str, dict[str, Any]],
    output: str,
    study: dict[str, Any],
    *,
    threads: int = 1,
    attempt: int = 1,
    max_attempt: int = 1,
    log_path: str | None = None,
    root: str | os.PathLike = "",
) -> list[dict[str, Any]]:
    """Verify and solve the points of batch ``key`` (``points``: pid -> canonical values); write ``output``."""
    from knudsweep.jobs import setup_logging
    from knudsweep.point_job import configure_numba

    setup_logging(log_path, console=False)
    configure_numba(1)
    from knudsweep.batch_files import write_batch_file
    from knudsweep.config import config_hash, validate_study
    from knudsweep.families import get_family
    from knudsweep.solver import __version__

    t0 = time.perf_counter()
    study = validate_study(study)
    family = key.split("/", 1)[0]
    section = study[family]
    chash = config_hash(study)
    records, todo_pids = verify_points(points, attempt=attempt, root=root)
    todo = [(family, pid, dict(points[pid]), section, chash, int(attempt), root) for pid in todo_pids]

    if todo:
        fam = get_family(family)
        cost = sum(fam.point_cost(t[2]) for t in todo)
        workers = max(1, min(int(threads), len(todo))) if cost >= POOL_MIN_COST_S else 1
        log.info(
            "batch %s: %d of %d points to solve (estimated %.1f s on one core), %d worker(s)",
            key,
            len(todo),
            len(points),
            cost,
            workers,
        )
        if workers > 1:
            solved = solve_in_pool(todo, workers, log_path)
        else:
            ensure_compiled(family)
            solved = [solve_one(t) for t in todo]
        for rec in solved:
            records[rec["pid"]] = rec

    ordered = [records[pid] for pid in points]
    counts = {s: sum(r["source"] == s for r in ordered) for s in ("solved", "reused", CRASHED)}
    failed = sum(r["status"] == "failed" and r["source"] != CRASHED for r in ordered)
    elapsed = time.perf_counter() - t0
    summary = (
        f"batch {key}: {len(ordered)} point{'' if len(ordered) == 1 else 's'}, "
        f"{counts['solved']} solved, {counts['reused']} reused, "
        f"{failed} failed to converge, {counts[CRASHED]} crashed; {elapsed:.1f} s"
    )
    log.info("%s", summary)
    if counts[CRASHED] and attempt < max_attempt:
        message = (
            f"{summary}; attempt {attempt} of {max_attempt}: the job fails so that Snakemake runs it "
            f"again and solves only the crashed points (see {log_path})"
        )
        print(f"knudsweep: {message}", file=sys.stderr, flush=True)
        raise BatchIncomplete(message)
    write_batch_file(
        ordered,
        output,
        {
            "title": f"knudsweep batch {key}",
            "source": f"knudsweep solver {__version__}",
            "code_version": __version__,
            "batch": key,
            "config_hash": chash,
            "snakemake_attempt": int(attempt),
            "points_solved": counts["solved"],
            "points_reused": counts["reused"],
            "points_crashed": counts[CRASHED],
            "job_wall_time_s": elapsed,
        },
    )
    print(f"knudsweep: {summary}", file=sys.stderr, flush=True)
    return ordered
