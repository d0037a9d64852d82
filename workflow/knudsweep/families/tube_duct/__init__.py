"""Tube and rectangular-duct family: fully developed flow through long channels.

:mod:`.grid` turns the study section into points (values, identity, cost),
:mod:`.report` builds the tables, figures and captions from the gathered
sweep; this module holds the :class:`knudsweep.families.Family` that wires them
to the solvers (``knudsweep.solver.tube``, ``knudsweep.solver.duct``, and for the
linearized Boltzmann models in the tube ``knudsweep.solver.tube.boltzmann_driver``).
"""

from __future__ import annotations

from typing import Any

from knudsweep.families import Family, make_wall_object
from knudsweep.families.tube_duct import grid, report
from knudsweep.families.tube_duct.grid import (
    BOLTZMANN_MODELS,
    BOLTZMANN_SHAPES,
    GAS_MODELS,
    MODEL_EQUATIONS,
    MODELS,
    PROBLEMS,
    delta_values,
    geometry_of,
    geometry_settings,
    wall_label,
    wall_settings,
)

__all__ = [
    "BOLTZMANN_MODELS",
    "BOLTZMANN_SHAPES",
    "FAMILY",
    "GAS_MODELS",
    "MODEL_EQUATIONS",
    "MODELS",
    "PROBLEMS",
    "TubeDuct",
    "delta_values",
    "geometry_of",
    "geometry_settings",
    "wall_label",
    "wall_settings",
]


class TubeDuct(Family):
    name = grid.NAME
    grid = grid
    report = report

    def coefficient_attrs(self, section: dict[str, Any]) -> dict[str, dict]:
        return grid.coefficient_attrs(section)

    def solve(self, values: dict[str, Any], *, max_iter: int | None, section: dict[str, Any]):
        accelerate = bool(section.get("iteration", {}).get("accelerate", True))
        if values["model"] in BOLTZMANN_MODELS:
            from knudsweep.solver.kinetic_models import BOLTZMANN_MODELS as MOLECULE_OF
            from knudsweep.solver.tube.boltzmann_driver import solve_tube_boltzmann

            # the molecule from the registry; a VHS point carries its gas's omega (grid.point_values); the study
            # check keeps Boltzmann models to the tube with Maxwell walls
            return solve_tube_boltzmann(
                values["problem"],
                delta=values["delta"],
                molecule=MOLECULE_OF[values["model"]],
                omega=values.get("omega"),
                wall=make_wall_object(values["wall_params"]),
                n_space=values["n_space"],
                n_velocity=values["n_velocity"],
                max_iter=max_iter,
                tol=values["tol"],
                accuracy=values.get("accuracy"),
                accelerate=accelerate,
            )
        kw = dict(
            delta=values["delta"],
            model=values["model"],
            wall=make_wall_object(values["wall_params"]),
            n_space=values["n_space"],
            n_velocity=values["n_velocity"],
            max_iter=max_iter,
            tol=values["tol"],
            accuracy=values.get("accuracy"),
            accelerate=accelerate,
        )
        if values["shape"] == "tube":
            from knudsweep.solver.tube import solve_tube

            return solve_tube(values["problem"], **kw)
        from knudsweep.solver.duct import solve_duct

        return solve_duct(values["problem"], aspect_ratio=values["aspect_ratio"], **kw)

    def warm_up(self) -> None:
        """Tiny problems through every kernel once, so numba writes its cache (once per cache: the hook has no
        study, so the linearized Boltzmann kernels are always compiled; fresh cache measured 14 s for the model
        equations plus 11 s for the tube's Boltzmann kernels, 2 s with a warm cache)."""
        from knudsweep.solver.duct import solve_duct
        from knudsweep.solver.tube import solve_tube
        from knudsweep.solver.tube.boltzmann_driver import solve_tube_boltzmann
        from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

        for wall in (MaxwellWall(0.9), CercignaniLampisWall(0.8, 0.5)):
            for problem in PROBLEMS:
                solve_tube(problem, delta=1.0, wall=wall, n_space=6, n_velocity=4, max_iter=3, tol=1e-3)
                solve_duct(
                    problem, delta=1.0, aspect_ratio=1.5, wall=wall, n_space=6, n_velocity=4, max_iter=3, tol=1e-3
                )
        for problem in PROBLEMS:
            for molecule, omega in (("hard_sphere", None), ("vhs", 0.81)):  # 0.81: any omega in (0.5, 1]
                solve_tube_boltzmann(
                    problem,
                    delta=1.0,
                    molecule=molecule,
                    omega=omega,
                    wall=MaxwellWall(0.9),
                    n_space=6,
                    n_velocity=4,
                    max_iter=3,
                    tol=1e-3,
                )


FAMILY = TubeDuct()
