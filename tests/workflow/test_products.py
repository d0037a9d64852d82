"""Gather, status, tables and figures on point files built by hand (no solver run).

The point files are written with knudsweep.solver.netcdf_io from SolverResults whose G_P
follows the first-order slip formula delta/6 + sigma_P, so the expected table
ratios are known exactly.  The batch files are made from them by the batch
job's verification step (no point left to solve is solved here).
"""

import hashlib
import json
import math

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from precision import ROUND_OFF, ROUND_OFF_SUM, SIX_DIGITS

from knudsweep import gather as gather_mod
from knudsweep.config import validate_study
from knudsweep.families import get_family
from knudsweep.families.plane_channel.report import SIGMA_P_DIFFUSE, slip_gp
from knudsweep.figures import save_figure
from knudsweep.gather import gather_study, open_sweep
from knudsweep.plan import StudyPlan
from knudsweep.solver.gas import pressure_from_delta
from knudsweep.solver.netcdf_io import write_result
from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult
from knudsweep.status import requeue, study_status
from knudsweep.tables import write_tables

STUDY = {
    "study": "hand",
    "plane_channel": {
        "problems": ["poiseuille", "thermal_creep"],
        "models": ["bgk"],
        "gases": ["Ar", "He"],
        "walls": [{"alpha": 1.0}, {"alpha": 0.8}],
        "delta": [0.01, 1.0, 100.0],
        "conditions": {"temperature": 300.0, "gap": 2e-6},
    },
    "figures": {"formats": ["png", "pdf"], "width": 4.0, "height": 3.0, "dpi": 60},
    "execution": {"points_per_batch": 2},
}


def write_batches_from_point_files(plan, root):
    """What each batch job records before it solves anything: the valid point files."""
    from knudsweep.batch_files import write_batch_file
    from knudsweep.batch_job import verify_points

    for key, batch in plan.batches.items():
        records, _ = verify_points({pid: plan.points[pid].values for pid in batch.pids}, root=root)
        write_batch_file(
            [records[pid] for pid in batch.pids if pid in records], root / plan.batch_file(key), {"batch": key}
        )


def synthetic(point, status=CONVERGED):
    v = point.values
    d = v["delta"]
    name = "G_P" if v["problem"] == "poiseuille" else "G_T"
    value = d / 6 + SIGMA_P_DIFFUSE if name == "G_P" else 0.5 / (1 + d)
    n = 5 + int(10 * math.log10(d) + 20)
    return SolverResult(
        family="plane_channel",
        problem=v["problem"],
        parameters={"delta": d},
        coefficients={} if status == FAILED else {name: Quantity(value, "1", f"reduced flow rate {name}")},
        convergence=ConvergenceRecord(
            np.geomspace(1, 1e-9, n), n, status, "max_iter reached" if status == FAILED else "", 1e-8
        ),
        wall_time=0.01,
    )


@pytest.fixture
def sweep(tmp_path):
    plan = StudyPlan(validate_study(STUDY))
    points = list(plan.points.values())
    failed, missing, corrupt = points[1], points[4], points[3]
    for p in points:
        if p is missing:
            continue
        path = tmp_path / plan.point_file(p.pid)
        if p is corrupt:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(b"CDF\x01 this is not a complete file")
            continue
        write_result(
            synthetic(p, FAILED if p is failed else CONVERGED), path, {"point_id": p.pid, "point_values": p.values}
        )
    write_batches_from_point_files(plan, tmp_path)
    out = tmp_path / plan.sweep_file
    gather_study(plan, out, workers=1, root=tmp_path)
    return plan, out, (failed, missing, corrupt), tmp_path


