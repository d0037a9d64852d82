# Stage 1: one job per batch of points (knudsweep.batch_job).  Point files in
# results/points/ are the cache, shared by all studies; they are not declared
# outputs, so Snakemake never deletes one.  The batch file is the job's output
# and the input of gather.


rule solve_batch:
    output:
        f"{PLAN.study_dir}/batches/{{family}}/{{batch}}.nc",
    log:
        f"logs/{PLAN.name}/batches/{{family}}/{{batch}}.log",
    params:
        # tracked: a batch whose points or solver version change runs again
        points=batch_points,
        code_version=CODE_VERSION,
        max_attempt=BATCH_RETRIES + 1,
    threads: lambda wc: PLAN.batch(wc.family, wc.batch).workers(PLAN.batch_threads)  # 1 for a cheap batch
    retries: BATCH_RETRIES
    resources:
        # grow with each retry; the job also raises max_iter for the failed points
        mem_mb=lambda wc, threads, attempt: (BATCH_BASE_MEM_MB + threads * EXEC["mem_mb_per_point"]) * attempt,
        runtime=lambda wc, threads, attempt: runtime_minutes(PLAN.batch(wc.family, wc.batch), threads, attempt),
        solve_attempt=lambda wc, attempt: attempt,
    conda:
        "../envs/knudsweep.yaml"
    script:
        "../scripts/solve_batch.py"
