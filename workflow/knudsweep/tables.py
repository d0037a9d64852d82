"""Write family tables as CSV and as Markdown (title, notes, pipe table).

Column headers carry units in square brackets, e.g. ``pressure [Pa]``; a
dimensionless column is ``[1]``.

Numbers
    A column ``<quantity> uncertainty [<unit>]`` belongs to the column
    ``<quantity> [<unit>]`` of the same table.  Where a row has both, the
    uncertainty is rounded to two significant digits and the value to the same
    decimal place (the usual way of quoting a measured value, e.g. the Guide to
    the Expression of Uncertainty in Measurement, JCGM 100:2008, section 7.2.6).
    An uncertainty below :data:`ROUND_OFF` of its value is floating-point
    round-off of a noise-free estimate and is printed as ``0``, its value with
    6 significant digits.  Every other float has 6 significant digits (the
    precision of point identity, see knudsweep.identity); an empty cell is a
    NaN.  CSV and Markdown carry the same text.
"""

from __future__ import annotations

import math
import os
import re
from pathlib import Path

from knudsweep.families import Table

# Relative size below which an uncertainty is round-off: a noise-free fit of an exact exponential in
# double precision gives 1e-13 .. 1e-11 of the value (measured on the demo's model-equation points);
# a resolved fit-window dependence is 1e-7 or more.  Common practice, no source.
ROUND_OFF = 1e-10
UNCERTAINTY_DIGITS = 2
_UNCERTAINTY = re.compile(r"^(?P<quantity>.+) uncertainty (?P<unit>\[[^\]]*\])$")
ROUND_OFF_NOTE = (
    f"Uncertainties are given to {UNCERTAINTY_DIGITS} significant digits and each value to the "
    f"same decimal place; an uncertainty of 0 is below {ROUND_OFF:g} of its value (round-off of "
    "a noise-free model-equation fit), its value then has 6 significant digits."
)


def _plain(value: float) -> str:
    return "" if math.isnan(value) else format(value, ".6g")


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def format_with_uncertainty(value: float, uncertainty: float) -> tuple[str, str]:
    """Text of ``value`` and its standard ``uncertainty``: digits of the value follow the uncertainty.

    ``(2.25974e-07, 1.6786e-09)`` -> ``("2.260e-07", "1.7e-09")``; ``(1.63149, 0.0121192)`` ->
    ``("1.631", "0.012")``; an uncertainty that is round-off (below ``ROUND_OFF`` of the value,
    or 0) -> ``("2", "0")``; NaN gives an empty cell.
    """
    value, uncertainty = float(value), float(uncertainty)
    if math.isnan(value) or not math.isfinite(uncertainty) or uncertainty < 0:
        return _plain(value), _plain(uncertainty)
    if uncertainty == 0 or uncertainty < ROUND_OFF * abs(value):
        return _plain(value), "0"
    # place of the last kept digit of the uncertainty, as a power of 10
    last = math.floor(math.log10(uncertainty)) - (UNCERTAINTY_DIGITS - 1)
    u_rounded = round(uncertainty, -last)
    if u_rounded >= 10.0 ** (last + UNCERTAINTY_DIGITS):  # 9.96 -> 10: one place more
        last += 1
        u_rounded = round(uncertainty, -last)
    v_rounded = round(value, -last)
    top = math.floor(math.log10(abs(v_rounded))) if v_rounded else last
    if -4 <= top < 6 and last >= -10:  # fixed notation reads best
        decimals = max(-last, 0)
        return format(v_rounded, f".{decimals}f"), format(u_rounded, f".{decimals}f")
    digits = max(top - last, 0)  # scientific, the value's exponent, as many digits as the uncertainty allows
    u_top = math.floor(math.log10(u_rounded))
    return format(v_rounded, f".{digits}e"), format(u_rounded, f".{max(u_top - last, 0)}e")


def _pairs(columns) -> dict[int, int]:
    """{index of value column: index of its uncertainty column}."""
    where = {str(c): i for i, c in enumerate(columns)}
    out = {}
    for i, c in enumerate(columns):
        m = _UNCERTAINTY.match(str(c))
        if m and f"{m['quantity']} {m['unit']}" in where:
            out[where[f"{m['quantity']} {m['unit']}"]] = i
    return out


def cell_texts(table: Table) -> tuple[list[str], list[list[str]], bool]:
    """Header, rows of cell text, and whether some uncertainty was printed as round-off 0."""
    frame = table.frame
    header = [str(c) for c in frame.columns]
    pairs = _pairs(header)
    rows, zeroed = [], False
    for row in frame.itertuples(index=False):
        cells = [(_plain(float(v)) if isinstance(v, float) else str(v)) for v in row]
        for vi, ui in pairs.items():
            if _is_number(row[vi]) and _is_number(row[ui]):
                cells[vi], cells[ui] = format_with_uncertainty(row[vi], row[ui])
                zeroed |= cells[ui] == "0" and not math.isnan(float(row[vi]))
        rows.append(cells)
    return header, rows, zeroed


def _notes(table: Table, zeroed: bool) -> list[str]:
    has_pairs = bool(_pairs([str(c) for c in table.frame.columns]))
    return list(table.notes) + ([ROUND_OFF_NOTE] if has_pairs and zeroed else [])


def to_markdown(table: Table) -> str:
    """Markdown rendering: heading, notes as a list, then the table."""
    header, rows, zeroed = cell_texts(table)
    lines = [f"# {table.title}", ""]
    notes = _notes(table, zeroed)
    if notes:
        lines += [f"- {note}" for note in notes] + [""]
    lines.append("| " + " | ".join(header) + " |")
    lines.append("|" + "|".join("---" for _ in header) + "|")
    for cells in rows:
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    return "\n".join(lines) + "\n"


def to_csv(table: Table) -> str:
    """CSV with the same cell text as the Markdown table (header line first)."""
    import csv
    import io

    header, rows, _ = cell_texts(table)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buf.getvalue()


def write_tables(tables: dict[str, Table], outdir: str | os.PathLike) -> list[Path]:
    """Write ``<outdir>/<name>.csv`` and ``<outdir>/<name>.md`` for every table."""
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    from knudsweep.preflight import ProductWriteError, write_failure_line
    from knudsweep.solver.atomic import atomic_write_text

    written = []
    for name, table in tables.items():
        for path, text in ((outdir / f"{name}.csv", to_csv(table)), (outdir / f"{name}.md", to_markdown(table))):
            try:
                atomic_write_text(path, text)
            except OSError as exc:
                raise ProductWriteError(write_failure_line(path, exc)) from exc
            written.append(path)
    return written
