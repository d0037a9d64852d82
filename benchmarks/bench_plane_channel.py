"""Plane-channel Poiseuille flow (BGK, diffuse walls): plain vs accelerated iteration.

Prints iterations, wall time and G_P for each delta, and the ratios.  Run:
    NUMBA_CACHE_DIR=.numba_cache python benchmarks/bench_plane_channel.py [--threads N]
No assertions; the plain iteration is skipped above delta = 100 (it would need
~delta^2 iterations).
"""

from __future__ import annotations

import argparse

import numba

from knudsweep.solver.plane_channel import solve_plane_channel

DELTAS = (0.01, 1.0, 10.0, 100.0, 1000.0)
PLAIN_UP_TO = 100.0


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--threads", type=int, default=1, help="numba threads for the velocity loop")
    args = parser.parse_args()
    numba.set_num_threads(min(args.threads, numba.config.NUMBA_NUM_THREADS))
    solve_plane_channel("poiseuille", delta=1.0)  # compile / load the cached kernels
    print(f"numba threads: {numba.get_num_threads()}")
    header = f"{'delta':>8} {'cells':>6} {'nodes':>6} | {'plain it':>9} {'time s':>8} {'G_P':>14} | {'accel it':>8} {'time s':>8} {'G_P':>14} | {'it ratio':>8} {'time ratio':>10} {'rel diff':>9}"
    print(header)
    for delta in DELTAS:
        fast = solve_plane_channel("poiseuille", delta=delta, accelerate=True, error_estimate=False)
        if delta <= PLAIN_UP_TO:
            plain = solve_plane_channel("poiseuille", delta=delta, error_estimate=False)
            p_it, p_t, p_g = plain.convergence.iterations, plain.wall_time, plain.coefficient("G_P")
            ratios = f"{p_it / fast.convergence.iterations:8.1f} {p_t / fast.wall_time:10.1f} {abs(p_g / fast.coefficient('G_P') - 1):9.1e}"
            plain_cols = f"{p_it:9d} {p_t:8.3f} {p_g:14.8f}"
        else:
            plain_cols = f"{'skipped':>9} {'':>8} {'':>14}"
            ratios = f"{'':>8} {'':>10} {'':>9}"
        d = fast.discretization
        print(
            f"{delta:8.3g} {d['n_space']:6d} {d['n_velocity']:6d} | {plain_cols} | "
            f"{fast.convergence.iterations:8d} {fast.wall_time:8.3f} {fast.coefficient('G_P'):14.8f} | {ratios}"
        )


if __name__ == "__main__":
    main()
