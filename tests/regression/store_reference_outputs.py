"""Write the stored reference outputs of the regression test (tests/regression/test_reference_outputs.py).

Run this only after an intended change of answers:

    .venv/bin/python tests/regression/store_reference_outputs.py [family ...]

then raise the version (``solver/__init__.py`` and ``pyproject.toml``), and commit the JSON files with a message saying
that answers changed, which ones and why.  Without arguments every family is written; give family names to write only
those (e.g. ``tube_duct``).

Each family has a handful of points (study sections of one point each) mixing problems, models, wall laws and delta
from 0.01 to 100 (relaxation: methods, molecular models and initial states, DSMC with a fixed seed).  They are
solved through the study layer, the path a study point takes: ``validate_study``, the family's ``points`` and
``solve``.  The JSON file holds, per point, the section, the point's id and values, the solver's discretization and
every coefficient to 15 significant digits, plus the code version and when it was written.
"""

from __future__ import annotations

import datetime
import json
import math
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
REFERENCE_DIR = HERE / "reference_outputs"
DIGITS = 15

# Channel points are iterated to tol 1e-12 on the solvers' default grids (with their error estimates); the tube
# points on a fixed grid of 17 radial nodes and 12 speeds, a third of the cost of its default grid.
_CHANNEL_TOL = 1e-12
_TUBE_RESOLUTION = {"n_space": 17, "n_velocity": 12, "tol": _CHANNEL_TOL}

POINTS: dict[str, list[dict]] = {
    "plane_channel": [
        {
            "problems": ["poiseuille"],
            "models": ["bgk"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [0.01],
        },
        {
            "problems": ["thermal_creep"],
            "models": ["s_model"],
            "walls": [{"model": "cercignani_lampis", "alpha_t": 0.8, "alpha_n": 0.5}],
            "delta": [1.0],
        },
        {
            "problems": ["poiseuille"],
            "models": ["es_bgk"],
            "walls": [{"model": "maxwell", "alpha": 0.8}],
            "delta": [100.0],
        },
        {
            "problems": ["heat_transfer"],
            "models": ["s_model"],
            "walls": [{"model": "maxwell", "alpha": 0.9}],
            "delta": [10.0],
        },
    ],
    "tube_duct": [
        {
            "geometries": [{"shape": "tube"}],
            "resolution": _TUBE_RESOLUTION,
            "problems": ["poiseuille"],
            "models": ["bgk"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [0.01],
        },
        {
            "geometries": [{"shape": "tube"}],
            "resolution": _TUBE_RESOLUTION,
            "problems": ["thermal_creep"],
            "models": ["s_model"],
            "walls": [{"model": "cercignani_lampis", "alpha_t": 0.8, "alpha_n": 0.5}],
            "delta": [1.0],
        },
        {
            "geometries": [{"shape": "duct", "aspect_ratio": 2.0}],
            "problems": ["poiseuille"],
            "models": ["es_bgk"],
            "walls": [{"model": "maxwell", "alpha": 0.9}],
            "delta": [0.1],
        },
        {
            "geometries": [{"shape": "duct", "aspect_ratio": 1.0}],
            "problems": ["thermal_creep"],
            "models": ["bgk"],
            "walls": [{"model": "maxwell", "alpha": 1.0}],
            "delta": [10.0],
        },
    ],
    "relaxation": [
        {
            "initial_states": ["anisotropic"],
            "molecular_models": ["maxwell"],
            "methods": ["bgk"],
            "run": {"t_end": 4.0, "n_output": 9, "n_velocity": 16},
        },
        {
            "initial_states": ["two_beams"],
            "molecular_models": ["hard_sphere"],
            "methods": ["s_model"],
            "run": {"t_end": 4.0, "n_output": 9, "n_velocity": 16},
        },
        {
            "initial_states": ["anisotropic"],
            "molecular_models": ["vhs"],
            "methods": ["es_bgk"],
            "run": {"t_end": 4.0, "n_output": 9, "n_velocity": 16},
        },
        {
            "initial_states": ["anisotropic"],
            "molecular_models": ["maxwell"],
            "methods": ["fast_spectral"],
            "run": {"t_end": 2.0, "n_output": 5, "n_velocity": 16},
        },
        {
            "initial_states": ["bkw"],
            "state_options": {"bkw_start_time": 6.0},
            "molecular_models": ["maxwell"],
            "methods": ["dsmc"],
            "n_particles": [2000],
            "run": {"t_end": 4.0, "n_output": 9, "n_replicas": 4, "seed": 11, "h_bins_per_axis": 2},
        },
    ],
}


def full_section(family: str, section: dict) -> dict:
    """The stored section with the settings every point of the family shares."""
    if family == "relaxation":
        return {"gases": ["Ar"], "pressures": [100.0], "temperatures": [300.0], **section}
    return {"resolution": {"n_space": None, "n_velocity": None, "tol": _CHANNEL_TOL}, **section}


def solve_section(family: str, section: dict):
    """(point, result) of a one-point study section, solved as a study solves it."""
    from knudsweep.config import validate_study
    from knudsweep.families import get_family

    study = validate_study({"study": "regression", family: section})
    fam = get_family(family)
    (point,) = fam.points(study[family])
    return point, fam.solve(point.values, max_iter=None, section=study[family])


def rounded(x: float) -> float | None:
    """``x`` to DIGITS significant digits (None for NaN, which JSON cannot hold)."""
    x = float(x)
    return None if math.isnan(x) else float(format(x, f".{DIGITS - 1}e"))


def record(family: str, section: dict) -> dict:
    point, result = solve_section(family, section)
    if result.status != "converged":
        raise RuntimeError(f"{point.pid}: {result.status} ({result.convergence.reason}); not a reference")
    return {
        "section": section,
        "point_id": point.pid,
        "point_values": point.values,
        "discretization": json.loads(json.dumps(result.discretization, default=str)),
        "iterations": int(result.convergence.iterations),
        "coefficients": {name: rounded(q.value) for name, q in result.coefficients.items()},
    }


def store(family: str) -> Path:
    from knudsweep.solver import __version__

    data = {
        "family": family,
        "code_version": __version__,
        "written_utc": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "digits": DIGITS,
        "written_by": "tests/regression/store_reference_outputs.py",
        "points": [record(family, full_section(family, s)) for s in POINTS[family]],
    }
    REFERENCE_DIR.mkdir(exist_ok=True)
    path = REFERENCE_DIR / f"{family}.json"
    path.write_text(json.dumps(data, indent=1) + "\n")
    return path


def main(argv: list[str]) -> int:
    families = argv or list(POINTS)
    unknown = [f for f in families if f not in POINTS]
    if unknown:
        print(f"family: unknown {', '.join(unknown)}; known families are {', '.join(POINTS)}", file=sys.stderr)
        return 2
    for family in families:
        print(f"wrote {store(family)}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
