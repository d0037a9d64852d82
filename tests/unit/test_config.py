"""Study config: schema validation, defaults, one-line errors, schema completeness."""

from pathlib import Path

import pytest
import yaml
from precision import ROUND_OFF_FORMULA

from knudsweep.config import (
    SCHEMA_FILE,
    StudyConfigError,
    axis_values,
    config_hash,
    load_schema,
    load_study,
    validate_study,
)
from knudsweep.families import REGISTRY
from knudsweep.solver.gas import known_gases

REPO = Path(__file__).resolve().parents[2]


def tiny(**overrides):
    section = {"problems": ["poiseuille"], "models": ["bgk"], "walls": [{"alpha": 1.0}], "delta": [0.1, 1.0]}
    section.update(overrides)
    return {"study": "t", "plane_channel": section}


def error_of(study) -> str:
    with pytest.raises(StudyConfigError) as info:
        validate_study(study)
    message = str(info.value)
    assert "\n" not in message  # one line, always
    return message


def test_demo_config_is_valid_and_defaults_are_filled():
    study = load_study(REPO / "config" / "config.yaml")
    assert study["study"] == "halden-microvalve"
    small = validate_study(tiny())
    # defaults from schema.yaml land in nested sections that were absent
    assert small["figures"] == {"formats": ["png", "pdf"], "width": 6.0, "height": 4.2, "dpi": 150}
    assert small["plane_channel"]["resolution"] == {"accuracy": None, "n_space": None, "n_velocity": None, "tol": 1e-8}
    assert small["plane_channel"]["gases"] == ["Ar"]
    assert small["execution"]["threads_per_batch"] == 2
    assert small["execution"]["batch_minutes"] == {"local": 1.0, "cluster": 20.0}
    assert small["execution"]["points_per_batch"] is None


def test_validation_does_not_mutate_its_input():
    raw = tiny()
    validate_study(raw)
    assert "figures" not in raw


def test_negative_delta_names_the_element_and_the_range():
    msg = error_of(tiny(delta=[1.0, -0.5]))
    assert msg.startswith("plane_channel.delta[1]: got -0.5")
    assert "(0, " in msg


def test_negative_range_start():
    msg = error_of(tiny(delta={"start": -1, "stop": 10, "num": 3}))
    assert msg.startswith("plane_channel.delta.start: got -1")


def test_unknown_gas_lists_the_known_gases():
    msg = error_of(tiny(gases=["Ar", "Argon"]))
    assert msg.startswith("plane_channel.gases[1]: unknown value 'Argon'")
    for name in known_gases():
        assert name in msg


def test_misspelt_key_is_an_error_with_allowed_keys():
    study = tiny()
    study["plane_channel"]["modles"] = ["bgk"]
    msg = error_of(study)
    assert msg.startswith("plane_channel.modles: unknown key")
    assert "models" in msg
    msg = error_of({**tiny(), "figure": {}})
    assert msg.startswith("figure: unknown key") and "figures" in msg


def test_unknown_model_and_accommodation_out_of_range():
    assert error_of(tiny(models=["bkg"])).startswith("plane_channel.models[0]: unknown value 'bkg'")
    msg = error_of(tiny(walls=[{"alpha": 0.0}]))
    assert msg.startswith("plane_channel.walls[0].alpha: got 0") and "[0.01, 1]" in msg


def test_family_checks_delta_xor_kn_range_order_and_wall_keys():
    both = tiny(kn=[1.0])
    assert "exactly one of 'delta' and 'kn'" in error_of(both)
    assert error_of(tiny(delta={"start": 10, "stop": 1, "num": 3})).startswith("plane_channel.delta: start")
    msg = error_of(tiny(walls=[{"model": "cercignani_lampis", "alpha": 0.5}]))
    assert msg.startswith("plane_channel.walls[0].alpha: not a parameter of wall model 'cercignani_lampis'")
    msg = error_of(tiny(walls=[{"alpha": 0.9}, {"alpha": 0.9000000001}]))
    assert "repeats walls[0]" in msg
    assert "repeat after rounding" in error_of(tiny(delta=[0.3, 0.1 + 0.2]))


