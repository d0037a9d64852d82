"""Checked Python entry point of the plane-channel solver."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from knudsweep.solver.iteration import default_max_iter
from knudsweep.solver.kinetic_models import (
    BOLTZMANN_MODELS,  # linearized Boltzmann names -> molecule
    get_model,
)
from knudsweep.solver.limits import SIGMA_P_BGK, TEMPERATURE_JUMP_BGK
from knudsweep.solver.plane_channel import grids, kernels
from knudsweep.solver.plane_channel.boundary import wall_operators
from knudsweep.solver.plane_channel.problems import PROBLEMS, build_tables, coefficients_and_profiles
from knudsweep.solver.resolution import check_estimate_options, solve_channel
from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall, slip_factor

DELTA_RANGE = (1e-4, 1e4)
# relative change per iteration: below 1e-14 it is round-off of the double-precision sweep
TOL_RANGE = (1e-14, 1e-2)
# Slip length (units of ell = mu v0 / p) in the wall condition of the
# synthetic error equation: the BGK diffuse value (knudsweep.solver.limits)
# times walls.slip_factor (Maxwell's (2 - a)/a).  It sets only the speed of
# convergence, never the converged result; stable for unequal walls because
# the upper-wall reflection is closed inside the sweep (kernels._close_upper_wall).
_SLIP_LENGTH = SIGMA_P_BGK
# Temperature-jump length (units of ell) of the heat-transfer error equation:
# the BGK diffuse value (knudsweep.solver.limits) for every model, scaled by
# (2 - a_E)/a_E.  Speed only, like _SLIP_LENGTH.
_JUMP_LENGTH = TEMPERATURE_JUMP_BGK


def acceleration_parameters(problem, kinetic, delta, lower_wall, upper_wall):
    """(accel_kind, kappa, robin_low, robin_up, lag_factor) of the synthetic correction (kernels._synthetic_step)."""
    d = kinetic.collision_factor * delta
    if problem == "heat_transfer":
        # Fourier conductivity in units of p v0 a / T: q_y = -kappa tau',
        # kappa = 5 / (4 Pr delta) (lambda = (5/2)(k/m) mu / Pr)
        kappa = 5.0 / (4.0 * kinetic.prandtl * delta)
        robin_low = _JUMP_LENGTH * _wall_slip_factor(lower_wall, energy=True) / (delta * kappa)
        robin_up = _JUMP_LENGTH * _wall_slip_factor(upper_wall, energy=True) / (delta * kappa)
        # S-model: the sweep returns q = (1 - Pr) q_old + ..., so the lag of
        # q_y in the gain adds (1 - Pr)/Pr r_q to the error flux
        lag = (1.0 - kinetic.prandtl) / kinetic.prandtl if kinetic.heat_flux_term else 0.0
        return 2, kappa, robin_low, robin_up, lag
    kappa = 1.0 / (d * (1.0 - kinetic.stress_coefficient))
    robin_low = _SLIP_LENGTH * _wall_slip_factor(lower_wall) / (delta * kappa)
    robin_up = _SLIP_LENGTH * _wall_slip_factor(upper_wall) / (delta * kappa)
    # ES-BGK: the stress p_xy in the gain lags one sweep
    lag = kinetic.stress_coefficient / (1.0 - kinetic.stress_coefficient)
    return 1, kappa, robin_low, robin_up, lag


def _wall_slip_factor(wall, energy: bool = False) -> float:
    """(2 - a)/a with a the momentum (or, with energy=True, the energy) accommodation of the wall.

    Cercignani-Lampis energy accommodation: (alpha_n + alpha_t (2 - alpha_t)) / 2,
    the normal and tangential parts weighted equally (from memory; speed only).
    """
    if not energy or isinstance(wall, MaxwellWall):
        return slip_factor(wall)
    a = 0.5 * (wall.alpha_n + wall.alpha_t * (2.0 - wall.alpha_t))
    return (2.0 - a) / a


_STATUS_REASON = {
    kernels.MAX_ITER_CODE: "max_iter reached before the error estimate fell below tol",
    kernels.NOT_FINITE_CODE: "non-finite values (NaN or inf) in the iteration",
}


def _check_int(name: str, value, low: int, high: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not (low <= value <= high):
        raise ValueError(f"{name}: must be an integer in [{low}, {high}], got {value!r}")
    return int(value)


def plate_parameters(lower_wall, upper_wall) -> dict:
    """The result parameters of the two plates: the wall's own names (``describe()``) with the plate as suffix.

    ``wall_model_lower``, ``alpha_lower`` (or ``alpha_t_lower``, ``alpha_n_lower``), the same ``_upper``:
    the tube and the duct, with one wall, store the same names without a suffix.
    """
    return {
        f"{key}_{side}": value
        for side, wall in (("lower", lower_wall), ("upper", upper_wall))
        for key, value in wall.describe().items()
    }


def check_inputs(problem, delta, model, lower_wall, upper_wall, tol):
    if problem not in PROBLEMS:
        raise ValueError(f"problem: must be one of {', '.join(PROBLEMS)}, got {problem!r}")
    try:
        delta = float(delta)
    except (TypeError, ValueError):
        raise ValueError(
            f"delta: must be a number in [{DELTA_RANGE[0]:g}, {DELTA_RANGE[1]:g}], got {delta!r}"
        ) from None
    if not (DELTA_RANGE[0] <= delta <= DELTA_RANGE[1]):
        raise ValueError(f"delta: must be in [{DELTA_RANGE[0]:g}, {DELTA_RANGE[1]:g}], got {delta!r}")
    kinetic = get_model(model)
    for name, wall in (("lower_wall", lower_wall), ("upper_wall", upper_wall)):
        if not isinstance(wall, (MaxwellWall, CercignaniLampisWall)):
            raise ValueError(f"{name}: must be a MaxwellWall or CercignaniLampisWall, got {type(wall).__name__}")
    tol = float(tol)
    if not (TOL_RANGE[0] <= tol <= TOL_RANGE[1]):
        raise ValueError(f"tol: must be in [{TOL_RANGE[0]:g}, {TOL_RANGE[1]:g}], got {tol!r}")
    return delta, kinetic, tol


def solve_plane_channel(
    problem: str,
    *,
    delta: float,
    model: str = "bgk",
    lower_wall=MaxwellWall(1.0),  # noqa: B008  (frozen dataclass, safe default)
    upper_wall=None,
    n_space: int | None = None,
    n_velocity: int | None = None,
    max_iter: int | None = None,
    tol: float = 1e-8,
    accelerate: bool = True,
    accuracy: float | None = None,
    error_estimate: bool = True,
) -> SolverResult:
    """Linearised flow between parallel plates by the discrete-velocity method.

    Parameters
    ----------
    problem : "poiseuille", "thermal_creep", "couette" or "heat_transfer".
    delta : rarefaction parameter p a / (mu v0), a = gap, in [1e-4, 1e4].
    model : kinetic model, "bgk", "s_model" or "es_bgk" (knudsweep.solver.kinetic_models), or
        "boltzmann_hard_sphere": the linearized Boltzmann equation
        (``boltzmann_driver``; poiseuille and thermal_creep, Maxwell walls,
        delta in [1e-3, 1e3], n_velocity = speed nodes in [4, 24]).
    lower_wall, upper_wall : knudsweep.solver.walls.MaxwellWall / CercignaniLampisWall;
        upper_wall None means the same as lower_wall.
    n_space : cells across the gap (default from delta, grids.default_n_space).
    n_velocity : positive half-range velocity nodes (default from delta).
    max_iter : iteration cap per solve (default ``iteration.default_max_iter``: 200000 plain, 2000 accelerated).
    tol : stop when the estimated relative error of the primary moment
        (velocity, or temperature for heat transfer) is below tol.
    accelerate : synthetic acceleration of the iteration (all four problems;
        kernels._synthetic_step); on by default, as for tube and duct
        (``knudsweep.solver.iteration``).
    accuracy : relative accuracy asked of every coefficient, in [1e-6, 0.1];
        the resolution is then chosen by climbing grids.resolution_ladder
        until the Richardson estimate (knudsweep.solver.resolution) is below it
        (n_space / n_velocity must be None).  The iteration tolerance is
        tightened to min(tol, accuracy / 100).  Not reached on the finest
        allowed grid: status "failed" with the reason.
    error_estimate : without ``accuracy``, also solve once on the next
        coarser ladder step (half the cells, 3/4 of the velocity nodes,
        ~40 % extra work) and report the estimate.

    Returns
    -------
    SolverResult with family "plane_channel"; coefficients G_P, Q_P
    (poiseuille), G_T, Q_T (thermal_creep), shear_stress (couette),
    heat_flux (heat_transfer), each with "<name>_error_estimate" (absolute
    discretization error estimate, same units; NaN if not estimated);
    normalisation in ``problems`` module docstring.  discretization records
    the resolution used, the estimate and how it was obtained.
    A run that does not converge is returned with status "failed" and a reason.
    """
    if isinstance(model, str) and model in BOLTZMANN_MODELS:
        return _solve_boltzmann(
            problem,
            model,
            delta,
            lower_wall,
            upper_wall,
            n_space,
            n_velocity,
            max_iter,
            tol,
            accelerate,
            accuracy,
            error_estimate,
        )
    t0 = time.perf_counter()
    if upper_wall is None:
        upper_wall = lower_wall
    delta, kinetic, tol = check_inputs(problem, delta, model, lower_wall, upper_wall, tol)
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    if not isinstance(accelerate, bool):
        raise ValueError(f"accelerate: must be True or False, got {accelerate!r}")
    if n_space is None:
        n_space = grids.default_n_space(delta)
    else:
        n_space = _check_int("n_space", n_space, grids.MIN_SPACE, grids.MAX_SPACE)
    if n_velocity is None:
        n_velocity = grids.default_n_velocity(delta)
    else:
        n_velocity = _check_int("n_velocity", n_velocity, grids.MIN_VELOCITY, grids.MAX_VELOCITY)
    if max_iter is None:
        max_iter = default_max_iter(accelerate)
    else:
        max_iter = _check_int("max_iter", max_iter, 1, 100_000_000)

    channel = PlaneChannelFlow(problem, delta, kinetic, lower_wall, upper_wall, max_iter, accelerate)
    return solve_channel(
        channel, n_space, n_velocity, tol=tol, accuracy=accuracy, error_estimate=error_estimate, t_start=t0
    )


@dataclass(frozen=True)
class PlaneChannelFlow:
    """One plane-channel problem with checked inputs (a :class:`knudsweep.solver.resolution.ChannelSolver`)."""

    problem: str
    delta: float
    kinetic: object
    lower_wall: object
    upper_wall: object
    max_iter: int
    accelerate: bool

    assumed_ratio = 4.0  # second order (knudsweep.solver.resolution); the scheme measures r = 5 to 8
    coarse_how = "one coarser ladder step (half the cells, 3/4 of the velocity nodes)"
    ladder_how = "accuracy-driven refinement along grids.resolution_ladder"

    def resolution_ladder(self) -> list[tuple[int, int]]:
        return grids.resolution_ladder(self.delta)

    def coarser_level(self, n_space: int, n_velocity: int) -> tuple[int, int]:
        return max(4, n_space // 2), grids.coarser_velocity(self.delta, n_velocity)

    def solve_once(self, n_space: int, n_velocity: int, tol: float) -> SolverResult:
        return _solve_once(
            self.problem,
            self.delta,
            self.kinetic,
            self.lower_wall,
            self.upper_wall,
            n_space,
            n_velocity,
            self.max_iter,
            tol,
            self.accelerate,
        )


def _solve_boltzmann(
    problem,
    model,
    delta,
    lower_wall,
    upper_wall,
    n_space,
    n_velocity,
    max_iter,
    tol,
    accelerate,
    accuracy,
    error_estimate,
) -> SolverResult:
    """The linearized Boltzmann equation (``boltzmann_driver``): Poiseuille and thermal creep, Maxwell walls."""
    from knudsweep.solver.plane_channel import boltzmann_driver

    if problem not in boltzmann_driver.PROBLEMS:
        raise ValueError(f"problem: model {model} solves {', '.join(boltzmann_driver.PROBLEMS)} only, got {problem!r}")
    for name, wall in (("lower_wall", lower_wall), ("upper_wall", upper_wall)):
        if wall is not None and not isinstance(wall, MaxwellWall):
            raise ValueError(
                f"{name}: model {model} takes Maxwell walls only (MaxwellWall, alpha in [0.01, 1]), "
                f"got {type(wall).__name__}"
            )
    return boltzmann_driver.solve_plane_channel_boltzmann(
        problem,
        delta=delta,
        molecule=BOLTZMANN_MODELS[model],
        lower_wall=lower_wall,
        upper_wall=upper_wall,
        n_space=n_space,
        n_velocity=n_velocity,
        max_iter=max_iter,
        tol=tol,
        accelerate=accelerate,
        accuracy=accuracy,
        error_estimate=error_estimate,
    )


def _solve_once(
    problem, delta, kinetic, lower_wall, upper_wall, n_space, n_velocity, max_iter, tol, accelerate
) -> SolverResult:
    """One solve at a fixed resolution (inputs already checked)."""
    t0 = time.perf_counter()
    accel_kind, kappa, robin_low, robin_up, lag_factor = acceleration_parameters(
        problem, kinetic, delta, lower_wall, upper_wall
    )
    if not accelerate:
        accel_kind = 0

    y = grids.channel_nodes(n_space)
    c, w, vdesc = grids.velocity_set(delta, n_velocity)
    tables = build_tables(problem, kinetic, c, w)
    R_low, defect_low = wall_operators(lower_wall, tables.degrees, c, w)
    R_up, defect_up = wall_operators(upper_wall, tables.degrees, c, w)
    d = kinetic.collision_factor * delta
    cell = kernels.cell_coefficients(y, c, d)
    wy = np.diff(y)  # cell widths: the y-integral of a DG field is sum h_i a_i
    yc = 0.5 * (y[1:] + y[:-1])
    F = np.zeros((2, 2, c.size, n_space, 2))
    history = np.zeros(max_iter)
    # exact wall coupling inside each sweep (kernels._close_upper_wall), with the acceleration only
    close_walls = accel_kind > 0
    T = kernels.wall_transmission(*cell[1:])
    G = np.zeros_like(R_up)
    if close_walls:
        eye = np.eye(c.size)
        for a in range(R_up.shape[0]):
            G[a] = np.linalg.inv(eye - R_up[a] @ (T[:, None] * R_low[a]) * T[None, :])
    iterations, code, estimate, rho = kernels.source_iteration(
        F,
        *cell,
        tables.P,
        tables.Q,
        tables.src,
        d,
        R_low,
        R_up,
        tables.Fw_low,
        tables.Fw_up,
        wy,
        tables.fix_mass,
        tables.primary,
        tables.integral_floor,
        max_iter,
        tol,
        history,
        accel_kind,
        kappa,
        lag_factor,
        robin_low,
        robin_up,
        close_walls,
        T,
        G,
    )
    M = np.zeros((tables.P.shape[0], n_space, 2))
    kernels.compute_moments(F, tables.P, M)
    coeffs, prof = coefficients_and_profiles(problem, M[:, :, 0], wy)

    status, reason = CONVERGED, ""
    if code != kernels.CONVERGED_CODE:
        status, reason = FAILED, _STATUS_REASON[code]
    elif not all(math.isfinite(v) for v, _ in coeffs.values()):
        status, reason = FAILED, "non-finite coefficient"
    convergence = ConvergenceRecord(
        residuals=history[:iterations].copy(), iterations=int(iterations), status=status, reason=reason, tolerance=tol
    )
    parameters = {"problem": problem, "delta": delta, **kinetic.describe(), **plate_parameters(lower_wall, upper_wall)}
    discretization = {
        "n_space": int(n_space),
        "space_grid": "y = sin(pi xi / 2) / 2, xi uniform",
        "space_scheme": "linear discontinuous Galerkin (upwind), profiles are cell averages",
        **vdesc,
        "tol": tol,
        "max_iter": int(max_iter),
        "accelerate": bool(accelerate),
        "acceleration_applied": bool(accel_kind > 0),
        "contraction_estimate": float(rho),
        "iteration_error_estimate": float(estimate),
        "wall_kernel_defect": float(max(defect_low, defect_up)),
    }
    return SolverResult(
        family="plane_channel",
        problem=problem,
        parameters=parameters,
        coords={"y": Quantity(yc, "1", "cell centre across the channel / gap (walls at -1/2, +1/2)", ("y",))},
        profiles={k: Quantity(v, "1", ln, ("y",)) for k, (v, ln) in prof.items()},
        coefficients={k: Quantity(v, "1", ln) for k, (v, ln) in coeffs.items()},
        discretization=discretization,
        convergence=convergence,
        wall_time=time.perf_counter() - t0,
    )
