"""The result object every solver returns.

A result is plain data: named coordinates, named profiles on those coordinates,
named scalar coefficients, the parameters of the point, the discretization used
and a convergence record.  It knows nothing about files; ``knudsweep.solver.netcdf_io``
turns it into a CF netCDF file.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

CONVERGED = "converged"
FAILED = "failed"


@dataclass
class Quantity:
    """A named array or scalar with its units and a human-readable long name."""

    value: Any
    units: str = "1"
    long_name: str = ""
    dims: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        self.value = np.asarray(self.value, dtype=float) if not np.isscalar(self.value) else float(self.value)
        ndim = 0 if np.isscalar(self.value) else np.ndim(self.value)
        if len(self.dims) != ndim:
            raise ValueError(f"dims: {self.long_name or 'quantity'} has {ndim} dimensions but dims={self.dims}")


@dataclass
class ConvergenceRecord:
    """How the iteration went: residual per iteration, count, status and why."""

    residuals: np.ndarray = field(default_factory=lambda: np.zeros(0))
    iterations: int = 0
    status: str = CONVERGED
    reason: str = ""
    tolerance: float = float("nan")

    @property
    def converged(self) -> bool:
        return self.status == CONVERGED


@dataclass
class SolverResult:
    """Output of one solver call (one point of a sweep).

    Attributes
    ----------
    family : str
        Solver family, e.g. ``"plane_channel"``, ``"tube"``, ``"duct"``, ``"relaxation"``.
    problem : str
        Problem within the family, e.g. ``"poiseuille"``.
    parameters : dict
        Every input that defines the point (scalars and strings only).
    coords : dict[str, Quantity]
        1-D coordinate arrays, keyed by dimension name.
    profiles : dict[str, Quantity]
        Arrays on ``coords`` (``Quantity.dims`` names the dimensions).
    coefficients : dict[str, Quantity]
        Scalar results (reduced flow rates, heat-flux coefficients, fitted rates).
    discretization : dict
        Grid sizes, quadrature kinds, tolerances actually used.
    convergence : ConvergenceRecord
    wall_time : float
        Seconds spent inside the solver call.
    """

    family: str
    problem: str
    parameters: dict[str, Any]
    coords: dict[str, Quantity] = field(default_factory=dict)
    profiles: dict[str, Quantity] = field(default_factory=dict)
    coefficients: dict[str, Quantity] = field(default_factory=dict)
    discretization: dict[str, Any] = field(default_factory=dict)
    convergence: ConvergenceRecord = field(default_factory=ConvergenceRecord)
    wall_time: float = 0.0

    @property
    def status(self) -> str:
        return self.convergence.status

    def coefficient(self, name: str) -> float:
        """Value of scalar coefficient ``name`` (KeyError lists the known ones)."""
        if name not in self.coefficients:
            raise KeyError(f"{name!r} not in coefficients {sorted(self.coefficients)}")
        return float(self.coefficients[name].value)

    def summary(self) -> dict[str, Any]:
        """JSON-ready dictionary: coefficients, iterations, status, wall time."""
        return {
            "family": self.family,
            "problem": self.problem,
            "parameters": dict(self.parameters),
            "coefficients": {k: float(q.value) for k, q in self.coefficients.items()},
            "iterations": int(self.convergence.iterations),
            "status": self.convergence.status,
            "reason": self.convergence.reason,
            "wall_time_s": float(self.wall_time),
            "discretization": dict(self.discretization),
        }
