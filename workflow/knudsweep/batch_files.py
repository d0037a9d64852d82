"""Batch files: the records of one batch's points in one netCDF file.

``results/<study>/batches/<family>/<batch>.nc`` is the declared output of a
batch job and the only input of gather, which reads a few batch files instead
of thousands of point files.  The point files stay the cache (shared by every
study); a batch file belongs to its study.

Layout (netCDF-4, CF-1.11 attributes on every variable)::

    dimensions  point, iteration[, series_index]
    point_id(point)        string   the point's id (its path below results/points/)
    status(point)          string   converged | failed
    reason(point)          string   why a point failed ("" when converged)
    source(point)          string   solved (in this job) | reused (valid file found) | crashed
    code_version(point)    string
    discretization(point)  string   JSON: grids, quadratures and fit settings actually used, with
                                    each fit's note (why a relaxation time is left out)
    iterations(point)      int32    _FillValue where a point crashed
    wall_time(point)       float64  s
    residual(point, iteration) float64, NaN past a point's last iteration
    <coefficient>(point)   float64  NaN where the point has none (failed, or a fit left out)

Families with a ``series_dim`` (relaxation: ``"time"``) add, for converged
points, the point file's 1-D variables along that dimension, so that gather
never opens a point file::

    series_coordinate(point, series_index)  the values of ``series_dim`` with the point
                                            file's units and long_name (global attribute
                                            ``series_dimension`` names the dimension)
    <series variable>(point, series_index)  e.g. h_function, anisotropy; NaN past a
                                            point's last sample and for other points

The file is written once, atomically, when the batch ends.  Its global
attribute ``batch_layout`` (:data:`BATCH_LAYOUT`) is checked on reading: a
batch file of an older layout counts as unreadable, so gather removes it and
the next run redoes the batch from the (still valid) point files.
"""

from __future__ import annotations

import json
import os
from typing import Any

import numpy as np

from knudsweep.solver.atomic import atomic_output
from knudsweep.solver.netcdf_io import CF_VERSION, CHECKSUM_ATTR, content_digest, verify_digest

BATCH_LAYOUT = 2  # 2: discretization and series variables (1: without)
INT_FILL = np.int32(-2147483647)  # netCDF's default fill value of int32 (NC_FILL_INT)
SERIES_INDEX = "series_index"
SERIES_COORD = "series_coordinate"
_STRINGS = ("point_id", "status", "reason", "source", "code_version", "discretization")
_LONG_NAMES = {
    "point_id": "point identity (path below results/points/ without .nc)",
    "status": "point status: converged or failed",
    "reason": "why a point failed (empty when converged)",
    "source": "solved in this batch job, reused from a valid point file, or crashed",
    "code_version": "solver version that computed the point",
    "discretization": "grids, quadratures and fit settings actually used, with each fit's note (JSON)",
}
_ATTR_KEYS = ("units", "long_name")


def series_dim_of(pid: str) -> str | None:
    """The ``series_dim`` of the family of point ``pid`` (None if it has none)."""
    from knudsweep.families import REGISTRY, get_family

    name = pid.split("/", 1)[0]
    return getattr(get_family(name), "series_dim", None) if name in REGISTRY else None


def _var_attrs(var) -> dict[str, str]:
    return {k: str(var.getncattr(k)) for k in _ATTR_KEYS if k in var.ncattrs()}


def extras_from_result(result, series_dim: str | None) -> dict[str, Any]:
    """What a batch record holds beyond :mod:`knudsweep.point_files`' record, from a fresh result."""
    out: dict[str, Any] = {"discretization": json.dumps(result.discretization, sort_keys=True, default=str)}
    if series_dim and result.status == "converged" and series_dim in result.coords:
        q = result.coords[series_dim]
        out["series"] = {
            "dim": series_dim,
            "coord": (np.asarray(q.value, dtype=float), {"units": q.units, "long_name": q.long_name}),
            "vars": {
                name: (np.asarray(p.value, dtype=float), {"units": p.units, "long_name": p.long_name})
                for name, p in sorted(result.profiles.items())
                if tuple(p.dims) == (series_dim,)
            },
        }
    return out


