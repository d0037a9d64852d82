"""Fully developed flow through a long channel of any cross-section: the reduced equations tube and duct share.

Equations
---------
Lengths in units of the channel's length scale a (tube radius, duct height),
velocities in units of v0 = sqrt(2kT/m), delta = p a / (mu v0).  The
perturbation h of the Maxwellian (f = f_M (1 + h)) obeys, for the pressure
gradient X_P = -(a/p) dp/dx (``"poiseuille"``) or the temperature gradient
X_T = (a/T) dT/dx (``"thermal_creep"``), per unit gradient,

    c_perp . grad h + nu delta h = nu delta [2 c_x u + model term] + c_x            (poiseuille)
    c_perp . grad h + nu delta h = nu delta [2 c_x u + model term] - c_x (c^2 - 5/2) (thermal creep)

(nu = collision-frequency factor of the model, ``knudsweep.solver.kinetic_models``).
The streaming operator does not touch c_x, so c_x is integrated out exactly:
with w(c_x) = exp(-c_x^2)/sqrt(pi) the two reduced functions

    Phi1 = int c_x h w dc_x ,     Phi3 = int c_x^3 h w dc_x

obey the same 2-D transport equation in the cross-section with in-plane
velocity c_perp = c (cos theta, sin theta) and closed sources (c_x-moments
int c_x^2 w = 1/2, c_x^4 w = 3/4, c_x^6 w = 15/8; :func:`source_polynomials`).
Moments:

    u   = (1/pi) int Phi1 exp(-c^2) d^2c                       (flow velocity)
    tau = (1/pi) int c_perp Phi1 exp(-c^2) d^2c                (shear stress P_x./(2p))
    q   = (1/pi) int [Phi3 + (c^2 - 5/2) Phi1] exp(-c^2) d^2c  (heat flux)

Reduced flow rates (Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998)
657): G = c_S int u dS, Q = -c_S int q dS with the geometry's c_S (tube
4/pi over the disc of radius 1, duct 2/A over the rectangle 1 x A).  G is G_P
or G_T, Q is Q_P or Q_T; Onsager reciprocity gives Q_P = G_T (Sharipov,
Physica A 203 (1994) 437).

This module holds what both geometries need: the checked inputs, the source
coefficients, the in-plane speed rule, the iteration's change measure and the
coefficients of the result.
"""

from __future__ import annotations

import math

import numpy as np

from knudsweep.solver.kinetic_models import get_model
from knudsweep.solver.quadrature import half_range_hermite, log_linear_half_range
from knudsweep.solver.result import Quantity
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

__all__ = [
    "PROBLEMS",
    "MAX_DELTA",
    "GRADED_BELOW",
    "check_inputs",
    "check_resolution",
    "source_polynomials",
    "source_vector",
    "heat_coefficient",
    "speed_rule",
    "moment_change",
    "flow_rate_coefficients",
]

PROBLEMS = ("poiseuille", "thermal_creep")
# Upper end of the accepted delta range of tube and duct: above it the default
# grids do not resolve the thermal-creep Knudsen layer (the slip-flow
# asymptote of ``knudsweep.solver.limits`` applies there).
MAX_DELTA = 1.0e3
VELOCITY_RANGE = (4, 128)  # accepted n_velocity (speed nodes)


