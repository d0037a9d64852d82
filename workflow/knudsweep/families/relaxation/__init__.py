"""Relaxation family: a space-homogeneous gas relaxing to equilibrium.

:mod:`.grid` turns the study section into points (values, identity, cost),
:mod:`.report` builds the tables, figures and captions from the gathered
sweep; this module holds the :class:`knudsweep.families.Family` that wires them
to the solver (``knudsweep.solver.relaxation``).
"""

from __future__ import annotations

from typing import Any

from knudsweep.families import Family
from knudsweep.families.relaxation import grid, report
from knudsweep.families.relaxation.grid import (
    BOLTZMANN,
    METHODS,
    MODEL_EQUATIONS,
    MODELS,
    MOLECULAR_MODELS,
    STATE_DEFAULTS,
    STATES,
    solver_labels,
)

__all__ = [
    "BOLTZMANN",
    "FAMILY",
    "METHODS",
    "MODELS",
    "MODEL_EQUATIONS",
    "MOLECULAR_MODELS",
    "STATES",
    "STATE_DEFAULTS",
    "Relaxation",
    "solver_labels",
]


class Relaxation(Family):
    name = grid.NAME
    grid = grid
    report = report
    series_dim = "time"  # gather puts the time series of the points into sweep.nc (knudsweep.gather)

    def solve(self, values: dict[str, Any], *, max_iter: int | None, section: dict[str, Any]):
        from knudsweep.solver.relaxation import solve_relaxation

        kw = dict(
            method=values["method"],
            gas=values["gas"],
            pressure=values["pressure"],
            temperature=values["temperature"],
            initial_state=values["initial_state"],
            molecular_model=values["molecular_model"],
            t_end=values["t_end"],
            n_output=values["n_output"],
            seed=values["seed"],
            h_bins_per_axis=values["h_bins_per_axis"],
            axis_temperature_ratios=tuple(values["axis_temperature_ratios"]),
            beam_separation=values["beam_separation"],
            beam_fraction=values["beam_fraction"],
            bkw_start_time=grid.bkw_start_time(values["bkw_start_time"]),
        )
        if values["method"] == "dsmc":
            kw.update(n_particles=values["n_particles"], n_replicas=values["n_replicas"])
        else:
            kw.update(n_velocity=values["n_velocity"])
        return solve_relaxation(**kw)

    def warm_up(self) -> None:
        from knudsweep.solver.relaxation import solve_relaxation

        for model in ("maxwell", "vss"):
            solve_relaxation(
                method="dsmc",
                initial_state="two_beams",
                molecular_model=model,
                n_particles=200,
                n_replicas=2,
                t_end=0.2,
                n_output=2,
                h_bins_per_axis=2,
            )
        for method in MODEL_EQUATIONS:
            solve_relaxation(
                method=method,
                initial_state="two_beams",
                beam_fraction=0.3,
                n_velocity=8,
                velocity_half_width=7.0,
                t_end=0.02,
                n_output=2,
            )


FAMILY = Relaxation()
