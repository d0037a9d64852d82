"""Save matplotlib figures reproducibly (Agg backend, fixed metadata, TrueType fonts).

Same data -> byte-identical PNG/PDF/SVG: the PDF creation date, the PNG
"Software" key and the SVG date are removed and the SVG id salt is fixed
(matplotlib savefig ``metadata``; svg.hashsalt).  Fonts are embedded as
TrueType (pdf.fonttype 42) so text stays editable.
"""

from __future__ import annotations

import os
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (backend must be chosen first)

STYLE = {
    "pdf.fonttype": 42,
    "ps.fonttype": 42,
    "svg.fonttype": "none",
    "svg.hashsalt": "knudsweep",
    "axes.grid": True,
    "grid.alpha": 0.3,
    "legend.fontsize": "small",
    "figure.constrained_layout.use": True,
}

_METADATA = {
    "png": {"Software": None},
    "pdf": {"CreationDate": None, "ModDate": None, "Producer": None},
    "svg": {"Date": None},
}


def new_figure(settings: dict):
    """A figure and axes of the study's figure size, in the knudsweep style."""
    with plt.rc_context(STYLE):
        fig, ax = plt.subplots(figsize=(settings["width"], settings["height"]))
    return fig, ax


def save_figure(fig, stem: str | os.PathLike, formats: list[str], dpi: int) -> list[Path]:
    """Write ``<stem>.<fmt>`` for each format (atomically) and close the figure."""
    from knudsweep.preflight import ProductWriteError, write_failure_line

    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    written = []
    try:
        with plt.rc_context(STYLE):
            for fmt in formats:
                path = stem.with_name(f"{stem.name}.{fmt}")
                tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
                try:
                    fig.savefig(tmp, format=fmt, dpi=dpi, metadata=_METADATA[fmt])
                    os.replace(tmp, path)
                except OSError as exc:
                    tmp.unlink(missing_ok=True)
                    raise ProductWriteError(write_failure_line(path, exc)) from exc
                written.append(path)
    finally:
        plt.close(fig)
    return written
