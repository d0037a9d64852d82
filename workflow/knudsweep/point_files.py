"""Point files: the one module that writes, reads, identifies and replaces them.

``results/points/<pid>.nc`` holds one solved point (:mod:`knudsweep.solver.netcdf_io`
turns the solver result into the netCDF file, atomically; this module adds
what ties the file to its point).  Everything in the study layer that touches
a point file goes through here: the batch job (:func:`read_point_record`,
:func:`write_point`, :func:`move_aside`), the status listing
(:func:`read_header`, :func:`identity_problem`) and the tests.

Identity
    :func:`identity` gives the attributes written into every point file:
    ``point_id`` (its path below ``results/points/``), ``point_values`` (the
    canonical values it was solved for, JSON), ``code_version`` (the solver
    version) and ``point_layout`` (the file contract,
    :data:`knudsweep.solver.netcdf_io.POINT_LAYOUT`).  All four enter the file's
    checksum (``netcdf_io.CHECKED_ATTRS``).

A *record* is what the batch file and the gathered sweep keep of a point::

    {"pid", "status", "reason", "code_version", "iterations", "wall_time",
     "residual": 1-D array, "coefficients": {name: (value, {"units", "long_name"})}}

A point file is *valid* for point ``pid`` with canonical ``values`` when it
opens, has a ``status``, its checksum matches and :func:`identity_problem`
finds nothing: ``point_id`` is ``pid``, ``point_values`` equals ``values``,
``point_layout`` and ``code_version`` are this code's.  Anything else is
invalid, in one of two kinds:

- *outdated*: a sound file of this point from an earlier state of its inputs
  (another solver version, an older file layout, or values that changed, e.g.
  after an edit of the gas data), its checksum intact.  The reason starts with
  :data:`OUTDATED` ("outdated: "); the batch job solves the point again and the
  new file replaces the old one.
- *corrupt*: unreadable, a checksum mismatch, not a point file, or another
  point's file copied over it.  The batch job moves it aside
  (``<file>.corrupt``) and solves the point again.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import numpy as np

from knudsweep.solver import __version__
from knudsweep.solver.netcdf_io import POINT_LAYOUT, verify_digest, write_result

_NOT_COEFFICIENTS = {"iterations", "wall_time"}
OUTDATED = "outdated: "  # prefix of the reason of a sound file from earlier inputs
# Global attributes the status listing needs (read without loading any variable).
HEADER_ATTRS = (
    "status",
    "status_reason",
    "iterations_used",
    "code_version",
    "point_layout",
    "point_id",
    "point_values",
)


def canonical_json(values: dict[str, Any]) -> Any:
    """``values`` as they come back from the JSON of a file's ``point_values`` attribute."""
    return json.loads(json.dumps(dict(values), sort_keys=True))


def identity(pid: str, values: dict[str, Any]) -> dict[str, Any]:
    """The attributes that tie a point file to point ``pid`` with canonical ``values`` (see the module notes)."""
    return {"code_version": __version__, "point_layout": POINT_LAYOUT, "point_id": pid, "point_values": values}


def identity_problem(attrs: dict[str, Any], pid: str, values: dict[str, Any] | None = None) -> str:
    """Empty string if the global attributes ``attrs`` identify a current file of point ``pid``, else why not.

    A file of another point is corrupt (the reason names it); one of this point
    from earlier inputs is outdated (the reason starts with :data:`OUTDATED`).
    ``values`` None skips the comparison of the point values.
    """
    if attrs.get("point_id") != pid:
        return f"file holds point {attrs.get('point_id')!r}, not {pid!r}"
    if values is not None:
        try:
            stored = json.loads(attrs.get("point_values", "null"))
        except (TypeError, ValueError):
            stored = None
        if stored != canonical_json(values):
            return OUTDATED + "its point_values differ from the point's values (inputs edited)"
    layout = int(attrs.get("point_layout", 1))
    if layout != POINT_LAYOUT:
        return OUTDATED + f"point file layout {layout}, this code writes layout {POINT_LAYOUT}"
    version = str(attrs.get("code_version", ""))
    if version != __version__:
        return OUTDATED + f"computed by solver version {version or '?'}, this is {__version__}"
    return ""


