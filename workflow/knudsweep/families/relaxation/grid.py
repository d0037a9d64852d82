"""Relaxation family, the grid: section checks, point values and identity, gather dimensions, cost.

Grid: gases x pressures x temperatures x initial states x molecular models x
solvers, where a *solver* is a method with its resolution: ``dsmc-N20000``
(particle method, one per particle number), ``bgk-nv32`` (model equation
on a 32^3 velocity grid) or ``fast_spectral-nv32`` (deterministic Boltzmann
solution, fast spectral method, on a 32^3 velocity grid).  Putting method and particle number on one axis
keeps the grid dense: a deterministic method has no particle number.

Point identity (below ``results/points/``)::

    relaxation/<state label>/gas=<gas>/model=<molecular model>/solver=<solver label>/
        run=<t_end>-<outputs>-<H cells>-<replicas>-<seed>/p=<Pa>/T=<K>.nc

e.g. ``relaxation/anisotropic-1.8-0.6-0.6/gas=Ar/model=vhs/solver=dsmc-N20000/
run=t1.0e+01-o41-k8-R8-s1/p=1.0e+02/T=300.0.nc``.  Every setting that changes
the numbers is in the path (state options, run settings, seed); p and T only
scale the time axis to seconds but are part of the point as the study asks
for them.

Tables and figures: :mod:`knudsweep.families.relaxation.report`.
"""

from __future__ import annotations

import functools
import math
from typing import Any

import numpy as np

from knudsweep.families import Point
from knudsweep.identity import canonical, format_exp, format_plain, point_id, segment
from knudsweep.solver.gas import gas_record
from knudsweep.solver.kinetic_models import MODEL_NAMES, RELAXATION_BOLTZMANN

NAME = "relaxation"
# methods of the relaxation solver (knudsweep.solver.relaxation.solve.METHODS, not imported here so that
# planning a study does not load the numba kernels): dsmc, the model equations and the deterministic
# Boltzmann solution, named by the one registry of kinetic models (knudsweep.solver.kinetic_models)
METHODS = ("dsmc", *MODEL_NAMES, RELAXATION_BOLTZMANN)
MODEL_EQUATIONS = MODEL_NAMES
BOLTZMANN = RELAXATION_BOLTZMANN  # the deterministic Boltzmann solution the model equations are compared with
STATES = ("equilibrium", "anisotropic", "two_beams", "bkw")
MOLECULAR_MODELS = ("vhs", "vss", "hard_sphere", "maxwell")
MODELS = MOLECULAR_MODELS
FIT_NAMES = ("anisotropy", "heat_flux", "fourth_moment")  # knudsweep.solver.relaxation.solve.FIT_NAMES
STATE_DEFAULTS = {
    "axis_temperature_ratios": [1.8, 0.6, 0.6],
    "beam_separation": 3.0,
    "beam_fraction": 0.5,
    "bkw_start_time": 6.0 * math.log(2.5),
}
RUN_DEFAULTS = {"n_replicas": 8, "t_end": 10.0, "n_output": 41, "seed": 1, "h_bins_per_axis": 8, "n_velocity": 32}


def options(section: dict[str, Any]) -> tuple[dict[str, Any], dict[str, Any]]:
    state = {**STATE_DEFAULTS, **section.get("state_options", {})}
    run = {**RUN_DEFAULTS, **section.get("run", {})}
    return state, run


def state_label(name: str, opts: dict[str, Any]) -> str:
    """Path-safe label of an initial state with its options."""
    if name == "anisotropic":
        r = np.asarray(opts["axis_temperature_ratios"], dtype=float)
        r = r / r.mean()
        return "anisotropic-" + "-".join(format_plain(x) for x in r)
    if name == "two_beams":
        return f"two_beams-s{format_plain(opts['beam_separation'])}-w{format_plain(opts['beam_fraction'])}"
    if name == "bkw":
        return f"bkw-t{format_plain(opts['bkw_start_time'])}"
    return name


def solver_labels(section: dict[str, Any]) -> list[str]:
    """``dsmc-N<particles>`` per particle number, ``<method>-nv<grid>`` per deterministic method."""
    _, run = options(section)
    out = []
    for method in section["methods"]:
        if method == "dsmc":
            out += [f"dsmc-N{int(n)}" for n in section["n_particles"]]
        else:
            out.append(f"{method}-nv{int(run['n_velocity'])}")
    return out


def parse_solver(label: str) -> tuple[str, int | None]:
    method, res = label.rsplit("-", 1)
    return method, (int(res[1:]) if method == "dsmc" else int(res[2:]))


