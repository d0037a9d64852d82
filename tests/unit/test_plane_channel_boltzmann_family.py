"""Plane-channel family with the linearized Boltzmann model (boltzmann_hard_sphere): study check, points,
solve, gather, the model-error table and figure, on a tiny sweep.

The gathered dataset is built the way the core builds it (each point solved by the family, written with
knudsweep.solver.netcdf_io.write_result, gathered with knudsweep.gather.gather_family).  Grids are coarse; the
physics of the operator is tested in tests/verification/test_plane_channel_boltzmann.py.
"""

import numpy as np
import pytest

from knudsweep.families import model_error_ratio
from knudsweep.families.plane_channel import FAMILY, MODELS
from knudsweep.families.plane_channel.report import model_error_pairs
from knudsweep.gather import gather_family
from knudsweep.point_files import valid_records
from knudsweep.solver.netcdf_io import write_result
from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann
from knudsweep.solver.plane_channel.driver import BOLTZMANN_MODELS, solve_plane_channel
from knudsweep.solver.walls import MaxwellWall
from knudsweep.tables import write_tables

SECTION = {
    "problems": ["poiseuille", "thermal_creep"],
    "models": ["bgk", "s_model", "boltzmann_hard_sphere"],
    "walls": [{"model": "maxwell", "alpha": 1.0}, {"model": "maxwell", "alpha": 0.8}],
    "gases": ["Ar"],
    "delta": [0.1, 1.0, 10.0],
    "conditions": {"temperature": 300.0, "gap": 1.0e-3},
    "resolution": {"accuracy": None, "n_space": 16, "n_velocity": 6, "tol": 1.0e-8},
    "iteration": {"max_iter": None, "accelerate": True, "retry_max_iter_factor": 4},
}
WALL = "maxwell-alpha=0.8"


def test_model_names_agree_with_the_solver():
    from knudsweep.solver import kinetic_models

    assert set(BOLTZMANN_MODELS) <= set(MODELS)
    # one registry of names: the family, the solver's dispatch and the schema read knudsweep.solver.kinetic_models
    assert set(BOLTZMANN_MODELS) == set(kinetic_models.BOLTZMANN_MODELS)
    assert MODELS == kinetic_models.MODEL_NAMES + tuple(kinetic_models.BOLTZMANN_MODELS)
    from knudsweep.config import load_schema

    enum = load_schema()["$defs"]["channel_model"]["enum"]  # the items of plane_channel.models
    assert set(enum) == set(MODELS)


@pytest.mark.parametrize(
    "change, key",
    [
        (
            {"problems": ["poiseuille", "couette"]},
            r"^problems: model boltzmann_hard_sphere solves poiseuille, thermal_creep only",
        ),
        (
            {"walls": [{"model": "cercignani_lampis", "alpha_t": 0.8, "alpha_n": 0.5}]},
            r"^walls\[0\]\.model: .* maxwell only",
        ),
        ({"delta": [1e-4, 1.0]}, r"^delta: .*with model boltzmann_hard_sphere is \[0.001, 1000\]"),
        ({"resolution": {"n_space": 16, "n_velocity": 40, "tol": 1e-8}}, r"^resolution\.n_velocity: got 40.*\[4, 24\]"),
    ],
)
def test_check_section_refuses_what_the_boltzmann_solver_cannot_do(change, key):
    with pytest.raises(ValueError, match=key):
        FAMILY.check_section({**SECTION, **change})
    # the same section without the Boltzmann model is accepted (the limits are the model equations')
    FAMILY.check_section({**SECTION, **change, "models": ["bgk"]})


def test_solver_dispatch_refuses_other_problems_and_walls():
    from knudsweep.solver.walls import CercignaniLampisWall

    with pytest.raises(
        ValueError, match=r"^problem: model boltzmann_hard_sphere solves poiseuille, thermal_creep only"
    ):
        solve_plane_channel("heat_transfer", delta=1.0, model="boltzmann_hard_sphere")
    with pytest.raises(ValueError, match=r"^lower_wall: model boltzmann_hard_sphere takes Maxwell walls only"):
        solve_plane_channel(
            "poiseuille", delta=1.0, model="boltzmann_hard_sphere", lower_wall=CercignaniLampisWall(0.8, 0.5)
        )