def extras_from_file(path: str | os.PathLike, series_dim: str | None, status: str) -> dict[str, Any]:
    """The same as :func:`extras_from_result`, read from a point file already verified."""
    import netCDF4

    with netCDF4.Dataset(str(path), "r") as nc:
        nc.set_auto_mask(False)
        out: dict[str, Any] = {
            "discretization": str(nc.getncattr("discretization")) if "discretization" in nc.ncattrs() else ""
        }
        if series_dim and status == "converged" and series_dim in nc.variables:
            coord = nc.variables[series_dim]
            out["series"] = {
                "dim": series_dim,
                "coord": (np.asarray(coord[:], dtype=float), _var_attrs(coord)),
                "vars": {
                    name: (np.asarray(v[:], dtype=float), _var_attrs(v))
                    for name, v in sorted(nc.variables.items())
                    if v.dimensions == (series_dim,) and name != series_dim
                },
            }
    return out


def complete_record(record: dict[str, Any], *, result=None, path: str | os.PathLike | None = None) -> dict[str, Any]:
    """``record`` with the batch-file extras (discretization, series) from ``result`` or the file ``path``."""
    dim = series_dim_of(record["pid"])
    extras = extras_from_result(result, dim) if result is not None else extras_from_file(path, dim, record["status"])
    return {**record, **extras}


def batch_records(points, paths: dict[str, str | os.PathLike]) -> dict[str, dict[str, Any]]:
    """Batch records of the ``points`` (:class:`knudsweep.families.Point`) whose file in ``paths`` is
    valid, as a batch job records a point it reuses (for tests and tools that gather point files)."""
    from knudsweep.point_files import valid_records

    return {pid: complete_record(rec, path=paths[pid]) for pid, rec in valid_records(points, paths).items()}


def write_batch_file(records: list[dict[str, Any]], path: str | os.PathLike, attrs: dict[str, Any]) -> None:
    """Write the records (each with a ``source`` key) atomically to ``path``."""
    import netCDF4

    from knudsweep.preflight import ProductWriteError, write_failure_line

    n = len(records)
    n_it = max([len(r["residual"]) for r in records] + [1])
    names: dict[str, dict] = {}
    for r in records:
        for name, (_, a) in r["coefficients"].items():
            names.setdefault(name, a)
    with_series = [r for r in records if r.get("series")]
    try:
        with atomic_output(path) as tmp:
            with netCDF4.Dataset(str(tmp), "w", format="NETCDF4") as nc:
                nc.createDimension("point", n)
                nc.createDimension("iteration", n_it)
                for key in _STRINGS:
                    v = nc.createVariable(key, str, ("point",))
                    v.long_name = _LONG_NAMES[key]
                    v[:] = np.array(
                        [str(r["pid"] if key == "point_id" else r.get(key, "")) for r in records], dtype=object
                    )
                v = nc.createVariable("iterations", "i4", ("point",), fill_value=INT_FILL)
                v.setncatts({"units": "1", "long_name": "iterations used"})
                v[:] = np.array(
                    [r["iterations"] if r["iterations"] >= 0 else INT_FILL for r in records], dtype=np.int32
                )
                v = nc.createVariable("wall_time", "f8", ("point",))
                v.setncatts({"units": "s", "long_name": "solver wall-clock time"})
                v[:] = np.array([r["wall_time"] for r in records], dtype=float)
                res = np.full((n, n_it), np.nan)
                for i, r in enumerate(records):
                    res[i, : len(r["residual"])] = r["residual"]
                v = nc.createVariable("residual", "f8", ("point", "iteration"), zlib=True, complevel=4)
                v.setncatts({"units": "1", "long_name": "relative change of the iterate per iteration"})
                v[:] = res
                for name, a in sorted(names.items()):
                    vals = np.array([r["coefficients"].get(name, (np.nan, None))[0] for r in records], dtype=float)
                    v = nc.createVariable(name, "f8", ("point",), fill_value=np.nan)
                    v.setncatts(a)
                    v[:] = vals
                gattrs = {
                    "Conventions": CF_VERSION,
                    "batch_layout": BATCH_LAYOUT,
                    **{k: (str(x) if not isinstance(x, (int, float)) else x) for k, x in attrs.items()},
                }
                if with_series:
                    gattrs["series_dimension"] = _write_series(nc, records, with_series)
                nc.set_auto_mask(False)
                gattrs[CHECKSUM_ATTR] = content_digest({k: v[...] for k, v in nc.variables.items()}, gattrs)
                nc.setncatts(gattrs)
    except Exception as exc:  # netCDF4 raises RuntimeError ("NetCDF: HDF error") or OSError
        raise ProductWriteError(write_failure_line(path, exc)) from exc


