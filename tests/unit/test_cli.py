"""knudsweep CLI: one-line errors with exit code 2, status listing, bench discovery."""

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest
from precision import SIX_DIGITS

from knudsweep.cli import main

# Free-molecular duct on the CLI's small grid: the ray effect of 6 angles per quadrant (measured 0.35 %).
DUCT_RAY_EFFECT = 5e-3
# The fast spectral solution on a 24^3 grid: its anisotropy time is measured 2e-3 off the exact 2 tau_c.
FAST_SPECTRAL_24_ERROR = 1e-2

REPO = Path(__file__).resolve().parents[2]


def run_cli(capsys, *argv):
    with pytest.raises(SystemExit) as info:
        main(list(argv))
    err = capsys.readouterr().err
    return info.value.code, err


@pytest.mark.parametrize(
    "argv,expected",
    [
        # one message per option, the limits actually applied (issue 12)
        (["--delta", "0"], "--delta: got 0; allowed range is [0.0001, 10000]"),
        (["--delta", "-1"], "--delta: got -1; allowed range is [0.0001, 10000]"),
        (["--geometry", "tube", "--delta", "-1"], "--delta: got -1; allowed range is [0, 1000]"),
        (["--kn", "-2"], "--kn: got -2; allowed range is [8.863e-05, 8862] (delta in [0.0001, 10000])"),
        (["--kn", "1e5"], "--kn: got 100000; allowed range is [8.863e-05, 8862] (delta in [0.0001, 10000])"),
        (["--delta", "1", "--temperature", "-5"], "--temperature: got -5; allowed range is (0, 10000]"),
        (["--delta", "1", "--output", "no-such-folder/p.nc"], "--output: folder no-such-folder does not exist"),
        (["--delta", "1", "--alpha", "1.5"], "--alpha: got 1.5; allowed range is [0.01, 1]"),
        (["--delta", "1", "--alpha", "0"], "--alpha: got 0; allowed range is [0.01, 1]"),
        (["--delta", "1", "--alpha-upper", "2"], "--alpha-upper: got 2; allowed range is [0.01, 1]"),
        (
            ["--delta", "1", "--wall-model", "cercignani_lampis", "--alpha-t", "2"],
            "--alpha-t: got 2; allowed range is [0.01, 2)",
        ),
        (
            ["--delta", "1", "--wall-model", "cercignani_lampis", "--alpha-n", "1.2"],
            "--alpha-n: got 1.2; allowed range is [0.01, 1]",
        ),
        # the study schema's lower bound (0.01, the tested range), not just > 0
        (["--delta", "1", "--alpha", "0.005"], "--alpha: got 0.005; allowed range is [0.01, 1]"),
        (
            ["--geometry", "tube", "--delta", "1", "--wall-model", "cercignani_lampis", "--alpha-n", "0.001"],
            "--alpha-n: got 0.001; allowed range is [0.01, 1]",
        ),
        (["--delta", "1", "--model", "bkg"], "--model: unknown value 'bkg'; allowed values are bgk, s_model, es_bgk"),
        (["--delta", "1", "--problem", "flow"], "--problem: unknown value 'flow'"),
        (
            ["--pressure", "100", "--length", "1e-6", "--gas", "Argon"],
            "--gas: unknown gas 'Argon'; allowed values are He",
        ),
        (["--pressure", "100"], "--length: required with --pressure"),
        (["--delta", "1", "--kn", "1"], "give exactly one of --delta, --kn, --pressure"),
        (["--delta", "1", "--n-space", "2"], "--n-space: got 2; allowed range is [8, 4000]"),
        (["--delta", "1", "--tol", "0"], "--tol: got 0; allowed range is [1e-14, 0.01]"),
        (["--delta", "abc"], "argument --delta: invalid float value: 'abc'"),
        (["--delta", "2e4"], "--delta: got 20000; allowed range is [0.0001, 10000]"),
        (["--geometry", "tube", "--delta", "2000"], "--delta: got 2000; allowed range is [0, 1000]"),
        (
            ["--geometry", "tube", "--delta", "1", "--problem", "couette"],
            "--problem: unknown value 'couette'; allowed values are poiseuille, thermal_creep for --geometry tube",
        ),
        (["--geometry", "tube", "--delta", "1", "--aspect-ratio", "2"], "--aspect-ratio: only for --geometry duct"),
        (["--delta", "1", "--aspect-ratio", "2"], "--aspect-ratio: only for --geometry duct"),
        (
            ["--geometry", "duct", "--delta", "1", "--aspect-ratio", "0.5"],
            "--aspect-ratio: got 0.5; allowed range is [1, 50]",
        ),
        (
            ["--geometry", "duct", "--delta", "1", "--alpha-upper", "0.5"],
            "--alpha-upper: only for --geometry plane_channel (a tube or duct has one wall)",
        ),
        (["--geometry", "tube", "--pressure", "100"], "--length: required with --pressure (tube radius in m"),
        (["--geometry", "sphere", "--delta", "1"], "argument --geometry: invalid choice"),
        (["--delta", "1", "--wall-model", "specular"], "argument --wall-model: invalid choice"),
    ],
)
def test_bad_solve_options_give_one_line_and_exit_2(capsys, argv, expected):
    code, err = run_cli(capsys, "solve", *argv)
    assert code == 2
    assert expected in err
    assert err.count("\n") == 1 and err.startswith("knudsweep: error: ")
    assert "Traceback" not in err


