"""Non-equilibrium initial states of a space-homogeneous gas (reduced units).

Velocities are in units of sqrt(k T / m) at the equilibrium temperature T; every
state has number density 1, zero mean velocity and kinetic temperature 1, so
that it relaxes to the standard Maxwellian.

    equilibrium   standard Maxwellian (used for noise studies)
    anisotropic   Gaussian with axis temperatures T_x, T_y, T_z (mean 1)
    two_beams     two Gaussian beams along x: a fraction w moves at +(1 - w) s,
                  the rest at -w s (zero total momentum), both at the beam
                  temperature T_b = 1 - w (1 - w) s**2 / 3 (energy closes)
    bkw           the BKW distribution (Bobylev 1975; Krook & Wu 1976), eq. in
                  :mod:`knudsweep.solver.relaxation.bkw`, at K = K(t_start)

Particle states are sampled by :func:`_sample_initial` (numba; uses the
replica's generator state) and then shifted and scaled so that the sample
mean velocity is exactly 0 and the sample temperature(s) exactly the target:
this removes the O(1/sqrt(N)) scatter of the conserved quantities.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from knudsweep.solver.relaxation.bkw import BKW_FIRST_TIME, bkw_k
from knudsweep.solver.relaxation.rng import normal, uniform

INITIAL_STATES = ("equilibrium", "anisotropic", "two_beams", "bkw")
KIND_CODE = {"equilibrium": 0, "anisotropic": 1, "two_beams": 2, "bkw": 3}


@dataclass(frozen=True)
class InitialState:
    """A checked initial state; ``params`` is the float vector the kernels take."""

    name: str
    params: tuple[float, ...]
    description: str

    @property
    def code(self) -> int:
        return KIND_CODE[self.name]


def make_initial_state(
    name: str,
    axis_temperature_ratios: tuple[float, float, float] = (1.8, 0.6, 0.6),
    beam_separation: float = 3.0,
    beam_fraction: float = 0.5,
    bkw_start_time: float = BKW_FIRST_TIME,
) -> InitialState:
    """Check the options of initial state ``name`` and return it.

    axis_temperature_ratios : three positive numbers, rescaled to mean 1.
    beam_separation : relative speed of the two beams in sqrt(kT/m), in
        (0, sqrt(3 / (w (1 - w)))) so the beam temperature stays positive.
    beam_fraction : w in (0, 1), share of molecules in the +x beam.
    bkw_start_time : BKW time t_start >= 6 ln(5/2) (positivity of the solution).
    """
    if name == "equilibrium":
        return InitialState(name, (0.0, 0.0, 0.0), "standard Maxwellian")
    if name == "anisotropic":
        ratios = np.asarray(axis_temperature_ratios, dtype=float)
        # the ratio test keeps the mean finite (1e308 would overflow it) and no axis frozen
        if (
            ratios.shape != (3,)
            or not np.all(np.isfinite(ratios))
            or np.any(ratios <= 0.0)
            or ratios.max() > 1.0e300
            or ratios.max() > 1.0e4 * ratios.min()
        ):
            raise ValueError(
                "axis_temperature_ratios: need three finite numbers > 0 whose largest is at most 1e4 times the smallest, "
                f"got {axis_temperature_ratios!r}"
            )
        ratios = ratios / ratios.mean()
        return InitialState(
            name,
            tuple(float(r) for r in ratios),
            "Gaussian with axis temperatures T_x, T_y, T_z = " + ", ".join(f"{r:.4g}" for r in ratios) + " T",
        )
    if name == "two_beams":
        w = float(beam_fraction)
        if not (0.0 < w < 1.0):
            raise ValueError(f"beam_fraction: must lie in (0, 1), got {beam_fraction!r}")
        s_max = math.sqrt(3.0 / (w * (1.0 - w)))
        s = float(beam_separation)
        if not (0.0 < s < s_max):
            raise ValueError(
                f"beam_separation: must lie in (0, {s_max:.4g}) for beam_fraction={w}, got {beam_separation!r}"
            )
        t_beam = 1.0 - w * (1.0 - w) * s * s / 3.0
        return InitialState(
            name,
            (s, w, t_beam),
            f"two beams along x, separation {s:.4g} sqrt(kT/m), fraction {w:.4g}, beam temperature {t_beam:.4g} T",
        )
    if name == "bkw":
        t0 = float(bkw_start_time)
        if not (t0 >= BKW_FIRST_TIME - 1e-12 and math.isfinite(t0)):
            raise ValueError(
                f"bkw_start_time: must be finite and >= 6 ln(5/2) = {BKW_FIRST_TIME:.6f}, got {bkw_start_time!r}"
            )
        return InitialState(
            name,
            (t0, bkw_k(t0), 0.0),
            f"BKW distribution at BKW time {t0:.6g} (K = {bkw_k(t0):.6g})",
        )
    raise ValueError(f"initial_state: must be one of {', '.join(INITIAL_STATES)}, got {name!r}")


@njit(cache=True)
def _sample_initial(kind: int, params: np.ndarray, v: np.ndarray, rs: np.ndarray) -> None:
    """Fill v[N, 3] with a sample of initial state ``kind`` (generator state rs) and normalise it exactly."""
    n = v.shape[0]
    if kind == 2:
        s, w = params[0], params[1]
        sb = math.sqrt(params[2])
        n1 = int(round(w * n))
        for i in range(n):
            shift = (1.0 - w) * s if i < n1 else -w * s
            v[i, 0] = shift + sb * normal(rs)
            v[i, 1] = sb * normal(rs)
            v[i, 2] = sb * normal(rs)
    elif kind == 3:
        # BKW at K: mixture of a Maxwellian of variance K (weight (5K-3)/(2K))
        # and the density ~ v**2 exp(-v**2/(2K)) (weight 3(1-K)/(2K)), whose
        # v**2/K is chi-square with 5 degrees of freedom.
        k = params[1]
        w_gauss = (5.0 * k - 3.0) / (2.0 * k)
        sk = math.sqrt(k)
        for i in range(n):
            if uniform(rs) < w_gauss:
                for a in range(3):
                    v[i, a] = sk * normal(rs)
            else:
                chi2 = 0.0
                for _ in range(5):
                    z = normal(rs)
                    chi2 += z * z
                speed = sk * math.sqrt(chi2)
                # isotropic direction
                cz = 2.0 * uniform(rs) - 1.0
                phi = 2.0 * math.pi * uniform(rs)
                sz = math.sqrt(max(0.0, 1.0 - cz * cz))
                v[i, 0] = speed * sz * math.cos(phi)
                v[i, 1] = speed * sz * math.sin(phi)
                v[i, 2] = speed * cz
    else:
        for i in range(n):
            for a in range(3):
                v[i, a] = normal(rs)
    # exact zero momentum
    for a in range(3):
        m = 0.0
        for i in range(n):
            m += v[i, a]
        m /= n
        for i in range(n):
            v[i, a] -= m
    if kind == 1:
        # exact axis temperatures
        for a in range(3):
            s2 = 0.0
            for i in range(n):
                s2 += v[i, a] * v[i, a]
            scale = math.sqrt(params[a] * n / s2)
            for i in range(n):
                v[i, a] *= scale
    else:
        s2 = 0.0
        for i in range(n):
            for a in range(3):
                s2 += v[i, a] * v[i, a]
        scale = math.sqrt(3.0 * n / s2)
        for i in range(n):
            for a in range(3):
                v[i, a] *= scale


def initial_density_on_grid(state: InitialState, vx: np.ndarray, vy: np.ndarray, vz: np.ndarray) -> np.ndarray:
    """Continuous initial density f(v) at grid points (numpy arrays of equal shape)."""
    v2 = vx * vx + vy * vy + vz * vz
    if state.name == "equilibrium":
        return np.exp(-0.5 * v2) / (2.0 * math.pi) ** 1.5
    if state.name == "anisotropic":
        tx, ty, tz = state.params
        return np.exp(-0.5 * (vx**2 / tx + vy**2 / ty + vz**2 / tz)) / (
            (2.0 * math.pi) ** 1.5 * math.sqrt(tx * ty * tz)
        )
    if state.name == "two_beams":
        s, w, tb = state.params
        norm = 1.0 / (2.0 * math.pi * tb) ** 1.5
        perp = vy**2 + vz**2
        b1 = np.exp(-0.5 * ((vx - (1.0 - w) * s) ** 2 + perp) / tb)
        b2 = np.exp(-0.5 * ((vx + w * s) ** 2 + perp) / tb)
        return norm * (w * b1 + (1.0 - w) * b2)
    if state.name == "bkw":
        from knudsweep.solver.relaxation.bkw import bkw_density

        return bkw_density(np.sqrt(v2), state.params[0])
    raise ValueError(f"initial_state: unknown {state.name!r}")


def grid_half_width(state: InitialState) -> float:
    """Half-width of a velocity grid that holds the state and the final Maxwellian.

    The tail criterion keeps density below ~1e-12 of the peak at the grid edge
    for a Gaussian (exp(-x**2/2) = 1e-12 at x = 7.4); common practice, no source.
    """
    base = 7.0
    if state.name == "anisotropic":
        return max(base, 7.0 * math.sqrt(max(state.params)))
    if state.name == "two_beams":
        s, w, tb = state.params
        return max(base, max(1.0 - w, w) * s + 7.0 * math.sqrt(tb))
    return base
