# Stage 1: one job per point.  results/points/ is shared by all studies: a point
# requested by two studies is computed once.


rule warm_up:
    # Compile the numba kernels once into <workdir>/.numba_cache before the
    # point jobs start, so hundreds of jobs do not compile at the same time.
    output:
        warm_up_flag("{family}"),
    log:
        "logs/warm_up/{family}.log",
    threads: 1
    resources:
        mem_mb=2000,
        runtime=30,
    script:
        "../scripts/warm_up.py"


rule solve:
    input:
        # ancient(): a re-made flag must not make every point look outdated.
        ancient(warm_up_flag("{family}")),
    output:
        "results/points/{family}/{point}.nc",
    log:
        "logs/points/{family}/{point}.log",
    params:
        point=point_values,
    threads: EXEC["threads_per_point"]
    resources:
        # grow with each Snakemake retry; solve_attempt also raises max_iter
        mem_mb=lambda wc, attempt: EXEC["mem_mb_per_point"] * attempt,
        runtime=lambda wc, attempt: EXEC["runtime_per_point"] * attempt,
        solve_attempt=lambda wc, attempt: attempt,
    script:
        "../scripts/solve.py"