def test_point_cost_of_the_boltzmann_model():
    pts = {
        (p.values["model"], p.values["delta"]): p for p in FAMILY.points(SECTION) if p.values["problem"] == "poiseuille"
    }
    lbe = FAMILY.point_cost(pts["boltzmann_hard_sphere", 1.0].values)
    bgk = FAMILY.point_cost(pts["bgk", 1.0].values)
    # tiny LBE points take tens of milliseconds, BGK ones a few
    assert 0.02 < lbe < 0.2 and lbe > 10 * bgk
    default = {**pts["boltzmann_hard_sphere", 1.0].values, "n_space": None, "n_velocity": None}
    # measured 0.57-0.82 s at delta = 100 (benchmarks/bench_boltzmann_channel.py); the planner needs a factor 2
    assert 0.5 < FAMILY.point_cost({**default, "delta": 100.0}) / 0.7 < 2.0


def test_model_error_ratio_propagates_relative_estimates():
    r, e = model_error_ratio([2.0], [0.02], [1.0], [0.001])
    assert r[0] == 2.0 and e[0] == pytest.approx(2.0 * (0.01 + 0.001))
    assert model_error_pairs({**SECTION, "models": ["bgk", "s_model"]}) == ([], [], [])
    assert model_error_pairs({**SECTION, "problems": ["poiseuille"]}) == (
        ["boltzmann_hard_sphere"],
        ["bgk", "s_model"],
        ["G_P"],
    )


@pytest.fixture(scope="module")
def gathered(tmp_path_factory):
    root = tmp_path_factory.mktemp("plane_lbe")
    FAMILY.check_section(SECTION)
    pts = FAMILY.points(SECTION)
    files = {}
    for p in pts:
        res = FAMILY.solve(p.values, max_iter=None, section=SECTION)
        files[p.pid] = str(root / "points" / f"{p.pid}.nc")
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    return gather_family(FAMILY, SECTION, pts, valid_records(pts, files))


def test_gathered_boltzmann_points_are_the_solvers(gathered):
    ds = gathered
    assert set(ds["status"].values.ravel()) == {"converged"}
    assert "boltzmann_hard_sphere" in ds["model"].values.tolist()
    got = ds["G_T"].sel(problem="thermal_creep", model="boltzmann_hard_sphere", wall=WALL, delta=1.0).item()
    direct = solve_plane_channel_boltzmann(
        "thermal_creep", delta=1.0, lower_wall=MaxwellWall(0.8), n_space=16, n_velocity=6, tol=1e-8, accelerate=True
    )
    assert got == direct.coefficient("G_T")
    est = (
        ds["G_T_error_estimate"]
        .sel(problem="thermal_creep", model="boltzmann_hard_sphere", wall=WALL, delta=1.0)
        .item()
    )
    assert est == direct.coefficient("G_T_error_estimate") and 0 < est < 1e-2 * got


def test_model_error_table(gathered, tmp_path):
    ds = gathered
    tables = FAMILY.tables(ds, SECTION)
    assert sorted(tables) == sorted(FAMILY.table_names(SECTION)) and "plane_channel_model_error" in tables
    frame = tables["plane_channel_model_error"].frame
    assert len(frame) == 2 * 3  # walls x delta
    row = frame[(frame["wall"] == WALL) & (frame["delta [1]"] == 10.0)].iloc[0]
    for key, problem in (("G_P", "poiseuille"), ("G_T", "thermal_creep")):
        sel = dict(problem=problem, wall=WALL, delta=10.0)
        ref = ds[key].sel(model="boltzmann_hard_sphere", **sel).item()
        assert row[f"{key} Boltzmann [1]"] == ref
        assert row["Boltzmann model"] == "linearized Boltzmann (hard spheres)" and row["gas"] == ""
        for model, name in (("bgk", "BGK"), ("s_model", "S-model")):
            assert row[f"{key} {name} / Boltzmann [1]"] == pytest.approx(
                ds[key].sel(model=model, **sel).item() / ref, rel=1e-14
            )
            assert 0 < row[f"{key} {name} / Boltzmann error estimate [1]"] < 1e-2
    ratios = frame[[c for c in frame.columns if c.endswith("/ Boltzmann [1]")]].to_numpy(float)
    # the model equations differ from the hard-sphere Boltzmann equation by up to ~15 % in G_T
    # (phase-1 benchmark, S-model/LBE 0.92-1.15) and agree as delta -> 0 (same free-molecular limit)
    assert np.all(np.abs(ratios - 1.0) < 0.3)
    small = frame[frame["delta [1]"] == 0.1][[c for c in frame.columns if c.endswith("/ Boltzmann [1]")]].to_numpy(
        float
    )
    big = frame[frame["delta [1]"] == 10.0][[c for c in frame.columns if c.endswith("/ Boltzmann [1]")]].to_numpy(float)
    assert np.abs(small - 1.0).max() < np.abs(big - 1.0).max()
    written = write_tables(tables, tmp_path / "tables")
    assert all(w.exists() for w in written)
    assert "model error" in (tmp_path / "tables" / "plane_channel_model_error.md").read_text()


