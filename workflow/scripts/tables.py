"""Rule tables: sweep.nc -> tables/*.csv and *.md (logic in the family's table builder)."""

from knudsweep.jobs import run_tables

run_tables(snakemake.params.study, snakemake.input[0], snakemake.params.outdir, snakemake.log[0])
