"""`snakemake --report` on a finished tiny study: every figure and table is in it, with its caption.

The report is one self-contained HTML file; its results are a JSON object in
``<script id="results">`` (Snakemake 9 html reporter), its study page the
rendered workflow description.  No browser needed.
"""

import json
import re

import pytest
from wf_helpers import DATA, smk

from knudsweep import report as ks_report
from knudsweep.config import load_study
from knudsweep.plan import StudyPlan

TINY = DATA / "tiny_study.yaml"


@pytest.fixture(scope="module")
def built_report(tmp_path_factory):
    workdir = tmp_path_factory.mktemp("report")
    smk(workdir, TINY)
    smk(workdir, TINY, "--report", str(workdir / "report.html"))
    return workdir, (workdir / "report.html").read_text(encoding="utf-8")


def results_of(page: str) -> dict:
    m = re.search(r'<script id="results">\s*var results = (\{.*?\});?\s*\n', page, re.S)
    assert m, "no results block in the report"
    return json.loads(m.group(1))


def test_every_figure_and_table_is_in_the_report_with_a_caption(built_report):
    workdir, page = built_report
    plan = StudyPlan(load_study(TINY))
    results = results_of(page)
    fmt = ks_report.report_format(plan)
    expected = {}
    for fam in plan.families:
        for name in ks_report.figure_names(plan, fam):
            expected[f"{plan.study_dir}/figures/{name}.{fmt}"] = ("image/png", name)
        for name in ks_report.table_names(plan, fam):
            expected[ks_report.table_page(plan, name)] = ("text/html", name)
    assert set(expected) <= set(results), sorted(set(expected) - set(results))
    for path, (mime, name) in expected.items():
        entry = results[path]
        assert entry["mime_type"] == mime, path
        assert entry["data_uri"].startswith(f"data:{mime}"), path  # embedded, not a link
        caption = re.sub(r"<[^>]+>", " ", entry["caption"])
        assert len(caption) > 80, (path, caption)
        if mime == "image/png" and "convergence" not in name:
            # what is shown, the model, the walls, the uncertainty
            assert "BGK" in caption and "diffuse" in caption and "Uncertainty" in caption, (path, caption)


def test_study_page_counts_points_and_names_the_version(built_report):
    from knudsweep.solver import __version__

    _, page = built_report
    assert "Study tiny" in page
    m = re.search(r"plane channel.*?</tr>", page, re.S | re.I)
    assert m and ">3<" in m.group(0).replace(" ", "")  # 3 points, all converged
    assert f"Solver version {__version__}" in page
    assert "Failed points" in page and "What was swept" in page
