"""Entry points of the Snakemake jobs; each workflow/scripts/*.py calls exactly one.

They take plain values (paths, dicts, ints) so they can be called and tested
without Snakemake.  ``study`` is the study mapping as Snakemake holds it; it is
validated again here (cheap) so defaults are filled the same way everywhere.
"""

from __future__ import annotations

import logging
import os
import sys
from pathlib import Path
from typing import Any


def setup_logging(log_path: str | None, console: bool = True, mode: str = "w") -> None:
    """Send the knudsweep loggers to the job's log file (and, with ``console``, to stderr).

    Batch jobs log to their file only: the console gets one summary line per
    batch. The file holds the batch's record (compile, invalid files, crashes
    with their traceback, the summary); one line per solve try and per written
    file is added with ``KNUDSWEEP_LOG_LEVEL=DEBUG`` (each point file keeps
    its own tries, iterations and times in its attributes anyway).
    """
    logger = logging.getLogger("knudsweep")
    level = os.environ.get("KNUDSWEEP_LOG_LEVEL", "INFO").upper()
    logger.setLevel(level if level in ("DEBUG", "INFO", "WARNING", "ERROR") else "INFO")
    logger.handlers.clear()
    fmt = logging.Formatter("%(asctime)s %(name)s %(process)d %(levelname)s: %(message)s")
    handlers: list[logging.Handler] = [logging.StreamHandler()] if console or not log_path else []
    if log_path:
        Path(log_path).parent.mkdir(parents=True, exist_ok=True)
        handlers.append(logging.FileHandler(log_path, mode=mode, encoding="utf-8"))
    for h in handlers:
        h.setFormatter(fmt)
        logger.addHandler(h)


def run_batch_job(
    key: str,
    points: dict[str, dict[str, Any]],
    output: str,
    study: dict[str, Any],
    threads: int = 1,
    attempt: int = 1,
    max_attempt: int = 1,
    log: str | None = None,
) -> None:
    """Rule ``solve_batch``: see :mod:`knudsweep.batch_job`; bad news is one line and exit code 1."""
    from knudsweep.batch_job import BatchIncomplete, run_batch
    from knudsweep.point_job import PointWriteError

    try:
        run_batch(key, points, output, study, threads=threads, attempt=attempt, max_attempt=max_attempt, log_path=log)
    except BatchIncomplete:
        sys.exit(1)
    except (PointWriteError, OSError) as exc:
        print(f"knudsweep: batch {key}: {exc}", file=sys.stderr)
        sys.exit(1)


