"""The file plan of a validated study: point files, sweep file, tables, figures.

Used by the Snakemake rules (workflow/rules/common.smk), the status command and
the benchmarks, so all three agree on every path.  Paths are relative to the
working directory (the repository root or ``--directory``).
"""

from __future__ import annotations

from functools import cached_property
from typing import Any

from knudsweep.families import Point, family_sections, get_family

RESULTS = "results"


class StudyPlan:
    """Everything a study will produce, derived from the validated study dict."""

    def __init__(self, study: dict[str, Any]):
        self.study = study
        self.name: str = study["study"]
        self.families: list[str] = family_sections(study)

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

    def warm_up_flags(self) -> list[str]:
        return [warm_up_flag(fam) for fam in self.families]


def warm_up_flag(family: str) -> str:
    """Flag file written once the family's kernels are compiled into the numba cache."""
    return f"{RESULTS}/.warm_up/{family}.done"
