# Stage 3: tables (CSV + Markdown) from the gathered sweep only.


rule tables:
    input:
        PLAN.sweep_file,
    output:
        PLAN.table_files(),
    log:
        f"logs/{PLAN.name}/tables.log",
    params:
        study=tracked(),
        gas_data=GAS_DATA,
        outdir=f"{PLAN.study_dir}/tables",
    localrule: True
    script:
        "../scripts/tables.py"
