"""knudsweep numerics: kinetic solvers for rarefied-gas transport and relaxation.

Pure numerics only: no workflow, no plotting.  Every solver returns a
:class:`knudsweep.solver.result.SolverResult`; :mod:`knudsweep.solver.netcdf_io` writes it.
"""

__version__ = "0.5.0"
