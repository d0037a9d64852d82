"""Plane-channel family, the grid: section checks, point values and identity, gather dimensions, cost.

Grid: problems x kinetic models x wall settings x delta (or Kn).

Point identity (the file path below ``results/points/``)::

    plane_channel/<problem>/model=<model>[/gas=<gas>]/wall=<wall label>/grid=<ns>-<nv>-<tol>/delta=<delta>.nc

e.g. ``plane_channel/poiseuille/model=bgk/wall=maxwell-alpha=0.9/grid=ns40-nv16-tol1.0e-08/delta=1.0e+00.nc``.

* **Gas is part of a point only where the operator depends on it.**  The
  linearised plane-channel problems are solved in reduced variables; for the
  model equations and hard spheres the solver sees delta, the kinetic model and
  the walls only.  A study that lists Ar and He therefore solves each such point
  once and the tables convert the same reduced result to each gas's pressure and
  flow (``knudsweep.solver.gas.pressure_from_delta``).  The VHS operator
  (``boltzmann_vhs``, :data:`GAS_MODELS`) depends on the gas's viscosity index
  omega (config/gases.yaml): its points are expanded over the study's gases, the
  path gets a ``gas=<gas>`` segment, the values ``gas`` and ``omega`` (so an
  edited omega makes the file outdated), and the gathered ``model`` dimension
  the label ``boltzmann_vhs-<gas>`` (:func:`model_entries`; extra coordinates
  ``model_gas`` and ``omega``).  Other points keep their identity.  If a Kn axis
  is given, it is turned into delta = sqrt(pi) / (2 Kn) before the point is
  named, so ``kn`` and ``delta`` studies share files.
* **Resolution and tolerance are part of the point** (``grid=`` segment): two
  studies at different resolution must not overwrite each other's files.
  ``auto`` stands for "solver default".
* The iteration limit and the acceleration switch are not: a converged answer
  does not depend on them.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from knudsweep.families import (
    GAS_MODELS,
    Point,
    check_axis_choice,
    delta_values,
    gas_omega,
    gas_values,
    grid_label,
    make_wall_object,
    model_entries,
    model_gas_coordinates,
    model_label,  # noqa: F401  (re-exported: the family's model labels)
    model_labels,
    one_wall_label,
    reject_repeats,
    required_keys,  # noqa: F401  (read by knudsweep.config as grid.required_keys)
    resolution_values,
    wall_params,
)
from knudsweep.identity import canonical, format_exp, point_id, segment
from knudsweep.solver import kinetic_models

NAME = "plane_channel"
PROBLEMS = ("poiseuille", "thermal_creep", "couette", "heat_transfer")
MODEL_EQUATIONS = kinetic_models.MODEL_NAMES
# the linearized Boltzmann equation (knudsweep.solver.kinetic_models.BOLTZMANN_MODELS): poiseuille and
# thermal_creep with Maxwell walls only
BOLTZMANN_MODELS = tuple(kinetic_models.BOLTZMANN_MODELS)
BOLTZMANN_PROBLEMS = ("poiseuille", "thermal_creep")
MODELS = MODEL_EQUATIONS + BOLTZMANN_MODELS
# GAS_MODELS, the Boltzmann models whose operator depends on the gas (VHS: the viscosity index omega of
# config/gases.yaml), and their helpers are shared with the tube (knudsweep.families)

# Scalar results of each problem (names as returned by knudsweep.solver.plane_channel).
COEFFICIENTS: dict[str, tuple[str, ...]] = {
    "poiseuille": ("G_P", "Q_P"),
    "thermal_creep": ("G_T", "Q_T"),
    "couette": ("shear_stress",),
    "heat_transfer": ("heat_flux",),
}
# The coefficient drawn and tabulated for each problem.
MAIN_COEFFICIENT = {
    "poiseuille": "G_P",
    "thermal_creep": "G_T",
    "couette": "shear_stress",
    "heat_transfer": "heat_flux",
}

# Measured seconds per default-grid point, solve plus point file (see point_cost).
PLANE_POINT_SECONDS = 0.008
# Linearized Boltzmann point (solve plus the coarse solve of the estimate): a fixed part plus a part per cell;
# measured 0.07-0.23, 0.15-0.6, 0.6-0.8 s at delta 0.1-1, 10, 100 (64, 138, 298 cells; 8 speeds x 32
# directions; benchmarks/bench_boltzmann_channel.py, one thread), after the ~1 s operator build of a
# worker's first point
BOLTZMANN_POINT_SECONDS = 0.1
BOLTZMANN_SECONDS_PER_CELL = 0.002
# VHS argon: 10-20 % more iterations than hard spheres (12-48 against 10-40 at delta 0.1-100, same bench); its
# operator build (11 s for the 8- and 6-speed sets of one omega, cached per worker) is not in the point cost
VHS_FACTOR = 1.2


def wall_label(lower: dict[str, Any], upper: dict[str, Any] | None) -> str:
    """``<lower>`` or ``<lower>_upper=<upper>``, each as :func:`knudsweep.families.one_wall_label`."""
    return one_wall_label(lower) if upper is None else f"{one_wall_label(lower)}_upper={one_wall_label(upper)}"


def make_wall_objects(values: dict[str, Any]):
    """Solver wall objects (lower, upper-or-None) from a point's values."""
    return make_wall_object(values["lower_wall"]), make_wall_object(values["upper_wall"])


