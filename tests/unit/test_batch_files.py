"""Batch files carry what gather needs (records, discretization, time series): solved and reused
points give the same record, a changed byte is caught, an older layout is refused."""

import json

import netCDF4
import numpy as np
import pytest

from knudsweep.batch_files import BATCH_LAYOUT, SERIES_COORD, complete_record, read_batch_file, write_batch_file
from knudsweep.families.relaxation import FAMILY
from knudsweep.gather import gather_family
from knudsweep.point_files import read_point_record, record_from_result
from knudsweep.solver.netcdf_io import write_result

SECTION = {
    "gases": ["Ar"],
    "pressures": [100.0],
    "temperatures": [300.0],
    "initial_states": ["two_beams"],
    "molecular_models": ["maxwell"],
    "methods": ["bgk"],
    "n_particles": [],
    "run": {"t_end": 2.0, "n_output": 5, "n_velocity": 12},
}


@pytest.fixture(scope="module")
def solved(tmp_path_factory):
    root = tmp_path_factory.mktemp("batch")
    (point,) = FAMILY.points(SECTION)
    result = FAMILY.solve(point.values, max_iter=None, section=SECTION)
    assert result.status == "converged"
    path = root / f"{point.pid}.nc"
    write_result(result, path, {"point_id": point.pid, "point_values": point.values})
    return root, point, result, path


def _same(a, b):
    assert a.keys() == b.keys()
    for key in a:
        if key == "series":
            assert a[key]["dim"] == b[key]["dim"] == "time"
            np.testing.assert_array_equal(a[key]["coord"][0], b[key]["coord"][0])
            assert a[key]["coord"][1] == b[key]["coord"][1]
            assert a[key]["vars"].keys() == b[key]["vars"].keys()
            for name in a[key]["vars"]:
                np.testing.assert_array_equal(a[key]["vars"][name][0], b[key]["vars"][name][0])
                assert a[key]["vars"][name][1] == b[key]["vars"][name][1], name
        elif key == "residual":
            np.testing.assert_array_equal(a[key], b[key])
        elif key != "wall_time":
            assert a[key] == b[key], key


def test_solved_and_reused_records_agree_and_survive_the_batch_file(solved, tmp_path):
    root, point, result, path = solved
    fresh = complete_record(record_from_result(result, point.pid), result=result)
    reused = complete_record(read_point_record(path, point.pid, point.values)[0], path=path)
    _same(fresh, reused)
    assert {"h_function", "anisotropy", "time_s"} <= set(fresh["series"]["vars"])
    # why a relaxation time is left out travels with the record (the fit notes)
    assert "note" in json.loads(fresh["discretization"])["fourth_moment_fit"]
    batch = tmp_path / "b.nc"
    write_batch_file([{**fresh, "source": "solved"}], batch, {"batch": "relaxation/b000-0"})
    (back,), attrs = read_batch_file(batch)
    assert attrs["batch_layout"] == BATCH_LAYOUT and attrs["series_dimension"] == "time"
    _same({k: v for k, v in back.items() if k != "source"}, fresh)


def test_gather_takes_the_series_from_the_records_only(solved, tmp_path):
    root, point, result, path = solved
    rec = complete_record(record_from_result(result, point.pid), result=result)
    batch = tmp_path / "b.nc"
    write_batch_file([{**rec, "source": "solved"}], batch, {"batch": "relaxation/b000-0"})
    records = {r["pid"]: r for r in read_batch_file(batch)[0]}
    path.unlink()  # gather must not need the point file
    try:
        ds = gather_family(FAMILY, SECTION, [point], records)
    finally:
        write_result(result, path, {"point_id": point.pid, "point_values": point.values})
    np.testing.assert_array_equal(ds["time"].values, result.coords["time"].value)
    np.testing.assert_array_equal(ds["h_function"].values.ravel(), result.profiles["h_function"].value)
    assert ds["discretization"].values.ravel()[0] == json.dumps(result.discretization, sort_keys=True, default=str)


def test_changed_series_value_and_old_layout_are_refused(solved, tmp_path):
    root, point, result, path = solved
    rec = complete_record(record_from_result(result, point.pid), result=result)
    batch = tmp_path / "b.nc"
    write_batch_file([{**rec, "source": "solved"}], batch, {"batch": "relaxation/b000-0"})
    with netCDF4.Dataset(str(batch), "a") as nc:
        nc.variables["h_function"][0, 1] = 0.5
    with pytest.raises(ValueError, match="checksum mismatch"):
        read_batch_file(batch)
    write_batch_file([{**rec, "source": "solved"}], batch, {"batch": "relaxation/b000-0"})
    with netCDF4.Dataset(str(batch), "a") as nc:
        nc.delncattr("batch_layout")  # as written before the series were carried
        assert nc.variables[SERIES_COORD].dimensions == ("point", "series_index")
    with pytest.raises(ValueError, match="layout 1"):
        read_batch_file(batch)
