"""Batch files: the records of one batch's points in one netCDF file.

``results/<study>/batches/<family>/<batch>.nc`` is the declared output of a
batch job and the input of gather, which reads a few batch files instead of
thousands of point files.  The point files stay the cache (shared by every
study); a batch file belongs to its study.

Layout (CF attributes on every variable)::

    dimensions  point, iteration
    point_id(point)        string   the point's id (its path below results/points/)
    status(point)          string   converged | failed
    reason(point)          string   why a point failed ("" when converged)
    source(point)          string   solved (in this job) | reused (valid file found) | crashed
    code_version(point)    string
    iterations(point)      int32
    wall_time(point)       float64  s
    residual(point, iteration) float64, NaN past a point's last iteration
    <coefficient>(point)   float64  NaN where the point has none (failed)

The file is written once, atomically, when the batch ends.
"""

from __future__ import annotations

import os
from typing import Any

import numpy as np

from solver.netcdf_io import CF_VERSION, CHECKSUM_ATTR, atomic_output, content_digest, verify_digest

_STRINGS = ("point_id", "status", "reason", "source", "code_version")
_LONG_NAMES = {
    "point_id": "point identity (path below results/points/ without .nc)",
    "status": "point status: converged or failed",
    "reason": "why a point failed (empty when converged)",
    "source": "solved in this batch job, reused from a valid point file, or crashed",
    "code_version": "solver version that computed the point",
}


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
    try:
        with atomic_output(path) as tmp:
            with netCDF4.Dataset(str(tmp), "w", format="NETCDF4") as nc:
                nc.createDimension("point", n)
                nc.createDimension("iteration", n_it)
                for key in _STRINGS:
                    v = nc.createVariable(key, str, ("point",))
                    v.long_name = _LONG_NAMES[key]
                    v[:] = np.array([str(r["pid"] if key == "point_id" else r.get(key, "")) for r in records],
                                    dtype=object)
                v = nc.createVariable("iterations", "i4", ("point",))
                v.setncatts({"units": "1", "long_name": "iterations used"})
                v[:] = np.array([r["iterations"] for r in records], dtype=np.int32)
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
                gattrs = {"Conventions": CF_VERSION, **{k: (str(x) if not isinstance(x, (int, float)) else x)
                                                         for k, x in attrs.items()}}
                nc.set_auto_mask(False)
                gattrs[CHECKSUM_ATTR] = content_digest({k: v[...] for k, v in nc.variables.items()}, gattrs)
                nc.setncatts(gattrs)
    except Exception as exc:  # netCDF4 raises RuntimeError ("NetCDF: HDF error") or OSError
        raise ProductWriteError(write_failure_line(path, exc)) from exc


def read_batch_file(path: str | os.PathLike) -> tuple[list[dict[str, Any]], dict[str, Any]]:
    """Records and global attributes of a batch file (raises on an unreadable file)."""
    import netCDF4

    with netCDF4.Dataset(str(path), "r") as nc:
        broken = verify_digest(nc)
        if broken:
            raise ValueError(broken)
        nc.set_auto_mask(False)
        attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
        cols = {k: list(nc.variables[k][:]) for k in _STRINGS}
        iterations = np.asarray(nc.variables["iterations"][:])
        wall = np.asarray(nc.variables["wall_time"][:], dtype=float)
        residual = np.asarray(nc.variables["residual"][:], dtype=float)
        skip = set(_STRINGS) | {"iterations", "wall_time", "residual"}
        coef = {name: (np.asarray(v[:], dtype=float), {k: str(v.getncattr(k)) for k in ("units", "long_name")
                                                       if k in v.ncattrs()})
                for name, v in nc.variables.items() if name not in skip}
    records = []
    for i in range(len(cols["point_id"])):
        h = residual[i]
        last = np.flatnonzero(~np.isnan(h))
        records.append({
            **{k: str(cols[k][i]) for k in _STRINGS if k != "point_id"},
            "pid": str(cols["point_id"][i]),
            "iterations": int(iterations[i]),
            "wall_time": float(wall[i]),
            "residual": h[: last[-1] + 1] if last.size else h[:0],
            "coefficients": {name: (float(vals[i]), a) for name, (vals, a) in coef.items()
                             if not np.isnan(vals[i])},
        })
    return records, attrs