def run_label(run: dict[str, Any]) -> str:
    return (
        f"t{format_exp(run['t_end'])}-o{int(run['n_output'])}-k{int(run['h_bins_per_axis'])}"
        f"-R{int(run['n_replicas'])}-s{int(run['seed'])}"
    )


def bkw_start_time(value: float) -> float:
    """The BKW start time to solve with: the schema's bound and default are 6 ln 2.5 rounded down to 6
    digits (5.497744; point values 5.49774), so a value within that rounding is raised to 6 ln 2.5; others pass unchanged."""
    first = 6.0 * math.log(2.5)
    return first if first * (1.0 - 1e-5) <= value < first else float(value)


def check_section(section: dict[str, Any]) -> None:
    from knudsweep.solver.relaxation.initial_states import make_initial_state

    state, run = options(section)
    for key, allowed in (("methods", METHODS), ("initial_states", STATES), ("molecular_models", MOLECULAR_MODELS)):
        for v in section[key]:
            if v not in allowed:
                raise ValueError(f"{key}: {v!r} not allowed; allowed are {', '.join(allowed)}")
    for name in section["initial_states"]:
        make_initial_state(
            name,
            tuple(state["axis_temperature_ratios"]),
            state["beam_separation"],
            state["beam_fraction"],
            bkw_start_time(state["bkw_start_time"]),
        )
    if "dsmc" in section["methods"]:
        k3 = int(run["h_bins_per_axis"]) ** 3
        for n in section["n_particles"]:
            if int(n) < 5 * k3:
                raise ValueError(
                    f"n_particles: {n} is below 5 per H cell ({5 * k3} for h_bins_per_axis={run['h_bins_per_axis']})"
                )
    for key in ("pressures", "temperatures"):
        vals = [canonical(v) for v in section[key]]
        if len(set(vals)) != len(vals):
            raise ValueError(f"{key}: values repeat after rounding to 6 significant digits")


def points(section: dict[str, Any]) -> list[Point]:
    state, run = options(section)
    out = []
    for st in section["initial_states"]:
        slabel = state_label(st, state)
        for gas in section["gases"]:
            for model in section["molecular_models"]:
                for solver in solver_labels(section):
                    method, res = parse_solver(solver)
                    for p in section["pressures"]:
                        for t in section["temperatures"]:
                            p, t = canonical(p), canonical(t)
                            pid = point_id(
                                NAME,
                                [
                                    segment("", slabel),
                                    segment("gas", gas),
                                    segment("model", model),
                                    segment("solver", solver),
                                    segment("run", run_label(run)),
                                    segment("p", format_exp(p)),
                                    segment("T", format_plain(t)),
                                ],
                            )
                            values = {
                                "method": method,
                                "gas": gas,
                                "pressure": p,
                                "temperature": t,
                                # the gas table's numbers: an edit of config/gases.yaml changes
                                # the point's values, so its file no longer counts as done
                                "gas_data": gas_record(gas),
                                "initial_state": st,
                                "molecular_model": model,
                                "n_particles": res if method == "dsmc" else None,
                                "n_velocity": res if method != "dsmc" else None,
                                "n_replicas": int(run["n_replicas"]),
                                "t_end": canonical(run["t_end"]),
                                "n_output": int(run["n_output"]),
                                "seed": int(run["seed"]),
                                "h_bins_per_axis": int(run["h_bins_per_axis"]),
                                "axis_temperature_ratios": [canonical(x) for x in state["axis_temperature_ratios"]],
                                "beam_separation": canonical(state["beam_separation"]),
                                "beam_fraction": canonical(state["beam_fraction"]),
                                "bkw_start_time": canonical(state["bkw_start_time"]),
                            }
                            index = {
                                "gas": gas,
                                "pressure": p,
                                "temperature": t,
                                "initial_state": st,
                                "molecular_model": model,
                                "solver": solver,
                            }
                            out.append(Point(NAME, pid, values, index))
    return out


def point_cost(values: dict[str, Any]) -> float:
    """Seconds per point, measured on the demo settings (t_end 10, 41 outputs): DSMC 0.28 s for
    8 replicas of 2e4 particles (linear in particles x replicas x t_end); on a 32^3 grid BGK
    0.04 s and S-model / ES-BGK 2 s (cubic in n_velocity).  Fast spectral: see
    :func:`_fast_spectral_cost`."""
    t = values["t_end"] / 10.0
    if values["method"] == "dsmc":
        return 0.05 + 0.28 * t * values["n_particles"] * values["n_replicas"] / 160000.0
    if values["method"] == BOLTZMANN:
        return fast_spectral_cost(values)
    grid = (values["n_velocity"] / 32.0) ** 3
    return 0.05 + (0.04 if values["method"] == "bgk" else 2.0) * t * grid


