"""Gather point files into ``results/<study>/sweep.nc`` (one netCDF group per family).

Reading: every point file is opened, loaded and closed (``xr.open_dataset`` ->
``.load()``), in dask worker *processes* (``dask.bag`` with the multiprocessing
scheduler) when there are many files.  Processes, not threads: netCDF4/HDF5
crashes with "NetCDF: HDF error" when several threads open files at once
(pydata/xarray#7079), and xarray's HDF5 lock would serialise threads anyway.

Combining: the grid is known from the study (``Family.gather_dims``), so each
file's scalars are put at their grid position; points without a file stay NaN
with status "missing".  Failed points keep NaN coefficients (the solver wrote
none) and status "failed" with their reason.  Convergence histories are
sampled at common, log-spaced iteration numbers (at most ``HISTORY_SAMPLES``).

A file that cannot be read is *corrupt*: it is logged by path, moved aside to
``<file>.corrupt`` (so Snakemake sees the point as missing and recomputes it on
the next run) and marked "corrupt" in the sweep, never dropped silently.

Provenance: the variable ``code_version`` records, per point, the solver version
that computed it (``knudsweep status`` flags points of an older version).
Temporaries of killed writers (``.<name>.<pid>.tmp``) are never read and are
removed once abandoned (:func:`knudsweep.status.clean_stray_temporaries`).
"""

from __future__ import annotations

import logging
import math
import os
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from solver import __version__

log = logging.getLogger("knudsweep.gather")

HISTORY_SAMPLES = 200
# Below this many files per worker, starting worker processes costs more than it saves
# (a spawned worker imports xarray/netCDF4 in ~1 s; one small file loads in ~5 ms).
_MIN_FILES_PER_WORKER = 100
_SCALAR_SKIP = {"iterations", "wall_time"}


def read_point(path: str) -> dict[str, Any]:
    """Scalars, status and residual history of one point file; ``{'error': ...}`` if unreadable."""
    try:
        with xr.open_dataset(path, engine="netcdf4") as ds:
            ds = ds.load()
        attrs = ds.attrs
        if "status" not in attrs or "residual" not in ds:
            raise ValueError("not a knudsweep point file (no status attribute or residual)")
        coefficients = {
            name: (float(var.values), dict(var.attrs))
            for name, var in ds.data_vars.items()
            if var.ndim == 0 and name not in _SCALAR_SKIP
        }
        return {
            "path": path,
            "status": str(attrs["status"]),
            "code_version": str(attrs.get("code_version", "")),
            "reason": str(attrs.get("status_reason", "")),
            "iterations": int(ds["iterations"].values),
            "wall_time": float(ds["wall_time"].values),
            "residual": np.asarray(ds["residual"].values, dtype=float),
            "coefficients": coefficients,
        }
    except Exception as exc:  # any failure to read makes the file corrupt
        return {"path": path, "error": f"{type(exc).__name__}: {exc}"}


def _read_batch(paths: list[str]) -> list[dict[str, Any]]:
    return [read_point(p) for p in paths]


