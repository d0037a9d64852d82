"""Bad-input fuzzing (hypothesis) of the study loader and of ``knudsweep solve``.

Every invalid input must be refused with one line naming the key (study) or
option (command line), as StudyConfigError / exit code 2 -- never another
exception, never a traceback.  The examples are derandomized (same inputs on
every run); the counts are printed.
"""

from __future__ import annotations

import copy
import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from knudsweep import cli
from knudsweep.config import StudyConfigError, key_path, load_study, validate_study
from knudsweep.families.plane_channel import MODELS, PROBLEMS
from knudsweep.plan import StudyPlan
from knudsweep.solver.gas import known_gases

BASE = {
    "study": "fuzz",
    "description": "fuzzing base",
    "plane_channel": {
        "problems": ["poiseuille"],
        "models": ["bgk"],
        "gases": ["Ar"],
        "walls": [{"model": "maxwell", "alpha": 0.9}],
        "delta": [0.1, 1.0],
        "conditions": {"temperature": 300.0, "gap": 2.0e-6},
        "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1.0e-6},
        "iteration": {"max_iter": 100, "accelerate": True, "retry_max_iter_factor": 2},
    },
    "execution": {"threads_per_batch": 1, "gather_workers": 1},
    "figures": {"formats": ["png"], "width": 5.0, "height": 3.5, "dpi": 60},
}

BAD_VALUES = [
    None,
    True,
    False,
    "",
    "text",
    "1e-6",
    -1,
    0,
    -1e-9,
    1e300,
    -1e300,
    10**20,
    math.nan,
    math.inf,
    -math.inf,
    [],
    {},
    [None],
    ["x"],
    {"x": 1},
    [-1.0],
    [math.nan],
    {"start": 1.0, "stop": 0.1, "num": 3},
    {"start": 0.1, "stop": 1.0},
    "../../etc",
]


def _paths(node, prefix=()):
    """Every key path of the base study (dict keys and list indices)."""
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))


PATHS = [p for p in _paths(BASE) if p]


def _set(study, path, value, mode):
    node = study
    for part in path[:-1]:
        node = node[part]
    last = path[-1]
    if mode == "delete" and isinstance(node, dict):
        del node[last]
    elif mode == "unknown_key" and isinstance(node, dict):
        node[f"{last}_typo"] = value
        return path[:-1] + (f"{last}_typo",)
    else:
        node[last] = value
    return path


def _related(reported: str, mutated: tuple) -> bool:
    """The reported key path is the mutated one, inside it, or one of its parents."""
    m = key_path(list(mutated))
    return (
        reported == m
        or reported.startswith(m + ".")
        or reported.startswith(m + "[")
        or m.startswith(reported + ".")
        or m.startswith(reported + "[")
        or reported == "<top level>"
    )


def _finite_everywhere(node):
    if isinstance(node, float):
        return math.isfinite(node)
    if isinstance(node, dict):
        return all(_finite_everywhere(v) for v in node.values())
    if isinstance(node, list):
        return all(_finite_everywhere(v) for v in node)
    return True


@pytest.fixture
def counts(capsys):
    data = {}
    yield data
    with capsys.disabled():
        print("\n[faults] fuzzing " + "; ".join(f"{k}: {v}" for k, v in data.items()))


FUZZ = settings(
    max_examples=250,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)


