"""Tube and rectangular-duct family, the grid: section checks, point values and identity, gather dimensions, cost.

Grid: geometries x problems x kinetic models x wall settings x delta (or Kn).
A geometry is the circular tube or a rectangular duct of one aspect ratio
(width / height >= 1).  The kinetic models are the model equations and, for the
tube with Maxwell walls, the linearized Boltzmann equation (hard spheres, VHS;
``knudsweep.solver.tube.boltzmann_driver``).

Point identity (the file path below ``results/points/``)::

    tube_duct/<geometry>/<problem>/model=<model>[/gas=<gas>]/wall=<wall label>/grid=<ns>-<nv>-<tol>/delta=<delta>.nc

e.g. ``tube_duct/duct-A=4.0/thermal_creep/model=bgk/wall=maxwell-alpha=0.9/grid=nsauto-nvauto-tol1.0e-07/delta=1.0e+01.nc``.

* The length in delta is the tube *radius* or the duct *height* (the smaller
  side): delta = p a / (mu v0).  A Kn axis is turned into delta = sqrt(pi)/(2 Kn)
  before the point is named, so ``kn`` and ``delta`` studies share files.
* Gas, temperature and channel size are not part of a point (the solvers work
  in reduced variables); they only convert results to SI units in the tables
  and figures.  The exception is the VHS operator (``boltzmann_vhs``,
  :data:`GAS_MODELS`), which depends on the gas's viscosity index omega: as in
  the plane channel, its points are expanded over the section's gases, the path
  gets a ``gas=<gas>`` segment, the values ``gas`` and ``omega``, and the
  gathered ``model`` dimension the label ``boltzmann_vhs-<gas>`` (extra
  coordinates ``model_gas`` and ``omega``).  Other points keep their identity.
* Resolution and tolerance are part of the point; iteration limits are not.

Tables and figures are built from the gathered sweep in :mod:`knudsweep.families.tube_duct.report`.
"""

from __future__ import annotations

import math
from typing import Any

from knudsweep.families import (
    GAS_MODELS,
    Point,
    check_axis_choice,
    delta_values,
    gas_omega,
    gas_values,
    grid_label,
    model_entries,
    model_gas_coordinates,
    model_labels,
    one_wall_label,
    reject_repeats,
    required_keys,  # noqa: F401  (read by knudsweep.config as grid.required_keys)
    resolution_values,
    wall_params,
)
from knudsweep.identity import canonical, format_exp, format_plain, point_id, segment
from knudsweep.solver import kinetic_models

NAME = "tube_duct"
PROBLEMS = ("poiseuille", "thermal_creep")
MODEL_EQUATIONS = kinetic_models.MODEL_NAMES
# the linearized Boltzmann equation (knudsweep.solver.kinetic_models.BOLTZMANN_MODELS): the tube only, Maxwell walls
BOLTZMANN_MODELS = tuple(kinetic_models.BOLTZMANN_MODELS)
BOLTZMANN_SHAPES = ("tube",)
MODELS = MODEL_EQUATIONS + BOLTZMANN_MODELS
MAIN_COEFFICIENT = {"poiseuille": "G_P", "thermal_creep": "G_T"}
SQRT_PI = math.sqrt(math.pi)


# ---------------------------------------------------------------- section helpers


def geometry_settings(section: dict[str, Any]) -> list[tuple[str, str, float]]:
    """``[(label, shape, aspect_ratio), ...]``: ``("tube", "tube", 1.0)``, ``("duct-A=4.0", "duct", 4.0)``."""
    return [geometry_of(spec["shape"], spec.get("aspect_ratio", 1.0)) for spec in section["geometries"]]


def geometry_of(shape: str, aspect_ratio: float = 1.0) -> tuple[str, str, float]:
    """``(label, shape, aspect_ratio)`` of one cross-section; the label is its path segment and gather label."""
    if shape == "tube":
        if aspect_ratio != 1.0:  # the schema fills the default 1.0
            raise ValueError("geometries.aspect_ratio: only for shape 'duct' (a tube has none; leave it out or 1)")
        return ("tube", "tube", 1.0)
    a = canonical(aspect_ratio)
    return (f"duct-A={format_plain(a)}", "duct", a)


wall_label = one_wall_label  # one wall per tube or duct


def wall_settings(section: dict[str, Any]) -> list[tuple[str, dict]]:
    out = []
    for i, spec in enumerate(section["walls"]):
        w = wall_params(spec, f"walls[{i}]")
        out.append((wall_label(w), w))
    return out


def tangential_alpha(w: dict[str, Any]) -> float:
    return w["alpha"] if w["model"] == "maxwell" else w["alpha_t"]


