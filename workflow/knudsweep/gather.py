"""Gather batch files into ``results/<study>/sweep.nc`` (one netCDF group per family).

Reading: the study's batch files (:mod:`knudsweep.batch_files`, one per batch
job, each holding the records of up to thousands of points) are read with
netCDF4, in dask worker *processes* (``dask.bag`` with the multiprocessing
scheduler) when there are many.  Processes, not threads: netCDF4/HDF5 crashes
with "NetCDF: HDF error" when several threads open files at once
(pydata/xarray#7079).  Point files are not opened here: the batch job has
verified each one against its point before recording it.

Combining: the grid is known from the study (``Family.gather_dims``), so each
record's scalars are put at their grid position; points without a record stay
NaN with status "missing".  Failed points keep NaN coefficients (the solver
wrote none) and status "failed" with their reason.  Convergence histories are
sampled at common, log-spaced iteration numbers (at most ``HISTORY_SAMPLES``).

A batch file that cannot be read is removed with one error line naming it, and
the gather fails: the next run redoes that batch (reusing its valid point
files) and gathers again.

Time series: a family whose class sets ``series_dim`` (the relaxation family:
``"time"``) also gets every 1-D variable along that dimension of its converged
points (H-function, anisotropy, moments with their replica spreads), read from
the point files after the same check the batch job made (identity, checksum,
version; :func:`knudsweep.point_files.read_point_record`).  The points share
the grid of that dimension (it comes from study-wide run settings); a point
whose grid differs is left NaN with a warning.  Figures then draw from
``sweep.nc`` alone.

Provenance: the variable ``code_version`` records, per point, the solver version
that computed it.
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
# Below this many batch files per worker, starting worker processes costs more than it
# saves (a spawned worker imports netCDF4 in ~1 s; a batch file of 100 points reads in ~10 ms).
_MIN_FILES_PER_WORKER = 50


class BatchFileError(RuntimeError):
    """A batch file could not be read; it was removed so that the next run redoes its batch."""


def _read_batches(paths: list[str]) -> list[tuple[str, list[dict[str, Any]] | str]]:
    from knudsweep.batch_files import read_batch_file

    out = []
    for p in paths:
        try:
            out.append((p, read_batch_file(p)[0]))
        except Exception as exc:  # unreadable: reported by the caller
            out.append((p, f"{type(exc).__name__}: {exc}"))
    return out


def read_batches(paths: list[str], workers: int = 1) -> dict[str, dict[str, Any]]:
    """Records of all points in the batch files ``paths`` keyed by point id.

    Raises :class:`BatchFileError` (after removing them) if some cannot be read.
    """
    paths = list(paths)
    if workers <= 1 or len(paths) < 2 * _MIN_FILES_PER_WORKER:
        results = _read_batches(paths)
    else:
        import dask
        import dask.bag as db

        n_parts = min(len(paths) // _MIN_FILES_PER_WORKER, workers * 4)
        size = math.ceil(len(paths) / n_parts)
        groups = [paths[i : i + size] for i in range(0, len(paths), size)]
        bag = db.from_sequence(groups, npartitions=len(groups)).map(_read_batches)
        with dask.config.set({"multiprocessing.context": "spawn"}):
            results = [r for part in bag.compute(scheduler="processes", num_workers=workers) for r in part]
    bad = [(p, r) for p, r in results if isinstance(r, str)]
    if bad:
        for p, why in bad:
            Path(p).unlink(missing_ok=True)
            log.error("unreadable batch file %s (%s); removed, the next run redoes its batch", p, why)
        raise BatchFileError(f"{len(bad)} unreadable batch file(s) removed; run the workflow again to redo "
                             "them (their valid point files are reused): " + "; ".join(p for p, _ in bad))
    return {rec["pid"]: rec for _, recs in results for rec in recs}


def history_coordinate(max_len: int) -> np.ndarray:
    """Common iteration numbers: all of 1..max_len if short, else log-spaced samples."""
    if max_len <= HISTORY_SAMPLES:
        return np.arange(1, max_len + 1)
    return np.unique(np.round(np.geomspace(1, max_len, HISTORY_SAMPLES)).astype(int))


def gather_family(family, section: dict[str, Any], points, records: dict[str, dict[str, Any]],
                  root: str | os.PathLike = ".") -> xr.Dataset:
    """Dataset of one family on its grid.

    ``points``: the family's :class:`knudsweep.families.Point` list; ``records``:
    point id -> record (:mod:`knudsweep.point_files`) of the points that have one.
    A family with ``series_dim`` also gets its time series from the point files
    below ``root`` (:func:`gather_series`).
    """
    dims = family.gather_dims(section)
    names = list(dims)
    shape = tuple(len(v) for v in dims.values())
    lookup = {d: {label: i for i, label in enumerate(v)} for d, v in dims.items()}

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
        rec = records.get(p.pid)
        if rec is None:
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
        if len(rec["residual"]):
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
    data_vars["status"] = (names, status.astype(str), {"long_name": "point status: converged, failed or missing"})
    data_vars["reason"] = (names, reason.astype(str), {"long_name": "why a point failed or is missing"})
    data_vars["code_version"] = (names, code_version.astype(str), {
        "long_name": "solver version that computed the point (empty: no readable file)"})
    data_vars["iterations"] = (names, iterations, {"units": "1", "long_name": "iterations used (-1: no file)"})
    data_vars["wall_time"] = (names, wall_time, {"units": "s", "long_name": "solver wall-clock time"})
    data_vars["residual"] = (names + ["iteration"], residual, {"units": "1", "long_name": "relative change of the iterate per iteration (sampled)"})
    ds = xr.Dataset(data_vars=data_vars, coords=coords, attrs={"family": family.name})
    dim = getattr(family, "series_dim", None)
    if dim:
        from knudsweep.plan import RESULTS

        paths = {p.pid: Path(root) / RESULTS / p.relpath for p in points}
        series = gather_series(family, section, points, records, paths, dim)
        if series:
            ds = ds.assign_coords({dim: series.pop(dim)}).assign(series)
    return ds


def gather_series(family, section: dict[str, Any], points, records: dict[str, dict[str, Any]],
                  paths: dict[str, str | os.PathLike], dim: str) -> dict[str, Any]:
    """Variables along ``dim`` of the converged ``points``: ``{name: (dims, array, attrs)}`` plus the
    ``dim`` coordinate, on the family's grid (NaN where a point has none)."""
    import netCDF4

    from knudsweep.point_files import read_point_record

    dims = family.gather_dims(section)
    names = list(dims)
    shape = tuple(len(v) for v in dims.values())
    lookup = {d: {label: i for i, label in enumerate(v)} for d, v in dims.items()}
    coord = None
    coord_attrs: dict[str, Any] = {}
    arrays: dict[str, np.ndarray] = {}
    attrs: dict[str, dict] = {}
    for p in points:
        rec = records.get(p.pid)
        if rec is None or rec["status"] != "converged":
            continue
        ok, why = read_point_record(paths[p.pid], p.pid, p.values)
        if ok is None:
            log.warning("time series of %s not gathered: %s", p.pid, why)
            continue
        with netCDF4.Dataset(str(paths[p.pid]), "r") as nc:
            nc.set_auto_mask(False)
            if dim not in nc.variables:
                continue
            t = np.asarray(nc.variables[dim][:], dtype=float)
            if coord is None:
                coord = t
                coord_attrs = {k: str(nc.variables[dim].getncattr(k)) for k in ("units", "long_name")
                               if k in nc.variables[dim].ncattrs()}
            elif t.shape != coord.shape or not np.allclose(t, coord, rtol=1e-12, atol=0.0):
                log.warning("time series of %s not gathered: its %s grid differs from the other points'",
                            p.pid, dim)
                continue
            idx = tuple(lookup[d][p.index[d]] for d in names)
            for name, var in nc.variables.items():
                if var.dimensions != (dim,) or name == dim:
                    continue
                if name not in arrays:
                    arrays[name] = np.full(shape + (coord.size,), np.nan)
                    attrs[name] = {k: str(var.getncattr(k)) for k in ("units", "long_name") if k in var.ncattrs()}
                arrays[name][idx] = np.asarray(var[:], dtype=float)
    if coord is None:
        return {}
    out: dict[str, Any] = {name: (names + [dim], arr, attrs[name]) for name, arr in sorted(arrays.items())}
    out[dim] = (dim, coord, coord_attrs)
    return out