def peak_memory_mb(section: dict[str, Any]) -> tuple[float, str]:
    """The fast spectral multipliers dominate (16 r M N^2 (N/2+1) bytes); other methods stay small."""
    if BOLTZMANN not in section["methods"]:
        return 0.0, ""
    _, run = options(section)
    n = int(run["n_velocity"])
    best = (0.0, "")
    for gas in section.get("gases", ["Ar"]):
        for model in section.get("molecular_models", ["vhs"]):
            mb = fast_spectral_size(model, gas, n)[2] / 1e6
            if mb > best[0]:
                best = (mb, f"fast_spectral, {gas}, {model}, n_velocity = {n}")
    return best


def gather_dims(section: dict[str, Any]) -> dict[str, list]:
    return {
        "gas": list(section["gases"]),
        "pressure": [canonical(p) for p in section["pressures"]],
        "temperature": [canonical(t) for t in section["temperatures"]],
        "initial_state": list(section["initial_states"]),
        "molecular_model": list(section["molecular_models"]),
        "solver": solver_labels(section),
    }


def dim_attrs(section: dict[str, Any]) -> dict[str, dict]:
    labels = solver_labels(section)
    parsed = [parse_solver(s) for s in labels]
    return {
        "gas": {"attrs": {"long_name": "gas (config/gases.yaml)"}},
        "pressure": {"attrs": {"units": "Pa", "long_name": "pressure"}},
        "temperature": {"attrs": {"units": "K", "long_name": "equilibrium temperature"}},
        "initial_state": {"attrs": {"long_name": "initial velocity distribution"}},
        "molecular_model": {"attrs": {"long_name": "molecular model (sets p/mu in mean collision times)"}},
        "solver": {
            "attrs": {"long_name": "method and resolution"},
            "extra": {
                "method": ([m for m, _ in parsed], {"long_name": "dsmc, bgk, s_model, es_bgk or fast_spectral"}),
                "n_particles": (
                    [float(r) if m == "dsmc" else float("nan") for m, r in parsed],
                    {"units": "1", "long_name": "particles per replica (particle method)"},
                ),
            },
        },
    }


@functools.lru_cache(maxsize=64)
def fast_spectral_size(model: str, gas: str, n: int) -> tuple[int, int, float]:
    from knudsweep.solver.gas import get_gas
    from knudsweep.solver.relaxation.cross_sections import molecular_model
    from knudsweep.solver.relaxation.fast_spectral import operator_size

    return operator_size(molecular_model(model, get_gas(gas)), n)


# Fast spectral cost per point (one core): per collision evaluation SEC_PER_TRANSFORM per inverse
# FFT of 32^3 points (2 r M + 2 of them, N^3 log N for other N) plus SEC_PER_EVAL_REST for the
# projection and records; build BUILD_S_PER_TERM per multiplier pair r M.  Measured with
# benchmarks/bench_fast_spectral.py on the shared 2-core machine, default point (anisotropic
# start, t_end 10, 41 outputs, dt 0.25, N = 32): VHS argon (r = 4, M = 50) 11.9 s wall / 11.8 s
# CPU (model 11.8 s), hard spheres (r = 1) 3.6 s / 3.5 s (model 3.6 s); 0.26 s and 0.065 s per
# SSP-RK3 step, build 0.66 s and 0.41 s.
SEC_PER_TRANSFORM = 2.2e-4
SEC_PER_EVAL_REST = 4e-3
BUILD_S_PER_TERM = 3e-3


def fast_spectral_cost(values: dict[str, Any]) -> float:
    from knudsweep.solver.relaxation.solve import DEFAULT_TIME_STEP

    n = int(values["n_velocity"])
    rank, m, _ = fast_spectral_size(values["molecular_model"], values["gas"], n)
    interval = values["t_end"] / (values["n_output"] - 1)
    steps = (values["n_output"] - 1) * max(1, math.ceil(interval / DEFAULT_TIME_STEP[BOLTZMANN] - 1e-9))
    size = (n / 32.0) ** 3 * math.log(n) / math.log(32.0)
    per_eval = (SEC_PER_TRANSFORM * (2 * rank * m + 2) + SEC_PER_EVAL_REST) * size
    return 0.3 + BUILD_S_PER_TERM * rank * m * (n / 32.0) ** 3 + 3 * steps * per_eval
