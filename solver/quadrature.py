"""Velocity quadratures for discrete-velocity (discrete-ordinates) solvers.

All rules integrate against the Maxwellian weight::

    int_lo^inf exp(-x**2) f(x) dx  ~=  sum_k weights[k] * f(nodes[k])

i.e. the weights already contain ``exp(-x**2)``.  Velocities are in units of
the most probable speed v0 = sqrt(2kT/m).

Public API (stable; the tube and duct solvers use it too)
---------------------------------------------------------
half_range_hermite(n)            Gauss rule for exp(-x^2) on [0, inf), n <= 128
shifted_half_range_hermite(n, b) Gauss rule for exp(-x^2) on [b, inf), b >= 0
full_range(nodes, weights)       mirror a half-range rule onto (-inf, inf)
graded_half_range(...)           composite rule refined towards x = 0 (grazing
                                 molecules at small rarefaction parameter)
log_linear_half_range(...)       composite rule whose panels all shrink together
                                 as the node count grows (tube and duct speeds)
half_range_rule(kind, n, ...)    one entry point that returns a HalfRangeRule

Method.  The Gauss rules are built from the three-term recurrence of the
orthogonal polynomials of the weight; the recurrence is obtained by the
discretized Stieltjes procedure in its Lanczos form with full
re-orthogonalisation (Gautschi, *Orthogonal Polynomials: Computation and
Approximation*, Oxford 2004, Sec. 2.2.3), applied to a fine composite
Gauss-Legendre discretisation of the weight, and nodes/weights follow from the
eigen-decomposition of the Jacobi matrix (Golub & Welsch, Math. Comp. 23
(1969) 221).  Half-range Hermite rules as such: Shizgal, J. Comput. Phys. 41
(1981) 309; Steen, Byrne & Gelbard, Math. Comp. 23 (1969) 661.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.linalg import eigh_tridiagonal

__all__ = [
    "HalfRangeRule",
    "full_range",
    "graded_half_range",
    "half_range_hermite",
    "half_range_rule",
    "log_linear_half_range",
    "shifted_half_range_hermite",
]

MAX_NODES = 128
# The discretised measure: composite Gauss-Legendre on [b, b + _TAIL_LENGTH].
# exp(-x^2) x^(2n-1) for n <= 128 is below 1e-250 of its peak beyond
# x = 26, so truncating at b + 30 loses nothing in double precision.
_TAIL_LENGTH = 30.0
_PANEL_WIDTH = 0.125
_PANEL_POINTS = 24


@dataclass(frozen=True)
class HalfRangeRule:
    """A quadrature on [0, inf) for the weight exp(-x^2).

    nodes, weights : 1-D float arrays of equal length, nodes ascending, > 0.
    kind : "hermite" or "graded".
    description : dict of the parameters that built the rule (for records).
    """

    nodes: np.ndarray
    weights: np.ndarray
    kind: str
    description: dict

    @property
    def size(self) -> int:
        return int(self.nodes.size)


def _check_n(n: int, name: str = "n", low: int = 1, high: int = MAX_NODES) -> int:
    if isinstance(n, bool) or int(n) != n or not (low <= int(n) <= high):
        raise ValueError(f"{name}: must be an integer in [{low}, {high}], got {n!r}")
    return int(n)


def _discretised_measure(b: float) -> tuple[np.ndarray, np.ndarray]:
    """Points t >= 0 and weights of exp(-(b+t)^2) dt on [0, _TAIL_LENGTH]."""
    g, gw = np.polynomial.legendre.leggauss(_PANEL_POINTS)
    n_panels = int(round(_TAIL_LENGTH / _PANEL_WIDTH))
    left = np.arange(n_panels) * _PANEL_WIDTH
    t = (left[:, None] + 0.5 * _PANEL_WIDTH * (g[None, :] + 1.0)).ravel()
    w = np.tile(0.5 * _PANEL_WIDTH * gw, n_panels) * np.exp(-((b + t) ** 2) + b * b)
    keep = w > 0.0
    return t[keep], w[keep]


def lanczos_recurrence(x: np.ndarray, w: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Recurrence coefficients alpha[0..n-1], beta[1..n-1] of the discrete measure sum w delta(x).

    Lanczos iteration on diag(x) started from sqrt(w), with full
    re-orthogonalisation (twice is enough, Parlett 1980).
    """
    q = np.sqrt(w) / math.sqrt(w.sum())
    basis = np.zeros((n, x.size))
    alpha = np.zeros(n)
    beta = np.zeros(max(n - 1, 0))
    for k in range(n):
        basis[k] = q
        r = x * q
        alpha[k] = q @ r
        if k == n - 1:
            break
        for _ in range(2):
            r -= basis[: k + 1].T @ (basis[: k + 1] @ r)
        beta[k] = np.linalg.norm(r)
        q = r / beta[k]
    return alpha, beta