def test_gather_grid_status_and_nan(sweep):
    plan, out, (failed, missing, corrupt), root = sweep
    ds = open_sweep(out, "plane_channel")
    assert ds["G_P"].dims == ("problem", "model", "wall", "delta")
    assert list(ds["delta"].values) == [0.01, 1.0, 100.0]
    assert list(ds["wall"].values) == ["maxwell-alpha=1.0", "maxwell-alpha=0.8"]
    np.testing.assert_allclose(ds["kn"].values, math.sqrt(math.pi) / (2 * ds["delta"].values), rtol=SIX_DIGITS)

    def at(p, var):
        return ds[var].sel(**p.index).item()

    assert at(failed, "status") == "failed" and at(failed, "reason") == "max_iter reached"
    assert math.isnan(at(failed, "G_P"))
    assert at(missing, "status") == "missing" and math.isnan(at(missing, "G_P"))
    assert at(corrupt, "status") == "missing" and math.isnan(at(corrupt, "G_P"))
    good = [p for p in plan.points.values() if p not in (failed, missing, corrupt)]
    for p in good:
        assert at(p, "status") == "converged"
    p = next(p for p in good if p.values["problem"] == "poiseuille")
    assert at(p, "G_P") == pytest.approx(p.values["delta"] / 6 + SIGMA_P_DIFFUSE, rel=ROUND_OFF)
    # G_T is NaN on the poiseuille rows: a problem only fills its own coefficients
    assert np.isnan(ds["G_T"].sel(problem="poiseuille")).all()
    with xr.open_dataset(out) as root_ds:
        assert root_ds.attrs["study"] == "hand" and root_ds.attrs["families"] == "plane_channel"


def test_sweep_file_follows_cf(sweep):
    # CF-1.11: coordinate variables numeric and monotonic (section 1.3), text labels as auxiliary
    # coordinates (6.1), flags with flag_values/flag_meanings (3.5), a declared _FillValue (2.5.1)
    import netCDF4

    plan, out, (failed, missing, _), root = sweep
    with netCDF4.Dataset(str(out)) as nc:
        assert nc.Conventions == "CF-1.11"
        assert "gathered by knudsweep" in nc.history and nc.source.startswith("knudsweep solver")
        g = nc.groups["plane_channel"]
        for name, var in g.variables.items():
            if name in g.dimensions:  # a coordinate variable
                assert var.dtype.kind in "if" and np.all(np.diff(var[:]) > 0), name
            assert "long_name" in var.ncattrs(), name
        for dim in ("problem", "model", "wall"):
            assert dim not in g.variables and g.variables[f"{dim}_label"].dimensions == (dim,)
        status = g.variables["status"]
        assert status.dtype == np.int8 and list(status.flag_values) == [0, 1, 2]
        assert status.flag_meanings == "converged failed missing" and "units" not in status.ncattrs()
        it = g.variables["iterations"]
        assert it.dtype == np.int32 and it._FillValue == -2147483647
        assert "-1" not in it.long_name
        assert "coordinates" in g.variables["G_P"].ncattrs()
        sym = g.variables["symmetric_walls"]
        assert sym.dtype == np.int8 and list(sym.flag_values) == [0, 1] and list(sym[:]) == [1, 1]
        assert sym.flag_meanings == "plates_differ plates_alike"
    ds = open_sweep(out, "plane_channel")  # labels and status words come back
    assert ds["status"].sel(**failed.index).item() == "failed"
    assert ds["status"].sel(**missing.index).item() == "missing"
    assert math.isnan(ds["iterations"].sel(**missing.index).item())
    assert ds["iterations"].sel(**failed.index).item() > 0
    assert json.loads(ds["discretization"].sel(**failed.index).item()) == {}


def test_unordered_numeric_axis_becomes_a_label(tmp_path):
    ds = xr.Dataset(
        {
            "x": (("delta",), [1.0, 2.0, 3.0]),
            "status": (("delta",), ["converged", "failed", "missing"]),
            "iterations": (("delta",), [3.0, 5.0, np.nan]),
        },
        coords={"delta": ("delta", [1.0, 0.1, 10.0], {"units": "1"})},
    )
    enc_ds, enc = gather_mod.to_cf(ds)
    assert "delta" not in enc_ds.variables and "delta_label" in enc_ds.coords
    back = gather_mod.from_cf(enc_ds)
    assert list(back["delta"].values) == [1.0, 0.1, 10.0] and list(back["status"].values) == [
        "converged",
        "failed",
        "missing",
    ]
    with pytest.raises(ValueError, match="status"):
        gather_mod.to_cf(ds.assign(status=(("delta",), ["converged", "done", "missing"])))