def read_points(paths: list[str], workers: int = 1) -> list[dict[str, Any]]:
    """Read many point files; in ``workers`` processes when there are enough files."""
    paths = list(paths)
    if workers <= 1 or len(paths) < 2 * _MIN_FILES_PER_WORKER:
        return _read_batch(paths)
    import dask
    import dask.bag as db

    n_parts = min(len(paths) // _MIN_FILES_PER_WORKER, workers * 4)
    size = math.ceil(len(paths) / n_parts)
    batches = [paths[i : i + size] for i in range(0, len(paths), size)]
    bag = db.from_sequence(batches, npartitions=len(batches)).map(_read_batch)
    with dask.config.set({"multiprocessing.context": "spawn"}):
        results = bag.compute(scheduler="processes", num_workers=workers)
    return [r for batch in results for r in batch]


def move_aside(path: str) -> str:
    """Rename a corrupt file to ``<path>.corrupt`` (replacing an older one)."""
    aside = f"{path}.corrupt"
    os.replace(path, aside)
    return aside


def history_coordinate(max_len: int) -> np.ndarray:
    """Common iteration numbers: all of 1..max_len if short, else log-spaced samples."""
    if max_len <= HISTORY_SAMPLES:
        return np.arange(1, max_len + 1)
    return np.unique(np.round(np.geomspace(1, max_len, HISTORY_SAMPLES)).astype(int))


def gather_family(
    family, section: dict[str, Any], points, files: dict[str, str], workers: int = 1
) -> xr.Dataset:
    """Dataset of one family on its grid.

    ``points``: the family's :class:`knudsweep.families.Point` list; ``files``:
    point id -> path for every point (existing or not).
    """
    dims = family.gather_dims(section)
    names = list(dims)
    shape = tuple(len(v) for v in dims.values())
    lookup = {d: {label: i for i, label in enumerate(v)} for d, v in dims.items()}

    records = read_points([files[p.pid] for p in points if os.path.exists(files[p.pid])], workers)
    by_path = {r["path"]: r for r in records}

    status = np.full(shape, "missing", dtype=object)
    reason = np.full(shape, "no point file", dtype=object)
    code_version = np.full(shape, "", dtype=object)
    iterations = np.full(shape, -1, dtype=np.int32)
    wall_time = np.full(shape, np.nan)
    coef: dict[str, np.ndarray] = {}
    coef_attrs: dict[str, dict] = {}
    histories: dict[tuple, np.ndarray] = {}

    for p in points:
        idx = tuple(lookup[d][p.index[d]] for d in names)
        if files[p.pid] not in by_path:
            aside = Path(f"{files[p.pid]}.corrupt")
            if aside.exists():
                reason[idx] = f"earlier file was corrupt, kept as {aside}"
            continue
        rec = by_path[files[p.pid]]
        if "error" in rec:
            aside = move_aside(rec["path"])
            log.error("corrupt point file %s (%s); moved to %s, it will be recomputed on the next run",
                      rec["path"], rec["error"], aside)
            status[idx] = "corrupt"
            reason[idx] = f"unreadable ({rec['error']}); moved to {aside}; rerun to recompute"
            continue
        status[idx] = rec["status"]
        reason[idx] = rec["reason"]
        code_version[idx] = rec["code_version"]
        iterations[idx] = rec["iterations"]
        wall_time[idx] = rec["wall_time"]
        for name, (value, attrs) in rec["coefficients"].items():
            if name not in coef:
                coef[name] = np.full(shape, np.nan)
                coef_attrs[name] = {k: attrs[k] for k in ("units", "long_name") if k in attrs}
            # A failed point's numbers are never reported as results.
            coef[name][idx] = value if rec["status"] == "converged" else np.nan
        histories[idx] = rec["residual"]

    max_len = max((len(h) for h in histories.values()), default=0)
    iteration = history_coordinate(max_len)
    residual = np.full(shape + (len(iteration),), np.nan)
    for idx, h in histories.items():
        take = iteration[iteration <= len(h)]
        residual[idx + (slice(0, len(take)),)] = h[take - 1]

    extra_attrs = family.dim_attrs(section)
    coords: dict[str, Any] = {}
    for d, labels in dims.items():
        info = extra_attrs.get(d, {})
        numeric = all(isinstance(v, (int, float, np.number)) and not isinstance(v, bool) for v in labels)
        coords[d] = (d, np.asarray(labels, dtype=float if numeric else object), info.get("attrs", {}))
        for cname, (vals, cattrs) in info.get("extra", {}).items():
            coords[cname] = (d, np.asarray(vals), cattrs)
    coords["iteration"] = ("iteration", iteration.astype(np.int32), {"units": "1", "long_name": "iteration number"})

    data_vars: dict[str, Any] = {
        name: (names, arr, coef_attrs[name]) for name, arr in sorted(coef.items())
    }
    data_vars["status"] = (names, status.astype(str), {"long_name": "point status: converged, failed, missing or corrupt"})
    data_vars["reason"] = (names, reason.astype(str), {"long_name": "why a point failed or is missing"})
    data_vars["code_version"] = (names, code_version.astype(str), {
        "long_name": "solver version that computed the point (empty: no readable file)"})
    data_vars["iterations"] = (names, iterations, {"units": "1", "long_name": "iterations used (-1: no file)"})
    data_vars["wall_time"] = (names, wall_time, {"units": "s", "long_name": "solver wall-clock time"})
    data_vars["residual"] = (names + ["iteration"], residual, {"units": "1", "long_name": "relative change of the iterate per iteration (sampled)"})
    return xr.Dataset(data_vars=data_vars, coords=coords, attrs={"family": family.name})


def gather_study(plan, output: str | os.PathLike, workers: int = 1, root: str = ".") -> dict[str, xr.Dataset]:
    """Gather every family of ``plan`` (a :class:`knudsweep.plan.StudyPlan`) into ``output``."""
    from knudsweep.config import config_hash
    from knudsweep.families import get_family
    from knudsweep.status import clean_stray_temporaries

    root_path = Path(root)
    clean_stray_temporaries(plan, root_path)  # never read (not point-file names); removed once abandoned
    datasets = {}
    for fam_name in plan.families:
        fam = get_family(fam_name)
        points = [p for p in plan.points.values() if p.family == fam_name]
        files = {p.pid: str(root_path / plan.point_file(p.pid)) for p in points}
        datasets[fam_name] = gather_family(fam, plan.study[fam_name], points, files, workers)
    write_sweep(datasets, output, {
        "Conventions": "CF-1.11",
        "title": f"knudsweep study {plan.name}",
        "study": plan.name,
        "description": plan.study.get("description", ""),
        "config_hash": config_hash(plan.study),
        "code_version": __version__,
        "families": ",".join(plan.families),
    })
    return datasets


def write_sweep(datasets: dict[str, xr.Dataset], output: str | os.PathLike, attrs: dict[str, Any]) -> Path:
    """Write the root attributes and one group per family, atomically."""
    output = Path(output)
    output.parent.mkdir(parents=True, exist_ok=True)
    tmp = output.with_name(f".{output.name}.{os.getpid()}.tmp")
    try:
        xr.Dataset(attrs=attrs).to_netcdf(tmp, mode="w", format="NETCDF4", engine="netcdf4")
        for name, ds in datasets.items():
            enc = {v: {"zlib": True, "complevel": 4} for v in ds.data_vars if ds[v].dtype.kind == "f"}
            ds.to_netcdf(tmp, mode="a", group=name, format="NETCDF4", engine="netcdf4", encoding=enc)
        os.replace(tmp, output)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return output


def open_sweep(path: str | os.PathLike, family: str) -> xr.Dataset:
    """Load the group of ``family`` from a sweep file (e.g. results/<study>/sweep.nc)."""
    with xr.open_dataset(path, group=family, engine="netcdf4") as ds:
        return ds.load()
