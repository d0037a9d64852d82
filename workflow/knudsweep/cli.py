"""``knudsweep`` command line: run a sweep, solve one point, list a study's status, run benchmarks.

    knudsweep run --cores 2 [--configfile my-study.yaml] [any snakemake option or target]
    knudsweep solve --problem poiseuille --model bgk --delta 1.0 --alpha 0.9 --json
    knudsweep solve --geometry duct --aspect-ratio 4 --problem thermal_creep --delta 10
    knudsweep solve --family relaxation --method fast_spectral --molecular-model hard_sphere --json
    knudsweep status config/config.yaml [--requeue-failed] [--requeue-outdated]
    knudsweep bench

``status`` also removes abandoned writer temporaries; ``--requeue-*`` delete the
chosen point files and the study's sweep, tables and figures, so that the next
``snakemake`` run recomputes exactly those points and rebuilds the products.

Bad values give one line ``knudsweep: error: --<option>: ...; allowed ...`` on
stderr and exit code 2, never a traceback.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
from pathlib import Path

EXIT_USAGE = 2
# The command line keeps no ranges of its own: option limits are the study schema's
# (knudsweep.config.schema_node) or the solvers' (delta ranges, aspect ratio), and a point's
# values are built by its family's grid code, so `knudsweep solve` solves the point a study would.


class CliError(ValueError):
    """A bad command-line value; the message names the option."""


class _DefaultsFormatter(argparse.HelpFormatter):
    """Help lines end with the default where the option has one and the text does not state it."""

    def _get_help_string(self, action):
        text = action.help or ""
        if action.default not in (None, False, argparse.SUPPRESS) and "default" not in text and action.option_strings:
            text += " (default: %(default)s)"
        return text


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, no usage block
        sys.stderr.write(f"knudsweep: error: {message}\n")
        raise SystemExit(EXIT_USAGE)


def _fail(message: str) -> None:
    sys.stderr.write(f"knudsweep: error: {message}\n")
    raise SystemExit(EXIT_USAGE)


def _positive(option: str, value):
    if value is None:
        return None
    if not (math.isfinite(value) and value > 0):
        raise CliError(f"{option}: got {value:g}; allowed range is (0, inf)")
    return value


def _solve_values(args) -> tuple[str, dict]:
    """(family, point values as that family builds them) from the options."""
    from knudsweep.families.tube_duct import BOLTZMANN_SHAPES

    if args.geometry == "plane_channel":
        from knudsweep.families.plane_channel import MODELS, PROBLEMS
    elif args.geometry in BOLTZMANN_SHAPES:
        from knudsweep.families.tube_duct import MODELS, PROBLEMS
    else:  # the duct: model equations only
        from knudsweep.families.tube_duct import MODEL_EQUATIONS as MODELS
        from knudsweep.families.tube_duct import PROBLEMS
    from knudsweep.solver import gas as gasmod

    if args.problem not in PROBLEMS:
        raise CliError(
            f"--problem: unknown value {args.problem!r}; allowed values are {', '.join(PROBLEMS)}"
            + ("" if args.geometry == "plane_channel" else f" for --geometry {args.geometry}")
        )
    if args.model not in MODELS:
        raise CliError(
            f"--model: unknown value {args.model!r}; allowed values are {', '.join(MODELS)}"
            + ("" if args.geometry == "plane_channel" else f" for --geometry {args.geometry}")
        )
    if args.geometry == "plane_channel":
        from knudsweep.families.plane_channel import BOLTZMANN_MODELS, BOLTZMANN_PROBLEMS

        if args.model in BOLTZMANN_MODELS and args.problem not in BOLTZMANN_PROBLEMS:
            raise CliError(
                f"--problem: model {args.model} solves {', '.join(BOLTZMANN_PROBLEMS)} only, got {args.problem!r}"
            )
        if args.model in BOLTZMANN_MODELS and args.wall_model != "maxwell":
            raise CliError(f"--wall-model: model {args.model} takes maxwell only, got {args.wall_model!r}")
    else:
        from knudsweep.families.tube_duct import BOLTZMANN_MODELS

        if args.model in BOLTZMANN_MODELS and args.wall_model != "maxwell":
            raise CliError(f"--wall-model: model {args.model} takes maxwell only, got {args.wall_model!r}")
    if args.gas not in gasmod.known_gases():
        raise CliError(f"--gas: unknown gas {args.gas!r}; allowed values are {', '.join(gasmod.known_gases())}")
    if args.geometry == "plane_channel":
        return "plane_channel", _plane_channel_values(args)
    return "tube_duct", _tube_duct_values(args)


def _kn_limits(delta_min: float, delta_max: float) -> tuple[float, float]:
    """Knudsen numbers whose delta = sqrt(pi)/(2 Kn) lies in [delta_min, delta_max], rounded inwards
    to 4 significant digits so that every value the message allows is accepted."""
    low = math.sqrt(math.pi) / (2.0 * delta_max)
    high = math.sqrt(math.pi) / (2.0 * delta_min) if delta_min > 0 else math.inf
    scale = 10.0 ** (math.floor(math.log10(low)) - 3)
    low = math.ceil(low / scale) * scale
    if math.isfinite(high):
        scale = 10.0 ** (math.floor(math.log10(high)) - 3)
        high = math.floor(high / scale) * scale
    return float(f"{low:.4g}"), float(f"{high:.4g}") if math.isfinite(high) else high


def _delta(args, length_name: str, delta_min: float, delta_max: float) -> float:
    """delta from exactly one of --delta, --kn, --pressure (+ --length, --temperature, --gas).

    The solver accepts delta in [delta_min, delta_max] (delta_min = 0: free-molecular allowed).
    """
    from knudsweep.config import schema_node
    from knudsweep.solver import gas as gasmod

    span = f"[{delta_min:g}, {delta_max:g}]"
    # Every value given is checked, used or not, against the limits applied (one message per option).
    if args.delta is not None:
        if not (math.isfinite(args.delta) and delta_min <= args.delta <= delta_max):
            raise CliError(f"--delta: got {args.delta:g}; allowed range is {span}")
    if args.kn is not None:
        kn_low, kn_high = _kn_limits(delta_min, delta_max)
        if not (math.isfinite(args.kn) and kn_low <= args.kn <= kn_high):
            raise CliError(
                f"--kn: got {args.kn:g}; allowed range is [{kn_low:g}, {kn_high:g}"
                f"{']' if math.isfinite(kn_high) else ')'} (delta in {span})"
            )
    _positive("--pressure", args.pressure)
    _positive("--length", args.length)
    _schema_number("--temperature", args.temperature, schema_node("plane_channel", "conditions", "temperature"))
    given = [name for name in ("delta", "kn", "pressure") if getattr(args, name) is not None]
    if len(given) != 1:
        raise CliError("--delta: give exactly one of --delta, --kn, --pressure")
    if given[0] == "delta":
        return float(args.delta)
    if given[0] == "kn":
        delta = gasmod.delta_from_kn(args.kn)
        what = "--kn"
    else:
        if args.length is None:
            raise CliError(f"--length: required with --pressure ({length_name} in m, allowed range (0, inf))")
        delta = gasmod.delta_from_pressure(args.gas, args.pressure, args.temperature, args.length)
        what = "--pressure"
    if not delta_min <= delta <= delta_max:
        raise CliError(f"{what}: gives delta = {delta:g}; allowed range of delta is {span}")
    return delta


def _resolution_limits(geometry: str) -> dict[str, tuple]:
    """(low, high) of --n-space, --n-velocity and --tol: the study schema's, which match the solvers'."""
    from knudsweep.config import schema_node

    section = "plane_channel" if geometry == "plane_channel" else "tube_duct"
    out = {}
    for key in ("n_space", "n_velocity", "tol"):
        spec = schema_node(section, "resolution", key)
        out[key] = (spec["minimum"], spec["maximum"])
    return out


def _check_sizes(args) -> None:
    limits = _resolution_limits(args.geometry)
    for opt, val, low, high in (
        ("--n-space", args.n_space, *limits["n_space"]),
        ("--n-velocity", args.n_velocity, *limits["n_velocity"]),
        ("--max-iter", args.max_iter, 1, 100000000),
        ("--threads", args.threads, 1, 256),
    ):
        if val is not None and val < low:
            raise CliError(f"{opt}: got {val}; allowed range is [{low}, {high}]")
        if val is not None and val > high:
            raise CliError(f"{opt}: got {val}; allowed range is [{low}, {high}]")
    low, high = limits["tol"]
    if not (math.isfinite(args.tol) and low <= args.tol <= high):
        raise CliError(f"--tol: got {args.tol:g}; allowed range is [{low:g}, {high:g}]")


def _wall_limits() -> dict[str, tuple[float, float, bool]]:
    """(low, high, high_open) of alpha, alpha_t, alpha_n: the study schema's (low is inclusive)."""
    from knudsweep.config import schema_node

    out = {}
    for key in ("alpha", "alpha_t", "alpha_n"):
        spec = schema_node("tube_duct", "walls", "items", key)
        high_open = "exclusiveMaximum" in spec
        out[key] = (spec["minimum"], spec["exclusiveMaximum"] if high_open else spec["maximum"], high_open)
    return out


