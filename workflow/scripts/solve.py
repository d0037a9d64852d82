"""Rule solve: one point -> one netCDF file (logic in knudsweep.point_job)."""
from knudsweep.jobs import run_solve

run_solve(
    pid=f"{snakemake.wildcards.family}/{snakemake.wildcards.point}",
    values=snakemake.params.point,
    output=snakemake.output[0],
    study=snakemake.config,
    threads=snakemake.threads,
    attempt=snakemake.resources.solve_attempt,
    log=snakemake.log[0],
)
