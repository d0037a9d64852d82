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
from cycler import cycler  # noqa: E402

from knudsweep.plot_style import COLORS  # noqa: E402

STYLE = {
    "axes.prop_cycle": cycler(color=COLORS),  # colour-blind-safe (knudsweep.plot_style)
    "pdf.fonttype": 42,
    "ps.fonttype": 42,
    "svg.fonttype": "none",
    "svg.hashsalt": "knudsweep",
    "axes.grid": True,
    "grid.alpha": 0.3,
    "legend.fontsize": "small",
    "figure.constrained_layout.use": True,
}

# Applied on import: the families create their artists after new_figure returns,
# so the style must hold outside the rc_context too.
matplotlib.rcParams.update(STYLE)

_METADATA = {
    "png": {"Software": None},
    "pdf": {"CreationDate": None, "ModDate": None, "Producer": None},
    "svg": {"Date": None},
}


def new_figure(settings: dict, *, mosaic=None, scale=(1.0, 1.0), **kw):
    """A figure of the study's figure size (times ``scale``), in the knudsweep style.

    Returns ``(fig, ax)``; with ``mosaic`` (see ``Figure.subplot_mosaic``) ``(fig, {name: ax})``.
    """
    size = (settings["width"] * scale[0], settings["height"] * scale[1])
    with plt.rc_context(STYLE):
        if mosaic is not None:
            fig = plt.figure(figsize=size)
            return fig, fig.subplot_mosaic(mosaic, **kw)
        fig, ax = plt.subplots(figsize=size, **kw)
    return fig, ax


def save_figure(fig, stem: str | os.PathLike, formats: list[str], dpi: int) -> list[Path]:
    """Write ``<stem>.<fmt>`` for each format (atomically) and close the figure."""
    from knudsweep.preflight import ProductWriteError, write_failure_line
    from knudsweep.solver.atomic import atomic_replace

    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    written = []
    try:
        with plt.rc_context(STYLE):
            for fmt in formats:
                path = stem.with_name(f"{stem.name}.{fmt}")
                try:
                    atomic_replace(
                        path, lambda tmp, fmt=fmt: fig.savefig(tmp, format=fmt, dpi=dpi, metadata=_METADATA[fmt])
                    )
                except OSError as exc:
                    raise ProductWriteError(write_failure_line(path, exc)) from exc
                written.append(path)
    finally:
        plt.close(fig)
    return written