def _write_series(nc, records, with_series) -> str:
    """The series variables (point, series_index); returns the series dimension's name."""
    dim = with_series[0]["series"]["dim"]
    size = max(len(r["series"]["coord"][0]) for r in with_series)
    nc.createDimension(SERIES_INDEX, size)
    names: dict[str, dict] = {}
    for r in with_series:
        for name, (_, a) in r["series"]["vars"].items():
            names.setdefault(name, a)
    coord_attrs = dict(with_series[0]["series"]["coord"][1])
    columns = [(SERIES_COORD, coord_attrs, lambda s: s["coord"][0])]
    columns += [
        (name, a, lambda s, name=name: s["vars"][name][0] if name in s["vars"] else None)
        for name, a in sorted(names.items())
    ]
    for name, a, get in columns:
        arr = np.full((len(records), size), np.nan)
        for i, r in enumerate(records):
            s = r.get("series")
            vals = get(s) if s else None
            if vals is not None:
                arr[i, : len(vals)] = vals
        v = nc.createVariable(name, "f8", ("point", SERIES_INDEX), fill_value=np.nan, zlib=True, complevel=4)
        v.setncatts(a)
        v[:] = arr
    return dim


def read_batch_file(path: str | os.PathLike) -> tuple[list[dict[str, Any]], dict[str, Any]]:
    """Records and global attributes of a batch file (raises on an unreadable file or an older layout)."""
    import netCDF4

    with netCDF4.Dataset(str(path), "r") as nc:
        broken = verify_digest(nc)
        if broken:
            raise ValueError(broken)
        nc.set_auto_mask(False)
        attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
        layout = int(attrs.get("batch_layout", 1))
        if layout != BATCH_LAYOUT:
            raise ValueError(f"batch file layout {layout}, this code reads layout {BATCH_LAYOUT}")
        cols = {k: list(nc.variables[k][:]) for k in _STRINGS}
        iterations = np.asarray(nc.variables["iterations"][:])
        wall = np.asarray(nc.variables["wall_time"][:], dtype=float)
        residual = np.asarray(nc.variables["residual"][:], dtype=float)
        skip = set(_STRINGS) | {"iterations", "wall_time", "residual"}
        coef = {
            name: (np.asarray(v[:], dtype=float), _var_attrs(v))
            for name, v in nc.variables.items()
            if name not in skip and v.dimensions == ("point",)
        }
        series = {
            name: (np.asarray(v[:], dtype=float), _var_attrs(v))
            for name, v in nc.variables.items()
            if v.dimensions == ("point", SERIES_INDEX)
        }
    dim = str(attrs.get("series_dimension", ""))
    records = []
    for i in range(len(cols["point_id"])):
        h = residual[i]
        last = np.flatnonzero(~np.isnan(h))
        rec = {
            **{k: str(cols[k][i]) for k in _STRINGS if k != "point_id"},
            "pid": str(cols["point_id"][i]),
            "iterations": int(iterations[i]) if iterations[i] != INT_FILL else -1,
            "wall_time": float(wall[i]),
            "residual": h[: last[-1] + 1] if last.size else h[:0],
            "coefficients": {name: (float(vals[i]), a) for name, (vals, a) in coef.items() if not np.isnan(vals[i])},
        }
        if series and np.isfinite(series[SERIES_COORD][0][i]).any():
            t = series[SERIES_COORD][0][i]
            n = int(np.flatnonzero(np.isfinite(t))[-1]) + 1
            coord_attrs = dict(series[SERIES_COORD][1])
            rec["series"] = {
                "dim": dim,
                "coord": (t[:n], coord_attrs),
                "vars": {name: (vals[i][:n], a) for name, (vals, a) in series.items() if name != SERIES_COORD},
            }
        records.append(rec)
    return records, attrs
