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
    MODEL_EQUATIONS,
    MODELS,
    PROBLEMS,
    make_wall_objects,
    wall_label,
    wall_settings,
)

__all__ = [
    "BOLTZMANN_MODELS",
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
            accelerate=bool(section.get("iteration", {}).get("accelerate", True)),
        )

    def warm_up(self) -> None:
        from knudsweep.solver.plane_channel import solve_plane_channel
        from knudsweep.solver.walls import MaxwellWall

        # Tiny problems that go through every kernel once, so numba writes its cache.
        for problem in PROBLEMS:
            for model in MODELS:
                if model in BOLTZMANN_MODELS and problem not in BOLTZMANN_PROBLEMS:
                    continue
                solve_plane_channel(
                    problem,
                    delta=1.0,
                    model=model,
                    lower_wall=MaxwellWall(0.9),
                    n_space=8,
                    n_velocity=4 if model in BOLTZMANN_MODELS else 8,
                    max_iter=5,
                    tol=1e-3,
                    accelerate=model in BOLTZMANN_MODELS,
                )


FAMILY = PlaneChannel()