def test_fuzz_study_validation(counts, capsys):
    tally = {"tried": 0, "rejected cleanly": 0, "accepted (valid after all)": 0}

    @FUZZ
    @given(
        st.lists(
            st.tuples(
                st.sampled_from(PATHS), st.sampled_from(BAD_VALUES), st.sampled_from(["set", "delete", "unknown_key"])
            ),
            min_size=1,
            max_size=3,
        )
    )
    def check(mutations):
        study = copy.deepcopy(BASE)
        touched = []
        for path, value, mode in mutations:
            try:
                touched.append(_set(study, path, value, mode))
            except (KeyError, IndexError, TypeError):  # an earlier mutation removed/replaced the parent
                continue
        tally["tried"] += 1
        try:
            valid = validate_study(study)
        except StudyConfigError as exc:
            msg = str(exc)
            assert "\n" not in msg
            reported = msg.split(": ", 1)[0]
            assert any(_related(reported, t) for t in touched), (msg, touched)
            tally["rejected cleanly"] += 1
            return
        # accepted: it must really be usable (planning never raises) and finite
        assert _finite_everywhere(valid), valid
        assert StudyPlan(valid).points is not None
        tally["accepted (valid after all)"] += 1

    check()
    counts["study mutations"] = ", ".join(f"{v} {k}" for k, v in tally.items())
    assert tally["rejected cleanly"] > 0.5 * tally["tried"]


def test_fuzz_study_files(counts, tmp_path):
    tally = {"tried": 0, "rejected cleanly": 0, "accepted": 0}
    path = tmp_path / "study.yaml"

    @FUZZ
    @given(
        st.one_of(
            st.binary(max_size=200),
            st.text(max_size=200).map(lambda t: t.encode("utf-8", "surrogatepass")),
            st.sampled_from(
                [
                    b"[" * 3000,
                    b"{a: " * 3000,
                    b"study: x\nplane_channel: !!python/object:os.system {}\n",
                    b"study: [",
                    b"\xff\xfe",
                    b"- 1\n- 2\n",
                    b"study: .nan\n",
                    b"study: ok\nplane_channel: {delta: [.nan]}\n",
                ]
            ),
        )
    )
    def check(data):
        path.write_bytes(data)
        tally["tried"] += 1
        try:
            load_study(path)
        except StudyConfigError as exc:
            assert "\n" not in str(exc)
            tally["rejected cleanly"] += 1
            return
        tally["accepted"] += 1

    check()
    counts["study files"] = ", ".join(f"{v} {k}" for k, v in tally.items())
    assert tally["accepted"] == 0  # random bytes never make a complete study


# ----------------------------------------------------------------------- CLI

FLOAT_OPTIONS = {  # option: (valid low, valid high, allowed range as in the CLI)
    "--delta": (1e-3, 1e3),
    "--alpha": (0.05, 1.0),
    "--alpha-upper": (0.05, 1.0),
    "--tol": (1e-10, 1e-3),
    "--temperature": (10.0, 1000.0),
}
INT_OPTIONS = {"--n-space": (8, 64), "--n-velocity": (4, 32), "--max-iter": (1, 1000), "--threads": (1, 2)}
INVALID_FLOATS = {
    "--delta": [0.0, -1.0, 2e6, math.inf],
    "--alpha": [0.0, -0.5, 1.5, 1e9],
    "--alpha-upper": [0.0, 2.0],
    "--tol": [0.0, -1e-8, 0.5, 1.0],
    "--temperature": [0.0, -300.0, 2e4],
}
INVALID_INTS = {
    "--n-space": [3, 0, -5, 10**9],
    "--n-velocity": [0, 3, 10**6],
    "--max-iter": [0, -1, 10**10],
    "--threads": [0, -2, 100000],
}
CHOICES = {"--problem": PROBLEMS, "--model": MODELS, "--gas": tuple(known_gases()), "--wall-model": ("maxwell",)}


@st.composite
def valid_pair(draw, option):
    if option in FLOAT_OPTIONS:
        lo, hi = FLOAT_OPTIONS[option]
        return option, repr(draw(st.floats(lo, hi)))
    if option in INT_OPTIONS:
        lo, hi = INT_OPTIONS[option]
        return option, str(draw(st.integers(lo, hi)))
    return option, draw(st.sampled_from(CHOICES[option]))


