"""Tube/duct family with the linearized Boltzmann models (boltzmann_hard_sphere, boltzmann_vhs) in the tube: study
check, point identity (VHS per gas, other models unchanged), cost, solve, gather, the model-error table and figure,
legends in plain words, and ``knudsweep solve --geometry tube``.

The gathered dataset is built the way the core builds it (each point solved by the family, written with
knudsweep.solver.netcdf_io.write_result, gathered with knudsweep.gather.gather_family).  Grids are coarse; the
physics of the operator is tested in tests/verification/test_tube_boltzmann.py.
"""

import hashlib
import json

import numpy as np
import pytest

from knudsweep.config import StudyConfigError, validate_study
from knudsweep.families.tube_duct import BOLTZMANN_MODELS, FAMILY, GAS_MODELS, MODEL_EQUATIONS, MODELS, grid
from knudsweep.families.tube_duct.report import model_error_pairs, model_text
from knudsweep.gather import from_cf, gather_family, to_cf
from knudsweep.point_files import valid_records
from knudsweep.solver.gas import get_gas
from knudsweep.solver.netcdf_io import write_result
from knudsweep.solver.tube.boltzmann_driver import solve_tube_boltzmann
from knudsweep.solver.walls import MaxwellWall
from knudsweep.tables import write_tables

GASES = ["Ar", "He"]
SECTION = {
    "geometries": [{"shape": "tube", "aspect_ratio": 1.0}],
    "problems": ["poiseuille", "thermal_creep"],
    "models": ["bgk", "s_model", "boltzmann_hard_sphere", "boltzmann_vhs"],
    "gases": GASES,
    "walls": [{"model": "maxwell", "alpha": 1.0}, {"model": "maxwell", "alpha": 0.8}],
    "delta": [0.1, 1.0],
    "conditions": {
        "temperature": 300.0,
        "radius": 1e-3,
        "height": 1e-3,
        "length": 1.0,
        "pressure_ratios": [2.0, 5.0],
        "thermal": {"t_cold": 300.0, "t_hot": 600.0},
    },
    "resolution": {"accuracy": None, "n_space": 11, "n_velocity": 4, "tol": 1.0e-8},
    "iteration": {"max_iter": None, "accelerate": True, "retry_max_iter_factor": 4},
}
WALL = "maxwell-alpha=0.8"
LABELS = ["bgk", "s_model", "boltzmann_hard_sphere", "boltzmann_vhs-Ar", "boltzmann_vhs-He"]


def test_model_names_agree_with_the_registry_and_the_schema():
    from knudsweep.config import load_schema
    from knudsweep.solver import kinetic_models

    assert MODEL_EQUATIONS == kinetic_models.MODEL_NAMES
    assert set(BOLTZMANN_MODELS) == set(kinetic_models.BOLTZMANN_MODELS)
    assert MODELS == MODEL_EQUATIONS + BOLTZMANN_MODELS and GAS_MODELS == ("boltzmann_vhs",)
    schema = load_schema()
    items = schema["properties"]["tube_duct"]["properties"]["models"]["items"]
    assert items == {"$ref": "#/$defs/channel_model"} and set(schema["$defs"]["channel_model"]["enum"]) == set(MODELS)


@pytest.mark.parametrize(
    "change, key",
    [
        (
            {"geometries": [{"shape": "tube"}, {"shape": "duct", "aspect_ratio": 2.0}]},
            r"^geometries\[1\]\.shape: model boltzmann_hard_sphere takes shape tube only, got 'duct'",
        ),
        (
            {"walls": [{"model": "maxwell", "alpha": 1.0}, {"model": "cercignani_lampis", "alpha_t": 0.8}]},
            r"^walls\[1\]\.model: model boltzmann_hard_sphere takes wall model maxwell only, got 'cercignani_lampis'",
        ),
        (
            {"resolution": {"n_space": 11, "n_velocity": 40, "tol": 1e-8}},
            r"^resolution\.n_velocity: got 40; with model boltzmann_hard_sphere it counts speed nodes, "
            r"allowed range \[4, 24\]",
        ),
    ],
)
def test_check_section_refuses_what_the_tube_boltzmann_solver_cannot_do(change, key):
    with pytest.raises(ValueError, match=key):
        FAMILY.check_section({**SECTION, **change})
    # the same section without the Boltzmann models is accepted (the limits are the model equations')
    FAMILY.check_section({**SECTION, **change, "models": ["bgk"]})


