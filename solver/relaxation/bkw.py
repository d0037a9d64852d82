"""Exact BKW solution of the space-homogeneous Boltzmann equation for Maxwell molecules.

Bobylev, Dokl. Akad. Nauk SSSR 225 (1975) 1041 [Sov. Phys. Dokl. 20, 820];
Krook & Wu, Phys. Rev. Lett. 36 (1976) 1107 and Phys. Fluids 20 (1977) 1589.
Formula from check-values.md Sec. 5.1 (from memory, unconfirmed there; the
moments below were derived from it and are checked by quadrature in the unit
tests).  Units: n = 1, kT/m = 1, isotropic scattering with collision
frequency 1 per molecule (time in mean collision times):

    f(v, t) = [2 (2 pi K)**1.5]**-1 exp(-v**2 / (2K)) [(5K - 3)/K + (1 - K) v**2 / K**2]
    K(t) = 1 - exp(-t/6),   f >= 0 for t >= t0 = 6 ln(5/2)

    <v**4>(t) = 15 K (2 - K) = 15 [1 - exp(-t/3)]
    <v**(2n)> = (2n+1)!! K**(n-1) [n - (n-1) K]

The one-dimensional marginal (derived by integrating over v_y, v_z) is

    f_x(u, t) = g_K(u) [(5K - 3)/(2K) + (1 - K)(u**2 + 2K)/(2 K**2)],
    g_K(u) = exp(-u**2/(2K)) / sqrt(2 pi K).
"""

from __future__ import annotations

import math

import numpy as np

BKW_FIRST_TIME = 6.0 * math.log(2.5)


def bkw_k(t: float | np.ndarray) -> float | np.ndarray:
    """K(t) = 1 - exp(-t/6)."""
    return 1.0 - np.exp(-np.asarray(t, dtype=float) / 6.0) if np.ndim(t) else 1.0 - math.exp(-t / 6.0)


def bkw_density(speed: np.ndarray, t: float) -> np.ndarray:
    """f(v, t) at |v| = speed."""
    k = bkw_k(t)
    v2 = np.asarray(speed, dtype=float) ** 2
    return np.exp(-v2 / (2.0 * k)) * ((5.0 * k - 3.0) / k + (1.0 - k) * v2 / k**2) / (2.0 * (2.0 * math.pi * k) ** 1.5)


def bkw_marginal(u: np.ndarray, t: float) -> np.ndarray:
    """One-dimensional marginal f_x(u, t)."""
    k = bkw_k(t)
    u = np.asarray(u, dtype=float)
    g = np.exp(-u * u / (2.0 * k)) / math.sqrt(2.0 * math.pi * k)
    return g * ((5.0 * k - 3.0) / (2.0 * k) + (1.0 - k) * (u * u + 2.0 * k) / (2.0 * k * k))


def bkw_fourth_moment(t: float | np.ndarray) -> float | np.ndarray:
    """<v**4>(t) = 15 [1 - exp(-t/3)]."""
    return 15.0 * (1.0 - np.exp(-np.asarray(t, dtype=float) / 3.0))


def bkw_even_moment(n: int, t: float) -> float:
    """<v**(2n)>(t) = (2n+1)!! K**(n-1) [n - (n-1) K]."""
    k = bkw_k(t)
    dfact = 1.0
    for j in range(1, 2 * n + 2, 2):
        dfact *= j
    return dfact * k ** (n - 1) * (n - (n - 1) * k)
