"""Discretization error estimates and resolution from an accuracy target.

Solvers here converge in the grid size n_space (spatial step ~ 1/n_space) and
in the number of velocity nodes n_velocity.  Take a ladder of resolutions
L_0, L_1, ... in which each step halves the spatial step and refines the
velocity set, so that the error of every reported value falls by a factor r
per step.  With G_k the value on L_k, Richardson's argument (Richardson,
Phil. Trans. R. Soc. A 210 (1911) 307; Roache, Verification and Validation
in Computational Science and Engineering, 1998, Ch. 5) gives for the error
of G_k

    E_k = |G_k - G_{k-1}| / (r - 1).

r is not trusted blindly: with three levels the observed ratio
r_obs = |G_{k-1} - G_{k-2}| / |G_k - G_{k-1}| is used, clipped to
[MIN_RATIO, assumed_ratio], so a faster-looking sequence (possibly a lucky
cancellation) never shrinks the estimate below the assumed rate, and a
slower one (pre-asymptotic, or velocity error dominating) enlarges it.  With
two levels r = assumed_ratio.  The default assumed_ratio = 4 is a second-
order rate; the plane-channel scheme measures 2.4 to 3 (r = 5 to 8), so the
estimate leans to the safe side.

The functions take a callable ``solve(n_space, n_velocity) -> {name: value}``
and know nothing about the solver, so every geometry can use them.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field

ACCURACY_RANGE = (1e-6, 1e-1)
MIN_RATIO = 1.5  # r used when the differences barely shrink: E = 2 |G_k - G_{k-1}|

Solve = Callable[[int, int], Mapping[str, float]]


@dataclass
class ResolutionChoice:
    """Outcome of an error estimate or an accuracy-driven refinement.

    n_space, n_velocity : the resolution whose values are reported.
    values : {name: value} at that resolution.
    error_estimate : {name: absolute error estimate}, same units as the value.
    relative_estimate : max over names of error_estimate / |value|.
    ratio : the error reduction per ladder step used in the estimate.
    target : the relative accuracy asked for (None: estimate only).
    met : relative_estimate <= target (True when no target).
    levels : every (n_space, n_velocity) solved, coarse to fine, as requested
        from the solver (a solver may round a velocity count to its rule).
    reason : why refinement stopped short of the target ("" if met).
    """

    n_space: int
    n_velocity: int
    values: dict[str, float]
    error_estimate: dict[str, float]
    relative_estimate: float
    ratio: float
    target: float | None = None
    met: bool = True
    levels: list[tuple[int, int]] = field(default_factory=list)
    reason: str = ""

    def record(self) -> dict:
        """Plain-data summary for a result's discretization record."""
        return {
            "error_estimate_method": "Richardson, consecutive resolutions (solver.resolution)",
            "error_estimate_ratio": float(self.ratio),
            "relative_error_estimate": float(self.relative_estimate),
            "accuracy_target": self.target,
            "accuracy_met": bool(self.met),
            "resolutions_solved": [[int(a), int(b)] for a, b in self.levels],
        }


def check_accuracy(accuracy) -> float | None:
    """None, or a float in ACCURACY_RANGE; ValueError naming 'accuracy' otherwise."""
    if accuracy is None:
        return None
    lo, hi = ACCURACY_RANGE
    try:
        value = float(accuracy)
    except (TypeError, ValueError):
        raise ValueError(f"accuracy: must be None or a relative error in [{lo:g}, {hi:g}], got {accuracy!r}") from None
    if isinstance(accuracy, bool) or not (lo <= value <= hi):
        raise ValueError(f"accuracy: must be None or a relative error in [{lo:g}, {hi:g}], got {accuracy!r}")
    return value


def relative_error(values: Mapping[str, float], errors: Mapping[str, float]) -> float:
    """max over names of errors[name] / |values[name]| (inf if a value is 0 with a nonzero error)."""
    worst = 0.0
    for name, err in errors.items():
        scale = abs(values[name])
        rel = err / scale if scale > 0.0 else (0.0 if err == 0.0 else math.inf)
        worst = max(worst, rel) if math.isfinite(rel) else math.inf
    return worst


def estimate_error(
    fine: Mapping[str, float],
    coarse: Mapping[str, float],
    coarser: Mapping[str, float] | None = None,
    assumed_ratio: float = 4.0,
) -> tuple[dict[str, float], float]:
    """({name: |fine - coarse| / (r - 1)}, r) for consecutive ladder levels (module docstring)."""
    if not assumed_ratio > MIN_RATIO:
        raise ValueError(f"assumed_ratio: must be > {MIN_RATIO}, got {assumed_ratio!r}")
    ratio = assumed_ratio
    if coarser is not None:
        observed = []
        for name in fine:
            d_fine = abs(fine[name] - coarse[name])
            d_coarse = abs(coarse[name] - coarser[name])
            if d_fine > 0.0:
                observed.append(d_coarse / d_fine)
        if observed:
            ratio = min(max(min(observed), MIN_RATIO), assumed_ratio)
    errors = {name: abs(fine[name] - coarse[name]) / (ratio - 1.0) for name in fine}
    return errors, ratio


def choose_resolution(
    solve: Solve,
    target: float,
    levels: Iterable[tuple[int, int]],
    assumed_ratio: float = 4.0,
) -> ResolutionChoice:
    """Walk up ``levels`` (coarse to fine) until the estimated relative error is <= target.

    solve : solve(n_space, n_velocity) -> {name: value}; it may raise to abort.
    target : relative accuracy asked of every returned value.
    levels : the resolution ladder; each step should cut the error by ~assumed_ratio.
    At least two levels are solved.  If the ladder runs out first, the finest
    level is returned with met = False and the reason.
    """
    history: list[tuple[tuple[int, int], dict[str, float]]] = []
    choice = None
    for level in levels:
        values = dict(solve(*level))
        history.append((tuple(level), values))
        if len(history) < 2:
            continue
        coarser = history[-3][1] if len(history) >= 3 else None
        errors, ratio = estimate_error(values, history[-2][1], coarser, assumed_ratio)
        rel = relative_error(values, errors)
        choice = ResolutionChoice(
            n_space=int(level[0]), n_velocity=int(level[1]), values=values, error_estimate=errors,
            relative_estimate=rel, ratio=ratio, target=target, met=rel <= target,
            levels=[lv for lv, _ in history],
        )
        if choice.met:
            return choice
    if choice is None:
        raise ValueError("levels: need at least two resolutions")
    choice.reason = (
        f"accuracy target {target:g} not met: estimated relative error {choice.relative_estimate:.2e} "
        f"at the finest allowed resolution (n_space={choice.n_space}, n_velocity={choice.n_velocity})"
    )
    return choice
