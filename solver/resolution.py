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

The three channel geometries (plane channel, tube, duct) meet the shared
driver through one interface, :class:`ChannelSolver`: their default and
checked sizes, their resolution ladder, the coarser level of the estimate
and one solve at a fixed resolution that assembles its result;
:func:`solve_channel` runs the estimate or the accuracy climb on it.
Ladder helpers for nested grids (:func:`nested_ladder`,
:func:`coarser_level`) live here too.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Protocol

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
            "error_estimate_method": "Richardson, consecutive resolutions (knudsweep.solver.resolution)",
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
            n_space=int(level[0]),
            n_velocity=int(level[1]),
            values=values,
            error_estimate=errors,
            relative_estimate=rel,
            ratio=ratio,
            target=target,
            met=rel <= target,
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


# --------------------------------------------------------------------------
# The driver every linear-flow solver shares: one solve plus an estimate, or
# a climb along a ladder to an accuracy target.  It sees solver results only
# through their coefficients, discretization record and convergence status.


class _LevelFailed(Exception):
    def __init__(self, result):
        super().__init__(result.convergence.reason)
        self.result = result


def result_values(res) -> dict[str, float]:
    """The reported coefficients of a SolverResult, without earlier error estimates."""
    return {k: float(q.value) for k, q in res.coefficients.items() if not k.endswith("_error_estimate")}


def attach_estimate(res, choice: ResolutionChoice | None, how: str) -> None:
    """Add "<name>_error_estimate" coefficients (NaN if ``choice`` is None) and the record to ``res``."""
    from knudsweep.solver.result import Quantity

    for name in list(result_values(res)):
        err = choice.error_estimate[name] if choice is not None else float("nan")
        res.coefficients[f"{name}_error_estimate"] = Quantity(
            err, res.coefficients[name].units, f"estimated absolute discretization error of {name}"
        )
    if choice is not None:
        res.discretization.update(choice.record())
    else:
        res.discretization["relative_error_estimate"] = float("nan")
    res.discretization["error_estimate_source"] = how


def check_estimate_options(accuracy, error_estimate, n_space, n_velocity) -> float | None:
    """Checked accuracy (None or float); ValueError naming the field otherwise."""
    accuracy = check_accuracy(accuracy)
    if not isinstance(error_estimate, bool):
        raise ValueError(f"error_estimate: must be True or False, got {error_estimate!r}")
    if accuracy is not None:
        for name, value in (("n_space", n_space), ("n_velocity", n_velocity)):
            if value is not None:
                raise ValueError(
                    f"{name}: must be None when accuracy is given (the accuracy target chooses it), got {value!r}"
                )
    return accuracy


def solve_with_estimate(
    run,
    n_space: int,
    n_velocity: int,
    *,
    tol: float,
    accuracy: float | None,
    error_estimate: bool,
    ladder: Iterable[tuple[int, int]],
    coarse_level: tuple[int, int],
    t_start: float,
    assumed_ratio: float = 4.0,
    coarse_how: str = "one coarser step",
    ladder_how: str = "accuracy-driven refinement along the resolution ladder",
):
    """One solve with its error estimate, or the solve that meets an accuracy target.

    run(n_space, n_velocity, tol) -> SolverResult at a fixed resolution.
    Without ``accuracy``: solve at (n_space, n_velocity) and, if
    ``error_estimate``, once more at ``coarse_level`` for the Richardson
    estimate (:func:`estimate_error`).  With ``accuracy``: climb ``ladder`` with
    the iteration tolerance min(tol, accuracy / 100) until the estimate is below
    the target (:func:`choose_resolution`); a target not met on the finest
    level gives status "failed" with the reason.
    """
    import time

    from knudsweep.solver.result import CONVERGED, FAILED

    if accuracy is None:
        res = run(n_space, n_velocity, tol)
        if error_estimate and res.status == CONVERGED:
            coarse = run(*coarse_level, tol)
            if coarse.status == CONVERGED:
                fine_v = result_values(res)
                errors, ratio = estimate_error(fine_v, result_values(coarse), assumed_ratio=assumed_ratio)
                choice = ResolutionChoice(
                    n_space,
                    n_velocity,
                    fine_v,
                    errors,
                    relative_error(fine_v, errors),
                    ratio,
                    levels=[coarse_level, (n_space, n_velocity)],
                )
                attach_estimate(res, choice, coarse_how)
                same_v = coarse_level[1] == n_velocity or (
                    "n_velocity" in res.discretization
                    and coarse.discretization.get("n_velocity") == res.discretization["n_velocity"]
                )
                missing = [w for w, same in (("spatial", coarse_level[0] == n_space), ("velocity", same_v)) if same]
                if missing:
                    res.discretization["error_estimate_note"] = (
                        f"no coarser {' or '.join(missing)} grid: its error is not included"
                    )
            else:
                attach_estimate(res, None, f"coarse solve failed: {coarse.convergence.reason}")
        else:
            attach_estimate(res, None, "not requested" if not error_estimate else "solve failed")
        res.wall_time = time.perf_counter() - t_start
        return res

    it_tol = min(tol, 0.01 * accuracy)
    solved: dict[tuple[int, int], object] = {}

    def solve_level(ns: int, nv: int) -> dict[str, float]:
        r = run(ns, nv, it_tol)
        solved[(ns, nv)] = r
        if r.status != CONVERGED:
            raise _LevelFailed(r)
        return result_values(r)

    try:
        choice = choose_resolution(solve_level, accuracy, ladder, assumed_ratio=assumed_ratio)
    except _LevelFailed as exc:
        res = exc.result
        ns, nv = list(solved)[-1]
        res.convergence.reason = f"at n_space={ns}, n_velocity={nv}: {res.convergence.reason}"
        attach_estimate(res, None, "a solve of the accuracy-driven refinement failed")
        res.discretization["accuracy_target"] = accuracy
        res.discretization["accuracy_met"] = False
        res.discretization["resolutions_solved"] = [list(k) for k in solved]
        res.wall_time = time.perf_counter() - t_start
        return res
    res = solved[(choice.n_space, choice.n_velocity)]
    attach_estimate(res, choice, ladder_how)
    if not choice.met:
        res.convergence.status = FAILED
        res.convergence.reason = choice.reason
    res.wall_time = time.perf_counter() - t_start
    return res