def wall_settings(section: dict[str, Any]) -> list[tuple[str, dict, dict | None]]:
    """``[(label, lower, upper-or-None), ...]`` of the section's walls."""
    out = []
    for i, spec in enumerate(section["walls"]):
        lower = wall_params(spec, f"walls[{i}]")
        upper = wall_params(spec["upper"], f"walls[{i}].upper") if "upper" in spec else None
        out.append((wall_label(lower, upper), lower, upper))
    return out


def check_section(section: dict[str, Any]) -> None:
    axis = check_axis_choice(section)
    has_delta = axis == "delta"
    reject_repeats("walls", [label for label, _, _ in wall_settings(section)])
    res = section.get("resolution", {})
    if res.get("accuracy") is not None and (res.get("n_space") is not None or res.get("n_velocity") is not None):
        raise ValueError(
            "resolution.accuracy: give either an accuracy target or n_space/n_velocity, not both "
            "(set n_space and n_velocity to null)"
        )
    # The solver's own limits, checked here so a study fails before any job
    # starts instead of producing points that fail with a solver error.
    from knudsweep.solver.plane_channel import driver, grids

    lo, hi = driver.DELTA_RANGE
    for key, value, (vmin, vmax) in (
        ("n_space", res.get("n_space"), (grids.MIN_SPACE, grids.MAX_SPACE)),
        ("n_velocity", res.get("n_velocity"), (grids.MIN_VELOCITY, grids.MAX_VELOCITY)),
    ):
        if value is not None and not vmin <= value <= vmax:
            raise ValueError(f"resolution.{key}: got {value}; allowed range is [{vmin}, {vmax}] or null")
    if res.get("tol") is not None and not 1e-14 <= res["tol"] <= 0.01:
        raise ValueError(f"resolution.tol: got {res['tol']}; allowed range is [1e-14, 0.01]")
    for d in delta_values(section):
        if not lo <= d <= hi:
            bounds = (
                f"[{lo:g}, {hi:g}]"
                if has_delta
                else f"[{math.sqrt(math.pi) / (2 * hi):.3g}, {math.sqrt(math.pi) / (2 * lo):.3g}]"
            )
            raise ValueError(f"{axis}: a value gives delta = {d:g}; allowed range of {axis} is {bounds}")
    deltas = delta_values(section)
    if len(set(deltas)) != len(deltas):
        raise ValueError(f"{axis}: values repeat after rounding to 6 significant digits")
    check_boltzmann(section, axis)


