"""Relaxation of a space-homogeneous gas to equilibrium.

Particle (DSMC, no-time-counter collisions, VHS/VSS/hard-sphere/Maxwell
molecules) and deterministic (BGK, S-model, ES-BGK on a discrete velocity
grid) solvers, the exact BKW solution, H-function estimators and
relaxation-time fits.  Entry point: :func:`solve_relaxation`.
"""

from knudsweep.solver.relaxation.solve import METHODS, solve_relaxation

__all__ = ["METHODS", "solve_relaxation"]