def check_inputs(problem, delta, model, wall, tol, max_iter, geometry: str):
    """Validate the arguments tube and duct share; return the kinetic-model object.

    ValueError naming the field and its allowed range otherwise.
    """
    if problem not in PROBLEMS:
        raise ValueError(f"problem: must be one of {', '.join(PROBLEMS)}, got {problem!r}")
    d = float(delta)
    if not (math.isfinite(d) and 0.0 <= d <= MAX_DELTA):
        raise ValueError(
            f"delta: must be in [0, {MAX_DELTA:g}] for the {geometry} solver (larger delta is not resolved "
            f"reliably; use the slip-flow asymptote there), got {delta!r}"
        )
    km = get_model(model)
    if not isinstance(wall, (MaxwellWall, CercignaniLampisWall)):
        raise ValueError(f"wall: must be a MaxwellWall or CercignaniLampisWall, got {type(wall).__name__}")
    t = float(tol)
    if not (0.0 < t < 1.0):
        raise ValueError(f"tol: must be in (0, 1), got {tol!r}")
    if max_iter is not None and (isinstance(max_iter, bool) or int(max_iter) != max_iter or int(max_iter) < 1):
        raise ValueError(f"max_iter: must be an integer >= 1, got {max_iter!r}")
    return km


def check_resolution(n_space, n_velocity, space_max: int) -> tuple[int | None, int | None]:
    """Checked (n_space, n_velocity): None stays None; n_space in [5, space_max], n_velocity in VELOCITY_RANGE."""
    if n_space is not None:
        if isinstance(n_space, bool) or int(n_space) != n_space or not 5 <= int(n_space) <= space_max:
            raise ValueError(f"n_space: must be an integer in [5, {space_max}], got {n_space!r}")
        n_space = int(n_space)
    lo, hi = VELOCITY_RANGE
    if n_velocity is not None:
        if isinstance(n_velocity, bool) or int(n_velocity) != n_velocity or not lo <= int(n_velocity) <= hi:
            raise ValueError(f"n_velocity: must be an integer in [{lo}, {hi}], got {n_velocity!r}")
        n_velocity = int(n_velocity)
    return n_space, n_velocity


def source_polynomials(problem: str, heat_coef: float, stress_coef: float) -> dict:
    """Coefficients of the reduced sources (see module docstring).

    Returns a dict with, for Phi1 and Phi3 respectively, the factors that
    multiply u, q (times a polynomial in c^2), tau (times c_perp) and the drive.
    For a c_x g(c) term the Phi1/Phi3 sources are g/2 and 3g/4; for c_x^3 k(c)
    they are 3k/4 and 15k/8.
    """
    # drive: poiseuille c_x -> (1/2, 3/4) ; thermal -c_x(c^2-5/2) = -c_x(c_p^2-5/2) - c_x^3
    if problem == "poiseuille":
        d1 = (0.5, 0.0)  # constant, c^2-coefficient
        d3 = (0.75, 0.0)
    else:
        d1 = (0.5, -0.5)  # -(c^2 - 1)/2
        d3 = (0.0, -0.75)  # -(3/4) c^2
    return {
        "u1": 1.0,
        "u3": 1.5,
        # Shakhov term K c_x (c^2-5/2) q: Phi1 K q (c^2-1)/2 ; Phi3 (3/4) K q c^2
        "q1": (-0.5 * heat_coef, 0.5 * heat_coef),
        "q3": (0.0, 0.75 * heat_coef),
        # ES term 4 b c_x (c_perp . tau): Phi1 2 b ; Phi3 3 b
        "t1": 2.0 * stress_coef,
        "t3": 3.0 * stress_coef,
        "d1": d1,
        "d3": d3,
    }


def source_vector(poly: dict, nu_delta: float, drive_share: float = 1.0) -> np.ndarray:
    """The 12 source coefficients the sweeps read: S1 from [0:6], S3 from [6:12].

    S1 = src[0] u + (src[1] + src[2] c^2) q + src[3] c_perp.tau + src[4] + src[5] c^2,
    S3 likewise; drive_share multiplies the drive terms (the duct sweeps only
    the part of the drive not taken analytically).
    """
    return np.array(
        [
            nu_delta * poly["u1"],
            nu_delta * poly["q1"][0],
            nu_delta * poly["q1"][1],
            nu_delta * poly["t1"],
            drive_share * poly["d1"][0],
            drive_share * poly["d1"][1],
            nu_delta * poly["u3"],
            nu_delta * poly["q3"][0],
            nu_delta * poly["q3"][1],
            nu_delta * poly["t3"],
            drive_share * poly["d3"][0],
            drive_share * poly["d3"][1],
        ]
    )