def write_point(
    result, path: str | os.PathLike, pid: str, values: dict[str, Any], provenance: dict[str, Any] | None = None
) -> Path:
    """Write the point file of ``result`` (point ``pid``, canonical ``values``) atomically.

    ``provenance``: further global attributes (config hash, tries, timings).
    """
    return write_result(result, path, {**(provenance or {}), **identity(pid, values)})


def read_header(path: str | os.PathLike, names=HEADER_ATTRS) -> dict[str, Any]:
    """The global attributes ``names`` that the file at ``path`` has (no variable is read; raises if unreadable)."""
    import netCDF4

    with netCDF4.Dataset(str(path), "r") as nc:
        present = nc.ncattrs()
        return {k: _plain(nc.getncattr(k)) for k in names if k in present}


def _plain(value):
    return value.item() if isinstance(value, np.generic) else value


def record_from_result(result, pid: str) -> dict[str, Any]:
    """The record of a freshly solved point (a failed point has no coefficients)."""
    conv = result.convergence
    return {
        "pid": pid,
        "status": conv.status,
        "reason": conv.reason,
        "code_version": __version__,
        "iterations": int(conv.iterations),
        "wall_time": float(result.wall_time),
        "residual": np.asarray(conv.residuals, dtype=float),
        "coefficients": {
            name: (float(q.value), {"units": q.units, "long_name": q.long_name})
            for name, q in result.coefficients.items()
        },
    }


def read_point_record(path: str | os.PathLike, pid: str, values: dict[str, Any]) -> tuple[dict[str, Any] | None, str]:
    """``(record, "")`` if ``path`` is a valid file of point ``pid``; else ``(None, why)``.

    ``why`` is "missing" when there is no file, otherwise a one-line reason.
    """
    if not os.path.exists(path):
        return None, "missing"
    import netCDF4

    try:
        with netCDF4.Dataset(str(path), "r") as nc:
            attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
            if "status" not in attrs or "residual" not in nc.variables:
                return None, "not a knudsweep point file (no status attribute or residual)"
            why = verify_digest(nc) or identity_problem(attrs, pid, values)
            if why:
                return None, why
            coefficients = {}
            for name, var in nc.variables.items():
                if var.ndim == 0 and name not in _NOT_COEFFICIENTS:
                    coefficients[name] = (
                        float(var.getValue()),
                        {k: str(var.getncattr(k)) for k in ("units", "long_name") if k in var.ncattrs()},
                    )
            record = {
                "pid": pid,
                "status": str(attrs["status"]),
                "reason": str(attrs.get("status_reason", "")),
                "code_version": str(attrs["code_version"]),
                "iterations": int(nc.variables["iterations"].getValue()),
                "wall_time": float(nc.variables["wall_time"].getValue()),
                "residual": np.asarray(nc.variables["residual"][:], dtype=float),
                "coefficients": coefficients,
            }
    except Exception as exc:  # any failure to read makes the file invalid
        return None, f"unreadable ({type(exc).__name__}: {exc})"
    return record, ""


def valid_records(points, paths: dict[str, str | os.PathLike]) -> dict[str, dict[str, Any]]:
    """Records of the ``points`` (:class:`knudsweep.families.Point`) whose file in ``paths`` is valid."""
    out = {}
    for p in points:
        record, _ = read_point_record(paths[p.pid], p.pid, p.values)
        if record is not None:
            out[p.pid] = record
    return out


def move_aside(path: str | os.PathLike) -> str:
    """Rename an invalid point file to ``<path>.corrupt`` (replacing an older one); returns the new path."""
    aside = f"{path}.corrupt"
    os.replace(path, aside)
    return aside