def test_model_error_figure_and_captions(gathered):
    import matplotlib.pyplot as plt

    ds = gathered
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION)) and "plane_channel_model_error_vs_delta" in figs
    fig = figs["plane_channel_model_error_vs_delta"]
    axes = [ax for ax in fig.axes if ax.get_title()]
    assert len(axes) == 2 and all(ax.get_xscale() == "log" for ax in axes)
    # the markers drawn are the ratios of the table (first series: diffuse walls, BGK)
    ref = ds["G_P"].sel(problem="poiseuille", model="boltzmann_hard_sphere", wall="maxwell-alpha=1.0").values
    bgk = ds["G_P"].sel(problem="poiseuille", model="bgk", wall="maxwell-alpha=1.0").values
    marker_lines = [ln for ln in axes[0].lines if ln.get_linestyle() == "None" and len(ln.get_xdata()) == 3]
    assert np.allclose(marker_lines[0].get_ydata(), bgk / ref, rtol=1e-14)
    captions = FAMILY.figure_captions(ds, SECTION)
    assert list(captions) == FAMILY.figure_names(SECTION)  # one caption per figure, registered beside it
    assert "linearized Boltzmann" in captions["plane_channel_model_error_vs_delta"]
    for f in figs.values():
        plt.close(f)


def test_missing_points_give_no_data(tmp_path):
    import matplotlib.pyplot as plt

    pts = FAMILY.points(SECTION)
    files = {p.pid: str(tmp_path / f"{i}.nc") for i, p in enumerate(pts)}  # none exist
    ds = gather_family(FAMILY, SECTION, pts, valid_records(pts, files))
    frame = FAMILY.tables(ds, SECTION)["plane_channel_model_error"].frame
    assert frame["G_P BGK / Boltzmann [1]"].isna().all()
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    texts = [t.get_text() for ax in figs["plane_channel_model_error_vs_delta"].axes for t in ax.texts]
    assert texts.count("no converged points") == 2
    for f in figs.values():
        plt.close(f)


@pytest.mark.parametrize(
    "argv, expected",
    [
        (
            ["--problem", "couette"],
            "--problem: model boltzmann_hard_sphere solves poiseuille, thermal_creep only, got 'couette'",
        ),
        (
            ["--wall-model", "cercignani_lampis"],
            "--wall-model: model boltzmann_hard_sphere takes maxwell only, got 'cercignani_lampis'",
        ),
        (
            ["--geometry", "duct"],  # the tube takes it too (tests/unit/test_tube_boltzmann_family.py)
            "--model: unknown value 'boltzmann_hard_sphere'; allowed values are bgk, s_model, es_bgk for --geometry duct",
        ),
        (
            ["--n-velocity", "30"],
            "--n-velocity: got 30; with --model boltzmann_hard_sphere it counts speed nodes, allowed range is [4, 24]",
        ),
    ],
)
def test_cli_refuses_what_the_boltzmann_model_cannot_do(capsys, argv, expected):
    from knudsweep.cli import main

    with pytest.raises(SystemExit) as info:
        main(["solve", "--model", "boltzmann_hard_sphere", "--delta", "1", *argv])
    assert info.value.code == 2 and capsys.readouterr().err == f"knudsweep: error: {expected}\n"


def test_cli_solves_a_boltzmann_point(capsys):
    import json

    from knudsweep.cli import main

    code = main(
        [
            "solve",
            "--model",
            "boltzmann_hard_sphere",
            "--problem",
            "thermal_creep",
            "--delta",
            "1",
            "--n-space",
            "16",
            "--n-velocity",
            "4",
            "--json",
        ]
    )
    out = json.loads(capsys.readouterr().out)
    assert code == 0 and out["status"] == "converged" and out["parameters"]["kinetic_model"] == "boltzmann_hard_sphere"
    direct = solve_plane_channel_boltzmann("thermal_creep", delta=1.0, n_space=16, n_velocity=4)
    assert out["coefficients"]["G_T"] == direct.coefficient("G_T")
