"""Rule warm_up: compile the family's kernels into the numba cache."""
from knudsweep.jobs import run_warm_up

run_warm_up(snakemake.wildcards.family, snakemake.output[0], snakemake.threads, snakemake.log[0])
