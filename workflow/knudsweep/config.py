"""Study files: load, validate against config/schema.yaml, fill defaults.

A study is one YAML file (``config/config.yaml`` is the demo).  Validation uses
JSON Schema draft 2020-12 (``jsonschema.Draft202012Validator``) extended to
fill ``default`` values, then the family-specific checks of every registered
solver family (see :mod:`knudsweep.families`).  The first problem found is
raised as :class:`StudyConfigError`, a ``ValueError`` whose message is one line:
``<key path>: <what is wrong>; <allowed values or range>``.
"""

from __future__ import annotations

import copy
import hashlib
import json
import math
import re
from functools import lru_cache
from importlib.resources import files
from pathlib import Path
from typing import Any

import jsonschema
import yaml

from knudsweep.solver.gas import known_gases

# config/schema.yaml, installed as package data knudsweep.data (pyproject.toml)
SCHEMA_FILE = Path(str(files("knudsweep.data").joinpath("schema.yaml")))

# Sections that never change a point's numbers: excluded from the config hash
# written into point files, so that editing them does not look like a new study.
_PRESENTATION_SECTIONS = ("figures", "execution", "description")


# Numbers YAML 1.1 (PyYAML, Snakemake) reads as text: 1e-3 (no dot) and 1.0e308 (no exponent sign)
_YAML11_TEXT_NUMBER = re.compile(r"^([-+]?)([0-9]*)(?:\.([0-9]*))?[eE]([-+]?)([0-9]+)$")


def _yaml_number_spelling(text: str) -> str | None:
    """The YAML 1.1 spelling of a number that YAML read as text (``1e-3`` -> ``1.0e-3``), else None."""
    m = _YAML11_TEXT_NUMBER.match(text)
    if m is None or not (m.group(2) or m.group(3)):
        return None
    sign, whole, frac, esign, exp = m.groups()
    return f"{sign}{whole or '0'}.{frac or '0'}e{esign or '+'}{exp}"


class StudyConfigError(ValueError):
    """A study file violates the schema; the message is one line."""


@lru_cache(maxsize=1)
def load_schema() -> dict[str, Any]:
    """The study schema with its name enums filled in: gas names from ``known_gases()``, kinetic-model names
    from the one registry, knudsweep.solver.kinetic_models, wall laws from knudsweep.solver.walls."""
    from knudsweep.solver import kinetic_models as km
    from knudsweep.solver.walls import WALL_LAWS

    with open(SCHEMA_FILE, encoding="utf-8") as fh:
        schema = yaml.safe_load(fh)
    defs = schema["$defs"]
    defs["gas_name"]["enum"] = list(known_gases())
    defs["model_equation"]["enum"] = list(km.MODEL_NAMES)
    defs["channel_model"]["enum"] = [*km.MODEL_NAMES, *km.BOLTZMANN_MODELS]
    defs["relaxation_method"]["enum"] = ["dsmc", *km.MODEL_NAMES, km.RELAXATION_BOLTZMANN]
    defs["wall_law"]["properties"]["model"]["enum"] = list(WALL_LAWS)
    return schema


def schema_node(*path: str) -> dict[str, Any]:
    """The schema entry at ``path`` (keys below ``properties``), following ``$ref`` into ``$defs``:
    ``schema_node("tube_duct", "walls", "items", "alpha")``.  The CLI reads its limits here."""
    schema = load_schema()
    node = schema
    for key in path:
        while "$ref" in node and key not in node.get("properties", {}) and key != "items":
            node = _resolve(schema, node["$ref"])
        node = node["items"] if key == "items" else node["properties"][key]
    while "$ref" in node and not {"minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum", "enum"} & set(node):
        node = {**_resolve(schema, node["$ref"]), **{k: v for k, v in node.items() if k != "$ref"}}
    return node


def _resolve(schema: dict[str, Any], ref: str) -> dict[str, Any]:
    node = schema
    for part in ref.removeprefix("#/").split("/"):
        node = node[part]
    return node