def test_corrupt_file_is_moved_aside_and_requeued(sweep):
    plan, out, (_, _, corrupt), root = sweep
    path = root / plan.point_file(corrupt.pid)
    assert not path.exists()
    assert (root / (plan.point_file(corrupt.pid) + ".corrupt")).exists()
    rows = {r.pid: r for r in study_status(plan, root)}
    assert rows[corrupt.pid].state == "missing" and "corrupt" in rows[corrupt.pid].reason


def test_status_and_requeue_failed(sweep):
    plan, _, (failed, missing, _), root = sweep
    rows = {r.pid: r for r in study_status(plan, root)}
    assert rows[failed.pid].state == "failed" and rows[failed.pid].reason == "max_iter reached"
    assert rows[missing.pid].state == "missing"
    assert sum(r.state == "converged" for r in rows.values()) == len(rows) - 3
    removed = requeue(list(rows.values()))
    assert removed == [str(root / plan.point_file(failed.pid))]
    assert {r.pid: r.state for r in study_status(plan, root)}[failed.pid] == "missing"


def test_parallel_read_in_processes_equals_serial(sweep, monkeypatch):
    plan, _, _, root = sweep
    paths = [str(root / f) for f in plan.batch_files()]
    assert len(paths) == 6  # 12 points, 2 per batch
    serial = gather_mod.read_batches(paths, workers=1)
    monkeypatch.setattr(gather_mod, "_MIN_FILES_PER_WORKER", 2)
    parallel = gather_mod.read_batches(paths, workers=2)
    assert list(parallel) == list(serial) and len(serial) == len(plan.points) - 2  # missing, corrupt
    for pid, a in serial.items():
        b = parallel[pid]
        assert a["coefficients"] == b["coefficients"] and a["status"] == b["status"]
        np.testing.assert_array_equal(a["residual"], b["residual"])


def test_point_file_of_another_point_is_not_recorded(sweep):
    # issue: a file copied over another point's name must never be gathered under that name
    plan, _, _, root = sweep
    from knudsweep.batch_job import verify_points

    good = [p for p in plan.points.values() if (root / plan.point_file(p.pid)).exists()]
    src, dst = good[0], good[1]
    (root / plan.point_file(dst.pid)).write_bytes((root / plan.point_file(src.pid)).read_bytes())
    # knudsweep status sees it too
    from knudsweep.status import study_status

    row = next(r for r in study_status(plan, root) if r.pid == dst.pid)
    assert row.state == "corrupt" and src.pid in row.reason
    records, todo = verify_points({dst.pid: dst.values}, root=root)
    assert records == {} and todo == [dst.pid]
    assert (root / (plan.point_file(dst.pid) + ".corrupt")).exists()


def test_unreadable_batch_file_is_removed_with_one_line(sweep):
    plan, out, _, root = sweep
    victim = root / plan.batch_files()[0]
    victim.write_bytes(b"not netcdf")
    with pytest.raises(gather_mod.BatchFileError, match="unreadable batch file"):
        gather_study(plan, out, workers=1, root=root)
    assert not victim.exists()


