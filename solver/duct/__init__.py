"""Long rectangular duct: Poiseuille flow and thermal creep with the linearized kinetic models.

Modules: ``grids`` (graded nodes, angles, sizes, memory, resolution ladder),
``kernels`` (discrete-ordinate sweeps), ``uncollided`` (first-flight part exact
in the angle), ``boundary`` (wall re-emission), ``acceleration`` (synthetic
correction, Anderson state), ``driver`` (:func:`solve_duct` and its result).
The equations shared with the tube are in ``knudsweep.solver.cross_section``,
the continuum, slip and free-molecular limits in ``knudsweep.solver.limits``.
"""

from knudsweep.solver.cross_section import MAX_DELTA, PROBLEMS
from knudsweep.solver.duct.driver import DuctFlow, solve_duct
from knudsweep.solver.duct.grids import MAX_ASPECT_RATIO, default_sizes, duct_memory_mb, resolution_ladder

__all__ = [
    "solve_duct",
    "DuctFlow",
    "PROBLEMS",
    "MAX_DELTA",
    "MAX_ASPECT_RATIO",
    "default_sizes",
    "duct_memory_mb",
    "resolution_ladder",
]
