"""One look for every knudsweep figure: colours, markers, reference lines, labels.

Colours: the qualitative palette of Okabe & Ito, "Color Universal Design (CUD):
how to make figures and presentations that are friendly to colorblind people"
(J*Fly, 2008; also Wong, Nature Methods 8 (2011) 441), without its yellow
(too pale on white) and black (kept for reference lines).  Colour never carries
meaning alone, so a figure stays readable in greyscale:

* series (a wall setting, a channel cross-section, a molecular model): colour
  *and* marker shape, in the order :data:`COLORS` / :data:`MARKERS`;
* kinetic model of a computed point: marker fill (:func:`model_marker`): BGK a
  large open marker, S-model a small filled one drawn inside it (both stay
  visible where the models agree), ES-BGK half filled;
* reference curves (limits and asymptotes): thin, dark grey, one dash pattern
  per kind (:data:`REFERENCE`), drawn only over the range where they apply;
* computed data: solid lines through the computed points (markers), or a
  monotone (PCHIP) curve through them in log-log coordinates (:func:`smooth_loglog`).

Labels use matplotlib mathtext; :func:`wall_text`, :func:`model_text`,
:func:`state_text` turn the internal identifiers of a study into plain words.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

# Okabe & Ito (2008): blue, vermillion, bluish green, reddish purple, orange, sky blue
COLORS = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9"]
MARKERS = ["o", "s", "^", "D", "v", "P"]
REFERENCE_COLOR = "0.2"
REFERENCE = {
    "continuum": {"ls": (0, (1, 1.6)), "lw": 1.2, "color": REFERENCE_COLOR},
    "slip": {"ls": (0, (5, 2.5)), "lw": 1.0, "color": REFERENCE_COLOR},
    "free_molecular": {"ls": (0, (7, 2, 1.5, 2)), "lw": 1.0, "color": REFERENCE_COLOR},
    "fit": {"ls": (0, (2, 1.5)), "lw": 1.1, "color": "black"},
}
LINE_WIDTH = 1.3
DATA_Z, REFERENCE_Z = 3, 4  # thin references drawn over the data, so none hides under a curve

MODEL_NAMES = {"bgk": "BGK", "s_model": "S-model", "es_bgk": "ES-BGK", "dsmc": "DSMC"}
MOLECULAR_NAMES = {"vhs": "VHS", "vss": "VSS", "hard_sphere": "hard sphere", "maxwell": "Maxwell molecules"}
STATE_NAMES = {
    "anisotropic": "anisotropic temperature",
    "two_beams": "two beams",
    "bkw": "BKW",
    "equilibrium": "equilibrium",
}
PROBLEM_NAMES = {
    "poiseuille": "Poiseuille flow",
    "thermal_creep": "thermal creep",
    "couette": "Couette flow",
    "heat_transfer": "heat transfer",
}
DELTA_LABEL = r"rarefaction parameter $\delta$"
KN_LABEL = r"Knudsen number $\mathrm{Kn} = \sqrt{\pi}/(2\delta)$"


def color(i: int) -> str:
    return COLORS[i % len(COLORS)]


def marker(i: int) -> str:
    return MARKERS[i % len(MARKERS)]


def series_style(i: int) -> dict[str, Any]:
    """Colour, marker and line of the i-th data series."""
    return {"color": color(i), "marker": marker(i), "lw": LINE_WIDTH, "ls": "-", "zorder": DATA_Z}


def model_marker(model: str) -> dict[str, Any]:
    """Marker size and fill of a kinetic model (BGK: large open; S-model: small filled; ES-BGK: half)."""
    if model == "bgk":
        return {"ms": 7.5, "mfc": "white", "mew": 1.2}
    if model == "s_model":
        return {"ms": 3.6, "mew": 0.0}
    return {"ms": 5.5, "fillstyle": "left", "mfcalt": "white", "mew": 1.0}


def model_line(model: str) -> dict[str, Any]:
    """Line of a kinetic model where markers alone cannot tell models apart (long time series)."""
    return {
        "bgk": {"ls": "-", "lw": 2.6, "alpha": 0.55},
        "s_model": {"ls": (0, (4, 1.5)), "lw": 1.3},
        "es_bgk": {"ls": (0, (1, 1)), "lw": 1.3},
    }.get(model, {"ls": "-", "lw": LINE_WIDTH})


def reference(kind: str, **extra) -> dict[str, Any]:
    return {**REFERENCE[kind], "zorder": REFERENCE_Z, **extra}


def number(x: float, digits: int = 3) -> str:
    """``x`` with ``digits`` significant digits, trailing zeros kept (``2.00``, ``1.63``, ``0.500``)."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(x)))), 0)
    return f"{x:.{decimals}f}"


def model_text(model: str) -> str:
    return MODEL_NAMES.get(model, model.replace("_", " "))


def problem_text(problem: str) -> str:
    return PROBLEM_NAMES.get(problem, problem.replace("_", " "))


def state_text(state: str) -> str:
    return STATE_NAMES.get(state, state.replace("_", " "))


def molecular_text(model: str) -> str:
    return MOLECULAR_NAMES.get(model, model.replace("_", " "))


