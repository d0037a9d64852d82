"""Poiseuille flow and thermal creep through a long tube with the linearized Boltzmann equation (hard spheres, VHS).

Equation (units of ``knudsweep.solver.cross_section``: radius a = 1, c in v0,
delta = p a / (mu v0)), per unit gradient X_P = -(a/p) dp/dz or X_T = (a/T) dT/dz:

    c_perp . grad h + kd nu(c) h = kd K h + c_z                 (poiseuille)
    c_perp . grad h + kd nu(c) h = kd K h - c_z (c^2 - 5/2)     (thermal creep)

with -nu + K the hard-sphere or VHS operator (``tube.linearized_boltzmann``)
in units of n d^2 v0, kd = kappa delta and kappa = n d^2 mu v0 / p from the
same operator (``plane_channel.linearized_boltzmann.viscosity_factor``), so
delta is the rarefaction parameter of the model equations.  Maxwell wall at
rest: h_out = (1 - alpha) h_in(specular) (the diffuse part of an odd-in-c_z
perturbation vanishes).  Moments u = pi^(-3/2) int c_z h e^(-c^2) dc,
q = pi^(-3/2) int c_z (c^2 - 5/2) h e^(-c^2) dc; reduced flow rates as the
model-equation tube (``tube.driver``; Sharipov & Seleznev, J. Phys. Chem. Ref.
Data 27 (1998) 657): G = 4 int u r dr, Q = -4 int q r dr.

Iteration: the gain kd K h is evaluated from the nodal values (spherical
harmonics in the local frame, ``tube.linearized_boltzmann``), the transport
is solved exactly along chords (long characteristics); each sweep is followed
by a diffusion-synthetic correction of the velocity (Larsen, Nucl. Sci. Eng.
82 (1982) 47; the momentum variant of the general synthetic iterative scheme
of Su, Zhu & Wu, J. Comput. Phys. 407 (2020) 109245): the discrete operator
conserves momentum, so the error of the sweep obeys exactly
div tau_e = kd r, r = pi^(-3/2) int c_z nu (h^new - h^old) e^(-c^2) dc,
closed with tau_e = -u_e' / (2 delta) and first-order slip
(``tube.acceleration.RadialDiffusion``); h += 2 c_z u_e.  The correction
vanishes at the fixed point.  Stopping rule: ``knudsweep.solver.iteration`` on
the largest relative change of u and q.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from knudsweep.solver.cross_section import MAX_DELTA, PROBLEMS, flow_rate_coefficients
from knudsweep.solver.iteration import IterationControl, default_max_iter
from knudsweep.solver.limits import SIGMA_P_BGK
from knudsweep.solver.plane_channel import linearized_boltzmann as plane_lb
from knudsweep.solver.resolution import (
    check_count,
    check_estimate_options,
    coarser_level,
    nested_ladder,
    solve_channel,
)
from knudsweep.solver.result import CONVERGED, Quantity, SolverResult
from knudsweep.solver.tube import grids, kernels
from knudsweep.solver.tube import linearized_boltzmann as tlb
from knudsweep.solver.tube.acceleration import RadialDiffusion
from knudsweep.solver.walls import MaxwellWall, slip_factor

MOLECULES = tlb.MOLECULES
SPEED_RANGE = (4, 24)  # n_velocity (speed nodes), as the plane channel's operator
SPACE_RANGE = (5, 401)
# Error reduction per ladder step assumed by the Richardson estimate; see
# tests/verification/test_tube_boltzmann.py (grid study) for the measured ratios.
ASSUMED_RATIO = 4.0
# Below this delta the polar rule is graded towards the axis direction (polar_grading).  Measured: at delta = 0.1
# plain Gauss-Legendre with 8, 12, 16 polar nodes moves G_P by 4e-5 and Q_P by 5e-4; at delta = 1 (BGK in this
# code) 8 plain nodes err by 7e-6 in G_P, which the coarser level of the estimate does not see; graded rules
# agree to 1e-8 (smallest edge 1e-2 or 1e-3 alike); at delta = 10 plain and graded agree to 1e-7.
GRADED_BELOW = 10.0
# Slip length (units of ell) in the wall condition of the correction: the BGK
# diffuse value times walls.slip_factor; it sets the speed of convergence only.
_SLIP_LENGTH = SIGMA_P_BGK  # knudsweep.solver.limits


def default_sizes(delta: float) -> tuple[int, int]:
    """(radial nodes, speed nodes) used when not given: 21 radial nodes up to delta = 1, 41 up to 100, 61 above;
    12 speeds below delta = 1, 8 from there (grid study in tests/verification/test_tube_boltzmann.py).

    Above delta = 100 the iteration needs radial cells that are not too thick: at delta = 1000 (tol 1e-8) 21 nodes
    do not converge in 200 iterations, 31 nodes take 85, 41 and 61 nodes about 40 (measured).

    At small delta the speed rule (Gauss for c^2 e^(-c^2), not graded) and the harmonic order tied to it dominate:
    at delta = 0.1 (BGK in this code) Q_P moves by 9e-6, 6e-7, 4e-8 from 8 to 12, 16, 24 speeds.
    """
    return (21 if delta <= 1.0 else 41 if delta <= 100.0 else 61), (12 if delta < 1.0 else 8)


def velocity_level(n_speed: int) -> tuple[int, int, int]:
    """(n_polar, n_angle, n_legendre) tied to the speed count: polar nodes on (0, pi/2) = n_speed,
    in-plane angles on the half circle 1.5 n_speed (even), harmonic order n_speed."""
    return n_speed, 2 * ((int(1.5 * n_speed) + 1) // 2), n_speed


def polar_grading(delta: float) -> float | None:
    """Smallest graded polar panel edge x = 2 theta / pi (``linearized_boltzmann.polar_rule``): min(1e-2, delta/100)
    for 0 < delta < GRADED_BELOW, else None (plain Gauss-Legendre)."""
    return min(1e-2, 1e-2 * delta) if 0.0 < delta < GRADED_BELOW else None


def resolution_ladder(delta: float) -> list[tuple[int, int]]:
    """(n_space, n_velocity) coarse to fine through the default (nested radial grids, speeds (4/3)^k times the
    default's), at most SPACE_RANGE[1] radial nodes and SPEED_RANGE[1] speeds."""
    ns, nv = default_sizes(delta)
    n_min = 31 if delta > 100.0 else 6  # thick cells slow the iteration (default_sizes)
    return nested_ladder(ns, nv, n_min, lambda n, v: n <= SPACE_RANGE[1] and v <= SPEED_RANGE[1])


def solve_tube_boltzmann(
    problem: str,
    *,
    delta: float,
    molecule: str = "hard_sphere",
    omega: float | None = None,
    wall: MaxwellWall = MaxwellWall(1.0),  # noqa: B008  (frozen dataclass, safe default)
    n_space: int | None = None,
    n_velocity: int | None = None,
    max_iter: int | None = None,
    tol: float = 1e-8,
    accelerate: bool = True,
    accuracy: float | None = None,
    error_estimate: bool = True,
) -> SolverResult:
    """Poiseuille or thermal creep in a long tube, linearized Boltzmann equation (module docstring).

    problem : "poiseuille" or "thermal_creep".
    delta : rarefaction parameter p a / (mu v0) on the radius a, in [0, 1e3] (0: one exact sweep).
    molecule : "hard_sphere", "vhs" (omega required, in [0.5, 1]) or "bgk" (the BGK
        operator on the same velocity set and sweep: a check of the transport).
    wall : knudsweep.solver.walls.MaxwellWall.
    n_space : radial nodes in [5, 401]; n_velocity : speed nodes in [4, 24] (polar and in-plane
        angles and harmonic order follow, ``velocity_level``).
    max_iter, tol, accelerate, accuracy, error_estimate : as ``tube.solve_tube``.

    Returns a SolverResult (family "tube") with G_P, Q_P or G_T, Q_T and
    "<name>_error_estimate"; a failed iteration gives status "failed" with the reason.
    """
    t_start = time.perf_counter()
    flow = TubeBoltzmannFlow.checked(problem, delta, molecule, omega, wall, max_iter, tol, accelerate)
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    ns, nv = default_sizes(flow.delta)
    ns = ns if n_space is None else check_count("n_space", n_space, *SPACE_RANGE)
    nv = nv if n_velocity is None else check_count("n_velocity", n_velocity, *SPEED_RANGE)
    return solve_channel(
        flow, ns, nv, tol=float(tol), accuracy=accuracy, error_estimate=error_estimate, t_start=t_start
    )


@dataclass(frozen=True)
class TubeBoltzmannFlow:
    """One tube problem with the linearized Boltzmann operator (a ``resolution.ChannelSolver``)."""

    problem: str
    delta: float
    molecule: str
    omega: float
    wall: MaxwellWall
    max_iter: int
    accelerate: bool

    assumed_ratio = ASSUMED_RATIO
    coarse_how = "one coarser step (half the radial intervals, 3/4 of the speed nodes)"
    ladder_how = "accuracy-driven refinement along boltzmann_driver.resolution_ladder"

    @classmethod
    def checked(cls, problem, delta, molecule, omega, wall, max_iter, tol, accelerate) -> TubeBoltzmannFlow:
        """The problem from user inputs; ValueError naming the field and its range otherwise."""
        if problem not in PROBLEMS:
            raise ValueError(f"problem: must be one of {', '.join(PROBLEMS)}, got {problem!r}")
        try:
            d = float(delta)
        except (TypeError, ValueError):
            raise ValueError(f"delta: must be a number in [0, {MAX_DELTA:g}], got {delta!r}") from None
        if not (math.isfinite(d) and 0.0 <= d <= MAX_DELTA):
            raise ValueError(f"delta: must be in [0, {MAX_DELTA:g}], got {delta!r}")
        if molecule not in MOLECULES:
            raise ValueError(f"molecule: must be one of {', '.join(MOLECULES)}, got {molecule!r}")
        if molecule == "vhs":
            if omega is None:
                raise ValueError("omega: molecule vhs needs omega in [0.5, 1], got None")
            omega = plane_lb.check_omega(omega)
        elif omega is not None and omega != 0.5:
            raise ValueError(f"omega: only molecule 'vhs' takes omega (must be None or 0.5 here), got {omega!r}")
        else:
            omega = 0.5
        if not isinstance(wall, MaxwellWall):
            raise ValueError(f"wall: must be a MaxwellWall, got {type(wall).__name__}")
        t = float(tol)
        if not (0.0 < t < 1.0):
            raise ValueError(f"tol: must be in (0, 1), got {tol!r}")
        if not isinstance(accelerate, bool):
            raise ValueError(f"accelerate: must be True or False, got {accelerate!r}")
        if max_iter is None:
            max_iter = default_max_iter(accelerate)
        max_iter = check_count("max_iter", max_iter, 1, 100_000_000)
        return cls(problem, d, molecule, omega, wall, max_iter, accelerate)

    def resolution_ladder(self) -> list[tuple[int, int]]:
        return resolution_ladder(self.delta)

    def coarser_level(self, n_space: int, n_velocity: int) -> tuple[int, int]:
        return coarser_level(n_space, n_velocity)

    def solve_once(
        self,
        n_space: int,
        n_velocity: int,
        tol: float,
        n_polar: int | None = None,
        n_angle: int | None = None,
        n_legendre: int | None = None,
    ) -> SolverResult:
        """One solve at a fixed resolution; n_polar, n_angle, n_legendre override ``velocity_level`` (studies)."""
        t_start = time.perf_counter()
        delta = self.delta
        npol, na, n_leg = velocity_level(n_velocity)
        npol, na, n_leg = (d if x is None else int(x) for x, d in ((n_polar, npol), (n_angle, na), (n_legendre, n_leg)))
        grid = grids.TubeGrid(n_space, na, 4, max(delta, 1.0))  # radial nodes and in-plane angles only
        r = grid.r
        graded = polar_grading(delta)
        vs = tlb.velocity_set(n_velocity, npol, grid.theta, grid.theta_weight, n_leg, graded)
        nu, blocks, kappa = tlb.collision_blocks(vs, self.molecule, self.omega)
        kd = kappa * delta
        speed, mu = vs.speed(), vs.polar()
        c_perp = vs.c_perp()
        nu_v = np.repeat(nu, vs.mu.size)
        kappa_v = kd * nu_v / c_perp
        cz = speed * mu
        drive = cz if self.problem == "poiseuille" else -cz * (speed**2 - 2.5)
        reflect = 1.0 - self.wall.alpha
        nseg, ds, jj, dr, cp = kernels.build_rays(r, grid.cos_th)
        wu = vs.weight  # (na, nv)
        wq = wu * (speed**2 - 2.5)[None, :]
        wr = wu * nu_v[None, :]

        h = np.zeros((r.size, na, vs.nv))
        h_new = np.zeros_like(h)
        u = np.zeros(r.size)
        q = np.zeros(r.size)
        diffusion = (
            RadialDiffusion(r, delta, _SLIP_LENGTH * slip_factor(self.wall))
            if (self.accelerate and delta > 0.0)
            else None
        )
        control = IterationControl(tol, self.max_iter)
        while True:
            C = tlb.gain_coefficients(vs, blocks, kd, h)
            coef = tlb.spline_coefficients(r, C)
            tlb.sweep(nseg, ds, jj, dr, cp, coef, c_perp, kappa_v, drive, reflect, kernels.VINV, h_new)
            if diffusion is not None:
                res = np.einsum("mv,imv->i", wr, h_new - h)
                corr = diffusion.solve(kd * res)
                h_new += 2.0 * corr[:, None, None] * cz[None, None, :]
            un = np.einsum("mv,imv->i", wu, h_new)
            qn = np.einsum("mv,imv->i", wq, h_new)
            change = max(
                np.max(np.abs(un - u)) / max(np.max(np.abs(un)), 1e-300),
                np.max(np.abs(qn - q)) / max(np.max(np.abs(qn)), 1e-300),
            )
            h, h_new = h_new, h
            u, q = un, qn
            if not np.all(np.isfinite(u)):
                change = float("nan")
            stop = control.stop(change)
            if delta == 0.0 and math.isfinite(change):
                control.exact()  # no collisions: the source is the drive, one sweep is exact
                break
            if stop:
                break
        if control.status == CONVERGED and not (np.all(np.isfinite(u)) and np.all(np.isfinite(q))):
            control.fail("non-finite moments")
        return self._result(r, u, q, vs, n_velocity, kappa, control, t_start, graded)

    def _result(self, r, u, q, vs, n_velocity, kappa, control, t_start, graded) -> SolverResult:
        problem = self.problem
        drive = "pressure gradient X_P" if problem == "poiseuille" else "temperature gradient X_T"
        coefficients = flow_rate_coefficients(
            problem,
            4.0 * grids.radial_integral(r, u),
            -4.0 * grids.radial_integral(r, q),
            "4 int u r dr",
            "-4 int q r dr",
        )
        params = {
            "geometry": "tube",
            "problem": problem,
            "delta": self.delta,
            "length_scale": "tube radius",
            "kinetic_model": f"boltzmann_{self.molecule}",
            **self.wall.describe(),
            "accelerate": self.accelerate,
        }
        if self.molecule == "vhs":
            params["omega"] = self.omega
        disc = {
            "n_space": int(r.size),
            "n_velocity": int(n_velocity),
            "n_radial": int(r.size),
            "n_speed": int(vs.c.size),
            "n_polar": int(vs.mu.size),
            "n_angle_half_circle": int(vs.psi.size),
            "n_legendre": int(vs.n_legendre),
            "polar_smallest": float("nan") if graded is None else float(graded),
            "radial_grid": "r = sin(pi xi / 2), xi uniform",
            "velocity_rule": "speed Gauss (c^2 exp(-c^2)) x polar Gauss-Legendre in theta"
            + (" graded" if graded is not None else "")
            + " x in-plane Gauss-Legendre (two halves)",
            "method": "long characteristics, spherical-harmonic gain along chords (tube.linearized_boltzmann)",
            "collision_operator": {
                "hard_sphere": "linearized Boltzmann, hard spheres",
                "vhs": f"linearized Boltzmann, VHS omega = {self.omega:g}",
                "bgk": "BGK (check operator)",
            }[self.molecule],
            "viscosity_factor": float(kappa),
            "acceleration": "diffusion-synthetic on the velocity (tube.boltzmann_driver)"
            if self.accelerate
            else "none",
            "tolerance": control.tol,
            "max_iter": control.max_iter,
            **control.describe(),
        }
        coords = {"r": Quantity(r, "1", "radial coordinate in units of the tube radius", ("r",))}
        profiles = {
            "velocity": Quantity(u, "1", f"axial flow velocity per unit {drive}, units of v0", ("r",)),
            "heat_flux": Quantity(q, "1", f"axial heat flux per unit {drive}, units of p v0", ("r",)),
        }
        return SolverResult(
            "tube", problem, params, coords, profiles, coefficients, disc, control.record(),
            time.perf_counter() - t_start,
        )  # fmt: skip
