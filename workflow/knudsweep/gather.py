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
points (H-function, anisotropy, moments with their replica spreads), from the
batch files, which carry them (:mod:`knudsweep.batch_files`); gather never
opens a point file.  The points share the grid of that dimension (it comes
from study-wide run settings); a point whose grid differs is left NaN with a
warning.  Figures then draw from ``sweep.nc`` alone.

CF encoding (:func:`to_cf`, undone by :func:`open_sweep`): a CF coordinate
variable is numeric and strictly monotonic (CF-1.11 section 1.3), so a
dimension labelled by text (model, wall, problem, ...) or by numbers in no
order gets an auxiliary coordinate ``<dim>_label`` instead (CF-1.11 section
6.1, labels); ``status`` is a byte flag variable (0 converged, 1 failed,
2 missing; ``flag_values``, ``flag_meanings``, CF-1.11 section 3.5);
``iterations`` of a point without a file is the int32 ``_FillValue``.
:func:`open_sweep` gives the labelled dimensions and the status words back.
Every point's ``discretization`` (JSON, with each fit's note) is kept as a
string variable.

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

from knudsweep.solver import __version__

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
        raise BatchFileError(
            f"{len(bad)} unreadable batch file(s) removed; run the workflow again to redo "
            "them (their valid point files are reused): " + "; ".join(p for p, _ in bad)
        )
    return {rec["pid"]: rec for _, recs in results for rec in recs}


def history_coordinate(max_len: int) -> np.ndarray:
    """Common iteration numbers: all of 1..max_len if short, else log-spaced samples."""
    if max_len <= HISTORY_SAMPLES:
        return np.arange(1, max_len + 1)
    return np.unique(np.round(np.geomspace(1, max_len, HISTORY_SAMPLES)).astype(int))


def gather_family(
    family, section: dict[str, Any], points, records: dict[str, dict[str, Any]], root: str | os.PathLike = "."
) -> xr.Dataset:
    """Dataset of one family on its grid.

    ``points``: the family's :class:`knudsweep.families.Point` list; ``records``:
    point id -> batch record (:mod:`knudsweep.batch_files`) of the points that
    have one.  A family with ``series_dim`` also gets its time series from the
    records (:func:`gather_series`).  A family may give ``coefficient_attrs(section)``
    (name -> attributes) for coefficients whose meaning differs along the grid
    (e.g. tube and duct flow rates); otherwise the first record's attributes are
    used.  ``root`` is not used (kept for callers).
    """
    dims = family.gather_dims(section)
    names = list(dims)
    shape = tuple(len(v) for v in dims.values())
    lookup = {d: {label: i for i, label in enumerate(v)} for d, v in dims.items()}

    status = np.full(shape, "missing", dtype=object)
    reason = np.full(shape, "no point file", dtype=object)
    code_version = np.full(shape, "", dtype=object)
    discretization = np.full(shape, "", dtype=object)
    iterations = np.full(shape, np.nan)
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
        discretization[idx] = rec.get("discretization", "")
        iterations[idx] = rec["iterations"] if rec["iterations"] >= 0 else np.nan
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

    coef_attrs.update(
        {k: v for k, v in getattr(family, "coefficient_attrs", lambda _: {})(section).items() if k in coef_attrs}
    )
    data_vars: dict[str, Any] = {name: (names, arr, coef_attrs[name]) for name, arr in sorted(coef.items())}
    data_vars["status"] = (names, status.astype(str), {"long_name": "point status: converged, failed or missing"})
    data_vars["reason"] = (names, reason.astype(str), {"long_name": "why a point failed or is missing"})
    data_vars["code_version"] = (
        names,
        code_version.astype(str),
        {"long_name": "solver version that computed the point (empty: no readable file)"},
    )
    data_vars["discretization"] = (
        names,
        discretization.astype(str),
        {
            "long_name": "grids, quadratures and fit settings actually used, with each fit's note (JSON; "
            "empty: no readable file)"
        },
    )
    data_vars["iterations"] = (names, iterations, {"units": "1", "long_name": "iterations used"})
    data_vars["wall_time"] = (names, wall_time, {"units": "s", "long_name": "solver wall-clock time"})
    data_vars["residual"] = (
        names + ["iteration"],
        residual,
        {"units": "1", "long_name": "relative change of the iterate per iteration (sampled)"},
    )
    ds = xr.Dataset(data_vars=data_vars, coords=coords, attrs={"family": family.name})
    dim = getattr(family, "series_dim", None)
    if dim:
        series = gather_series(family, section, points, records, dim)
        if series:
            ds = ds.assign_coords({dim: series.pop(dim)}).assign(series)
    return ds


