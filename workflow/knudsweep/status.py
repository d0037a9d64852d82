"""Status of a study's points: done (converged), failed, missing, corrupt; outdated; stray temporaries.

Fast listing
    Opening a netCDF file costs a few milliseconds (HDF5 header), which is tens
    of seconds for 10,000 points.  So each point file may have a small *status
    sidecar* beside it, ``.<name>.nc.status.json`` (hidden), holding the file's
    size and modification time and the few attributes the status needs.  The
    sidecar is trusted only while the point file still has exactly that size and
    mtime; otherwise (or when there is none) the point file's attributes are read
    with netCDF4 (no variable is loaded) and the sidecar is rewritten.  The solve
    job writes it right after the point file; files from elsewhere get one on
    their first status.  A corruption that keeps both size and mtime is not seen
    by the status (gather reads every byte and reports it).

Outdated points
    A point whose file :func:`knudsweep.point_files.identity_problem` calls
    outdated (another solver version, an older point-file layout, or point
    values edited since) stays in its state (it is still a result) but is
    flagged ``outdated`` with the reason in ``outdated_reason``; the next batch
    job that holds it solves it again.  :func:`requeue` with ``outdated=True``
    removes only those files so the next run recomputes only them.

Stray temporaries
    A writer killed between creating and renaming its temporary file leaves
    ``.<name>.<pid>.tmp`` (:func:`knudsweep.solver.atomic.temporary_name`).  Such a
    file is never read as a point (its name is not a point file's name) and
    :func:`clean_stray_temporaries` removes it once its writer process is gone
    from this host and it has not been modified for ``min_age_s`` seconds (a
    writer on another cluster node keeps touching its file while it writes).

A ``<point>.nc.corrupt`` file left by the gather step is reported as the reason
of a missing point.
"""

from __future__ import annotations

import json
import logging
import os
import time
from dataclasses import dataclass
from pathlib import Path

from knudsweep.point_files import HEADER_ATTRS, OUTDATED, identity_problem, read_header
from knudsweep.solver.atomic import TEMPORARY_NAME, atomic_write_text

log = logging.getLogger("knudsweep.status")

SIDECAR_LAYOUT = 2  # 2: the header attributes of point_files.HEADER_ATTRS (1: without layout and values)
# Seconds a temporary must be untouched before it counts as abandoned (a small point
# file is written in well under a second; common practice, no source).
STRAY_MIN_AGE_S = 60.0


@dataclass
class PointStatus:
    pid: str
    path: str
    state: str  # converged | failed | missing | corrupt
    reason: str = ""
    iterations: int = -1
    code_version: str = ""
    outdated: bool = False
    outdated_reason: str = ""


def sidecar_path(path: str | os.PathLike) -> Path:
    """``dir/.name.nc.status.json`` for the point file ``dir/name.nc``."""
    path = Path(path)
    return path.with_name(f".{path.name}.status.json")


def write_sidecar(path: str | os.PathLike, attrs: dict | None = None) -> None:
    """Record the status attributes of point file ``path`` beside it (atomic, best effort).

    ``attrs``: the file's header (:func:`knudsweep.point_files.read_header`) if
    the caller has it, else it is read.  Not fsynced: a sidecar is checked
    against its point file on every read and rebuilt when it does not match.
    """
    path = Path(path)
    try:
        if attrs is None:
            attrs = read_header(path)
        st = path.stat()
        record = {"sidecar_layout": SIDECAR_LAYOUT, "size": st.st_size, "mtime_ns": st.st_mtime_ns}
        record.update({k: attrs[k] for k in HEADER_ATTRS if k in attrs})
        atomic_write_text(sidecar_path(path), json.dumps(record), fsync=False)
    except OSError as exc:  # a cache only: a read-only or full disk must not fail the caller
        log.warning("could not write status sidecar of %s: %s", path, exc)


