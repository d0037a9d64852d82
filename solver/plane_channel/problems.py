"""Reduction of the four plane-channel problems to two 1-D transport equations.

Units: y in units of the gap a (walls at y = -1/2, +1/2), velocities in v0,
delta = p a / (mu v0); d = collision_factor * delta (``kinetic_models``).
Linearisation f = f_M (1 + h).  Model gain terms: see ``knudsweep.solver.kinetic_models``.

Odd problems (h odd in c_x):  h = c_x [2 Phi(y, c_y) + (c_x^2 + c_z^2 - 2) Psi(y, c_y)]

    c_y Phi' + d Phi = d [u + s (2/15) q (c_y^2 - 1/2) + e c_y p_xy] - X_P/2 - X_T (c_y^2 - 1/2)/2
    c_y Psi' + d Psi = d [s (4/15) q] - X_T
    u    = pi^-1/2 int Phi e^{-c_y^2} dc_y                  (x-velocity / v0)
    q    = pi^-1/2 int [Psi + (c_y^2 - 1/2) Phi] e^{-c_y^2}  (x-heat flux / (p v0))
    p_xy = 2 pi^-1/2 int c_y Phi e^{-c_y^2}                  (shear stress / p)

  s = 1 for the S-model (Shakhov 1968), e = 1 - 1/Pr for ES-BGK (Holway
  1966), both 0 for BGK.  The reduction is exact: projecting the c_x-odd
  equation on 1 and on (c_x^2 + c_z^2 - 2), which are orthogonal under the
  weight c_x^2 exp(-c_x^2 - c_z^2), closes with these two functions.
  X_P = (a/p) dp/dx, X_T = (a/T) dT/dx (Sharipov & Seleznev, J. Phys. Chem.
  Ref. Data 27 (1998) 657, Sec. 2).

  Mass flow per unit width M' = 2 (a p / v0) int u dy, so
  G_P = -2 int u dy (X_P = 1),   G_T = 2 int u dy (X_T = 1);
  heat flow per unit width E' = p v0 a int q dy, reported as
  Q_P = 2 int q dy (X_P = 1),   Q_T = -2 int q dy (X_T = 1),
  so that Onsager reciprocity reads Q_P = G_T (Sharipov, Physica A 203
  (1994) 437) and Q_T > 0 (heat flows down the temperature gradient).

  Couette: walls move with x-velocity -U/2 (lower) and +U/2 (upper), no
  gradients; wall Maxwellian Phi_w = u_w / U.  Reported:
  shear_stress = -p_xy (channel mean) = P_xy v0 / (p U) in magnitude;
  free-molecular value 1/sqrt(pi).

Even problem (heat transfer, h even in c_x):  h = A(y, c_y) + (c_x^2 + c_z^2 - 1) B(y, c_y)

    gain_A = rho + tau (c_y^2 - 1/2) + 2 c_y u_y + s (4/15) q_y c_y (c_y^2 - 3/2) + e sigma (c_y^2 - 1/2)
    gain_B = tau + s (4/15) q_y c_y - e sigma / 2,         sigma = p_yy - rho - tau
    rho = pi^-1/2 int A e^{-c^2};  tau = (2/3) pi^-1/2 int [(c^2 + 1) A + B] e^{-c^2} - rho
    p_yy = 2 pi^-1/2 int c^2 A e^{-c^2};  q_y = pi^-1/2 int c [(c^2 - 3/2) A + B] e^{-c^2}
    u_y = pi^-1/2 int c A e^{-c^2}

  Walls at T0 -/+ dT/2 (lower cold, upper hot): A_w = tau_w (c^2 - 1),
  B_w = tau_w, tau_w = -/+ 1/2 (density of the wall Maxwellian is fixed by
  the zero-mass-flux condition, enforced by the flux-balanced operators).
  Reported heat_flux = -q_y (channel mean) = q T0 / (p v0 dT); free-molecular
  value 1/sqrt(pi).  The mean density perturbation is set to zero.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from knudsweep.solver.kinetic_models import KineticModel

PROBLEMS = ("poiseuille", "thermal_creep", "couette", "heat_transfer")
SQRT_PI = math.sqrt(math.pi)

# moment indices
U, Q_X, P_XY = 0, 1, 2  # odd problems
RHO, TAU, P_YY, Q_Y, U_Y = 0, 1, 2, 3, 4  # heat transfer


@dataclass
class Tables:
    """Everything the kernel needs for one problem/model on one velocity set."""

    P: np.ndarray  # (n_mom, 2, 2, m) moment weights
    Q: np.ndarray  # (2, n_mom, 2, m) gain coefficients
    src: np.ndarray  # (2, 2, m) drive, constant in y
    Fw_low: np.ndarray  # (2, m) wall Maxwellian, lower wall
    Fw_up: np.ndarray  # (2, m)
    degrees: tuple[int, int]  # tangential Hermite degree of each unknown
    fix_mass: bool
    primary: int  # moment whose change decides convergence
    # the change of its y-integral is measured against max(|int m|, integral_floor * int |m|)
    integral_floor: float


def _signed(c: np.ndarray) -> np.ndarray:
    """(2, m) array of c_y: row 0 = +c, row 1 = -c."""
    return np.stack([c, -c])


def build_tables(problem: str, model: KineticModel, c: np.ndarray, w: np.ndarray) -> Tables:
    cy = _signed(c)
    W = np.stack([w, w]) / SQRT_PI
    m = c.size
    s = float(model.heat_flux_term)
    e = model.stress_coefficient
    if problem in ("poiseuille", "thermal_creep", "couette"):
        P = np.zeros((3, 2, 2, m))
        P[U, 0] = W
        P[Q_X, 0] = W * (cy**2 - 0.5)
        P[Q_X, 1] = W
        P[P_XY, 0] = 2.0 * W * cy
        Q = np.zeros((2, 3, 2, m))
        Q[0, U] = 1.0
        Q[0, Q_X] = s * (2.0 / 15.0) * (cy**2 - 0.5)
        Q[0, P_XY] = e * cy
        Q[1, Q_X] = s * (4.0 / 15.0)
        src = np.zeros((2, 2, m))
        Fw_low = np.zeros((2, m))
        Fw_up = np.zeros((2, m))
        if problem == "poiseuille":
            src[0] = -0.5
        elif problem == "thermal_creep":
            src[0] = -0.5 * (cy**2 - 0.5)
            src[1] = -1.0
        else:
            Fw_low[0] = -0.5
            Fw_up[0] = 0.5
        return Tables(P, Q, src, Fw_low, Fw_up, (1, 3), False, U, 1e-3)
    if problem == "heat_transfer":
        P = np.zeros((5, 2, 2, m))
        P[RHO, 0] = W
        P[TAU, 0] = W * ((2.0 / 3.0) * (cy**2 + 1.0) - 1.0)
        P[TAU, 1] = (2.0 / 3.0) * W
        P[P_YY, 0] = 2.0 * W * cy**2
        P[Q_Y, 0] = W * cy * (cy**2 - 1.5)
        P[Q_Y, 1] = W * cy
        P[U_Y, 0] = W * cy
        Q = np.zeros((2, 5, 2, m))
        h2 = cy**2 - 0.5
        Q[0, RHO] = 1.0 - e * h2
        Q[0, TAU] = h2 - e * h2
        Q[0, P_YY] = e * h2
        Q[0, Q_Y] = s * (4.0 / 15.0) * cy * (cy**2 - 1.5)
        Q[0, U_Y] = 2.0 * cy
        Q[1, TAU] = 1.0 + 0.5 * e
        Q[1, RHO] = 0.5 * e
        Q[1, P_YY] = -0.5 * e
        Q[1, Q_Y] = s * (4.0 / 15.0) * cy
        src = np.zeros((2, 2, m))
        Fw_low = np.stack([-0.5 * (c**2 - 1.0), np.full(m, -0.5)])
        Fw_up = np.stack([0.5 * (c**2 - 1.0), np.full(m, 0.5)])
        # the temperature integrates to ~0 between symmetric walls and the
        # reported heat flux is its slope: a 1e-3 floor only measured round-off
        # (~1e-11 in int tau at delta = 1000 with acceleration)
        return Tables(P, Q, src, Fw_low, Fw_up, (0, 2), True, TAU, 1.0)
    raise ValueError(f"problem: must be one of {', '.join(PROBLEMS)}, got {problem!r}")


def coefficients_and_profiles(problem: str, M: np.ndarray, wy: np.ndarray):
    """Reduced coefficients {name: (value, long_name)} and profiles {name: (array, long_name)}.

    M : (n_mom, N) cell averages of the moments; wy : (N,) cell widths
    (sum = 1, so the integral over the gap is also the channel mean).
    """
    integral = lambda f: float(wy @ f)  # noqa: E731
    if problem == "poiseuille":
        coeffs = {
            "G_P": (-2.0 * integral(M[U]), "reduced flow rate of Poiseuille flow"),
            "Q_P": (2.0 * integral(M[Q_X]), "reduced heat flow of Poiseuille flow"),
        }
        prof = {
            "velocity": (M[U], "x-velocity / (v0 X_P), X_P = (a/p) dp/dx"),
            "heat_flux": (M[Q_X], "x-heat flux / (p v0 X_P)"),
            "shear_stress": (M[P_XY], "shear stress P_xy / (p X_P)"),
        }
    elif problem == "thermal_creep":
        coeffs = {
            "G_T": (2.0 * integral(M[U]), "reduced flow rate of thermal creep"),
            "Q_T": (-2.0 * integral(M[Q_X]), "reduced heat flow of thermal creep"),
        }
        prof = {
            "velocity": (M[U], "x-velocity / (v0 X_T), X_T = (a/T) dT/dx"),
            "heat_flux": (M[Q_X], "x-heat flux / (p v0 X_T)"),
            "shear_stress": (M[P_XY], "shear stress P_xy / (p X_T)"),
        }
    elif problem == "couette":
        coeffs = {"shear_stress": (-integral(M[P_XY]), "reduced shear stress P_xy v0 / (p U)")}
        prof = {
            "velocity": (M[U], "x-velocity / U, walls at -U/2 and +U/2"),
            "heat_flux": (M[Q_X], "x-heat flux / (p U)"),
            "shear_stress": (-M[P_XY], "shear stress -P_xy v0 / (p U)"),
        }
    else:
        coeffs = {"heat_flux": (-integral(M[Q_Y]), "reduced heat flux q T / (p v0 dT)")}
        prof = {
            "density": (M[RHO], "density perturbation / (dT / T), channel mean zero"),
            "temperature": (M[TAU], "temperature perturbation / dT, walls at -1/2 and +1/2"),
            "heat_flux": (-M[Q_Y], "heat flux from the hot to the cold wall / (p v0 dT / T)"),
        }
    return coeffs, prof
