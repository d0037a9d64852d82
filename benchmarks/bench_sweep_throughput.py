"""Sweep throughput: the workflow against its solver, side by side in one run.

Prints figures and ratios, asserts nothing.  Run from the repository root:

    python benchmarks/bench_sweep_throughput.py                    # 200, 1,000, 10,000 points + demo
    python benchmarks/bench_sweep_throughput.py --sizes 200 --no-demo

For each size, one plane-channel study: 2 problems (Poiseuille, thermal creep)
x 2 models (BGK, S-model) x 2 Maxwell walls (alpha 1.0, 0.9) x n/8 log-spaced
delta in [0.01, 100], solver defaults (accelerated, tol 1e-8, error estimate on).
Both sides solve every point and write its point file, from a warm numba cache
(one compile before the first timing, shared by both sides):

1. direct: the points handed to a spawned process pool (one process per core,
   one numba thread each), timed from pool start-up to the last file written;
2. Snakemake: ``snakemake --profile none --workflow-profile none --cores N``
   on the study's batch files (process start, DAG, batch jobs, point files),
   then the sweep file alone (gather of every batch into one dataset).

3. Inside one batch: N worker processes x 1 numba thread against one process
   with N numba threads, on the same points (plane channel and tube).
4. The demo study (config/config.yaml) end to end with ``knudsweep run``
   (solve, gather, tables, figures) against the solver time it records.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import re
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
import yaml

REPO = Path(__file__).resolve().parents[1]
# One numba cache shared by both sides, compiled once below. Spawned pool workers import this
# file again and inherit the variable, so they must not make a cache of their own.
CACHE = os.environ.get("NUMBA_CACHE_DIR") or tempfile.mkdtemp(prefix="knudsweep-bench-numba-")
os.environ["NUMBA_CACHE_DIR"] = CACHE
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_acceleration import machine_description  # noqa: E402

PROBLEMS = ("poiseuille", "thermal_creep")
MODELS = ("bgk", "s_model")
ALPHAS = (1.0, 0.9)
TOL = 1e-8


def study_dict(n: int) -> dict:
    m = max(1, n // (len(PROBLEMS) * len(MODELS) * len(ALPHAS)))
    return {
        "study": f"throughput{n}",
        "plane_channel": {
            "problems": list(PROBLEMS),
            "models": list(MODELS),
            "gases": ["Ar"],
            "walls": [{"model": "maxwell", "alpha": a} for a in ALPHAS],
            "delta": {"start": 0.01, "stop": 100.0, "num": m},
            "resolution": {"n_space": None, "n_velocity": None, "tol": TOL},
            "iteration": {"max_iter": None, "accelerate": True},
        },
        "execution": {"threads_per_batch": CORES, "gather_workers": CORES},
    }


CORES = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()


def _init_worker(threads: int) -> None:
    import numba

    numba.set_num_threads(threads)


def _solve_task(task) -> float:
    """One point through the same call the batch job makes (solve, then write the point file)."""
    from knudsweep.point_job import solve_point

    family, pid, values, section, output = task
    t0 = time.perf_counter()
    solve_point(family, values, output, section=section, pid=pid)
    return time.perf_counter() - t0


def tasks_of(study: dict, root: Path) -> list[tuple]:
    from knudsweep.config import validate_study
    from knudsweep.plan import StudyPlan

    s = validate_study(study)
    plan = StudyPlan(s)
    return [
        (p.family, pid, dict(p.values), s[p.family], str(root / plan.point_file(pid))) for pid, p in plan.points.items()
    ]


def run_pool(tasks: list[tuple], workers: int, threads: int = 1) -> tuple[float, float, float]:
    """(pool start-up incl. imports and numba cache loading, wall time of the points, summed per-point time).

    Start-up is timed on one warm-up point per worker (written to a scratch name).
    """
    t0 = time.perf_counter()
    ctx = multiprocessing.get_context("spawn")
    chunk = max(1, min(16, len(tasks) // (workers * 8)))
    with ProcessPoolExecutor(
        max_workers=workers, mp_context=ctx, initializer=_init_worker, initargs=(threads,)
    ) as pool:
        family, pid, values, section, output = tasks[0]
        warm = [(family, pid, values, section, f"{output}.warm{i}") for i in range(workers)]
        list(pool.map(_solve_task, warm, chunksize=1))
        t_start = time.perf_counter() - t0
        t1 = time.perf_counter()
        times = list(pool.map(_solve_task, tasks, chunksize=chunk))
        elapsed = time.perf_counter() - t1
    return t_start, elapsed, float(sum(times))


def snakemake(
    workdir: Path, config: Path, *args: str, profiles=("--profile", "none", "--workflow-profile", "none")
) -> tuple[float, str]:
    cmd = [
        sys.executable,
        "-m",
        "snakemake",
        "--snakefile",
        str(REPO / "Snakefile"),
        "--directory",
        str(workdir),
        "--configfile",
        str(config),
        *profiles,
        "--cores",
        str(CORES),
        *args,
    ]
    t0 = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode != 0:
        raise SystemExit(f"snakemake failed (exit {r.returncode}):\n{r.stderr[-3000:]}")
    return time.perf_counter() - t0, r.stdout + r.stderr


def compile_once() -> None:
    from knudsweep.batch_job import ensure_compiled

    t0 = time.perf_counter()
    for family in ("plane_channel", "tube_duct", "relaxation"):
        ensure_compiled(family)
    print(f"numba compile of all families into {CACHE}: {time.perf_counter() - t0:.1f} s (not timed below)")


def bench_size(n: int, tmp: Path) -> None:
    from knudsweep.config import validate_study
    from knudsweep.plan import StudyPlan

    study = study_dict(n)
    plan = StudyPlan(validate_study(study))
    n = len(plan.points)
    config = tmp / f"study{n}.yaml"
    config.write_text(yaml.safe_dump(study))
    t_start, t_direct, solver_s = run_pool(tasks_of(study, tmp / f"direct{n}"), CORES)
    work = tmp / f"smk{n}"
    t_smk, out = snakemake(work, config, *plan.batch_files())
    t_gather, _ = snakemake(work, config, plan.sweep_file)
    lines = re.findall(r"knudsweep: batch (\S+): (\d+) points?, (\d+) solved", out)
    solved = sum(int(x[2]) for x in lines)
    print(f"\n{n:,} points ({len(lines)} batch job(s), {solved} solved by them)")
    print(
        f"   direct pool, {CORES} processes: {t_direct:8.1f} s  -> {60 * n / t_direct:9.0f} points/min "
        f"(per-point solve + write summed {solver_s:.1f} s; pool start-up {t_start:.1f} s more)"
    )
    print(
        f"   Snakemake, batch files:     {t_smk:8.1f} s  -> {60 * n / t_smk:9.0f} points/min "
        f"(everything: Snakemake start-up, DAG, job start, imports, solve, write)"
    )
    print(
        f"   Snakemake / direct:         {t_smk / t_direct:8.2f}  "
        f"(/ direct with its start-up: {t_smk / (t_direct + t_start):.2f})"
    )
    print(f"   gather into sweep.nc (Snakemake job incl. start-up): {t_gather:.1f} s")


def bench_inside_batch(tmp: Path) -> None:
    print(f"\n3. inside one batch: {CORES} processes x 1 numba thread vs 1 process x {CORES} numba threads")
    cases = {
        "plane channel, 96 points": study_dict(96),
        "tube, 12 points": {
            "study": "inside",
            "tube_duct": {
                "geometries": [{"shape": "tube"}],
                "problems": ["poiseuille"],
                "models": ["bgk"],
                "gases": ["Ar"],
                "walls": [{"model": "maxwell", "alpha": 1.0}, {"model": "maxwell", "alpha": 0.9}],
                "delta": [0.01, 0.1, 1.0, 3.0, 10.0, 30.0],
            },
        },
    }
    for label, study in cases.items():
        _, t_proc, _ = run_pool(tasks_of(study, tmp / "inside-proc"), CORES, 1)
        _, t_thread, _ = run_pool(tasks_of(study, tmp / "inside-thread"), 1, CORES)
        print(
            f"   {label:26s}: processes {t_proc:6.1f} s, threads {t_thread:6.1f} s  "
            f"(threads / processes = {t_thread / t_proc:.2f})"
        )


def bench_demo(tmp: Path) -> None:
    import xarray as xr

    from knudsweep.config import load_study
    from knudsweep.plan import StudyPlan

    work = tmp / "demo"
    exe = Path(sys.executable).with_name("knudsweep")
    t0 = time.perf_counter()
    r = subprocess.run(
        [
            str(exe),
            "run",
            "--cores",
            str(CORES),
            "--directory",
            str(work),
            "--configfile",
            str(REPO / "config/config.yaml"),
        ],
        cwd=REPO,
        capture_output=True,
        text=True,
    )
    elapsed = time.perf_counter() - t0
    if r.returncode != 0:
        raise SystemExit(f"knudsweep run failed:\n{r.stderr[-3000:]}")
    plan = StudyPlan(load_study(REPO / "config/config.yaml"))
    solver = 0.0
    for fam in plan.families:
        with xr.open_dataset(work / plan.sweep_file, group=fam) as ds:
            solver += float(np.nansum(ds["wall_time"].values))
    print(
        f"\n4. demo study end to end ({len(plan.points)} points, {len(plan.batches)} batch jobs, "
        f"solve + gather + tables + figures, warm numba cache)"
    )
    print(
        f"   knudsweep run --cores {CORES}: {elapsed:6.1f} s; solver time recorded in sweep.nc {solver:.1f} s "
        f"({solver / CORES:.1f} s on {CORES} cores); run / (solver / cores) = {elapsed / (solver / CORES):.2f}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="200,1000,10000", help="comma-separated study sizes")
    parser.add_argument("--no-demo", action="store_true")
    args = parser.parse_args()
    print(machine_description())
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        compile_once()
        print(f"\n1.-2. plane-channel studies: direct process pool vs Snakemake, {CORES} cores")
        for n in (int(s) for s in args.sizes.split(",")):
            bench_size(n, tmp)
        bench_inside_batch(tmp)
        if not args.no_demo:
            bench_demo(tmp)


if __name__ == "__main__":
    main()