def check_boltzmann(section: dict[str, Any], axis: str) -> None:
    """The linearized Boltzmann equation's narrower scope (knudsweep.solver.plane_channel.boltzmann_driver)."""
    lbe = [m for m in section["models"] if m in BOLTZMANN_MODELS]
    if not lbe:
        return
    from knudsweep.solver.plane_channel import boltzmann_driver as bd

    for problem in section["problems"]:
        if problem not in BOLTZMANN_PROBLEMS:
            raise ValueError(
                f"problems: model {lbe[0]} solves {', '.join(BOLTZMANN_PROBLEMS)} only, "
                f"got {problem!r} (put other problems in a second study)"
            )
    for i, (_label, lower, upper) in enumerate(wall_settings(section)):
        for w in (lower, upper):
            if w is not None and w["model"] != "maxwell":
                raise ValueError(f"walls[{i}].model: model {lbe[0]} takes wall model maxwell only, got {w['model']!r}")
    lo, hi = bd.DELTA_RANGE
    for d in delta_values(section):
        if not lo <= d <= hi:
            bounds = (
                f"[{lo:g}, {hi:g}]"
                if axis == "delta"
                else f"[{math.sqrt(math.pi) / (2 * hi):.3g}, {math.sqrt(math.pi) / (2 * lo):.3g}]"
            )
            raise ValueError(
                f"{axis}: a value gives delta = {d:g}; allowed range of {axis} with model {lbe[0]} is {bounds}"
            )
    from knudsweep.solver.plane_channel.linearized_boltzmann import OMEGA_RANGE

    gas_models = [m for m in section["models"] if m in GAS_MODELS]
    for i, gas in enumerate(section["gases"] if gas_models else []):
        omega = gas_omega(gas)
        if not OMEGA_RANGE[0] <= omega <= OMEGA_RANGE[1]:
            raise ValueError(
                f"gases[{i}]: gas {gas} has omega = {omega:g} (config/gases.yaml); model {gas_models[0]} takes "
                f"omega in [{OMEGA_RANGE[0]:g}, {OMEGA_RANGE[1]:g}]"
            )
    nv = section.get("resolution", {}).get("n_velocity")
    if nv is not None and not bd.MIN_SPEED <= nv <= bd.MAX_SPEED:
        raise ValueError(
            f"resolution.n_velocity: got {nv}; with model {lbe[0]} it counts speed nodes, "
            f"allowed range [{bd.MIN_SPEED}, {bd.MAX_SPEED}] or null"
        )


def point_values(
    problem: str,
    model: str,
    delta: float,
    lower: dict[str, Any],
    upper: dict[str, Any] | None,
    resolution: dict[str, Any],
    gas: str | None = None,
) -> dict[str, Any]:
    """Canonical values of one point (a study's grid and ``knudsweep solve`` both build them here).

    ``lower``, ``upper``: canonical wall laws (:func:`knudsweep.families.wall_params`; upper None = alike);
    ``resolution``: ``n_space``, ``n_velocity``, ``tol`` and optionally ``accuracy``; ``gas``: the gas of a
    model in GAS_MODELS (its values then carry ``gas`` and ``omega``), ignored for other models.
    """
    values = {
        "problem": problem,
        "model": model,
        "delta": canonical(delta),
        "wall": wall_label(lower, upper),
        "lower_wall": lower,
        "upper_wall": upper,
        **resolution_values(resolution),
        **gas_values(model, gas),
    }
    return values


def points(section: dict[str, Any]) -> list[Point]:
    res = section["resolution"]
    grid = grid_label(section)
    out = []
    for problem in section["problems"]:
        for mlabel, model, gas in model_entries(section):
            gas_segment = [] if gas is None else [segment("gas", gas)]
            for label, lower, upper in wall_settings(section):
                for delta in delta_values(section):
                    pid = point_id(
                        NAME,
                        [
                            segment("", problem),
                            segment("model", model),
                            *gas_segment,
                            segment("wall", label),
                            segment("grid", grid),
                            segment("delta", format_exp(delta)),
                        ],
                    )
                    values = point_values(problem, model, delta, lower, upper, res, gas)
                    index = {"problem": problem, "model": mlabel, "wall": label, "delta": delta}
                    out.append(Point(NAME, pid, values, index))
    return out


