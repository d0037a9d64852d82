"""Poiseuille flow and thermal creep through a long rectangular duct: the solve and its result.

Height H (the length scale, a = H), width W = A H with aspect ratio A >= 1,
delta = p H / (mu v0).  Lengths in units of H: y in [0, 1] across the height,
z in [0, A] across the width.  Equations and moments:
``knudsweep.solver.cross_section``.  The mass flow rate is written per unit width,

    M / W = (H p / v0) [ G_P X_P + G_T X_T ],  X_P = -(H/p) dp/dx,  X_T = (H/T) dT/dx,
    G = (2/A) int int u dy dz ,    Q = -(2/A) int int q dy dz ,

so that as A -> infinity G_P tends to the plane channel of gap H
(hydrodynamic limit delta/6 + sigma_P).  Continuum, slip and free-molecular
limits: ``knudsweep.solver.limits``.

Method: discrete ordinates on a quarter of the cross-section
(``duct.kernels``) on the graded grid of ``duct.grids``; the uncollided part
exact in the angle (``duct.uncollided``); walls re-emit from the previous
sweep (``duct.boundary``); synthetic correction and Anderson mixing
(``duct.acceleration``); stopping rule and defaults of
``knudsweep.solver.iteration``; error estimate and accuracy climb of
``knudsweep.solver.resolution``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from knudsweep.solver.anderson import AndersonMixer
from knudsweep.solver.cross_section import (
    check_inputs,
    check_resolution,
    drive_name,
    flow_rate_coefficients,
    heat_coefficient,
    moment_change,
    source_polynomials,
    source_vector,
    speed_rule,
)
from knudsweep.solver.duct import grids, kernels
from knudsweep.solver.duct.acceleration import MIX_DEPTH, MIX_MEMORY, DuctCorrection, IterationState
from knudsweep.solver.duct.boundary import WallReemission, correct_inflow
from knudsweep.solver.duct.uncollided import (
    GL6,
    speed_moment_table,
    uncollided_at_walls,
    uncollided_moments,
    uncollided_weight,
)
from knudsweep.solver.iteration import IterationControl, default_max_iter
from knudsweep.solver.limits import SIGMA_P_BGK
from knudsweep.solver.resolution import check_estimate_options, coarser_level, solve_channel
from knudsweep.solver.result import Quantity, SolverResult
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall, slip_factor


def solve_duct(
    problem: str,
    *,
    delta: float,
    aspect_ratio: float,
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
    """Solve Poiseuille or thermal-creep flow in a long rectangular duct; see the module docstring.

    delta : p H / (mu v0) on the height H (the smaller side), in [0, 1e3].
    aspect_ratio : width / height A in [1, 50].
    n_space : nodes across the half height (the half width gets
              n_space (1 + log2(A)/2)); n_velocity : speed nodes (angles per
              quadrant = n_velocity / 2).
    max_iter, tol : iteration cap (default ``iteration.default_max_iter``) and
              tolerance of the stopping rule (``knudsweep.solver.iteration``).
    accuracy : relative accuracy asked of G and Q, in [1e-6, 0.1]; the
              resolution then climbs :func:`duct.grids.resolution_ladder` until the
              Richardson estimate (knudsweep.solver.resolution) is below it (n_space,
              n_velocity must be None; iteration tol min(tol, accuracy/100)).
              Not reached on the finest level: status "failed" with the reason.
    error_estimate : without accuracy, also solve at one coarser step (half
              the intervals, 3/4 of the speeds; ~30-40 % extra work, measured) and
              report the estimate.
    Returns a SolverResult (family "duct") with G_P, Q_P or G_T, Q_T per unit
    width and "<name>_error_estimate" (absolute, same units; NaN if not
    estimated); discretization records the estimate and how it was obtained.
    """
    t_start = time.perf_counter()
    km = check_inputs(problem, delta, model, wall, tol, max_iter, "duct")
    a_r = float(aspect_ratio)
    if not (math.isfinite(a_r) and 1.0 <= a_r <= grids.MAX_ASPECT_RATIO):
        raise ValueError(f"aspect_ratio: must be in [1, {grids.MAX_ASPECT_RATIO:g}], got {aspect_ratio!r}")
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    delta = float(delta)
    ny, _, _, nc = grids.default_sizes(delta, a_r)
    n_space, n_velocity = check_resolution(n_space, n_velocity, grids.SPACE_MAX)
    ny = ny if n_space is None else n_space
    nc = nc if n_velocity is None else n_velocity
    # the coarse level of the estimate takes every other node of the default
    # grid (nested), so that it also coarsens the graded wall cells
    duct = DuctFlow(
        problem,
        delta,
        a_r,
        km,
        wall,
        default_max_iter(accelerate) if max_iter is None else int(max_iter),
        bool(accelerate),
        parent=ny if accuracy is None else None,
    )
    return solve_channel(
        duct, ny, nc, tol=float(tol), accuracy=accuracy, error_estimate=error_estimate, t_start=t_start
    )


@dataclass(frozen=True)
class DuctFlow:
    """One duct problem with checked inputs (a :class:`knudsweep.solver.resolution.ChannelSolver`).

    parent : n_space of the fine grid; a solve with fewer nodes then takes
    every other node of that grid (the nested coarse level of the estimate).
    """

    problem: str
    delta: float
    aspect_ratio: float
    km: object
    wall: MaxwellWall | CercignaniLampisWall
    max_iter: int
    accelerate: bool
    parent: int | None = None

    assumed_ratio = grids.ASSUMED_RATIO
    coarse_how = "one coarser step (half the spatial intervals, 3/4 of the speed nodes)"
    ladder_how = "accuracy-driven refinement along the resolution ladder"

    def resolution_ladder(self) -> list[tuple[int, int]]:
        return grids.resolution_ladder(self.delta, self.aspect_ratio)

    def coarser_level(self, n_space: int, n_velocity: int) -> tuple[int, int]:
        return coarser_level(n_space, n_velocity)

    def grid(self, n_space: int, n_velocity: int):
        """(y, z) nodes of the quarter cross-section, and (n_angle, n_speed)."""
        a_r, delta = self.aspect_ratio, self.delta
        ny, nz, na, nc = grids.duct_sizes(n_space, n_velocity, a_r)
        if self.parent is None or n_space >= self.parent:
            return grids.clustered(ny, 0.5, delta), grids.clustered(nz, 0.5 * a_r, delta), na, nc
        py, pz = grids.duct_sizes(self.parent, n_velocity, a_r)[:2]
        return (
            grids.every_other(grids.clustered(py, 0.5, delta)),
            grids.every_other(grids.clustered(pz, 0.5 * a_r, delta)),
            na,
            nc,
        )

    def solve_once(self, n_space: int, n_velocity: int, tol: float) -> SolverResult:
        """One solve at a fixed resolution."""
        t_start = time.perf_counter()
        problem, delta, a_r, km, wall = self.problem, self.delta, self.aspect_ratio, self.km, self.wall
        y, z, na, nc = self.grid(n_space, n_velocity)
        ny, nz = y.size, z.size
        by, fy = grids.upwind_coefficients(y)
        bz, fz = grids.upwind_coefficients(z)
        th, th_w = grids.angle_rule(na, a_r, delta)
        cos_th, sin_th = np.cos(th), np.sin(th)
        c, cw = speed_rule(nc, delta)
        nc = c.size
        weight = cw[None, :] * (th_w / np.pi)[:, None]  # (1/pi) dtheta w_k, one quadrant

        nu_delta = km.collision_factor * delta
        walls = WallReemission(wall, c, cos_th, sin_th, weight)
        poly = source_polynomials(problem, heat_coefficient(km), km.stress_coefficient)
        # the sweep carries the collided part only: the drive enters through the
        # uncollided moments (exact in the angle) and, at the walls, through the
        # uncollided distribution arriving there
        w_unc = uncollided_weight(delta)
        src = source_vector(poly, nu_delta, 1.0 - w_unc)
        d_poly = w_unc * np.array([poly["d1"][0], poly["d1"][1], poly["d3"][0], poly["d3"][1]])
        gx, gw = GL6
        u0, ty0, tz0, q0 = (np.zeros((ny, nz)) for _ in range(4))
        uncollided_moments(y, z, a_r, nu_delta, d_poly, speed_moment_table(), gx, gw, u0, ty0, tz0, q0)
        with_inflow = walls.cl or walls.f[0] != 0.0
        at_walls = uncollided_at_walls(y, z, a_r, nu_delta, d_poly, c, cos_th, sin_th) if with_inflow else None
        shape = (4, na, nc, ny, nz)
        phi1 = np.zeros(shape)
        phi3 = np.zeros(shape)
        # first iterate: the free-molecular (uncollided) moments
        u, ty, tz, q = u0.copy(), ty0.copy(), tz0.copy(), q0.copy()
        un, tyn, tzn, qn = (np.zeros((ny, nz)) for _ in range(4))
        corr = None
        if self.accelerate and delta > 0.0:
            corr = DuctCorrection(
                y, z, by, fy, bz, fz, weight, c, cos_th, sin_th, nu_delta, delta, SIGMA_P_BGK * slip_factor(wall)
            )

        # state of the iteration: the moments the sweep reads and, unless the walls
        # are diffuse, the wall inflow (re-emission of what arrived in the previous
        # sweep); Anderson mixing of this state removes most of the wall lag of
        # specular reflection, which the synthetic correction does not see, and
        # the oscillation of the lagged ES-BGK stress.
        inflow = walls.inflow(phi1, phi3, at_walls)
        state = IterationState((u, ty, tz, q), inflow, with_inflow)
        x = state.pack((u, ty, tz, q), inflow)
        # two stored differences per depth step: keep them under MIX_MEMORY bytes
        depth = int(min(MIX_DEPTH, max(2, MIX_MEMORY // (16 * x.size))))
        mixer = AndersonMixer(depth=depth) if self.accelerate else None
        lag = km.stress_coefficient / (1.0 - km.stress_coefficient)

        control = IterationControl(tol, self.max_iter, require_small_change=True)  # Anderson: see iteration
        while True:
            (u, ty, tz, q), inflow = state.unpack(x)
            kernels.sweep(phi1, phi3, *inflow, c, cos_th, sin_th, nu_delta, u, q, ty, tz, src, by, fy, bz, fz)
            kernels.moments(phi1, phi3, weight, c, cos_th, sin_th, un, tyn, tzn, qn)
            un += u0
            tyn += ty0
            tzn += tz0
            qn += q0
            if corr is not None:
                rhs = un - u
                if lag != 0.0:
                    # ES-BGK: the shear stress in the gain lags one sweep; its
                    # change adds -lag div(r_tau) / (nu delta) to the right-hand
                    # side (as in the plane channel, kernels._synthetic_step)
                    rhs = rhs - (lag / nu_delta) * (np.gradient(tyn - ty, y, axis=0) + np.gradient(tzn - tz, z, axis=1))
                e = corr.solve(rhs)
                un = un + e
            change = moment_change(poly, (un, qn, tyn), (u, q, ty))
            if not np.all(np.isfinite(un)):
                change = float("nan")
            stop = control.stop(change)
            if delta == 0.0 and walls.f[0] == 0.0 and math.isfinite(change):
                control.exact()  # free-molecular, diffuse walls: one sweep is exact
                break
            if stop:
                break
            inflow = walls.inflow(phi1, phi3, at_walls) if state.with_inflow else None  # diffuse walls: no inflow
            if corr is not None and state.with_inflow:
                correct_inflow(inflow, e, walls.f[0])
            gx = state.pack((un, tyn, tzn, qn), inflow)
            x = mixer.mix(x, gx) if mixer is not None else gx
        # report the moments of the last sweep
        disc = {
            "n_space": ny,
            "n_velocity": int(n_velocity),
            "n_y_half": ny,
            "n_z_half": nz,
            "n_angle_quadrant": na,
            "n_speed": nc,
            "method": "discrete ordinates, second-order upwind, quarter domain, uncollided part exact in the angle",
            "uncollided_share": w_unc,
            "angle_rule": "Gauss-Legendre, graded towards the long side (duct.grids.angle_rule)",
            "tolerance": control.tol,
            "max_iter": control.max_iter,
            **control.describe(),
            "anderson_depth": int(mixer.depth) if mixer is not None else 0,
            "anderson_restarts": int(mixer.restarts) if mixer is not None else 0,
        }
        if walls.cl:
            disc["wall_kernel_defect"] = walls.defect
        return self.assemble_result(y, z, un, qn, disc, control, t_start)

    def assemble_result(self, y, z, u, q, disc, control, t_start) -> SolverResult:
        """The SolverResult of one solve: G, Q per unit width, the profiles and the records."""
        problem, a_r = self.problem, self.aspect_ratio
        drive = drive_name(problem)
        # quarter -> full cross-section: factor 4; G = (2/A) int int u
        coefficients = flow_rate_coefficients(
            problem,
            (8.0 / a_r) * grids.trapezoid_2d(y, z, u),
            -(8.0 / a_r) * grids.trapezoid_2d(y, z, q),
            "(2/A) int int u",
            "-(2/A) int int q",
            per="width and unit ",
        )
        coords = {
            "y": Quantity(
                y, "1", "coordinate across the height, units of the height H (wall at 0, mid-plane at 0.5)", ("y",)
            ),
            "z": Quantity(z, "1", "coordinate across the width, units of H (wall at 0, mid-plane at A/2)", ("z",)),
        }
        profiles = {
            "velocity": Quantity(u, "1", f"axial flow velocity per unit {drive}, units of v0", ("y", "z")),
            "heat_flux": Quantity(q, "1", f"axial heat flux per unit {drive}, units of p v0", ("y", "z")),
        }
        params = {
            "geometry": "duct",
            "problem": problem,
            "delta": self.delta,
            "aspect_ratio": a_r,
            "length_scale": "duct height (smaller side)",
            "kinetic_model": self.km.name,
            **self.wall.describe(),
            "accelerate": self.accelerate,
        }
        return SolverResult(
            "duct",
            problem,
            params,
            coords,
            profiles,
            coefficients,
            disc,
            control.record(),
            time.perf_counter() - t_start,
        )
