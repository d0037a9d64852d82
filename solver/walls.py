"""Gas-surface interaction laws, as checked parameter objects.

* Maxwell diffuse-specular: a fraction ``alpha`` of the molecules is re-emitted
  with the wall Maxwellian, the rest is reflected specularly
  (Maxwell, Phil. Trans. R. Soc. 170 (1879) 231).
* Cercignani-Lampis: tangential-momentum accommodation ``alpha_t`` and
  normal-energy accommodation ``alpha_n`` (Cercignani & Lampis, Transp. Theory
  Stat. Phys. 1 (1971) 101).

The kernels that apply these laws on a velocity grid live with each solver;
this module only holds and validates the parameters.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any


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


def make_wall(model: str, **params: float) -> Wall:
    """Build a wall from a model name and its parameters (used by config and CLI)."""
    if model == "maxwell":
        return MaxwellWall(params.get("alpha", 1.0))
    if model == "cercignani_lampis":
        return CercignaniLampisWall(params.get("alpha_t", 1.0), params.get("alpha_n", 1.0))
    raise ValueError(f"wall_model: must be 'maxwell' or 'cercignani_lampis', got {model!r}")
