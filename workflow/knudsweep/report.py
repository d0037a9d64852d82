"""Pages of the Snakemake report (``snakemake --report report.html``), built from the gathered sweep.

``results/<study>/report/``:

* ``study.rst``: the study description page (the workflow-level ``report:``
  text): what was swept, how many points converged, failed or are missing (per
  family), the failed points with their reasons, the code version;
* ``captions/<figure or table>.rst``: one caption per figure and table, saying
  what is shown, the model, the walls and the uncertainty (the family's
  ``figure_captions(ds, section)``, registered beside each figure builder in
  ``knudsweep.families.<family>.report``; tables get their title and notes);
* ``tables/<table>.html``: each table as a page the report can show (the CSV
  beside it is the data).

Everything here reads ``sweep.nc`` only; nothing calls a solver.
"""

from __future__ import annotations

import html
import os
import re
from pathlib import Path
from typing import Any

import numpy as np

REPORT_DIR = "report"
CATEGORIES = {"plane_channel": "Plane channel", "tube_duct": "Tube and ducts", "relaxation": "Relaxation"}
_FAMILY_WORDS = {
    "plane_channel": "fully developed flow between parallel plates (linearised kinetic models and the linearised Boltzmann equation)",
    "tube_duct": "fully developed flow through a long circular tube and rectangular ducts (linearised kinetic models; the linearised Boltzmann equation in the tube)",
    "relaxation": "space-homogeneous relaxation to equilibrium (DSMC, the Boltzmann equation by the fast spectral method, model equations)",
}


def category(family: str) -> str:
    """Report category of a family (plain words)."""
    return CATEGORIES.get(family, family.replace("_", " ").capitalize())


def report_dir(plan) -> str:
    return f"{plan.study_dir}/{REPORT_DIR}"


def study_page(plan) -> str:
    return f"{report_dir(plan)}/study.rst"


def caption_file(plan, name: str) -> str:
    return f"{report_dir(plan)}/captions/{name}.rst"


def table_page(plan, name: str) -> str:
    return f"{report_dir(plan)}/tables/{name}.html"


def figure_names(plan, family: str) -> list[str]:
    from knudsweep.families import get_family

    return get_family(family).figure_names(plan.study[family])


def table_names(plan, family: str) -> list[str]:
    from knudsweep.families import get_family

    return get_family(family).table_names(plan.study[family])


def report_format(plan) -> str:
    """The figure format shown in the report: PNG if drawn, else SVG, else the first."""
    formats = plan.study["figures"]["formats"]
    return next((f for f in ("png", "svg") if f in formats), formats[0])


def page_files(plan) -> list[str]:
    """Every file :func:`write_report_pages` writes (the outputs of the rule)."""
    out = [study_page(plan)]
    for fam in plan.families:
        out += [caption_file(plan, n) for n in figure_names(plan, fam) + table_names(plan, fam)]
        out += [table_page(plan, n) for n in table_names(plan, fam)]
    return out


# ---------------------------------------------------------------- text helpers
def rst_escape(text: str) -> str:
    """Plain text safe in reStructuredText and in the report's Jinja pass."""
    text = str(text).replace("\\", "\\\\")
    for ch in ("*", "`", "|"):
        text = text.replace(ch, "\\" + ch)
    return text.replace("{{", "{ {").replace("{%", "{ %").replace("{#", "{ #")


def _paragraphs(parts: list[str]) -> str:
    return "\n\n".join(p.strip() for p in parts if p and p.strip()) + "\n"


def relative_error_sentence(ds, key: str, sel: dict | None = None, what: str | None = None) -> str:
    """One sentence on the largest estimated discretisation error of ``key`` over the converged points."""
    err = f"{key}_error_estimate"
    if key not in ds or err not in ds:
        return "No discretisation-error estimate is recorded for these points."
    v = ds[key].sel(**(sel or {})).values.astype(float)
    e = ds[err].sel(**(sel or {})).values.astype(float)
    ok = np.isfinite(v) & np.isfinite(e) & (v != 0)
    if not ok.any():
        return "No converged point carries an error estimate."
    rel = float(np.max(np.abs(e[ok] / v[ok])))
    size = ", far below the marker size" if rel < 0.01 else ""
    return (
        f"Uncertainty: the estimated discretisation error of {what or key} (Richardson extrapolation over a "
        f"coarser solve) is at most {100 * rel:.2g} % of the value over the points shown{size}; it does not "
        "include the model error (kinetic model, wall law)."
    )


