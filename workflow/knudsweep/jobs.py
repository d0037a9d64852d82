"""Entry points of the Snakemake jobs; each workflow/scripts/*.py calls exactly one.

They take plain values (paths, dicts, ints) so they can be called and tested
without Snakemake.  ``study`` is the study mapping as Snakemake holds it; it is
validated again here (cheap) so defaults are filled the same way everywhere.
"""

from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import Any


def setup_logging(log_path: str | None) -> None:
    """Send the knudsweep loggers to the job's log file (and stderr)."""
    logger = logging.getLogger("knudsweep")
    logger.setLevel(logging.INFO)
    fmt = logging.Formatter("%(asctime)s %(name)s %(levelname)s: %(message)s")
    handlers: list[logging.Handler] = [logging.StreamHandler()]
    if log_path:
        Path(log_path).parent.mkdir(parents=True, exist_ok=True)
        handlers.append(logging.FileHandler(log_path, mode="w", encoding="utf-8"))
    for h in handlers:
        h.setFormatter(fmt)
        logger.addHandler(h)


def run_warm_up(family: str, output: str, threads: int = 1, log: str | None = None) -> None:
    """Compile the family's numba kernels into the cache, then touch ``output``."""
    setup_logging(log)
    from knudsweep.point_job import configure_numba

    configure_numba(threads)
    from knudsweep.families import get_family

    get_family(family).warm_up()
    Path(output).parent.mkdir(parents=True, exist_ok=True)
    Path(output).write_text(f"numba cache warmed for {family} in {os.environ['NUMBA_CACHE_DIR']}\n")


def run_solve(pid: str, values: dict[str, Any], output: str, study: dict[str, Any],
              threads: int = 1, attempt: int = 1, log: str | None = None):
    """Solve point ``pid`` of ``study`` and write ``output``.

    The point is computed under an exclusive lock on ``.<name>.nc.lock`` beside
    the output (``fcntl.flock``: released by the kernel when the process dies,
    so a killed job never leaves a stale lock).  Two workflows that share
    ``results/points`` (other working directories, other studies) therefore never
    compute one point at the same time: the second waits, then finds the file
    the first wrote for the same point values and keeps it instead of solving
    again.  A failure to write the file is logged as one clear line and fails
    the job (Snakemake retries it on the next run).
    """
    setup_logging(log)
    from knudsweep.point_job import configure_numba

    configure_numba(threads)
    from knudsweep.config import config_hash, validate_study
    from knudsweep.point_job import PointWriteError, solve_point
    from knudsweep.status import write_sidecar

    logger = logging.getLogger("knudsweep.solve")
    _apply_injected_write_limit(pid, logger)
    _apply_injected_hold(pid, logger)
    study = validate_study(study)
    family = pid.split("/", 1)[0]
    with point_lock(output, logger):
        if _same_point_on_disk(output, pid, values):
            logger.info("point %s was completed by another workflow while this job waited; kept %s",
                        pid, output)
            return None
        try:
            result = solve_point(family, dict(values), output, section=study[family], pid=pid,
                                 config_hash=config_hash(study), attempt=int(attempt))
        except PointWriteError as exc:
            logger.error("%s", exc)
            raise
        write_sidecar(output)
        return result


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
            self.logger.warning("point file %s is being computed by %s; waiting for it to finish",
                                self.path.name[1:-5], holder)
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


def _same_point_on_disk(output: str, pid: str, values: dict[str, Any]) -> bool:
    """True if ``output`` exists, is readable and holds point ``pid`` with these values."""
    if not os.path.exists(output):
        return False
    import json

    import netCDF4

    from solver import __version__

    try:
        with netCDF4.Dataset(output, "r") as nc:
            attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
        stored = json.loads(attrs["point_values"])
    except Exception:  # unreadable or foreign: compute the point
        return False
    return (attrs.get("point_id") == pid and "status" in attrs
            and attrs.get("code_version") == __version__
            and stored == json.loads(json.dumps(dict(values), sort_keys=True)))


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


