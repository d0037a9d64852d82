"""Rule plot: sweep.nc -> figures/*.png/.pdf (logic in the family's figure builder)."""

from knudsweep.jobs import run_figures

run_figures(
    snakemake.params.study, snakemake.input[0], snakemake.params.outdir, snakemake.log[0], threads=snakemake.threads
)
