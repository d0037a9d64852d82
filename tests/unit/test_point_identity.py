"""Point identity: canonical values, readable stable paths, sharing across studies."""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from knudsweep.config import validate_study
from knudsweep.identity import canonical, format_exp, format_plain
from knudsweep.plan import StudyPlan


def plan_of(study="s", **section):
    base = {"problems": ["poiseuille"], "models": ["bgk"], "walls": [{"alpha": 0.9}]}
    if "kn" not in section:
        base["delta"] = [1.0]
    base.update(section)
    return StudyPlan(validate_study({"study": study, "plane_channel": base}))


def test_float_noise_does_not_change_a_path():
    assert 0.1 + 0.2 != 0.3
    assert canonical(0.1 + 0.2) == canonical(0.3) == 0.3
    assert format_exp(0.1 + 0.2) == "3.0e-01"
    a = plan_of(delta=[0.1 + 0.2]).point_files()
    b = plan_of(delta=[0.3]).point_files()
    assert a == b


def test_example_path_is_readable():
    (path,) = plan_of().point_files()
    assert path == (
        "results/points/plane_channel/poiseuille/model=bgk/wall=maxwell-alpha=0.9/"
        "grid=nsauto-nvauto-tol1.0e-08/delta=1.0e+00.nc"
    )


def test_text_forms():
    assert format_exp(1) == "1.0e+00"
    assert format_exp(100) == "1.0e+02"
    assert format_exp(10**-1.5) == "3.16228e-02"
    assert format_plain(1) == "1.0" and format_plain(0.9) == "0.9" and format_plain(0.125) == "0.125"


def test_log_range_matches_typed_list():
    # logspace(-2, 2, 5) has float noise (e.g. 0.010000000000000002 on some paths);
    # canonical values make it the same points as the typed list.
    a = plan_of(delta={"start": 0.01, "stop": 100, "num": 5}).point_files()
    b = plan_of(delta=[0.01, 0.1, 1.0, 10.0, 100.0]).point_files()
    assert a == b


def test_same_point_in_two_studies_and_gases_share_the_file():
    a = plan_of(study="one", gases=["Ar"])
    b = plan_of(study="two", gases=["He", "N2"])
    assert a.point_files() == b.point_files()
    assert a.sweep_file != b.sweep_file


def test_kn_axis_maps_onto_delta_points():
    deltas = [0.1, 1.0, 10.0]
    kns = [math.sqrt(math.pi) / (2 * d) for d in deltas]
    assert plan_of(delta=deltas).point_files() == plan_of(kn=kns).point_files()


def test_resolution_is_part_of_identity_but_iteration_limit_is_not():
    base = plan_of().point_files()
    assert plan_of(resolution={"n_space": 40}).point_files() != base
    assert plan_of(iteration={"max_iter": 10}).point_files() == base


def test_cercignani_lampis_and_asymmetric_labels():
    walls = [{"model": "cercignani_lampis", "alpha_t": 0.9, "alpha_n": 0.5}, {"alpha": 1.0, "upper": {"alpha": 0.5}}]
    files = plan_of(walls=walls).point_files()
    assert "wall=cercignani_lampis-alpha_t=0.9-alpha_n=0.5/" in files[0]
    assert "wall=maxwell-alpha=1.0_upper=maxwell-alpha=0.5/" in files[1]


def test_grid_size():
    plan = plan_of(
        problems=["poiseuille", "thermal_creep"],
        models=["bgk", "s_model"],
        walls=[{"alpha": 1.0}, {"alpha": 0.8}],
        delta={"start": 0.1, "stop": 10, "num": 3},
    )
    assert len(plan.points) == len(set(plan.point_files())) == 2 * 2 * 2 * 3


@given(st.floats(min_value=1e-6, max_value=1e6, allow_nan=False))
def test_canonical_is_idempotent_and_text_round_trips(x):
    c = canonical(x)
    assert canonical(c) == c
    assert float(format_exp(c)) == c
    assert float(format_plain(c)) == c
    # 6 significant digits: relative change at most half a unit in the 6th digit
    assert abs(c - x) <= 5e-6 * abs(x) * (1 + 1e-12)


def test_non_finite_values_are_rejected():
    with pytest.raises(ValueError, match="finite"):
        canonical(float("nan"))