def status_sentence(ds, sel: dict | None = None) -> str:
    s = ds["status"].sel(**(sel or {})).values.ravel().astype(str)
    n = s.size
    conv = int((s == "converged").sum())
    fail = int((s == "failed").sum())
    miss = n - conv - fail
    out = f"{conv} of {n} points converged"
    if fail:
        out += f", {fail} failed (marked with a cross on the bottom axis; see the study page for reasons)"
    if miss:
        out += f", {miss} missing"
    return out + "."


# ---------------------------------------------------------------- pages
def plain_label(dim: str, value: str) -> str:
    """Plain words for a coordinate label of the sweep (``maxwell-alpha=0.9`` -> ``Maxwell, alpha = 0.9``)."""
    from knudsweep import plot_style as ps

    if dim in ("model", "method"):
        return ps.model_text(value)
    if dim == "problem":
        return ps.problem_text(value)
    if dim == "initial_state":
        return ps.state_text(value)
    if dim == "molecular_model":
        return ps.molecular_text(value)
    if dim == "wall":
        parts = []
        for side in value.split("_upper="):
            side = side.replace("cercignani_lampis-", "Cercignani-Lampis, ").replace("maxwell-", "Maxwell, ")
            side = re.sub(
                r"-?(alpha(?:_[tn])?)=",
                lambda m: (", " if m.group(0).startswith("-") else "") + m.group(1) + " = ",
                side,
            )
            parts.append(side)
        return parts[0] if len(parts) == 1 else f"lower {parts[0]}; upper {parts[1]}"
    return value


def _counts(ds) -> dict[str, int]:
    s = ds["status"].values.ravel().astype(str)
    return {
        "points": int(s.size),
        "converged": int((s == "converged").sum()),
        "failed": int((s == "failed").sum()),
        "missing": int(s.size - (s == "converged").sum() - (s == "failed").sum()),
    }


def _axes_lines(ds, family) -> list[str]:
    from knudsweep.families import get_family  # noqa: F401  (family import checks the name)

    lines = []
    for dim in ds["status"].dims:
        vals = ds[dim].values
        if np.issubdtype(vals.dtype, np.number):
            shown = (
                ", ".join(f"{v:g}" for v in vals)
                if vals.size <= 8
                else f"{vals.size} values from {vals.min():g} to {vals.max():g}"
            )
        else:
            shown = "; ".join(plain_label(dim, str(v)) for v in vals)
        lines.append(f"   * - {dim.replace('_', ' ')}\n     - {rst_escape(shown)}")
    return lines


def study_page_text(plan, sweep: str) -> str:
    import xarray as xr

    from knudsweep.gather import open_sweep

    with xr.open_dataset(sweep, engine="netcdf4") as root:
        attrs = dict(root.attrs)
    title = f"Study {plan.name}"
    parts = [f"{title}\n{'=' * len(title)}"]
    if attrs.get("description") or plan.study.get("description"):
        parts.append(rst_escape(attrs.get("description") or plan.study["description"]))
    parts.append(
        f"Solver version {rst_escape(attrs.get('code_version', '?'))}, study hash "
        f"{rst_escape(str(attrs.get('config_hash', '?'))[:12])}. The results below are model predictions "
        "(linearised kinetic models or particle simulations of an ideal gas, with the stated wall laws); "
        "the uncertainties given in the captions are numerical only and do not cover the model error."
    )
    rows = [
        "   * - family\n     - what is computed\n     - points\n     - converged\n     - failed\n"
        "     - missing\n     - point code versions"
    ]
    failed_lines = []
    sweeps = []
    for fam in plan.families:
        ds = open_sweep(sweep, fam)
        c = _counts(ds)
        versions = sorted({v for v in ds["code_version"].values.ravel().astype(str) if v})
        rows.append(
            f"   * - `{category(fam)}`_\n     - {_FAMILY_WORDS.get(fam, fam)}\n     - {c['points']}\n"
            f"     - {c['converged']}\n     - {c['failed']}\n     - {c['missing']}\n"
            f"     - {rst_escape(', '.join(versions) or 'none')}"
        )
        sweeps.append(
            f"{category(fam)}\n{'~' * len(category(fam))}\n\n.. list-table::\n   :header-rows: 0\n\n"
            + "\n".join(_axes_lines(ds, fam))
        )
        bad = np.argwhere(np.isin(ds["status"].values.astype(str), ["failed"]))
        for idx in bad[:20]:
            where = ", ".join(f"{d} = {ds[d].values[i]}" for d, i in zip(ds["status"].dims, idx, strict=False))
            failed_lines.append(
                f"* {category(fam)}: {rst_escape(where)}: {rst_escape(ds['reason'].values[tuple(idx)])}"
            )
        if len(bad) > 20:
            failed_lines.append(f"* {category(fam)}: {len(bad) - 20} more (knudsweep status lists all)")
    parts.append("Points\n------\n\n.. list-table::\n   :header-rows: 1\n\n" + "\n".join(rows))
    parts.append("Failed points\n-------------\n\n" + ("\n".join(failed_lines) if failed_lines else "None."))
    parts.append("What was swept\n--------------\n\nThe grid of each family (every combination is one point).")
    parts += sweeps
    parts.append(
        "Reading the figures\n-------------------\n\n"
        "Colours are the colour-blind-safe set of Okabe and Ito (2008); every series also has its own marker "
        "shape, so the figures read in greyscale. Markers are computed points; the curves between them are "
        "monotone (PCHIP) interpolations. For the kinetic models a large open marker is BGK and a small "
        "filled one the S-model. Thin dark-grey lines are references (continuum, slip and free-molecular "
        "limits), drawn only where they apply. Each figure has a PNG and a PDF in figures/, each table a CSV "
        "and a Markdown file in tables/."
    )
    return _paragraphs(parts)