def test_missing_study_file_and_bad_yaml(tmp_path):
    with pytest.raises(StudyConfigError, match="does not exist"):
        load_study(tmp_path / "nope.yaml")
    bad = tmp_path / "bad.yaml"
    bad.write_text("study: [unclosed\n")
    with pytest.raises(StudyConfigError, match="not valid YAML at line"):
        load_study(bad)


def test_log_spaced_axis_includes_both_ends():
    values = axis_values("delta", {"start": 0.01, "stop": 100, "num": 5})
    assert values[0] == pytest.approx(0.01, rel=ROUND_OFF_FORMULA) and values[-1] == pytest.approx(
        100, rel=ROUND_OFF_FORMULA
    )
    assert len(values) == 5


def test_config_hash_ignores_presentation_only():
    a = validate_study(tiny())
    b = validate_study({**tiny(), "figures": {"width": 9.0}})
    c = validate_study(tiny(delta=[0.1, 2.0]))
    assert config_hash(a) == config_hash(b) != config_hash(c)


def _walk(schema, path, required_here, visit):
    for name, sub in schema.get("properties", {}).items():
        visit(f"{path}.{name}", sub, name in required_here)
        _walk(sub, f"{path}.{name}", sub.get("required", []), visit)
    if "items" in schema:
        _walk(schema["items"], f"{path}[]", [], visit)


# Wall accommodation keys have model-dependent defaults applied in code (1.0 for
# the keys of the chosen model; a default in the schema would add alpha to a
# Cercignani-Lampis wall), so they alone carry no schema default.
_CODE_DEFAULTS = {"alpha", "alpha_t", "alpha_n", "upper"}


def test_every_key_has_description_unit_range_and_default():
    schema = load_schema()
    problems = []

    def visit(path, sub, required):
        name = path.rsplit(".", 1)[-1]
        for key in ("description", "unit"):
            if key not in sub:
                problems.append(f"{path}: no {key}")
        # A family section has no default: leaving it out means "not in this study".
        exempt = name in _CODE_DEFAULTS or name in REGISTRY or "$ref" in sub
        if not required and "default" not in sub and not exempt:
            problems.append(f"{path}: no default")
        types = sub.get("type")
        types = types if isinstance(types, list) else [types]
        if ("number" in types or "integer" in types) and not (
            {"minimum", "exclusiveMinimum"} & set(sub) and {"maximum", "exclusiveMaximum"} & set(sub)
        ):
            problems.append(f"{path}: numeric without range")
        if "string" in types and not ({"enum", "pattern", "maxLength"} & set(sub)):
            problems.append(f"{path}: string without allowed values")
        # $defs.wall_law is the shared key set of wall and plate_wall, which close it (unevaluatedProperties)
        if types == ["object"] and sub.get("additionalProperties") is not False and path != "$defs.wall_law":
            problems.append(f"{path}: object without additionalProperties: false")

    _walk(schema, "", schema.get("required", []), visit)
    for name, sub in schema["$defs"].items():
        visit(f"$defs.{name}", sub, True)
        _walk(sub, f"$defs.{name}", sub.get("required", []), visit)
        for branch in sub.get("anyOf", []):
            _walk(branch, f"$defs.{name}", branch.get("required", []), visit)
    assert schema["additionalProperties"] is False
    assert all(schema["$defs"][name]["unevaluatedProperties"] is False for name in ("wall", "plate_wall"))
    assert problems == []


def test_model_enums_come_from_the_kinetic_model_registry():
    from knudsweep.solver import kinetic_models as km
    from knudsweep.solver.relaxation.solve import METHODS

    raw = yaml.safe_load(SCHEMA_FILE.read_text())
    assert all("enum" not in raw["$defs"][name] for name in ("channel_model", "model_equation", "relaxation_method"))
    defs = load_schema()["$defs"]
    assert defs["model_equation"]["enum"] == list(km.MODEL_NAMES)
    assert defs["channel_model"]["enum"] == list(km.MODEL_NAMES) + list(km.BOLTZMANN_MODELS)
    assert defs["relaxation_method"]["enum"] == list(METHODS)