@lru_cache(maxsize=64)
def _gauss_rule_on_shifted_half_line(n: int, b: float) -> tuple[np.ndarray, np.ndarray]:
    t, w = _discretised_measure(b)
    mass = w.sum()  # = exp(b^2) int_b^inf exp(-x^2) dx
    alpha, beta = lanczos_recurrence(t, w, n)
    if n == 1:
        nodes_t, vectors = alpha.copy(), np.ones((1, 1))
    else:
        nodes_t, vectors = eigh_tridiagonal(alpha, beta)
    # Golub-Welsch weights mass * v0^2 have only absolute accuracy, which
    # ruins the tiny weights of the outermost nodes; use instead the
    # Christoffel numbers 1 / sum_j p_j(x)^2 of the orthonormal polynomials,
    # evaluated by the recurrence (relative accuracy at every node).
    p_prev = np.zeros_like(nodes_t)
    p_cur = np.full_like(nodes_t, 1.0 / math.sqrt(mass))
    total = p_cur**2
    for j in range(n - 1):
        p_next = ((nodes_t - alpha[j]) * p_cur - (beta[j - 1] if j > 0 else 0.0) * p_prev) / beta[j]
        p_prev, p_cur = p_cur, p_next
        total += p_cur**2
    weights = math.exp(-b * b) / total
    nodes = b + nodes_t
    return nodes, weights


