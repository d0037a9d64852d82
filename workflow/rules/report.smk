# Stage 5: the pages of `snakemake --report report.html`, from the gathered sweep
# only: the study description page (the workflow-level report text), a caption
# per figure and table, and each table as a page.  Figures and table pages are
# marked for the report (report()) in their rules, by family (category).


# absolute: Snakemake joins report paths to the folder of this file
report: os.path.abspath(ks_report.study_page(PLAN))


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
    conda:
        "../envs/knudsweep.yaml"
    localrule: True
    script:
        "../scripts/report_pages.py"