def test_console_script_has_no_traceback():
    # the installed entry point, as a user runs it
    exe = Path(sys.executable).with_name("knudsweep")
    r = subprocess.run([str(exe), "solve", "--delta", "-3"], capture_output=True, text=True)
    assert r.returncode == 2
    assert r.stderr == "knudsweep: error: --delta: got -3; allowed range is [0.0001, 10000]\n"


def test_status_of_a_fresh_study_lists_missing_points(tmp_path, capsys):
    study = tmp_path / "s.yaml"
    study.write_text(
        "study: s\nplane_channel: {problems: [poiseuille], models: [bgk], walls: [{alpha: 1.0}], delta: [0.1, 1.0]}\n"
    )
    (tmp_path / "results").mkdir()
    assert main(["status", str(study), "--directory", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert out.count("missing") >= 2 and "2 points: 0 done, 0 failed, 2 missing, 0 corrupt" in out
    assert main(["status", str(study), "--directory", str(tmp_path), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["state"] for r in rows] == ["missing", "missing"]


def test_status_with_a_bad_study_is_one_line(tmp_path, capsys):
    study = tmp_path / "s.yaml"
    study.write_text(
        "study: s\nplane_channel: {problems: [poiseuille], models: [bgk], walls: [{alpha: 1.0}], delta: [-0.1]}\n"
    )
    code, err = run_cli(capsys, "status", str(study))
    assert code == 2 and err == "knudsweep: error: plane_channel.delta[0]: got -0.1; allowed range is (0, 1e+06]\n"


def test_bench_runs_scripts_it_finds(tmp_path, capsys):
    (tmp_path / "benchmarks").mkdir()
    (tmp_path / "benchmarks" / "bench_hello.py").write_text("print('ratio 1.0')\n")
    assert main(["bench", "--directory", str(tmp_path)]) == 0
    assert "bench_hello.py" in capsys.readouterr().out


def test_solve_one_point_json_and_netcdf(tmp_path):
    exe = Path(sys.executable).with_name("knudsweep")
    out = tmp_path / "p.nc"
    r = subprocess.run(
        [
            str(exe),
            "solve",
            "--problem",
            "poiseuille",
            "--model",
            "bgk",
            "--kn",
            "0.886227",
            "--alpha",
            "0.9",
            "--n-space",
            "16",
            "--n-velocity",
            "8",
            "--tol",
            "1e-6",
            "--output",
            str(out),
            "--json",
        ],
        capture_output=True,
        text=True,
    )
    assert r.returncode == 0, r.stderr
    summary = json.loads(r.stdout)  # exactly one JSON object on stdout
    assert summary["status"] == "converged" and summary["iterations"] > 0
    assert summary["delta"] == pytest.approx(1.0, rel=SIX_DIGITS)  # sqrt(pi)/(2 Kn), Kn typed with 6 digits
    assert summary["wall"] == "maxwell-alpha=0.9"
    from knudsweep.solver.netcdf_io import read_result

    assert read_result(out).coefficient("G_P") == summary["coefficients"]["G_P"]


def test_solve_from_pressure_uses_the_gas(capsys):
    from knudsweep.solver.gas import delta_from_pressure

    code = main(
        [
            "solve",
            "--pressure",
            "2000",
            "--length",
            "2e-6",
            "--temperature",
            "300",
            "--gas",
            "He",
            "--n-space",
            "16",
            "--n-velocity",
            "8",
            "--tol",
            "1e-6",
            "--json",
        ]
    )
    summary = json.loads(capsys.readouterr().out)
    assert code == 0
    assert summary["delta"] == pytest.approx(delta_from_pressure("He", 2000, 300, 2e-6), rel=SIX_DIGITS)


@pytest.mark.parametrize(
    ("geometry", "extra", "alpha", "expected"),
    [
        ("tube", [], 0.8, "tube"),
        ("duct", ["--aspect-ratio", "2"], 1.0, "duct-A=2.0"),
    ],
)
def test_solve_tube_and_duct_points(capsys, tmp_path, geometry, extra, alpha, expected):
    from knudsweep.solver.limits import free_molecular_flow_rate
    from knudsweep.solver.netcdf_io import read_result

    out = tmp_path / "p.nc"
    code = main(
        ["solve", "--geometry", geometry, *extra, "--delta", "0", "--alpha", str(alpha), "--output", str(out), "--json"]
    )
    summary = json.loads(capsys.readouterr().out)
    assert code == 0 and summary["status"] == "converged"
    assert summary["geometry"] == expected and summary["wall"] == f"maxwell-alpha={alpha}"
    if geometry == "tube":
        # Knudsen's free-molecular 8/(3 sqrt(pi)) times (2 - alpha)/alpha, exact
        # for the tube (every specular reflection repeats the chord)
        expect = 8.0 / (3.0 * math.sqrt(math.pi)) * (2.0 - alpha) / alpha
    else:
        # closed-form quadrature
        expect = free_molecular_flow_rate(2.0)
    assert summary["coefficients"]["G_P"] == pytest.approx(expect, rel=DUCT_RAY_EFFECT)
    assert read_result(out).coefficient("G_P") == summary["coefficients"]["G_P"]


@pytest.mark.parametrize(
    "argv,expected",
    [
        (
            ["--method", "lattice"],
            "--method: unknown value 'lattice'; allowed values are dsmc, bgk, s_model, es_bgk, fast_spectral",
        ),
        (["--molecular-model", "lj"], "--molecular-model: unknown value 'lj'"),
        (["--initial-state", "hot"], "--initial-state: unknown value 'hot'"),
        (["--n-particles", "50"], "--n-particles: got 50; allowed range is [100, 1e+08]"),
        (["--n-velocity", "200"], "--n-velocity: got 200; allowed range is [8, 128]"),
        (["--t-end", "0"], "--t-end: got 0; allowed range is (0, 10000]"),
        (["--pressure", "-1"], "--pressure: got -1; allowed range is (0, 1e+09]"),
        (["--initial-state", "two_beams", "--beam-separation", "5"], "--beam-separation: must lie in (0, 3.464)"),
        (["--delta", "1"], "--delta: only for plane channel, tube or duct points, not with --family relaxation"),
        (["--geometry", "tube"], "--geometry: only for plane channel, tube or duct points"),
    ],
)
def test_bad_relaxation_options_give_one_line_and_exit_2(capsys, argv, expected):
    code, err = run_cli(capsys, "solve", "--family", "relaxation", *argv)
    assert code == 2
    assert expected in err
    assert err.count("\n") == 1 and err.startswith("knudsweep: error: ")


def test_relaxation_option_without_the_family_is_refused(capsys):
    code, err = run_cli(capsys, "solve", "--delta", "1", "--method", "dsmc")
    assert code == 2 and err == "knudsweep: error: --method: only with --family relaxation\n"


def test_solve_relaxation_point_fast_spectral_json_and_netcdf(capsys, tmp_path):
    from knudsweep.solver.netcdf_io import read_result

    out = tmp_path / "r.nc"
    code = main(
        [
            "solve",
            "--family",
            "relaxation",
            "--method",
            "fast_spectral",
            "--molecular-model",
            "maxwell",
            "--n-velocity",
            "24",
            "--t-end",
            "4",
            "--n-output",
            "9",
            "--output",
            str(out),
            "--json",
        ]
    )
    summary = json.loads(capsys.readouterr().out)
    assert code == 0 and summary["status"] == "converged"
    assert summary["method"] == "fast_spectral" and summary["molecular_model"] == "maxwell"
    # Maxwell molecules: anisotropy time exactly 2 tau_c (Truesdell & Muncaster 1980);
    assert summary["coefficients"]["anisotropy_relaxation_time"] == pytest.approx(2.0, rel=FAST_SPECTRAL_24_ERROR)
    assert summary["discretization"]["scheme"].startswith("fast spectral")
    res = read_result(out)
    assert res.coefficient("anisotropy_relaxation_time") == summary["coefficients"]["anisotropy_relaxation_time"]


def test_solve_relaxation_point_dsmc_text(capsys):
    code = main(
        [
            "solve",
            "--family",
            "relaxation",
            "--n-particles",
            "1000",
            "--n-replicas",
            "3",
            "--t-end",
            "1",
            "--n-output",
            "3",
            "--h-bins-per-axis",
            "4",
        ]
    )
    out = capsys.readouterr().out
    assert code == 0 and out.startswith("status: converged")
    assert "mean_collision_time_s = " in out


def test_status_without_results_says_so(tmp_path, capsys):
    study = tmp_path / "s.yaml"
    study.write_text(
        "study: s\nplane_channel: {problems: [poiseuille], models: [bgk], walls: [{alpha: 1.0}], delta: [0.1, 1.0]}\n"
    )
    assert main(["status", str(study), "--directory", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert out.count("\n") == 1 and "2 points, none computed: there is no" in out and "missing" not in out


def test_bare_command_lists_commands_and_version(capsys):
    from knudsweep.solver import __version__

    assert main([]) == 0
    out = capsys.readouterr().out
    assert all(cmd in out for cmd in ("solve", "run", "status", "bench"))
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0 and capsys.readouterr().out.strip() == f"knudsweep {__version__}"


def test_solve_help_shows_defaults_and_the_one_of_rule(capsys):
    with pytest.raises(SystemExit):
        main(["solve", "--help"])
    out = " ".join(capsys.readouterr().out.split())
    assert "exactly one of --delta, --kn or --pressure" in out
    assert "(default: 300.0)" in out and "(default: 1e-08)" in out and "(default: plane_channel)" in out
    assert "(default: None)" not in out


def test_failed_solve_prints_status_and_reason_only(capsys, tmp_path):
    out = tmp_path / "p.nc"
    code = main(["solve", "--delta", "10", "--no-accelerate", "--max-iter", "3", "--output", str(out)])
    text = capsys.readouterr().out
    assert code == 1 and text.startswith("status: failed\nreason: ") and "G_P" not in text
    assert out.exists()  # the file records the failure
    code = main(["solve", "--delta", "10", "--no-accelerate", "--max-iter", "3", "--json"])
    summary = json.loads(capsys.readouterr().out)
    assert code == 1 and summary["status"] == "failed" and summary["coefficients"] == {} and summary["reason"]


def test_numba_cache_is_one_place_whatever_the_folder(tmp_path, monkeypatch):
    from knudsweep.cli import numba_cache_dir

    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    monkeypatch.chdir(tmp_path)
    assert numba_cache_dir() == REPO / ".numba_cache"  # a source checkout: the repository's
    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "mine"))
    assert numba_cache_dir() == tmp_path / "mine"


@pytest.mark.parametrize(
    ("argv", "section"),
    [
        (
            [
                "--geometry",
                "duct",
                "--aspect-ratio",
                "2",
                "--problem",
                "thermal_creep",
                "--delta",
                "1",
                "--alpha",
                "0.9",
                "--n-velocity",
                "8",
                "--tol",
                "1e-7",
            ],
            {
                "tube_duct": {
                    "geometries": [{"shape": "duct", "aspect_ratio": 2.0}],
                    "problems": ["thermal_creep"],
                    "models": ["bgk"],
                    "walls": [{"alpha": 0.9}],
                    "delta": [1.0],
                    "resolution": {"n_velocity": 8, "tol": 1e-7},
                }
            },
        ),
        (
            ["--model", "s_model", "--delta", "0.5", "--alpha", "0.8", "--alpha-upper", "0.6", "--n-space", "20"],
            {
                "plane_channel": {
                    "problems": ["poiseuille"],
                    "models": ["s_model"],
                    "delta": [0.5],
                    "walls": [{"alpha": 0.8, "upper": {"alpha": 0.6}}],
                    "resolution": {"n_space": 20},
                }
            },
        ),
    ],
)
def test_solve_builds_the_point_a_study_would(argv, section):
    # the CLI builds a point's values through the family's grid code: the same values as a study's point
    from knudsweep.cli import _solve_values, build_parser
    from knudsweep.config import validate_study
    from knudsweep.families import get_family

    family, values = _solve_values(build_parser().parse_args(["solve", *argv]))
    study = validate_study({"study": "x", **section})
    (point,) = get_family(family).points(study[family])
    assert values == point.values
