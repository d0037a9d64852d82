"""The stopping rule and iteration defaults of the channel solvers (plane channel, tube, duct).

Every channel solver iterates a fixed-point map x_{k+1} = T(x_k) and measures
per iteration the relative change e_k of its moments (each geometry in its own
norm: the plane channel an integral norm of the primary moment, tube and duct
the largest nodal change of u, and of q or tau where they feed back).  With
the contraction rate estimated over the last LAG iterations,

    rho = (e_k / e_{k-LAG})^(1/LAG),

the remaining iteration error of a linear contraction is bounded by the
geometric tail

    E_k = e_k rho / (1 - rho)            (infinite while rho >= 1),

and the iteration stops when E_k < tol (a-posteriori estimate of a
contraction; e.g. Kelley, Iterative Methods for Linear and Nonlinear
Equations, SIAM 1995, Ch. 1).  Unlike a bare test e_k < tol, a slowly
contracting iteration (rho near 1, small changes but a large remaining error)
is not stopped early.  At least LAG + 1 iterations are made unless a change is
exactly zero.

The duct mixes its iterates (Anderson), which breaks the geometric
contraction the estimate assumes: the bare estimate stopped with a 1.5e-8
relative error of G_P at tol 1e-8 (Maxwell alpha = 0.3, delta = 10, A = 2).
It therefore stops on max(e_k, E_k) < tol (``require_small_change``), which
left errors of 3e-11 to 1.1e-9 in the same measurement.  The plane channel's model-equation kernel applies the same
rule inside its compiled loop (``plane_channel.kernels.source_iteration``).

Acceleration (synthetic; accelerated and plain iterations converge to the
same discrete solution, the plain one needs up to thousands of times more
sweeps at large delta) is on by default for every geometry and model; the
accelerated linearized-Boltzmann iteration stops on the larger change of
velocity and heat flux.
MAX_ITER_ACCELERATED and MAX_ITER_PLAIN are the default caps.
"""

from __future__ import annotations

import math

import numpy as np

from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord

__all__ = ["LAG", "MAX_ITER_ACCELERATED", "MAX_ITER_PLAIN", "IterationControl", "default_max_iter"]

LAG = 4  # iterations over which the contraction rate is measured
MAX_ITER_ACCELERATED = 2_000
MAX_ITER_PLAIN = 200_000
MAX_ITER_REASON = "max_iter reached before the error estimate fell below tol"
NOT_FINITE_REASON = "non-finite values (NaN or inf) in the iteration"


def default_max_iter(accelerate: bool) -> int:
    """The default iteration cap: MAX_ITER_ACCELERATED or MAX_ITER_PLAIN."""
    return MAX_ITER_ACCELERATED if accelerate else MAX_ITER_PLAIN


class IterationControl:
    """The stopping rule of the module docstring, with the record of the iteration.

    Call :meth:`stop` once per iteration with its relative change; it returns
    True when the loop should end (converged, not finite, or max_iter reached).
    ``residuals`` holds the error estimate of each iteration (the change
    itself while no estimate exists).
    """

    def __init__(self, tol: float, max_iter: int, require_small_change: bool = False):
        self.require_small_change = bool(require_small_change)
        self.tol = float(tol)
        self.max_iter = int(max_iter)
        self.residuals: list[float] = []
        self.iterations = 0
        self.estimate = math.inf
        self.rho = 0.0
        self.status = FAILED
        self.reason = MAX_ITER_REASON
        self._changes: list[float] = []

    def stop(self, change: float) -> bool:
        """Record one iteration's relative change; True when the iteration should end."""
        self.iterations += 1
        if not math.isfinite(change):
            self.residuals.append(change)
            self.reason = NOT_FINITE_REASON
            return True
        self._changes = (self._changes + [change])[-(LAG + 1) :]
        if len(self._changes) == LAG + 1 and self._changes[0] > 0.0:
            self.rho = (change / self._changes[0]) ** (1.0 / LAG)
            self.estimate = (
                0.0 if change == 0.0 else (change * self.rho / (1.0 - self.rho) if self.rho < 1.0 else math.inf)
            )
        elif change == 0.0:
            self.estimate = 0.0
        if self.require_small_change:
            self.estimate = max(self.estimate, change)
        self.residuals.append(self.estimate if math.isfinite(self.estimate) else change)
        if self.estimate < self.tol:
            self.status, self.reason = CONVERGED, ""
            return True
        if self.iterations >= self.max_iter:
            self.reason = (
                f"{MAX_ITER_REASON}: estimate {self.residuals[-1]:.3e} > tol {self.tol:g} "
                f"after max_iter={self.max_iter} iterations"
            )
            return True
        return False

    def exact(self) -> None:
        """Mark the iteration converged regardless of the estimate (a sweep that is exact, e.g. free-molecular)."""
        self.status, self.reason, self.estimate = CONVERGED, "", 0.0

    def fail(self, reason: str) -> None:
        """Mark the iteration failed with ``reason``."""
        self.status, self.reason = FAILED, reason

    def record(self) -> ConvergenceRecord:
        """The convergence record of the result."""
        return ConvergenceRecord(np.asarray(self.residuals), self.iterations, self.status, self.reason, self.tol)

    def describe(self) -> dict:
        """Entries for the discretization record."""
        rule = "max(e, e rho / (1 - rho))" if self.require_small_change else "e rho / (1 - rho)"
        return {
            "stopping_rule": f"{rule} < tol, e the relative change, rho the contraction (knudsweep.solver.iteration)",
            "contraction_estimate": float(self.rho),
            "iteration_error_estimate": float(self.estimate),
        }