class point_lock:
    """Exclusive ``flock`` on ``.<name>.lock`` beside ``output``; waits if another process holds it."""

    def __init__(self, output: str | os.PathLike, logger: logging.Logger):
        out = Path(output)
        self.path = out.with_name(f".{out.name}.lock")
        self.logger = logger

    def __enter__(self):
        import fcntl

        self.path.parent.mkdir(parents=True, exist_ok=True)
        self.fh = open(self.path, "a+", encoding="utf-8")
        try:
            fcntl.flock(self.fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            self.fh.seek(0)
            holder = self.fh.read().strip() or "another process"
            self.logger.warning(
                "point file %s is being computed by %s; waiting for it to finish", self.path.name[1:-5], holder
            )
            fcntl.flock(self.fh, fcntl.LOCK_EX)
        try:  # who holds it, for the message of a waiting job (best effort: the disk may be full)
            self.fh.seek(0)
            self.fh.truncate()
            self.fh.write(f"pid {os.getpid()} on {os.uname().nodename}\n")
            self.fh.flush()
        except OSError:
            pass
        return self

    def __exit__(self, *exc):
        self.fh.close()  # closing releases the flock
        return False


# Fault injection for the tests.  Each setting reads "<value>@<substring of
# the point id>" (without "@<...>": every point) and acts only in the jobs
# of the points whose id contains the substring.
#
# FAULT_WRITE_LIMIT_ENV, "<bytes>@...": when a small file system cannot be
# mounted, limits the size of any file this job writes (RLIMIT_FSIZE).  Python
# ignores SIGXFSZ, so a write past the limit fails with EFBIG on the real
# write path, as a full disk fails it with ENOSPC.
FAULT_WRITE_LIMIT_ENV = "KNUDSWEEP_FAULT_WRITE_LIMIT"
# FAULT_HOLD_ENV, "<file>@...": the job waits, before it solves, until <file>
# exists (at most 300 s), so that a test can act while a workflow surely still
# runs (a plane-channel point otherwise solves in milliseconds).
FAULT_HOLD_ENV = "KNUDSWEEP_FAULT_HOLD"
# FAULT_RAISE_ENV, "@...": solving the point raises RuntimeError (a crash, not
# a failed convergence).
FAULT_RAISE_ENV = "KNUDSWEEP_FAULT_RAISE"


def _injected_fault(env_name: str, pid: str) -> str | None:
    """The value of fault-injection setting ``env_name`` if it applies to point ``pid``, else None."""
    spec = os.environ.get(env_name, "")
    if not spec:
        return None
    value, _, pattern = spec.rpartition("@") if "@" in spec else (spec, "", "")
    if pattern and pattern not in pid:
        return None
    return value


class with_injected_faults:
    """Apply the write-limit and hold settings that name point ``pid`` while it is solved; undo after."""

    def __init__(self, pid: str, logger: logging.Logger):
        self.pid, self.logger, self.saved = pid, logger, None

    def __enter__(self):
        size = _injected_fault(FAULT_WRITE_LIMIT_ENV, self.pid)
        if size is not None:
            import resource

            self.saved = resource.getrlimit(resource.RLIMIT_FSIZE)
            resource.setrlimit(resource.RLIMIT_FSIZE, (int(size), self.saved[1]))
            self.logger.warning(
                "fault injection: files written for point %s are limited to %s bytes (%s)",
                self.pid,
                size,
                FAULT_WRITE_LIMIT_ENV,
            )
        _apply_injected_hold(self.pid, self.logger)
        return self

    def __exit__(self, *exc):
        if self.saved is not None:
            import resource

            resource.setrlimit(resource.RLIMIT_FSIZE, self.saved)
        return False


def _apply_injected_hold(pid: str, logger: logging.Logger) -> None:
    release = _injected_fault(FAULT_HOLD_ENV, pid)
    if release is None:
        return
    import time

    logger.warning("fault injection: waiting for %s before solving (%s)", release, FAULT_HOLD_ENV)
    deadline = time.monotonic() + 300.0
    while not Path(release).exists() and time.monotonic() < deadline:
        time.sleep(0.2)


def run_gather(study: dict[str, Any], output: str, workers: int = 1, log: str | None = None):
    """Gather the batch files of ``study`` into ``output`` (sweep.nc); an unreadable batch file is one line, exit 1."""

    setup_logging(log, console=False)
    from knudsweep.config import validate_study
    from knudsweep.gather import BatchFileError, gather_study
    from knudsweep.plan import StudyPlan
    from knudsweep.preflight import one_line_exit

    plan = StudyPlan(validate_study(study))
    with one_line_exit("gather", BatchFileError):
        return gather_study(plan, output, workers=workers)


def run_tables(study: dict[str, Any], sweep: str, outdir: str, log: str | None = None):
    """Write every family's tables (CSV + Markdown) from the sweep file."""
    setup_logging(log)
    from knudsweep.config import validate_study
    from knudsweep.families import get_family
    from knudsweep.gather import open_sweep
    from knudsweep.plan import StudyPlan
    from knudsweep.preflight import one_line_exit
    from knudsweep.tables import write_tables

    plan = StudyPlan(validate_study(study))
    with one_line_exit("tables"):
        for fam in plan.families:
            write_tables(get_family(fam).tables(open_sweep(sweep, fam), plan.study[fam]), outdir)


def _draw_family(args) -> None:
    from knudsweep.families import get_family
    from knudsweep.figures import save_figure
    from knudsweep.gather import open_sweep

    study, fam, sweep, outdir = args
    settings = study["figures"]
    figs = get_family(fam).figures(open_sweep(sweep, fam), study[fam], settings)
    for name, fig in figs.items():
        save_figure(fig, Path(outdir) / name, settings["formats"], settings["dpi"])


def run_figures(study: dict[str, Any], sweep: str, outdir: str, log: str | None = None, threads: int = 1):
    """Draw every family's figures from the sweep file, families side by side on ``threads`` cores.

    (The demo's three families: 14 s one after another on 2 cores.)
    """
    setup_logging(log)
    from knudsweep.config import validate_study
    from knudsweep.plan import StudyPlan
    from knudsweep.preflight import one_line_exit

    plan = StudyPlan(validate_study(study))
    tasks = [(plan.study, fam, sweep, outdir) for fam in plan.families]
    workers = max(1, min(int(threads), len(tasks)))
    with one_line_exit("figures"):
        if workers == 1 or sys.platform != "linux":
            for t in tasks:
                _draw_family(t)
            return
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        # fork: this process has drawn nothing yet (matplotlib's Agg backend, no threads)
        with ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("fork")) as pool:
            list(pool.map(_draw_family, tasks))
