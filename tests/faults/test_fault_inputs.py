"""Study files that used to be accepted and then fail late, or be read wrongly (issue: nothing silently wrong).

Each case must end in one line naming the cause, before any job starts.
"""

from __future__ import annotations

import subprocess
import sys

import pytest
from fault_helpers import REPO

from knudsweep.config import StudyConfigError, load_study

TINY = (REPO / "tests" / "workflow" / "data" / "tiny_study.yaml").read_text()


def _message(tmp_path, text: str) -> str:
    path = tmp_path / "study.yaml"
    path.write_text(text)
    with pytest.raises(StudyConfigError) as info:
        load_study(path)
    message = str(info.value)
    assert "\n" not in message
    return message


def test_a_key_given_twice_is_refused_not_silently_overwritten(tmp_path):
    text = TINY.replace("plane_channel:\n", "plane_channel:\n  problems: [thermal_creep]\n", 1)
    assert text != TINY
    message = _message(tmp_path, text)
    assert "key 'problems' appears twice in one mapping" in message


def test_a_key_given_twice_is_refused_by_the_workflow_too(tmp_path):
    path = tmp_path / "study.yaml"
    path.write_text(TINY.replace("plane_channel:\n", "plane_channel:\n  problems: [thermal_creep]\n", 1))
    r = subprocess.run(
        [
            sys.executable,
            "-m",
            "snakemake",
            "--snakefile",
            str(REPO / "Snakefile"),
            "--directory",
            str(tmp_path / "w"),
            "--configfile",
            str(path),
            "-n",
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert r.returncode != 0
    lines = [x for x in r.stderr.splitlines() if x.startswith("knudsweep: invalid study config:")]
    assert len(lines) == 1 and "appears twice" in lines[0], r.stderr[-2000:]
    assert "Traceback" not in r.stderr


def test_an_alias_bomb_is_refused_before_it_is_expanded(tmp_path):
    # 7 levels of 10 aliases each: 10^7 values from a few hundred bytes, under an unknown key
    levels = ["a0: &a0 [x, x, x, x, x, x, x, x, x, x]"]
    for k in range(1, 7):
        levels.append(f"a{k}: &a{k} [" + ", ".join([f"*a{k - 1}"] * 10) + "]")
    text = TINY + "bomb:\n" + "\n".join("  " + line for line in levels) + "\n"
    assert len(text) - len(TINY) < 700
    message = _message(tmp_path, text)
    assert message.startswith("<top level>: the study expands to more than 1,000,000 values")


def test_a_study_name_with_a_trailing_newline_is_refused(tmp_path):
    text = TINY.replace("study: tiny", 'study: "tiny\\n"', 1)
    assert text != TINY
    assert _message(tmp_path, text).startswith("study: 'tiny\\n' does not match")


@pytest.mark.parametrize(
    "old,new,where",
    [
        (
            "n_space: 16",
            "n_space: 16.0",
            "plane_channel.resolution.n_space: got 16.0; expected a whole number (write 16)",
        ),
        ("delta: [0.1, 1.0, 10.0]", "delta: {start: 0.1, stop: 10.0, num: 3.0}", "plane_channel.delta.num: got 3.0"),
    ],
)
def test_integers_written_as_floats_are_refused_with_the_fix(tmp_path, old, new, where):
    assert old in TINY, old
    assert where in _message(tmp_path, TINY.replace(old, new, 1))


KNUDSWEEP = [sys.executable, "-c", "import sys; from knudsweep.cli import main; sys.exit(main())"]


@pytest.mark.parametrize(
    "args,message",
    [
        (["--tol", "1e-300"], "--tol: got 1e-300; allowed range is [1e-14, 0.01]"),
        (["--n-space", "100000"], "--n-space: got 100000; allowed range is [8, 4000]"),
        (["--n-velocity", "10000"], "--n-velocity: got 10000; allowed range is [4, 128]"),
        (["--output", "/proc/no/such/p.nc"], "--output: folder /proc/no/such does not exist"),
    ],
)
def test_solve_options_the_solver_would_refuse_are_refused_first(args, message):
    r = subprocess.run([*KNUDSWEEP, "solve", "--delta", "1", *args], capture_output=True, text=True, timeout=120)
    assert r.returncode == 2 and "Traceback" not in r.stderr
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and message in lines[0], r.stderr


def test_solve_into_a_closed_pipe_ends_quietly():
    proc = subprocess.Popen([*KNUDSWEEP, "solve", "--delta", "1"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # the reader is gone before the first line, as with `| head -0`
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 0 and "Traceback" not in err, err


DUCT = """study: mem
tube_duct:
  geometries: [{shape: duct, aspect_ratio: 50}]
  problems: [poiseuille]
  models: [bgk]
  gases: [N2]
  walls: [{model: maxwell, alpha: 1.0}]
  delta: [1000]
  resolution: {n_space: 400, n_velocity: 128}
"""


def test_a_point_that_cannot_fit_in_memory_is_refused_with_its_estimate(tmp_path):
    # used to die in the job with "Unable to allocate 149 GiB"; the estimate is
    # 20 bytes per unknown of the distribution (knudsweep.solver.duct.DUCT_BYTES_PER_UNKNOWN, measured)
    message = _message(tmp_path, DUCT)
    assert message.startswith("tube_duct.resolution: one point needs about ")
    assert "duct-A=50.0, delta = 1000" in message and "execution.mem_mb_per_point = 1000 MB" in message
    # the same duct on a grid that fits is accepted
    ok = tmp_path / "ok.yaml"
    ok.write_text(DUCT.replace("{n_space: 400, n_velocity: 128}", "{n_space: 25, n_velocity: 12}"))
    load_study(ok)


def test_a_study_too_large_to_plan_is_refused_with_its_point_count(tmp_path):
    import yaml

    study = yaml.safe_load(TINY)
    study["plane_channel"]["delta"] = {"start": 0.001, "stop": 1000.0, "num": 100000}
    study["plane_channel"]["walls"] = [{"model": "maxwell", "alpha": round(1.0 - 0.01 * i, 6)} for i in range(30)]
    message = _message(tmp_path, yaml.safe_dump(study))
    assert message.startswith("<top level>: the study has 3,000,000 points; at most 2,000,000")


@pytest.mark.parametrize(
    "old,new,where",
    [
        (
            "{model: maxwell, alpha: 1.0}",
            "{model: maxwell, alpha: 1.0e-300}",
            "plane_channel.walls[0].alpha: got 1e-300",
        ),
        ("width: 5.0, height: 3.5, dpi: 60", "width: 40.0, height: 40.0, dpi: 1200", "figures."),
    ],
)
def test_values_the_solver_or_the_plot_cannot_take_are_refused_up_front(tmp_path, old, new, where):
    assert old in TINY, old
    assert _message(tmp_path, TINY.replace(old, new, 1)).startswith(where)


@pytest.mark.parametrize("ratios", ["[1.0e+308, 1.0e+308, 1.0e+308]", "[1.0e-9, 1.0, 1.0]", "[1000, 1, 1]"])
def test_axis_temperature_ratios_out_of_range_are_refused(tmp_path, ratios):
    # 1e308 used to overflow the mean (rescaling to mean 1) and fail inside the solver
    text = TINY + (
        "relaxation:\n  gases: [Ar]\n  pressures: [100.0]\n  temperatures: [300.0]\n"
        "  initial_states: [anisotropic]\n  molecular_models: [maxwell]\n  methods: [bgk]\n"
        f"  state_options: {{axis_temperature_ratios: {ratios}}}\n"
    )
    message = _message(tmp_path, text)
    assert "axis_temperature_ratios" in message and ("0.01" in message or "100" in message), message


def test_axis_ratio_check_in_the_solver_names_the_field():
    from knudsweep.solver.relaxation.initial_states import make_initial_state

    with pytest.raises(ValueError, match="axis_temperature_ratios: need three finite numbers > 0 whose largest"):
        make_initial_state("anisotropic", (1e308, 1e308, 1e308), 2.0, 0.5, 6.0)
    with pytest.raises(ValueError, match="axis_temperature_ratios"):
        make_initial_state("anisotropic", (1e5, 1.0, 1.0), 2.0, 0.5, 6.0)


@pytest.mark.parametrize("written,spelling", [("1e-3", "1.0e-3"), ("1.0e308", "1.0e+308"), ("2.5E4", "2.5e+4")])
def test_a_number_yaml_reads_as_text_gets_its_spelling(tmp_path, written, spelling):
    # YAML 1.1 (PyYAML, and so Snakemake) needs a dot and a signed exponent; 1e-3 is the string '1e-3'
    text = TINY.replace("tol: 1.0e-6", f"tol: {written}", 1)
    message = _message(tmp_path, text)
    assert message.endswith(f"(YAML reads {written} as text; write {spelling})"), message
