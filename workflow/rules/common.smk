# Study loading and helpers shared by all rules (no rules here).
#
# The study is validated by the knudsweep package before any job is planned; a
# bad file stops Snakemake with one line naming the key path and the allowed
# values (exit code 1).
import sys

from knudsweep.config import StudyConfigError, validate_study
from knudsweep.plan import StudyPlan, warm_up_flag

try:
    STUDY = validate_study(config)
except StudyConfigError as exc:
    sys.exit(f"knudsweep: invalid study config: {exc}")

PLAN = StudyPlan(STUDY)


wildcard_constraints:
    family="|".join(PLAN.families),


def point_values(wildcards):
    """Canonical values of the requested point (tracked as params: a change reruns it)."""
    return PLAN.point_values(f"{wildcards.family}/{wildcards.point}")


def tracked(*sections):
    """The parts of the study a product depends on (its params, so edits rerun it)."""
    return {k: v for k, v in STUDY.items() if k in ("study", *sections, *PLAN.families)}


EXEC = STUDY["execution"]
