"""Checks parametrised over the registries: a newly registered model, wall law, geometry or relaxation method is
tested here without editing a test list.

Registries read:

* kinetic models: ``knudsweep.solver.kinetic_models`` (``MODEL_NAMES``; ``BOLTZMANN_MODELS`` for the plane channel,
  which solves them for Poiseuille and thermal creep with Maxwell walls only);
* wall laws: the members of ``knudsweep.solver.walls.Wall``, each with its ``kind`` and its accommodation fields;
* channel geometries: the plane channel and every ``shape`` of the study schema's tube/duct section;
* relaxation methods: ``knudsweep.solver.relaxation.METHODS``.

Channel points are built and solved through the study layer (``validate_study``, the family's ``points`` and
``solve``), the path a study point takes, on small grids.  Checks and their basis:

* reciprocity Q_P = G_T (Onsager, Phys. Rev. 37 (1931) 405; for these flows Sharipov, J. Stat. Phys. 78 (1995) 413);
  the discrete schemes keep it up to their truncation error, so the bar is HONEST times the solver's own error
  estimates of the two coefficients;
* free-molecular G_P with diffuse walls (delta = 0, tube and duct): the collision term vanishes, so every model gives
  the same numbers, and they equal the closed forms of ``knudsweep.solver.limits`` (tube: Knudsen, Ann. Phys. 28
  (1909) 75; duct: the chord integral derived in ``limits.free_molecular_flow_rate``) within HONEST times the error
  estimate.  (The plane channel's G_P diverges like -ln(delta)/sqrt(pi) there; tests/verification/
  test_plane_channel_limits.py checks that slope.);
* a wall law at full accommodation (its default parameters) re-emits the wall Maxwellian: the same G_P as the diffuse
  Maxwell wall (Maxwell, Phil. Trans. R. Soc. 170 (1879) 231; Cercignani & Lampis, Transp. Theory Stat. Phys. 1
  (1971) 101), to round-off;
* every model, wall law, geometry and method name is accepted by the study schema and by ``knudsweep solve``;
* every relaxation method keeps a Maxwellian a Maxwellian: it is the equilibrium of the Boltzmann equation and of
  the model equations (Cercignani, The Boltzmann Equation and Its Applications, Springer 1988, Ch. II), and the
  discrete methods are built to keep it (Mieussens, J. Comput. Phys. 162 (2000) 429; the fast spectral method's
  equilibrium-preserving form, knudsweep.solver.relaxation.fast_spectral).
"""

from __future__ import annotations

import dataclasses
import functools
import json
import math
import typing

import numpy as np
import pytest
from precision import HONEST, ROUND_OFF, ROUND_OFF_SUM, STANDARD_ERRORS

from knudsweep.cli import main
from knudsweep.config import schema_node, validate_study
from knudsweep.families import get_family
from knudsweep.families.tube_duct.grid import BOLTZMANN_SHAPES
from knudsweep.solver import kinetic_models as km
from knudsweep.solver import limits, walls
from knudsweep.solver.relaxation import METHODS, solve_relaxation

# --- what the registries hold --------------------------------------------------------------------------------------

WALL_LAWS = typing.get_args(walls.Wall)
GEOMETRIES = [("plane_channel", None)] + [
    ("tube_duct", shape) for shape in schema_node("tube_duct", "geometries", "items", "shape")["enum"]
]
FREE_MOLECULAR = {  # closed forms of knudsweep.solver.limits, diffuse walls, aspect ratio 1 for a duct
    "tube": limits.G_P_FREE_MOLECULAR_TUBE,
    "duct": limits.free_molecular_flow_rate(1.0),
}
PARTIAL = 0.7  # accommodation of the partly accommodating walls of the reciprocity check
DELTA = 1.0


def geometry_id(geometry) -> str:
    return geometry[1] or geometry[0]


def case_id(value) -> str:
    """Test id of a parameter: a geometry's name, a wall law's kind, a model's name."""
    if isinstance(value, tuple):
        return geometry_id(value)
    return getattr(value, "kind", value)


def models_of(geometry) -> list[str]:
    # the linearized Boltzmann equations: plane channel and tube (families/tube_duct BOLTZMANN_SHAPES)
    extra = list(km.BOLTZMANN_MODELS) if geometry[0] == "plane_channel" or geometry[1] in BOLTZMANN_SHAPES else []
    return [*km.MODEL_NAMES, *extra]


def walls_of(model: str) -> list[type]:
    # the linearized Boltzmann equations take Maxwell walls only (kinetic_models.BOLTZMANN_MODELS)
    return [walls.MaxwellWall] if model in km.BOLTZMANN_MODELS else list(WALL_LAWS)