def test_tables_have_units_references_and_gas_pressures(sweep):
    plan, out, (failed, _, _), root = sweep
    section = plan.study["plane_channel"]
    tables = get_family("plane_channel").tables(open_sweep(out, "plane_channel"), section)
    written = write_tables(tables, root / "tables")
    assert sorted(p.name for p in written) == sorted(
        f"plane_channel_{p}.{ext}" for p in ("poiseuille", "thermal_creep") for ext in ("csv", "md")
    )
    frame = pd.read_csv(root / "tables" / "plane_channel_poiseuille.csv")
    for col in (
        "delta [1]",
        "Kn [1]",
        "pressure [Pa]",
        "G_P [1]",
        "G_P / (delta/6) [1]",
        "G_P / G_slip [1]",
        "G_P / G_fm,asymptotic [1]",
    ):
        assert col in frame.columns
    row = frame[
        (frame["gas"] == "He")
        & (frame["delta [1]"] == 100.0)
        & (frame["wall"] == "maxwell-alpha=1.0")
        & (frame["status"] == "converged")
    ].iloc[0]
    # synthetic G_P = delta/6 + sigma_P, so the slip ratio is 1 for diffuse walls (tables carry 6 digits)
    assert row["G_P / G_slip [1]"] == pytest.approx(1.0, rel=SIX_DIGITS)
    assert row["G_P / (delta/6) [1]"] == pytest.approx(1 + 6 * SIGMA_P_DIFFUSE / 100, rel=SIX_DIGITS)
    assert row["pressure [Pa]"] == pytest.approx(pressure_from_delta("He", 100.0, 300.0, 2e-6), rel=SIX_DIGITS)
    # Ar and He rows share the reduced value (one solve, two gases)
    ar = frame[(frame["gas"] == "Ar") & (frame["delta [1]"] == 100.0) & (frame["wall"] == "maxwell-alpha=1.0")]
    assert ar["G_P [1]"].iloc[0] == row["G_P [1]"]
    assert frame[frame["status"] == "failed"]["G_P [1]"].isna().all()
    md = (root / "tables" / "plane_channel_poiseuille.md").read_text()
    assert "Sharipov & Seleznev" in md and "free-molecular asymptotic form" in md


def test_slip_formula_reduces_to_symmetric_form():
    d = np.array([0.5, 3.0, 40.0])
    np.testing.assert_allclose(slip_gp(d, 1.0162, 1.0162), d / 6 + 1.0162, rtol=ROUND_OFF_SUM)
    # one no-slip plate, one with slip: between the no-slip and symmetric-slip values
    mixed = slip_gp(d, 1e-12, 1.0162)
    assert np.all(d / 6 < mixed) and np.all(mixed < d / 6 + 1.0162)


def test_figures_are_written_and_byte_reproducible(sweep, tmp_path):
    plan, out, _, _ = sweep
    fam = get_family("plane_channel")
    section, settings = plan.study["plane_channel"], plan.study["figures"]
    names = fam.figure_names(section)

    def draw(dirname, only=None):
        import matplotlib.pyplot as plt

        figs = fam.figures(open_sweep(out, "plane_channel"), section, settings)
        assert sorted(figs) == sorted(names)
        digests = {}
        for name, fig in figs.items():
            if only is not None and name not in only:
                plt.close(fig)
                continue
            for path in save_figure(fig, tmp_path / dirname / name, settings["formats"], settings["dpi"]):
                digests[path.name] = hashlib.sha256(path.read_bytes()).hexdigest()
        return digests

    first = draw("a")
    assert len(first) == 2 * len(names)
    # saving is the slow part: compare two figures (one with asymptotes, one with histories)
    again = ["plane_channel_G_P_vs_delta", "plane_channel_convergence_poiseuille"]
    second = draw("b", only=again)
    assert second == {k: v for k, v in first.items() if k.rsplit(".", 1)[0] in again}


@pytest.mark.parametrize("family", ["plane_channel", "tube_duct", "relaxation"])
def test_products_are_registered_by_name(family):
    # each family's report module registers every table and figure builder with the rule naming its
    # outputs, so the names Snakemake plans are the names the builders return (and captions follow figures)
    from knudsweep.families import Products

    report = get_family(family).report
    assert isinstance(report.TABLES, Products) and isinstance(report.FIGURES, Products)
    assert all(caption is not None for _, _, caption in report.FIGURES._entries)


def test_a_builder_that_disagrees_with_its_names_is_refused():
    from knudsweep.families import Products

    products = Products("table")

    @products.register(lambda section: ["a", "b"])
    def build(ds, section):
        return {"a": 1}

    assert products.names({}) == ["a", "b"]
    with pytest.raises(RuntimeError, match=r"table build: built \['a'\], announced \['a', 'b'\]"):
        products.build(None, {})
