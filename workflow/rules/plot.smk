# Stage 4: figures from the gathered sweep only.  Figure settings (section
# `figures`) are params of this rule alone, so changing them redraws figures and
# runs no solver job.
import os


def marked_figures():
    """The figure files; the report's format of each marked for the report with its caption."""
    from knudsweep import report as ks_report

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


rule plot:
    input:
        PLAN.sweep_file,
    output:
        marked_figures(),
    log:
        f"logs/{PLAN.name}/plot.log",
    params:
        study=tracked("figures"),
        gas_data=GAS_DATA,
        outdir=f"{PLAN.study_dir}/figures",
    threads: max(1, len(PLAN.families))  # one core per family's figures (Snakemake caps it at --cores)
    localrule: True
    script:
        "../scripts/plot.py"


rule figures:
    # `snakemake --cores 2 figures`: draw the figures (with --forcerun plot to redraw).
    input:
        PLAN.figure_files(),
    localrule: True
