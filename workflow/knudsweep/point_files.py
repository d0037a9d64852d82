"""Point files: check one against the point it is filed under, and turn it into a record.

A *record* is what the batch file and the gathered sweep keep of a point::

    {"pid", "status", "reason", "code_version", "iterations", "wall_time",
     "residual": 1-D array, "coefficients": {name: (value, {"units", "long_name"})}}

A point file is *valid* for point ``pid`` with canonical ``values`` when it
opens, has a ``status``, its ``point_id`` attribute is ``pid``, its
``point_values`` attribute equals ``values`` and its ``code_version`` is this
solver's version.  Anything else is invalid, in one of two kinds:

- *outdated*: a sound file of this point from an earlier state of its inputs
  (another solver version, or values that changed, e.g. after an edit of the
  gas data), its checksum intact.  The reason starts with :data:`OUTDATED`
  ("outdated: "); the batch job solves the
  point again and the new file replaces the old one.
- *corrupt*: unreadable, a checksum mismatch, not a point file, or another
  point's file copied over it.  The batch job moves it aside
  (``<file>.corrupt``) and solves the point again.
"""

from __future__ import annotations

import json
import os
from typing import Any

import numpy as np

from knudsweep.solver import __version__
from knudsweep.solver.netcdf_io import verify_digest

_NOT_COEFFICIENTS = {"iterations", "wall_time"}
OUTDATED = "outdated: "  # prefix of the reason of a sound file from earlier inputs


def canonical_json(values: dict[str, Any]) -> Any:
    """``values`` as they come back from the JSON of a file's ``point_values`` attribute."""
    return json.loads(json.dumps(dict(values), sort_keys=True))


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
        "coefficients": {name: (float(q.value), {"units": q.units, "long_name": q.long_name})
                         for name, q in result.coefficients.items()},
    }


def read_point_record(path: str | os.PathLike, pid: str, values: dict[str, Any]
                      ) -> tuple[dict[str, Any] | None, str]:
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
            broken = verify_digest(nc)
            if broken:
                return None, broken
            if attrs.get("point_id") != pid:
                return None, f"file holds point {attrs.get('point_id')!r}, not {pid!r}"
            try:
                stored = json.loads(attrs.get("point_values", "null"))
            except ValueError:
                stored = None
            if stored != canonical_json(values):
                return None, OUTDATED + "its point_values differ from the point's values (inputs edited)"
            version = str(attrs.get("code_version", ""))
            if version != __version__:
                return None, OUTDATED + f"computed by solver version {version or '?'}, this is {__version__}"
            coefficients = {}
            for name, var in nc.variables.items():
                if var.ndim == 0 and name not in _NOT_COEFFICIENTS:
                    coefficients[name] = (float(var.getValue()), {k: str(var.getncattr(k)) for k in
                                                                  ("units", "long_name") if k in var.ncattrs()})
            record = {
                "pid": pid,
                "status": str(attrs["status"]),
                "reason": str(attrs.get("status_reason", "")),
                "code_version": version,
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
