"""Relaxation family of the study layer: points, solve, gather, table, figures (tiny sweep)."""

import numpy as np
import pytest
from precision import ROUND_OFF

from knudsweep.batch_files import batch_records
from knudsweep.families.relaxation import FAMILY, solver_labels
from knudsweep.gather import gather_family
from knudsweep.solver.netcdf_io import write_result
from knudsweep.tables import write_tables

# The BGK anisotropy time of Maxwell molecules is exact up to the time step and the fit of the exponential
# (tests/verification/test_relaxation_deterministic.py checks the fit to 1e-7).
BGK_FIT_RTOL = 1e-6
# DSMC with 3 replicas x 3000 particles: the anisotropy time's noise is a few %; 15 % is the bar of this tiny sweep.
DSMC_3000_RTOL = 0.15
# The fast spectral solution on a 24^3 grid: measured -2.0e-3 off the exact 2 tau_c of Maxwell molecules.
FAST_SPECTRAL_24_ERROR = 1e-2
# The band's vertices in the figure against the values they are drawn from (matplotlib path coordinates).
BAND_RTOL = 1e-9

SECTION = {
    "gases": ["Ar"],
    "pressures": [100.0],
    "temperatures": [300.0],
    "initial_states": ["anisotropic"],
    "molecular_models": ["maxwell"],
    "methods": ["dsmc", "bgk"],
    "n_particles": [3000],
    "run": {"n_replicas": 3, "t_end": 4.0, "n_output": 9, "seed": 3, "h_bins_per_axis": 4, "n_velocity": 16},
}


def test_points_identity_and_labels():
    pts = FAMILY.points(SECTION)
    assert solver_labels(SECTION) == ["dsmc-N3000", "bgk-nv16"]
    assert len(pts) == 2 and len({p.pid for p in pts}) == 2
    assert pts[0].pid.startswith("relaxation/anisotropic-1.8-0.6-0.6/gas=Ar/model=maxwell/solver=dsmc-N3000/")
    # float noise does not create a new point
    noisy = {**SECTION, "pressures": [100.0 + 1e-9]}
    assert [p.pid for p in FAMILY.points(noisy)] == [p.pid for p in pts]


def test_check_section_names_key():
    with pytest.raises(ValueError, match="n_particles"):
        FAMILY.check_section({**SECTION, "n_particles": [100]})
    with pytest.raises(ValueError, match="methods"):
        FAMILY.check_section({**SECTION, "methods": ["lattice"]})


def test_bkw_default_start_time_rounded_by_the_schema_is_accepted():
    # the schema's default and minimum are 6 ln 2.5 = 5.4977443... rounded down to 5.497744
    section = {**SECTION, "initial_states": ["bkw"], "state_options": {"bkw_start_time": 5.497744}}
    FAMILY.check_section(section)
    with pytest.raises(ValueError, match="bkw_start_time"):
        FAMILY.check_section({**section, "state_options": {"bkw_start_time": 5.0}})