def _injected_fault(env_name: str, pid: str) -> str | None:
    """The value of fault-injection setting ``env_name`` if it applies to point ``pid``, else None."""
    spec = os.environ.get(env_name, "")
    if not spec:
        return None
    value, _, pattern = spec.rpartition("@") if "@" in spec else (spec, "", "")
    if pattern and pattern not in pid:
        return None
    return value


def _apply_injected_write_limit(pid: str, logger: logging.Logger) -> None:
    size = _injected_fault(FAULT_WRITE_LIMIT_ENV, pid)
    if size is None:
        return
    import resource

    limit = int(size)
    _, hard = resource.getrlimit(resource.RLIMIT_FSIZE)
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, hard))
    logger.warning("fault injection: files written by this job are limited to %d bytes (%s)",
                   limit, FAULT_WRITE_LIMIT_ENV)


def _apply_injected_hold(pid: str, logger: logging.Logger) -> None:
    release = _injected_fault(FAULT_HOLD_ENV, pid)
    if release is None:
        return
    import time

    logger.warning("fault injection: waiting for %s before solving (%s)", release, FAULT_HOLD_ENV)
    deadline = time.monotonic() + 300.0
    while not Path(release).exists() and time.monotonic() < deadline:
        time.sleep(0.2)


class CorruptPointsError(RuntimeError):
    """Gather found unreadable point files (moved aside); the job fails so the next run recomputes them."""


def run_gather(study: dict[str, Any], output: str, workers: int = 1, log: str | None = None):
    """Gather all point files of ``study`` into ``output`` (sweep.nc).

    If point files were corrupt, they are moved aside (``<file>.corrupt``), the
    sweep is written with them marked "corrupt", and then this job fails with
    one line listing them, after removing the study's tables and figures.
    Snakemake removes the sweep of the failed job, so the next run must rebuild
    all three and therefore recomputes exactly the moved points (Snakemake skips
    a missing input of an output that exists and is up to date).
    """
    setup_logging(log)
    from knudsweep.config import validate_study
    from knudsweep.gather import gather_study
    from knudsweep.plan import StudyPlan

    plan = StudyPlan(validate_study(study))
    datasets = gather_study(plan, output, workers=workers)
    corrupt = [str(r) for ds in datasets.values()
               for r in ds["reason"].values[ds["status"].values == "corrupt"].ravel()]
    if corrupt:
        message = (f"{len(corrupt)} corrupt point file(s) moved aside; run the workflow again to "
                   f"recompute them: " + "; ".join(corrupt))
        logging.getLogger("knudsweep.gather").error("%s", message)
        from knudsweep.status import invalidate_products

        invalidate_products(plan, sweep=False)
        raise CorruptPointsError(message)
    return datasets


def run_tables(study: dict[str, Any], sweep: str, outdir: str, log: str | None = None):
    """Write every family's tables (CSV + Markdown) from the sweep file."""
    setup_logging(log)
    from knudsweep.config import validate_study
    from knudsweep.families import get_family
    from knudsweep.gather import open_sweep
    from knudsweep.plan import StudyPlan
    from knudsweep.tables import write_tables

    plan = StudyPlan(validate_study(study))
    for fam in plan.families:
        write_tables(get_family(fam).tables(open_sweep(sweep, fam), plan.study[fam]), outdir)


def run_figures(study: dict[str, Any], sweep: str, outdir: str, log: str | None = None):
    """Draw every family's figures from the sweep file."""
    setup_logging(log)
    from knudsweep.config import validate_study
    from knudsweep.families import get_family
    from knudsweep.figures import save_figure
    from knudsweep.gather import open_sweep
    from knudsweep.plan import StudyPlan

    plan = StudyPlan(validate_study(study))
    settings = plan.study["figures"]
    for fam in plan.families:
        figs = get_family(fam).figures(open_sweep(sweep, fam), plan.study[fam], settings)
        for name, fig in figs.items():
            save_figure(fig, Path(outdir) / name, settings["formats"], settings["dpi"])