def _schema_properties(schema: dict[str, Any], sub: dict[str, Any]) -> set[str]:
    """Keys a (sub)schema declares, its ``$ref`` target's included."""
    keys = set(sub.get("properties", {}))
    if "$ref" in sub:
        keys |= _schema_properties(schema, _resolve(schema, sub["$ref"]))
    return keys


def _fill_defaults(validator_class):
    """Extend a validator class so that ``properties`` also inserts defaults.

    This is the recipe from the jsonschema FAQ ("Why doesn't my schema's
    default property set the default on my instance?").  Defaults are deep
    copied so that two studies never share a mutable default.
    """
    validate_properties = validator_class.VALIDATORS["properties"]

    def set_defaults(validator, properties, instance, schema):
        if isinstance(instance, dict):
            for name, sub in properties.items():
                if isinstance(sub, dict) and "default" in sub and name not in instance:
                    instance[name] = copy.deepcopy(sub["default"])
        yield from validate_properties(validator, properties, instance, schema)

    return jsonschema.validators.extend(validator_class, {"properties": set_defaults})


def _strict_integers(validator_class):
    """JSON Schema counts 3.0 as an integer; a study may not (16.0 grid cells would fail late)."""
    checker = validator_class.TYPE_CHECKER.redefine(
        "integer", lambda _checker, x: isinstance(x, int) and not isinstance(x, bool)
    )
    return jsonschema.validators.extend(validator_class, type_checker=checker)


_DefaultFillingValidator = _fill_defaults(_strict_integers(jsonschema.Draft202012Validator))

# Largest study tree, counted with YAML aliases expanded (a 10^4-element axis is
# about 10^4 nodes); an alias "bomb" of a few hundred bytes expands past it at once.
MAX_STUDY_NODES = 1_000_000


def _expanded_size(node, memo: dict[int, int]) -> int:
    """Nodes of ``node`` with shared (aliased) subtrees counted every time they appear."""
    key = id(node)
    if key in memo:
        return memo[key]
    memo[key] = 1  # a cycle (recursive alias) counts once; the schema rejects it anyway
    if isinstance(node, dict):
        total = 1 + sum(_expanded_size(v, memo) for v in node.values()) + len(node)
    elif isinstance(node, list):
        total = 1 + sum(_expanded_size(v, memo) for v in node)
    else:
        total = 1
    memo[key] = min(total, 10 * MAX_STUDY_NODES)
    return memo[key]


class _StrictLoader(yaml.SafeLoader):
    """SafeLoader that refuses a key given twice in one mapping (YAML lets the last one win)."""

    def construct_mapping(self, node, deep=False):
        seen = {}
        for key_node, _ in node.value:
            key = self.construct_object(key_node, deep=deep)
            if key in seen:
                raise StudyConfigError(
                    f"key {key!r} appears twice in one mapping (lines "
                    f"{seen[key] + 1} and {key_node.start_mark.line + 1}); keep one"
                )
            seen[key] = key_node.start_mark.line
        return super().construct_mapping(node, deep=deep)


_StrictLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _StrictLoader.construct_mapping)


def read_study_yaml(path: str | Path) -> Any:
    """Parse a study file strictly (duplicate keys are errors); StudyConfigError (one line) on failure."""
    path = Path(path)
    try:
        with open(path, encoding="utf-8") as fh:
            return yaml.load(fh, Loader=_StrictLoader)  # noqa: S506 (a SafeLoader subclass)
    except FileNotFoundError:
        raise StudyConfigError(f"study file {str(path)!r} does not exist") from None
    except IsADirectoryError:
        raise StudyConfigError(f"study file {str(path)!r} is a directory") from None
    except UnicodeDecodeError as exc:
        raise StudyConfigError(f"study file {str(path)!r} is not UTF-8 text (byte {exc.start})") from None
    except RecursionError:
        raise StudyConfigError(f"study file {str(path)!r} is nested too deeply") from None
    except StudyConfigError as exc:
        raise StudyConfigError(f"study file {str(path)!r}: {exc}") from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}" if mark is not None else ""
        raise StudyConfigError(f"study file {str(path)!r} is not valid YAML{where}") from None


