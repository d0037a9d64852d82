"""Workflow benchmarks: per-point overhead, dry-run of a large grid, gather speed.

Prints figures and ratios, asserts nothing.  Run from the repository root:

    python benchmarks/bench_pipeline.py            # everything (several minutes)
    python benchmarks/bench_pipeline.py --quick    # gather of 1,000 files only, no 10,000

1. Dry-run time of a 10,000-point grid (DAG building only) and the time to
   expand the grid and cut it into batches in the package.
2. Gather time for 1,000 and 10,000 synthetic points (point files written with
   knudsweep.solver.netcdf_io, then checked and collected into batch files of 200 points
   as batch jobs do), serial and with 2 worker processes.
(The workflow against its solver, with real solves: bench_sweep_throughput.py.)
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import yaml

REPO = Path(__file__).resolve().parents[1]
os.environ.setdefault("NUMBA_CACHE_DIR", str(REPO / ".numba_cache"))

from knudsweep.config import validate_study  # noqa: E402
from knudsweep.gather import gather_study  # noqa: E402
from knudsweep.plan import StudyPlan  # noqa: E402
from knudsweep.solver.netcdf_io import write_result  # noqa: E402
from knudsweep.solver.result import ConvergenceRecord, Quantity, SolverResult  # noqa: E402


def smk(workdir: Path, study: Path, *args: str) -> float:
    cmd = [
        sys.executable,
        "-m",
        "snakemake",
        "--snakefile",
        str(REPO / "Snakefile"),
        "--directory",
        str(workdir),
        "--configfile",
        str(study),
        "--profile",
        "none",
        "--workflow-profile",
        "none",
        *args,
    ]
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True, text=True)
    return time.perf_counter() - t0


def study_dict(name: str, deltas, walls=1, problems=("poiseuille",), models=("bgk",)):
    return {
        "study": name,
        "plane_channel": {
            "problems": list(problems),
            "models": list(models),
            "walls": [{"alpha": round(1.0 - 0.05 * i, 6)} for i in range(walls)],
            "delta": deltas,
            "resolution": {"n_space": 16, "n_velocity": 8, "tol": 1e-6},
        },
        "execution": {"gather_workers": 2},
    }


def bench_dry_run(tmp: Path) -> None:
    deltas = {"start": 1e-3, "stop": 1e3, "num": 1250}
    raw = study_dict("big", deltas, walls=2, problems=("poiseuille", "thermal_creep"), models=("bgk", "s_model"))
    study = tmp / "big.yaml"
    study.write_text(yaml.safe_dump(raw))
    t0 = time.perf_counter()
    plan = StudyPlan(validate_study(raw))
    n = len(plan.points)
    t_plan = time.perf_counter() - t0
    t_dry = smk(tmp / "dry", study, "--cores", "2", "--dry-run", "--quiet")
    print(f"1. dry run of a {n:,}-point grid ({len(plan.batches)} batch jobs)")
    print(f"   grid expansion in the package:  {t_plan:8.2f} s")
    print(f"   snakemake --dry-run --quiet:    {t_dry:8.2f} s  ({1e3 * t_dry / n:.2f} ms per point)")


def synthetic_result(delta: float, rng) -> SolverResult:
    n = int(rng.integers(10, 40))
    return SolverResult(
        family="plane_channel",
        problem="poiseuille",
        parameters={"delta": delta},
        coefficients={"G_P": Quantity(delta / 6 + 1.0, "1", "G_P"), "Q_P": Quantity(0.1, "1", "Q_P")},
        convergence=ConvergenceRecord(np.geomspace(1, 1e-8, n), n, "converged", "", 1e-8),
        wall_time=0.1,
    )


def write_batches(plan, root: Path) -> None:
    """The batch files of ``plan`` from its point files under ``root``, as batch jobs write them."""
    from knudsweep.batch_files import write_batch_file
    from knudsweep.batch_job import verify_points

    for key, batch in plan.batches.items():
        records, todo = verify_points({pid: plan.points[pid].values for pid in batch.pids}, root=root)
        assert not todo, f"{len(todo)} invalid synthetic point files"
        write_batch_file([records[pid] for pid in batch.pids], root / plan.batch_file(key), {"batch": key})


def bench_gather(tmp: Path, n_points: int) -> None:
    raw = study_dict(f"g{n_points}", {"start": 1e-3, "stop": 1e3, "num": n_points // 10}, walls=10)
    raw["execution"]["points_per_batch"] = 200
    plan = StudyPlan(validate_study(raw))
    root = tmp / f"gather{n_points}"
    rng = np.random.default_rng(1)
    t0 = time.perf_counter()
    for p in plan.points.values():
        write_result(
            synthetic_result(p.values["delta"], rng),
            root / plan.point_file(p.pid),
            {"point_id": p.pid, "point_values": p.values},
        )
    write_batches(plan, root)
    t_write = time.perf_counter() - t0
    times = {}
    for workers in (1, 2):
        t0 = time.perf_counter()
        gather_study(plan, root / f"sweep{workers}.nc", workers=workers, root=root)
        times[workers] = time.perf_counter() - t0
    print(
        f"2. gather of {len(plan.points):,} synthetic points in {len(plan.batches)} batch files "
        f"(writing them took {t_write:.1f} s)"
    )
    for w, t in times.items():
        print(f"   {w} worker process(es): {t:8.2f} s  ({1e3 * t / len(plan.points):.3f} ms per point)")
    print(f"   speed-up with 2 processes: {times[1] / times[2]:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 10,000-file gather")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        bench_dry_run(tmp)
        for n in (1000,) if args.quick else (1000, 10000):
            bench_gather(tmp, n)


if __name__ == "__main__":
    main()
