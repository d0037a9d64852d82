"""Batches: the unit of scheduling (one Snakemake job, one SLURM job).

A study's points are cut into batches in plan order (the order of
:meth:`knudsweep.plan.StudyPlan.points`), so the same study always gives the
same batches.  Each family estimates what a point costs
(:meth:`knudsweep.families.Family.point_cost`, seconds on one core, measured on
this code); a batch is filled until its estimated wall time on its threads
would pass the target duration of the execution mode:

    sum(cost) <= target_minutes * 60 * threads * POOL_EFFICIENCY

A point whose cost alone reaches the target gets a batch of its own.  With
``execution.points_per_batch`` set, batches hold that many points instead.

A batch is named ``b<k>-<digest>``: its position in the family and the first
8 hex digits of the SHA-256 of its point ids.  A batch whose content changes
therefore gets a new name (a new output, so Snakemake runs it), and a name can
never silently stand for other points than the ones it was planned with.

The point remains the unit of caching: a batch job solves only the points of
the batch that have no valid point file (:mod:`knudsweep.batch_job`), so
adding one delta value to a finished study solves one point, even though the
batches after it are cut anew and their jobs rerun (they verify and reuse).
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass

# Fraction of `threads` cores a batch's process pool turns into solver time
# (start-up of the workers, uneven last points); measured 0.8-0.9 on 2 cores
# with benchmarks/bench_sweep_throughput.py.
POOL_EFFICIENCY = 0.85
# Below this many estimated single-core seconds a batch solves its points in its own
# process: starting worker processes (about 1.2 s, measured with
# benchmarks/bench_sweep_throughput.py) would cost more than it saves.
POOL_MIN_COST_S = 4.0
# Memory the batch process itself needs besides its workers (Python, numpy,
# netCDF4, the batch records), MB; common practice, no source.
BATCH_BASE_MEM_MB = 500


@dataclass(frozen=True)
class Batch:
    family: str
    name: str
    pids: tuple[str, ...]
    cost_s: float  # estimated single-core seconds for all points

    @property
    def key(self) -> str:
        return f"{self.family}/{self.name}"

    def workers(self, threads: int) -> int:
        """Cores the batch job uses of ``threads``: 1 for a cheap batch, else one per point at most."""
        return 1 if self.cost_s < POOL_MIN_COST_S else max(1, min(int(threads), len(self.pids)))

    def wall_minutes(self, threads: int) -> float:
        """Estimated wall time of the whole batch on ``threads`` cores, minutes."""
        workers = self.workers(threads)
        return self.cost_s / (60.0 * workers * (POOL_EFFICIENCY if workers > 1 else 1.0))


def digest(pids) -> str:
    return hashlib.sha256("\n".join(pids).encode()).hexdigest()[:8]


def form_batches(
    family: str, points, costs: list[float], *, target_minutes: float, threads: int, points_per_batch: int | None = None
) -> list[Batch]:
    """Cut ``points`` (in order) into batches; ``costs`` are their single-core seconds."""
    groups: list[list[int]] = []
    if points_per_batch:
        n = int(points_per_batch)
        groups = [list(range(i, min(i + n, len(points)))) for i in range(0, len(points), n)]
    else:
        budget = target_minutes * 60.0 * max(1, threads) * (POOL_EFFICIENCY if threads > 1 else 1.0)
        current: list[int] = []
        total = 0.0
        for i, c in enumerate(costs):
            if current and total + c > budget:
                groups.append(current)
                current, total = [], 0.0
            current.append(i)
            total += c
        if current:
            groups.append(current)
    width = max(3, len(str(len(groups))))
    out = []
    for k, g in enumerate(groups):
        pids = tuple(points[i].pid for i in g)
        out.append(Batch(family, f"b{k:0{width}d}-{digest(pids)}", pids, float(sum(costs[i] for i in g))))
    return out


def runtime_minutes(batch: Batch, threads: int, attempt: int) -> int:
    """Wall-time limit of a batch job: 3x the estimate plus 10 minutes, times the attempt.

    The factor covers a cost model that is right within ~2x and a loaded node
    (common practice, no source)."""
    return int(math.ceil((3.0 * batch.wall_minutes(threads) + 10.0) * max(1, attempt)))