def _from_sidecar(path: Path, st: os.stat_result) -> dict | None:
    try:
        record = json.loads(sidecar_path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if (
        record.get("sidecar_layout") != SIDECAR_LAYOUT
        or record.get("size") != st.st_size
        or record.get("mtime_ns") != st.st_mtime_ns
    ):
        return None
    return record


def read_status(
    path: str | os.PathLike, update_sidecar: bool = True, pid: str | None = None, values: dict | None = None
) -> PointStatus:
    """Status of one point file from its sidecar or, failing that, its attributes.

    With ``pid``, a file that holds another point (copied over this one) is
    corrupt, and one from earlier inputs is outdated (with ``values``, the
    point's canonical values, also a file solved for other values).
    """
    path = Path(path)
    try:
        st = path.stat()
    except FileNotFoundError:
        aside = f"{path}.corrupt"
        reason = f"earlier file was corrupt, kept as {aside}" if os.path.exists(aside) else "not computed yet"
        return PointStatus("", str(path), "missing", reason)
    attrs = _from_sidecar(path, st)
    if attrs is None:
        try:
            attrs = read_header(path)
        except Exception as exc:  # unreadable header: corrupt
            return PointStatus("", str(path), "corrupt", f"{type(exc).__name__}: {exc}")
        if "status" in attrs and update_sidecar:
            write_sidecar(path, attrs)
    if "status" not in attrs:
        return PointStatus("", str(path), "corrupt", "no status attribute (not a knudsweep point file)")
    why = identity_problem(attrs, attrs.get("point_id") if pid is None else pid, values)
    if why and not why.startswith(OUTDATED):
        return PointStatus("", str(path), "corrupt", why)
    return PointStatus(
        "",
        str(path),
        str(attrs["status"]),
        str(attrs.get("status_reason", "")),
        int(attrs.get("iterations_used", -1)),
        str(attrs.get("code_version", "")),
        bool(why),
        why[len(OUTDATED) :],
    )


def study_status(plan, root: str | os.PathLike = ".", update_sidecar: bool = True) -> list[PointStatus]:
    """Status of every point of ``plan`` (a StudyPlan), paths relative to ``root``."""
    out = []
    for pid, point in plan.points.items():
        st = read_status(Path(root) / plan.point_file(pid), update_sidecar, pid=pid, values=point.values)
        st.pid = pid
        out.append(st)
    return out


def requeue(statuses: list[PointStatus], states=("failed", "corrupt"), outdated: bool = False) -> list[str]:
    """Delete the files of points in ``states`` (or, with ``outdated``, only outdated ones).

    The next run of the workflow recomputes exactly the removed points, provided
    the batches that hold them run again: call :func:`invalidate_products` with
    the removed points (Snakemake does not redo a batch whose output exists).
    """
    removed = []
    for st in statuses:
        chosen = st.outdated if outdated else st.state in states
        if chosen and os.path.exists(st.path):
            os.remove(st.path)
            sidecar_path(st.path).unlink(missing_ok=True)
            removed.append(st.path)
    return removed


def invalidate_products(plan, root: str | os.PathLike = ".", pids=None) -> list[str]:
    """Delete the batch files holding ``pids`` (all with None) and the study's sweep, tables and figures.

    The next run then redoes those batches (solving only their points without
    a valid file) and rebuilds the products from them.
    """
    keys = set(plan.batches) if pids is None else {plan.batch_of[p] for p in pids if p in plan.batch_of}
    files = [plan.batch_file(k) for k in sorted(keys)] + [plan.sweep_file] + plan.table_files() + plan.figure_files()
    removed = []
    for f in files:
        path = Path(root) / f
        if path.exists():
            path.unlink()
            removed.append(str(path))
    return removed


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def stray_temporaries(directories, min_age_s: float = STRAY_MIN_AGE_S) -> list[Path]:
    """Abandoned ``.<name>.<pid>.tmp`` files in ``directories`` (writer gone, untouched for ``min_age_s``)."""
    now = time.time()
    out = []
    for d in sorted({str(d) for d in directories}):
        try:
            entries = list(os.scandir(d))
        except FileNotFoundError:
            continue
        for entry in entries:
            m = TEMPORARY_NAME.match(entry.name)
            if not m or not entry.is_file(follow_symlinks=False):
                continue
            try:
                age = now - entry.stat().st_mtime
            except FileNotFoundError:  # renamed or removed meanwhile
                continue
            if age >= min_age_s and not _pid_alive(int(m["pid"])):
                out.append(Path(entry.path))
    return out


def clean_stray_temporaries(plan, root: str | os.PathLike = ".", min_age_s: float = STRAY_MIN_AGE_S) -> list[str]:
    """Remove abandoned temporaries in the point folders and the study folder of ``plan``."""
    root = Path(root)
    dirs = {(root / plan.point_file(pid)).parent for pid in plan.points}
    dirs.add(root / plan.study_dir)
    for sub in ("tables", "figures"):  # killed table and figure jobs
        dirs.add(root / plan.study_dir / sub)
    dirs |= {(root / plan.batch_file(key)).parent for key in plan.batches}
    removed = []
    for tmp in stray_temporaries(dirs, min_age_s):
        try:
            tmp.unlink()
        except FileNotFoundError:
            continue
        log.warning("removed stray temporary %s (its writer was killed before renaming it)", tmp)
        removed.append(str(tmp))
    return removed
