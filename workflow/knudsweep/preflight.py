"""Checks the main Snakemake process makes before it plans, and the one line a failed write gives.

Before planning (:func:`check_before_run`, main process only, not in the
jobs that parse the Snakefile again):

- every folder the run writes to can be written (a read-only ``results/``
  would otherwise end in a Snakemake error about its first output folder);
- an invalid ``sweep.nc`` is moved aside as ``sweep.nc.corrupt`` so that it
  is built again instead of being read by tables and figures;
- temporaries of killed writers are removed
  (:func:`knudsweep.status.clean_stray_temporaries`).

When a product (sweep, table, figure, batch file) cannot be written,
:class:`ProductWriteError` carries one line with the file, the error and the
free space left: HDF5 reports a full disk only as "NetCDF: HDF error".
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path


class ProductWriteError(OSError):
    """A product could not be written (disk full, quota, read-only, I/O error); nothing under its name changed."""


def free_space_note(path: str | os.PathLike) -> str:
    """ "<n> bytes free in <folder>" for the folder of ``path`` (or "free space of <folder> unknown")."""
    folder = Path(path).parent
    while not folder.exists() and folder != folder.parent:
        folder = folder.parent
    try:
        return f"{shutil.disk_usage(folder).free} bytes free in {folder}"
    except OSError:
        return f"free space of {folder} unknown"


def write_failure_line(path: str | os.PathLike, exc: BaseException) -> str:
    """One line: which file could not be written, the error and the free space."""
    return (
        f"could not write {path}: {type(exc).__name__}: {exc} ({free_space_note(path)}); "
        "nothing under that name was changed"
    )


@contextmanager
def one_line_exit(stage: str, *errors: type[BaseException]):
    """In a product job: a :class:`ProductWriteError` (or one of ``errors``) becomes one line and exit 1."""
    try:
        yield
    except (ProductWriteError, *errors) as exc:
        print(f"knudsweep: {stage}: {exc}", file=sys.stderr)
        sys.exit(1)


def unwritable_folder(folders) -> str:
    """Empty string if every folder in ``folders`` exists (or can be made) and takes a new file, else why not."""
    for folder in folders:
        try:
            os.makedirs(folder, exist_ok=True)
            with tempfile.NamedTemporaryFile(dir=folder, prefix=".write-probe-", suffix=".tmp"):
                pass
        except OSError as exc:
            return f"cannot write to {folder}/ ({exc.strerror or type(exc).__name__})"
    return ""


def check_sweep(plan) -> str:
    """Move an invalid sweep file aside (it is then built again); returns the message, or ""."""
    from knudsweep.gather import sweep_problem

    if not os.path.exists(plan.sweep_file):
        return ""
    why = sweep_problem(plan.sweep_file, plan.families)
    if not why:
        return ""
    os.replace(plan.sweep_file, plan.sweep_file + ".corrupt")
    return f"{plan.sweep_file} is invalid ({why}); moved to {plan.sweep_file}.corrupt and built again"


def check_before_run(plan, log_dir: str = "logs") -> tuple[str, list[str]]:
    """(fatal problem or "", notes) for the run of ``plan`` in the current folder."""
    from knudsweep.plan import RESULTS
    from knudsweep.status import clean_stray_temporaries

    folders = [RESULTS, f"{RESULTS}/points", plan.study_dir, log_dir]
    problem = unwritable_folder(folders)
    if problem:
        return (
            f"{problem}; nothing was run. Make it writable, or run in another folder (snakemake --directory DIR)"
        ), []
    note = check_sweep(plan)
    clean_stray_temporaries(plan, ".")
    return "", [note] if note else []