def _accommodation(option: str, value: float, limits: tuple[float, float, bool]) -> float:
    low, high, high_open = limits
    ok = math.isfinite(value) and low <= value and (value < high if high_open else value <= high)
    if not ok:
        raise CliError(f"{option}: got {value:g}; allowed range is [{low:g}, {high:g}{')' if high_open else ']'}")
    return value


def _wall_values(args, alpha, alpha_t, alpha_n, suffix) -> dict:
    from knudsweep.identity import canonical

    limits = _wall_limits()
    if args.wall_model == "maxwell":
        if alpha_t is not None or alpha_n is not None:
            raise CliError(f"--alpha-t{suffix}: only for --wall-model cercignani_lampis")
        return {
            "model": "maxwell",
            "alpha": canonical(_accommodation(f"--alpha{suffix}", 1.0 if alpha is None else alpha, limits["alpha"])),
        }
    if alpha is not None:
        raise CliError(f"--alpha{suffix}: only for --wall-model maxwell; use --alpha-t/--alpha-n")
    return {
        "model": "cercignani_lampis",
        "alpha_t": canonical(
            _accommodation(f"--alpha-t{suffix}", 1.0 if alpha_t is None else alpha_t, limits["alpha_t"])
        ),
        "alpha_n": canonical(
            _accommodation(f"--alpha-n{suffix}", 1.0 if alpha_n is None else alpha_n, limits["alpha_n"])
        ),
    }