def gather_series(
    family, section: dict[str, Any], points, records: dict[str, dict[str, Any]], dim: str
) -> dict[str, Any]:
    """Variables along ``dim`` of the converged ``points``: ``{name: (dims, array, attrs)}`` plus the
    ``dim`` coordinate, on the family's grid (NaN where a point has none).

    The series come with the records (the batch files carry them); a converged
    record without one (a batch file written without series) is skipped with a warning.
    """
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
        series = rec.get("series")
        if not series or series["dim"] != dim:
            log.warning("time series of %s not gathered: its record has none", p.pid)
            continue
        t, t_attrs = series["coord"]
        if coord is None:
            coord, coord_attrs = np.asarray(t, dtype=float), dict(t_attrs)
        elif t.shape != coord.shape or not np.allclose(t, coord, rtol=1e-12, atol=0.0):
            log.warning("time series of %s not gathered: its %s grid differs from the other points'", p.pid, dim)
            continue
        idx = tuple(lookup[d][p.index[d]] for d in names)
        for name, (vals, a) in series["vars"].items():
            if name not in arrays:
                arrays[name] = np.full(shape + (coord.size,), np.nan)
                attrs[name] = dict(a)
            arrays[name][idx] = vals
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
    import datetime as _dt
    import platform

    from knudsweep.solver.netcdf_io import CF_VERSION

    now = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    write_sweep(
        datasets,
        output,
        {
            "Conventions": CF_VERSION,
            "title": f"knudsweep study {plan.name}",
            "source": f"knudsweep solver {__version__}: linearized kinetic models and particle/deterministic "
            "relaxation, one point file per parameter point, gathered from the study's batch files",
            "history": f"{now} gathered by knudsweep {__version__} (python {platform.python_version()}) from "
            f"{len(plan.batch_files())} batch files of study {plan.name}",
            "study": plan.name,
            "description": plan.study.get("description", ""),
            "config_hash": config_hash(plan.study),
            "code_version": __version__,
            "families": ",".join(plan.families),
        },
    )
    return datasets


def write_sweep(datasets: dict[str, xr.Dataset], output: str | os.PathLike, attrs: dict[str, Any]) -> Path:
    """Write the root attributes and one group per family, atomically.

    A failed write (full disk: HDF5 says only "NetCDF: HDF error") raises
    :class:`knudsweep.preflight.ProductWriteError` with the file and the free space.
    """
    from knudsweep.preflight import ProductWriteError, write_failure_line
    from knudsweep.solver.atomic import atomic_output

    output = Path(output)
    try:
        with atomic_output(output) as tmp:
            xr.Dataset(attrs=attrs).to_netcdf(tmp, mode="w", format="NETCDF4", engine="netcdf4")
            for name, ds in datasets.items():
                ds, enc = to_cf(ds)
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


STATUS_WORDS = ("converged", "failed", "missing")  # status flag values 0, 1, 2
LABEL_SUFFIX = "_label"
INT_FILL = np.int32(-2147483647)  # netCDF's default fill value of int32 (NC_FILL_INT)


def _is_cf_coordinate(values: np.ndarray) -> bool:
    """Numeric, no missing value, strictly monotonic (CF-1.11 section 1.3)."""
    if values.dtype.kind not in "iuf" or not np.all(np.isfinite(values)):
        return False
    d = np.diff(values.astype(float))
    return bool(np.all(d > 0) or np.all(d < 0))


def to_cf(ds: xr.Dataset) -> tuple[xr.Dataset, dict[str, dict]]:
    """The family dataset as written (CF-1.11) and its encoding; :func:`open_sweep` undoes it.

    Text or unordered dimension coordinates become ``<dim>_label`` auxiliary
    coordinates; ``status`` becomes a byte flag variable; ``iterations`` an int32
    with ``_FillValue``; float variables are compressed.
    """
    for d in list(ds.dims):
        if d in ds.coords and not _is_cf_coordinate(np.asarray(ds[d].values)):
            var = ds[d]
            ds = ds.drop_vars(d).assign_coords({d + LABEL_SUFFIX: (d, var.values, var.attrs)})
    if "status" in ds and ds["status"].dtype.kind in "OUS":
        words = ds["status"].values.astype(str)
        unknown = set(np.unique(words)) - set(STATUS_WORDS)
        if unknown:
            raise ValueError(f"status: unknown values {sorted(unknown)}; allowed are {', '.join(STATUS_WORDS)}")
        codes = np.zeros(words.shape, dtype=np.int8)
        for code, word in enumerate(STATUS_WORDS):
            codes[words == word] = code
        ds = ds.assign(
            status=(
                ds["status"].dims,
                codes,
                {
                    "long_name": "point status",
                    "flag_values": np.arange(len(STATUS_WORDS), dtype=np.int8),
                    "flag_meanings": " ".join(STATUS_WORDS),
                },
            )
        )
    enc: dict[str, dict] = {v: {"zlib": True, "complevel": 4} for v in ds.variables if ds[v].dtype.kind == "f"}
    if "iterations" in ds:
        enc["iterations"] = {"dtype": "int32", "_FillValue": INT_FILL}
    return ds, enc


def from_cf(ds: xr.Dataset) -> xr.Dataset:
    """Labelled dimensions and status words back from a dataset written by :func:`to_cf`."""
    for name in list(ds.variables):
        d = name[: -len(LABEL_SUFFIX)] if name.endswith(LABEL_SUFFIX) else None
        if d and ds[name].dims == (d,) and d not in ds.variables:
            var = ds[name]
            ds = ds.drop_vars(name).assign_coords({d: (d, var.values, var.attrs)})
    status = ds.get("status")
    if status is not None and status.dtype.kind in "iu" and "flag_meanings" in status.attrs:
        words = np.array(str(status.attrs["flag_meanings"]).split(), dtype=object)
        values = np.asarray(status.attrs["flag_values"]).tolist()
        lookup = np.full(max(values) + 1, "", dtype=object)
        lookup[values] = words
        ds = ds.assign(
            status=(status.dims, lookup[status.values].astype(str), {"long_name": "point status: " + ", ".join(words)})
        )
    return ds


def open_sweep(path: str | os.PathLike, family: str) -> xr.Dataset:
    """Load the group of ``family`` from a sweep file (e.g. results/<study>/sweep.nc).

    Dimensions are labelled (``ds.sel(model="bgk")``) and ``status`` holds the
    words converged / failed / missing (see :func:`to_cf` for the file's encoding).
    """
    with xr.open_dataset(path, group=family, engine="netcdf4") as ds:
        return from_cf(ds.load())
