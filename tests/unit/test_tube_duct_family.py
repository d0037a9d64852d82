"""Tube/duct family of the study layer: points, identity, tables and figures on a tiny sweep.

The gathered dataset is built the way the core builds it: each point solved by
the family, written with knudsweep.solver.netcdf_io.write_result, then gathered with
knudsweep.gather.gather_family.  Sizes are tiny (coarse grids); the physics of
the solvers is tested in tests/verification.
"""

import math

import numpy as np
import pytest
from precision import ROUND_OFF

from knudsweep.families.tube_duct import FAMILY, delta_values, geometry_settings
from knudsweep.gather import gather_family
from knudsweep.point_files import valid_records
from knudsweep.solver.netcdf_io import write_result
from knudsweep.tables import write_tables

SECTION = {
    "geometries": [{"shape": "tube"}, {"shape": "duct", "aspect_ratio": 2.0}],
    "problems": ["poiseuille", "thermal_creep"],
    "models": ["bgk"],
    "walls": [{"model": "maxwell", "alpha": 1.0}, {"model": "cercignani_lampis", "alpha_t": 0.8, "alpha_n": 0.5}],
    "gases": ["Ar", "He"],
    "delta": [0.1, 1.0, 10.0],
    "conditions": {
        "temperature": 300.0,
        "radius": 1.0e-3,
        "height": 1.0e-3,
        "length": 1.0,
        "pressure_ratios": [1.5, 3.0, 10.0],
        "thermal": {"t_cold": 300.0, "t_hot": 600.0},
    },
    "resolution": {"n_space": 9, "n_velocity": 6, "tol": 1.0e-6},
    "iteration": {"max_iter": None, "accelerate": True, "retry_max_iter_factor": 4},
}


def test_points_identity_and_dims():
    pts = FAMILY.points(SECTION)
    assert len(pts) == 2 * 2 * 1 * 2 * 3 and len({p.pid for p in pts}) == len(pts)
    assert (
        pts[0].pid == "tube_duct/tube/poiseuille/model=bgk/wall=maxwell-alpha=1.0/grid=ns9-nv6-tol1.0e-06/delta=1.0e-01"
    )
    assert any(
        p.pid.startswith("tube_duct/duct-A=2.0/thermal_creep/model=bgk/wall=cercignani_lampis-alpha_t=0.8-alpha_n=0.5/")
        for p in pts
    )
    # float noise and a Kn axis naming the same delta give the same points
    noisy = {**SECTION, "delta": [0.1 + 1e-12, 1.0, 10.0]}
    assert [p.pid for p in FAMILY.points(noisy)] == [p.pid for p in pts]
    as_kn = {k: v for k, v in SECTION.items() if k != "delta"}
    as_kn["kn"] = [math.sqrt(math.pi) / (2.0 * d) for d in (0.1, 1.0, 10.0)]
    assert [p.pid for p in FAMILY.points(as_kn)] == [p.pid for p in pts]
    dims = FAMILY.gather_dims(SECTION)
    assert list(dims) == ["geometry", "problem", "model", "wall", "delta"]
    assert dims["geometry"] == ["tube", "duct-A=2.0"]
    for p in pts:  # every point sits on the gather grid
        assert all(p.index[d] in dims[d] for d in dims)


@pytest.mark.parametrize(
    "change, key",
    [
        ({"delta": [1.0, 5000.0]}, r"delta: delta must be in \(0, 1000\]"),
        ({"kn": [1e-4], "delta": None}, r"kn: delta must be in \(0, 1000\]"),
        ({"walls": [{"model": "maxwell", "alpha_t": 0.5}]}, "walls.0..alpha_t|walls\\[0\\].alpha_t"),
        ({"walls": [{"model": "maxwell", "alpha": 1.5}]}, r"walls\[0\].alpha"),
        ({"geometries": [{"shape": "tube", "aspect_ratio": 2.0}]}, "geometries.aspect_ratio"),
        (
            {"geometries": [{"shape": "duct", "aspect_ratio": 2.0}, {"shape": "duct", "aspect_ratio": 2.0000001}]},
            r"geometries\[1\]",
        ),
    ],
)
def test_check_section_names_key(change, key):
    section = {**SECTION, **change}
    section = {k: v for k, v in section.items() if v is not None}
    with pytest.raises(ValueError, match=key):
        FAMILY.check_section(section)


@pytest.fixture(scope="module")
def gathered(tmp_path_factory):
    root = tmp_path_factory.mktemp("tube_duct")
    pts = FAMILY.points(SECTION)
    files = {}
    for p in pts:
        res = FAMILY.solve(p.values, max_iter=None, section=SECTION)
        files[p.pid] = str(root / "points" / f"{p.pid}.nc")
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    return gather_family(FAMILY, SECTION, pts, valid_records(pts, files)), root