def _tube_duct_values(args) -> dict:
    """Values of one tube or duct point, built by the family's grid (knudsweep.families.tube_duct.grid)."""
    from knudsweep.config import schema_node
    from knudsweep.families.tube_duct import grid
    from knudsweep.solver.duct import MAX_DELTA

    length_name = "tube radius" if args.geometry == "tube" else "duct height (the smaller side)"
    delta = _delta(args, length_name, 0.0, MAX_DELTA)
    for opt in ("alpha_upper", "alpha_t_upper", "alpha_n_upper"):
        if getattr(args, opt) is not None:
            raise CliError(
                f"--{opt.replace('_', '-')}: only for --geometry plane_channel (a tube or duct has one wall)"
            )
    if args.geometry == "tube":
        if args.aspect_ratio is not None:
            raise CliError("--aspect-ratio: only for --geometry duct")
        aspect = 1.0
    else:
        aspect = 1.0 if args.aspect_ratio is None else args.aspect_ratio
        _schema_number("--aspect-ratio", aspect, schema_node("tube_duct", "geometries", "items", "aspect_ratio"))
    _check_sizes(args)
    if args.model in grid.BOLTZMANN_MODELS:
        from knudsweep.solver.tube.boltzmann_driver import SPACE_RANGE, SPEED_RANGE

        for opt, value, (low, high), what in (
            ("--n-velocity", args.n_velocity, SPEED_RANGE, "speed nodes"),
            ("--n-space", args.n_space, SPACE_RANGE, "radial nodes"),
        ):
            if value is not None and not low <= value <= high:
                raise CliError(
                    f"{opt}: got {value}; with --model {args.model} it counts {what}, allowed range is [{low}, {high}]"
                )
    wall = _wall_values(args, args.alpha, args.alpha_t, args.alpha_n, "")
    resolution = {"n_space": args.n_space, "n_velocity": args.n_velocity, "tol": args.tol, "accuracy": None}
    geometry = grid.geometry_of(args.geometry, aspect)
    return grid.point_values(geometry, args.problem, args.model, delta, wall, resolution, args.gas)


def _plane_channel_values(args) -> dict:
    """Values of one plane-channel point, built by the family's grid (knudsweep.families.plane_channel.grid)."""
    from knudsweep.families.plane_channel import grid

    if args.aspect_ratio is not None:
        raise CliError("--aspect-ratio: only for --geometry duct")
    from knudsweep.solver.plane_channel.driver import DELTA_RANGE

    if args.model in grid.BOLTZMANN_MODELS:
        from knudsweep.solver.plane_channel.boltzmann_driver import DELTA_RANGE
    delta = _delta(args, "plate gap", *DELTA_RANGE)

    lower = _wall_values(args, args.alpha, args.alpha_t, args.alpha_n, "")
    has_upper = any(v is not None for v in (args.alpha_upper, args.alpha_t_upper, args.alpha_n_upper))
    upper = (
        _wall_values(args, args.alpha_upper, args.alpha_t_upper, args.alpha_n_upper, "-upper") if has_upper else None
    )
    _check_sizes(args)
    if args.model in grid.BOLTZMANN_MODELS and args.n_velocity is not None:
        from knudsweep.solver.plane_channel.boltzmann_driver import MAX_SPEED, MIN_SPEED

        if not MIN_SPEED <= args.n_velocity <= MAX_SPEED:
            raise CliError(
                f"--n-velocity: got {args.n_velocity}; with --model {args.model} it counts speed nodes, "
                f"allowed range is [{MIN_SPEED}, {MAX_SPEED}]"
            )
    resolution = {"n_space": args.n_space, "n_velocity": args.n_velocity, "tol": args.tol, "accuracy": None}
    return grid.point_values(args.problem, args.model, delta, lower, upper, resolution, args.gas)