def table_caption(table, name: str) -> str:
    notes = "\n".join(f"* {rst_escape(n)}" for n in table.notes)
    return _paragraphs(
        [f"**{rst_escape(table.title)}** (tables/{name}.csv; the Markdown file beside it holds the same notes).", notes]
    )


def table_html(table, name: str) -> str:
    frame = table.frame
    body = frame.to_html(index=False, border=0, na_rep="", float_format=lambda v: f"{v:.6g}", classes="knudsweep-table")
    notes = "".join(f"<li>{html.escape(n)}</li>" for n in table.notes)
    return (
        '<!DOCTYPE html>\n<html><head><meta charset="utf-8">'
        f"<title>{html.escape(table.title)}</title>"
        "<style>body{font-family:sans-serif;font-size:13px;margin:1em}"
        "table{border-collapse:collapse}th,td{padding:2px 6px;border-bottom:1px solid #ddd;text-align:right}"
        "th{position:sticky;top:0;background:#f4f4f4}</style></head><body>"
        f"<h2>{html.escape(table.title)}</h2><p>Data: tables/{html.escape(name)}.csv "
        f"({len(frame)} rows).</p><ul>{notes}</ul>{body}</body></html>\n"
    )


def _write(path: str | os.PathLike, text: str) -> None:
    from knudsweep.solver.atomic import atomic_write_text

    atomic_write_text(path, text)


def write_report_pages(study: dict[str, Any], sweep: str, root: str | os.PathLike = ".") -> list[Path]:
    """Write :func:`page_files` of the validated ``study`` from the sweep file."""
    from knudsweep.families import get_family
    from knudsweep.gather import open_sweep
    from knudsweep.plan import StudyPlan

    plan = StudyPlan(study)
    root = Path(root)
    written = []
    _write(root / study_page(plan), study_page_text(plan, sweep))
    written.append(root / study_page(plan))
    for fam in plan.families:
        ds = open_sweep(sweep, fam)
        section = plan.study[fam]
        family = get_family(fam)
        captions = family.figure_captions(ds, section)
        for name in family.figure_names(section):
            text = captions.get(name) or f"{category(fam)}: {name.replace('_', ' ')}."
            _write(
                root / caption_file(plan, name),
                _paragraphs([text, status_sentence(ds)]) if name not in captions else _paragraphs([text]),
            )
            written.append(root / caption_file(plan, name))
        for name, table in family.tables(ds, section).items():
            _write(root / caption_file(plan, name), table_caption(table, name))
            _write(root / table_page(plan, name), table_html(table, name))
            written += [root / caption_file(plan, name), root / table_page(plan, name)]
    return written


def run_report_pages(study: dict[str, Any], sweep: str, log: str | None = None) -> list[Path]:
    """Rule ``report_pages``: write the report pages; a failed write is one line and exit 1."""
    from knudsweep.config import validate_study
    from knudsweep.jobs import setup_logging
    from knudsweep.preflight import one_line_exit

    setup_logging(log)
    with one_line_exit("report pages"):
        return write_report_pages(validate_study(study), sweep)