def is_diffuse(w: dict[str, Any]) -> bool:
    return tangential_alpha(w) == 1.0


def check_section(section: dict[str, Any]) -> None:
    from knudsweep.solver.duct import MAX_DELTA as DUCT_MAX
    from knudsweep.solver.tube import MAX_DELTA as TUBE_MAX

    axis = check_axis_choice(section)
    reject_repeats("geometries", [label for label, _, _ in geometry_settings(section)])
    reject_repeats("walls", [label for label, _ in wall_settings(section)])
    res = section.get("resolution", {})
    if res.get("accuracy") is not None and (res.get("n_space") is not None or res.get("n_velocity") is not None):
        raise ValueError(
            "resolution.accuracy: give either an accuracy target or n_space/n_velocity, not both "
            "(set n_space and n_velocity to null)"
        )
    deltas = delta_values(section)
    if len(set(deltas)) != len(deltas):
        raise ValueError(f"{axis}: values repeat after rounding to 6 significant digits")
    top = min(TUBE_MAX, DUCT_MAX)
    if deltas[-1] > top:
        raise ValueError(
            f"{axis}: delta must be in (0, {top:g}] for the tube and duct solvers "
            f"(Kn >= {SQRT_PI / (2 * top):.3g}); got delta = {deltas[-1]:g}"
        )
    if "conditions" in section:
        c = section["conditions"]
        for key in ("pressure_ratios",):
            if any(r <= 1.0 for r in c.get(key, [])):
                raise ValueError(f"conditions.{key}: every ratio p_in/p_out must be > 1")
        th = c.get("thermal", {})
        if th and th.get("t_hot", 2.0) <= th.get("t_cold", 1.0):
            raise ValueError("conditions.thermal.t_hot: must be > t_cold")
    check_boltzmann(section, axis)


def check_boltzmann(section: dict[str, Any], axis: str) -> None:
    """The linearized Boltzmann equation's narrower scope (knudsweep.solver.tube.boltzmann_driver): the tube,
    Maxwell walls, its delta range, speed nodes and the VHS omega range."""
    lbe = [m for m in section["models"] if m in BOLTZMANN_MODELS]
    if not lbe:
        return
    from knudsweep.solver.plane_channel.linearized_boltzmann import OMEGA_RANGE
    from knudsweep.solver.tube import boltzmann_driver as bd

    for i, (label, shape, _a) in enumerate(geometry_settings(section)):
        if shape not in BOLTZMANN_SHAPES:
            raise ValueError(
                f"geometries[{i}].shape: model {lbe[0]} takes shape {', '.join(BOLTZMANN_SHAPES)} only, "
                f"got {shape!r} ({label}; put ducts in a second study)"
            )
    for i, (_label, w) in enumerate(wall_settings(section)):
        if w["model"] != "maxwell":
            raise ValueError(f"walls[{i}].model: model {lbe[0]} takes wall model maxwell only, got {w['model']!r}")
    lo, hi = 0.0, bd.MAX_DELTA
    for d in delta_values(section):
        if not lo <= d <= hi:
            bounds = f"(0, {hi:g}]" if axis == "delta" else f"[{SQRT_PI / (2 * hi):.3g}, inf)"
            raise ValueError(
                f"{axis}: a value gives delta = {d:g}; allowed range of {axis} with model {lbe[0]} is {bounds}"
            )
    res = section.get("resolution", {})
    for key, (vmin, vmax), what in (
        ("n_velocity", bd.SPEED_RANGE, "counts speed nodes"),
        ("n_space", bd.SPACE_RANGE, "counts radial nodes"),
    ):
        value = res.get(key)
        if value is not None and not vmin <= value <= vmax:
            raise ValueError(
                f"resolution.{key}: got {value}; with model {lbe[0]} it {what}, allowed range [{vmin}, {vmax}] or null"
            )
    gas_models = [m for m in section["models"] if m in GAS_MODELS]
    for i, gas in enumerate(section["gases"] if gas_models else []):
        omega = gas_omega(gas)
        if not OMEGA_RANGE[0] <= omega <= OMEGA_RANGE[1]:
            raise ValueError(
                f"gases[{i}]: gas {gas} has omega = {omega:g} (config/gases.yaml); model {gas_models[0]} takes "
                f"omega in [{OMEGA_RANGE[0]:g}, {OMEGA_RANGE[1]:g}]"
            )


