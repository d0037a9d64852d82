"""Solve one point and write its netCDF file (the body of the ``solve`` rule and ``knudsweep solve``).

Escalation when a point does not converge (``iteration.retry_max_iter_factor``
= f, default 4):

* inside one job: if the first try ends with status "failed", the point is
  solved once more with ``max_iter * f`` before the file is written;
* across Snakemake retries (a crashed, killed or out-of-memory job is run again
  with ``attempt`` = 2, 3, ...): the first try of attempt k uses
  ``max_iter * f**(k-1)``, and memory and runtime grow with k (rule resources).

A point that still fails is written with status "failed" and its reason, so the
job succeeds and the rest of the sweep goes on; gather, tables and the status
command show it as failed.  Numerical exceptions raised by the solver
(ArithmeticError, ValueError, which includes numpy's LinAlgError) are recorded the same way; any other
exception is a bug and fails the job.

A file that cannot be written (disk full, quota, I/O error) raises
:class:`PointWriteError` with one line naming the file, the error and the free
space: the job fails, no file appears under the final name (the writer renames
a complete temporary file only), and the next run computes the point again.
"""

from __future__ import annotations

import logging
import math
import os
import time
from pathlib import Path
from typing import Any

from knudsweep.solver.result import FAILED, ConvergenceRecord, SolverResult

log = logging.getLogger("knudsweep.solve")


def configure_numba(threads: int, workdir: str | os.PathLike = ".") -> None:
    """Point numba's cache at ``<workdir>/.numba_cache`` and size its thread pool.

    Must run before the solver (and so numba) is imported for the cache
    directory to take effect; an existing NUMBA_CACHE_DIR is kept.
    """
    os.environ.setdefault("NUMBA_CACHE_DIR", str(Path(workdir).resolve() / ".numba_cache"))
    import numba

    numba.set_num_threads(max(1, min(int(threads), numba.config.NUMBA_NUM_THREADS)))


def _failed_result(family: str, values: dict[str, Any], reason: str, wall_time: float) -> SolverResult:
    return SolverResult(
        family=family,
        problem=str(values.get("problem", "")),
        parameters={k: v for k, v in values.items() if not isinstance(v, dict)},
        convergence=ConvergenceRecord(status=FAILED, reason=reason),
        wall_time=wall_time,
    )


def _guard_finite(result: SolverResult) -> SolverResult:
    """A 'converged' result with a non-finite coefficient is not a good result."""
    if result.status != FAILED:
        bad = [k for k, q in result.coefficients.items() if not math.isfinite(float(q.value))]
        if bad:
            result.convergence.status = FAILED
            result.convergence.reason = f"non-finite coefficient(s) {', '.join(sorted(bad))}"
    return result


def solve_values(family: str, values: dict[str, Any], section: dict[str, Any], attempt: int = 1):
    """Solve with the escalation ladder; returns (result, tries, max_iter of the last try)."""
    from knudsweep.families import get_family

    fam = get_family(family)
    it = section.get("iteration", {})
    factor = int(it.get("retry_max_iter_factor", 4))
    base = it.get("max_iter")
    max_iter = None if base is None else int(base) * factor ** (max(1, attempt) - 1)
    tries = 0
    while True:
        tries += 1
        t0 = time.perf_counter()
        try:
            result = fam.solve(values, max_iter=max_iter, section=section)
        except (ArithmeticError, ValueError) as exc:  # numpy's LinAlgError is a ValueError
            result = _failed_result(
                family, values, f"solver error: {type(exc).__name__}: {exc}", time.perf_counter() - t0
            )
        result = _guard_finite(result)
        log.debug("try %d (max_iter=%s): %s %s", tries, max_iter, result.status, result.convergence.reason)
        if result.status != FAILED or factor == 1 or max_iter is None or tries >= 2:
            return result, tries, max_iter
        max_iter *= factor


def solve_point(
    family: str,
    values: dict[str, Any],
    output: str | os.PathLike,
    *,
    section: dict[str, Any],
    pid: str = "",
    config_hash: str = "",
    attempt: int = 1,
) -> SolverResult:
    """Solve one point and write ``output`` atomically with provenance attributes."""
    from knudsweep.point_files import write_point

    t0 = time.perf_counter()
    result, tries, max_iter = solve_values(family, values, section, attempt)
    last_iterate = {}
    if result.status == FAILED and result.coefficients:
        # Never store a failed point's numbers as results: keep them only as a
        # labelled diagnostic attribute.
        last_iterate = {k: float(q.value) for k, q in result.coefficients.items()}
        result.coefficients = {}
    provenance = {
        "config_hash": config_hash,
        "job_wall_time_s": time.perf_counter() - t0,
        "solver_wall_time_s": float(result.wall_time),
        "iterations_used": int(result.convergence.iterations),
        "tries": tries,
        "snakemake_attempt": int(attempt),
        "max_iter_last_try": -1 if max_iter is None else int(max_iter),
    }
    if last_iterate:
        provenance["unconverged_last_iterate"] = last_iterate
    try:
        write_point(result, output, pid, values, provenance)
    except Exception as exc:
        raise PointWriteError(write_failure_message(output, exc)) from exc
    log.debug("wrote %s (%s)", output, result.status)
    return result


class PointWriteError(OSError):
    """The point was solved but its file could not be written (disk full, quota, I/O error)."""


def write_failure_message(output: str | os.PathLike, exc: BaseException) -> str:
    """One line: which file, the error, the free space left, and what happens next.

    HDF5 reports a full disk only as "NetCDF: HDF error", so the free space of
    the target folder is added to make the cause visible.
    """
    from knudsweep.preflight import free_space_note

    return (
        f"could not write point file {output}: {type(exc).__name__}: {exc} ({free_space_note(output)}); "
        "no file was written under that name; the point is recorded as crashed and "
        "`knudsweep status <study> --requeue-failed` queues it for the next run"
    )
