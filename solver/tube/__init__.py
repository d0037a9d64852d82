"""Long circular tube: Poiseuille flow and thermal creep with the linearized kinetic models.

Modules: ``grids`` (nodes, sizes, resolution ladder), ``kernels`` (rays and
sweep), ``boundary`` (Cercignani-Lampis wall), ``acceleration`` (synthetic
correction), ``driver`` (:func:`solve_tube` and its result).  The equations
shared with the duct are in ``knudsweep.solver.cross_section``.
"""

from knudsweep.solver.cross_section import MAX_DELTA, PROBLEMS
from knudsweep.solver.tube.driver import TubeFlow, solve_tube
from knudsweep.solver.tube.grids import TubeGrid, default_sizes, resolution_ladder

__all__ = ["solve_tube", "TubeFlow", "TubeGrid", "PROBLEMS", "MAX_DELTA", "default_sizes", "resolution_ladder"]