def _check_output(path: Path) -> None:
    """Refuse an --output that cannot be written before anything is solved."""
    path = Path(path)
    if path.is_dir():
        raise CliError(f"--output: {path} is a directory; give a file name such as {path / 'point.nc'}")
    if not path.parent.is_dir():
        raise CliError(
            f"--output: folder {path.parent} does not exist; create it first "
            "(knudsweep does not create folders for --output)"
        )
    if not os.access(path.parent, os.W_OK):
        raise CliError(f"--output: folder {path.parent} is not writable")


# Options of `knudsweep solve` per family: a flow option given with --family relaxation
# (or the other way round) is refused rather than ignored.
_FLOW_ONLY = (
    "aspect_ratio",
    "delta",
    "kn",
    "length",
    "alpha",
    "alpha_upper",
    "alpha_t",
    "alpha_n",
    "alpha_t_upper",
    "alpha_n_upper",
    "n_space",
    "max_iter",
)
_RELAXATION_ONLY = (
    "method",
    "initial_state",
    "molecular_model",
    "n_particles",
    "n_replicas",
    "t_end",
    "n_output",
    "seed",
    "h_bins_per_axis",
    "axis_temperature_ratios",
    "beam_separation",
    "beam_fraction",
    "bkw_start_time",
)


def _schema_number(option: str, value, spec: dict):
    """Check ``value`` against a schema entry (minimum / exclusiveMinimum / maximum / exclusiveMaximum)."""
    lo_open = "exclusiveMinimum" in spec
    hi_open = "exclusiveMaximum" in spec
    lo = spec.get("exclusiveMinimum", spec.get("minimum", -math.inf))
    hi = spec.get("exclusiveMaximum", spec.get("maximum", math.inf))
    ok = math.isfinite(value) and (lo < value if lo_open else lo <= value) and (value < hi if hi_open else value <= hi)
    if not ok:
        raise CliError(
            f"{option}: got {value:g}; allowed range is {'(' if lo_open else '['}{lo:g}, {hi:g}"
            f"{')' if hi_open else ']'}"
        )
    return value


def _relaxation_values(args) -> dict:
    """Point values of one relaxation point, built by the family from a one-point section
    (so the point is the one a study with these settings would solve), checked against the schema."""
    from knudsweep.config import load_schema
    from knudsweep.families.relaxation import FAMILY, METHODS, MODELS, STATE_DEFAULTS, STATES
    from knudsweep.solver import gas as gasmod

    for name in _FLOW_ONLY:
        if getattr(args, name) not in (None, False):
            raise CliError(
                f"--{name.replace('_', '-')}: only for plane channel, tube or duct points, not with --family relaxation"
            )
    if args.geometry != "plane_channel":
        raise CliError("--geometry: only for plane channel, tube or duct points, not with --family relaxation")
    args.method = args.method or "dsmc"
    args.initial_state = args.initial_state or "anisotropic"
    args.molecular_model = args.molecular_model or "vhs"
    for option, value, allowed in (
        ("--method", args.method, METHODS),
        ("--initial-state", args.initial_state, STATES),
        ("--molecular-model", args.molecular_model, MODELS),
    ):
        if value not in allowed:
            raise CliError(f"{option}: unknown value {value!r}; allowed values are {', '.join(allowed)}")
    if args.gas not in gasmod.known_gases():
        raise CliError(f"--gas: unknown gas {args.gas!r}; allowed values are {', '.join(gasmod.known_gases())}")
    props = load_schema()["properties"]["relaxation"]["properties"]
    run_spec = props["run"]["properties"]
    state_spec = props["state_options"]["properties"]
    pressure = _schema_number(
        "--pressure", 100.0 if args.pressure is None else args.pressure, props["pressures"]["items"]
    )
    temperature = _schema_number("--temperature", args.temperature, props["temperatures"]["items"])
    run = {}
    for key, value in (
        ("n_replicas", args.n_replicas),
        ("t_end", args.t_end),
        ("n_output", args.n_output),
        ("seed", args.seed),
        ("h_bins_per_axis", args.h_bins_per_axis),
        ("n_velocity", args.n_velocity),
    ):
        if value is not None:
            run[key] = _schema_number(f"--{key.replace('_', '-')}", value, run_spec[key])
    state = {}
    if args.axis_temperature_ratios is not None:
        for x in args.axis_temperature_ratios:
            _schema_number("--axis-temperature-ratios", x, state_spec["axis_temperature_ratios"]["items"])
        state["axis_temperature_ratios"] = list(args.axis_temperature_ratios)
    for key in ("beam_separation", "beam_fraction", "bkw_start_time"):
        value = getattr(args, key)
        if value is not None:
            state[key] = _schema_number(f"--{key.replace('_', '-')}", value, state_spec[key])
    n_particles = 20000 if args.n_particles is None else args.n_particles
    _schema_number("--n-particles", n_particles, props["n_particles"]["items"])
    section = {
        "gases": [args.gas],
        "pressures": [pressure],
        "temperatures": [temperature],
        "initial_states": [args.initial_state],
        "molecular_models": [args.molecular_model],
        "methods": [args.method],
        "n_particles": [n_particles],
        "state_options": {**STATE_DEFAULTS, **state},
        "run": run,
    }
    try:
        FAMILY.check_section(section)
    except ValueError as exc:  # "<field>: ..." -> "--<field>: ..."
        field, _, rest = str(exc).partition(":")
        raise CliError(f"--{field.strip().replace('_', '-')}:{rest}") from None
    return FAMILY.points(section)[0].values


