"""Scale of the study layer: a 10,000-point plane-channel study without solving it.

Prints: plan expansion time, Snakemake dry-run time (DAG of the batch jobs),
time to write the synthetic point files (knudsweep.solver.netcdf_io from hand-built
SolverResults, no solve), `knudsweep status` time (first call: reads every
file's attributes and writes the status sidecars; later calls: sidecars only),
and gather time with peak memory (tracemalloc peak of the main process;
ru_maxrss of this process and of its worker processes).

    python benchmarks/bench_scale.py            # 10,000 points
    KNUDSWEEP_BENCH_POINTS=1000 python benchmarks/bench_scale.py
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
import yaml

REPO = Path(__file__).resolve().parents[1]
os.environ.setdefault("NUMBA_CACHE_DIR", str(REPO / ".numba_cache"))

N_POINTS = int(os.environ.get("KNUDSWEEP_BENCH_POINTS", "10000"))
WORKERS = 2


def study(n_points: int) -> dict:
    problems = ["poiseuille", "thermal_creep", "couette", "heat_transfer"]
    return {
        "study": "scale",
        "plane_channel": {
            "problems": problems,
            "models": ["bgk"],
            "walls": [{"alpha": 1.0}],
            "delta": {"start": 1.0e-3, "stop": 1.0e3, "num": n_points // len(problems)},
            "resolution": {"n_space": 40, "n_velocity": 16, "tol": 1.0e-8},
        },
        "execution": {"gather_workers": WORKERS},
    }


def synthetic_result(problem: str, delta: float, failed: bool):
    from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult

    y = np.linspace(-0.5, 0.5, 40)
    coef = {"poiseuille": "G_P", "thermal_creep": "G_T", "couette": "shear_stress", "heat_transfer": "heat_flux"}[
        problem
    ]
    n = 30
    return SolverResult(
        family="plane_channel",
        problem=problem,
        parameters={"delta": delta},
        coords={"y": Quantity(y, "1", "position across the gap / gap", ("y",))},
        profiles={"velocity": Quantity(delta * (0.25 - y**2), "1", "synthetic profile", ("y",))},
        coefficients={} if failed else {coef: Quantity(delta / 6 + 1.0, "1", "synthetic coefficient")},
        convergence=ConvergenceRecord(
            np.geomspace(1, 1e-9, n), n, FAILED if failed else CONVERGED, "synthetic failure" if failed else "", 1e-8
        ),
        wall_time=0.01,
    )


def _write_batch(args):
    root, items = args
    from knudsweep.solver.netcdf_io import write_result

    for pid, problem, delta, path, failed, values in items:
        write_result(
            synthetic_result(problem, delta, failed),
            Path(root) / path,
            {"point_id": pid, "point_values": values, "config_hash": "bench"},
        )
    return len(items)


def main() -> None:
    from knudsweep.config import validate_study
    from knudsweep.gather import gather_study
    from knudsweep.plan import StudyPlan
    from knudsweep.status import study_status

    with tempfile.TemporaryDirectory(prefix="bench_scale_") as tmp:
        root = Path(tmp)
        spec = study(N_POINTS)
        (root / "scale.yaml").write_text(yaml.safe_dump(spec))

        t0 = time.perf_counter()
        plan = StudyPlan(validate_study(spec))
        n = len(plan.points)
        t_plan = time.perf_counter() - t0
        print(f"points: {n}")
        print(f"plan (validate + expand + paths): {t_plan:.2f} s")

        cmd = [
            sys.executable,
            "-m",
            "snakemake",
            "--snakefile",
            str(REPO / "Snakefile"),
            "--directory",
            str(root),
            "--configfile",
            str(root / "scale.yaml"),
            "--profile",
            "none",
            "--workflow-profile",
            "none",
            "--cores",
            "2",
            "--dry-run",
            "--quiet",
            "rules",
        ]
        t0 = time.perf_counter()
        r = subprocess.run(cmd, capture_output=True, text=True)
        t_dry = time.perf_counter() - t0
        assert r.returncode == 0, r.stderr[-2000:]
        print(
            f"snakemake --dry-run (DAG of {len(plan.batches)} batch jobs for {n} points + gather/tables/plot): {t_dry:.1f} s"
        )

        items = [
            (pid, p.values["problem"], p.values["delta"], plan.point_file(pid), i % 97 == 0, p.values)
            for i, (pid, p) in enumerate(plan.points.items())
        ]
        batches = [(str(root), items[i :: WORKERS * 8]) for i in range(WORKERS * 8)]
        t0 = time.perf_counter()
        with ProcessPoolExecutor(WORKERS) as pool:
            written = sum(pool.map(_write_batch, batches))
        t_write = time.perf_counter() - t0
        print(
            f"wrote {written} synthetic point files with {WORKERS} processes: {t_write:.1f} s "
            f"({1e3 * t_write * WORKERS / written:.1f} ms per file per process)"
        )

        status_cmd = [
            str(Path(sys.executable).with_name("knudsweep")),
            "status",
            str(root / "scale.yaml"),
            "--directory",
            str(root),
        ]
        times = []
        for label in ("first call, no sidecars: reads every file's attributes", "second call, from sidecars"):
            t0 = time.perf_counter()
            r = subprocess.run(status_cmd, capture_output=True, text=True)
            times.append(time.perf_counter() - t0)
            assert r.returncode == 0, r.stderr[-2000:]
            print(f"knudsweep status ({label}): {times[-1]:.2f} s -> {r.stdout.strip().splitlines()[-1]}")
        print(f"ratio first / second status call: {times[0] / times[1]:.1f}")
        t0 = time.perf_counter()
        rows = study_status(plan, root)
        print(
            f"study_status() in-process from sidecars: {time.perf_counter() - t0:.2f} s "
            f"({sum(r.state == 'converged' for r in rows)} converged)"
        )

        sys.path.insert(0, str(Path(__file__).resolve().parent))
        from bench_pipeline import write_batches

        t0 = time.perf_counter()
        write_batches(plan, root)
        print(
            f"checked every point file and wrote {len(plan.batches)} batch files (as batch jobs do): "
            f"{time.perf_counter() - t0:.1f} s"
        )
        tracemalloc.start()
        t0 = time.perf_counter()
        datasets = gather_study(plan, root / plan.sweep_file, workers=WORKERS, root=root)
        t_gather = time.perf_counter() - t0
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        ds = datasets["plane_channel"]
        self_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        child_rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        size = (root / plan.sweep_file).stat().st_size / 1e6
        print(
            f"gather of {n} files with {WORKERS} worker processes: {t_gather:.1f} s "
            f"({1e3 * t_gather / n:.2f} ms per point), sweep.nc {size:.1f} MB, "
            f"statuses {dict((str(k), int(v)) for k, v in zip(*np.unique(ds['status'].values, return_counts=True), strict=False))}"
        )
        print(
            f"peak memory: tracemalloc (main process, Python allocations) {peak / 1e6:.0f} MB; "
            f"max RSS main process {self_rss:.0f} MB, largest child process {child_rss:.0f} MB"
        )
        print(f"ratio gather / write of the same files: {t_gather / t_write:.2f}")


if __name__ == "__main__":
    main()
