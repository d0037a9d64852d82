"""Limits and asymptotes of the channel flows: free-molecular values, slip coefficients, continuum series.

Normalisation as in the solvers: delta = p a / (mu v0), v0 = sqrt(2kT/m),
reduced flow rates G_P, G_T (``knudsweep.solver.cross_section`` for tube and
duct, ``knudsweep.solver.plane_channel.problems`` for the plane channel).

Slip and jump coefficients of the BGK model with diffuse walls, in units of
the free path ell = mu v0 / p (the first-order slip condition
u_wall = sigma_P ell du/dn):

* SIGMA_P_BGK = 1.0162, viscous slip, and SIGMA_T_BGK = 0.7663, thermal slip:
  Loyalka, Petrellis & Storvick, Phys. Fluids 18 (1975) 1094.  The numbers
  are quoted from memory; they were not read in the paper here.
* TEMPERATURE_JUMP_BGK = 1.3027 (Sone's d_1 of the BGK model, from memory, not
  read in a paper here).

The solvers use them only as parameters of their acceleration steps, where
they set the speed of convergence and never the converged answer; the study
layer uses them for the slip reference curves of its reports.

Free-molecular and continuum limits:

* tube, diffuse wall, delta = 0: G_P = 8 / (3 sqrt(pi)) (Knudsen, Ann. Phys.
  28 (1909) 75); continuum G_P = delta / 4 (Hagen-Poiseuille) and first-order
  slip delta / 4 + sigma_P;
* plane channel: continuum G_P = delta / 6, slip delta / 6 + sigma_P;
* rectangular duct: :func:`continuum_flow_rate` (White, Viscous Fluid Flow,
  3rd ed. 2006, eq. 3-48), :func:`slip_flow_rate`, and
  :func:`free_molecular_flow_rate` (closed-form chord integral, derived in
  its docstring).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import quad

__all__ = [
    "SIGMA_P_BGK",
    "SIGMA_T_BGK",
    "TEMPERATURE_JUMP_BGK",
    "G_P_FREE_MOLECULAR_TUBE",
    "continuum_flow_rate",
    "free_molecular_flow_rate",
    "slip_flow_rate",
]

SIGMA_P_BGK = 1.0162  # viscous slip, BGK, diffuse (Loyalka, Petrellis & Storvick 1975; from memory)
SIGMA_T_BGK = 0.7663  # thermal slip, BGK, diffuse (Loyalka, Petrellis & Storvick 1975; from memory)
TEMPERATURE_JUMP_BGK = 1.3027  # temperature jump, BGK, diffuse (Sone's d_1; from memory)
G_P_FREE_MOLECULAR_TUBE = 8.0 / (3.0 * math.sqrt(math.pi))  # Knudsen (1909), diffuse wall


def continuum_flow_rate(delta: float, aspect_ratio: float, terms: int = 200) -> float:
    """No-slip G_P of the duct: (delta/6)[1 - (192/(pi^5 A)) sum_{n odd} tanh(n pi A/2)/n^5].

    White, Viscous Fluid Flow, 3rd ed. (2006), eq. 3-48, rewritten in the
    duct's normalisation (height H the length scale, G per unit width).
    """
    a = float(aspect_ratio)
    n = np.arange(1, 2 * terms, 2, dtype=float)
    series = np.sum(np.tanh(n * np.pi * a / 2.0) / n**5)
    return float(delta) / 6.0 * (1.0 - 192.0 / (np.pi**5 * a) * series)


def free_molecular_flow_rate(aspect_ratio: float) -> float:
    """Diffuse-wall free-molecular G_P of the duct (delta = 0), by quadrature of a closed form.

    At delta = 0 with diffuse walls u(P) = (1/(4 sqrt(pi))) int_0^{2 pi} s(P, theta)
    dtheta, s the distance to the wall behind P (the drive integrated along the
    ray; derived from the reduced equations).  Over the cross-section,
    int s dA = int l(b)^2 / 2 db over the chords of direction theta; for a
    rectangle l(b) is a trapezoid of height min(A / cos, 1 / sin), ramps
    min(A sin, cos) and plateau |A sin - cos|.  The same algebra for the
    circle gives Knudsen's 8 / (3 sqrt(pi)).  aspect_ratio A >= 1, finite.
    """
    a = float(aspect_ratio)
    if not (math.isfinite(a) and a >= 1.0):
        raise ValueError(f"aspect_ratio: must be a finite number >= 1, got {aspect_ratio!r}")

    def half_l2(th):
        s_, c_ = math.sin(th), math.cos(th)
        top = min(a / c_, 1.0 / s_) if s_ > 0 else a / c_
        ramp = min(a * s_, c_)
        return 0.5 * top * top * (abs(a * s_ - c_) + 2.0 * ramp / 3.0)

    kink = math.atan(1.0 / a)
    total = 4.0 * sum(
        quad(half_l2, lo, hi, epsabs=0.0, epsrel=1e-12, limit=200)[0] for lo, hi in ((0.0, kink), (kink, 0.5 * math.pi))
    )
    return (2.0 / a) * total / (4.0 * math.sqrt(math.pi))


def slip_flow_rate(delta: float, aspect_ratio: float, sigma_p: float, terms: int = 400) -> float:
    """G_P of the duct from Navier-Stokes with first-order velocity slip, to first order in sigma_p/delta.

    G = continuum_flow_rate(delta, A) + sigma_p (2/A) oint (dv/dn)^2 ds, v the
    solution of lap v = -1 vanishing on the walls (derived here: Green's
    identity for the slip perturbation; for the tube the same formula gives
    delta/4 + sigma_P; as A -> infinity it gives the plane channel's
    delta/6 + sigma_P).  dv/dn from the series of White, Viscous Fluid Flow
    (2006) eq. 3-48.
    """
    a = float(aspect_ratio)
    n = np.arange(1, 2 * terms, 2, dtype=float)[:, None]
    g, gw = np.polynomial.legendre.leggauss(64)

    def nodes(length, panels):
        edges = np.linspace(0.0, length, panels + 1)
        lo, hi = edges[:-1, None], edges[1:, None]
        return (0.5 * (lo + hi) + 0.5 * (hi - lo) * g).ravel(), (0.5 * (hi - lo) * gw).ravel()

    z, wz = nodes(a, 32)
    y, wy = nodes(1.0, 32)
    # lower wall y = 0: dv/dy = 1/2 - sum 4/(n pi)^2 cosh(n pi (z - A/2)) / cosh(n pi A / 2),
    # the cosh ratio written without overflow
    ratio = (np.exp(n * np.pi * (z[None, :] - a)) + np.exp(-n * np.pi * z[None, :])) / (1.0 + np.exp(-n * np.pi * a))
    dvdy = 0.5 - np.sum(4.0 / (n * np.pi) ** 2 * ratio, axis=0)
    # side wall z = 0: dv/dz = sum 4/(n pi)^2 sin(n pi y) tanh(n pi A / 2)
    dvdz = np.sum(4.0 / (n * np.pi) ** 2 * np.sin(n * np.pi * y[None, :]) * np.tanh(n * np.pi * 0.5 * a), axis=0)
    contour = 2.0 * np.sum(wz * dvdy**2) + 2.0 * np.sum(wy * dvdz**2)
    return continuum_flow_rate(delta, a) + float(sigma_p) * (2.0 / a) * contour