def _cmd_solve_relaxation(args) -> int:
    from knudsweep.point_job import configure_numba

    values = _relaxation_values(args)
    if args.output:
        _check_output(args.output)
    configure_numba(args.threads)
    from knudsweep.point_job import solve_point, solve_values

    if args.output:
        result = solve_point("relaxation", values, args.output, section={}, pid="cli")
    else:
        result, _, _ = solve_values("relaxation", values, {})
    summary = result.summary()
    for key in ("method", "gas", "initial_state", "molecular_model", "pressure", "temperature"):
        summary[key] = values[key]
    if args.output:
        summary["output"] = str(args.output)
    return _print_summary(args, summary, result)


def _print_summary(args, summary: dict, result, iterations: bool = False) -> int:
    """Print the point's summary; a failed point prints its status and reason only, and gives 1.

    The numbers of a failed point are not results: JSON carries ``"coefficients": {}``.
    """
    converged = result.status == "converged"
    if not converged:
        summary["coefficients"] = {}
    if args.json:
        print(json.dumps(summary, sort_keys=True, default=str))
    elif not converged:
        print(f"status: {summary['status']}")
        print(f"reason: {summary['reason'] or 'not given'}")
        if args.output:
            print(f"the point file {args.output} records the failure")
    else:
        print(f"status: {summary['status']}")
        line = f"wall time: {summary['wall_time_s']:.3g} s"
        print(f"iterations: {summary['iterations']}  {line}" if iterations else line)
        for name, value in summary["coefficients"].items():
            print(f"{name} = {value:.6g}")
    return 0 if converged else 1


def cmd_solve(args) -> int:
    from knudsweep.point_job import configure_numba

    if args.family == "relaxation":
        return _cmd_solve_relaxation(args)
    for name in _RELAXATION_ONLY:
        if getattr(args, name) is not None:
            raise CliError(f"--{name.replace('_', '-')}: only with --family relaxation")
    family, values = _solve_values(args)
    if args.output:
        _check_output(args.output)
    configure_numba(args.threads)
    from knudsweep.point_job import solve_point, solve_values

    section = {
        "iteration": {"max_iter": args.max_iter, "accelerate": not args.no_accelerate, "retry_max_iter_factor": 1}
    }
    if args.output:
        result = solve_point(family, values, args.output, section=section, pid="cli")
    else:
        result, _, _ = solve_values(family, values, section)
    summary = result.summary()
    summary["delta"] = values["delta"]
    summary["wall"] = values["wall"]
    summary["geometry"] = values.get("geometry", "plane_channel")
    for key in ("gas", "omega"):  # a gas-dependent collision operator (boltzmann_vhs)
        if key in values:
            summary[key] = values[key]
    if args.output:
        summary["output"] = str(args.output)
    return _print_summary(args, summary, result, iterations=True)