def test_gathered_values_and_solve(gathered):
    from knudsweep.solver.duct import solve_duct
    from knudsweep.solver.walls import CercignaniLampisWall

    ds, _ = gathered
    assert set(ds["status"].values.ravel()) == {"converged"}
    # the family hands the point's parameters to the solver unchanged
    wall = "cercignani_lampis-alpha_t=0.8-alpha_n=0.5"
    got = ds["G_T"].sel(geometry="duct-A=2.0", problem="thermal_creep", model="bgk", wall=wall, delta=1.0).item()
    direct = solve_duct(
        "thermal_creep",
        delta=1.0,
        aspect_ratio=2.0,
        wall=CercignaniLampisWall(0.8, 0.5),
        n_space=9,
        n_velocity=6,
        tol=1e-6,
    ).coefficient("G_T")
    assert got == direct
    assert ds["aspect_ratio"].values.tolist() == [1.0, 2.0]
    assert ds["alpha_t"].values[1] == 0.8 and math.isnan(ds["alpha_t"].values[0])


def test_tables(gathered, tmp_path):
    ds, _ = gathered
    tables = FAMILY.tables(ds, SECTION)
    assert sorted(tables) == sorted(FAMILY.table_names(SECTION))
    cond = tables["tube_duct_conductance"].frame
    assert len(cond) == 2 * 2 * 2 * 3  # geometries x walls x gases x delta
    for col in (
        "conductance [L s^-1]",
        "conductance [m^3 s^-1]",
        "C / C_free-molecular [1]",
        "C / C_continuum [1]",
        "pressure [Pa]",
    ):
        assert col in cond.columns
    row = cond[(cond["geometry"] == "tube") & (cond["gas"] == "Ar") & (cond["wall"] == "maxwell-alpha=1.0")].iloc[0]
    # C / C_fm equals the free-molecular Knudsen conductance ratio of knudsweep.solver.conductance
    from knudsweep.solver.conductance import knudsen_tube_conductance

    c_fm = knudsen_tube_conductance("Ar", 300.0, 1e-3, 1.0)
    assert row["free-molecular conductance, diffuse [m^3 s^-1]"] == pytest.approx(c_fm, rel=ROUND_OFF)
    assert row["conductance [L s^-1]"] == pytest.approx(1e3 * row["conductance [m^3 s^-1]"])
    assert row["C / C_free-molecular [1]"] == pytest.approx(row["conductance [m^3 s^-1]"] / c_fm, rel=ROUND_OFF)
    # He is lighter: same delta needs a different pressure, same reduced G_P
    he = cond[(cond["geometry"] == "tube") & (cond["gas"] == "He") & (cond["wall"] == "maxwell-alpha=1.0")].iloc[0]
    assert he["G_P [1]"] == row["G_P [1]"] and he["pressure [Pa]"] != row["pressure [Pa]"]
    creep = tables["tube_duct_thermal_creep"].frame
    ratio = creep["G_T / G_P (d ln p / d ln T at zero flow) [1]"].to_numpy(float)
    assert np.all((ratio > 0) & (ratio < 0.5 + 1e-3))  # between the continuum 0 and the free-molecular 1/2
    written = write_tables(tables, tmp_path / "tables")
    assert all(w.exists() for w in written)
    assert "[L s^-1]" in (tmp_path / "tables" / "tube_duct_conductance.md").read_text()


def test_figures_render(gathered):
    import matplotlib.pyplot as plt

    ds, _ = gathered
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    ax = figs["tube_duct_G_P_vs_delta_bgk"].axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    flow = figs["tube_duct_flow_vs_pressure_ratio"].axes[0]
    y = flow.lines[0].get_ydata()
    assert np.all(np.isfinite(y)) and np.all(np.diff(y) > 0)  # more pressure ratio, more flow
    tt = figs["tube_duct_thermal_transpiration"].axes[0]
    curve = tt.lines[0].get_ydata()
    # between the continuum limit 1 and the free-molecular sqrt(2) (Knudsen 1909)
    assert np.all(curve > 1.0 - 1e-9) and np.all(curve < math.sqrt(2.0) + 1e-9)
    assert curve[0] > curve[-1]  # low pressure: closer to sqrt(2)
    for fig in figs.values():
        plt.close(fig)


def test_missing_points_give_no_data_figures(tmp_path):
    import matplotlib.pyplot as plt

    pts = FAMILY.points(SECTION)
    files = {p.pid: str(tmp_path / f"{i}.nc") for i, p in enumerate(pts)}  # none exist
    ds = gather_family(FAMILY, SECTION, pts, valid_records(pts, files))
    assert set(ds["status"].values.ravel()) == {"missing"}
    tables = FAMILY.tables(ds, SECTION)
    assert tables["tube_duct_conductance"].frame["G_P [1]"].isna().all()
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    for fig in figs.values():
        plt.close(fig)


def test_helpers():
    assert geometry_settings(SECTION)[1] == ("duct-A=2.0", "duct", 2.0)
    assert delta_values({"delta": {"start": 0.1, "stop": 10.0, "num": 3}}) == [0.1, 1.0, 10.0]


def test_gathered_flow_rates_name_both_normalisations(gathered):
    ds, _ = gathered
    for name in ("G_P", "Q_P", "G_T", "Q_T"):
        text = ds[name].attrs["long_name"]
        assert "tube: " in text and "duct: per unit width" in text, name
