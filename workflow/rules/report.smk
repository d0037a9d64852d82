# Stage 5: the pages of `snakemake --report report.html`, from the gathered sweep
# only: the study description page (the workflow-level report text), a caption
# per figure and table, and each table as a page.  Figures and table pages are
# marked for the report (report()) in their rules, by family (category).
import os

from knudsweep import report as ks_report

# absolute: Snakemake joins report paths to the folder of this file
report: os.path.abspath(ks_report.study_page(PLAN))


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


rule report_pages:
    input:
        PLAN.sweep_file,
    output:
        marked_tables(),
    log:
        f"logs/{PLAN.name}/report_pages.log",
    params:
        study=tracked(),
        gas_data=GAS_DATA,
    localrule: True
    script:
        "../scripts/report_pages.py"