def cmd_status(args) -> int:
    from knudsweep.config import load_study
    from knudsweep.plan import StudyPlan
    from knudsweep.solver import __version__
    from knudsweep.status import clean_stray_temporaries, invalidate_products, requeue, study_status

    plan = StudyPlan(load_study(args.study))
    results = Path(args.directory) / "results"
    if not results.is_dir() and not args.json:
        print(
            f"study {plan.name}: {len(plan.points)} points, none computed: there is no {results} "
            f"(run the study first, e.g. `knudsweep run --configfile {args.study}` in the folder that "
            "holds results/, or pass --directory)"
        )
        return 0
    for path in clean_stray_temporaries(plan, args.directory):
        print(f"removed stray temporary {path} (left by a killed writer)")
    rows = study_status(plan, args.directory)
    if args.requeue_failed:
        for path in requeue(rows):
            print(f"removed {path} (will be recomputed on the next run)")
    if args.requeue_outdated:
        for path in requeue(rows, outdated=True):
            print(f"removed {path} (older solver version; will be recomputed on the next run)")
    if args.requeue_failed or args.requeue_outdated:
        rows = study_status(plan, args.directory)
        missing = [r.pid for r in rows if r.state == "missing"]
        if missing:
            products = invalidate_products(plan, args.directory, pids=missing)
            if products:
                print(
                    f"removed the batch files of the missing points and the study's sweep, tables and "
                    f"figures ({len(products)} files); the next run recomputes the missing points and "
                    "rebuilds them"
                )
    if args.json:
        print(json.dumps([r.__dict__ for r in rows], sort_keys=True))
        return 0
    counts: dict[str, int] = {}
    for r in rows:
        counts[r.state] = counts.get(r.state, 0) + 1
        if r.state != "converged" or r.outdated or args.all:
            reason = f"  ({r.reason})" if r.reason else ""
            old = f"  [computed by solver {r.code_version or 'unknown'}, now {__version__}]" if r.outdated else ""
            print(f"{r.state:9s} {r.pid}{reason}{old}")
    summary = ", ".join(
        f"{counts.get(s, 0)} {label}"
        for s, label in (("converged", "done"), ("failed", "failed"), ("missing", "missing"), ("corrupt", "corrupt"))
    )
    outdated = sum(r.outdated for r in rows)
    print(
        f"study {plan.name}: {len(rows)} points: {summary}; {outdated} outdated "
        f"(older solver version{', remove with --requeue-outdated' if outdated else ''})"
    )
    return 0


# Options after which `knudsweep run` leaves the core count to the user or the profile.
_CORE_OPTIONS = ("--cores", "-c", "--jobs", "-j", "--profile", "--executor", "-e")


def cmd_run(argv: list[str]) -> int:
    """``snakemake`` with the repository's workflow profile (keep-going, rerun-incomplete) and quiet rules.

    Runs in the current folder, which must hold the Snakefile (or pass
    ``--snakefile``).  Without a core count it uses every core this process
    may run on.  Snakemake's exit code is returned.
    """
    import os

    argv = list(argv)
    given = {a.split("=", 1)[0] for a in argv}
    cmd = [sys.executable, "-m", "snakemake"]
    if "--snakefile" not in given and "-s" not in given:
        snakefile = Path.cwd() / "Snakefile"
        if not snakefile.is_file():
            raise CliError(
                f"run: no Snakefile in {Path.cwd()}; run it from the knudsweep repository root or pass --snakefile"
            )
        cmd += ["--snakefile", str(snakefile)]
        root = snakefile.parent
    else:
        flag = "--snakefile" if "--snakefile" in given else "-s"
        root = Path(argv[argv.index(flag) + 1]).resolve().parent
    if "--workflow-profile" not in given:
        cmd += ["--workflow-profile", str(root / "config" / "profiles" / "default")]
    if not given & set(_CORE_OPTIONS):
        cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
        cmd += ["--cores", str(cores or 1)]
    if not given & {"--quiet", "-q", "--verbose", "--dry-run", "-n"}:
        cmd += ["--quiet", "rules"]  # per-job blocks off: progress and one line per batch remain
    try:
        return subprocess.run(cmd + argv).returncode
    except KeyboardInterrupt:
        return 130


def cmd_bench(args) -> int:
    root = Path(args.directory)
    scripts = sorted((root / "benchmarks").glob("bench_*.py"))
    if not scripts:
        print(f"no benchmark scripts in {root / 'benchmarks'}")
        return 0
    status = 0
    for script in scripts:
        print(f"== {script.relative_to(root)}", flush=True)
        status |= subprocess.run([sys.executable, str(script)], cwd=root).returncode
    return status


