"""The file plan of a validated study: point files, batches, sweep file, tables, figures.

Used by the Snakemake rules (workflow/rules/common.smk), the status command and
the benchmarks, so all three agree on every path.  Paths are relative to the
working directory (the repository root or ``--directory``).
"""

from __future__ import annotations

from functools import cached_property
from typing import Any

from knudsweep.batches import Batch, form_batches
from knudsweep.families import Point, family_sections, get_family

RESULTS = "results"


class StudyPlan:
    """Everything a study will produce, derived from the validated study dict.

    ``cluster`` selects the batch target duration (``execution.batch_minutes``:
    ``cluster`` for a remote executor such as SLURM, ``local`` otherwise).
    """

    def __init__(self, study: dict[str, Any], cluster: bool = False):
        self.study = study
        self.name: str = study["study"]
        self.families: list[str] = family_sections(study)
        self.cluster = bool(cluster)

    @cached_property
    def points(self) -> dict[str, Point]:
        """All points of the study keyed by point id (``<family>/...``)."""
        out: dict[str, Point] = {}
        for fam in self.families:
            for p in get_family(fam).points(self.study[fam]):
                out[p.pid] = p
        return out

    def point_file(self, pid: str) -> str:
        return f"{RESULTS}/points/{pid}.nc"

    def point_files(self) -> list[str]:
        return [self.point_file(pid) for pid in self.points]

    def point_values(self, pid: str) -> dict[str, Any]:
        """Canonical values of point ``pid`` (KeyError names the id)."""
        try:
            return self.points[pid].values
        except KeyError:
            raise KeyError(f"point {pid!r} is not part of study {self.name!r}") from None

    @property
    def study_dir(self) -> str:
        return f"{RESULTS}/{self.name}"

    @property
    def sweep_file(self) -> str:
        return f"{self.study_dir}/sweep.nc"

    def table_files(self) -> list[str]:
        out = []
        for fam in self.families:
            for name in get_family(fam).table_names(self.study[fam]):
                out += [f"{self.study_dir}/tables/{name}.csv", f"{self.study_dir}/tables/{name}.md"]
        return out

    def figure_files(self) -> list[str]:
        formats = self.study["figures"]["formats"]
        out = []
        for fam in self.families:
            for name in get_family(fam).figure_names(self.study[fam]):
                out += [f"{self.study_dir}/figures/{name}.{fmt}" for fmt in formats]
        return out

    # --- batches (the unit of scheduling; see knudsweep.batches) ---

    @property
    def batch_threads(self) -> int:
        return int(self.study["execution"]["threads_per_batch"])

    @cached_property
    def batches(self) -> dict[str, Batch]:
        """All batches of the study keyed by ``<family>/<name>``, in plan order."""
        ex = self.study["execution"]
        target = float(ex["batch_minutes"]["cluster" if self.cluster else "local"])
        out: dict[str, Batch] = {}
        for fam in self.families:
            family = get_family(fam)
            pts = [p for p in self.points.values() if p.family == fam]
            costs = [family.point_cost(p.values) for p in pts]
            for b in form_batches(
                fam,
                pts,
                costs,
                target_minutes=target,
                threads=self.batch_threads,
                points_per_batch=ex.get("points_per_batch"),
            ):
                out[b.key] = b
        return out

    def batch(self, family: str, name: str) -> Batch:
        try:
            return self.batches[f"{family}/{name}"]
        except KeyError:
            raise KeyError(
                f"batch {family}/{name} is not part of study {self.name!r} as planned now "
                "(its points changed); run the workflow again"
            ) from None

    def batch_file(self, key: str) -> str:
        return f"{self.study_dir}/batches/{key}.nc"

    def batch_files(self, family: str | None = None) -> list[str]:
        return [self.batch_file(k) for k, b in self.batches.items() if family in (None, b.family)]

    @cached_property
    def batch_of(self) -> dict[str, str]:
        """Point id -> key of the batch that holds it."""
        return {pid: key for key, b in self.batches.items() for pid in b.pids}
