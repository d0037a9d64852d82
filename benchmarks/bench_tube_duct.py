"""Iterations and wall time, plain vs accelerated iteration, tube and duct.

Run:  NUMBA_CACHE_DIR=.numba_cache python benchmarks/bench_tube_duct.py [--plain-cap N]

Plain source iteration needs of order delta^2 sweeps; it is capped at
``--plain-cap`` iterations.  When the cap is hit, the number of iterations to
reach the tolerance is estimated from the observed asymptotic contraction
factor rho of the relative change: n ~ n_cap + ln(tol / r_cap) / ln(rho)
(marked "est.").  Prints a table; no assertions.
"""

from __future__ import annotations

import argparse
import math
import time

import numba

from knudsweep.solver.duct import solve_duct
from knudsweep.solver.tube import solve_tube
from knudsweep.solver.walls import CercignaniLampisWall


def _estimate(res, tol):
    r = res.convergence.residuals
    if res.status == "converged":
        return res.convergence.iterations, ""
    k = max(len(r) // 10, 5)
    rho = (r[-1] / r[-1 - k]) ** (1.0 / k)
    if not (0.0 < rho < 1.0):
        return float("inf"), " est."
    return int(len(r) + math.log(tol / r[-1]) / math.log(rho)), " est."


def run(label, solve, tol, cap):
    solve(delta=1.0, max_iter=2)  # compile outside the timing
    t0 = time.perf_counter()
    acc = solve(tol=tol)
    t_acc = time.perf_counter() - t0
    t0 = time.perf_counter()
    plain = solve(tol=tol, accelerate=False, max_iter=cap)
    t_plain = time.perf_counter() - t0
    n_plain, mark = _estimate(plain, tol)
    per_it = t_plain / max(plain.convergence.iterations, 1)
    t_plain_full = per_it * n_plain if mark else t_plain
    name = list(acc.coefficients)[0]
    print(
        f"{label:<28s} {acc.coefficient(name):12.6g} {acc.convergence.iterations:6d} {t_acc:8.2f}"
        f" {str(n_plain) + mark:>12s} {t_plain_full:10.1f}{mark:5s} {n_plain / acc.convergence.iterations:9.1f}"
        f" {t_plain_full / t_acc:9.1f}"
    )


def default_points():
    """Seconds per duct point on the default grid (with its error estimate), best of two."""
    solve_duct("poiseuille", delta=1.0, aspect_ratio=1.0, n_space=6, n_velocity=4)  # compile
    print(f"\n{'duct default point':<28s} {'G_P':>12s} {'rel. estimate':>14s} {'t/s':>8s}")
    for a in (1.0, 4.0, 20.0):
        for d in (0.1, 1.0, 10.0, 100.0):
            best, res = math.inf, None
            for _ in range(2):
                t0 = time.perf_counter()
                res = solve_duct("poiseuille", delta=d, aspect_ratio=a)
                best = min(best, time.perf_counter() - t0)
            g = res.coefficient("G_P")
            print(f"{f'A={a:g} d={d:g}':<28s} {g:12.6g} {res.coefficient('G_P_error_estimate') / g:14.2e} {best:8.2f}")


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--plain-cap", type=int, default=2000)
    ap.add_argument("--tol", type=float, default=1e-8)
    ap.add_argument("--points-only", action="store_true", help="only the default-point timings of the duct")
    args = ap.parse_args()
    if args.points_only:
        default_points()
        return
    print(f"numba threads: {numba.get_num_threads()}   tol = {args.tol:g}   plain cap = {args.plain_cap}")
    print(
        f"{'case':<28s} {'G':>12s} {'it_acc':>6s} {'t_acc/s':>8s} {'it_plain':>12s} {'t_plain/s':>10s}      {'it ratio':>9s} {'t ratio':>9s}"
    )
    for d in (0.01, 1.0, 10.0, 100.0, 1000.0):
        run(
            f"tube poiseuille d={d:g}",
            lambda d=d, **kw: solve_tube("poiseuille", **{"delta": d, **kw}),
            args.tol,
            args.plain_cap,
        )
    for d in (1.0, 10.0, 100.0, 1000.0):
        run(
            f"duct A=2 poiseuille d={d:g}",
            lambda d=d, **kw: solve_duct("poiseuille", **{"delta": d, "aspect_ratio": 2.0, **kw}),
            args.tol,
            args.plain_cap,
        )
    # Cercignani-Lampis walls: the tube solves the wall exchange exactly in each
    # sweep; the duct lags it by one sweep like the Maxwell wall.
    cl = CercignaniLampisWall(0.8, 0.5)
    for d in (1.0, 100.0):
        run(
            f"tube CL(0.8,0.5) d={d:g}",
            lambda d=d, **kw: solve_tube("poiseuille", **{"delta": d, "wall": cl, **kw}),
            args.tol,
            args.plain_cap,
        )
        run(
            f"duct A=2 CL(0.8,0.5) d={d:g}",
            lambda d=d, **kw: solve_duct("poiseuille", **{"delta": d, "aspect_ratio": 2.0, "wall": cl, **kw}),
            args.tol,
            args.plain_cap,
        )

    default_points()


if __name__ == "__main__":
    main()