def test_delta_beyond_the_solver_range_is_one_line():
    with pytest.raises(ValueError, match=r"^delta: delta must be in \(0, 1000\]") as info:
        FAMILY.check_section({**SECTION, "delta": [1.0, 2000.0]})
    assert "\n" not in str(info.value)


def test_a_gas_outside_the_operators_omega_range_is_refused(monkeypatch):
    monkeypatch.setattr(grid, "gas_omega", lambda gas: 1.2 if gas == "He" else 0.81)
    with pytest.raises(ValueError, match=r"^gases\[1\]: gas He has omega = 1.2 .*takes omega in \[0.5, 1\]"):
        FAMILY.check_section(SECTION)


def test_a_study_with_boltzmann_vhs_must_list_its_gases():
    raw = {
        "study": "tube_vhs",
        "tube_duct": {
            "geometries": [{"shape": "tube"}],
            "problems": ["poiseuille"],
            "models": ["boltzmann_vhs"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [1.0],
        },
    }
    with pytest.raises(StudyConfigError) as info:
        validate_study(raw)
    message = str(info.value)
    assert message.startswith("tube_duct.gases: missing; model boltzmann_vhs") and "\n" not in message
    study = validate_study({**raw, "tube_duct": {**raw["tube_duct"], "gases": ["He"]}})
    assert [p.values["gas"] for p in FAMILY.points(study["tube_duct"])] == ["He"]
    # without boltzmann_vhs the schema default (N2, for the tables) still stands in
    validate_study({**raw, "tube_duct": {**raw["tube_duct"], "models": ["boltzmann_hard_sphere"]}})
    # a duct in the study is refused with the schema's key path
    duct = {**raw["tube_duct"], "models": ["boltzmann_hard_sphere"], "geometries": [{"shape": "duct"}]}
    with pytest.raises(StudyConfigError, match=r"^tube_duct\.geometries\[0\]\.shape: model boltzmann_hard_sphere"):
        validate_study({**raw, "tube_duct": duct})


def test_vhs_points_are_expanded_over_the_gases_and_carry_omega():
    pts = FAMILY.points(SECTION)
    assert len(pts) == 2 * len(LABELS) * 2 * 2  # problems x model labels x walls x delta
    vhs = [p for p in pts if p.values["model"] == "boltzmann_vhs"]
    assert len(vhs) == 2 * len(GASES) * 2 * 2
    for p in vhs:
        gas = p.values["gas"]
        assert p.values["omega"] == get_gas(gas).omega  # config/gases.yaml
        assert f"/model=boltzmann_vhs/gas={gas}/wall=" in p.pid
        assert p.index["model"] == f"boltzmann_vhs-{gas}"
    hs = next(p for p in pts if p.values["model"] == "boltzmann_hard_sphere")
    assert hs.pid == (
        "tube_duct/tube/poiseuille/model=boltzmann_hard_sphere/wall=maxwell-alpha=1.0/grid=ns11-nv4-tol1.0e-08/"
        "delta=1.0e-01"
    )
    assert "gas" not in hs.values and "omega" not in hs.values
    assert FAMILY.gather_dims(SECTION)["model"] == LABELS


# Points of a study without Boltzmann models, as the code before the Boltzmann models named them: sha256 of
# json.dumps([[pid, values, index], ...], sort_keys=True) computed with the previous grid module (git HEAD before
# this change) on OLD_SECTION; the ids are the point file names, so a change would orphan every existing file.
OLD_SECTION = {
    "geometries": [{"shape": "tube", "aspect_ratio": 1.0}, {"shape": "duct", "aspect_ratio": 2.0}],
    "problems": ["poiseuille", "thermal_creep"],
    "models": ["bgk", "s_model"],
    "gases": ["N2"],
    "walls": [{"model": "maxwell", "alpha": 0.9}, {"model": "cercignani_lampis", "alpha_t": 0.8, "alpha_n": 0.5}],
    "delta": [0.1, 10.0],
    "resolution": {"accuracy": None, "n_space": None, "n_velocity": 8, "tol": 1e-8},
}
OLD_DIGEST = "2d3cec50826babd4609e434e3872f18129bfc08a697e05dfdba92e2d73b62cec"


def test_points_without_boltzmann_models_keep_their_old_identity():
    pts = FAMILY.points(OLD_SECTION)
    assert len(pts) == 32
    digest = hashlib.sha256(json.dumps([[p.pid, p.values, p.index] for p in pts], sort_keys=True).encode())
    assert digest.hexdigest() == OLD_DIGEST
    assert FAMILY.gather_dims(OLD_SECTION)["model"] == ["bgk", "s_model"]
    assert FAMILY.dim_attrs(OLD_SECTION)["model"] == {"attrs": {"long_name": "kinetic model equation"}}


def test_adding_boltzmann_models_changes_no_other_point():
    without = {**SECTION, "models": ["bgk", "s_model"], "gases": ["Ar"]}
    before = {p.pid: p for p in FAMILY.points(without)}
    after = {p.pid: p for p in FAMILY.points(SECTION) if p.values["model"] not in BOLTZMANN_MODELS}
    assert set(before) == set(after)
    for pid, p in before.items():
        assert after[pid].values == p.values and after[pid].index == p.index
        assert "gas" not in p.values and "/gas=" not in pid


def test_point_values_need_the_gas_of_a_gas_model():
    res = SECTION["resolution"]
    wall = {"model": "maxwell", "alpha": 1.0}
    tube = grid.geometry_of("tube")
    with pytest.raises(ValueError, match=r"^gas: model boltzmann_vhs needs a gas"):
        grid.point_values(tube, "poiseuille", "boltzmann_vhs", 1.0, wall, res)
    # a gas given to another model is ignored: its values do not change
    assert grid.point_values(tube, "poiseuille", "bgk", 1.0, wall, res, "He") == grid.point_values(
        tube, "poiseuille", "bgk", 1.0, wall, res
    )


def test_point_cost_of_the_boltzmann_models():
    pts = {(p.values["model"], p.values.get("gas")): p for p in FAMILY.points(SECTION) if p.values["delta"] == 1.0}
    hs = pts["boltzmann_hard_sphere", None].values
    assert FAMILY.point_cost(pts["boltzmann_vhs", "Ar"].values) == pytest.approx(
        grid.VHS_FACTOR * FAMILY.point_cost(hs)
    )
    # measured on one thread (the constants' comment in grid.py): 11 radial nodes x 4 speeds 0.08 s; default grid
    # 1.79, 0.94, 2.42, 1.62 s at delta 0.1, 1, 10, 100.  The batch planner needs the cost within a factor of about 2.
    assert 0.5 < FAMILY.point_cost(hs) / 0.08 < 2.0
    default = {**hs, "n_space": None, "n_velocity": None}
    for delta, seconds in ((0.1, 1.79), (1.0, 0.94), (10.0, 2.42), (100.0, 1.62)):
        assert 0.5 < FAMILY.point_cost({**default, "delta": delta}) / seconds < 2.0
    assert FAMILY.point_cost(pts["bgk", None].values) < FAMILY.point_cost(default)


def test_model_error_pairs():
    assert model_error_pairs(SECTION) == (
        ["boltzmann_hard_sphere", "boltzmann_vhs-Ar", "boltzmann_vhs-He"],
        ["bgk", "s_model"],
        ["G_P", "G_T"],
    )
    assert model_error_pairs({**SECTION, "models": ["bgk", "s_model"]}) == ([], [], [])
    assert model_error_pairs({**SECTION, "models": ["boltzmann_hard_sphere"]}) == ([], [], [])
    assert model_text("boltzmann_hard_sphere") == "Boltzmann, hard spheres"
    assert model_text("boltzmann_vhs-Ar") == "Boltzmann, VHS (Ar)" and model_text("s_model") == "S-model"


@pytest.fixture(scope="module")
def gathered(tmp_path_factory):
    root = tmp_path_factory.mktemp("tube_lbe")
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
    assert ds["model"].values.tolist() == LABELS
    assert ds["model_gas"].values.tolist() == ["", "", "", "Ar", "He"]
    assert np.isnan(ds["omega"].values[:3]).all() and ds["omega"].values[3:].tolist() == [0.81, 0.66]
    sel = dict(geometry="tube", problem="thermal_creep", wall=WALL, delta=1.0)
    direct = solve_tube_boltzmann("thermal_creep", delta=1.0, wall=MaxwellWall(0.8), n_space=11, n_velocity=4)
    assert ds["G_T"].sel(model="boltzmann_hard_sphere", **sel).item() == direct.coefficient("G_T")
    est = ds["G_T_error_estimate"].sel(model="boltzmann_hard_sphere", **sel).item()
    assert est == direct.coefficient("G_T_error_estimate")
    for gas in GASES:
        got = ds["G_T"].sel(model=f"boltzmann_vhs-{gas}", **sel).item()
        vhs = solve_tube_boltzmann(
            "thermal_creep",
            delta=1.0,
            molecule="vhs",
            omega=get_gas(gas).omega,
            wall=MaxwellWall(0.8),
            n_space=11,
            n_velocity=4,
        )
        assert got == vhs.coefficient("G_T")
    # the CF encoding keeps the labels and the extra coordinates
    back = from_cf(to_cf(ds)[0])
    assert back["model"].values.tolist() == LABELS and back["model_gas"].values.tolist() == ["", "", "", "Ar", "He"]


def test_model_error_table(gathered, tmp_path):
    ds = gathered
    tables = FAMILY.tables(ds, SECTION)
    assert sorted(tables) == sorted(FAMILY.table_names(SECTION)) and "tube_duct_model_error" in tables
    frame = tables["tube_duct_model_error"].frame
    assert len(frame) == 3 * 2 * 2  # (hard spheres, VHS Ar, VHS He) x walls x delta
    assert frame["Boltzmann model"].unique().tolist() == [
        "Boltzmann, hard spheres",
        "Boltzmann, VHS (Ar)",
        "Boltzmann, VHS (He)",
    ]
    for label, gas in (("boltzmann_hard_sphere", ""), ("boltzmann_vhs-He", "He")):
        row = frame[(frame["gas"] == gas) & (frame["wall"] == WALL) & (frame["delta [1]"] == 1.0)].iloc[0]
        assert row["geometry"] == "tube"
        for key, problem in (("G_P", "poiseuille"), ("G_T", "thermal_creep")):
            sel = dict(geometry="tube", problem=problem, wall=WALL, delta=1.0)
            ref = ds[key].sel(model=label, **sel).item()
            assert row[f"{key} Boltzmann [1]"] == ref and row[f"{key} Boltzmann status"] == "converged"
            for model, name in (("bgk", "BGK"), ("s_model", "S-model")):
                assert row[f"{key} {name} / Boltzmann [1]"] == pytest.approx(
                    ds[key].sel(model=model, **sel).item() / ref, rel=1e-14
                )
                # both estimates are relative errors of a coarse grid (11 radial nodes, 4 speeds): a few 1e-4
                assert 0 < row[f"{key} {name} / Boltzmann error estimate [1]"] < 1e-2
    ratios = frame[[c for c in frame.columns if c.endswith("/ Boltzmann [1]")]].to_numpy(float)
    # same free-molecular limit: the ratios are near 1 at delta = 0.1 and move away from it with delta (the model
    # error; the bound only catches a wrong reference or a swapped column)
    assert np.all(np.abs(ratios - 1.0) < 0.3)
    small = ratios[frame["delta [1]"].to_numpy() == 0.1]
    big = ratios[frame["delta [1]"].to_numpy() == 1.0]
    assert np.abs(small - 1.0).max() < np.abs(big - 1.0).max()
    written = write_tables(tables, tmp_path / "tables")
    assert all(w.exists() for w in written)
    assert "model error" in (tmp_path / "tables" / "tube_duct_model_error.md").read_text()
    # each VHS point converts with its own gas, the gas-free models with every gas
    cond = tables["tube_duct_conductance"].frame
    assert sorted(cond[cond["model"] == "boltzmann_vhs"]["gas"].unique()) == GASES
    assert len(cond[(cond["model"] == "boltzmann_vhs") & (cond["gas"] == "Ar")]) == 2 * 2  # walls x delta
    assert len(cond[cond["model"] == "s_model"]) == 2 * 2 * len(GASES)
    creep = tables["tube_duct_thermal_creep"].frame
    assert len(creep[creep["model"] == "boltzmann_vhs"]) == len(GASES) * 2 * 2


def test_figures_and_captions_with_boltzmann_labels(gathered):
    import matplotlib.pyplot as plt

    ds = gathered
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    names = FAMILY.figure_names(SECTION)
    assert sorted(figs) == sorted(names) and "tube_duct_model_error_vs_delta" in figs
    assert "tube_duct_G_T_vs_delta_boltzmann_vhs-He" in figs
    title = figs["tube_duct_G_P_vs_delta_boltzmann_vhs-Ar"].axes[0].get_title()
    assert "Boltzmann, VHS (Ar)" in title
    assert "Boltzmann, hard spheres" in figs["tube_duct_G_P_vs_delta_boltzmann_hard_sphere"].axes[0].get_title()
    fig = figs["tube_duct_model_error_vs_delta"]
    axes = [ax for ax in fig.axes if ax.get_title()]
    assert len(axes) == 3 * 2 and all(ax.get_xscale() == "log" for ax in axes)  # operators x coefficients
    assert any("against Boltzmann, VHS (He)" in ax.get_title() for ax in axes)
    legend = [t.get_text() for lg in fig.legends for t in lg.get_texts()]
    assert "BGK" in legend and "S-model" in legend
    # the markers drawn are the ratios of the table (first series: diffuse walls, BGK, against hard spheres)
    sel = dict(geometry="tube", problem="poiseuille", wall="maxwell-alpha=1.0")
    ref = ds["G_P"].sel(model="boltzmann_hard_sphere", **sel).values
    bgk = ds["G_P"].sel(model="bgk", **sel).values
    marker_lines = [ln for ln in axes[0].lines if ln.get_linestyle() == "None" and len(ln.get_xdata()) == 2]
    assert np.allclose(marker_lines[0].get_ydata(), bgk / ref, rtol=1e-14)
    captions = FAMILY.figure_captions(ds, SECTION)
    assert list(captions) == names
    assert "Boltzmann, VHS (Ar)" in captions["tube_duct_model_error_vs_delta"]
    for f in figs.values():
        plt.close(f)


def test_missing_points_give_no_data(tmp_path):
    import matplotlib.pyplot as plt

    pts = FAMILY.points(SECTION)
    files = {p.pid: str(tmp_path / f"{i}.nc") for i, p in enumerate(pts)}  # none exist
    ds = gather_family(FAMILY, SECTION, pts, valid_records(pts, files))
    frame = FAMILY.tables(ds, SECTION)["tube_duct_model_error"].frame
    assert frame["G_P BGK / Boltzmann [1]"].isna().all()
    figs = FAMILY.figures(ds, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    texts = [t.get_text() for ax in figs["tube_duct_model_error_vs_delta"].axes for t in ax.texts]
    assert texts.count("no converged points") == 3 * 2
    for f in figs.values():
        plt.close(f)


@pytest.mark.parametrize(
    "argv, expected",
    [
        (
            ["--geometry", "duct"],
            "--model: unknown value 'boltzmann_hard_sphere'; allowed values are bgk, s_model, es_bgk for --geometry duct",
        ),
        (
            ["--geometry", "tube", "--wall-model", "cercignani_lampis"],
            "--wall-model: model boltzmann_hard_sphere takes maxwell only, got 'cercignani_lampis'",
        ),
        (
            ["--geometry", "tube", "--n-velocity", "30"],
            "--n-velocity: got 30; with --model boltzmann_hard_sphere it counts speed nodes, allowed range is [4, 24]",
        ),
        (["--geometry", "tube", "--problem", "couette"], "--problem: unknown value 'couette'"),
    ],
)
def test_cli_refuses_what_the_tube_boltzmann_model_cannot_do(capsys, argv, expected):
    from knudsweep.cli import main

    with pytest.raises(SystemExit) as info:
        main(["solve", "--model", "boltzmann_hard_sphere", "--delta", "1", *argv])
    assert info.value.code == 2 and capsys.readouterr().err.startswith(f"knudsweep: error: {expected}")


@pytest.mark.parametrize("model, gas", [("boltzmann_hard_sphere", None), ("boltzmann_vhs", "He")])
def test_cli_solves_a_tube_boltzmann_point(capsys, model, gas):
    from knudsweep.cli import main

    argv = ["solve", "--geometry", "tube", "--model", model, "--problem", "thermal_creep", "--delta", "1"]
    argv += ["--alpha", "0.8", "--n-space", "11", "--n-velocity", "4", "--json"] + (
        [] if gas is None else ["--gas", gas]
    )
    code = main(argv)
    out = json.loads(capsys.readouterr().out)
    assert code == 0 and out["status"] == "converged" and out["geometry"] == "tube"
    assert out["parameters"]["kinetic_model"] == model
    omega = None if gas is None else get_gas(gas).omega
    assert out.get("gas") == gas and out.get("omega") == omega
    direct = solve_tube_boltzmann(
        "thermal_creep",
        delta=1.0,
        molecule="hard_sphere" if gas is None else "vhs",
        omega=omega,
        wall=MaxwellWall(0.8),
        n_space=11,
        n_velocity=4,
    )
    assert out["coefficients"]["G_T"] == direct.coefficient("G_T")


def test_a_study_of_boltzmann_models_only_builds_every_product(tmp_path):
    """No model equation: no model-error view, but the conductance and thermal-creep tables, the coefficient figures
    and the pressure-ratio and transpiration figures (first model label boltzmann_vhs-Ar) are built."""
    import matplotlib.pyplot as plt

    section = {**SECTION, "models": ["boltzmann_vhs"], "gases": ["Ar"], "walls": [{"model": "maxwell", "alpha": 1.0}]}
    FAMILY.check_section(section)
    pts = FAMILY.points(section)
    files = {}
    for p in pts:
        files[p.pid] = str(tmp_path / f"{p.pid}.nc")
        res = FAMILY.solve(p.values, max_iter=None, section=section)
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    ds = gather_family(FAMILY, section, pts, valid_records(pts, files))
    tables = FAMILY.tables(ds, section)
    assert sorted(tables) == ["tube_duct_conductance", "tube_duct_thermal_creep"]
    assert tables["tube_duct_conductance"].frame["G_P [1]"].notna().all()
    figs = FAMILY.figures(ds, section, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(section))
    assert "tube_duct_thermal_transpiration" in figs
    assert "Boltzmann, VHS (Ar)" in figs["tube_duct_flow_vs_pressure_ratio"].axes[0].get_title()
    captions = FAMILY.figure_captions(ds, section)
    assert "Boltzmann, VHS (Ar)" in captions["tube_duct_thermal_transpiration"]
    for f in figs.values():
        plt.close(f)
