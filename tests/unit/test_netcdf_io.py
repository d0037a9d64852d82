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
        parameters={"delta": 1.0, "model": "bgk", "alpha": 0.9},
        coords={"y": Quantity(y, "1", "position across the gap / gap", ("y",))},
        profiles={"velocity": Quantity(1.0 - 4 * y**2, "1", "reduced velocity", ("y",))},
        coefficients={"G_P": Quantity(0.7, "1", "reduced Poiseuille flow rate")},
        discretization={"n_space": 7, "n_velocity": 8},
        convergence=ConvergenceRecord(np.array([1.0, 1e-3, 1e-9]), 3, status,
                                      "" if status == "converged" else "max_iter reached", 1e-8),
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
