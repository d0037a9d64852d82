"""Write family tables as CSV and as Markdown (title, notes, pipe table).

Column headers carry units in square brackets, e.g. ``pressure [Pa]``; a
dimensionless column is ``[1]``.  Floats are written with 6 significant digits
(the precision of point identity, see knudsweep.identity).
"""

from __future__ import annotations

import math
import os
from pathlib import Path

from knudsweep.families import Table


def _cell(value) -> str:
    if isinstance(value, float):
        return "" if math.isnan(value) else format(value, ".6g")
    return str(value).replace("|", "\\|")


def to_markdown(table: Table) -> str:
    """Markdown rendering: heading, notes as a list, then the table."""
    frame = table.frame
    lines = [f"# {table.title}", ""]
    if table.notes:
        lines += [f"- {note}" for note in table.notes] + [""]
    header = [str(c) for c in frame.columns]
    lines.append("| " + " | ".join(header) + " |")
    lines.append("|" + "|".join("---" for _ in header) + "|")
    for row in frame.itertuples(index=False):
        lines.append("| " + " | ".join(_cell(v) for v in row) + " |")
    return "\n".join(lines) + "\n"


def _atomic_text(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, path)
    except OSError:
        tmp.unlink(missing_ok=True)
        raise


def write_tables(tables: dict[str, Table], outdir: str | os.PathLike) -> list[Path]:
    """Write ``<outdir>/<name>.csv`` and ``<outdir>/<name>.md`` for every table."""
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    from knudsweep.preflight import ProductWriteError, write_failure_line

    written = []
    for name, table in tables.items():
        csv = table.frame.to_csv(index=False, float_format="%.6g", lineterminator="\n")
        for path, text in ((outdir / f"{name}.csv", csv), (outdir / f"{name}.md", to_markdown(table))):
            try:
                _atomic_text(path, text)
            except OSError as exc:
                raise ProductWriteError(write_failure_line(path, exc)) from exc
            written.append(path)
    return written
