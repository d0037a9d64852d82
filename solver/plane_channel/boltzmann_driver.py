"""Plane-channel Poiseuille and thermal creep with the linearized Boltzmann equation (hard spheres, VHS).

Equation (units of ``problems``: y in the gap a, c in v0, delta = p a / (mu v0)),
h = c_x Phi(y, c, mu), mu = c_y / |c|:

    c mu dPhi/dy + kd nu(c) Phi = kd K[Phi] - S(c),      kd = kappa delta,
    S = X_P (Poiseuille),  S = (c^2 - 5/2) X_T (thermal creep),

with -nu + K the hard-sphere or VHS (viscosity index omega) operator of
``linearized_boltzmann`` in units of n d^2 v0 and kappa = n d^2 mu v0 / p
computed from the same operator (``linearized_boltzmann.viscosity_factor``,
the exact viscosity of the molecular model),
so that delta is the rarefaction parameter of the model equations.  Maxwell
walls at rest: Phi_out = (1 - alpha) Phi_in(specular) (the diffuse part of an
odd-in-c_x perturbation vanishes).  Reported, as in ``problems``:
G_P = -2 int u dy, Q_P = 2 int q dy, G_T = 2 int u dy, Q_T = -2 int q dy, with
u = pi^(-3/2) int c_x h e^(-c^2) dc and q = pi^(-3/2) int c_x (c^2 - 5/2) h e^(-c^2) dc.

Transport: each node (c_i, mu_j) obeys a 1-D transport equation which, divided
by nu(c_i), is the model equations' one with speed c mu / nu and collision
rate kd; it is solved by the plane channel's linear discontinuous Galerkin
sweep (``kernels.transport_sweep``) on its wall-clustered grid.

Iteration: source iteration accelerated by a diffusion-synthetic correction
of the velocity (Larsen, Nucl. Sci. Eng. 82 (1982) 47), the momentum-based
variant of the general synthetic iterative scheme of Su, Zhu & Wu,
J. Comput. Phys. 407 (2020) 109245.  The sweep balances x-momentum exactly
in every cell because the discrete operator conserves momentum:
    (1/2) P_xy' + X_P/2 = -kd r,   r = pi^(-3/2) int c_x nu (h^new - h^old) dc,
so with the Navier-Stokes closure P_xy = -u'/delta for the error only, the
velocity error e obeys  -(1/delta) e'' = 2 kd r  with first-order slip at the
walls, solved with the continuous linear elements of
``kernels._solve_diffusion_correction``; Phi += 2 e (a shifted Maxwellian)
then corrects every node.  The correction vanishes at the fixed point, so
plain and accelerated iterations converge to the same discrete solution.

Stopping: ``knudsweep.solver.iteration.IterationControl`` on the larger of the
relative changes of the velocity and of the heat flux (both enter the reported
coefficients: G and Q), so both are converged to tol when the iteration stops.
"""

from __future__ import annotations

import math
import time

import numpy as np

from knudsweep.solver.iteration import IterationControl, default_max_iter
from knudsweep.solver.limits import SIGMA_P_BGK
from knudsweep.solver.plane_channel import grids, kernels
from knudsweep.solver.plane_channel import linearized_boltzmann as lb
from knudsweep.solver.plane_channel.driver import plate_parameters
from knudsweep.solver.resolution import check_count, check_estimate_options, solve_with_estimate
from knudsweep.solver.result import CONVERGED, Quantity, SolverResult
from knudsweep.solver.walls import MaxwellWall, slip_factor

PROBLEMS = ("poiseuille", "thermal_creep")
MOLECULES = ("hard_sphere", "vhs")
DELTA_RANGE = (1e-3, 1e3)
TOL_RANGE = (1e-14, 1e-2)
MIN_SPEED, MAX_SPEED = 4, 24
# below this delta the direction rule is graded towards mu = 0 (as grids.GRADED_BELOW for the model equations)
GRADED_BELOW = 0.5
# Slip length (units of ell) in the wall condition of the error equation:
# the BGK diffuse value (knudsweep.solver.limits), scaled by walls.slip_factor;
# it sets only the speed of convergence, never the converged result.
_SLIP_LENGTH = SIGMA_P_BGK  # knudsweep.solver.limits


def default_n_speed(delta: float) -> int:
    """Speed nodes: 8 (velocity-convergence study in tests/verification/test_plane_channel_boltzmann.py)."""
    return 8


