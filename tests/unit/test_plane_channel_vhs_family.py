"""Plane-channel family with the VHS linearized Boltzmann model (boltzmann_vhs): solved per gas with the gas's
viscosity index omega (config/gases.yaml), the gas in the point identity and the gathered model label, the other
models' points unchanged, the model-error view per Boltzmann operator and gas, the study check and the CLI.

The gathered dataset is built the way the core builds it (knudsweep.solver.netcdf_io.write_result, then
knudsweep.gather.gather_family); grids are coarse, the operator's physics is tested in
tests/verification/test_plane_channel_boltzmann.py.
"""

import json

import numpy as np
import pytest
from precision import ROUND_OFF_FORMULA

from knudsweep.config import StudyConfigError, validate_study
from knudsweep.families.plane_channel import FAMILY, GAS_MODELS, grid
from knudsweep.gather import from_cf, gather_family, to_cf
from knudsweep.point_files import valid_records
from knudsweep.solver.gas import get_gas
from knudsweep.solver.netcdf_io import write_result
from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann

GASES = ["Ar", "He"]
SECTION = {
    "problems": ["poiseuille", "thermal_creep"],
    "models": ["s_model", "boltzmann_hard_sphere", "boltzmann_vhs"],
    "walls": [{"model": "maxwell", "alpha": 1.0}],
    "gases": GASES,
    "delta": [0.1, 1.0],
    "conditions": {"temperature": 300.0, "gap": 1.0e-3},
    "resolution": {"accuracy": None, "n_space": 16, "n_velocity": 4, "tol": 1.0e-8},
    "iteration": {"max_iter": None, "accelerate": True, "retry_max_iter_factor": 4},
}
WALL = "maxwell-alpha=1.0"
# Argon's and helium's VHS operators give G_P apart by more than this (measured 1.4e-2 at delta = 0.1 and 1.1e-3 at
# delta = 1 on this grid), far above the section's iteration tol 1e-8: one operator used for both gases fails.
OPERATORS_DIFFER = 1e-4


def test_vhs_is_the_gas_dependent_model_of_the_registry():
    from knudsweep.solver import kinetic_models

    assert GAS_MODELS == ("boltzmann_vhs",) and kinetic_models.BOLTZMANN_MODELS["boltzmann_vhs"] == "vhs"


def test_vhs_points_are_expanded_over_the_gases_and_carry_omega():
    pts = FAMILY.points(SECTION)
    vhs = [p for p in pts if p.values["model"] == "boltzmann_vhs"]
    assert len(vhs) == 2 * len(GASES) * 2  # problems x gases x delta
    for p in vhs:
        gas = p.values["gas"]
        assert p.values["omega"] == get_gas(gas).omega  # config/gases.yaml
        assert f"/model=boltzmann_vhs/gas={gas}/wall=" in p.pid
        assert p.index["model"] == f"boltzmann_vhs-{gas}"
    assert FAMILY.gather_dims(SECTION)["model"] == [
        "s_model",
        "boltzmann_hard_sphere",
        "boltzmann_vhs-Ar",
        "boltzmann_vhs-He",
    ]


def test_other_models_keep_their_identity():
    """Adding boltzmann_vhs and a second gas changes no other point: same ids (file names), values and index."""
    without = {**SECTION, "models": ["s_model", "boltzmann_hard_sphere"], "gases": ["Ar"]}
    before = {p.pid: p for p in FAMILY.points(without)}
    after = {p.pid: p for p in FAMILY.points(SECTION) if p.values["model"] != "boltzmann_vhs"}
    assert set(before) == set(after)
    for pid, p in before.items():
        assert after[pid].values == p.values and after[pid].index == p.index
        assert "gas" not in p.values and "/gas=" not in pid


