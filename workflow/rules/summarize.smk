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
        outdir=lambda wc, output: os.path.dirname(output[0]),
    conda:
        "../envs/knudsweep.yaml"
    localrule: True
    script:
        "../scripts/tables.py"