def build_parser() -> argparse.ArgumentParser:
    from knudsweep.config import schema_node
    from knudsweep.solver import __version__
    from knudsweep.solver import kinetic_models as km
    from knudsweep.solver.duct import MAX_DELTA as duct_max
    from knudsweep.solver.plane_channel.driver import DELTA_RANGE as plane_delta
    from knudsweep.solver.walls import WALL_LAWS

    parser = _Parser(
        prog="knudsweep",
        description="Parametric sweeps of rarefied-gas transport.",
        epilog="`knudsweep <command> --help` describes a command.",
    )
    parser.add_argument("--version", action="version", version=f"knudsweep {__version__}")
    sub = parser.add_subparsers(
        dest="command", required=True, parser_class=_Parser, title="commands", metavar="{solve,run,status,bench}"
    )

    s = sub.add_parser(
        "solve",
        help="solve one point: plane channel, tube, duct or homogeneous relaxation",
        formatter_class=_DefaultsFormatter,
        description="Solve one point and print its coefficients (or write it with --output). "
        "A flow point needs exactly one of --delta, --kn or --pressure (with "
        "--length; --temperature and --gas apply). A failed point prints its "
        "status and reason and exits with 1.",
    )
    s.add_argument(
        "--family",
        default="flow",
        choices=["flow", "relaxation"],
        help="flow (plane channel, tube or duct; default) or relaxation (space-homogeneous gas)",
    )
    s.add_argument(
        "--geometry",
        default="plane_channel",
        choices=["plane_channel", "tube", "duct"],
        help="plane_channel, tube or duct",
    )
    aspect = schema_node("tube_duct", "geometries", "items", "aspect_ratio")
    s.add_argument(
        "--aspect-ratio",
        type=float,
        help=f"duct width / height, [{aspect['minimum']:g}, {aspect['maximum']:g}] (default 1)",
    )
    s.add_argument(
        "--problem", default="poiseuille", help="poiseuille, thermal_creep; plane channel also couette, heat_transfer"
    )
    s.add_argument(
        "--model",
        default="bgk",
        help=f"{', '.join(km.MODEL_NAMES)}; plane channel and tube also "
        f"{', '.join(km.BOLTZMANN_MODELS)} (linearized Boltzmann, poiseuille and thermal_creep, Maxwell walls)",
    )
    s.add_argument(
        "--gas",
        default="Ar",
        help="gas name from config/gases.yaml (used with --pressure, and by boltzmann_vhs for its viscosity index)",
    )
    s.add_argument(
        "--delta",
        type=float,
        help=f"rarefaction parameter: plane channel [{plane_delta[0]:g}, "
        f"{plane_delta[1]:g}]; tube, duct [0, {duct_max:g}], 0 = free-molecular limit (a study's "
        "log-spaced axis needs delta > 0)",
    )
    s.add_argument("--kn", type=float, help="Knudsen number, delta = sqrt(pi)/(2 Kn), within the delta range")
    s.add_argument("--pressure", type=float, help="pressure in Pa (needs --length, --temperature, --gas)")
    s.add_argument("--length", type=float, help="plate gap, tube radius or duct height in m (with --pressure)")
    temp = schema_node("plane_channel", "conditions", "temperature")
    s.add_argument(
        "--temperature", type=float, default=300.0, help=f"temperature in K (with --pressure), (0, {temp['maximum']:g}]"
    )
    s.add_argument("--wall-model", default="maxwell", choices=list(WALL_LAWS), help="gas-surface interaction law")
    span = {k: f"[{lo:g}, {hi:g}{')' if hi_open else ']'}" for k, (lo, hi, hi_open) in _wall_limits().items()}
    s.add_argument("--alpha", type=float, help=f"Maxwell accommodation in {span['alpha']}, default 1")
    s.add_argument("--alpha-upper", type=float, help=f"Maxwell accommodation of the upper plate, {span['alpha']}")
    s.add_argument("--alpha-t", type=float, help=f"Cercignani-Lampis tangential accommodation in {span['alpha_t']}")
    s.add_argument("--alpha-n", type=float, help=f"Cercignani-Lampis normal-energy accommodation in {span['alpha_n']}")
    s.add_argument("--alpha-t-upper", type=float, help=f"upper plate alpha_t, {span['alpha_t']}")
    s.add_argument("--alpha-n-upper", type=float, help=f"upper plate alpha_n, {span['alpha_n']}")
    s.add_argument("--n-space", type=int, help="cells across the gap / radial or half-height nodes (default: solver's)")
    s.add_argument("--n-velocity", type=int, help="velocity nodes (default: solver's)")
    s.add_argument("--max-iter", type=int, help="iteration limit (default: solver's)")
    tol = {g: _resolution_limits(g)["tol"] for g in ("plane_channel", "tube")}
    s.add_argument(
        "--tol",
        type=float,
        default=1e-8,
        help=(
            f"convergence tolerance: plane channel [{tol['plane_channel'][0]:g}, {tol['plane_channel'][1]:g}], "
            f"tube and duct [{tol['tube'][0]:g}, {tol['tube'][1]:g}]"
        ),
    )
    s.add_argument("--no-accelerate", action="store_true", help="switch off convergence acceleration")
    s.add_argument("--threads", type=int, default=1, help="numba threads")
    s.add_argument("--output", type=Path, help="write the point as netCDF to this path")
    s.add_argument("--json", action="store_true", help="print coefficients, iterations and status as JSON")
    r = s.add_argument_group(
        "relaxation (with --family relaxation; --gas, --pressure [Pa, default 100], "
        "--temperature, --n-velocity, --threads, --output, --json apply too)"
    )
    r.add_argument("--method", help=f"dsmc, {', '.join(km.MODEL_NAMES)} or {km.RELAXATION_BOLTZMANN} (default dsmc)")
    r.add_argument("--initial-state", help="equilibrium, anisotropic, two_beams or bkw (default anisotropic)")
    r.add_argument("--molecular-model", help="vhs, vss, hard_sphere or maxwell (default vhs)")
    r.add_argument("--n-particles", type=int, help="particles per replica (dsmc), [100, 1e8], default 20000")
    r.add_argument("--n-replicas", type=int, help="independent replicas (dsmc), [1, 4096], default 8")
    r.add_argument("--t-end", type=float, help="end time in mean collision times, (0, 10000], default 10")
    r.add_argument("--n-output", type=int, help="output times including t = 0, [2, 100001], default 41")
    r.add_argument("--seed", type=int, help="seed of the point, [0, 4294967295], default 1")
    r.add_argument("--h-bins-per-axis", type=int, help="H estimator cells per axis, [2, 64], default 8")
    r.add_argument(
        "--axis-temperature-ratios",
        type=float,
        nargs=3,
        metavar=("TX", "TY", "TZ"),
        help="anisotropic start: axis temperature ratios, each [0.01, 100], default 1.8 0.6 0.6",
    )
    r.add_argument("--beam-separation", type=float, help="two_beams start: relative beam speed, default 3")
    r.add_argument("--beam-fraction", type=float, help="two_beams start: share of the +x beam, (0, 1), default 0.5")
    r.add_argument("--bkw-start-time", type=float, help="bkw start: BKW time, >= 6 ln 2.5, default 6 ln 2.5")
    s.set_defaults(func=cmd_solve)

    sub.add_parser(
        "run",
        help="run a sweep: snakemake with the safe local profile (all further arguments go to snakemake)",
        add_help=False,
    )

    st = sub.add_parser("status", help="list done / failed / missing points of a study")
    st.add_argument("study", help="study YAML file")
    st.add_argument("--directory", default=".", help="working directory holding results/ (default .)")
    st.add_argument("--all", action="store_true", help="also list converged points")
    st.add_argument("--json", action="store_true", help="print one JSON list")
    st.add_argument(
        "--requeue-failed",
        action="store_true",
        help="delete failed and corrupt point files so the next run recomputes them",
    )
    st.add_argument(
        "--requeue-outdated",
        action="store_true",
        help="delete only the point files computed by an older solver version",
    )
    st.set_defaults(func=cmd_status)

    b = sub.add_parser("bench", help="run benchmarks/bench_*.py")
    b.add_argument("--directory", default=str(Path(__file__).resolve().parents[2]), help="repository root")
    b.set_defaults(func=cmd_bench)
    return parser


