"""Rule solve_batch: verify and solve one batch of points (logic in knudsweep.batch_job)."""

import sys

# A batch job never uses dask: marked absent, xarray does not import dask and
# distributed when it writes a point file (about 1 s less per job).
for _name in ("dask", "distributed"):
    sys.modules.setdefault(_name, None)

if __name__ == "__main__":  # the batch's worker processes are spawned: guard the entry point
    from knudsweep.jobs import run_batch_job

    run_batch_job(
        key=f"{snakemake.wildcards.family}/{snakemake.wildcards.batch}",
        points=snakemake.params.points,
        output=snakemake.output[0],
        study=snakemake.config,
        threads=snakemake.threads,
        attempt=snakemake.resources.solve_attempt,
        max_attempt=snakemake.params.max_attempt,
        log=snakemake.log[0],
    )