def wall_spec(law: type, accommodation: float | None) -> dict:
    """The study's wall entry of ``law``: every accommodation field at ``accommodation`` (None: the law's defaults)."""
    defaults = law()
    params = {
        f.name: getattr(defaults, f.name) if accommodation is None else accommodation for f in dataclasses.fields(law)
    }
    return {"model": law.kind, **params}


CASES = [(g, m) for g in GEOMETRIES for m in models_of(g)]
WALL_CASES = [(g, m, w) for g, m in CASES for w in walls_of(m)]


def _sizes(family: str, model: str) -> dict:
    if model in km.BOLTZMANN_MODELS:
        return {"n_space": 16, "n_velocity": 4}  # speed nodes
    return {"n_space": 16, "n_velocity": 8} if family == "plane_channel" else {"n_space": 9, "n_velocity": 6}


def _section(geometry, problem: str, model: str, wall: dict, delta: float) -> dict:
    family, shape = geometry
    section = {
        "problems": [problem],
        "models": [model],
        "walls": [wall],
        "delta": [delta],
        "resolution": {**_sizes(family, model), "tol": 1e-8},
    }
    section["gases"] = ["Ar"]  # a VHS Boltzmann model takes its viscosity index from the gas
    if family != "plane_channel":
        section["geometries"] = [{"shape": shape}]
    return section


@functools.cache
def _solve(geometry, problem: str, model: str, wall_items: tuple, delta: float):
    """One point through the study layer; delta = 0 (free molecular, below a study axis) is set on the point's values."""
    family = geometry[0]
    study = validate_study({"study": "registry", family: _section(geometry, problem, model, dict(wall_items), 1.0)})
    fam = get_family(family)
    (point,) = fam.points(study[family])
    values = {**point.values, "delta": delta} if delta != 1.0 else point.values
    return fam.solve(values, max_iter=None, section=study[family])


def solve(geometry, problem, model, wall: dict, delta: float = DELTA):
    return _solve(geometry, problem, model, tuple(wall.items()), delta)


# --- channel geometries x kinetic models x wall laws ----------------------------------------------------------------


@pytest.mark.parametrize(("geometry", "model", "law"), WALL_CASES, ids=case_id)
def test_reciprocity_for_every_model_and_wall(geometry, model, law):
    wall = wall_spec(law, PARTIAL)
    qp = solve(geometry, "poiseuille", model, wall)
    gt = solve(geometry, "thermal_creep", model, wall)
    assert qp.status == gt.status == "converged", (qp.convergence.reason, gt.convergence.reason)
    diff = abs(qp.coefficient("Q_P") - gt.coefficient("G_T"))
    bound = HONEST * (qp.coefficient("Q_P_error_estimate") + gt.coefficient("G_T_error_estimate"))
    print(f"\n{geometry_id(geometry)} {model} {law.kind}: |Q_P - G_T| {diff:.2e}, bar {bound:.2e}")
    assert diff <= bound
    assert math.isfinite(qp.coefficient("Q_P")) and gt.coefficient("G_T") > 0.0


@pytest.mark.parametrize(("geometry", "model", "law"), WALL_CASES, ids=case_id)
def test_full_accommodation_is_the_diffuse_wall(geometry, model, law):
    full = solve(geometry, "poiseuille", model, wall_spec(law, None))
    diffuse = solve(geometry, "poiseuille", model, wall_spec(walls.MaxwellWall, 1.0))
    assert walls.is_diffuse(law())
    assert full.status == diffuse.status == "converged"
    assert full.coefficient("G_P") == pytest.approx(diffuse.coefficient("G_P"), rel=ROUND_OFF)


@pytest.mark.parametrize("geometry", [g for g in GEOMETRIES if g[0] != "plane_channel"], ids=geometry_id)
def test_free_molecular_flow_rate_is_the_closed_form_for_every_model(geometry):
    diffuse = wall_spec(walls.MaxwellWall, 1.0)
    results = {m: solve(geometry, "poiseuille", m, diffuse, 0.0) for m in km.MODEL_NAMES}
    assert all(r.status == "converged" for r in results.values())
    first = results[km.MODEL_NAMES[0]]
    for model, r in results.items():
        # the collision term is multiplied by delta = 0: the same numbers whatever the model
        assert r.coefficient("G_P") == pytest.approx(first.coefficient("G_P"), rel=ROUND_OFF), model
    exact = FREE_MOLECULAR[geometry[1]]  # a new geometry: add its closed form to limits.py and to FREE_MOLECULAR
    error = abs(first.coefficient("G_P") - exact)
    print(
        f"\n{geometry_id(geometry)}: G_P(0) {first.coefficient('G_P'):.8f}, closed form {exact:.8f}, error {error:.1e}"
    )
    assert error <= HONEST * first.coefficient("G_P_error_estimate")