def half_range_hermite(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss rule with n nodes for int_0^inf exp(-x^2) f(x) dx.

    Exact for polynomials f of degree <= 2n - 1 (up to rounding); nodes
    ascending in (0, inf).  Returns fresh copies (callers may modify them).
    """
    n = _check_n(n)
    nodes, weights = _gauss_rule_on_shifted_half_line(n, 0.0)
    return nodes.copy(), weights.copy()


def shifted_half_range_hermite(n: int, b: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss rule with n nodes for int_b^inf exp(-x^2) f(x) dx, 0 <= b <= 5.

    Used as the outer part of :func:`graded_half_range`.
    """
    n = _check_n(n)
    b = float(b)
    if not (0.0 <= b <= 5.0 and math.isfinite(b)):
        raise ValueError(f"b: must be in [0, 5], got {b!r}")
    nodes, weights = _gauss_rule_on_shifted_half_line(n, b)
    return nodes.copy(), weights.copy()


def full_range(nodes: np.ndarray, weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mirror a half-range rule: nodes (-x[::-1], x), weights (w[::-1], w).

    The result integrates exp(-x^2) f(x) over the real line exactly whenever
    the half-range rule is exact for f on each half (f may jump at x = 0,
    as a distribution function at a wall does).
    """
    nodes = np.asarray(nodes, dtype=float)
    weights = np.asarray(weights, dtype=float)
    if nodes.shape != weights.shape or nodes.ndim != 1:
        raise ValueError("nodes, weights: must be 1-D arrays of the same length")
    return np.concatenate([-nodes[::-1], nodes]), np.concatenate([weights[::-1], weights])


def graded_half_range(
    n_outer: int,
    split: float = 1.0,
    smallest: float = 1e-5,
    points_per_panel: int = 4,
    panels_per_decade: float = 2.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Composite rule on [0, inf) refined towards x = 0.

    [0, smallest]  : one Gauss-Legendre panel,
    [smallest, split] : geometrically graded Gauss-Legendre panels
                     (``panels_per_decade`` panels per factor 10),
    [split, inf)  : Gauss rule with ``n_outer`` nodes for exp(-x^2) on
                     [split, inf) (:func:`shifted_half_range_hermite`).

    Weights include exp(-x^2).  Meant for integrands like
    (1 - exp(-d s / x)) / x that vary on the scale x ~ d << 1 (molecules
    flying almost parallel to the walls at small rarefaction parameter).
    Exact for polynomials of degree <= 2 points_per_panel - 1 on each inner
    panel times exp(-x^2) only approximately; the error of the inner part is
    that of Gauss-Legendre on exp(-x^2) f over panels of width <= split.
    """
    n_outer = _check_n(n_outer, "n_outer")
    points_per_panel = _check_n(points_per_panel, "points_per_panel", 1, 32)
    split = float(split)
    smallest = float(smallest)
    if not (0.0 < split <= 5.0):
        raise ValueError(f"split: must be in (0, 5], got {split!r}")
    if not (0.0 < smallest < split):
        raise ValueError(f"smallest: must be in (0, split={split}), got {smallest!r}")
    if not (0.0 < panels_per_decade <= 20.0):
        raise ValueError(f"panels_per_decade: must be in (0, 20], got {panels_per_decade!r}")
    n_graded = max(1, int(math.ceil(panels_per_decade * math.log10(split / smallest))))
    edges = np.concatenate([[0.0], np.geomspace(smallest, split, n_graded + 1)])
    g, gw = np.polynomial.legendre.leggauss(points_per_panel)
    lo, hi = edges[:-1, None], edges[1:, None]
    x_in = (lo + 0.5 * (hi - lo) * (g[None, :] + 1.0)).ravel()
    w_in = (0.5 * (hi - lo) * gw[None, :]).ravel() * np.exp(-(x_in**2))
    x_out, w_out = shifted_half_range_hermite(n_outer, split)
    return np.concatenate([x_in, x_out]), np.concatenate([w_in, w_out])


def log_linear_half_range(
    panels_per_unit: float,
    smallest: float,
    split: float = 1.0,
    slope: float = 1.0,
    points_per_panel: int = 4,
    n_outer: int = 8,
) -> tuple[np.ndarray, np.ndarray]:
    """Composite rule on [0, inf) whose panel edges are equally spaced in t = log10(x) + slope x.

    [0, smallest]     : one Gauss-Legendre panel,
    [smallest, split] : round(panels_per_unit (t(split) - t(smallest))) Gauss-
                        Legendre panels with edges uniform in t: geometric
                        (a fixed number per decade) where x << 1/slope, of
                        nearly equal width 1/slope where x >~ 1/slope,
    [split, inf)      : Gauss rule with ``n_outer`` nodes for exp(-x^2)
                        (:func:`shifted_half_range_hermite`).

    Weights include exp(-x^2).  Unlike :func:`graded_half_range`, raising
    ``panels_per_unit`` narrows every panel in the same proportion (the panels
    near x ~ 0.3-1, where exp(-x^2) x carries most weight, included), so for
    integrands smooth in t the error falls as panels^(-2 points_per_panel)
    (composite Gauss-Legendre; Davis & Rabinowitz, Methods of Numerical
    Integration, 2nd ed., Academic Press 1984).  Meant for exp(-k/x)-type
    integrands that vary on every scale x ~ k below 1.
    """
    points_per_panel = _check_n(points_per_panel, "points_per_panel", 1, 32)
    n_outer = _check_n(n_outer, "n_outer")
    split, smallest, slope, per = float(split), float(smallest), float(slope), float(panels_per_unit)
    if not (0.0 < split <= 5.0):
        raise ValueError(f"split: must be in (0, 5], got {split!r}")
    if not (0.0 < smallest < split):
        raise ValueError(f"smallest: must be in (0, split={split}), got {smallest!r}")
    if not (0.0 <= slope <= 100.0):
        raise ValueError(f"slope: must be in [0, 100], got {slope!r}")
    if not (0.0 < per <= 100.0):
        raise ValueError(f"panels_per_unit: must be in (0, 100], got {panels_per_unit!r}")

    def t_of(x):
        return np.log10(x) + slope * x

    n_panels = max(1, int(round(per * (t_of(split) - t_of(smallest)))))
    t = np.linspace(t_of(smallest), t_of(split), n_panels + 1)
    # invert t(x) for u = ln x: f(u) = u / ln 10 + slope e^u - t is increasing
    # and convex, so Newton from u = ln(split) (where f >= 0) decreases
    # monotonically to the root
    u = np.full_like(t, math.log(split))
    for _ in range(100):
        step = (u / math.log(10.0) + slope * np.exp(u) - t) / (1.0 / math.log(10.0) + slope * np.exp(u))
        u -= step
        if np.max(np.abs(step)) < 1e-15:
            break
    x_edges = np.exp(u)
    x_edges[0], x_edges[-1] = smallest, split
    edges = np.concatenate([[0.0], x_edges])
    g, gw = np.polynomial.legendre.leggauss(points_per_panel)
    lo, hi = edges[:-1, None], edges[1:, None]
    x_in = (lo + 0.5 * (hi - lo) * (g[None, :] + 1.0)).ravel()
    w_in = (0.5 * (hi - lo) * gw[None, :]).ravel() * np.exp(-(x_in**2))
    x_out, w_out = shifted_half_range_hermite(n_outer, split)
    return np.concatenate([x_in, x_out]), np.concatenate([w_in, w_out])


def half_range_rule(kind: str, n: int, **options: float) -> HalfRangeRule:
    """Build a :class:`HalfRangeRule` by name.

    kind="hermite": ``half_range_hermite(n)``.
    kind="graded" : ``graded_half_range(n, **options)`` (n = outer nodes).
    """
    if kind == "hermite":
        nodes, weights = half_range_hermite(n)
        desc = {"kind": "hermite", "n": int(n)}
    elif kind == "graded":
        nodes, weights = graded_half_range(n, **options)
        desc = {"kind": "graded", "n_outer": int(n), **{k: float(v) for k, v in options.items()}}
    else:
        raise ValueError(f"kind: must be one of hermite, graded, got {kind!r}")
    return HalfRangeRule(nodes=nodes, weights=weights, kind=kind, description=desc)