def point_values(
    geometry: tuple[str, str, float],
    problem: str,
    model: str,
    delta: float,
    wall: dict[str, Any],
    resolution: dict[str, Any],
    gas: str | None = None,
) -> dict[str, Any]:
    """Canonical values of one point (a study's grid and ``knudsweep solve`` both build them here).

    ``geometry``: ``(label, shape, aspect_ratio)`` as :func:`geometry_of` gives it; ``wall``: canonical wall law
    (:func:`knudsweep.families.wall_params`); ``resolution``: ``n_space``, ``n_velocity``, ``tol``, ``accuracy``;
    ``gas``: the gas of a model in GAS_MODELS (its values then carry ``gas`` and ``omega``), ignored otherwise.
    """
    label, shape, aspect = geometry
    values = {
        "geometry": label,
        "shape": shape,
        "aspect_ratio": aspect,
        "problem": problem,
        "model": model,
        "delta": canonical(delta),
        "wall": wall_label(wall),
        "wall_params": wall,
        **resolution_values(resolution),
        **gas_values(model, gas),
    }
    return values


def points(section: dict[str, Any]) -> list[Point]:
    res = section["resolution"]
    grid = grid_label(section)
    out = []
    for glabel, shape, aspect in geometry_settings(section):
        for problem in section["problems"]:
            for mlabel, model, gas in model_entries(section):
                gas_segment = [] if gas is None else [segment("gas", gas)]
                for wlabel, w in wall_settings(section):
                    for delta in delta_values(section):
                        pid = point_id(
                            NAME,
                            [
                                segment("", glabel),
                                segment("", problem),
                                segment("model", model),
                                *gas_segment,
                                segment("wall", wlabel),
                                segment("grid", grid),
                                segment("delta", format_exp(delta)),
                            ],
                        )
                        values = point_values((glabel, shape, aspect), problem, model, delta, w, res, gas)
                        index = {
                            "geometry": glabel,
                            "problem": problem,
                            "model": mlabel,
                            "wall": wlabel,
                            "delta": delta,
                        }
                        out.append(Point(NAME, pid, values, index))
    return out


def peak_memory_mb(section: dict[str, Any]) -> tuple[float, str]:
    """The duct's distribution dominates (tube points need well under 100 MB)."""
    from knudsweep.solver.duct import duct_memory_mb

    res = section.get("resolution", {})
    best = (0.0, "")
    for label, shape, a in geometry_settings(section):
        if shape != "duct":
            continue
        for d in delta_values(section):
            mb = duct_memory_mb(d, a, res.get("n_space"), res.get("n_velocity"), res.get("accuracy"))
            if mb > best[0]:
                best = (
                    mb,
                    f"{label}, delta = {d:g}, n_space = {res.get('n_space')}, n_velocity = {res.get('n_velocity')}",
                )
    return best


# Linearized Boltzmann tube point (solve plus the coarse solve of the estimate, one thread, operator cached, best
# of two): hard spheres on the default grid 1.79, 0.94, 2.42, 1.62 s at delta 0.1, 1, 10, 100 (21, 21, 41, 41
# radial nodes; 12, 8, 8, 8 speeds; 9-36 iterations); at delta = 1 with 11, 21, 41 nodes 0.30, 0.94, 3.6 s (8 speeds)
# and 0.08, 0.20, 0.73 s (4 speeds): about n_space^1.7 x n_velocity^2, the iteration count left out (measured)
TUBE_BOLTZMANN_SECONDS = 0.95  # at 21 radial nodes and 8 speeds
# VHS argon: 24 and 44 iterations against 21 and 36 for hard spheres at delta 1 and 10 (1.1, 2.9 s); its operator
# build (4 s for 8 speeds, cached per worker and omega) is not in the point cost
VHS_FACTOR = 1.2


def point_cost(values: dict[str, Any]) -> float:
    """Seconds per point, measured on the demo grids (n_velocity 8, solver-default space grid):
    tube 0.08-0.2 s with Maxwell walls, up to 0.8 s with Cercignani-Lampis walls at small
    delta; duct 0.06 sqrt(A) (n_y / 25)^2 (n_velocity / 8)^2 s with n_y the nodes across the half
    height (benchmarks/bench_tube_duct.py --points-only, 12 speeds: 0.3-0.5 s at delta 0.1, 1.3-4.2 s
    at 10, 3.7-13.6 s at 100 for A = 1-20; the formula is within 1.5x of each).
    Linearized Boltzmann (tube): TUBE_BOLTZMANN_SECONDS x (n_space / 21)^1.7 x (n_velocity / 8)^2, the solver's
    default sizes where not given, times VHS_FACTOR for VHS."""
    if values.get("model") in BOLTZMANN_MODELS:
        from knudsweep.solver.tube.boltzmann_driver import default_sizes

        ns, nv = default_sizes(values["delta"])
        ns, nv = values.get("n_space") or ns, values.get("n_velocity") or nv
        cost = TUBE_BOLTZMANN_SECONDS * (ns / 21.0) ** 1.7 * (nv / 8.0) ** 2
        if values["model"] in GAS_MODELS:
            cost *= VHS_FACTOR
        return cost * (4.0 if values.get("accuracy") is not None else 1.0)
    nv = (values.get("n_velocity") or 8) / 8.0
    cl = 3.0 if values["wall_params"]["model"] == "cercignani_lampis" else 1.0
    if values["shape"] == "tube":
        cost = 0.2 * cl * nv**2
    else:
        from knudsweep.solver.duct import default_sizes as duct_default_sizes

        ny = values.get("n_space") or duct_default_sizes(values["delta"], values["aspect_ratio"])[0]
        cost = 0.06 * cl * math.sqrt(values["aspect_ratio"]) * (ny / 25.0) ** 2 * nv**2
    if values.get("accuracy") is not None:
        cost *= 4.0
    return cost


