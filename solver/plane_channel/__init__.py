"""Linearised rarefied-gas flows between parallel plates (discrete-velocity method).

    from knudsweep.solver.plane_channel import solve_plane_channel
    res = solve_plane_channel("poiseuille", delta=1.0)
    res.coefficient("G_P")

Modules: ``problems`` (reduction to two 1-D transport equations, sources,
normalisation), ``boundary`` (wall reflection operators), ``grids`` (spatial
grid, velocity sets, defaults), ``kernels`` (numba sweeps and iteration),
``driver`` (checked entry point).
"""

from knudsweep.solver.plane_channel.driver import solve_plane_channel
from knudsweep.solver.plane_channel.problems import PROBLEMS

__all__ = ["PROBLEMS", "solve_plane_channel"]
