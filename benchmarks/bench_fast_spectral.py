"""Speed of the fast spectral Boltzmann solver (prints figures; asserts nothing).

    python benchmarks/bench_fast_spectral.py [--quick]

1. Seconds per SSP-RK3 time step (three collision evaluations) at 16^3, 24^3
   and 32^3 velocity points for hard spheres (rank 1) and VHS argon
   (rank > 1), with the default angular set; the cost model is
   2 r M real inverse FFTs of N^3 points per evaluation.
2. scipy.fft against numpy.fft for the batched inverse transforms at those sizes.
3. One relaxation point at default settings (anisotropic start, t_end 10,
   41 outputs, dt 0.25, N = 32) beside a DSMC point (20000 particles, 8 replicas,
   the family defaults), wall and CPU seconds beside the family's cost model
   (knudsweep.families.relaxation.point_cost).  Target for the deterministic
   point: <= 10 s on one core.
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("NUMBA_CACHE_DIR", os.path.join(os.path.dirname(__file__), "..", ".numba_cache"))

import numba  # noqa: E402
import numpy as np  # noqa: E402
import scipy.fft as sfft  # noqa: E402

from knudsweep.solver import gas  # noqa: E402
from knudsweep.solver.relaxation import deterministic as det  # noqa: E402
from knudsweep.solver.relaxation import fast_spectral as fs  # noqa: E402
from knudsweep.solver.relaxation import solve_relaxation  # noqa: E402
from knudsweep.solver.relaxation.cross_sections import molecular_model  # noqa: E402
from knudsweep.solver.relaxation.initial_states import initial_density_on_grid, make_initial_state  # noqa: E402

TARGET_S = 10.0


def _step_time(model, n: int, repeats: int) -> tuple[float, float, int, int]:
    state = make_initial_state("anisotropic")
    grid = det.make_grid(n, fs.spectral_half_width(state))
    start = time.perf_counter()
    op = fs.build_operator(model, grid)
    build = time.perf_counter() - start
    v = grid.nodes()
    f = det.normalise_initial(initial_density_on_grid(state, v[:, 0], v[:, 1], v[:, 2]), v, grid.weight)
    fs.set_equilibrium(op, det.discrete_target(0, f, v, grid.weight))
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fs.ssp_rk3_step(f, 0.1, op)
        best = min(best, time.perf_counter() - start)
    return best, build, op.rank, op.n_directions


def _fft_compare(n: int) -> tuple[float, float]:
    a = np.random.default_rng(0).random((fs.FFT_BATCH, n, n, n))
    spec = sfft.rfftn(a, axes=(1, 2, 3))
    out = []
    for lib in (sfft, np.fft):
        best = float("inf")
        for _ in range(5):
            start = time.perf_counter()
            lib.irfftn(spec, s=(n, n, n), axes=(1, 2, 3))
            best = min(best, time.perf_counter() - start)
        out.append(best / fs.FFT_BATCH)
    return out[0], out[1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="skip the full relaxation points")
    args = parser.parse_args()
    numba.set_num_threads(1)
    argon = gas.get_gas("Ar")
    print("inverse real FFT of N^3 points (ms, batched)")
    print(f"{'N':>4} {'scipy.fft':>10} {'numpy.fft':>10}")
    for n in (16, 24, 32):
        s, npy = _fft_compare(n)
        print(f"{n:>4} {s * 1e3:>10.3f} {npy * 1e3:>10.3f}")
    print()
    print("seconds per SSP-RK3 step (3 collision evaluations), default angular set")
    print(f"{'model':<12} {'grid':>6} {'rank':>5} {'M':>4} {'s/step':>9} {'build s':>8}")
    for name in ("hard_sphere", "vhs"):
        model = molecular_model(name, argon)
        for n in (16, 24, 32):
            step, build, rank, m = _step_time(model, n, 3)
            print(f"{name:<12} {n:>4}^3 {rank:>5d} {m:>4d} {step:>9.3f} {build:>8.2f}")
    if args.quick:
        return
    print()
    print("one relaxation point at default settings: anisotropic start, argon, t_end 10, 41 outputs,")
    print("fast spectral N = 32, dt 0.25 (the whole solve_relaxation: build, run, records, fits);")
    print("CPU seconds are the process time (the wall time grows when other jobs share the cores)")
    solve_relaxation(method="dsmc", n_particles=1000, n_replicas=1, t_end=0.2, n_output=2, h_bins_per_axis=4)
    solve_relaxation(method="fast_spectral", n_velocity=8, velocity_half_width=7.0, t_end=0.25, n_output=2)
    from knudsweep.families.relaxation import FAMILY

    section = {
        "gases": ["Ar"],
        "pressures": [100.0],
        "temperatures": [300.0],
        "initial_states": ["anisotropic"],
        "methods": ["fast_spectral", "dsmc"],
        "n_particles": [20000],
    }
    print(f"{'method':<32} {'wall s':>7} {'CPU s':>7} {'model s':>8} {'target':>7}")
    for name in ("hard_sphere", "vhs"):
        for method in ("fast_spectral", "dsmc"):
            wall, cpu = time.perf_counter(), time.process_time()
            solve_relaxation(method=method, molecular_model=name)
            wall, cpu = time.perf_counter() - wall, time.process_time() - cpu
            values = FAMILY.points({**section, "molecular_models": [name], "methods": [method]})[0].values
            label = f"{method} {name}" + (" N=32" if method != "dsmc" else " 20000 x 8")
            target = f"{TARGET_S:>7.0f}" if method != "dsmc" else f"{'':>7}"
            print(f"{label:<32} {wall:>7.1f} {cpu:>7.1f} {FAMILY.point_cost(values):>8.1f} {target}")


if __name__ == "__main__":
    main()