def test_repeated_blocks_are_defs_with_clear_messages():
    # walls, iteration and the accuracy target are written once ($defs) and still give one-line messages
    raw = yaml.safe_load(SCHEMA_FILE.read_text())
    for fam in ("plane_channel", "tube_duct"):
        assert raw["properties"][fam]["properties"]["iteration"]["$ref"] == "#/$defs/iteration"
        assert (
            raw["properties"][fam]["properties"]["resolution"]["properties"]["accuracy"]["$ref"] == "#/$defs/accuracy"
        )
    msg = error_of(tiny(walls=[{"alpha": 0.9, "upper": {"alhpa": 0.8}}]))
    assert (
        msg.startswith("plane_channel.walls[0].upper.alhpa: unknown key")
        and "alpha_t" in msg
        and "upper" not in msg[30:]
    )
    msg = error_of(tiny(iteration={"max_iter": 0}))
    assert msg.startswith("plane_channel.iteration.max_iter: got 0") and "[1, 1e+08]" in msg
    study = validate_study(tiny(walls=[{"alpha": 0.9, "upper": {"alpha": 0.8}}]))
    assert study["plane_channel"]["walls"][0]["upper"] == {"alpha": 0.8, "model": "maxwell"}
    assert study["plane_channel"]["iteration"] == {"max_iter": None, "accelerate": True, "retry_max_iter_factor": 4}


def test_schema_is_draft_2020_12_and_gas_enum_comes_from_gas_table():
    raw = yaml.safe_load(SCHEMA_FILE.read_text())
    assert raw["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert load_schema()["$defs"]["gas_name"]["enum"] == known_gases()


def test_every_registered_family_has_a_schema_section():
    props = load_schema()["properties"]
    for name in REGISTRY:
        assert name in props and props[name]["additionalProperties"] is False


def test_snakefile_is_thin():
    lines = (REPO / "Snakefile").read_text().splitlines()
    assert len(lines) < 50
    assert any('min_version("9.0")' in line for line in lines)


def test_accuracy_target_excludes_explicit_grid_sizes(tmp_path):
    # The user asks for accuracy *or* grid sizes; both at once is ambiguous.
    import yaml

    from knudsweep.config import StudyConfigError, load_study

    study = {
        "study": "acc",
        "plane_channel": {
            "problems": ["poiseuille"],
            "models": ["bgk"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [1.0],
            "resolution": {"accuracy": 1e-4, "n_space": 40},
        },
    }
    path = tmp_path / "s.yaml"
    path.write_text(yaml.safe_dump(study))
    with pytest.raises(StudyConfigError, match="accuracy"):
        load_study(path)
    study["plane_channel"]["resolution"] = {"accuracy": 1e-4}
    path.write_text(yaml.safe_dump(study))
    from knudsweep.plan import StudyPlan

    pids = list(StudyPlan(load_study(path)).points)
    assert len(pids) == 1 and "grid=acc1.0e-04" in pids[0]


def test_plane_channel_resolution_limits_are_the_solvers():
    # one source of limits: the schema states the plane-channel solver's own bounds, so a
    # study the check accepts is never refused by the solver later
    from knudsweep.config import load_schema
    from knudsweep.solver.plane_channel.driver import TOL_RANGE
    from knudsweep.solver.plane_channel.grids import MAX_SPACE, MIN_SPACE
    from knudsweep.solver.quadrature import MAX_NODES

    res = load_schema()["properties"]["plane_channel"]["properties"]["resolution"]["properties"]
    assert (res["n_space"]["minimum"], res["n_space"]["maximum"]) == (MIN_SPACE, MAX_SPACE)
    assert res["n_velocity"]["maximum"] == MAX_NODES
    assert (res["tol"]["minimum"], res["tol"]["maximum"]) == TOL_RANGE
