# knudsweep: parametric sweeps of rarefied-gas transport.
#
#   knudsweep run --cores 2                        demo study (config/config.yaml), safe settings
#   knudsweep run --cores 2 --configfile my.yaml   any other study (replaces the demo)
#   knudsweep run --cores 2 figures                redraw figures from results/<study>/sweep.nc
#   snakemake --report report.html                 the report: study page, figures, tables
# `knudsweep run` is snakemake with --workflow-profile config/profiles/default
# (keep-going, rerun-incomplete, retries); plain `snakemake` works too.
# Cluster: see config/profiles/slurm/profile.yaml
from snakemake.utils import min_version

min_version("9.0")


##### configuration #####
# A --configfile given on the command line is the whole study; the demo file is
# read only when none is given (no silent merge of two studies).
if not config:

    configfile: "config/config.yaml"


include: "workflow/rules/common.smk"


##### stages #####
include: "workflow/rules/solve.smk"
include: "workflow/rules/gather.smk"
include: "workflow/rules/summarize.smk"
include: "workflow/rules/plot.smk"
include: "workflow/rules/report.smk"


##### target #####
rule all:
    input:
        PLAN.sweep_file,
        PLAN.table_files(),
        PLAN.figure_files(),
        ks_report.page_files(PLAN),
    default_target: True
    localrule: True
