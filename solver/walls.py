"""Gas-surface interaction laws, as checked parameter objects.

* Maxwell diffuse-specular: a fraction ``alpha`` of the molecules is re-emitted
  with the wall Maxwellian, the rest is reflected specularly
  (Maxwell, Phil. Trans. R. Soc. 170 (1879) 231).
* Cercignani-Lampis: tangential-momentum accommodation ``alpha_t`` and
  normal-energy accommodation ``alpha_n`` (Cercignani & Lampis, Transp. Theory
  Stat. Phys. 1 (1971) 101).

This module holds and validates the parameters, the helpers every solver and
report reads them through (:func:`tangential_accommodation`,
:func:`slip_factor`, :func:`is_diffuse`), and the Cercignani-Lampis kernel of
the in-plane velocity shared by the tube and the duct
(:func:`inplane_cl_kernel`).  The kernels that apply a law on one solver's
velocity grid live with that solver (``plane_channel.boundary``,
``tube.boundary``, ``duct.boundary``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
from scipy.special import i0e


def _check_range(name: str, value: float, low: float, high: float, low_open: bool = True) -> float:
    value = float(value)
    ok = (value > low if low_open else value >= low) and value <= high and math.isfinite(value)
    if not ok:
        bracket = "(" if low_open else "["
        raise ValueError(f"{name}: must be in {bracket}{low:g}, {high:g}], got {value!r}")
    return value


@dataclass(frozen=True)
class MaxwellWall:
    """Maxwell diffuse-specular wall with accommodation coefficient alpha in (0, 1]."""

    alpha: float = 1.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "alpha", _check_range("alpha", self.alpha, 0.0, 1.0))

    kind = "maxwell"

    def describe(self) -> dict[str, Any]:
        return {"wall_model": "maxwell", "alpha": self.alpha}


@dataclass(frozen=True)
class CercignaniLampisWall:
    """Cercignani-Lampis wall.

    alpha_t : tangential-momentum accommodation, in (0, 2) (1 = diffuse in the
              tangential direction; values above 1 mean back-scattering).
    alpha_n : normal-energy accommodation, in (0, 1].
    """

    alpha_t: float = 1.0
    alpha_n: float = 1.0

    def __post_init__(self) -> None:
        a_t = float(self.alpha_t)
        if not (0.0 < a_t < 2.0 and math.isfinite(a_t)):
            raise ValueError(f"alpha_t: must be in (0, 2), got {self.alpha_t!r}")
        object.__setattr__(self, "alpha_t", a_t)
        object.__setattr__(self, "alpha_n", _check_range("alpha_n", self.alpha_n, 0.0, 1.0))

    kind = "cercignani_lampis"

    def describe(self) -> dict[str, Any]:
        return {"wall_model": "cercignani_lampis", "alpha_t": self.alpha_t, "alpha_n": self.alpha_n}


Wall = MaxwellWall | CercignaniLampisWall
# The wall laws by name, and each law's parameters in order (the registry the study schema, the
# study layer and the CLI read: a new law is a class here plus its boundary module per geometry).
WALL_LAWS: dict[str, type] = {law.kind: law for law in (MaxwellWall, CercignaniLampisWall)}
WALL_PARAMETERS: dict[str, tuple[str, ...]] = {
    kind: tuple(f.name for f in fields(law)) for kind, law in WALL_LAWS.items()
}


def make_wall(model: str, **params: float) -> Wall:
    """Build a wall from a model name and its parameters (used by config and CLI); missing ones take 1."""
    if model not in WALL_LAWS:
        raise ValueError(f"wall_model: must be one of {', '.join(map(repr, WALL_LAWS))}, got {model!r}")
    return WALL_LAWS[model](*(params.get(name, 1.0) for name in WALL_PARAMETERS[model]))


def tangential_accommodation(wall: Wall) -> float:
    """Tangential-momentum accommodation: alpha (Maxwell) or alpha_t (Cercignani-Lampis), in (0, 2).

    Not clipped: alpha_t in (1, 2) (back-scattering) is used as it is, so that
    :func:`slip_factor` stays positive and falls below 1 there.
    """
    return wall.alpha if isinstance(wall, MaxwellWall) else wall.alpha_t


def slip_factor(wall: Wall) -> float:
    """(2 - a)/a with a = :func:`tangential_accommodation`: the first-order slip coefficient over its diffuse value.

    Maxwell's scaling (Maxwell, Phil. Trans. R. Soc. 170 (1879) 231); for a
    Cercignani-Lampis wall with a = alpha_t it is an approximation (common
    practice, no source).  Positive for a in (0, 2).
    """
    a = tangential_accommodation(wall)
    return (2.0 - a) / a


def is_diffuse(wall: Wall) -> bool:
    """True when the law is the fully diffuse one: Maxwell alpha = 1, or Cercignani-Lampis alpha_t = alpha_n = 1.

    (A Cercignani-Lampis wall with alpha_t = 1 but alpha_n < 1 re-emits the
    shear-driven, c_x-odd perturbation of Poiseuille flow and thermal creep as
    the diffuse wall does, but not an energy perturbation; it is not called
    diffuse here.)
    """
    if isinstance(wall, MaxwellWall):
        return wall.alpha == 1.0
    return wall.alpha_t == 1.0 and wall.alpha_n == 1.0


def inplane_cl_kernel(cn_out, ct_out, cn_in, ct_in, w_in, alpha_t, alpha_n):
    """Cercignani-Lampis reflection of the in-plane velocity, h-form, on quadrature nodes.

    Returns (K, defect): h_out(o) = sum_j K[o, j] h_in(j) for outgoing in-plane
    velocities (normal speed cn_out >= 0 away from the wall, tangential ct_out)
    and arriving nodes (cn_in > 0 towards the wall, ct_in) with weights w_in
    for int d^2c' exp(-c'^2) (.).  Kernel (Cercignani & Lampis, Transp.
    Theory Stat. Phys. 1 (1971) 101), written for h by reciprocity:

        h_out(c) = int N(c_n'; c_n) T(c_t'; c_t) h_in(c') d^2c',
        N = (2 c_n'/a_n) exp(-(c_n'^2 + (1 - a_n) c_n^2)/a_n) I0(2 sqrt(1 - a_n) c_n c_n'/a_n),
        T = exp(-(c_t' - (1 - a_t) c_t)^2 / (a_t (2 - a_t))) / sqrt(pi a_t (2 - a_t)).

    Both integrate to one over c', so constants are kept; on the nodes they
    do so up to quadrature error ``defect`` = max |row sum - 1|, which is then
    removed by scaling each row (a normalised Nystrom evaluation).
    """
    cn = np.asarray(cn_out, float)[:, None]
    ct = np.asarray(ct_out, float)[:, None]
    cni = np.asarray(cn_in, float)[None, :]
    cti = np.asarray(ct_in, float)[None, :]
    root = math.sqrt(max(1.0 - alpha_n, 0.0))
    var_t = alpha_t * (2.0 - alpha_t)
    # exp(c'^2) N T written so that each exponent stays bounded (i0e = I0 e^-z)
    z = 2.0 * root * cn * cni / alpha_n
    expo = cni**2 - (cni - root * cn) ** 2 / alpha_n + cti**2 - (cti - (1.0 - alpha_t) * ct) ** 2 / var_t
    k = (2.0 * cni / alpha_n) * np.exp(expo) * i0e(z) / math.sqrt(math.pi * var_t) * np.asarray(w_in, float)[None, :]
    rows = k.sum(axis=1)
    defect = float(np.max(np.abs(rows - 1.0)))
    return k / rows[:, None], defect