def _check_parsed_types(parser: argparse.ArgumentParser, args) -> None:
    """argparse turns ``--delta=--`` into an empty list; refuse any value of the wrong type."""
    for action in _all_actions(parser, args):
        value = getattr(args, action.dest, None)
        if action.type in (float, int) and value is not None and not isinstance(value, action.type):
            raise CliError(f"{action.option_strings[-1]}: expected one {action.type.__name__} value, got {value!r}")


def _all_actions(parser, args):
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            sub = action.choices.get(getattr(args, "command", None))
            if sub is not None:
                yield from sub._actions
        else:
            yield action


def numba_cache_dir() -> Path:
    """The one folder where numba keeps compiled kernels, whatever the current folder.

    ``NUMBA_CACHE_DIR`` if set; else ``<repository>/.numba_cache`` when knudsweep
    runs from a source checkout (the folder holding the Snakefile, also used by
    the tests and benchmarks); else ``$XDG_CACHE_HOME/knudsweep/numba``
    (``~/.cache/knudsweep/numba``).
    """
    if os.environ.get("NUMBA_CACHE_DIR"):
        return Path(os.environ["NUMBA_CACHE_DIR"])
    repo = Path(__file__).resolve().parents[2]
    if (repo / "Snakefile").is_file() and (repo / "solver").is_dir():
        return repo / ".numba_cache"
    base = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    return base / "knudsweep" / "numba"


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    # before anything imports numba (it reads the variable once); Snakemake jobs inherit it
    os.environ["NUMBA_CACHE_DIR"] = str(numba_cache_dir())
    if not argv:
        build_parser().print_help()
        return 0
    if argv[:1] == ["run"]:
        try:
            return cmd_run(argv[1:])
        except CliError as exc:
            _fail(str(exc))
        return EXIT_USAGE
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        _check_parsed_types(parser, args)
        return args.func(args)
    except ValueError as exc:  # CliError, StudyConfigError, checked solver input errors
        _fail(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
    except BrokenPipeError:  # `knudsweep solve ... | head -1`: the reader left; not an error
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except OSError as exc:  # a point file that could not be written (disk full, I/O error)
        print(f"knudsweep: {str(exc).splitlines()[0] if str(exc) else type(exc).__name__}", file=sys.stderr)
        return 1
    return EXIT_USAGE


if __name__ == "__main__":
    sys.exit(main())