def point_cost(values: dict[str, Any]) -> float:
    """About 3 ms of solver and 4 ms of file writing on the default grid (accelerated,
    10-15 iterations at any delta; measured with benchmarks/bench_sweep_throughput.py).
    Linearized Boltzmann: BOLTZMANN_POINT_SECONDS + BOLTZMANN_SECONDS_PER_CELL x cells, times
    (n_velocity / 8)^3 (the dense collision matrix on speeds x directions)."""
    if values.get("model") in BOLTZMANN_MODELS:
        from knudsweep.solver.plane_channel import grids

        n_space = values.get("n_space") or grids.default_n_space(values["delta"])
        cost = BOLTZMANN_POINT_SECONDS + BOLTZMANN_SECONDS_PER_CELL * n_space
        if values.get("model") in GAS_MODELS:
            cost *= VHS_FACTOR
        if values.get("n_velocity"):
            cost *= max(0.1, (values["n_velocity"] / 8.0) ** 3)
        return cost * (4.0 if values.get("accuracy") is not None else 1.0)
    cost = PLANE_POINT_SECONDS
    if values.get("n_space") and values.get("n_velocity"):
        cost *= max(0.25, values["n_space"] * values["n_velocity"] / (64 * 16))
    if values.get("accuracy") is not None:
        cost *= 4.0  # refinement ladder: up to a few grids per point
    return cost


def gather_dims(section: dict[str, Any]) -> dict[str, list]:
    return {
        "problem": list(section["problems"]),
        "model": model_labels(section),
        "wall": [label for label, _, _ in wall_settings(section)],
        "delta": delta_values(section),
    }


def dim_attrs(section: dict[str, Any]) -> dict[str, dict]:
    walls = wall_settings(section)
    deltas = delta_values(section)

    def acc(w, key):
        return float(w[key]) if w is not None and key in w else float("nan")

    return {
        "problem": {"attrs": {"long_name": "driving problem"}},
        "model": {"attrs": {"long_name": "kinetic model equation"}, **model_gas_coordinates(section)},
        "wall": {
            "attrs": {"long_name": "gas-surface interaction setting"},
            "extra": {
                "wall_model": ([w[1]["model"] for w in walls], {"long_name": "wall model (lower plate)"}),
                "alpha": (
                    [acc(w[1], "alpha") for w in walls],
                    {"units": "1", "long_name": "Maxwell accommodation coefficient (lower plate)"},
                ),
                "alpha_t": (
                    [acc(w[1], "alpha_t") for w in walls],
                    {"units": "1", "long_name": "Cercignani-Lampis tangential-momentum accommodation (lower plate)"},
                ),
                "alpha_n": (
                    [acc(w[1], "alpha_n") for w in walls],
                    {"units": "1", "long_name": "Cercignani-Lampis normal-energy accommodation (lower plate)"},
                ),
                "symmetric_walls": (
                    [np.int8(w[2] is None) for w in walls],
                    {
                        "long_name": "whether both plates have the same wall setting",
                        "flag_values": np.array([0, 1], dtype=np.int8),
                        "flag_meanings": "plates_differ plates_alike",
                    },
                ),
            },
        },
        "delta": {
            "attrs": {"units": "1", "long_name": "rarefaction parameter delta = p a / (mu v0), a = plate gap"},
            "extra": {
                "kn": (
                    [canonical(math.sqrt(math.pi) / (2.0 * d)) for d in deltas],
                    {"units": "1", "long_name": "Knudsen number sqrt(pi) / (2 delta)"},
                )
            },
        },
    }