def key_path(parts) -> str:
    """``['plane_channel', 'delta', 0]`` -> ``plane_channel.delta[0]``."""
    out = ""
    for part in parts:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += f".{part}" if out else str(part)
    return out or "<top level>"


def _allowed(schema: dict[str, Any]) -> str:
    """Human text for the allowed values of a (sub)schema."""
    if "enum" in schema:
        return "allowed values are " + ", ".join(map(str, schema["enum"]))
    low = schema.get("exclusiveMinimum", schema.get("minimum"))
    high = schema.get("exclusiveMaximum", schema.get("maximum"))
    if low is not None or high is not None:
        lb = "(" if "exclusiveMinimum" in schema or low is None else "["
        rb = ")" if "exclusiveMaximum" in schema or high is None else "]"
        lo = "-inf" if low is None else f"{low:g}"
        hi = "inf" if high is None else f"{high:g}"
        unit = schema.get("unit")
        unit_text = f" {unit}" if unit and unit not in ("1", "none") else ""
        return f"allowed range is {lb}{lo}, {hi}{rb}{unit_text}"
    if "type" in schema:
        return f"expected type {schema['type']}"
    return ""


def _error_message(error: jsonschema.ValidationError) -> str:
    path = list(error.absolute_path)
    kind = error.validator
    if kind in ("additionalProperties", "unevaluatedProperties"):
        allowed = sorted(_schema_properties(load_schema(), error.schema))
        extra = sorted(set(error.instance) - set(allowed))
        return f"{key_path(path + [extra[0]])}: unknown key; allowed keys here are {', '.join(allowed)}"
    if kind == "required":
        return f"{key_path(path)}: {error.message}"
    if kind == "anyOf":
        # The only anyOf is the axis (list or {start, stop, num}): report the
        # most specific sub-error, which names the offending element.
        specific = [e for e in error.context if not (e.validator == "type" and not e.relative_path)]
        if specific:
            specific.sort(key=lambda e: (-len(e.absolute_path), key_path(e.absolute_path)))
            return _error_message(specific[0])
        return (
            f"{key_path(path)}: got {error.instance!r}; expected a list of numbers > 0 or a range {{start, stop, num}}"
        )
    if kind == "enum":
        return f"{key_path(path)}: unknown value {error.instance!r}; {_allowed(error.schema)}"
    if kind in ("minimum", "maximum", "exclusiveMinimum", "exclusiveMaximum"):
        return f"{key_path(path)}: got {error.instance!r}; {_allowed(error.schema)}"
    if kind == "type":
        hint = ""
        spelling = _yaml_number_spelling(error.instance) if isinstance(error.instance, str) else None
        if spelling is not None:
            hint = f" (YAML reads {error.instance} as text; write {spelling})"
        wanted = error.validator_value if isinstance(error.validator_value, list) else [error.validator_value]
        if isinstance(error.instance, float) and "integer" in wanted and error.instance.is_integer():
            return f"{key_path(path)}: got {error.instance!r}; expected a whole number (write {int(error.instance)})"
        return f"{key_path(path)}: got {error.instance!r}; expected type {error.validator_value}{hint}"
    return f"{key_path(path)}: {error.message}"


def _first_error(validator, instance) -> jsonschema.ValidationError | None:
    errors = list(validator.iter_errors(instance))
    if not errors:
        return None
    # Deterministic and most useful first: the deepest path, then the path text.
    errors.sort(key=lambda e: (-len(e.absolute_path), key_path(e.absolute_path)))
    return errors[0]


def _reject_non_finite(node: Any, path: list) -> None:
    """NaN and infinities pass JSON-schema range checks (every comparison is false): refuse them here."""
    if isinstance(node, float) and not math.isfinite(node):
        raise StudyConfigError(f"{key_path(path)}: got {node!r}; expected a finite number")
    if isinstance(node, dict):
        for k, v in node.items():
            _reject_non_finite(v, path + [k])
    elif isinstance(node, list):
        for i, v in enumerate(node):
            _reject_non_finite(v, path + [i])