def gather_study(plan, output: str | os.PathLike, workers: int = 1, root: str = ".") -> dict[str, xr.Dataset]:
    """Gather every family of ``plan`` (a :class:`knudsweep.plan.StudyPlan`) into ``output``."""
    from knudsweep.config import config_hash
    from knudsweep.families import get_family
    from knudsweep.status import clean_stray_temporaries

    root_path = Path(root)
    clean_stray_temporaries(plan, root_path)  # never read (not point-file names); removed once abandoned
    records = read_batches([str(root_path / f) for f in plan.batch_files()], workers)
    datasets = {}
    for fam_name in plan.families:
        fam = get_family(fam_name)
        points = [p for p in plan.points.values() if p.family == fam_name]
        datasets[fam_name] = gather_family(fam, plan.study[fam_name], points, records, root=root_path)
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
    """Write the root attributes and one group per family, atomically.

    A failed write (full disk: HDF5 says only "NetCDF: HDF error") raises
    :class:`knudsweep.preflight.ProductWriteError` with the file and the free space.
    """
    from knudsweep.preflight import ProductWriteError, write_failure_line
    from solver.netcdf_io import atomic_output

    output = Path(output)
    try:
        with atomic_output(output) as tmp:
            xr.Dataset(attrs=attrs).to_netcdf(tmp, mode="w", format="NETCDF4", engine="netcdf4")
            for name, ds in datasets.items():
                enc = {v: {"zlib": True, "complevel": 4} for v in ds.data_vars if ds[v].dtype.kind == "f"}
                ds.to_netcdf(tmp, mode="a", group=name, format="NETCDF4", engine="netcdf4", encoding=enc)
    except Exception as exc:  # netCDF4 raises RuntimeError or OSError, xarray ValueError
        raise ProductWriteError(write_failure_line(output, exc)) from exc
    return output


def sweep_problem(path: str | os.PathLike, families: list[str]) -> str:
    """Empty string if the sweep file at ``path`` opens and holds a group per family, else why not."""
    import netCDF4

    try:
        with netCDF4.Dataset(str(path), "r") as nc:
            missing = [f for f in families if f not in nc.groups]
            if missing:
                return f"no group for {', '.join(missing)}"
            for f in families:
                if "status" not in nc.groups[f].variables:
                    return f"group {f} has no status variable"
    except Exception as exc:  # truncated, not HDF5, unreadable
        return f"unreadable ({type(exc).__name__}: {exc})"
    return ""


def open_sweep(path: str | os.PathLike, family: str) -> xr.Dataset:
    """Load the group of ``family`` from a sweep file (e.g. results/<study>/sweep.nc)."""
    with xr.open_dataset(path, group=family, engine="netcdf4") as ds:
        return ds.load()