def gather_dims(section: dict[str, Any]) -> dict[str, list]:
    return {
        "geometry": [g for g, _, _ in geometry_settings(section)],
        "problem": list(section["problems"]),
        "model": model_labels(section),
        "wall": [w for w, _ in wall_settings(section)],
        "delta": delta_values(section),
    }


def dim_attrs(section: dict[str, Any]) -> dict[str, dict]:
    geos = geometry_settings(section)
    walls = wall_settings(section)
    deltas = delta_values(section)

    def acc(w, key):
        return float(w[key]) if key in w else float("nan")

    return {
        "geometry": {
            "attrs": {"long_name": "channel cross-section"},
            "extra": {
                "shape": ([s for _, s, _ in geos], {"long_name": "tube or rectangular duct"}),
                "aspect_ratio": (
                    [a for _, _, a in geos],
                    {"units": "1", "long_name": "duct width / height (1 for the tube)"},
                ),
            },
        },
        "problem": {"attrs": {"long_name": "driving problem"}},
        "model": {"attrs": {"long_name": model_long_name(section)}, **model_gas_coordinates(section)},
        "wall": {
            "attrs": {"long_name": "gas-surface interaction setting"},
            "extra": {
                "wall_model": ([w["model"] for _, w in walls], {"long_name": "wall model"}),
                "alpha": (
                    [acc(w, "alpha") for _, w in walls],
                    {"units": "1", "long_name": "Maxwell accommodation coefficient"},
                ),
                "alpha_t": (
                    [acc(w, "alpha_t") for _, w in walls],
                    {"units": "1", "long_name": "Cercignani-Lampis tangential-momentum accommodation"},
                ),
                "alpha_n": (
                    [acc(w, "alpha_n") for _, w in walls],
                    {"units": "1", "long_name": "Cercignani-Lampis normal-energy accommodation"},
                ),
            },
        },
        "delta": {
            "attrs": {
                "units": "1",
                "long_name": "rarefaction parameter delta = p a / (mu v0), a = tube radius or duct height",
            },
            "extra": {
                "kn": (
                    [canonical(SQRT_PI / (2.0 * d)) for d in deltas],
                    {"units": "1", "long_name": "Knudsen number sqrt(pi) / (2 delta)"},
                )
            },
        },
    }


def model_long_name(section: dict[str, Any]) -> str:
    """long_name of the ``model`` coordinate (unchanged for studies with model equations only)."""
    if any(m in BOLTZMANN_MODELS for m in section["models"]):
        return "kinetic model: model equation or linearized Boltzmann equation"
    return "kinetic model equation"


def coefficient_attrs(section: dict[str, Any]) -> dict[str, dict]:
    """Attributes of the gathered flow rates: one variable holds tube and duct values, each
    geometry with its own normalisation (knudsweep.solver.tube, knudsweep.solver.duct), so both are named."""
    out = {}
    for name, what, drive, tube, duct in (
        ("G_P", "mass", "pressure gradient X_P", "4 int u r dr", "(2/A) int int u dy dz"),
        ("Q_P", "heat", "pressure gradient X_P", "-4 int q r dr", "-(2/A) int int q dy dz"),
        ("G_T", "mass", "temperature gradient X_T", "4 int u r dr", "(2/A) int int u dy dz"),
        ("Q_T", "heat", "temperature gradient X_T", "-4 int q r dr", "-(2/A) int int q dy dz"),
    ):
        out[name] = {
            "units": "1",
            "long_name": (
                f"reduced {what} flow rate per unit {drive}; tube: {tube} (r in units of the radius); "
                f"duct: per unit width, {duct} (y, z in units of the height, A = width / height)"
            ),
        }
    return out