def velocity_level(n_speed: int, delta: float) -> tuple[int, int, int, float | None]:
    """(n_speed, n_mu_half, n_legendre, graded_smallest) tied to the speed count.

    Directions: n_mu_half = 2 n_speed Gauss-Legendre nodes (on [0.1, 1] below
    delta = GRADED_BELOW, with graded panels from min(delta/100, 1e-3) to 0.1,
    ``linearized_boltzmann.direction_rule``); Legendre order 2 n_speed.
    """
    n_leg = 2 * n_speed
    if delta >= GRADED_BELOW:
        return n_speed, 2 * n_speed, n_leg, None
    return n_speed, 2 * n_speed, n_leg, min(1e-2 * delta, 1e-3)


def _coarser_speed(n_speed: int) -> int:
    return max(MIN_SPEED, int(round(0.75 * n_speed)))


def resolution_ladder(delta: float) -> list[tuple[int, int]]:
    """(n_space, n_speed) levels: n_space doubles, n_speed grows by 4/3 (level 2 = defaults)."""
    n0 = max(grids.MIN_SPACE, grids.default_n_space(delta) // 4)
    v0 = max(MIN_SPEED, default_n_speed(delta) * 9.0 / 16.0)
    out = []
    k = 0
    while True:
        n, v = n0 * 2**k, int(round(v0 * (4.0 / 3.0) ** k))
        if n > grids.MAX_SPACE or v > MAX_SPEED:
            return out
        out.append((n, v))
        k += 1


def solve_plane_channel_boltzmann(
    problem: str,
    *,
    delta: float,
    molecule: str = "hard_sphere",
    omega: float | None = None,
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
    """Poiseuille or thermal creep between parallel plates, linearized Boltzmann equation.

    Parameters
    ----------
    problem : "poiseuille" or "thermal_creep".
    delta : rarefaction parameter p a / (mu v0), a = gap, in [1e-2, 1e3].
    molecule : "hard_sphere" or "vhs".
    omega : VHS viscosity index in [0.5, 1] (mu ~ T^omega; 0.5 hard spheres, 1 Maxwell
        molecules), required for "vhs", must be None (or 0.5) for "hard_sphere".
    lower_wall, upper_wall : knudsweep.solver.walls.MaxwellWall (upper None: same as lower).
    n_space : cells across the gap (default grids.default_n_space).
    n_velocity : speed nodes n_speed in [4, 24]; directions and Legendre order
        follow from it (``velocity_level``).
    max_iter, tol, accuracy, error_estimate : as ``solve_plane_channel``.
    accelerate : diffusion-synthetic acceleration (module docstring).

    Returns a SolverResult (family "plane_channel") with G_P, Q_P or G_T, Q_T
    and their "<name>_error_estimate"; failed convergence gives status "failed".
    """
    t0 = time.perf_counter()
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
    if molecule not in MOLECULES:
        raise ValueError(f"molecule: must be one of {', '.join(MOLECULES)}, got {molecule!r}")
    if molecule == "vhs":
        if omega is None:
            raise ValueError(f"omega: molecule vhs needs omega in [{lb.OMEGA_RANGE[0]}, {lb.OMEGA_RANGE[1]}], got None")
        omega = lb.check_omega(omega)
    elif omega is not None and omega != 0.5:
        raise ValueError(f"omega: hard spheres have omega = 0.5 (use molecule='vhs'), got {omega!r}")
    else:
        omega = 0.5
    if upper_wall is None:
        upper_wall = lower_wall
    for name, wall in (("lower_wall", lower_wall), ("upper_wall", upper_wall)):
        if not isinstance(wall, MaxwellWall):
            raise ValueError(f"{name}: must be a MaxwellWall, got {type(wall).__name__}")
    tol = float(tol)
    if not (TOL_RANGE[0] <= tol <= TOL_RANGE[1]):
        raise ValueError(f"tol: must be in [{TOL_RANGE[0]:g}, {TOL_RANGE[1]:g}], got {tol!r}")
    accuracy = check_estimate_options(accuracy, error_estimate, n_space, n_velocity)
    if not isinstance(accelerate, bool):
        raise ValueError(f"accelerate: must be True or False, got {accelerate!r}")
    n_space = (
        grids.default_n_space(delta)
        if n_space is None
        else check_count("n_space", n_space, grids.MIN_SPACE, grids.MAX_SPACE)
    )
    n_velocity = (
        default_n_speed(delta) if n_velocity is None else check_count("n_velocity", n_velocity, MIN_SPEED, MAX_SPEED)
    )
    if max_iter is None:
        max_iter = default_max_iter(accelerate)
    else:
        max_iter = check_count("max_iter", max_iter, 1, 100_000_000)

    def run(ns, nv, it_tol):
        return _solve_once(
            problem, delta, molecule, omega, lower_wall, upper_wall, ns, nv, max_iter, it_tol, accelerate
        )

    return solve_with_estimate(
        run,
        n_space,
        n_velocity,
        tol=tol,
        accuracy=accuracy,
        error_estimate=error_estimate,
        ladder=resolution_ladder(delta),
        coarse_level=(max(grids.MIN_SPACE, n_space // 2), _coarser_speed(n_velocity)),
        t_start=t0,
        coarse_how="one coarser ladder step (half the cells, 3/4 of the speed nodes)",
        ladder_how="accuracy-driven refinement along boltzmann_driver.resolution_ladder",
    )


def _solve_once(problem, delta, molecule, omega, lower_wall, upper_wall, n_space, n_speed, max_iter, tol, accelerate):
    t0 = time.perf_counter()
    ns, n_mu, n_leg, graded = velocity_level(n_speed, delta)
    vs = lb.velocity_set(ns, n_mu, n_leg, graded, omega)
    K = lb.collision_matrix(vs)
    kappa_hs = lb.viscosity_factor(ns, omega=omega)
    kd = kappa_hs * delta
    m = vs.m
    nu = vs.node_nu()
    speed = vs.node_speed()
    mu = vs.node_mu()
    c_eff = speed * mu / nu
    y = grids.channel_nodes(n_space)
    wy = np.diff(y)
    g, A11, A12, A21, A22 = kernels.cell_coefficients(y, c_eff, kd)
    R_low = np.ascontiguousarray(((1.0 - lower_wall.alpha) * np.eye(m))[None])
    R_up = np.ascontiguousarray(((1.0 - upper_wall.alpha) * np.eye(m))[None])
    Fw = np.zeros((1, m))
    drive = np.ones(m) if problem == "poiseuille" else speed**2 - 2.5
    W = vs.velocity_weights() / lb.SQRT_PI  # u = sum_{sign,k} W Phi
    Wq = W * (speed**2 - 2.5)
    Wp = 2.0 * W * speed * mu  # P_xy / p, sign + for mu > 0

    T = kernels.wall_transmission(A11, A12, A21, A22)
    # (I - R_up T R_low T)^-1 of kernels._close_upper_wall; diagonal for Maxwell walls
    G = np.diag(1.0 / (1.0 - (1.0 - upper_wall.alpha) * (1.0 - lower_wall.alpha) * T * T))[None]
    close_walls = accelerate and (lower_wall.alpha < 1.0 or upper_wall.alpha < 1.0)

    F = np.zeros((1, 2, m, n_space, 2))
    S = np.zeros_like(F)
    bvals = np.zeros((1, m))
    wall_in = np.zeros((1, m))
    f_used = np.zeros((1, m))
    f_new = np.zeros((1, m))
    d_up = np.zeros((1, m))
    d_low = np.zeros((1, m))
    M = np.zeros((3, n_space, 2))
    M_old = np.zeros_like(M)
    r0 = np.zeros(n_space)
    r1 = np.zeros(n_space)
    x = np.zeros(n_space + 1)
    dummy = np.zeros((1, n_space, 2))
    robin_low = _SLIP_LENGTH * slip_factor(lower_wall)
    robin_up = _SLIP_LENGTH * slip_factor(upper_wall)
    nu_full = np.concatenate([nu, nu])
    control = IterationControl(tol, max_iter)

    def moments(out):
        flat = F[0].reshape(2 * m, n_space * 2)
        out[0] = (np.concatenate([W, W]) @ flat).reshape(n_space, 2)
        out[1] = (np.concatenate([Wq, Wq]) @ flat).reshape(n_space, 2)
        out[2] = (np.concatenate([Wp, -Wp]) @ flat).reshape(n_space, 2)

    while True:
        flat = F[0].reshape(2 * m, n_space * 2)
        KF = (K @ flat).reshape(2, m, n_space, 2)
        S[0] = kd * KF / nu[None, :, None, None]
        S[0, :, :, :, 0] -= (drive / nu)[None, :, None]
        F_old = F.copy()
        if close_walls:
            wall_in[0] = F[0, 0, :, -1, 0] + F[0, 0, :, -1, 1]
            kernels._boundary_values(wall_in, R_up, Fw, f_used)
        kernels.transport_sweep(F, S, g, A11, A12, A21, A22, R_low, R_up, Fw, Fw, bvals, wall_in)
        if close_walls:
            wall_in[0] = F[0, 0, :, -1, 0] + F[0, 0, :, -1, 1]
            kernels._boundary_values(wall_in, R_up, Fw, f_new)
            kernels._close_upper_wall(F, A11, A12, A21, A22, R_low, R_up, Fw, T, G, f_used, f_new, d_up, d_low)
        M_old[:] = M
        if accelerate:
            # nu-weighted velocity change of the sweep (cell averages and slopes)
            dF = (F[0] - F_old[0]).reshape(2 * m, n_space * 2)
            r = ((np.concatenate([W, W]) * nu_full) @ dF).reshape(n_space, 2)
            r0[:] = r[:, 0]
            r1[:] = r[:, 1]
            kernels._solve_diffusion_correction(
                wy, 1.0 / delta, robin_low, robin_up, r0, r1, 2.0 * kd, 0.0, 0, dummy, dummy, x
            )
            F[0, :, :, :, 0] += (x[:-1] + x[1:])[None, None, :]
            F[0, :, :, :, 1] += (x[1:] - x[:-1])[None, None, :]
        moments(M)
        # every reported moment: velocity (G) and heat flux (Q); the velocity alone left Q_P 1.5e-7 off at tol 1e-8
        change = max(kernels._change_norm(M, M_old, wy, 0, 1e-3), kernels._change_norm(M, M_old, wy, 1, 1e-3))
        if control.stop(change):
            break

    integral = lambda f: float(wy @ f)  # noqa: E731
    if problem == "poiseuille":
        coeffs = {
            "G_P": (-2.0 * integral(M[0, :, 0]), "reduced flow rate of Poiseuille flow"),
            "Q_P": (2.0 * integral(M[1, :, 0]), "reduced heat flow of Poiseuille flow"),
        }
        drive_name = "X_P = (a/p) dp/dx"
    else:
        coeffs = {
            "G_T": (2.0 * integral(M[0, :, 0]), "reduced flow rate of thermal creep"),
            "Q_T": (-2.0 * integral(M[1, :, 0]), "reduced heat flow of thermal creep"),
        }
        drive_name = "X_T = (a/T) dT/dx"
    prof = {
        "velocity": (M[0, :, 0], f"x-velocity / (v0 {drive_name})"),
        "heat_flux": (M[1, :, 0], f"x-heat flux / (p v0 {drive_name})"),
        "shear_stress": (M[2, :, 0], f"shear stress P_xy / (p {drive_name})"),
    }
    if control.status == CONVERGED and not all(math.isfinite(v) for v, _ in coeffs.values()):
        control.fail("non-finite coefficient")
    convergence = control.record()
    parameters = {
        "problem": problem,
        "delta": delta,
        "kinetic_model": f"boltzmann_{molecule}",
        **({"omega": omega} if molecule == "vhs" else {}),
        "prandtl": lb.prandtl_number(ns, omega),
        **plate_parameters(lower_wall, upper_wall),
    }
    discretization = {
        "n_space": int(n_space),
        "space_grid": "y = sin(pi xi / 2) / 2, xi uniform",
        "space_scheme": "linear discontinuous Galerkin (upwind), profiles are cell averages",
        **vs.description,
        "n_velocity": int(n_speed),
        "collision_operator": (
            "linearized Boltzmann, hard spheres"
            if molecule == "hard_sphere"
            else f"linearized Boltzmann, VHS omega = {omega:g}"
        )
        + ", kernel decomposition with Legendre moments (linearized_boltzmann)",
        "viscosity_factor": kappa_hs,
        "tol": tol,
        "max_iter": int(max_iter),
        "accelerate": bool(accelerate),
        "acceleration": "diffusion-synthetic on the velocity (boltzmann_driver)" if accelerate else "none",
        **control.describe(),
        "stopping_moments": "velocity and heat flux (the larger relative change)",
    }
    yc = 0.5 * (y[1:] + y[:-1])
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