def validate_study(raw: dict[str, Any]) -> dict[str, Any]:
    """Validate a study mapping; return a new dict with defaults filled in.

    Raises :class:`StudyConfigError` (one line) on the first problem.
    """
    if not isinstance(raw, dict) or not raw:
        raise StudyConfigError("<top level>: the study file is empty or not a mapping")
    size = _expanded_size(raw, {})
    if size > MAX_STUDY_NODES:
        raise StudyConfigError(
            f"<top level>: the study expands to more than {MAX_STUDY_NODES:,} values "
            "(YAML aliases repeated inside each other?); write it out plainly"
        )
    study = copy.deepcopy(dict(raw))
    _reject_non_finite(study, [])
    validator = _DefaultFillingValidator(load_schema())
    error = _first_error(validator, study)
    if error is not None:
        raise StudyConfigError(_error_message(error))

    from knudsweep.families import family_sections, get_family

    sections = family_sections(study)
    if not sections:
        raise StudyConfigError("<top level>: no solver family section; add one of " + ", ".join(family_sections(None)))
    for name in sections:
        try:
            get_family(name).check_section(study[name])
        except ValueError as exc:
            raise StudyConfigError(f"{name}.{exc}") from None
        _check_given(name, raw[name], study[name])
    _check_size_and_memory(study, sections)
    return study


def _check_given(name: str, raw_section: Any, section: dict[str, Any]) -> None:
    """Keys a family needs the study to give (``required_keys(section)`` of its grid module, key -> reason):
    a schema default does not stand in for them (e.g. the gases of a gas-dependent collision operator)."""
    from knudsweep.families import get_family

    required = getattr(get_family(name).grid, "required_keys", None)
    for key, why in (required(section) if required else {}).items():
        if key not in raw_section:
            raise StudyConfigError(f"{name}.{key}: missing; {why}")


# Largest study planned: 10^6 points plan in 1.1 GB and 25 s (snakemake --dry-run,
# measured); above 2 x 10^6 the 2 GB planning budget would not hold.
MAX_STUDY_POINTS = 2_000_000


def _check_size_and_memory(study: dict[str, Any], sections: list[str]) -> None:
    from knudsweep.families import get_family

    total = 0
    for name in sections:
        n = 1
        for labels in get_family(name).gather_dims(study[name]).values():
            n *= len(labels)
        total += n
    if total > MAX_STUDY_POINTS:
        raise StudyConfigError(
            f"<top level>: the study has {total:,} points; at most {MAX_STUDY_POINTS:,} "
            "can be planned in one study (split it into several studies)"
        )
    limit = study["execution"]["mem_mb_per_point"]
    for name in sections:
        mb, which = get_family(name).peak_memory_mb(study[name])
        if mb > limit:
            raise StudyConfigError(
                f"{name}.resolution: one point needs about {mb:,.0f} MB ({which}), more than "
                f"execution.mem_mb_per_point = {limit} MB; use a coarser grid or give more memory"
            )


def load_study(path: str | Path) -> dict[str, Any]:
    """Read (strictly, see :func:`read_study_yaml`) and validate the study file at ``path``."""
    return validate_study(read_study_yaml(path))


def config_hash(study: dict[str, Any]) -> str:
    """Short SHA-256 of the validated study without its presentation sections."""
    core = {k: v for k, v in study.items() if k not in _PRESENTATION_SECTIONS}
    text = json.dumps(core, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def log_spaced(start: float, stop: float, num: int) -> list[float]:
    """``num`` values from ``start`` to ``stop`` (both included), equally spaced in log."""
    if num == 1:
        return [float(start)]
    a, b = math.log10(start), math.log10(stop)
    return [10.0 ** (a + (b - a) * i / (num - 1)) for i in range(num)]


def axis_values(name: str, spec: Any) -> list[float]:
    """Values of a positive axis given as a list or as ``{start, stop, num}``.

    Raises ValueError naming ``name`` when a range is reversed or values repeat.
    """
    if isinstance(spec, dict):
        if not spec["start"] < spec["stop"] and spec["num"] > 1:
            raise ValueError(f"{name}: start ({spec['start']:g}) must be below stop ({spec['stop']:g})")
        return log_spaced(spec["start"], spec["stop"], spec["num"])
    return [float(v) for v in spec]
