"""Rule report_pages: sweep.nc -> report/study.rst, captions, table pages (logic in knudsweep.report)."""

from knudsweep.report import run_report_pages

run_report_pages(snakemake.params.study, snakemake.input[0], snakemake.log[0])
