"""Poiseuille flow and thermal creep through a long circular tube: the solve and its result.

The tube has radius a (the length scale), delta = p a / (mu v0).  Equations
and moments: ``knudsweep.solver.cross_section``; reduced flow rates

    G = 4 int_0^1 u r dr ,     Q = -4 int_0^1 q r dr

(Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998) 657).  In the
free-molecular limit G_P = 8/(3 sqrt(pi)) (Knudsen, Ann. Phys. 28 (1909) 75;
``knudsweep.solver.limits``).

Method: by axial symmetry the moments depend on r only; long characteristics
(``tube.kernels``) on the grid of ``tube.grids``; Maxwell walls inside the
sweep, Cercignani-Lampis walls solved exactly per sweep (``tube.boundary``).
Source iteration on (u, q, tau) with the synthetic correction of
``tube.acceleration``; stopping rule and defaults of ``knudsweep.solver.iteration``;
error estimate and accuracy climb of ``knudsweep.solver.resolution``.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from knudsweep.solver.cross_section import (
    check_inputs,
    drive_name,
    flow_rate_coefficients,
    heat_coefficient,
    moment_change,
    source_polynomials,
    source_vector,
    speed_rule_name,
)
from knudsweep.solver.iteration import IterationControl, default_max_iter
from knudsweep.solver.limits import SIGMA_P_BGK
from knudsweep.solver.resolution import check_estimate_options, coarser_level, solve_channel
from knudsweep.solver.result import Quantity, SolverResult
from knudsweep.solver.tube import grids, kernels
from knudsweep.solver.tube.acceleration import RadialDiffusion
from knudsweep.solver.tube.boundary import TubeCLWall
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall, slip_factor, tangential_accommodation


def solve_tube(
    problem: str,
    *,
    delta: float,
    model: str = "bgk",
    wall: MaxwellWall | CercignaniLampisWall = MaxwellWall(1.0),  # noqa: B008  (frozen dataclass, safe default)
    n_space: int | None = None,
    n_velocity: int | None = None,
    max_iter: int | None = None,
    tol: float = 1e-8,
    accelerate: bool = True,
    accuracy: float | None = None,
    error_estimate: bool = True,
) -> SolverResult:
    """Solve Poiseuille or thermal-creep flow in a long tube; see the module docstring.

    delta : rarefaction parameter p a / (mu v0) on the radius a, in [0, 1e3]
            (0 = free-molecular, one sweep).
    n_space : radial nodes; n_velocity : in-plane speed nodes (angles on the
            half circle = 1.5 n_velocity, even).
    max_iter, tol : iteration cap (default ``iteration.default_max_iter``) and
            tolerance of the stopping rule (``knudsweep.solver.iteration``).
    accuracy : relative accuracy asked of G and Q, in [1e-6, 0.1]; the
            resolution then climbs :func:`tube.grids.resolution_ladder` until the
            Richardson estimate (knudsweep.solver.resolution) is below it (n_space,
            n_velocity must be None; iteration tol min(tol, accuracy/100)).
            Not reached on the finest level: status "failed" with the reason.
    error_estimate : without accuracy, also solve at one coarser step (half
            the radial intervals, 3/4 of the speeds; ~30-40 % extra work, measured)
            and report the estimate.
    Returns a SolverResult (family "tube") with coefficients G_P, Q_P or G_T,
    Q_T and "<name>_error_estimate" (absolute, same units; NaN if not
    estimated); discretization records the estimate and how it was obtained.
    """
    t_start = time.perf_counter()
    km = check_inputs(problem, delta, model, wall, tol, max_iter, "tube")
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    delta = float(delta)
    ns, _, nc = grids.sizes(n_space, n_velocity, delta)
    tube = TubeFlow(
        problem, delta, km, wall, default_max_iter(accelerate) if max_iter is None else int(max_iter), bool(accelerate)
    )
    return solve_channel(
        tube, ns, nc, tol=float(tol), accuracy=accuracy, error_estimate=error_estimate, t_start=t_start
    )


@dataclass(frozen=True)
class TubeFlow:
    """One tube problem with checked inputs (a :class:`knudsweep.solver.resolution.ChannelSolver`)."""

    problem: str
    delta: float
    km: object
    wall: MaxwellWall | CercignaniLampisWall
    max_iter: int
    accelerate: bool

    assumed_ratio = grids.ASSUMED_RATIO
    coarse_how = "one coarser step (half the spatial intervals, 3/4 of the speed nodes)"
    ladder_how = "accuracy-driven refinement along the resolution ladder"

    def resolution_ladder(self) -> list[tuple[int, int]]:
        return grids.resolution_ladder(self.delta)

    def coarser_level(self, n_space: int, n_velocity: int) -> tuple[int, int]:
        return coarser_level(n_space, n_velocity)

    def solve_once(self, n_space: int, n_velocity: int, tol: float) -> SolverResult:
        """One solve at a fixed resolution."""
        t_start = time.perf_counter()
        problem, delta, km, wall = self.problem, self.delta, self.km, self.wall
        ns, na, nc = grids.sizes(n_space, n_velocity, delta)
        grid = grids.TubeGrid(ns, na, nc, delta)
        nc = grid.c.size  # the graded speed rule (delta < 1) has its own node count
        nu_delta = km.collision_factor * delta
        cl_wall = TubeCLWall(grid, wall, nu_delta) if isinstance(wall, CercignaniLampisWall) else None
        # Maxwell: specular part summed along the chord inside the sweep; CL: the
        # sweep runs with a black wall and TubeCLWall adds the re-emitted part.
        reflect = 1.0 - tangential_accommodation(wall) if cl_wall is None else 0.0
        poly = source_polynomials(problem, heat_coefficient(km), km.stress_coefficient)
        src = source_vector(poly, nu_delta)
        nseg, ds, jj, dr, cp = kernels.build_rays(grid.r, grid.cos_th)
        fields = np.zeros((3,) + dr.shape)

        u, tau, q = np.zeros(ns), np.zeros(ns), np.zeros(ns)
        un, taun, qn = np.zeros(ns), np.zeros(ns), np.zeros(ns)
        phi1 = np.zeros((ns, na, nc))
        phi3 = np.zeros((ns, na, nc))
        diffusion = None
        if self.accelerate and delta > 0.0:
            diffusion = RadialDiffusion(grid.r, delta, SIGMA_P_BGK * slip_factor(wall))

        control = IterationControl(tol, self.max_iter)
        while True:
            kernels.sample_fields(
                nseg,
                jj,
                dr,
                grids.even_spline(grid.r, u),
                grids.even_spline(grid.r, q),
                grids.odd_spline(grid.r, tau),
                fields,
            )
            kernels.sweep(nseg, ds, cp, fields, grid.c, nu_delta, reflect, src, kernels.VINV, phi1, phi3)
            if cl_wall is not None:
                cl_wall.add_reemission(phi1, phi3)
            kernels.moments(phi1, phi3, grid.weight, grid.c, grid.cos_th, un, taun, qn)
            if diffusion is not None:
                corr = diffusion.solve(nu_delta * (un - u))
                un = un + corr
                # shear of the correction, -e'/(2 delta), keeps tau consistent with
                # u (needed when tau feeds back into the source: ES-BGK)
                taun = taun - (diffusion.d1 @ corr) / (2.0 * delta)
            change = moment_change(poly, (un, qn, taun), (u, q, tau))
            u, tau, q = un.copy(), taun.copy(), qn.copy()
            if not np.all(np.isfinite(u)):
                change = float("nan")
            stop = control.stop(change)
            if delta == 0.0 and (cl_wall is not None or reflect == 0.0) and np.isfinite(change):
                # free-molecular: the source is fixed and the wall re-emission is
                # solved exactly inside the sweep, so one sweep is exact
                control.exact()
                break
            if stop:
                break
        return self.assemble_result(grid, u, q, tau, n_velocity, control, cl_wall, t_start)

    def assemble_result(self, grid, u, q, tau, n_velocity, control, cl_wall, t_start) -> SolverResult:
        """The SolverResult of one solve: G, Q, the radial profiles and the records."""
        problem, delta = self.problem, self.delta
        drive = drive_name(problem)
        coefficients = flow_rate_coefficients(
            problem,
            4.0 * grids.radial_integral(grid.r, u),
            -4.0 * grids.radial_integral(grid.r, q),
            "4 int u r dr",
            "-4 int q r dr",
        )
        coords = {"r": Quantity(grid.r, "1", "radial coordinate in units of the tube radius", ("r",))}
        profiles = {
            "velocity": Quantity(u, "1", f"axial flow velocity per unit {drive}, units of v0", ("r",)),
            "heat_flux": Quantity(q, "1", f"axial heat flux per unit {drive}, units of p v0", ("r",)),
            "shear_stress": Quantity(tau, "1", f"radial shear stress P_xr/(2p) per unit {drive}", ("r",)),
        }
        params = {
            "geometry": "tube",
            "problem": problem,
            "delta": delta,
            "length_scale": "tube radius",
            "kinetic_model": self.km.name,
            **self.wall.describe(),
            "accelerate": self.accelerate,
        }
        disc = {
            "n_space": grid.r.size,
            "n_velocity": int(n_velocity),
            "n_radial": grid.r.size,
            "n_angle_half_circle": grid.cos_th.size,
            "n_speed": grid.c.size,
            "speed_rule": speed_rule_name(delta),
            "radial_grid": "r = sin(pi xi / 2), xi uniform",
            "method": "long characteristics, piecewise-linear source",
            "tolerance": control.tol,
            "max_iter": control.max_iter,
            **control.describe(),
        }
        if cl_wall is not None:
            disc["wall_kernel_defect"] = cl_wall.defect
        return SolverResult(
            "tube",
            problem,
            params,
            coords,
            profiles,
            coefficients,
            disc,
            control.record(),
            time.perf_counter() - t_start,
        )
