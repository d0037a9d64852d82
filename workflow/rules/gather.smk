# Stage 2: all batch files of the study -> results/<study>/sweep.nc.


rule gather:
    input:
        PLAN.batch_files(),
    output:
        PLAN.sweep_file,
    log:
        f"logs/{PLAN.name}/gather.log",
    params:
        study=tracked(),
        gas_data=GAS_DATA,
    threads: EXEC["gather_workers"]
    resources:
        mem_mb=4000,
        runtime=60,
    conda:
        "../envs/knudsweep.yaml"
    script:
        "../scripts/gather.py"