@st.composite
def invalid_pair(draw):
    kind = draw(
        st.sampled_from(["range_float", "range_int", "not_a_number", "nan", "choice", "unknown", "missing_value"])
    )
    if kind == "range_float":
        opt = draw(st.sampled_from(sorted(INVALID_FLOATS)))
        return opt, [f"{opt}={draw(st.sampled_from(INVALID_FLOATS[opt]))!r}"]
    if kind == "range_int":
        opt = draw(st.sampled_from(sorted(INVALID_INTS)))
        return opt, [opt, str(draw(st.sampled_from(INVALID_INTS[opt])))]
    if kind == "not_a_number":
        opt = draw(st.sampled_from(sorted(FLOAT_OPTIONS) + sorted(INT_OPTIONS)))
        text = draw(st.sampled_from(["abc", "", "1,5", "0x", "one", "1.5.2", "--"]))
        if opt in INT_OPTIONS:
            text = draw(st.sampled_from([text, "1.5", "1e3"]))
        return opt, [f"{opt}={text}"]
    if kind == "nan":
        opt = draw(st.sampled_from(sorted(FLOAT_OPTIONS)))
        return opt, [f"{opt}={draw(st.sampled_from(['nan', '-nan', 'inf', '-inf', 'NaN']))}"]
    if kind == "choice":
        opt = draw(st.sampled_from(sorted(CHOICES)))
        bad = draw(st.text(st.characters(min_codepoint=33, max_codepoint=126), min_size=1, max_size=12))
        if bad in CHOICES[opt] or bad == "cercignani_lampis":
            bad += "_x"
        return opt, [f"{opt}={bad}"]
    if kind == "unknown":
        name = "--zz" + draw(st.text(st.sampled_from("abcdefgh-"), min_size=1, max_size=8))
        return name, [name, "1"]
    opt = draw(st.sampled_from(sorted(FLOAT_OPTIONS)))
    return opt, [opt]  # value missing (placed last)


@st.composite
def bad_command(draw):
    opts = draw(
        st.lists(st.sampled_from(sorted(set(FLOAT_OPTIONS) | set(INT_OPTIONS) | set(CHOICES))), unique=True, max_size=5)
    )
    bad = draw(st.lists(invalid_pair(), min_size=1, max_size=2))
    bad_names = {name for name, _ in bad}
    pairs = [draw(valid_pair(o)) for o in opts if o not in bad_names and o != "--delta"]
    argv = []
    for o, v in pairs:
        argv += [o, v] if draw(st.booleans()) else [f"{o}={v}"]
    tail = []
    for _name, words in bad:
        (tail if len(words) == 1 and not words[0].count("=") else argv).extend(words)
    if "--delta" not in bad_names:
        argv += ["--delta", "1.0"]
    return ["solve", *argv, *tail], bad_names


def test_fuzz_solve_command(counts, capsys, monkeypatch):
    import knudsweep.point_job as pj

    def reached(*a, **k):
        raise AssertionError("an invalid command line reached the solver")

    monkeypatch.setattr(pj, "solve_values", reached)
    monkeypatch.setattr(pj, "solve_point", reached)
    monkeypatch.setattr(pj, "configure_numba", lambda *a, **k: None)
    tally = {"tried": 0, "rejected cleanly (exit 2, one line naming the option)": 0}

    @FUZZ
    @given(bad_command())
    def check(case):
        argv, bad_names = case
        capsys.readouterr()
        with pytest.raises(SystemExit) as info:
            cli.main(argv)
        err = capsys.readouterr().err
        tally["tried"] += 1
        assert info.value.code == 2, (argv, err)
        assert err.startswith("knudsweep: error: ") and err.count("\n") == 1, (argv, err)
        assert "Traceback" not in err
        assert any(name in err for name in bad_names), (argv, err)
        tally["rejected cleanly (exit 2, one line naming the option)"] += 1

    check()
    counts["solve command lines"] = ", ".join(f"{v} {k}" for k, v in tally.items())
    assert tally["tried"] == tally["rejected cleanly (exit 2, one line naming the option)"]