# --------------------------------------------------------------------------
# The interface of a channel geometry to the shared driver.


class ChannelSolver(Protocol):
    """One channel problem with checked inputs, as the shared driver sees it.

    Implemented by ``plane_channel.driver``, ``tube.driver`` and
    ``duct.driver``.  ``assumed_ratio`` is the error reduction per ladder step
    of the geometry's scheme (:func:`estimate_error`); ``coarse_how`` and
    ``ladder_how`` say in the discretization record how the estimate was made.
    """

    assumed_ratio: float
    coarse_how: str
    ladder_how: str

    def resolution_ladder(self) -> list[tuple[int, int]]:
        """(n_space, n_velocity) levels of the accuracy climb, coarse to fine."""
        ...

    def coarser_level(self, n_space: int, n_velocity: int) -> tuple[int, int]:
        """The level one step below (n_space, n_velocity), for the estimate."""
        ...

    def solve_once(self, n_space: int, n_velocity: int, tol: float):
        """One solve at a fixed resolution, assembled into a SolverResult."""
        ...


def solve_channel(
    problem: ChannelSolver,
    n_space: int,
    n_velocity: int,
    *,
    tol: float,
    accuracy: float | None,
    error_estimate: bool,
    t_start: float,
):
    """:func:`solve_with_estimate` on a :class:`ChannelSolver` at the default or given (n_space, n_velocity)."""
    return solve_with_estimate(
        problem.solve_once,
        n_space,
        n_velocity,
        tol=tol,
        accuracy=accuracy,
        error_estimate=error_estimate,
        ladder=problem.resolution_ladder() if accuracy is not None else None,
        coarse_level=problem.coarser_level(n_space, n_velocity),
        t_start=t_start,
        assumed_ratio=problem.assumed_ratio,
        coarse_how=problem.coarse_how,
        ladder_how=problem.ladder_how,
    )


def check_count(name: str, value, low: int, high: int) -> int:
    """``value`` as an int if it is an integer in [low, high]; else ValueError naming ``name`` and the range."""
    import numbers

    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or not (low <= value <= high):
        raise ValueError(f"{name}: must be an integer in [{low}, {high}], got {value!r}")
    return int(value)


def coarser_level(n_space: int, n_velocity: int, min_space: int = 5, min_velocity: int = 4) -> tuple[int, int]:
    """One nested step down: half the spatial intervals, 3/4 of the velocity nodes (at least the minima)."""
    return max(min_space, (n_space - 1) // 2 + 1), max(min_velocity, int(round(0.75 * n_velocity)))


def nested_ladder(n_default: int, v_default: int, n_min: int, fits) -> list[tuple[int, int]]:
    """Levels (n_space, n_velocity), coarse to fine, through the default (n_default, v_default).

    n_space - 1 (the number of intervals) halves per step down while it stays
    even and n_space >= n_min, and doubles per step up while ``fits(ns, nv)``;
    n_velocity = v_default (4/3)^k at step k from the default (at least 4).
    """
    spans, down = n_default - 1, 0
    while spans % 2 == 0 and spans // 2 + 1 >= n_min:
        spans //= 2
        down += 1
    levels = []
    k = -down
    while True:
        ns = spans * 2 ** (k + down) + 1
        nv = max(4, int(round(v_default * (4.0 / 3.0) ** k)))
        if not fits(ns, nv):
            return levels
        levels.append((ns, nv))
        k += 1
