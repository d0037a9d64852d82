"""Speed of the relaxation solvers (prints figures; asserts nothing).

    python benchmarks/bench_relaxation.py [--quick]

Particle method: collisions per second on one thread for 1e5 and 1e6
particles and three molecular models.  Setup costs (sampling the initial
state, the majorant estimate, the output records) are removed by running
two end times (t and 4 t, at least ~5e5 extra collisions) and dividing the
extra collisions by the extra time; each time is the fastest of REPEATS runs,
so other load on a shared machine inflates it less.  Target for the particle
kernel: >= 1e7 collisions/s per core (project goal).
Deterministic methods: wall time per time step on 32^3 and 48^3 grids.
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(os.path.dirname(__file__), "..", ".numba_cache"))

import numba  # noqa: E402

from knudsweep.solver.relaxation import solve_relaxation  # noqa: E402

TARGET = 1e7
REPEATS = 3


def _dsmc_rate(model: str, n: int, t_short: float, repeats: int = REPEATS) -> float:
    runs = []
    for t_end in (t_short, 4 * t_short):
        best = float("inf")
        for _ in range(repeats):
            start = time.perf_counter()
            r = solve_relaxation(
                method="dsmc",
                molecular_model=model,
                initial_state="equilibrium",
                n_particles=n,
                n_replicas=1,
                t_end=t_end,
                n_output=2,
                seed=1,
            )
            best = min(best, time.perf_counter() - start)
        # same seed, so the collision count of each end time is the same in every repeat
        runs.append((best, r.profiles["collisions_per_particle"].value[-1] * n / 2))
    return (runs[1][1] - runs[0][1]) / (runs[1][0] - runs[0][0])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller runs")
    args = parser.parse_args()
    numba.set_num_threads(1)
    # compile once outside the timings
    solve_relaxation(
        method="dsmc",
        initial_state="equilibrium",
        n_particles=1000,
        n_replicas=1,
        t_end=0.2,
        n_output=2,
        h_bins_per_axis=4,
    )
    solve_relaxation(method="s_model", t_end=0.02, n_output=2)
    print("particle method, one thread (collisions per second, differenced over end times)")
    print(f"{'model':<12} {'N':>9} {'coll/s':>12} {'ratio to 1e7':>13}")
    for n, t_short in ((100_000, 10.0 if not args.quick else 3.0), (1_000_000, 1.0)):
        for model in ("hard_sphere", "vhs", "maxwell"):
            rate = _dsmc_rate(model, n, t_short)
            print(f"{model:<12} {n:>9d} {rate:>12.3e} {rate / TARGET:>13.2f}")
    print()
    print("model equations (seconds per time step)")
    print(f"{'method':<8} {'grid':>6} {'s/step':>10}")
    for nv in (32, 48):
        for method in ("bgk", "s_model", "es_bgk"):
            steps = 200 if not args.quick else 50
            start = time.perf_counter()
            solve_relaxation(
                method=method,
                initial_state="two_beams",
                beam_fraction=0.3,
                n_velocity=nv,
                t_end=0.01 * steps,
                n_output=2,
                time_step=0.01,
            )
            print(f"{method:<8} {nv:>4}^3 {(time.perf_counter() - start) / steps:>10.2e}")


if __name__ == "__main__":
    main()