def test_tiny_sweep_end_to_end(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    pts = FAMILY.points(SECTION)
    files = {}
    for p in pts:
        res = FAMILY.solve(p.values, max_iter=None, section=SECTION)
        assert res.status == "converged"
        files[p.pid] = str(tmp_path / "results" / "points" / f"{p.pid}.nc")
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    ds = gather_family(FAMILY, SECTION, pts, batch_records(pts, files))
    assert set(ds["status"].values.ravel()) == {"converged"}
    tau = ds["anisotropy_relaxation_time"].values.ravel()
    # Maxwell molecules: 2 tau_c (Truesdell & Muncaster 1980; BGK exactly, DSMC within its noise)
    assert tau[1] == pytest.approx(2.0, rel=BGK_FIT_RTOL)
    assert tau[0] == pytest.approx(2.0, rel=DSMC_3000_RTOL)
    tables = FAMILY.tables(ds, SECTION)
    frame = tables["relaxation_times"].frame
    assert "anisotropy time [s]" in frame.columns and len(frame) == 2
    # a blank time of a converged point carries its reason (the fit's note); a number carries none
    for lab in ("anisotropy", "heat flux", "fourth moment"):
        blank = frame[f"{lab} time [tau_c]"].isna()
        assert (frame.loc[blank, f"{lab} time note"] != "").all()
        assert (frame.loc[~blank, f"{lab} time note"] == "").all()
    assert frame["heat flux time [tau_c]"].isna().all()  # an anisotropic start has no heat flux
    written = write_tables(tables, tmp_path / "tables")
    assert all(w.exists() for w in written)
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    ax = figs["relaxation_anisotropy_anisotropic"].axes[0]
    assert len(ax.lines) >= 2 and np.isfinite(ax.lines[0].get_ydata()).any()
    import matplotlib.pyplot as plt

    for fig in figs.values():
        plt.close(fig)


# Fast spectral (Boltzmann) beside BGK and DSMC, Maxwell molecules on a 24^3 grid (16^3 does not
# resolve the cold axes of this start in the fast spectral method's larger box: <c^4> off by 20 %).
SECTION_FS = {**SECTION, "methods": ["dsmc", "bgk", "fast_spectral"], "run": {**SECTION["run"], "n_velocity": 24}}


def test_fast_spectral_points_table_and_figures(tmp_path, monkeypatch):
    import matplotlib.pyplot as plt

    monkeypatch.chdir(tmp_path)
    assert solver_labels(SECTION_FS) == ["dsmc-N3000", "bgk-nv24", "fast_spectral-nv24"]
    pts = FAMILY.points(SECTION_FS)
    files = {}
    for p in pts:
        res = FAMILY.solve(p.values, max_iter=None, section=SECTION_FS)
        assert res.status == "converged", res.convergence.reason
        files[p.pid] = str(tmp_path / "results" / "points" / f"{p.pid}.nc")
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    ds = gather_family(FAMILY, SECTION_FS, pts, batch_records(pts, files))
    frame = FAMILY.tables(ds, SECTION_FS)["relaxation_times"].frame.set_index("method")
    err = frame["anisotropy time vs Boltzmann [relative]"]
    # Maxwell molecules: BGK and the Boltzmann equation both relax the stress at p/mu
    # (Truesdell & Muncaster 1980), anisotropy time 2 tau_c for both; the remaining
    # difference is the Boltzmann solution's error on this 24^3 grid.
    assert err["bgk"] == pytest.approx(2.0 / frame.loc["fast_spectral", "anisotropy time [tau_c]"] - 1.0, rel=ROUND_OFF)
    assert abs(err["bgk"]) < FAST_SPECTRAL_24_ERROR
    assert np.isnan(err["dsmc"]) and np.isnan(err["fast_spectral"])
    figs = FAMILY.figures(ds, SECTION_FS, {"width": 5, "height": 3.5})
    ax = figs["relaxation_h_anisotropic"].axes[0]
    # the DSMC band is drawn about the Boltzmann curve: centred on it, half-width 2 standard errors
    where = {
        "gas": "Ar",
        "initial_state": "anisotropic",
        "molecular_model": "maxwell",
        "pressure": 100.0,
        "temperature": 300.0,
    }
    ref = ds["h_function"].sel(solver="fast_spectral-nv24", **where).values
    se = ds["h_function_std"].sel(solver="dsmc-N3000", **where).values / np.sqrt(3)
    band = ax.collections[0].get_paths()[0].vertices
    at_t1 = np.sort(band[np.isclose(band[:, 0], ds["time"].values[1]), 1])
    assert at_t1[0] == pytest.approx(ref[1] - 2.0 * se[1], rel=BAND_RTOL)
    assert at_t1[-1] == pytest.approx(ref[1] + 2.0 * se[1], rel=BAND_RTOL)
    for fig in figs.values():
        plt.close(fig)