def test_a_study_with_boltzmann_vhs_must_list_its_gases():
    raw = {
        "study": "vhs",
        "plane_channel": {
            "problems": ["poiseuille"],
            "models": ["boltzmann_vhs"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [1.0],
        },
    }
    with pytest.raises(StudyConfigError) as info:
        validate_study(raw)
    message = str(info.value)
    assert message.startswith("plane_channel.gases: missing; model boltzmann_vhs") and "\n" not in message
    study = validate_study({**raw, "plane_channel": {**raw["plane_channel"], "gases": ["He"]}})
    assert [p.values["gas"] for p in FAMILY.points(study["plane_channel"])] == ["He"]
    # without boltzmann_vhs the schema default (Ar, for the tables) still stands in
    validate_study({**raw, "plane_channel": {**raw["plane_channel"], "models": ["boltzmann_hard_sphere"]}})


def test_a_gas_outside_the_operators_omega_range_is_refused(monkeypatch):
    monkeypatch.setattr(grid, "gas_omega", lambda gas: 1.2 if gas == "He" else 0.81)
    with pytest.raises(ValueError, match=r"^gases\[1\]: gas He has omega = 1.2 .*takes omega in \[0.5, 1\]"):
        FAMILY.check_section(SECTION)


def test_point_values_need_the_gas_of_a_gas_model():
    res = SECTION["resolution"]
    wall = {"model": "maxwell", "alpha": 1.0}
    with pytest.raises(ValueError, match=r"^gas: model boltzmann_vhs needs a gas"):
        grid.point_values("poiseuille", "boltzmann_vhs", 1.0, wall, None, res)
    # a gas given to another model is ignored: its values do not change
    assert grid.point_values("poiseuille", "bgk", 1.0, wall, None, res, "He") == grid.point_values(
        "poiseuille", "bgk", 1.0, wall, None, res
    )


@pytest.fixture(scope="module")
def gathered(tmp_path_factory):
    root = tmp_path_factory.mktemp("plane_vhs")
    FAMILY.check_section(SECTION)
    pts = FAMILY.points(SECTION)
    files = {}
    for p in pts:
        res = FAMILY.solve(p.values, max_iter=None, section=SECTION)
        files[p.pid] = str(root / "points" / f"{p.pid}.nc")
        write_result(res, files[p.pid], {"point_id": p.pid, "point_values": p.values})
    return gather_family(FAMILY, SECTION, pts, valid_records(pts, files))


def test_gathered_vhs_points_are_the_solvers_with_the_gas_omega(gathered):
    ds = gathered
    assert set(ds["status"].values.ravel()) == {"converged"}
    assert ds["model_gas"].values.tolist() == ["", "", "Ar", "He"]
    assert np.isnan(ds["omega"].values[:2]).all() and ds["omega"].values[2:].tolist() == [0.81, 0.66]
    for gas in GASES:
        got = ds["G_P"].sel(problem="poiseuille", model=f"boltzmann_vhs-{gas}", wall=WALL, delta=1.0).item()
        direct = solve_plane_channel_boltzmann(
            "poiseuille", delta=1.0, molecule="vhs", omega=get_gas(gas).omega, n_space=16, n_velocity=4
        )
        assert got == direct.coefficient("G_P")
    ar, he = (ds["G_P"].sel(model=f"boltzmann_vhs-{g}", problem="poiseuille", wall=WALL).values for g in GASES)
    # different operators, different answers (He omega 0.66 lies between hard spheres and argon 0.81)
    assert np.all(np.abs(ar / he - 1.0) > OPERATORS_DIFFER)
    # the CF encoding keeps the labels and the extra coordinates
    back = from_cf(to_cf(ds)[0])
    assert back["model"].values.tolist() == ds["model"].values.tolist()
    assert back["model_gas"].values.tolist() == ["", "", "Ar", "He"]


def test_model_error_table_per_operator_and_gas(gathered):
    ds = gathered
    tables = FAMILY.tables(ds, SECTION)
    frame = tables["plane_channel_model_error"].frame
    assert len(frame) == 3 * 2  # (hard spheres, VHS Ar, VHS He) x delta
    assert frame["gas"].tolist() == ["", "", "Ar", "Ar", "He", "He"]
    for gas in GASES:
        row = frame[(frame["gas"] == gas) & (frame["delta [1]"] == 1.0)].iloc[0]
        assert row["Boltzmann model"] == f"linearized Boltzmann (VHS, {gas})"
        for key, problem in (("G_P", "poiseuille"), ("G_T", "thermal_creep")):
            sel = dict(problem=problem, wall=WALL, delta=1.0)
            ref = ds[key].sel(model=f"boltzmann_vhs-{gas}", **sel).item()
            assert row[f"{key} Boltzmann [1]"] == ref
            assert row[f"{key} S-model / Boltzmann [1]"] == pytest.approx(
                ds[key].sel(model="s_model", **sel).item() / ref, rel=ROUND_OFF_FORMULA
            )
    # each VHS point is converted with its own gas in the problem table, the gas-free models with every gas
    gp = tables["plane_channel_poiseuille"].frame
    assert sorted(set(gp[gp["model"] == "boltzmann_vhs"].groupby("gas").size().index)) == GASES
    vhs_ar = gp[(gp["model"] == "boltzmann_vhs") & (gp["gas"] == "Ar")]
    assert len(vhs_ar) == 2 and len(gp[gp["model"] == "s_model"]) == 2 * len(GASES)


def test_model_error_figure_has_a_row_per_operator(gathered):
    import matplotlib.pyplot as plt

    figs = FAMILY.figures(gathered, SECTION, {"width": 5, "height": 3.5})
    assert sorted(figs) == sorted(FAMILY.figure_names(SECTION))
    titled = [ax for ax in figs["plane_channel_model_error_vs_delta"].axes if ax.get_title()]
    assert len(titled) == 3 * 2  # operators x coefficients
    assert any("VHS, He" in ax.get_title() for ax in titled)
    captions = FAMILY.figure_captions(gathered, SECTION)
    assert "linearized Boltzmann (VHS, Ar)" in captions["plane_channel_model_error_vs_delta"]
    for f in figs.values():
        plt.close(f)


def test_cli_solves_a_vhs_point_for_a_gas(capsys):
    from knudsweep.cli import main

    argv = ["solve", "--model", "boltzmann_vhs", "--gas", "He", "--problem", "thermal_creep", "--delta", "1"]
    code = main([*argv, "--n-space", "16", "--n-velocity", "4", "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0 and out["status"] == "converged" and out["gas"] == "He" and out["omega"] == 0.66
    assert out["parameters"]["kinetic_model"] == "boltzmann_vhs" and out["parameters"]["omega"] == 0.66
    direct = solve_plane_channel_boltzmann(
        "thermal_creep", delta=1.0, molecule="vhs", omega=0.66, n_space=16, n_velocity=4
    )
    assert out["coefficients"]["G_T"] == direct.coefficient("G_T")
    with pytest.raises(SystemExit) as info:
        main([*argv[:4], "Xx", *argv[5:]])
    assert info.value.code == 2 and capsys.readouterr().err.startswith("knudsweep: error: --gas: unknown gas 'Xx'")


def test_point_cost_of_a_vhs_point():
    pts = {(p.values["model"], p.values.get("gas")): p for p in FAMILY.points(SECTION) if p.values["delta"] == 1.0}
    hs = FAMILY.point_cost(pts["boltzmann_hard_sphere", None].values)
    # VHS argon needs 10-20 % more iterations than hard spheres (grid.VHS_FACTOR, benchmarks/bench_boltzmann_channel.py)
    assert FAMILY.point_cost(pts["boltzmann_vhs", "Ar"].values) == pytest.approx(grid.VHS_FACTOR * hs)
