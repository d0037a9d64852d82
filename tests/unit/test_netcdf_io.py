"""knudsweep.solver.netcdf_io: round trip of a SolverResult and atomic writes."""

import os

import numpy as np
import pytest
import xarray as xr

from knudsweep.solver import netcdf_io
from knudsweep.solver.netcdf_io import read_result, write_result
from knudsweep.solver.result import FAILED, ConvergenceRecord, Quantity, SolverResult


def sample_result(status="converged"):
    y = np.linspace(-0.5, 0.5, 7)
    return SolverResult(
        family="plane_channel",
        problem="poiseuille",
        parameters={"delta": 1.0, "kinetic_model": "bgk", "alpha": 0.9},
        coords={"y": Quantity(y, "1", "position across the gap / gap", ("y",))},
        profiles={"velocity": Quantity(1.0 - 4 * y**2, "1", "reduced velocity", ("y",))},
        coefficients={"G_P": Quantity(0.7, "1", "reduced Poiseuille flow rate")},
        discretization={"n_space": 7, "n_velocity": 8},
        convergence=ConvergenceRecord(
            np.array([1.0, 1e-3, 1e-9]), 3, status, "" if status == "converged" else "max_iter reached", 1e-8
        ),
        wall_time=0.25,
    )


def test_round_trip_keeps_everything(tmp_path):
    res = sample_result()
    path = write_result(res, tmp_path / "a" / "p.nc", {"config_hash": "abc", "point_id": "x/y"})
    back = read_result(path)
    assert back.family == res.family and back.problem == res.problem
    assert back.parameters == res.parameters
    assert back.discretization == res.discretization
    np.testing.assert_array_equal(back.coords["y"].value, res.coords["y"].value)
    np.testing.assert_array_equal(back.profiles["velocity"].value, res.profiles["velocity"].value)
    assert back.coefficient("G_P") == 0.7
    assert back.coefficients["G_P"].units == "1"
    np.testing.assert_array_equal(back.convergence.residuals, res.convergence.residuals)
    assert back.convergence.iterations == 3 and back.status == "converged"
    assert back.wall_time == 0.25
    with xr.open_dataset(path) as ds:
        assert ds.attrs["config_hash"] == "abc" and ds.attrs["point_id"] == "x/y"
        assert ds.attrs["Conventions"].startswith("CF-")
        assert all("units" in ds[v].attrs for v in ds.data_vars)


def test_failed_status_and_reason_survive(tmp_path):
    back = read_result(write_result(sample_result(FAILED), tmp_path / "f.nc"))
    assert back.status == FAILED and back.convergence.reason == "max_iter reached"


def test_interrupted_write_leaves_no_file_and_no_temporary(tmp_path, monkeypatch):
    target = tmp_path / "p.nc"

    def broken(ds, path):
        with open(path, "wb") as fh:  # a half-written temporary, then the crash
            fh.write(b"CDF\x01 truncated")
        raise KeyboardInterrupt  # what a kill during the write looks like to Python

    monkeypatch.setattr(netcdf_io, "write_point_netcdf", broken)
    with pytest.raises(KeyboardInterrupt):
        write_result(sample_result(), target)
    assert os.listdir(tmp_path) == []


def test_failed_rewrite_keeps_the_old_complete_file(tmp_path, monkeypatch):
    target = tmp_path / "p.nc"
    write_result(sample_result(), target)
    before = target.read_bytes()

    def broken(ds, path):
        raise OSError("disk full")

    monkeypatch.setattr(netcdf_io, "write_point_netcdf", broken)
    with pytest.raises(OSError):
        write_result(sample_result(), target)
    assert target.read_bytes() == before
    assert sorted(os.listdir(tmp_path)) == ["p.nc"]


def test_temporary_lives_in_the_target_directory(tmp_path, monkeypatch):
    seen = []
    real = netcdf_io.write_point_netcdf

    def spy(ds, path):
        seen.append(os.path.dirname(os.fspath(path)))
        return real(ds, path)

    monkeypatch.setattr(netcdf_io, "write_point_netcdf", spy)
    netcdf_io.write_result(sample_result(), tmp_path / "sub" / "p.nc")
    # same directory => os.replace is an atomic rename on the same filesystem
    assert seen == [str(tmp_path / "sub")]


def test_atomic_replace_flushes_renames_and_keeps_the_old_file_on_error(tmp_path, monkeypatch):
    from knudsweep.solver import atomic

    synced = []
    real_fsync = os.fsync
    monkeypatch.setattr(atomic.os, "fsync", lambda fd: synced.append(fd) or real_fsync(fd))
    target = tmp_path / "t.txt"
    atomic.atomic_write_text(target, "one")
    assert target.read_text() == "one" and len(synced) == 1
    atomic.atomic_write_text(target, "cache", fsync=False)  # caches checked on every read skip the flush
    assert target.read_text() == "cache" and len(synced) == 1

    def broken(tmp):
        tmp.write_text("half")
        raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        atomic.atomic_replace(target, broken)
    assert target.read_text() == "cache" and os.listdir(tmp_path) == ["t.txt"]
    assert atomic.TEMPORARY_NAME.match(atomic.temporary_name(target).name)["final"] == "t.txt"


def test_point_files_name_each_parameter_the_same_way_in_every_geometry(tmp_path):
    # one name per quantity: kinetic_model, and the wall as walls.*.describe() names it
    # (the plane channel's two plates with the suffix _lower / _upper)
    from knudsweep.solver.plane_channel import solve_plane_channel
    from knudsweep.solver.tube import solve_tube
    from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

    plane = solve_plane_channel(
        "poiseuille",
        delta=1.0,
        model="s_model",
        lower_wall=MaxwellWall(0.9),
        upper_wall=CercignaniLampisWall(0.8, 0.5),
        n_space=8,
        n_velocity=8,
        tol=1e-6,
        error_estimate=False,
    )
    tube = solve_tube(
        "poiseuille",
        delta=1.0,
        model="s_model",
        wall=MaxwellWall(0.9),
        n_space=8,
        n_velocity=8,
        tol=1e-6,
        error_estimate=False,
    )
    with xr.open_dataset(write_result(plane, tmp_path / "plane.nc")) as ds:
        plane_attrs = dict(ds.attrs)
    with xr.open_dataset(write_result(tube, tmp_path / "tube.nc")) as ds:
        tube_attrs = dict(ds.attrs)
    assert plane_attrs["param_kinetic_model"] == tube_attrs["param_kinetic_model"] == "s_model"
    assert tube_attrs["param_wall_model"] == plane_attrs["param_wall_model_lower"] == "maxwell"
    assert tube_attrs["param_alpha"] == plane_attrs["param_alpha_lower"] == 0.9
    assert plane_attrs["param_wall_model_upper"] == "cercignani_lampis"
    assert (plane_attrs["param_alpha_t_upper"], plane_attrs["param_alpha_n_upper"]) == (0.8, 0.5)
    assert plane_attrs["point_layout"] == tube_attrs["point_layout"] == netcdf_io.POINT_LAYOUT
    names = set(plane_attrs) | set(tube_attrs)
    assert not {"param_model", "param_lower_alpha", "param_upper_alpha_t"} & names  # layout 1 names