def heat_coefficient(km) -> float:
    """Shakhov gain factor (4/5)(1 - Pr) (= 4/15 for Pr = 2/3) or 0."""
    return 0.8 * (1.0 - km.prandtl) if km.heat_flux_term else 0.0


# Speed rule for 0 < delta < GRADED_BELOW (log_linear_half_range): 4-point
# Gauss-Legendre panels, n_speed / 8 panels per unit of t = log10(c) + c,
# n_speed / 2 nodes on [1, inf); convergence with n_speed is checked in
# tests/verification/test_velocity_grid_estimates.py.
GRADED_BELOW = 1.0
_SPEED_PANEL_DENSITY = 1.0 / 8.0  # panels per unit of t, per speed node
_SPEED_POINTS = 4


def speed_rule(n_speed: int, delta: float):
    """In-plane speed rule for int_0^inf c exp(-c^2) g(c) dc: nodes c_k, weights (sum 1/2).

    delta = 0 or >= GRADED_BELOW: half-range Hermite rule with n_speed nodes
    (``knudsweep.solver.quadrature``), weights times c.  0 < delta < GRADED_BELOW: the
    factor exp(-nu delta s / c) of a ray of length s varies on every scale
    c ~ delta s < 1, so a composite rule (:func:`log_linear_half_range`, from
    max(min(1e-3, delta/10), 1e-7) to 1) whose every panel narrows as n_speed
    grows: the coarser level of the error estimate then sees the speed error.
    """
    if delta >= GRADED_BELOW or delta == 0.0:
        c, w = half_range_hermite(n_speed)
    else:
        smallest = max(min(1e-3, 0.1 * delta), 1e-7)
        c, w = log_linear_half_range(
            _SPEED_PANEL_DENSITY * n_speed,
            smallest,
            split=1.0,
            slope=1.0,
            points_per_panel=_SPEED_POINTS,
            n_outer=max(4, n_speed // 2),
        )
    return c, w * c


def speed_rule_name(delta: float) -> str:
    """Name of the rule :func:`speed_rule` uses at this delta (for the discretization record)."""
    return "hermite" if (delta >= GRADED_BELOW or delta == 0.0) else "log_linear_panels"


def moment_change(poly: dict, new: tuple, old: tuple) -> float:
    """Relative change of one iteration: max |new - old| / max |new| over u, and q, tau where they feed back.

    new, old : (u, q, tau) arrays; q counts when the model has a heat-flux term
    (S-model), tau when it has a stress term (ES-BGK).
    """
    pairs = [(new[0], old[0])]
    if poly["q1"][1] != 0.0:
        pairs.append((new[1], old[1]))
    if poly["t1"] != 0.0:
        pairs.append((new[2], old[2]))
    return max(np.max(np.abs(a - b)) / max(np.max(np.abs(a)), 1e-300) for a, b in pairs)


def flow_rate_coefficients(problem: str, g: float, q: float, how_g: str, how_q: str, per: str = "") -> dict:
    """{G_P, Q_P} or {G_T, Q_T} as Quantities; per = "" or e.g. "width and " (per unit width)."""
    names = ("G_P", "Q_P") if problem == "poiseuille" else ("G_T", "Q_T")
    return {
        names[0]: Quantity(g, "1", f"reduced mass flow rate per unit {per}{drive_name(problem)}, {how_g}"),
        names[1]: Quantity(q, "1", f"reduced heat flow rate per unit {per}{drive_name(problem)}, {how_q}"),
    }


def drive_name(problem: str) -> str:
    """The drive of a problem, in words (for result descriptions)."""
    return "pressure gradient X_P" if problem == "poiseuille" else "temperature gradient X_T"
