# Stage 4: figures from the gathered sweep only.  Figure settings (section
# `figures`) are params of this rule alone, so changing them redraws figures and
# runs no solver job.
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
        outdir=lambda wc, output: os.path.dirname(output[0]),
    conda:
        "../envs/knudsweep.yaml"
    threads: max(1, len(PLAN.families))  # one core per family's figures (Snakemake caps it at --cores)
    localrule: True
    script:
        "../scripts/plot.py"


rule figures:
    # `snakemake --cores 2 figures`: draw the figures (with --forcerun plot to redraw).
    input:
        PLAN.figure_files(),
    localrule: True
