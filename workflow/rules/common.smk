# Study loading and helpers shared by all rules (no rules here).
#
# The study is validated by the knudsweep package before any job is planned; a
# bad file stops Snakemake with one line naming the key path and the allowed
# values (exit code 1).
import os
import sys

from knudsweep.batches import BATCH_BASE_MEM_MB, runtime_minutes
from knudsweep.config import StudyConfigError, read_study_yaml, validate_study
from knudsweep import report as ks_report
from knudsweep.plan import StudyPlan
from knudsweep.solver import __version__ as CODE_VERSION
from knudsweep.solver.gas import gas_record

try:
    # Snakemake's YAML reader lets a repeated key win silently: read each study
    # file once more with the strict reader, which refuses it.
    for _path in workflow.configfiles:
        if str(_path).endswith((".yaml", ".yml")):
            read_study_yaml(_path)
    STUDY = validate_study(config)
except StudyConfigError as exc:
    sys.exit(f"knudsweep: invalid study config: {exc}")

# Batches are sized to the cluster target under a remote executor (and inside
# its jobs, which parse this file again and must find the same batches).
PLAN = StudyPlan(STUDY, cluster=workflow.non_local_exec or workflow.remote_exec)
EXEC = STUDY["execution"]


if workflow.is_main_process:
    # Only the process the user started: jobs parse this file again and must not
    # move files or clean temporaries under a running workflow.
    from knudsweep.preflight import check_before_run

    _problem, _notes = check_before_run(PLAN, log_dir=f"logs/{PLAN.name}")
    if _problem:
        sys.exit(f"knudsweep: {_problem}")
    for _note in _notes:
        print(f"knudsweep: {_note}", file=sys.stderr)

# A batch job whose points crashed fails while it has attempts left, so that
# Snakemake runs it again (solving only those points); no flag needed.
BATCH_RETRIES = 1


wildcard_constraints:
    family="|".join(PLAN.families),
    batch=r"b\d+-[0-9a-f]{8}",


def batch_points(wildcards):
    """Point id -> canonical values of the batch's points (KeyError names a batch not in the plan)."""
    batch = PLAN.batch(wildcards.family, wildcards.batch)
    return {pid: PLAN.points[pid].values for pid in batch.pids}


# The gas-table numbers of the study's gases: a param of every product that
# converts with them (an edit of config/gases.yaml rebuilds those products).
GAS_DATA = {g: gas_record(g) for g in sorted({g for f in PLAN.families for g in STUDY[f].get("gases", [])})}


def tracked(*sections):
    """The parts of the study a product depends on (its params, so edits rerun it)."""
    return {k: v for k, v in STUDY.items() if k in ("study", *sections, *PLAN.families)}


def marked_figures():
    """The figure files; the report's format of each marked for the report with its caption."""
    shown = ks_report.report_format(PLAN)
    out = []
    for fam in PLAN.families:
        for name in ks_report.figure_names(PLAN, fam):
            for fmt in STUDY["figures"]["formats"]:
                path = f"{PLAN.study_dir}/figures/{name}.{fmt}"
                if fmt == shown:
                    path = report(path, caption=os.path.abspath(ks_report.caption_file(PLAN, name)),
                                  category=ks_report.category(fam), subcategory="Figures")
                out.append(path)
    return out


def report_caption(name):
    return os.path.abspath(ks_report.caption_file(PLAN, name))


def marked_tables():
    out = [ks_report.study_page(PLAN)]
    for fam in PLAN.families:
        for name in ks_report.table_names(PLAN, fam):
            out.append(ks_report.caption_file(PLAN, name))
            out.append(report(ks_report.table_page(PLAN, name), caption=report_caption(name),
                              category=ks_report.category(fam), subcategory="Tables"))
    for fam in PLAN.families:
        out += [ks_report.caption_file(PLAN, n) for n in ks_report.figure_names(PLAN, fam)]
    return out
