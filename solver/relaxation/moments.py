"""Exact moment equations of a space-homogeneous gas of Maxwell molecules.

Reduced units: n = 1, velocity in sqrt(kT/m), time in mean collision times
tau_c, so that sigma_T g = 1 (collision frequency 1 per molecule).  <.> is the
mean over the distribution, c the velocity (mean velocity 0), P_ij = <c_i c_j>
= delta_ij + sigma_ij with sigma traceless, M4 = <c^4>.

Derivation (our own, from the collision integral; the rates agree with
Truesdell & Muncaster, *Fundamentals of Maxwell's Kinetic Theory of a Simple
Monatomic Gas*, Academic Press 1980, as quoted in check-values.md 5.2).  For a
moment phi, d<phi>/dt = (1/2) < sigma_T g <dphi>_chi >_pairs, with
dphi = phi(c') + phi(c1') - phi(c) - phi(c1) and the pair drawn independently
from f.  Write c = G + g/2, c1 = G - g/2; a collision turns g into g' of the
same length at angle chi.  Averaging over the azimuth,

    <g'_i g'_j> = cos^2 chi g_i g_j + (sin^2 chi / 2)(g^2 delta_ij - g_i g_j).

Stress: c_i c_j + c1_i c1_j = 2 G_i G_j + g_i g_j / 2, so
dP_ij/dt = (s/8) <g^2 delta_ij - 3 g_i g_j> = -(3 s / 4) sigma_ij, using
<g_i g_j> = 2 P_ij; s = <sin^2 chi> (2/3 for isotropic scattering).

Fourth moment: c^4 + c1^4 = 2 (G^2 + g^2/4)^2 + 2 (G.g)^2, so
<d(c^4)>_chi = s [G^2 g^2 - 3 (G.g)^2].  With G.g = (c^2 - c1^2)/2 and
G^2 g^2 = [(c^2 + c1^2)^2 - 4 (c.c1)^2]/4 the pair means are
<(G.g)^2> = (M4 - 9)/2 and <G^2 g^2> = (M4 + 9 - 2 P:P)/2, and
P:P = 3 + tr(sigma^2).  Hence

    dM4/dt = -(s/2) [(M4 - 15) + tr(sigma^2)],                     (1)
    d sigma/dt = -(3 s/4) sigma.                                    (2)

With r_a = 3 s/4 (the anisotropy rate p/mu) and r_4 = s/2 = (2/3) r_a, the
deviation y = M4 - 15 is exactly

    y(t) = (y0 - D) exp(-r_4 t) + D exp(-2 r_a t),  D = r_4 S0 / (2 r_a - r_4),   (3)

S0 = tr(sigma^2) at t = 0.  Isotropic scattering: r_a = 1/2, r_4 = 1/3
(relaxation time 3 tau_c), D = S0/2.  The BKW solution (sigma = 0,
<c^4> = 15 [1 - exp(-t/3)]) obeys (1).  The heat flux q_i = <c^2 c_i>/2 decays
at (2/3) p/mu as well (its equation has no quadratic term since the mean
velocity vanishes).
"""

from __future__ import annotations

import numpy as np


def maxwell_rates(mean_sin2_chi: float = 2.0 / 3.0) -> tuple[float, float]:
    """(r_a, r_4): anisotropy and fourth-moment rates per tau_c, eqs. (1)-(2)."""
    return 0.75 * mean_sin2_chi, 0.5 * mean_sin2_chi


def vss_mean_sin2_chi(alpha: float) -> float:
    """<sin^2 chi> of VSS scattering: 4 alpha / ((alpha + 1)(alpha + 2)) (Bird 1994, Sec. 2.7; 2/3 at alpha = 1).

    Derived: (1 + cos chi)/2 = u**(1/alpha) with u uniform on [0, 1], so
    <sin^2 chi> = 4 <u^(1/alpha) - u^(2/alpha)> = 4 [alpha/(alpha+1) - alpha/(alpha+2)].
    """
    return 4.0 * alpha / ((alpha + 1.0) * (alpha + 2.0))


def maxwell_fourth_moment_deviation(t, y0: float, s0: float, mean_sin2_chi: float = 2.0 / 3.0):
    """y(t) = <c^4> - 15 of eq. (3) from y0 = M4(0) - 15 and S0 = tr(sigma(0)^2)."""
    r_a, r_4 = maxwell_rates(mean_sin2_chi)
    d = r_4 * s0 / (2.0 * r_a - r_4)
    t = np.asarray(t, dtype=float)
    return (y0 - d) * np.exp(-r_4 * t) + d * np.exp(-2.0 * r_a * t)
