"""One flipped bit, or an edited status, in a point file or a batch file is detected on read.

Point files and batch files carry ``content_sha256``: a SHA-256 over every
variable's bytes and the attributes that give the numbers their meaning
(knudsweep.solver.netcdf_io.content_digest). Without it, a flipped bit in the stored
G_P (1.5383 becoming 1.0383) was gathered as converged.
"""

from __future__ import annotations

import struct

import netCDF4
import numpy as np
import pytest

from knudsweep.batch_files import read_batch_file, write_batch_file
from knudsweep.config import validate_study
from knudsweep.plan import StudyPlan
from knudsweep.point_files import read_point_record
from knudsweep.point_job import solve_point

STUDY = {
    "study": "bits",
    "plane_channel": {
        "problems": ["poiseuille"],
        "models": ["bgk"],
        "gases": ["Ar"],
        "walls": [{"model": "maxwell", "alpha": 1.0}],
        "delta": [1.0],
        "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1e-6},
    },
}


@pytest.fixture()
def point(tmp_path):
    study = validate_study(STUDY)
    (p,) = StudyPlan(study).points.values()
    path = tmp_path / "p.nc"
    solve_point(p.family, dict(p.values), path, section=study["plane_channel"], pid=p.pid)
    record, why = read_point_record(path, p.pid, p.values)
    assert record is not None, why
    return p, path, record


def _flip_bit_of(path, value: float, byteorder: str, bit: int = 54) -> None:
    """Flip one bit of the stored 8-byte float ``value`` (found by its bytes in the file)."""
    data = bytearray(path.read_bytes())
    raw = struct.pack(f"{byteorder}d", value)
    at = data.find(raw)
    assert at >= 0 and data.find(raw, at + 1) < 0, "the value must occur exactly once"
    word = int.from_bytes(data[at : at + 8], "big" if byteorder == ">" else "little") ^ (1 << bit)
    data[at : at + 8] = word.to_bytes(8, "big" if byteorder == ">" else "little")
    path.write_bytes(bytes(data))


def test_a_flipped_bit_in_a_stored_coefficient_is_detected(point):
    p, path, record = point
    g = record["coefficients"]["G_P"][0]
    _flip_bit_of(path, g, ">")  # netCDF classic stores big-endian
    with netCDF4.Dataset(str(path)) as nc:  # the file still opens, with another number in it
        changed = float(nc.variables["G_P"].getValue())
    assert changed != g and np.isfinite(changed)
    again, why = read_point_record(path, p.pid, p.values)
    assert again is None and "checksum mismatch" in why


def test_an_edited_status_is_detected(point):
    p, path, _ = point
    with netCDF4.Dataset(str(path), "a") as nc:
        nc.setncattr("status_reason", "edited by hand")
    again, why = read_point_record(path, p.pid, p.values)
    assert again is None and "checksum mismatch" in why


def test_edited_point_values_are_corrupt_not_outdated(point):
    # an outdated file (inputs edited since) is replaced quietly; a hand edit must still be
    # caught as corrupt, so the checksum is verified before the values are compared
    from knudsweep.point_files import OUTDATED

    p, path, _ = point
    with netCDF4.Dataset(str(path), "a") as nc:
        nc.setncattr("point_values", nc.getncattr("point_values").replace("}", ', "edited": 1}', 1))
    again, why = read_point_record(path, p.pid, p.values)
    assert again is None and "checksum mismatch" in why and not why.startswith(OUTDATED)


def test_a_flipped_bit_in_a_batch_file_is_detected(point, tmp_path):
    p, _, record = point
    path = tmp_path / "batch.nc"
    write_batch_file([{**record, "source": "solved"}], path, {"batch": "plane_channel/b000-00000000"})
    records, _ = read_batch_file(path)
    assert records[0]["coefficients"]["G_P"][0] == record["coefficients"]["G_P"][0]
    _flip_bit_of(path, record["coefficients"]["G_P"][0], "<")  # HDF5 stores native (little-endian) here
    with pytest.raises(Exception, match="checksum mismatch"):
        read_batch_file(path)


def test_a_file_of_an_older_layout_is_outdated_for_the_batch_job_and_the_status(point):
    # layout 1 named the plane channel's parameters differently (param_model, param_lower_alpha):
    # such a file is sound but outdated (solved again and replaced), not corrupt
    from knudsweep.point_files import OUTDATED, identity, read_header
    from knudsweep.solver.netcdf_io import POINT_LAYOUT, read_result, write_result
    from knudsweep.status import read_status

    p, path, _ = point
    assert read_header(path)["point_layout"] == POINT_LAYOUT
    assert not read_status(path, update_sidecar=False, pid=p.pid, values=p.values).outdated
    write_result(read_result(path), path, {**identity(p.pid, p.values), "point_layout": 1})
    again, why = read_point_record(path, p.pid, p.values)
    assert again is None and why == OUTDATED + f"point file layout 1, this code writes layout {POINT_LAYOUT}"
    for update_sidecar in (True, True, False):  # from the file (writes the sidecar), then from the sidecar
        st = read_status(path, update_sidecar=update_sidecar, pid=p.pid, values=p.values)
        assert st.state == "converged" and st.outdated and st.outdated_reason.startswith("point file layout 1")


def test_a_file_without_a_layout_is_outdated(point):
    # files written before point_layout existed carry no such attribute: layout 1
    from knudsweep.point_files import OUTDATED
    from knudsweep.solver.netcdf_io import CHECKSUM_ATTR, content_digest

    p, path, _ = point
    with netCDF4.Dataset(str(path), "a") as nc:  # as an older writer left it, checksum made without the layout
        nc.delncattr("point_layout")
        nc.set_auto_mask(False)
        attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
        nc.setncattr(CHECKSUM_ATTR, content_digest({k: v[...] for k, v in nc.variables.items()}, attrs))
    again, why = read_point_record(path, p.pid, p.values)
    assert again is None and why.startswith(OUTDATED + "point file layout 1")
