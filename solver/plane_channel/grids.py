"""Spatial grid and velocity set of the plane-channel solver, and their defaults.

Spatial grid: y = (1/2) sin(pi xi / 2), xi uniform on [-1, 1] with n_space
cells (a smooth map, so the scheme keeps its second order; cells shrink
as 1/n_space^2 at the walls, which resolves the Knudsen layers of thickness
~ 1/delta in units of the gap).

Velocity set (positive half; mirrored for c_y < 0):
* delta >= GRADED_BELOW: half-range Gauss-Hermite with n_velocity nodes;
* delta <  GRADED_BELOW: composite rule graded towards c_y = 0 down to
  c_y ~ delta / 100, because the distribution function of molecules flying
  nearly parallel to the walls varies on the scale c_y ~ delta there
  (origin of the logarithmic growth of the flow rate as delta -> 0).
"""

from __future__ import annotations

import math

import numpy as np

from solver.quadrature import graded_half_range, half_range_hermite

GRADED_BELOW = 0.5
MIN_SPACE, MAX_SPACE = 8, 4000
MIN_VELOCITY, MAX_VELOCITY = 4, 400


def channel_nodes(n_space: int) -> np.ndarray:
    """n_space + 1 nodes on [-1/2, 1/2], clustered at both walls."""
    xi = np.linspace(-1.0, 1.0, n_space + 1)
    y = 0.5 * np.sin(0.5 * math.pi * xi)
    y[0], y[-1] = -0.5, 0.5
    return y


def default_n_space(delta: float) -> int:
    """Cells across the channel: 64 up to delta = 1, then +40 per decade (chosen from the
    grid-convergence study in tests/verification/test_plane_channel_convergence.py)."""
    return int(round(64 + 40 * max(0.0, math.log10(delta))))


def default_n_velocity(delta: float) -> int:
    """Positive half-range nodes: 16 Gauss-Hermite for delta >= 0.5; graded set below with
    24 + 12 per decade between the smallest node and 1 (84 nodes at delta = 1e-3; the
    velocity-convergence study gives ~1e-6 relative error in G_P there)."""
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
    c, w = graded_half_range(outer, split=split, smallest=smallest, points_per_panel=points, panels_per_decade=per_decade)
    desc = {
        "velocity_rule": "graded_half_range",
        "n_velocity": int(c.size),
        "velocity_outer_nodes": outer,
        "velocity_smallest": smallest,
        "velocity_split": split,
        "velocity_panels_per_decade": per_decade,
    }
    return c, w, desc