def _one_wall(w: dict[str, Any]) -> str:
    if w["model"] == "maxwell":
        return "diffuse (Maxwell, $\\alpha = 1$)" if w["alpha"] == 1.0 else f"Maxwell, $\\alpha = {w['alpha']:g}$"
    return f"Cercignani-Lampis, $\\alpha_t = {w['alpha_t']:g}$, $\\alpha_n = {w['alpha_n']:g}$"


def wall_text(lower: dict[str, Any], upper: dict[str, Any] | None = None) -> str:
    """Plain words for a wall setting (``Maxwell, α = 0.9``); two plates when they differ."""
    if upper is None or upper == lower:
        return _one_wall(lower)
    return f"lower {_one_wall(lower)}; upper {_one_wall(upper)}"


def geometry_text(shape: str, aspect: float) -> str:
    return "tube" if shape == "tube" else f"duct, $A = {aspect:g}$"


def smooth_loglog(x: np.ndarray, y: np.ndarray, n: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """A curve through the finite, positive points (x, y) by monotone cubic (PCHIP) interpolation
    in log x, log y (Fritsch & Carlson, SIAM J. Numer. Anal. 17 (1980) 238): no overshoot between
    points, monotone data stay monotone.  Fewer than 3 points: the points themselves."""
    from scipy.interpolate import PchipInterpolator

    ok = np.isfinite(x) & np.isfinite(y) & (x > 0) & (y > 0)
    x, y = np.asarray(x, float)[ok], np.asarray(y, float)[ok]
    if x.size < 3:
        return x, y
    lx = np.log(x)
    dense = np.linspace(lx[0], lx[-1], n)
    return np.exp(dense), np.exp(PchipInterpolator(lx, np.log(y))(dense))


def smooth_logx(x: np.ndarray, y: np.ndarray, n: int = 200) -> tuple[np.ndarray, np.ndarray]:
    """As :func:`smooth_loglog` with a linear y (for signed quantities)."""
    from scipy.interpolate import PchipInterpolator

    ok = np.isfinite(x) & np.isfinite(y) & (x > 0)
    x, y = np.asarray(x, float)[ok], np.asarray(y, float)[ok]
    if x.size < 3:
        return x, y
    lx = np.log(x)
    dense = np.linspace(lx[0], lx[-1], n)
    return np.exp(dense), PchipInterpolator(lx, y)(dense)


def plot_series(ax, x, y, style: dict[str, Any], label: str | None = None, smooth: bool = True, logy: bool = True):
    """Computed points as markers joined by a monotone curve; one legend entry (line + marker)."""
    ok = np.isfinite(x) & np.isfinite(y)
    if not ok.any():
        return None
    line_kw = {k: v for k, v in style.items() if k not in ("marker", "ms", "mfc", "mew", "fillstyle", "mfcalt")}
    if smooth:
        xs, ys = (smooth_loglog if logy else smooth_logx)(np.asarray(x), np.asarray(y))
        ax.plot(xs, ys, **line_kw)
        ax.plot(
            np.asarray(x)[ok], np.asarray(y)[ok], ls="none", **{k: v for k, v in style.items() if k not in ("ls", "lw")}
        )
        # legend proxy: line and marker together, nothing drawn
        return ax.plot([], [], **style, label=label)[0]
    return ax.plot(np.asarray(x)[ok], np.asarray(y)[ok], **style, label=label)[0]


def bottom_legend(fig, handles, labels, ncol: int = 2, title: str | None = None):
    """A legend below the axes (outside the data), in the figure's normal font size."""
    if not handles:
        return None
    return fig.legend(
        handles,
        labels,
        loc="outside lower center",
        ncol=ncol,
        fontsize="small",
        title=title,
        title_fontsize="small",
        frameon=False,
    )


def no_data(ax, text: str = "no converged points") -> None:
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center")


def mark_failed(ax, x, status, style: dict[str, Any]) -> int:
    """A cross at the bottom edge for each failed or corrupt point; returns how many."""
    bad = np.isin(status, ["failed", "corrupt"])
    if bad.any():
        ax.plot(
            np.asarray(x)[bad],
            np.full(int(bad.sum()), 0.03),
            "x",
            color=style["color"],
            ms=7,
            transform=ax.get_xaxis_transform(),
            clip_on=False,
            zorder=DATA_Z + 1,
        )
    return int(bad.sum())


def data_ylim(ax, values, pad: float = 1.5) -> None:
    """Log y range of the computed values with a margin (reference lines may leave the frame)."""
    v = np.asarray(values, float).ravel()
    v = v[np.isfinite(v) & (v > 0)]
    if v.size:
        ax.set_ylim(v.min() / pad, v.max() * pad)


def sci(x: float) -> str:
    """``x`` in mathtext: ``$10^{-7}$``, ``$2.5 \\times 10^{-3}$``, ``$0.5$``."""
    if x == 0 or not math.isfinite(x):
        return f"${x:g}$"
    e = int(math.floor(math.log10(abs(x))))
    if -2 <= e <= 3:
        return f"${x:g}$"
    m = x / 10.0**e
    return f"$10^{{{e}}}$" if abs(m - 1.0) < 1e-9 else f"${m:g} \\times 10^{{{e}}}$"


def plain_log_ticks(axis) -> None:
    """Log-axis labels as plain numbers (2, 5, 10, 20) when the axis spans less than ~3 decades."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    lo, hi = axis.get_view_interval()
    if lo <= 0 or hi / lo > 2e3:
        return
    axis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())
