"""Sweep throughput: points per minute for a 200-point plane-channel study.

Prints figures and ratios, asserts nothing.  Run from the repository root:

    python benchmarks/bench_sweep_throughput.py              # direct pool + Snakemake
    python benchmarks/bench_sweep_throughput.py --no-snakemake

The study: 2 problems (Poiseuille, thermal creep) x 2 models (BGK, S-model)
x 2 Maxwell walls (alpha 1.0, 0.9) x 25 log-spaced delta in [0.01, 100],
solver defaults (accelerated, tol 1e-8).

1. Direct: the solver called in a process pool, one process per usable core,
   one numba thread per process; with the default error estimate (one extra
   coarser solve per point) and without it.
2. Snakemake (if installed in the environment): the same 200 points as a study
   run in a temporary directory with --directory and a temporary config,
   --cores = usable cores, one thread per point job; the warm-up rule (numba
   compile into the work directory's cache) is timed apart.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import shutil
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
os.environ.setdefault("NUMBA_CACHE_DIR", str(REPO / ".numba_cache"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_acceleration import machine_description  # noqa: E402

PROBLEMS = ("poiseuille", "thermal_creep")
MODELS = ("bgk", "s_model")
ALPHAS = (1.0, 0.9)
DELTAS = [float(f"{d:.6g}") for d in np.logspace(-2, 2, 25)]
TOL = 1e-8


def points():
    return [(p, m, a, d) for p in PROBLEMS for m in MODELS for a in ALPHAS for d in DELTAS]


def _init_worker() -> None:
    import numba

    numba.set_num_threads(1)


def solve_point(args) -> tuple[str, float]:
    from solver.plane_channel import solve_plane_channel
    from solver.walls import MaxwellWall

    problem, model, alpha, delta, estimate = args
    res = solve_plane_channel(problem, delta=delta, model=model, lower_wall=MaxwellWall(alpha),
                              accelerate=True, tol=TOL, error_estimate=estimate)
    return res.status, res.wall_time


def run_direct(workers: int, estimate: bool) -> None:
    tasks = [(*pt, estimate) for pt in points()]
    t0 = time.perf_counter()
    # spawn, not fork: the parent has started numba's OpenMP thread pool, and forking it is unsafe
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_init_worker) as pool:
        list(pool.map(solve_point, [("poiseuille", "bgk", 1.0, 1.0, False)] * workers))  # start + load cache
        t_start = time.perf_counter() - t0
        t1 = time.perf_counter()
        out = list(pool.map(solve_point, tasks, chunksize=1))
        elapsed = time.perf_counter() - t1
    n_ok = sum(s == "converged" for s, _ in out)
    solver_s = sum(t for _, t in out)
    label = "with error estimate (default)" if estimate else "error_estimate=False"
    print(f"   {label:30s}: {len(tasks)} points ({n_ok} converged) in {elapsed:7.1f} s -> "
          f"{60 * len(tasks) / elapsed:7.0f} points/min; solver time summed {solver_s:6.1f} s, "
          f"parallel efficiency {solver_s / (workers * elapsed):.2f}; pool start-up {t_start:.1f} s", flush=True)
    return elapsed


def study_dict() -> dict:
    return {
        "study": "throughput",
        "plane_channel": {
            "problems": list(PROBLEMS),
            "models": list(MODELS),
            "gases": ["Ar"],
            "walls": [{"model": "maxwell", "alpha": a} for a in ALPHAS],
            "delta": DELTAS,
            "resolution": {"n_space": None, "n_velocity": None, "tol": TOL},
            "iteration": {"max_iter": None, "accelerate": True},
        },
        "execution": {"threads_per_point": 1},
    }


def run_snakemake(workers: int, snakemake: str) -> float | None:
    import yaml

    from knudsweep.config import validate_study
    from knudsweep.plan import StudyPlan

    raw = study_dict()
    plan = StudyPlan(validate_study(yaml.safe_load(yaml.safe_dump(raw))))
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        cfg = tmp / "study.yaml"
        cfg.write_text(yaml.safe_dump(raw))
        base = [snakemake, "--snakefile", str(REPO / "Snakefile"), "--directory", str(tmp / "work"),
                "--configfile", str(cfg), "--profile", "none", "--workflow-profile", "none",
                "--cores", str(workers)]

        def run(*targets):
            t0 = time.perf_counter()
            proc = subprocess.run([*base, *targets], capture_output=True, text=True)
            if proc.returncode != 0:
                print(f"   snakemake failed (exit {proc.returncode}):\n{proc.stderr[-2000:]}")
                return None
            return time.perf_counter() - t0

        t_warm = run(*plan.warm_up_flags())
        if t_warm is None:
            return None
        files = plan.point_files()
        t_points = run(*files)
        if t_points is None:
            return None
        done = sum((tmp / "work" / f).exists() for f in files)
        print(f"   warm-up rule (numba compile into the work dir cache): {t_warm:6.1f} s")
        print(f"   {len(files)} point jobs ({done} files written) in {t_points:7.1f} s -> "
              f"{60 * len(files) / t_points:7.0f} points/min (error estimate on: the solver default)", flush=True)
        return t_points


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-snakemake", action="store_true")
    args = parser.parse_args()
    print(machine_description())
    workers = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    print(f"\n200-point plane-channel study, {workers} worker processes x 1 numba thread")
    print("1. direct process pool")
    t_direct = run_direct(workers, estimate=True)
    t_plain = run_direct(workers, estimate=False)
    print(f"   cost of the error estimate: x{t_direct / t_plain:.2f} wall time")
    if args.no_snakemake:
        return
    snakemake = shutil.which("snakemake") or str(Path(sys.executable).parent / "snakemake")
    print("2. Snakemake")
    if not Path(snakemake).exists():
        print("   snakemake not found: skipped")
        return
    t_smk = run_snakemake(workers, snakemake)
    if t_smk is not None:
        print(f"   Snakemake / direct wall time: {t_smk / t_direct:.2f}")


if __name__ == "__main__":
    main()
