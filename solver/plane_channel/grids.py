"""Spatial grid and velocity set of the plane-channel solver, and their defaults.

Spatial grid: y = (1/2) sin(pi xi / 2), xi uniform on [-1, 1] with n_space
cells (a smooth map, so the scheme keeps its order, measured 2.4 to 3 for G_P;
cells shrink as 1/n_space^2 at the walls, which resolves the Knudsen layers
of thickness ~ 1/delta in units of the gap).

Velocity set (positive half; mirrored for c_y < 0):
* delta >= GRADED_BELOW: half-range Gauss-Hermite with n_velocity nodes;
* delta <  GRADED_BELOW: composite rule graded towards c_y = 0 down to
  min(delta / 100, 1e-3), because the distribution function of molecules
  flying nearly parallel to the walls varies on the scale c_y ~ delta d
  (d the distance from the wall; origin of the logarithmic growth of the flow
  rate as delta -> 0).  Every panel narrows as n_velocity grows, so the
  error falls regularly from one ladder level to the next and the Richardson
  estimate sees it.  Half-range Gauss-Hermite does not resolve that scale
  for delta of order 1 (smallest of 16 nodes ~0.03): its error (up to 6e-5
  in G_T at delta 0.5-0.7) changes sign between 12 and 16 nodes, so the
  difference of the two levels, and with it the estimate, can be 10-25 times
  too small.  Above GRADED_BELOW the wall layer holds a vanishing share of
  the flow and Gauss-Hermite is both accurate (<= 1e-6) and cheaper.
"""

from __future__ import annotations

import math

import numpy as np

from knudsweep.solver.quadrature import graded_half_range, half_range_hermite

GRADED_BELOW = 5.0
MIN_SPACE, MAX_SPACE = 8, 4000
MIN_VELOCITY, MAX_VELOCITY = 4, 400


def channel_nodes(n_space: int) -> np.ndarray:
    """n_space + 1 nodes on [-1/2, 1/2], clustered at both walls."""
    xi = np.linspace(-1.0, 1.0, n_space + 1)
    y = 0.5 * np.sin(0.5 * math.pi * xi)
    y[0], y[-1] = -0.5, 0.5
    return y


def default_n_space(delta: float) -> int:
    """Cells across the channel: 64 up to delta = 1, then 64 delta^(1/3) (even).

    Chosen from a grid study of G_P (BGK, diffuse walls, reference 3200
    cells): relative error of the default grid ~1e-6 at every delta (measured
    6e-7 at delta = 1, 2e-6 at 10, 1e-6 at 100 and 1000).  The old rule (64 +
    40 per decade) left 2.6e-5 at delta = 1000 (sigma_P low by 4e-3): the
    Knudsen layers (thickness ~ 1/delta) need more cells near the walls.
    The solver reports its own error estimate for every point (``resolution``).
    """
    if delta <= 1.0:
        return 64
    return 2 * int(math.ceil(32.0 * delta ** (1.0 / 3.0)))


def coarser_velocity(delta: float, n_velocity: int) -> int:
    """The velocity set of the error estimate's coarser level.

    Graded set: 3/4 of the nodes (every panel widens by 4/3, the error grows
    regularly).  Gauss-Hermite: half the nodes, because its error does not
    fall monotonically with the node count (at delta = 5-15 the G_T errors of
    12 and 16 nodes nearly coincide, and their difference underestimated
    the error by 4-98x); the 8-node error dominates the difference, which
    keeps the estimate on the safe side (measured 0.03-0.6 of ... x actual
    error in G_T, 0.17-1.8 in G_P, delta = 5-1000).
    """
    if delta >= GRADED_BELOW:
        return max(2, n_velocity // 2)
    return max(12, int(round(0.75 * n_velocity)))


def resolution_ladder(delta: float) -> list[tuple[int, int]]:
    """Resolutions tried for an accuracy target, coarse to fine.

    Level k: n_space = N0/4 * 2^k, n_velocity = V0 * (9/16) * (4/3)^k with
    (N0, V0) the defaults, so level 2 is the default grid; each step halves
    the spatial step (third order measured: error / 5 to 8) and adds a third
    of the velocity nodes (measured error / 9 or more for the graded set,
    / 3 to / 60 irregularly for Gauss-Hermite).  Stops at MAX_SPACE /
    MAX_VELOCITY.
    """
    n0 = max(MIN_SPACE, default_n_space(delta) // 4)
    v0 = default_n_velocity(delta) * 9.0 / 16.0
    v0 = max(MIN_VELOCITY if delta >= GRADED_BELOW else 16, v0)
    levels = []
    k = 0
    while True:
        n = n0 * 2**k
        v = int(round(v0 * (4.0 / 3.0) ** k))
        if n > MAX_SPACE or v > MAX_VELOCITY:
            return levels
        levels.append((n, v))
        k += 1


def default_n_velocity(delta: float) -> int:
    """Positive half-range nodes: 16 Gauss-Hermite for delta >= GRADED_BELOW; graded set below
    with 24 + 12 per decade between the smallest node and 1 (60 nodes for delta >= 0.1, 84 at
    delta = 1e-3; the velocity-convergence study gives ~1e-6 relative error in G_P there)."""
    if delta >= GRADED_BELOW:
        return 16
    smallest, split = _graded_params(delta)
    return int(24 + 12 * math.ceil(math.log10(split / smallest)))


def _graded_params(delta: float) -> tuple[float, float]:
    smallest = min(1e-2 * delta, 1e-3)
    split = 1.0
    return smallest, split


def velocity_set(delta: float, n_velocity: int) -> tuple[np.ndarray, np.ndarray, dict]:
    """Positive nodes c, weights w (including exp(-c^2)) and a description dict.

    For delta < GRADED_BELOW, n_velocity is the total number of positive nodes
    of the graded rule: a quarter (at least 8) go to the outer Gauss rule on
    [1, inf), the rest to 4-point Gauss-Legendre panels graded from
    min(delta/100, 1e-3) to 1.
    """
    if delta >= GRADED_BELOW:
        c, w = half_range_hermite(n_velocity)
        return c, w, {"velocity_rule": "half_range_hermite", "n_velocity": int(c.size)}
    smallest, split = _graded_params(delta)
    outer = max(8, n_velocity // 4)
    points = 4
    panels = max(2, (n_velocity - outer) // points)
    decades = math.log10(split / smallest)
    per_decade = (panels - 1 - 1e-9) / decades  # so that ceil() gives panels - 1
    c, w = graded_half_range(
        outer, split=split, smallest=smallest, points_per_panel=points, panels_per_decade=per_decade
    )
    desc = {
        "velocity_rule": "graded_half_range",
        "n_velocity": int(c.size),
        "velocity_outer_nodes": outer,
        "velocity_smallest": smallest,
        "velocity_split": split,
        "velocity_panels_per_decade": per_decade,
    }
    return c, w, desc