# --- names accepted by the study schema and the command line -------------------------------------------------------


@pytest.mark.parametrize(("geometry", "model"), CASES, ids=case_id)
def test_every_model_is_accepted_by_the_schema_and_the_cli(geometry, model, capsys):
    section = _section(geometry, "poiseuille", model, wall_spec(walls.MaxwellWall, 1.0), DELTA)
    assert validate_study({"study": "registry", geometry[0]: section})[geometry[0]]["models"] == [model]
    sizes = _sizes(geometry[0], model)
    argv = ["solve", "--geometry", geometry[1] or "plane_channel", "--model", model, "--delta", "1", "--json"]
    argv += ["--n-space", str(sizes["n_space"]), "--n-velocity", str(sizes["n_velocity"]), "--tol", "1e-6"]
    assert main(argv) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["status"] == "converged" and summary["coefficients"]["G_P"] > 0.0


@pytest.mark.parametrize("law", WALL_LAWS, ids=lambda law: law.kind)
def test_every_wall_law_is_accepted_by_the_schema_and_the_cli(law, capsys):
    wall = wall_spec(law, PARTIAL)
    for geometry in GEOMETRIES:
        section = _section(geometry, "poiseuille", "bgk", wall, DELTA)
        study = validate_study({"study": "registry", geometry[0]: section})
        assert study[geometry[0]]["walls"][0]["model"] == law.kind
        argv = ["solve", "--geometry", geometry[1] or "plane_channel", "--wall-model", law.kind, "--delta", "1"]
        argv += [f"--{f.name.replace('_', '-')}={PARTIAL}" for f in dataclasses.fields(law)]
        argv += ["--n-space", "9", "--n-velocity", "6", "--tol", "1e-6", "--json"]
        assert main(argv) == 0, capsys.readouterr().err
        assert json.loads(capsys.readouterr().out)["status"] == "converged"


@pytest.mark.parametrize("method", METHODS)
def test_every_relaxation_method_is_accepted_by_the_schema_and_the_cli(method, capsys):
    section = {"initial_states": ["equilibrium"], "methods": [method]}
    assert validate_study({"study": "registry", "relaxation": section})["relaxation"]["methods"] == [method]
    argv = ["solve", "--family", "relaxation", "--method", method, "--initial-state", "equilibrium", "--json"]
    argv += ["--t-end", "1", "--n-output", "3", "--molecular-model", "maxwell"]
    argv += ["--n-particles", "2000", "--h-bins-per-axis", "2"] if method == "dsmc" else ["--n-velocity", "16"]
    assert main(argv) == 0, capsys.readouterr().err
    assert json.loads(capsys.readouterr().out)["status"] == "converged"


# --- relaxation methods ---------------------------------------------------------------------------------------------

REPLICAS = 4


@pytest.mark.parametrize("method", METHODS)
def test_every_relaxation_method_keeps_a_maxwellian(method):
    kw = dict(method=method, initial_state="equilibrium", molecular_model="maxwell", t_end=2.0, n_output=5, seed=7)
    if method == "dsmc":
        kw.update(n_particles=2000, n_replicas=REPLICAS, h_bins_per_axis=2)
    else:
        kw.update(n_velocity=16)
    r = solve_relaxation(**kw)
    assert r.status == "converged", r.convergence.reason
    # The observables at every output time against their values at t = 0 (the discrete start, whose moments carry
    # the grid's own small error): equal within the replicas' noise (DSMC) or round-off (deterministic methods).
    for name, scale in (("fourth_moment", 15.0), ("anisotropy", 1.0), ("heat_flux_x", 1.0)):
        value = r.profiles[name].value
        se = r.profiles[f"{name}_std"].value / math.sqrt(REPLICAS)
        bar = STANDARD_ERRORS * np.hypot(se, se[0]) + ROUND_OFF * scale
        assert np.all(np.abs(value - value[0]) <= bar), (name, value)
    f = r.profiles["velocity_distribution_x"].value
    se = r.profiles["velocity_distribution_x_std"].value / math.sqrt(REPLICAS)
    bar = STANDARD_ERRORS * np.hypot(se[-1], se[0]) + ROUND_OFF_SUM * f[0].max()
    assert np.all(np.abs(f[-1] - f[0]) <= bar)
