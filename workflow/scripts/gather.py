"""Rule gather: point files -> results/<study>/sweep.nc (logic in knudsweep.gather)."""

from knudsweep.jobs import run_gather

if __name__ == "__main__":  # dask worker processes are spawned: guard the entry point
    run_gather(snakemake.params.study, snakemake.output[0], snakemake.threads, snakemake.log[0])
