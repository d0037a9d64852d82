"""Point identity: canonical parameter values and the file path of a point.

A point's file is ``results/points/<family>/<segment>/.../<last>.nc`` where each
segment is ``name=value`` built from canonical values only, so the same point
requested by two studies maps to the same file and float noise never creates a
new one.

Segments (the layout below ``results/points/``; README text)
    * ``grid=ns<n>-nv<n>-tol<tol>``: resolution of a flow point: ``ns`` cells
      across the gap (tube: radial nodes, duct: half-height nodes), ``nv``
      velocity nodes, ``auto`` = the solver's default for the point's delta,
      ``tol`` the convergence tolerance; ``grid=acc<a>-tol<tol>``: the
      resolution is chosen by the error-estimate ladder until the estimate is
      below the accuracy target ``a``.
    * ``wall=maxwell-alpha=0.9``, ``wall=cercignani_lampis-alpha_t=0.9-alpha_n=0.5``:
      wall law and its accommodation coefficients (plane channel with two
      different plates: lower and upper setting joined).
    * ``run=t<t_end>-o<n>-k<k>-R<r>-s<seed>`` (relaxation): end time in mean
      collision times, number of output times including t = 0, H-function
      cells per velocity axis (k^3 cells), independent replicas, random seed.
    * ``solver=dsmc-N<particles>`` or ``solver=<model equation>-nv<n>``
      (relaxation): method and its resolution (particles per replica, or
      velocity nodes per axis).
    * ``delta=1.0e+00``, ``p=1.0e+02`` (Pa), ``T=300.0`` (K), ``gas=Ar``,
      ``model=...``: the values themselves (formats below).

Canonical values
    Every float is rounded to ``SIGNIFICANT_DIGITS`` = 6 significant digits
    (``float(format(x, ".6g"))``) before it is used anywhere: in paths, in the
    solver call and in the files.  ``0.1 + 0.2`` and ``0.3`` are the same point;
    a log-spaced range gives the same values on every machine.  Two values that
    agree to 6 digits are one point (common practice, no source: 6 digits is far
    below the accuracy of any discretised kinetic solution).

Text forms
    * :func:`format_exp` for axis values spanning decades (delta, Kn):
      ``1.0e+00``, ``3.16228e-02`` (mantissa with trailing zeros removed but at
      least one decimal, two-digit signed exponent) -- fixed layout, no noise.
    * :func:`format_plain` for bounded coefficients (accommodation): ``0.9``,
      ``1.0``, ``0.125``.
"""

from __future__ import annotations

import math
import re

SIGNIFICANT_DIGITS = 6
_SAFE = re.compile(r"^[A-Za-z0-9_.+-]+$")


def canonical(x: float) -> float:
    """``x`` rounded to 6 significant digits (the value every point uses)."""
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"value: must be finite, got {x!r}")
    return float(format(x, f".{SIGNIFICANT_DIGITS - 1}e"))


def _trim(mantissa: str) -> str:
    if "." in mantissa:
        mantissa = mantissa.rstrip("0")
        if mantissa.endswith("."):
            mantissa += "0"
    return mantissa


def format_exp(x: float) -> str:
    """Exponent form of the canonical value: ``1.0e+00``, ``3.16228e-02``."""
    mantissa, exponent = format(canonical(x), f".{SIGNIFICANT_DIGITS - 1}e").split("e")
    return f"{_trim(mantissa)}e{exponent}"


def format_plain(x: float) -> str:
    """Plain form of the canonical value: ``0.9``, ``1.0``, ``1e-05`` for tiny values."""
    text = format(canonical(x), f".{SIGNIFICANT_DIGITS}g")
    if "e" not in text and "." not in text:
        text += ".0"
    return text


def segment(name: str, value: str) -> str:
    """One ``name=value`` path segment; rejects characters unsafe in paths."""
    text = f"{name}={value}" if name else value
    if not _SAFE.match(text.replace("=", "")):
        raise ValueError(f"{name or 'segment'}: {value!r} contains characters not allowed in a path")
    return text


def point_id(family: str, segments: list[str]) -> str:
    """``family/seg1/.../segN`` (the path below results/points/, without .nc)."""
    return "/".join([family, *segments])


def point_path(pid: str, root: str = "results") -> str:
    """Relative path of a point file: ``<root>/points/<point id>.nc``."""
    return f"{root}/points/{pid}.nc"
