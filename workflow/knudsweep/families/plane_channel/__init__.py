"""Plane-channel family: fully developed flow between parallel plates.

:mod:`.grid` turns the study section into points (values, identity, cost),
:mod:`.report` builds the tables, figures and captions from the gathered
sweep; this module holds the :class:`knudsweep.families.Family` that wires them
to the solver (``knudsweep.solver.plane_channel``).
"""

from __future__ import annotations

from typing import Any

from knudsweep.families import Family
from knudsweep.families.plane_channel import grid, report
from knudsweep.families.plane_channel.grid import (
    BOLTZMANN_MODELS,
    BOLTZMANN_PROBLEMS,
    GAS_MODELS,
    MODEL_EQUATIONS,
    MODELS,
    PROBLEMS,
    make_wall_objects,
    wall_label,
    wall_settings,
)

__all__ = [
    "BOLTZMANN_MODELS",
    "GAS_MODELS",
    "BOLTZMANN_PROBLEMS",
    "FAMILY",
    "MODEL_EQUATIONS",
    "MODELS",
    "PROBLEMS",
    "PlaneChannel",
    "wall_label",
    "wall_settings",
]


class PlaneChannel(Family):
    name = grid.NAME
    grid = grid
    report = report

    def solve(self, values: dict[str, Any], *, max_iter: int | None, section: dict[str, Any]):
        from knudsweep.solver.plane_channel import solve_plane_channel

        lower, upper = make_wall_objects(values)
        accelerate = bool(section.get("iteration", {}).get("accelerate", True))
        if values["model"] in BOLTZMANN_MODELS:
            from knudsweep.solver.kinetic_models import BOLTZMANN_MODELS as MOLECULE_OF
            from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann

            # the molecule from the registry; a VHS point carries its gas's omega (grid.point_values)
            return solve_plane_channel_boltzmann(
                values["problem"],
                delta=values["delta"],
                molecule=MOLECULE_OF[values["model"]],
                omega=values.get("omega"),
                lower_wall=lower,
                upper_wall=upper,
                n_space=values["n_space"],
                n_velocity=values["n_velocity"],
                max_iter=max_iter,
                tol=values["tol"],
                accuracy=values.get("accuracy"),
                accelerate=accelerate,
            )
        return solve_plane_channel(
            values["problem"],
            delta=values["delta"],
            model=values["model"],
            lower_wall=lower,
            upper_wall=upper,
            n_space=values["n_space"],
            n_velocity=values["n_velocity"],
            max_iter=max_iter,
            tol=values["tol"],
            accuracy=values.get("accuracy"),
            accelerate=accelerate,
        )

    def warm_up(self) -> None:
        from knudsweep.solver.plane_channel import solve_plane_channel
        from knudsweep.solver.plane_channel.boltzmann_driver import solve_plane_channel_boltzmann
        from knudsweep.solver.walls import MaxwellWall

        # Tiny problems that go through every kernel once, so numba writes its cache.
        for problem in PROBLEMS:
            for model in MODEL_EQUATIONS:
                solve_plane_channel(
                    problem,
                    delta=1.0,
                    model=model,
                    lower_wall=MaxwellWall(0.9),
                    n_space=8,
                    n_velocity=8,
                    max_iter=5,
                    tol=1e-3,
                )
        for problem in BOLTZMANN_PROBLEMS:
            for molecule, omega in (("hard_sphere", None), ("vhs", 0.81)):  # 0.81: any omega in (0.5, 1]
                solve_plane_channel_boltzmann(
                    problem,
                    delta=1.0,
                    molecule=molecule,
                    omega=omega,
                    lower_wall=MaxwellWall(0.9),
                    n_space=8,
                    n_velocity=4,
                    max_iter=5,
                    tol=1e-3,
                )


FAMILY = PlaneChannel()
